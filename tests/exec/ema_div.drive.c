/*
 * Drives fixtures/forms/ema_div.c: y += (u - y) / N in int and float.
 *
 * Expected by hand (DOMAIN.md section 3: division truncates toward zero, so the state can
 * rest up to N - 1 counts away on either side):
 *   vent_air_temp_filter  air_temp            alpha 1/16   dc 1  stall 15 / 15
 *   vent_humidity_sample  g_vent_rh_permille  alpha 1/4    dc 1  stall 3 / 3
 *   vent_light_sample     vent_lux            alpha 1/32   dc 1  float
 */
#include "../../fixtures/forms/ema_div.c"

#include "drive.h"

static double air_last;

static void air_reset(double y0)
{
    air_last = vent_air_temp_filter((int16_t)y0, true);
}

static double air_step(double u)
{
    air_last = vent_air_temp_filter((int16_t)u, false);
    return air_last;
}

static void rh_reset(double y0)
{
    g_vent_rh_permille = (uint16_t)y0;
}

static double rh_step(double u)
{
    vent_humidity_sample((uint16_t)u);
    return g_vent_rh_permille;
}

static void lux_reset(double y0)
{
    vent_lux = (float)y0;
}

static double lux_step(double u)
{
    return vent_light_sample((float)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "vent_air_temp_filter", .state = "air_temp", .integer = 1, .scale = 4096,
     .reset = air_reset, .step = air_step, .signed_range = 1},
    {.function = "vent_humidity_sample", .state = "g_vent_rh_permille", .integer = 1,
     .scale = 1000, .reset = rh_reset, .step = rh_step, .signed_range = 0},
    {.function = "vent_light_sample", .state = "vent_lux", .integer = 0, .scale = 1000.0,
     .reset = lux_reset, .step = lux_step, .signed_range = 0},
    {0},
};
