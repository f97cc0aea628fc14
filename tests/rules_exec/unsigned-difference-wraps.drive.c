/*
 * Drives the fixtures of `unsigned-difference-wraps`: each smoother at rest at the top of
 * its input range is handed the bottom of it, once.
 *
 * tests/rules_exec.rs compiles this file twice, with `-I` naming the failing fixture or
 * its passing twin and TWIN_FAIL or TWIN_PASS defined to pick the matching 16-bit
 * transcription below. It prints tab-separated lines:
 *   line  FILE  TEXT                          the update line this driver stands for
 *   case  NAME  HOW  STATE  INPUT  AFTER      one update from STATE with INPUT
 * HOW is `native` (the fixture's own function, compiled for this machine, whose int is
 * 32 bits) or `int16` (a transcription of the fixture's line with 16-bit int rules).
 */
#include <stdint.h>
#include <stdio.h>

#include "hub_torque.c"
#include "kiln_thermo.c"

#define KILN_TOP 16777215u /* a 24-bit converter */
#define HUB_TOP 4095u      /* a 12-bit converter */

#if defined(TWIN_FAIL)
#define KILN_LINE "kiln_thermo_avg += (raw - kiln_thermo_avg) >> 3;"
#define HUB_LINE "hub_torque_avg += (adc - hub_torque_avg) >> 3;"
/*
 * The line under a 16-bit int. Both operands are uint16_t, exactly as wide as int, so the
 * promotions leave them unsigned int (C11 6.3.1.1) and every intermediate is reduced
 * modulo 2^16 (C11 6.2.5). This machine's int is 32 bits, so each intermediate is cast to
 * uint16_t to reduce it as the 16-bit target would.
 */
static uint16_t hub_torque_int16(uint16_t avg, uint16_t adc)
{
    uint16_t difference = (uint16_t)(adc - avg);
    uint16_t step = (uint16_t)(difference >> 3);
    return (uint16_t)(avg + step);
}
#elif defined(TWIN_PASS)
#define KILN_LINE "kiln_thermo_avg += ((int32_t)raw - (int32_t)kiln_thermo_avg) >> 3;"
#define HUB_LINE "hub_torque_avg += ((int32_t)adc - (int32_t)hub_torque_avg) >> 3;"
/*
 * The line under a 16-bit int. int32_t is then `long`, 32 bits as here, so the difference
 * and the shift are the same 32-bit signed operations; the sum of the state (unsigned int,
 * 16 bits) and the 32-bit step is formed in long, which holds every unsigned int value
 * (C11 6.3.1.8), and converted to uint16_t by the assignment.
 */
static uint16_t hub_torque_int16(uint16_t avg, uint16_t adc)
{
    int32_t difference = (int32_t)adc - (int32_t)avg;
    int32_t step = difference >> 3;
    int32_t sum = (int32_t)avg + step;
    return (uint16_t)sum;
}
#else
#error "define TWIN_FAIL or TWIN_PASS"
#endif

int main(void)
{
    printf("line\tkiln_thermo.c\t%s\n", KILN_LINE);
    printf("line\thub_torque.c\t%s\n", HUB_LINE);

    /* uint32_t is unsigned int here and unsigned long on a 16-bit target: 32 bits either
     * way and never promoted, so running the fixture here is what the target does. */
    kiln_thermo_avg = KILN_TOP;
    kiln_thermo_sample(0);
    printf("case\tkiln_thermo\tnative\t%lu\t0\t%lu\n", (unsigned long)KILN_TOP,
           (unsigned long)kiln_thermo_level());

    /* Here uint16_t promotes to a 32-bit signed int, so the fixture's line is correct. */
    hub_torque_avg = HUB_TOP;
    hub_torque_sample(0);
    printf("case\thub_torque\tnative\t%u\t0\t%u\n", HUB_TOP, (unsigned)hub_torque_level());

    printf("case\thub_torque\tint16\t%u\t0\t%u\n", HUB_TOP,
           (unsigned)hub_torque_int16((uint16_t)HUB_TOP, 0));
    return 0;
}
