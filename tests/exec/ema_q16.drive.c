/*
 * Drives fixtures/forms/ema_q16.c: Q16 multiply-and-shift.
 *
 * Expected by hand:
 *   boat_heel_sample    boat_heel_cdeg    alpha 3276/65536 = 0.04998779296875
 *     ((int32_t)(0.05 * 65536) truncates 3276.8 to 3276, C11 6.3.1.4)
 *     dc 1  stall 20 / 0   (20 * 3276 < 65536 <= 21 * 3276; arithmetic shift)
 *   boat_paddle_sample  g_boat_speed_ckn  alpha 8192/65536 = 0.125
 *     dc 1  stall 7 / 0    (the blend is y + ((u - y) * 8192 >> 16))
 * The scale 16384 makes the first heel step exact: 16384 * 3276 >> 16 = 819.
 */
#include "../../fixtures/forms/ema_q16.c"

#include "drive.h"

static void heel_reset(double y0)
{
    boat_heel_cdeg = (int32_t)y0;
}

static double heel_step(double u)
{
    boat_heel_sample((int32_t)u);
    return boat_heel_cdeg;
}

static void speed_reset(double y0)
{
    g_boat_speed_ckn = (int32_t)y0;
}

static double speed_step(double u)
{
    boat_paddle_sample((int32_t)u);
    return g_boat_speed_ckn;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "boat_heel_sample", .state = "boat_heel_cdeg", .integer = 1, .scale = 16384,
     .reset = heel_reset, .step = heel_step, .signed_range = 1},
    {.function = "boat_paddle_sample", .state = "g_boat_speed_ckn", .integer = 1,
     .scale = 4096, .reset = speed_reset, .step = speed_step, .signed_range = 1},
    {0},
};
