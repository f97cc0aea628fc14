/*
 * Drives fixtures/forms/ring_window.c: moving averages whose index wraps before the end of
 * the ring (the window is where the index wraps, not the ring's size).
 *
 * Expected by hand: a step from rest at zero comes out whole at update N and not before.
 *   hive_traffic_sample  hive_sum       window 6 (`% HIVE_WINDOW`)         dc 1  stall 0 / 0
 *   hive_gust_sample     hive_gust_sum  window 5 (`if (pos >= N) pos = 0`)  dc 1  stall 0 / 0
 */
#include "../../fixtures/forms/ring_window.c"

#include "drive.h"

static void reset(double y0)
{
    hive_reset((int32_t)y0);
}

static double traffic_step(double u)
{
    return hive_traffic_sample((int32_t)u);
}

static double gust_step(double u)
{
    return hive_gust_sample((int32_t)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "hive_traffic_sample", .state = "hive_sum", .integer = 1, .scale = 4096,
     .reset = reset, .step = traffic_step, .signed_range = 1, .window = 1},
    {.function = "hive_gust_sample", .state = "hive_gust_sum", .integer = 1, .scale = 4096,
     .reset = reset, .step = gust_step, .signed_range = 1, .window = 1},
    {0},
};
