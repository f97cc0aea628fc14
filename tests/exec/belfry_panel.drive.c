/*
 * Drives the folder fixtures/forms/belfry_panel: a file the C grammar cannot take whole
 * (its board header is named by a macro, its functions carry the board's macros in
 * front of them), whose functions are still read.
 *
 * The build names the header; the driver does the same before it includes the file, and
 * the quoted name is found beside belfry.c (C11 6.10.2: a #include of a macro is replaced
 * first, then searched as written). The header defines the prefixes as nothing, as the
 * board's host build would.
 *
 * Expected by hand:
 *   belfry_pendulum_sample  belfry_period_err_us    alpha 0.05  dc 1  float
 *     y += 0.05 (u - y): 0.05f * 1000 = 50.
 *   belfry_hammer_sample    g_belfry_hammer_ma      alpha 1/4   dc 1  stall 3 / 0
 *     y += (u - y) >> 2 with the shift from the board header: 4096 >> 2 = 1024;
 *     arithmetic shift, one-sided.
 *   belfry_strike_isr       g_belfry_strike_counts  alpha 1/4   dc 1  stall 3 / 3
 *     (3y + u) / 4, signed division truncating toward zero, both sides of zero.
 *   belfry_tower_sample     g_belfry_tower_c        alpha 0.25  dc 1  float
 *     0.75 y + 0.25 u: 250.
 */
#define BELFRY_BOARD_HEADER "belfry_board.h"
#include "../../fixtures/forms/belfry_panel/belfry.c"

#include "drive.h"

static void pendulum_reset(double y0) { belfry_period_err_us = (float)y0; }
static double pendulum_step(double u)
{
    belfry_pendulum_sample((float)u);
    return belfry_period_err_us;
}
static void hammer_reset(double y0) { g_belfry_hammer_ma = (int32_t)y0; }
static double hammer_step(double u)
{
    belfry_hammer_sample((int32_t)u);
    return g_belfry_hammer_ma;
}
static void strike_reset(double y0) { g_belfry_strike_counts = (int32_t)y0; }
static double strike_step(double u)
{
    belfry_strike_isr((int32_t)u);
    return g_belfry_strike_counts;
}
static void tower_reset(double y0) { g_belfry_tower_c = (float)y0; }
static double tower_step(double u)
{
    belfry_tower_sample((float)u);
    return g_belfry_tower_c;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "belfry_pendulum_sample", .state = "belfry_period_err_us", .integer = 0,
     .scale = 1000.0, .reset = pendulum_reset, .step = pendulum_step, .signed_range = 1,
     .file = "belfry.c"},
    {.function = "belfry_hammer_sample", .state = "g_belfry_hammer_ma", .integer = 1,
     .scale = 4096, .reset = hammer_reset, .step = hammer_step, .signed_range = 1,
     .file = "belfry.c"},
    {.function = "belfry_strike_isr", .state = "g_belfry_strike_counts", .integer = 1,
     .scale = 4096, .reset = strike_reset, .step = strike_step, .signed_range = 1,
     .file = "belfry.c"},
    {.function = "belfry_tower_sample", .state = "g_belfry_tower_c", .integer = 0,
     .scale = 1000.0, .reset = tower_reset, .step = tower_step, .signed_range = 1,
     .file = "belfry.c"},
    {0},
};
