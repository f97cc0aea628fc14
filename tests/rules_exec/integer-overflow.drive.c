/*
 * Drives the fixtures of `integer-overflow`: each smoother at rest at the top of its
 * input range is handed the top again, once, and every intermediate is watched.
 *
 * tests/rules_exec.rs compiles this file twice, with `-I` naming the failing fixture or
 * its passing twin and TWIN_FAIL or TWIN_PASS defined to pick the matching 16-bit
 * transcription below, and with -fsanitize=signed-integer-overflow -fno-sanitize-recover,
 * so a signed overflow in the fixture's own code stops the run with the compiler's report.
 * It prints tab-separated lines:
 *   line  FILE  TEXT                    the update line this driver stands for
 *   case  NAME  HOW  STATE  INPUT  AFTER  WIDE
 * HOW is `native` (the fixture's own function, compiled for this machine, whose int is 32
 * bits) or `int16` (a transcription of the fixture's line with 16-bit int rules). WIDE is
 * the first intermediate, computed in 64 bits, that its C type cannot hold, or `-`.
 * The failing build also prints `wide  hive_weight  VALUE`, the product of its line
 * formed in 64 bits, before the run the sanitizer stops.
 */
#include <stdint.h>
#include <stdio.h>

#include "hive_weight.c"
#include "hub_current.c"

#define HUB_TOP 4095       /* a 12-bit converter */
#define HIVE_TOP 16777215  /* a 24-bit load-cell converter */

/* Records the first intermediate that does not fit [lo, hi]. */
static long long first_wide;
static int overflowed;
static long long watch(long long exact, long long lo, long long hi)
{
    if (!overflowed && (exact < lo || exact > hi)) {
        overflowed = 1;
        first_wide = exact;
    }
    return exact;
}

#if defined(TWIN_FAIL)
#define HUB_LINE "hub_current_avg = (hub_current_avg * 15 + adc) / 16;"
#define HIVE_LINE "hive_weight_avg = (hive_weight_avg * 255 + cell) >> 8;"
/*
 * The line under a 16-bit int. int16_t promotes to the 16-bit int (C11 6.3.1.1), so the
 * product and the sum are 16-bit signed operations. This machine's int is 32 bits, so
 * each intermediate is computed exactly in 64 bits, watched against the 16-bit range,
 * and cast to int16_t to give what a wrapping 16-bit machine gives (the overflow itself is
 * undefined behaviour, C11 6.5p5; the cast is GCC's modular conversion).
 */
static int16_t hub_current_int16(int16_t avg, int16_t adc)
{
    int16_t product = (int16_t)watch((long long)avg * 15, INT16_MIN, INT16_MAX);
    int16_t sum = (int16_t)watch((long long)product + adc, INT16_MIN, INT16_MAX);
    return (int16_t)(sum / 16);
}
#elif defined(TWIN_PASS)
#define HUB_LINE "hub_current_avg = (int16_t)(((int32_t)hub_current_avg * 15 + adc) / 16);"
#define HIVE_LINE "hive_weight_avg = (int32_t)(((int64_t)hive_weight_avg * 255 + cell) >> 8);"
/*
 * The line under a 16-bit int. int32_t is then `long`: the product, the sum (adc is
 * promoted to int and converted to long, C11 6.3.1.8) and the quotient are 32-bit signed
 * operations, computed exactly in 64 bits here and watched against the 32-bit range.
 */
static int16_t hub_current_int16(int16_t avg, int16_t adc)
{
    int32_t product = (int32_t)watch((long long)avg * 15, INT32_MIN, INT32_MAX);
    int32_t sum = (int32_t)watch((long long)product + adc, INT32_MIN, INT32_MAX);
    return (int16_t)(sum / 16);
}
#else
#error "define TWIN_FAIL or TWIN_PASS"
#endif

static void print_case(const char *name, const char *how, long long state, long long input,
                       long long after)
{
    if (overflowed) {
        printf("case\t%s\t%s\t%lld\t%lld\t%lld\t%lld\n", name, how, state, input, after,
               first_wide);
    } else {
        printf("case\t%s\t%s\t%lld\t%lld\t%lld\t-\n", name, how, state, input, after);
    }
    overflowed = 0;
    fflush(stdout);
}

int main(void)
{
    printf("line\thub_current.c\t%s\n", HUB_LINE);
    printf("line\thive_weight.c\t%s\n", HIVE_LINE);

    print_case("hub_current", "int16", HUB_TOP, HUB_TOP,
               hub_current_int16(HUB_TOP, HUB_TOP));

    /* Here int16_t promotes to a 32-bit int: the fixture's own line does not overflow. */
    hub_current_avg = HUB_TOP;
    hub_current_sample(HUB_TOP);
    print_case("hub_current", "native", HUB_TOP, HUB_TOP, hub_current_level());

#if defined(TWIN_FAIL)
    /* The failing line's product `hive_weight_avg * 255`, formed in 64 bits: what the
     * 32-bit product should have been. */
    watch((long long)HIVE_TOP * 255, INT32_MIN, INT32_MAX);
    printf("wide\thive_weight\t%lld\n", overflowed ? first_wide : 0);
    overflowed = 0;
    fflush(stdout);
#endif
    /* int32_t is 32 bits here and on a 16-bit target alike, so running the fixture here is
     * what the target does; a signed overflow in it stops the run (the sanitizer). */
    hive_weight_avg = HIVE_TOP;
    hive_weight_sample(HIVE_TOP);
    print_case("hive_weight", "native", HIVE_TOP, HIVE_TOP, hive_weight_level());
    return 0;
}
