/*
 * Drives fixtures/forms/ice_rink.c: integer weighted averages with any weight, a float
 * weighted sum scaled by a product, and Q31, Q15 and Q16 gains through 64-bit products.
 *
 * Expected by hand (scales chosen so that alpha * scale is a whole number of counts, or
 * within one count of it for the Q gains that are not exact fractions):
 *   rink_brine_sample    rink_brine_cdeg      alpha 1/11  dc 1  stall 10 / 10
 *     (10 y + u) / 11 with W a #define; from rest at 0, 4092 / 11 = 372. Signed division
 *     truncates toward zero: up to 10 below a rising input above zero, up to 10 above a
 *     falling one below zero.
 *   rink_surface_sample  g_rink_surface_cdeg  alpha 1/6   dc 1  stall 5 / 5
 *     W a static const of 6: 4092 / 6 = 682; the same truncation, up to W - 1 = 5.
 *   rink_slab_sample     g_rink_slab_cdeg     alpha 1/5   dc 1  stall 4 / 4
 *     W a field of a const configuration struct, 5: 4000 / 5 = 800.
 *   rink_hall_sample     rink_hall_c          alpha 0.01f = 0.0099999997764825821
 *     dc 1  float
 *     (99 y + u) * 0.01f: from rest at 0, 1000 * 0.01f, rounded to float, 10.
 *   rink_amps_sample     rink_amps_ma         alpha 214748364 / 2^31 = 0.0999999996
 *     dc 1  stall 10 / 0
 *     (int32_t)(0.1 * 2^31) truncates 214748364.8 to 214748364 (C11 6.3.1.4). From rest
 *     at 0, 4096 * 214748364 >> 31 = 409 (409.59... floored, within a count). A rise of
 *     d moves the state once d * 214748364 >= 2^31, d >= 11 (10 * 214748364 =
 *     2147483640 < 2147483648), so it rests up to 10 below a rising input; the shift of
 *     a negative product floors (GCC manual, arithmetic right shift), so a fall moves it.
 *   rink_suction_sample  g_rink_suction_pa    alpha 4096 / 32768 = 1/8  dc 1  stall 7 / 0
 *     4096 * 4096 >> 15 = 512; the product is (u - y) >> 3 exactly.
 *   rink_oil_sample      rink_oil_cdeg        alpha 13107 / 65536 = 0.1999969482421875
 *     dc 1  stall 5 / 0
 *     (int32_t)(0.2 * 65536) truncates 13107.2 to 13107. From rest at 0,
 *     16384 * 13107 >> 16 = 3276 (3276.75 floored). 5 * 13107 = 65535 < 65536, so it
 *     rests up to 5 below a rising input.
 */
#include "../../fixtures/forms/ice_rink.c"

#include "drive.h"

static void brine_reset(double y0) { rink_brine_cdeg = (int32_t)y0; }
static double brine_step(double u) { rink_brine_sample((int32_t)u); return rink_brine_cdeg; }
static void surface_reset(double y0) { g_rink_surface_cdeg = (int32_t)y0; }
static double surface_step(double u)
{
    rink_surface_sample((int32_t)u);
    return g_rink_surface_cdeg;
}
static void slab_reset(double y0) { g_rink_slab_cdeg = (int32_t)y0; }
static double slab_step(double u) { rink_slab_sample((int32_t)u); return g_rink_slab_cdeg; }
static void hall_reset(double y0) { rink_hall_c = (float)y0; }
static double hall_step(double u) { rink_hall_sample((float)u); return rink_hall_c; }
static void amps_reset(double y0) { rink_amps_ma = (int32_t)y0; }
static double amps_step(double u) { rink_amps_sample((int32_t)u); return rink_amps_ma; }
static void suction_reset(double y0) { g_rink_suction_pa = (int32_t)y0; }
static double suction_step(double u)
{
    rink_suction_sample((int32_t)u);
    return g_rink_suction_pa;
}
static void oil_reset(double y0) { rink_oil_cdeg = (int32_t)y0; }
static double oil_step(double u) { rink_oil_sample((int32_t)u); return rink_oil_cdeg; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "rink_brine_sample", .state = "rink_brine_cdeg", .integer = 1, .scale = 4092,
     .reset = brine_reset, .step = brine_step, .signed_range = 1},
    {.function = "rink_surface_sample", .state = "g_rink_surface_cdeg", .integer = 1,
     .scale = 4092, .reset = surface_reset, .step = surface_step, .signed_range = 1},
    {.function = "rink_slab_sample", .state = "g_rink_slab_cdeg", .integer = 1, .scale = 4000,
     .reset = slab_reset, .step = slab_step, .signed_range = 1},
    {.function = "rink_hall_sample", .state = "rink_hall_c", .integer = 0, .scale = 1000.0,
     .reset = hall_reset, .step = hall_step, .signed_range = 1},
    {.function = "rink_amps_sample", .state = "rink_amps_ma", .integer = 1, .scale = 4096,
     .reset = amps_reset, .step = amps_step, .signed_range = 1},
    {.function = "rink_suction_sample", .state = "g_rink_suction_pa", .integer = 1,
     .scale = 4096, .reset = suction_reset, .step = suction_step, .signed_range = 1},
    {.function = "rink_oil_sample", .state = "rink_oil_cdeg", .integer = 1, .scale = 16384,
     .reset = oil_reset, .step = oil_step, .signed_range = 1},
    {0},
};
