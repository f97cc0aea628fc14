/*
 * Drives fixtures/forms/rate_adaptive.c: gains computed from a time step given at run time.
 *
 * Each case runs the same update with two time steps (step and step_alt); the gain must
 * differ between them, which is what makes the coefficient adaptive rather than constant.
 *
 * Expected by hand (alpha = dt / (tau + dt)):
 *   proofer_rh_sample     proofer_rh        dt 0.1 s: 0.1 / 4.1 = 0.0243902...
 *                                           dt 0.4 s: 0.4 / 4.4 = 0.0909090...  dc 1  float
 *   proofer_dough_sample  proofer_dough_mm  dt 100 ms: 100 / 30100 = 0.0033222...
 *                                           dt 400 ms: 400 / 30400 = 0.0131578...  dc 1  float
 */
#include "../../fixtures/forms/rate_adaptive.c"

#include "drive.h"

static void rh_reset(double y0)
{
    proofer_rh = (float)y0;
}

static double rh_step(double u)
{
    return proofer_rh_sample((float)u, 0.1f);
}

static double rh_step_slow_loop(double u)
{
    return proofer_rh_sample((float)u, 0.4f);
}

static void dough_reset(double y0)
{
    proofer_dough_mm = (float)y0;
}

static double dough_step(double u)
{
    proofer_dough_sample((float)u, 100u);
    return proofer_dough_mm;
}

static double dough_step_slow_loop(double u)
{
    proofer_dough_sample((float)u, 400u);
    return proofer_dough_mm;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "proofer_rh_sample", .state = "proofer_rh", .integer = 0, .scale = 1000.0,
     .reset = rh_reset, .step = rh_step, .signed_range = 1, .step_alt = rh_step_slow_loop},
    {.function = "proofer_dough_sample", .state = "proofer_dough_mm", .integer = 0,
     .scale = 1000.0, .reset = dough_reset, .step = dough_step, .signed_range = 1,
     .step_alt = dough_step_slow_loop},
    {0},
};
