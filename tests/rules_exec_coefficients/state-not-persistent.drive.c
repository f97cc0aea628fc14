/*
 * Drives fixtures/rules/state-not-persistent/{fail,pass}/coldroom.c (found with -I the
 * fixture folder): the probe jumps from the 4 C set point to 10 C and stays there; prints
 * the first and second call's output, and the output after 100 calls.
 */
#include <stdio.h>

#include "coldroom.c"

int main(void)
{
    float first = coldroom_probe_smooth(10.0f);
    float second = coldroom_probe_smooth(10.0f);
    float last = second;
    for (int i = 2; i < 100; i++) {
        last = coldroom_probe_smooth(10.0f);
    }
    printf("first=%.9g\n", (double)first);
    printf("second=%.9g\n", (double)second);
    printf("after_100=%.9g\n", (double)last);
    return 0;
}
