/*
 * Drives fixtures/forms/percent_scale.c: percent scales and old-sample weights.
 *
 * Expected by hand (unsigned operands, so each division and shift is a floor):
 *   proof_humidity_sample  proof_rh_permille  alpha 20/100 = 0.2  dc 1  stall 4 / 0
 *     (80y + 20u) / 100 = y + floor((u - y) / 5)
 *   proof_dough_sample     g_proof_dough_c    alpha 1 - 0.9 = 0.1  dc 1  float
 *     (in float, 1 - 0.9f = 0.100000024)
 *   proof_lid_sample       proof_lid_ma       alpha 32/256 = 1/8  dc 1  stall 7 / 0
 * The scale 4000 makes the first humidity step exact: 4000 * 20 / 100 = 800.
 */
#include "../../fixtures/forms/percent_scale.c"

#include "drive.h"

static void rh_reset(double y0)
{
    proof_rh_permille = (uint16_t)y0;
}

static double rh_step(double u)
{
    proof_humidity_sample((uint16_t)u);
    return proof_rh_permille;
}

static void dough_reset(double y0)
{
    g_proof_dough_c = (float)y0;
}

static double dough_step(double u)
{
    proof_dough_sample((float)u);
    return g_proof_dough_c;
}

static void lid_reset(double y0)
{
    proof_lid_ma = (uint32_t)y0;
}

static double lid_step(double u)
{
    proof_lid_sample((uint32_t)u);
    return proof_lid_ma;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "proof_humidity_sample", .state = "proof_rh_permille", .integer = 1,
     .scale = 4000, .reset = rh_reset, .step = rh_step, .signed_range = 0},
    {.function = "proof_dough_sample", .state = "g_proof_dough_c", .integer = 0,
     .scale = 1000.0, .reset = dough_reset, .step = dough_step, .signed_range = 1},
    {.function = "proof_lid_sample", .state = "proof_lid_ma", .integer = 1, .scale = 4096,
     .reset = lid_reset, .step = lid_step, .signed_range = 0},
    {0},
};
