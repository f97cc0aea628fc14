/*
 * Drives fixtures/forms/macro_instances.c: one shift macro expanded at three call sites.
 *
 * All three are in hive_sample; each case puts the other two states at the input too, so
 * that the one under test is the only one moving (each call site has its own state).
 *
 * Expected by hand (DOMAIN.md section 3: an arithmetic shift rests up to 2^k - 1 counts
 * below a rising input and reaches a falling one):
 *   hive_sample  hive_weight_g         shift 4  alpha 1/16  dc 1  stall 15 / 0
 *   hive_sample  hive_brood_cdeg       shift 2  alpha 1/4   dc 1  stall 3 / 0
 *   hive_sample  hive_traffic_per_min  shift 1  alpha 1/2   dc 1  stall 1 / 0
 */
#include "../../fixtures/forms/macro_instances.c"

#include "drive.h"

static void hive_reset(double y0)
{
    hive_weight_g = (int32_t)y0;
    hive_brood_cdeg = (int32_t)y0;
    hive_traffic_per_min = (int32_t)y0;
}

static double weight_step(double u)
{
    hive_sample((int32_t)u, 0, 0);
    return hive_weight_g;
}

static double brood_step(double u)
{
    hive_sample(0, (int32_t)u, 0);
    return hive_brood_cdeg;
}

static double traffic_step(double u)
{
    hive_sample(0, 0, (int32_t)u);
    return hive_traffic_per_min;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "hive_sample", .state = "hive_weight_g", .integer = 1, .scale = 4096,
     .reset = hive_reset, .step = weight_step, .signed_range = 1},
    {.function = "hive_sample", .state = "hive_brood_cdeg", .integer = 1, .scale = 4096,
     .reset = hive_reset, .step = brood_step, .signed_range = 1},
    {.function = "hive_sample", .state = "hive_traffic_per_min", .integer = 1,
     .scale = 4096, .reset = hive_reset, .step = traffic_step, .signed_range = 1},
    {0},
};
