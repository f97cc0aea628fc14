/*
 * Drives fixtures/forms/scaled_inputs.c. Each step feeds the expression's inputs so that
 * the expression equals u (0.254 * tips = u needs tips = u / 0.254, and so on).
 *
 * Expected by hand (the input is the whole expression the update smooths):
 *   rain_bucket_sample  rain_mm           alpha 0.2    dc 1  float
 *   rain_temp_sample    rain_temp_c       alpha 0.25   dc 1  float
 *   rain_wind_sample    rain_wind_lpf.y   alpha 0.1    dc 1  float (instance of rain_lpf_step)
 *   rain_tip_rate_sample  rain_tip_rate   alpha 0.2    dc 1  float (input tips / (interval + 0.1))
 *   rain_rise_sample    rain_rise_rate    alpha 0.25   dc 1  float (input (level - last) / (interval + 0.1))
 * The rates are fed an interval of 0.4 s, so that the divisor is 0.5 (exact in float).
 */
#include "../../fixtures/forms/scaled_inputs.c"

#include "drive.h"

static void bucket_reset(double y0) { rain_mm = (float)y0; }
static double bucket_step(double u)
{
    /* 0.254 * tips = u, with tips an integer: the scale keeps u a multiple of 0.254. */
    rain_bucket_sample((int32_t)(u / 0.254 + 0.5));
    return rain_mm;
}
static void temp_reset(double y0) { rain_temp_c = (float)y0; }
static double temp_step(double u) { rain_temp_sample((float)u, (float)u); return rain_temp_c; }
static void wind_reset(double y0) { rain_wind_lpf.y = (float)y0; }
static double wind_step(double u) { rain_wind_sample((int32_t)(2.0 * u)); return rain_wind_lpf.y; }
static void tip_rate_reset(double y0) { rain_tip_rate = (float)y0; }
static double tip_rate_step(double u)
{
    rain_tip_rate_sample((float)(0.5 * u), 0.4f);
    return rain_tip_rate;
}
static void rise_reset(double y0) { rain_rise_rate = (float)y0; }
static double rise_step(double u)
{
    rain_rise_sample((float)(0.5 * u) + 10.0f, 10.0f, 0.4f);
    return rain_rise_rate;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "rain_bucket_sample", .state = "rain_mm", .integer = 0, .scale = 254.0,
     .reset = bucket_reset, .step = bucket_step, .signed_range = 1},
    {.function = "rain_temp_sample", .state = "rain_temp_c", .integer = 0, .scale = 1000.0,
     .reset = temp_reset, .step = temp_step, .signed_range = 1},
    {.function = "rain_wind_sample", .state = "rain_wind_lpf.y", .integer = 0, .scale = 1000.0,
     .reset = wind_reset, .step = wind_step, .signed_range = 1},
    {.function = "rain_tip_rate_sample", .state = "rain_tip_rate", .integer = 0,
     .scale = 1000.0, .reset = tip_rate_reset, .step = tip_rate_step, .signed_range = 1},
    {.function = "rain_rise_sample", .state = "rain_rise_rate", .integer = 0, .scale = 1000.0,
     .reset = rise_reset, .step = rise_step, .signed_range = 1},
    {0},
};
