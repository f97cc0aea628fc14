/*
 * Drives fixtures/forms/ema_weighted_int.c: y = (y * (N - 1) + u) / N and >> k.
 *
 * Expected by hand (DOMAIN.md section 3):
 *   hive_weight_sample   hive_weight_g      alpha 1/8   dc 1  stall 7 / 0
 *     unsigned, so the division is a floor: rests below a rising input, reaches a
 *     falling one.
 *   hive_brood_sample    hive_brood_cdeg    alpha 1/8   dc 1  stall 7 / 0
 *     (8y + (u - y)) >> 3 is y + ((u - y) >> 3): arithmetic shift, one-sided.
 *   hive_outside_sample  hive_outside_cdeg  alpha 1/16  dc 1  stall 15 / 15
 *     signed: a floor above zero (rests below rising inputs), a ceiling below zero
 *     (rests above falling inputs), so over the signed range both sides reach 15.
 */
#include "../../fixtures/forms/ema_weighted_int.c"

#include "drive.h"

static void weight_reset(double y0)
{
    hive_weight_g = (uint32_t)y0;
}

static double weight_step(double u)
{
    hive_weight_sample((uint32_t)u);
    return hive_weight_g;
}

static void brood_reset(double y0)
{
    hive_brood_cdeg = (int32_t)y0;
}

static double brood_step(double u)
{
    hive_brood_sample((int32_t)u);
    return hive_brood_cdeg;
}

static void outside_reset(double y0)
{
    hive_outside_cdeg = (int32_t)y0;
}

static double outside_step(double u)
{
    hive_outside_sample((int32_t)u);
    return hive_outside_cdeg;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "hive_weight_sample", .state = "hive_weight_g", .integer = 1, .scale = 40000,
     .reset = weight_reset, .step = weight_step, .signed_range = 0},
    {.function = "hive_brood_sample", .state = "hive_brood_cdeg", .integer = 1, .scale = 4096,
     .reset = brood_reset, .step = brood_step, .signed_range = 1},
    {.function = "hive_outside_sample", .state = "hive_outside_cdeg", .integer = 1,
     .scale = 4096, .reset = outside_reset, .step = outside_step, .signed_range = 1},
    {0},
};
