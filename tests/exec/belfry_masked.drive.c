/*
 * Drives the folder fixtures/forms/belfry_masked: function bodies that start with a
 * statement-prefix macro (no semicolon), in a file whose board header is named by a
 * macro; the driver names it as the build does.
 *
 * Expected by hand:
 *   belfry_strike_sample  g_belfry_strike_counts  alpha 1/4    dc 1  stall 3 / 0
 *     y += (u - y) >> 2 inside the critical section's block: 4096 >> 2 = 1024;
 *     arithmetic shift, one-sided.
 *   belfry_swing_sample   swing                   alpha 0.25   dc 1  float
 *     the same critical section around a float update: 0.25f * 1000 = 250.
 *   belfry_chime_sample   g_belfry_chime_v        alpha 0.125  dc 1  float
 *     0.125f * 1000 = 125.
 */
#define BELFRY_BOARD_HEADER "belfry_board.h"
#include "../../fixtures/forms/belfry_masked/belfry_strike.c"

#include "drive.h"

static void strike_reset(double y0) { g_belfry_strike_counts = (int32_t)y0; }
static double strike_step(double u)
{
    belfry_strike_sample((int32_t)u);
    return g_belfry_strike_counts;
}
static void swing_reset(double y0) { swing = (float)y0; }
static double swing_step(double u) { belfry_swing_sample((float)u); return swing; }
static void chime_reset(double y0) { g_belfry_chime_v = (float)y0; }
static double chime_step(double u) { belfry_chime_sample((float)u); return g_belfry_chime_v; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "belfry_strike_sample", .state = "g_belfry_strike_counts", .integer = 1,
     .scale = 4096, .reset = strike_reset, .step = strike_step, .signed_range = 1,
     .file = "belfry_strike.c"},
    {.function = "belfry_swing_sample", .state = "swing", .integer = 0, .scale = 1000.0,
     .reset = swing_reset, .step = swing_step, .signed_range = 1, .file = "belfry_strike.c"},
    {.function = "belfry_chime_sample", .state = "g_belfry_chime_v", .integer = 0,
     .scale = 1000.0, .reset = chime_reset, .step = chime_step, .signed_range = 1,
     .file = "belfry_strike.c"},
    {0},
};
