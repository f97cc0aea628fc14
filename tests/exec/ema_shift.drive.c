/*
 * Drives fixtures/forms/ema_shift.c: y += (u - y) >> k.
 *
 * Expected by hand (DOMAIN.md section 3: gcc shifts negative values arithmetically, so the
 * state rests up to 2^k - 1 counts below a rising input and reaches a falling one):
 *   hub_current_sample   hub_phase_current_ma  alpha 1/8   dc 1  stall 7 / 0
 *   hub_throttle_filter  throttle              alpha 1/4   dc 1  stall 3 / 0
 *   hub_speed_sample     g_hub_speed_rpm_x10   alpha 1/32  dc 1  stall 31 / 0
 */
#include "../../fixtures/forms/ema_shift.c"

#include "drive.h"

static void current_reset(double y0)
{
    hub_phase_current_ma = (int32_t)y0;
}

static double current_step(double u)
{
    hub_current_sample((int32_t)u);
    return hub_phase_current_ma;
}

static void throttle_reset(double y0)
{
    (void)hub_throttle_filter((uint16_t)y0, true);
}

static double throttle_step(double u)
{
    return hub_throttle_filter((uint16_t)u, false);
}

static void speed_reset(double y0)
{
    g_hub_speed_rpm_x10 = (int32_t)y0;
}

static double speed_step(double u)
{
    hub_speed_sample((int32_t)u);
    return g_hub_speed_rpm_x10;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "hub_current_sample", .state = "hub_phase_current_ma", .integer = 1,
     .scale = 4096, .reset = current_reset, .step = current_step, .signed_range = 1},
    {.function = "hub_throttle_filter", .state = "throttle", .integer = 1, .scale = 4096,
     .reset = throttle_reset, .step = throttle_step, .signed_range = 0},
    {.function = "hub_speed_sample", .state = "g_hub_speed_rpm_x10", .integer = 1,
     .scale = 4096, .reset = speed_reset, .step = speed_step, .signed_range = 1},
    {0},
};
