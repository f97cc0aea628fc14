/*
 * Drives fixtures/forms/coef_consts.c: coefficients through #define, const, enum, cast.
 *
 * Expected by hand:
 *   incu_air_sample       incu_air_c        alpha 20/(20+180) = 0.1  dc 1  float
 *   incu_turner_sample    incu_turn_ma      alpha 1/5 = 0.2          dc 1  float
 *   incu_humidity_sample  incu_rh_permille  alpha 1/8                dc 1  stall 7 / 7
 *     (static const divisor 1 << 3; truncating division, both sides)
 *   incu_egg_sample       incu_egg_cdeg     alpha 1/8                dc 1  stall 7 / 0
 *     (enum shift 2 + 1 = 3)
 *   incu_fan_sample       incu_fan_rpm      alpha 16/256 = 1/16      dc 1  stall 15 / 0
 *     ((int32_t)(256 * 0.0625) = 16, then >> 8)
 *   incu_door_sample      incu_door_c       alpha 2/(9+1) = 0.2        dc 1  float
 *   incu_heater_sample    incu_heater_counts  alpha 24/256 = 0.09375   dc 1  stall 10 / 0
 *     ((int32_t)(256 * 2 * 3.14159 * 1.5 / 100 + 0.5) = (int32_t)24.63 = 24;
 *     10 * 24 < 256 <= 11 * 24)
 */
#include "../../fixtures/forms/coef_consts.c"

#include "drive.h"

static void air_reset(double y0)
{
    incu_air_c = (float)y0;
}

static double air_step(double u)
{
    incu_air_sample((float)u);
    return incu_air_c;
}

static void turn_reset(double y0)
{
    incu_turn_ma = (float)y0;
}

static double turn_step(double u)
{
    incu_turner_sample((float)u);
    return incu_turn_ma;
}

static void rh_reset(double y0)
{
    incu_rh_permille = (int32_t)y0;
}

static double rh_step(double u)
{
    incu_humidity_sample((int32_t)u);
    return incu_rh_permille;
}

static void egg_reset(double y0)
{
    incu_egg_cdeg = (int32_t)y0;
}

static double egg_step(double u)
{
    incu_egg_sample((int32_t)u);
    return incu_egg_cdeg;
}

static void fan_reset(double y0)
{
    incu_fan_rpm = (int32_t)y0;
}

static double fan_step(double u)
{
    incu_fan_sample((int32_t)u);
    return incu_fan_rpm;
}

static void door_reset(double y0)
{
    incu_door_c = (float)y0;
}

static double door_step(double u)
{
    incu_door_sample((float)u);
    return incu_door_c;
}

static void heater_reset(double y0)
{
    incu_heater_counts = (int32_t)y0;
}

static double heater_step(double u)
{
    incu_heater_sample((int32_t)u);
    return incu_heater_counts;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "incu_air_sample", .state = "incu_air_c", .integer = 0, .scale = 1000.0,
     .reset = air_reset, .step = air_step, .signed_range = 1},
    {.function = "incu_turner_sample", .state = "incu_turn_ma", .integer = 0, .scale = 1000.0,
     .reset = turn_reset, .step = turn_step, .signed_range = 1},
    {.function = "incu_humidity_sample", .state = "incu_rh_permille", .integer = 1,
     .scale = 4096, .reset = rh_reset, .step = rh_step, .signed_range = 1},
    {.function = "incu_egg_sample", .state = "incu_egg_cdeg", .integer = 1, .scale = 4096,
     .reset = egg_reset, .step = egg_step, .signed_range = 1},
    {.function = "incu_fan_sample", .state = "incu_fan_rpm", .integer = 1, .scale = 4096,
     .reset = fan_reset, .step = fan_step, .signed_range = 1},
    {.function = "incu_door_sample", .state = "incu_door_c", .integer = 0, .scale = 1000.0,
     .reset = door_reset, .step = door_step, .signed_range = 1},
    {.function = "incu_heater_sample", .state = "incu_heater_counts", .integer = 1,
     .scale = 4096, .reset = heater_reset, .step = heater_step, .signed_range = 1},
    {0},
};
