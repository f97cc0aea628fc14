/*
 * Drives fixtures/forms/ema_blend.c: four spellings of y = a*u + (1-a)*y.
 *
 * Expected by hand (DOMAIN.md section 1: every reordering is one affine form with
 * alpha = 1 - c_y):
 *   aq_tank_sample            g_tank_c     alpha 0.1   dc 1  float
 *   aq_sump_sample            aq_sump_c    alpha 0.25  dc 1  float
 *   aq_ph_filter              ph_smooth    alpha 0.05  dc 1  float
 *   aq_heater_current_sample  aq_heater_a  alpha 0.3   dc 1  float
 */
#include "../../fixtures/forms/ema_blend.c"

#include "drive.h"

static void tank_reset(double y0)
{
    g_tank_c = (float)y0;
}

static double tank_step(double u)
{
    aq_tank_sample((float)u);
    return g_tank_c;
}

static void sump_reset(double y0)
{
    aq_sump_c = (float)y0;
}

static double sump_step(double u)
{
    return aq_sump_sample((float)u);
}

static void ph_reset(double y0)
{
    (void)aq_ph_filter((float)y0, true);
}

static double ph_step(double u)
{
    return aq_ph_filter((float)u, false);
}

static void heater_reset(double y0)
{
    aq_heater_a = (float)y0;
}

static double heater_step(double u)
{
    aq_heater_current_sample((float)u);
    return aq_heater_a;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "aq_tank_sample", .state = "g_tank_c", .integer = 0, .scale = 1000.0,
     .reset = tank_reset, .step = tank_step, .signed_range = 1},
    {.function = "aq_sump_sample", .state = "aq_sump_c", .integer = 0, .scale = 1000.0,
     .reset = sump_reset, .step = sump_step, .signed_range = 1},
    {.function = "aq_ph_filter", .state = "ph_smooth", .integer = 0, .scale = 1000.0,
     .reset = ph_reset, .step = ph_step, .signed_range = 1},
    {.function = "aq_heater_current_sample", .state = "aq_heater_a", .integer = 0,
     .scale = 1000.0, .reset = heater_reset, .step = heater_step, .signed_range = 1},
    {0},
};
