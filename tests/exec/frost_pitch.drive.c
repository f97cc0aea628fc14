/*
 * Drives fixtures/forms/frost_pitch.c: y += 0.1 (u - y); if (y > MAX) y = MAX.
 *
 * Expected by hand (the clamp at 4000 is above every value the driver feeds, 1000 at
 * most, so it never bites):
 *   frost_pitch_sample  g_frost_pitch  alpha 0.1  dc 1  float
 *     from rest at 0, 0.1f * 1000 = 100; listed once, for the update.
 */
#include "../../fixtures/forms/frost_pitch.c"

#include "drive.h"

static void pitch_reset(double y0) { g_frost_pitch = (float)y0; }
static double pitch_step(double u) { frost_pitch_sample((float)u); return g_frost_pitch; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "frost_pitch_sample", .state = "g_frost_pitch", .integer = 0,
     .scale = 1000.0, .reset = pitch_reset, .step = pitch_step, .signed_range = 1},
    {0},
};
