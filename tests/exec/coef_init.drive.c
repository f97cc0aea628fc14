/*
 * Drives fixtures/forms/coef_init.c: struct gains set in init functions, used through a
 * pointer in the step function. Each struct type has one init, so each gain field has one
 * value.
 *
 * tauscan reports each call of a step function as an instance, in the calling function
 * (evap_task) and with the instance's own state; the driver drives that same state.
 *
 * Expected by hand (DOMAIN.md section 1 formulas):
 *   evap_level_step  f->level_mm  alpha 0.01 / (0.09 + 0.01) = 0.1             dc 1  float
 *   evap_temp_step   t->out       alpha 1 - exp(-2 pi 4 0.01) = 0.2222323...   dc 1  float
 *   evap_brix_step   s->value     alpha w / (1 + w), w = 2 pi 0.5 0.2 = 0.6283...
 *     = 0.3858695...  dc 1  double
 */
#include "../../fixtures/forms/coef_init.c"

#include "drive.h"

static void level_reset(double y0)
{
    evap_level_init(&evap_level);
    evap_level.level_mm = (float)y0;
}

static double level_step(double u)
{
    return evap_level_step(&evap_level, (float)u);
}

static void temp_reset(double y0)
{
    evap_temp_init(&evap_sap_temp);
    evap_sap_temp.out = (float)y0;
}

static double temp_step(double u)
{
    return evap_temp_step(&evap_sap_temp, (float)u);
}

static void brix_reset(double y0)
{
    evap_brix_init(&evap_brix);
    evap_brix.value = y0;
}

static double brix_step(double u)
{
    return evap_brix_step(&evap_brix, u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "evap_task", .state = "evap_level.level_mm", .integer = 0, .scale = 1000.0,
     .reset = level_reset, .step = level_step, .signed_range = 1},
    {.function = "evap_task", .state = "evap_sap_temp.out", .integer = 0, .scale = 1000.0,
     .reset = temp_reset, .step = temp_step, .signed_range = 1},
    {.function = "evap_task", .state = "evap_brix.value", .integer = 0, .scale = 1000.0,
     .reset = brix_reset, .step = brix_step, .signed_range = 1},
    {0},
};
