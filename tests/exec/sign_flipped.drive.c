/*
 * Drives fixtures/forms/sign_flipped.c: y - (y - u) / N and relatives.
 *
 * Expected by hand:
 *   terra_humidity_sample  terra_rh_permille  alpha 1/8  dc 1  stall 7 / 7
 *     (truncation toward zero, both sides)
 *   terra_bowl_sample      g_terra_bowl       alpha 1/4  dc 1  stall 0 / 3
 *     y - floor((y - u) / 4) = y + ceil((u - y) / 4): reaches a rising input, rests up
 *     to 3 above a falling one; the mirror of y += (u - y) >> 2.
 *   terra_bask_sample      terra_bask_c       alpha 0.4  dc 1  float
 */
#include "../../fixtures/forms/sign_flipped.c"

#include "drive.h"

static void rh_reset(double y0)
{
    terra_rh_permille = (int32_t)y0;
}

static double rh_step(double u)
{
    terra_humidity_sample((int32_t)u);
    return terra_rh_permille;
}

static void bowl_reset(double y0)
{
    g_terra_bowl = (int32_t)y0;
}

static double bowl_step(double u)
{
    terra_bowl_sample((int32_t)u);
    return g_terra_bowl;
}

static void bask_reset(double y0)
{
    terra_bask_c = (float)y0;
}

static double bask_step(double u)
{
    terra_bask_sample((float)u);
    return terra_bask_c;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "terra_humidity_sample", .state = "terra_rh_permille", .integer = 1,
     .scale = 4096, .reset = rh_reset, .step = rh_step, .signed_range = 1},
    {.function = "terra_bowl_sample", .state = "g_terra_bowl", .integer = 1, .scale = 4096,
     .reset = bowl_reset, .step = bowl_step, .signed_range = 1},
    {.function = "terra_bask_sample", .state = "terra_bask_c", .integer = 0, .scale = 1000.0,
     .reset = bask_reset, .step = bask_step, .signed_range = 1},
    {0},
};
