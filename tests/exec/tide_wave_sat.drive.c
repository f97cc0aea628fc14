/*
 * Drives fixtures/forms/tide_wave_sat.c: tmp = sat16(u - z1); tmp = z1 + ((tmp * K) >> 15);
 * z1 = tmp, with K = 3277 and a saturation helper of early returns; and the same with
 * K = 6554 and a helper that returns a local its branches set.
 *
 * Expected by hand:
 *   tide_wave_step  tide_wave_z1  alpha 3277 / 32768 = 0.100006103515625  dc 1  stall 9 / 0
 *     the saturation does not bite inside +-16384; from rest at 0,
 *     16384 * 3277 >> 15 = 1638 (1638.5 floored). A rise of d moves the state only once
 *     d * 3277 >= 32768, d >= 10, so it rests up to 9 below a rising input; the shift
 *     floors, so a falling input is reached.
 *   tide_flow_step  tide_flow_z1  alpha 6554 / 32768 = 0.20001220703125  dc 1  stall 4 / 0
 *     the helper sets a local in branches; 16384 * 6554 >> 15 = 3277; a rise of d moves
 *     the state once d * 6554 >= 32768, d >= 5.
 */
#include "../../fixtures/forms/tide_wave_sat.c"

#include "drive.h"

static void wave_reset(double y0) { tide_wave_z1 = (int16_t)y0; }
static double wave_step(double u) { return tide_wave_step((int16_t)u); }
static void flow_reset(double y0) { tide_flow_z1 = (int16_t)y0; }
static double flow_step(double u) { return tide_flow_step((int16_t)u); }

const struct drive_case DRIVE_CASES[] = {
    {.function = "tide_wave_step", .state = "tide_wave_z1", .integer = 1, .scale = 16384,
     .reset = wave_reset, .step = wave_step, .signed_range = 1},
    {.function = "tide_flow_step", .state = "tide_flow_z1", .integer = 1, .scale = 16384,
     .reset = flow_reset, .step = flow_step, .signed_range = 1},
    {0},
};
