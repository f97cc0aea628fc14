/*
 * Drives fixtures/forms/split_trunc.c: terms truncated one by one versus the sum divided
 * once.
 *
 * Expected by hand (unsigned operands, so every division is a floor):
 *   compost_core_sample      compost_core        alpha 1/8  dc 1  stall 14 / 0
 *     y rests where y - floor(7y/8) = ceil(y/8) equals floor(u/8): y in [8m - 7, 8m] for
 *     u in [8m, 8m + 7], so up to 14 counts below the input, and never above it.
 *   compost_moisture_sample  g_compost_moisture  alpha 1/8  dc 1  stall 7 / 0
 *     floor((7y + u) / 8) = y + floor((u - y) / 8): rests up to 7 below, reaches a
 *     falling input.
 */
#include "../../fixtures/forms/split_trunc.c"

#include "drive.h"

static void core_reset(double y0)
{
    compost_core = (uint16_t)y0;
}

static double core_step(double u)
{
    compost_core_sample((uint16_t)u);
    return compost_core;
}

static void moisture_reset(double y0)
{
    g_compost_moisture = (uint16_t)y0;
}

static double moisture_step(double u)
{
    compost_moisture_sample((uint16_t)u);
    return g_compost_moisture;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "compost_core_sample", .state = "compost_core", .integer = 1, .scale = 4096,
     .reset = core_reset, .step = core_step, .signed_range = 0},
    {.function = "compost_moisture_sample", .state = "g_compost_moisture", .integer = 1,
     .scale = 4096, .reset = moisture_reset, .step = moisture_step, .signed_range = 0},
    {0},
};
