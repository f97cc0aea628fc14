/*
 * Drives fixtures/forms/cascade.c: two smoothers in series in one function.
 *
 * Each stage is driven on its own: the second stage's step first puts the first stage at
 * the input, where the first stage's update leaves it, so the second stage sees a step of
 * its own. The float chain is driven whole as well, for the cascade's figures.
 *
 * Expected by hand (DOMAIN.md section 2; a step through two equal stages of pole p reaches
 * 1 - p^n (1 + n alpha / p) after n updates, and each stage adds p / alpha to the lag):
 *   yaw_vane_sample  yaw_vane_flutter_deg  alpha 0.2  dc 1  float
 *   yaw_vane_sample  yaw_vane_error_deg    alpha 0.2  dc 1  float
 *     chain of 2: 63 % at 10, 90 % at 17, 95 % at 21, 99 % at 30 updates; lag 2 * 4 = 8
 *   yaw_wind_sample  g_yaw_wind_fast_cms   alpha 1/4  dc 1  stall 3 / 0
 *   yaw_wind_sample  g_yaw_wind_cms        alpha 1/4  dc 1  stall 3 / 0
 */
#include "../../fixtures/forms/cascade.c"

#include "drive.h"

static void flutter_reset(double y0)
{
    yaw_vane_flutter_deg = (float)y0;
    yaw_vane_error_deg = (float)y0;
}

static double flutter_step(double u)
{
    (void)yaw_vane_sample((float)u);
    return yaw_vane_flutter_deg;
}

static void vane_reset(double y0)
{
    yaw_vane_flutter_deg = (float)y0;
    yaw_vane_error_deg = (float)y0;
}

static double vane_step(double u)
{
    yaw_vane_flutter_deg = (float)u;
    return yaw_vane_sample((float)u);
}

static double vane_chain_step(double u)
{
    return yaw_vane_sample((float)u);
}

static void wind_reset(double y0)
{
    g_yaw_wind_fast_cms = (int32_t)y0;
    g_yaw_wind_cms = (int32_t)y0;
}

static double wind_fast_step(double u)
{
    yaw_wind_sample((int32_t)u);
    return g_yaw_wind_fast_cms;
}

static double wind_step(double u)
{
    g_yaw_wind_fast_cms = (int32_t)u;
    yaw_wind_sample((int32_t)u);
    return g_yaw_wind_cms;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "yaw_vane_sample", .state = "yaw_vane_flutter_deg", .integer = 0,
     .scale = 1000.0, .reset = flutter_reset, .step = flutter_step, .signed_range = 1},
    {.function = "yaw_vane_sample", .state = "yaw_vane_error_deg", .integer = 0,
     .scale = 1000.0, .reset = vane_reset, .step = vane_step, .signed_range = 1,
     .chain_reset = vane_reset, .chain_step = vane_chain_step, .chain_stages = 2},
    {.function = "yaw_wind_sample", .state = "g_yaw_wind_fast_cms", .integer = 1,
     .scale = 4096, .reset = wind_reset, .step = wind_fast_step, .signed_range = 1},
    {.function = "yaw_wind_sample", .state = "g_yaw_wind_cms", .integer = 1, .scale = 4096,
     .reset = wind_reset, .step = wind_step, .signed_range = 1},
    {0},
};
