/*
 * Drives fixtures/forms/rink_amps_q31.c: y += (int32_t)(((int64_t)A * (u - y)) >> 31).
 *
 * Expected by hand:
 *   rink_amps_sample  rink_amps_ma  alpha 214748364 / 2^31 = 0.09999999962747097
 *     dc 1  stall 10 / 0
 *     (int32_t)(0.1 * 2^31) truncates 214748364.8 to 214748364 (C11 6.3.1.4). From rest
 *     at 0, 4096 * 214748364 >> 31 = 409 (409.59... floored, within a count). A rise of
 *     d moves the state once d * 214748364 >= 2^31, d >= 11, so it rests up to 10 below a
 *     rising input; the shift of a negative product floors, so a fall moves it.
 */
#include "../../fixtures/forms/rink_amps_q31.c"

#include "drive.h"

static void amps_reset(double y0) { rink_amps_ma = (int32_t)y0; }
static double amps_step(double u) { rink_amps_sample((int32_t)u); return rink_amps_ma; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "rink_amps_sample", .state = "rink_amps_ma", .integer = 1, .scale = 4096,
     .reset = amps_reset, .step = amps_step, .signed_range = 1},
    {0},
};
