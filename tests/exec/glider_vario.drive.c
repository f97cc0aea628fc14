/*
 * Drives fixtures/forms/glider_vario.c as the default build compiles it (neither
 * VARIO_HAS_PITOT nor VARIO_DIGITAL_BARO defined).
 *
 * Expected by hand:
 *   vario_step  vario_climb_ms         alpha 20 / (20 + 180) = 0.1  float  rate 1000 / 20
 *     = 50 Hz; static_ms*(alpha) is a product: 1000 * 0.1 = 100.
 *   vario_step  vario_total_energy_ms  alpha 0.25  float  (source 2): 250.
 */
#include "../../fixtures/forms/glider_vario.c"

#include "drive.h"

static void climb_reset(double y0) { vario_climb_ms = (float)y0; }
static double climb_step(double u)
{
    vario_step(0.0f, (float)u, 0, 0);
    return vario_climb_ms;
}
static void energy_reset(double y0) { vario_total_energy_ms = (float)y0; }
static double energy_step(double u)
{
    vario_step((float)u, 0.0f, 1, 2);
    return vario_total_energy_ms;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "vario_step", .state = "vario_climb_ms", .integer = 0, .scale = 1000.0,
     .reset = climb_reset, .step = climb_step, .signed_range = 1, .rate_hz = 50.0},
    {.function = "vario_step", .state = "vario_total_energy_ms", .integer = 0,
     .scale = 1000.0, .reset = energy_reset, .step = energy_step, .signed_range = 1},
    {0},
};
