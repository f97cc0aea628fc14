/*
 * Drives fixtures/forms/tide_water.c: y = (y / 8) * 7; y += u / 8, unsigned.
 *
 * Expected by hand:
 *   tide_water_sample  g_tide_water_counts  alpha 1/8  dc 1  stall (see below) / 0
 *     y' = 7 floor(y / 8) + floor(u / 8). From rest at 0, 4096 / 8 = 512.
 *     With q = floor(u / 8) and m = floor(y / 8), y = 7m + q is at rest when
 *     8m <= 7m + q <= 8m + 7, that is m in [q - 7, q]: rest points from 8q - 49 to 8q,
 *     seven apart, all at or below the input (u in [8q, 8q + 7]), none above it. A rise
 *     from rest stops at the first of them it meets, so the state can rest as far as
 *     8q + 7 - (8q - 49) = 56 counts below a rising input (u = 2111 from y = 2048 rests
 *     at 2055, by iterating the update). The driver's default search (rises up to
 *     4 / alpha + 8 = 40 counts) would find only 42 of those 56, so this case reaches
 *     to 1 / alpha^2 + 8 = 72 counts.
 */
#include "../../fixtures/forms/tide_water.c"

#include "drive.h"

static void water_reset(double y0) { g_tide_water_counts = (uint16_t)y0; }
static double water_step(double u)
{
    tide_water_sample((uint16_t)u);
    return g_tide_water_counts;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "tide_water_sample", .state = "g_tide_water_counts", .integer = 1,
     .scale = 4096, .reset = water_reset, .step = water_step, .signed_range = 0,
     .reach = 72},
    {0},
};
