/*
 * Drives fixtures/forms/ema_rounded.c: a rounding offset before the truncation.
 *
 * Expected by hand, with d = u - y:
 *   cider_gravity_sample  cider_gravity    alpha 1/16  dc 1  stall 7 / 8
 *     floor((d + 8) / 16) is 0 for -8 <= d <= 7
 *   cider_bubble_sample   g_cider_bubbles  alpha 1000/32768  dc 1  stall 16 / 16
 *     floor((1000 d + 16384) / 32768) is 0 for -16 <= d <= 16
 *   cider_temp_sample     cider_temp_cdeg  alpha 1/16  dc 1  stall 7 / 23
 *     (d + 8) / 16 truncates toward zero, so it is 0 for -23 <= d <= 7
 * Scale 4096 keeps the first steps exact: (4096 + 8) >> 4 = 256 and
 * (4096 * 1000 + 16384) >> 15 = 125.
 */
#include "../../fixtures/forms/ema_rounded.c"

#include "drive.h"

static void gravity_reset(double y0)
{
    cider_gravity = (int32_t)y0;
}

static double gravity_step(double u)
{
    cider_gravity_sample((int32_t)u);
    return cider_gravity;
}

static void bubble_reset(double y0)
{
    g_cider_bubbles = (int32_t)y0;
}

static double bubble_step(double u)
{
    cider_bubble_sample((int32_t)u);
    return g_cider_bubbles;
}

static void temp_reset(double y0)
{
    cider_temp_cdeg = (int32_t)y0;
}

static double temp_step(double u)
{
    cider_temp_sample((int32_t)u);
    return cider_temp_cdeg;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "cider_gravity_sample", .state = "cider_gravity", .integer = 1,
     .scale = 4096, .reset = gravity_reset, .step = gravity_step, .signed_range = 1},
    {.function = "cider_bubble_sample", .state = "g_cider_bubbles", .integer = 1,
     .scale = 4096, .reset = bubble_reset, .step = bubble_step, .signed_range = 1},
    {.function = "cider_temp_sample", .state = "cider_temp_cdeg", .integer = 1,
     .scale = 4096, .reset = temp_reset, .step = temp_step, .signed_range = 1},
    {0},
};
