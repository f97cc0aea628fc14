/*
 * Drives fixtures/forms/ema_q15.c: y += ((u - y) * K) >> 15.
 *
 * Expected by hand (DOMAIN.md section 3: the Q15 dead band is about 32768 / K counts; with
 * an arithmetic shift it is one-sided):
 *   sauna_humidity_sample  sauna_rh_q             alpha 1000/32768 = 0.030517578125
 *     dc 1  stall 32 / 0   (32 * 1000 < 32768 <= 33 * 1000)
 *   sauna_stone_sample     g_sauna_stone_decideg  alpha 4096/32768 = 0.125
 *     dc 1  stall 7 / 0
 * The scale 4096 makes the first step exact: 4096 * 1000 >> 15 = 125.
 */
#include "../../fixtures/forms/ema_q15.c"

#include "drive.h"

static void rh_reset(double y0)
{
    sauna_rh_q = (int32_t)y0;
}

static double rh_step(double u)
{
    sauna_humidity_sample((int32_t)u);
    return sauna_rh_q;
}

static void stone_reset(double y0)
{
    g_sauna_stone_decideg = (int16_t)y0;
}

static double stone_step(double u)
{
    sauna_stone_sample((int16_t)u);
    return g_sauna_stone_decideg;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "sauna_humidity_sample", .state = "sauna_rh_q", .integer = 1, .scale = 4096,
     .reset = rh_reset, .step = rh_step, .signed_range = 1},
    {.function = "sauna_stone_sample", .state = "g_sauna_stone_decideg", .integer = 1,
     .scale = 4096, .reset = stone_reset, .step = stone_step, .signed_range = 1},
    {0},
};
