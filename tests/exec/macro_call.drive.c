/*
 * Drives fixtures/forms/macro_call.c: smoothers that are macro expansions.
 *
 * The function is the caller that expands the macro and the state is the macro argument.
 * Expected by hand:
 *   tent_co2_sample        g_tent_co2_ppm         alpha 1/8   dc 1  stall 7 / 0
 *   tent_substrate_sample  g_tent_substrate_cdeg  alpha 1/4   dc 1  stall 3 / 0
 *   tent_fan_sample        tent_fan_rpm           alpha 0.15  dc 1  float
 */
#include "../../fixtures/forms/macro_call.c"

#include "drive.h"

static void co2_reset(double y0)
{
    g_tent_co2_ppm = (int32_t)y0;
}

static double co2_step(double u)
{
    tent_co2_sample((int32_t)u);
    return g_tent_co2_ppm;
}

static void substrate_reset(double y0)
{
    g_tent_substrate_cdeg = (int32_t)y0;
}

static double substrate_step(double u)
{
    tent_substrate_sample((int32_t)u);
    return g_tent_substrate_cdeg;
}

static void fan_reset(double y0)
{
    tent_fan_rpm = (float)y0;
}

static double fan_step(double u)
{
    return tent_fan_sample((float)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "tent_co2_sample", .state = "g_tent_co2_ppm", .integer = 1, .scale = 4096,
     .reset = co2_reset, .step = co2_step, .signed_range = 1},
    {.function = "tent_substrate_sample", .state = "g_tent_substrate_cdeg", .integer = 1,
     .scale = 4096, .reset = substrate_reset, .step = substrate_step, .signed_range = 1},
    {.function = "tent_fan_sample", .state = "tent_fan_rpm", .integer = 0, .scale = 1000.0,
     .reset = fan_reset, .step = fan_step, .signed_range = 1},
    {0},
};
