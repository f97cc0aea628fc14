/*
 * Drives fixtures/forms/moving_average.c: running sums over ring buffers.
 *
 * Each step returns the fixture's own output, the sum divided by the window. A step from
 * rest at zero comes out whole at update N (the ring then holds only the new input) and
 * not before, and a running sum carries no dead band. Expected by hand:
 *   cave_rh_sample       cave_rh_sum        window 8   dc 1  stall 0 / 0  (literal, one statement)
 *   cave_temp_sample     cave_temp_sum      window 16  dc 1  stall 0 / 0  (#define, split)
 *   cave_nh3_sample      cave_nh3_sum       window 4   dc 1  float        (literal, split)
 *   cave_draught_sample  cave_draught_sum   window 5   dc 1  float        (#define, one statement)
 */
#include "../../fixtures/forms/moving_average.c"

#include "drive.h"

static void rh_reset(double y0)
{
    for (unsigned i = 0; i < 8u; i++) {
        cave_rh_ring[i] = (int32_t)y0;
    }
    cave_rh_sum = 8 * (int32_t)y0;
    cave_rh_pos = 0;
}

static double rh_step(double u)
{
    return cave_rh_sample((int32_t)u);
}

static void temp_reset(double y0)
{
    for (unsigned i = 0; i < CAVE_TEMP_WINDOW; i++) {
        cave_temp_ring[i] = (int32_t)y0;
    }
    cave_temp_sum = CAVE_TEMP_WINDOW * (int32_t)y0;
    cave_temp_pos = 0;
}

static double temp_step(double u)
{
    return cave_temp_sample((int32_t)u);
}

static void nh3_reset(double y0)
{
    for (unsigned i = 0; i < 4u; i++) {
        cave_nh3_ring[i] = (float)y0;
    }
    cave_nh3_sum = 4.0f * (float)y0;
    cave_nh3_pos = 0;
}

static double nh3_step(double u)
{
    return cave_nh3_sample((float)u);
}

static void draught_reset(double y0)
{
    for (unsigned i = 0; i < CAVE_DRAUGHT_WINDOW; i++) {
        cave_draught_ring[i] = (float)y0;
    }
    cave_draught_sum = (float)CAVE_DRAUGHT_WINDOW * (float)y0;
    cave_draught_pos = 0;
}

static double draught_step(double u)
{
    return cave_draught_sample((float)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "cave_rh_sample", .state = "cave_rh_sum", .integer = 1, .scale = 4096,
     .reset = rh_reset, .step = rh_step, .signed_range = 1, .window = 1},
    {.function = "cave_temp_sample", .state = "cave_temp_sum", .integer = 1, .scale = 4096,
     .reset = temp_reset, .step = temp_step, .signed_range = 1, .window = 1},
    {.function = "cave_nh3_sample", .state = "cave_nh3_sum", .integer = 0, .scale = 1000.0,
     .reset = nh3_reset, .step = nh3_step, .signed_range = 1, .window = 1},
    {.function = "cave_draught_sample", .state = "cave_draught_sum", .integer = 0,
     .scale = 1000.0, .reset = draught_reset, .step = draught_step, .signed_range = 1,
     .window = 1},
    {0},
};
