/*
 * Drives fixtures/forms/variants.c: coefficients chosen by #ifdef / #if defined(...).
 *
 * tests/exec_truth.rs builds this driver as it is (the #else branches); tests/variants.rs
 * builds it once more with -DFERMENTER_FAST_PH. Expected by hand:
 *   without the option:
 *     ferm_ph_sample    ferm_ph             alpha 0.0625  dc 1  float
 *     ferm_temp_sample  g_ferm_vessel_cdeg  alpha 1/16    dc 1  stall 15 / 0
 *     ferm_gravity_sample ferm_gravity_sum  window 16     dc 1  float
 *   with -DFERMENTER_FAST_PH:
 *     ferm_ph_sample    ferm_ph             alpha 0.25    dc 1  float
 *     ferm_temp_sample  g_ferm_vessel_cdeg  alpha 1/4     dc 1  stall 3 / 0
 *     ferm_gravity_sample ferm_gravity_sum  window 4      dc 1  float
 */
#include "../../fixtures/forms/variants.c"

#include "drive.h"

static void ph_reset(double y0)
{
    ferm_ph = (float)y0;
}

static double ph_step(double u)
{
    ferm_ph_sample((float)u);
    return ferm_ph;
}

static void temp_reset(double y0)
{
    g_ferm_vessel_cdeg = (int32_t)y0;
}

static double temp_step(double u)
{
    ferm_temp_sample((int32_t)u);
    return g_ferm_vessel_cdeg;
}

static void gravity_reset(double y0)
{
    for (unsigned i = 0; i < FERM_GRAVITY_WINDOW; i++) {
        ferm_gravity_ring[i] = (float)y0;
    }
    ferm_gravity_sum = FERM_GRAVITY_WINDOW * (float)y0;
    ferm_gravity_at = 0;
}

static double gravity_step(double u)
{
    return ferm_gravity_sample((float)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "ferm_ph_sample", .state = "ferm_ph", .integer = 0, .scale = 1000.0,
     .reset = ph_reset, .step = ph_step, .signed_range = 1},
    {.function = "ferm_temp_sample", .state = "g_ferm_vessel_cdeg", .integer = 1,
     .scale = 4096, .reset = temp_reset, .step = temp_step, .signed_range = 1},
    {.function = "ferm_gravity_sample", .state = "ferm_gravity_sum", .integer = 0,
     .scale = 1000.0, .reset = gravity_reset, .step = gravity_step, .signed_range = 1,
     .window = 1},
    {0},
};
