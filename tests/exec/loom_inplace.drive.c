/*
 * Drives fixtures/forms/loom_inplace.c: prev *= pole; prev += (1 - pole) * u; u = prev,
 * over a block of four channels, with pole 0.875f.
 *
 * Expected by hand:
 *   loom_tension_run  loom_tension.prev[i]  alpha 0.125  dc 1  float
 *     from rest at 0, (1 - 0.875f) * 1000 = 125.
 */
#include "../../fixtures/forms/loom_inplace.c"

#include "drive.h"

static void tension_reset(double y0)
{
    for (int i = 0; i < LOOM_CHANNELS; i++) {
        loom_tension.prev[i] = (float)y0;
    }
}
static double tension_step(double u)
{
    float block[LOOM_CHANNELS];
    for (int i = 0; i < LOOM_CHANNELS; i++) {
        block[i] = (float)u;
    }
    loom_tension_run(block);
    return loom_tension.prev[2];
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "loom_tension_run", .state = "loom_tension.prev[i]", .integer = 0,
     .scale = 1000.0, .reset = tension_reset, .step = tension_step, .signed_range = 1},
    {0},
};
