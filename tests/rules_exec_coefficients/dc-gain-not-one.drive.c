/*
 * Drives fixtures/rules/dc-gain-not-one/{fail,pass}/manifold.c (found with -I the fixture
 * folder): holds the input at 300 kPa for 2000 samples from rest at 0 and prints where
 * the state came to rest, and that over the input (the DC gain measured at rest).
 */
#include <stdio.h>

#include "manifold.c"

int main(void)
{
    const float input_kpa = 300.0f;
    manifold_kpa = 0.0f;
    for (int i = 0; i < 2000; i++) {
        manifold_sample(input_kpa);
    }
    float before = manifold_kpa;
    manifold_sample(input_kpa);
    printf("rest=%.9g\n", (double)manifold_kpa);
    printf("settled=%d\n", manifold_kpa == before);
    printf("gain=%.9g\n", (double)manifold_kpa / input_kpa);
    return 0;
}
