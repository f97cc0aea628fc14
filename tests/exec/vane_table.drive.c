/*
 * Drives fixtures/forms/vane_table.c: gains read from const tables.
 *
 * Expected by hand:
 *   vane_sample     vane_dir_deg   alpha 0.125  float  vane_gain[VANE_BREEZE] = 0.125f
 *   cup_sample      cup_gust[cup]  alpha 0.25   float  every entry of cup_gain is 0.25f
 *   cup_raw_sample  cup_raw[1]     alpha 1/8    integer, (u - y) >> 3: 4096 >> 3 = 512;
 *     the arithmetic shift floors, so it rests up to 7 below a rising input, 0 above a
 *     falling one.
 */
#include "../../fixtures/forms/vane_table.c"

#include "drive.h"

static void dir_reset(double y0) { vane_dir_deg = (float)y0; }
static double dir_step(double u)
{
    vane_sample((float)u);
    return vane_dir_deg;
}
static void gust_reset(double y0) { cup_gust[2] = (float)y0; }
static double gust_step(double u)
{
    cup_sample(2, (float)u);
    return cup_gust[2];
}
static void raw_reset(double y0) { cup_raw[1] = (int32_t)y0; }
static double raw_step(double u)
{
    cup_raw_sample((int32_t)u);
    return cup_raw[1];
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "vane_sample", .state = "vane_dir_deg", .integer = 0, .scale = 1000.0,
     .reset = dir_reset, .step = dir_step, .signed_range = 1},
    {.function = "cup_sample", .state = "cup_gust[cup]", .integer = 0, .scale = 1000.0,
     .reset = gust_reset, .step = gust_step, .signed_range = 1},
    {.function = "cup_raw_sample", .state = "cup_raw[1]", .integer = 1, .scale = 4096,
     .reset = raw_reset, .step = raw_step, .signed_range = 1},
    {0},
};
