/*
 * Drives fixtures/rules/coefficient-out-of-range/{fail,pass}/vent.c (found with -I the
 * fixture folder): a step from rest at 0 % to 100 % open, printing the first eight
 * outputs as step1 .. step8.
 */
#include <stdio.h>

#include "vent.c"

int main(void)
{
    vent_open_pct = 0.0f;
    for (int i = 1; i <= 8; i++) {
        vent_feedback_sample(100.0f);
        printf("step%d=%.9g\n", i, (double)vent_open_pct);
    }
    return 0;
}
