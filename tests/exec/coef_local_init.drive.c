/*
 * Drives fixtures/forms/coef_local_init.c: a gain worked out in an init function through a
 * local (`float rc = ...;`) set once and never written again.
 *
 * Expected by hand: rc = 1 / (2 pi 4) = 0.0397887 s, alpha = 0.01 / (0.0397887 + 0.01)
 *   = 0.2008...  dc 1  float, at the 100 Hz the fixture's DRYER_DT_S gives.
 */
#include "../../fixtures/forms/coef_local_init.c"

#include "drive.h"

static void plenum_reset(double y0)
{
    dryer_setup();
    dryer_plenum.y = (float)y0;
}

static double plenum_step(double u)
{
    dryer_plenum_sample((float)u);
    return dryer_plenum.y;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "dryer_plenum_sample", .state = "dryer_plenum.y", .integer = 0,
     .scale = 1000.0, .reset = plenum_reset, .step = plenum_step, .signed_range = 1,
     .rate_hz = 100.0},
    {0},
};
