/*
 * Drives fixtures/forms/sonar_block.c.
 *
 * Expected by hand:
 *   sonar_envelope_block  y[i - 1]  alpha 1 - 14336/16384 = 0.125, input weight
 *     2 * 1024/16384 = 0.125 over (x[n] + x[n-1]) / 2: dc 1. From rest at 0 with both
 *     samples at 4096 (the input held since the sample before): (1024 * 8192) >> 14 = 512. The shift floors: rests up to 7 below a
 *     rising input, never above a falling one. A one-sample block runs the block's
 *     first-sample statement, which is the loop's update written with the carried state,
 *     so each step is exactly one update of the recursion.
 *   sonar_depth_sample  sonar_depth_cm  alpha 1 - 12288/16384 = 0.25, input weight
 *     sonar_depth_gain / 16384 = 0.25: 4096 * 4096 >> 14 = 1024; rests up to 3 below.
 */
#include "../../fixtures/forms/sonar_block.c"

#include "drive.h"

static void envelope_reset(double y0)
{
    sonar_state.y_last = (int16_t)y0;
    sonar_state.x_last = (uint16_t)y0;
}
static double envelope_step(double u)
{
    uint16_t x = (uint16_t)u;
    int16_t y;
    /* The recursion's input is the two-sample average (x[n] + x[n-1]) / 2; the step's
     * input is taken as held since the sample before, as the other cases' inputs are. */
    sonar_state.x_last = x;
    sonar_envelope_block(&x, &y, 1);
    return y;
}
static void depth_reset(double y0) { sonar_depth_cm = (int32_t)y0; }
static double depth_step(double u)
{
    sonar_depth_sample((int32_t)u);
    return sonar_depth_cm;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "sonar_envelope_block", .state = "y[i - 1]", .integer = 1, .scale = 4096,
     .reset = envelope_reset, .step = envelope_step, .signed_range = 0},
    {.function = "sonar_depth_sample", .state = "sonar_depth_cm", .integer = 1,
     .scale = 4096, .reset = depth_reset, .step = depth_step, .signed_range = 1},
    {0},
};
