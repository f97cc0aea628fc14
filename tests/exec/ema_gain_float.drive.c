/*
 * Drives fixtures/forms/ema_gain_float.c: y += a * (u - y) and y -= a * (y - u).
 *
 * Expected by hand (DOMAIN.md section 1: alpha is the gain on the error):
 *   kiln_thermocouple_sample  kiln_chamber_c  alpha 1/(50*0.4) = 0.05  dc 1  float
 *   kiln_door_sample          kiln_door_c     alpha 0.2                dc 1  float
 *   kiln_power_sample         kiln_power_w    alpha 0.125              dc 1  double
 * The kiln_ramp_tick set point ramp is a slew limiter, not a smoother, and has no case.
 */
#include "../../fixtures/forms/ema_gain_float.c"

#include "drive.h"

static void chamber_reset(double y0)
{
    kiln_chamber_c = (float)y0;
}

static double chamber_step(double u)
{
    kiln_thermocouple_sample((float)u);
    return kiln_chamber_c;
}

static void door_reset(double y0)
{
    kiln_door_c = (float)y0;
}

static double door_step(double u)
{
    kiln_door_sample((float)u);
    return kiln_door_temperature();
}

static void power_reset(double y0)
{
    kiln_power_w = y0;
}

static double power_step(double u)
{
    /* One volt times u amperes keeps the product exactly u. */
    return kiln_power_sample(1.0, u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "kiln_thermocouple_sample", .state = "kiln_chamber_c", .integer = 0,
     .scale = 1000.0, .reset = chamber_reset, .step = chamber_step, .signed_range = 1},
    {.function = "kiln_door_sample", .state = "kiln_door_c", .integer = 0, .scale = 1000.0,
     .reset = door_reset, .step = door_step, .signed_range = 1},
    {.function = "kiln_power_sample", .state = "kiln_power_w", .integer = 0, .scale = 1000.0,
     .reset = power_reset, .step = power_step, .signed_range = 1},
    {0},
};
