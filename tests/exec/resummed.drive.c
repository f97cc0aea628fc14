/*
 * Drives fixtures/forms/resummed.c: moving averages that sum their ring afresh each call.
 *
 * Expected by hand: a step from rest at zero comes out whole at update N and not before.
 *   aq_ph_sample    aq_ph_buf    window 6  dc 1  stall 0 / 0 (the sum is exact)
 *   aq_flow_sample  aq_flow_buf  window 4  dc 1  float
 */
#include "../../fixtures/forms/resummed.c"

#include "drive.h"

static void reset(double y0) { aq_reset((float)y0); }
static double ph_step(double u) { return aq_ph_sample((int16_t)u); }
static double flow_step(double u) { return aq_flow_sample((float)u); }

const struct drive_case DRIVE_CASES[] = {
    {.function = "aq_ph_sample", .state = "aq_ph_buf", .integer = 1, .scale = 3000,
     .reset = reset, .step = ph_step, .signed_range = 1, .window = 1},
    {.function = "aq_flow_sample", .state = "aq_flow_buf", .integer = 0, .scale = 1000.0,
     .reset = reset, .step = flow_step, .signed_range = 1, .window = 1},
    {0},
};
