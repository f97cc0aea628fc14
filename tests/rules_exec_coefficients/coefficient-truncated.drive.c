/*
 * Drives fixtures/rules/coefficient-truncated/{fail,pass}: kiln.c and hub.c, found on the
 * include path the test gives (-I the fixture folder), so one driver runs both twins.
 *
 * Prints key=value lines:
 *   kiln_start, kiln_after_1000  the kiln state before and after 1000 ticks at 1200 C
 *   kiln_first_step              the first update from rest at 0 toward 1000, over 1000
 *   hub_first_step               the same for the hub current: the alpha C really applies
 */
#include <stdio.h>

#include "kiln.c"
#include "hub.c"

int main(void)
{
    kiln_temp_c = 20.0f;
    printf("kiln_start=%.9g\n", (double)kiln_temp_c);
    for (int i = 0; i < 1000; i++) {
        kiln_tick(1200.0f);
    }
    printf("kiln_after_1000=%.9g\n", (double)kiln_temp_c);

    kiln_temp_c = 0.0f;
    kiln_tick(1000.0f);
    printf("kiln_first_step=%.9g\n", (double)kiln_temp_c / 1000.0);

    hub_current_a = 0.0f;
    hub_adc_isr(1000.0f);
    printf("hub_first_step=%.9g\n", (double)hub_current_a / 1000.0);
    return 0;
}
