/*
 * Drives fixtures/forms/scaled_state.c: accumulators that carry extra bits.
 *
 * Expected by hand (DOMAIN.md section 3: a scaled state keeps the dead band under one
 * count of the output):
 *   solar_tank_sample  solar_tank_acc    alpha 1/16  dc 1  stall 0 / 0
 *     the update stops only when acc >> 4 equals the input, so the output rests on it.
 *   solar_flow_sample  g_solar_flow_sum  alpha 1/8   dc 1  stall 0 / 0
 *     the update stops only when acc / 8 equals the input, on both sides of zero.
 * The output is acc >> 4 (resp. acc / 8); the reset puts the accumulator at y0 * N.
 */
#include "../../fixtures/forms/scaled_state.c"

#include "drive.h"

static void tank_reset(double y0)
{
    solar_tank_acc = (int32_t)y0 * (1 << SOLAR_TANK_SHIFT);
}

static double tank_step(double u)
{
    return solar_tank_sample((int32_t)u);
}

static void flow_reset(double y0)
{
    g_solar_flow_sum = (int32_t)y0 * SOLAR_FLOW_N;
}

static double flow_step(double u)
{
    solar_flow_sample((int32_t)u);
    return g_solar_flow_pps;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "solar_tank_sample", .state = "solar_tank_acc", .integer = 1, .scale = 4096,
     .reset = tank_reset, .step = tank_step, .signed_range = 1},
    {.function = "solar_flow_sample", .state = "g_solar_flow_sum", .integer = 1,
     .scale = 4096, .reset = flow_reset, .step = flow_step, .signed_range = 1},
    {0},
};
