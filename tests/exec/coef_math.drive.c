/*
 * Drives fixtures/forms/coef_math.c: coefficients from exp, expf, M_PI and 2.0f*3.14159f.
 *
 * Expected by hand (DOMAIN.md section 1 formulas):
 *   smoke_chamber_sample  smoke_chamber_c  alpha 1 - exp(-2 pi 2 0.02) = 0.2222323...
 *     dc 1  double
 *   smoke_flue_sample     smoke_flue_c     alpha 1 - exp(-0.05 / 0.2) = 0.2211992...
 *     dc 1  float
 *   smoke_meat_sample     smoke_meat_c     alpha w / (1 + w), w = 2 * 3.14159 * 1 * 0.05,
 *     = 0.2390571...  dc 1  float
 *   smoke_fan_sample      smoke_fan_rpm    alpha 0.1 / (1 / (2 pi 0.5) + 0.1)
 *     = 0.2390572...  dc 1  float
 */
#include "../../fixtures/forms/coef_math.c"

#include "drive.h"

static void chamber_reset(double y0)
{
    smoke_chamber_c = y0;
}

static double chamber_step(double u)
{
    smoke_chamber_sample(u);
    return smoke_chamber_c;
}

static void flue_reset(double y0)
{
    smoke_flue_c = (float)y0;
}

static double flue_step(double u)
{
    smoke_flue_sample((float)u);
    return smoke_flue_c;
}

static void meat_reset(double y0)
{
    smoke_meat_c = (float)y0;
}

static double meat_step(double u)
{
    smoke_meat_sample((float)u);
    return smoke_meat_core();
}

static void fan_reset(double y0)
{
    smoke_fan_rpm = (float)y0;
}

static double fan_step(double u)
{
    smoke_fan_sample((float)u);
    return smoke_fan_rpm;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "smoke_chamber_sample", .state = "smoke_chamber_c", .integer = 0,
     .scale = 1000.0, .reset = chamber_reset, .step = chamber_step, .signed_range = 1},
    {.function = "smoke_flue_sample", .state = "smoke_flue_c", .integer = 0, .scale = 1000.0,
     .reset = flue_reset, .step = flue_step, .signed_range = 1},
    {.function = "smoke_meat_sample", .state = "smoke_meat_c", .integer = 0, .scale = 1000.0,
     .reset = meat_reset, .step = meat_step, .signed_range = 1},
    {.function = "smoke_fan_sample", .state = "smoke_fan_rpm", .integer = 0, .scale = 1000.0,
     .reset = fan_reset, .step = fan_step, .signed_range = 1},
    {0},
};
