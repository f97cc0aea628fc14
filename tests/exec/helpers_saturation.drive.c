/*
 * Drives fixtures/forms/helpers_saturation.c.
 *
 * Expected by hand:
 *   proof_air_sample    proof_air_c    alpha 0.25 (helper returns old + a (in - old))  float
 *   proof_dough_sample  proof_dough_c  alpha 0.1 (the clamp is above the test values)   float
 *   proof_lid_sample    proof_lid_c    alpha 0.5, an instance of proof_smooth()         float
 *   proof_crust_sample  proof_crust_c  alpha 2^(-8/4) = 0.25                            float
 *   proof_fan_sample    proof_fan_rpm  alpha 4096/65536 = 1/16; the product is shifted
 *                                      arithmetically, so it rests up to 15 counts below
 *                                      a rising input and reaches a falling one: 15 / 0
 */
#include "../../fixtures/forms/helpers_saturation.c"

#include "drive.h"

static void air_reset(double y0) { proof_air_c = (float)y0; }
static double air_step(double u) { proof_air_sample((float)u); return proof_air_c; }
static void dough_reset(double y0) { proof_dough_c = (float)y0; }
static double dough_step(double u) { proof_dough_sample((float)u); return proof_dough_c; }
static void lid_reset(double y0) { proof_lid_c = (float)y0; }
static double lid_step(double u) { proof_lid_sample((float)u); return proof_lid_c; }
static void crust_reset(double y0) { proof_crust_c = (float)y0; }
static double crust_step(double u) { proof_crust_sample((float)u); return proof_crust_c; }
static void fan_reset(double y0) { proof_fan_rpm = (int32_t)y0; }
static double fan_step(double u) { proof_fan_sample((int32_t)u); return proof_fan_rpm; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "proof_air_sample", .state = "proof_air_c", .integer = 0, .scale = 40.0,
     .reset = air_reset, .step = air_step, .signed_range = 1},
    {.function = "proof_dough_sample", .state = "proof_dough_c", .integer = 0, .scale = 40.0,
     .reset = dough_reset, .step = dough_step, .signed_range = 1},
    {.function = "proof_lid_sample", .state = "proof_lid_c", .integer = 0, .scale = 40.0,
     .reset = lid_reset, .step = lid_step, .signed_range = 1},
    {.function = "proof_crust_sample", .state = "proof_crust_c", .integer = 0, .scale = 40.0,
     .reset = crust_reset, .step = crust_step, .signed_range = 1},
    {.function = "proof_fan_sample", .state = "proof_fan_rpm", .integer = 1, .scale = 4096,
     .reset = fan_reset, .step = fan_step, .signed_range = 1},
    {0},
};
