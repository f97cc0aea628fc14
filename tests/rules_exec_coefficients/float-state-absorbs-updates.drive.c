/*
 * Drives fixtures/rules/float-state-absorbs-updates/{fail,pass}/hive.c (found with -I the
 * fixture folder), whose state is a float in the failing twin and a double in the passing
 * one. Prints:
 *   threshold  the smallest drop of the (float) input below 1.2e6 g that moves the state
 *              from rest at 1.2e6 g in one update, found by walking down the input's own
 *              float grid one value at a time
 *   after_50g  the state after 10000 updates with the input held 50 g below 1.2e6 g
 */
#include <math.h>
#include <stdio.h>

#include "hive.c"

int main(void)
{
    const float top = 1200000.0f;
    float u = top;
    for (int i = 0; i < 1000000; i++) {
        u = nextafterf(u, 0.0f);
        hive_mass_g = top;
        hive_scale_sample(u);
        if (hive_mass_g != top) {
            break;
        }
    }
    printf("threshold=%.9g\n", (double)top - (double)u);

    hive_mass_g = top;
    for (int i = 0; i < 10000; i++) {
        hive_scale_sample(top - 50.0f);
    }
    printf("after_50g=%.9g\n", (double)hive_mass_g);
    return 0;
}
