/*
 * Drives fixtures/forms/spread.c: updates spread over two or three statements.
 *
 * Expected by hand:
 *   cave_ammonia_sample   cave_ammonia        alpha 1/8   dc 1  stall 7 / 0
 *     (d = u - y; y += d >> 3)
 *   cave_temp_sample      g_cave.temp_c       alpha 0.25  dc 1  float
 *     (load into a local, update it, store it back)
 *   cave_humidity_sample  g_cave.rh_permille  alpha 1/4   dc 1  stall 3 / 3
 *     (err = u - y; step = err / 4; y += step)
 * The door counter is not a smoother and has no case.
 */
#include "../../fixtures/forms/spread.c"

#include "drive.h"

static void ammonia_reset(double y0)
{
    cave_ammonia = (int32_t)y0;
}

static double ammonia_step(double u)
{
    cave_ammonia_sample((int32_t)u);
    return cave_ammonia;
}

static void temp_reset(double y0)
{
    g_cave.temp_c = (float)y0;
}

static double temp_step(double u)
{
    cave_temp_sample((float)u);
    return g_cave.temp_c;
}

static void rh_reset(double y0)
{
    g_cave.rh_permille = (int32_t)y0;
}

static double rh_step(double u)
{
    cave_humidity_sample((int32_t)u);
    return g_cave.rh_permille;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "cave_ammonia_sample", .state = "cave_ammonia", .integer = 1, .scale = 4096,
     .reset = ammonia_reset, .step = ammonia_step, .signed_range = 1},
    {.function = "cave_temp_sample", .state = "g_cave.temp_c", .integer = 0, .scale = 1000.0,
     .reset = temp_reset, .step = temp_step, .signed_range = 1},
    {.function = "cave_humidity_sample", .state = "g_cave.rh_permille", .integer = 1,
     .scale = 4096, .reset = rh_reset, .step = rh_step, .signed_range = 1},
    {0},
};
