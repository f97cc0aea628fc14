/*
 * Drives fixtures/forms/cold_store.c: accumulators holding N times the smoothed value.
 *
 * The output is the accumulator read out as the fixture reads it (acc / 16, acc >> 7,
 * sum / 32); the reset puts the accumulator at y0 times its scale. Expected by hand:
 *   store_air_sample   store_air_acc            alpha 1/16  dc 1  stall 0 / 0
 *     acc += u - acc / 16 moves acc by at least one count while u differs from acc / 16,
 *     so it stops only where the read-out equals the input, on either side of zero.
 *   store_coil_sample  g_store_coil_acc         alpha 1/16  dc 1  stall 0 / 0
 *     an instance of store_coil_filter(): tmp = *p; tmp += (u << 3) - (tmp >> 4);
 *     *p = tmp, so acc' = acc - floor(acc / 16) + 8u, at rest where floor(acc / 16) = 8u,
 *     acc in [128u, 128u + 15], read out as acc >> 7 = u. Unsigned, as u << 3 needs.
 *   store_door_sample  g_store_door_moving_sum  alpha 1/32  dc 1  stall 0 / 0
 *     a "moving sum" with no ring: sum += x - sum / 32 is the first form with N = 32.
 * First steps from rest at 0 with a step of 4096: 4096 - 0 = 4096 into acc, 256 read
 * out (1/16); 8 * 4096 = 32768 into acc, 256 read out (1/16); 4096 into sum, 128 read
 * out (1/32).
 * The coil's accumulator carries 128 times the value for a gain of 1/16, so its read-out
 * holds still longer than 2 / alpha updates while it moves: one count below the input
 * the gap of 128 closes as g -= ceil(g / 16), in 43 updates, so the case asks the driver
 * to wait 64 (.hold) before it takes the output for settled.
 */
#include "../../fixtures/forms/cold_store.c"

#include "drive.h"

static void air_reset(double y0)
{
    store_air_acc = (int32_t)y0 * 16;
}

static double air_step(double u)
{
    return store_air_sample((int32_t)u);
}

static void coil_reset(double y0)
{
    g_store_coil_acc = (uint32_t)y0 << 7;
}

static double coil_step(double u)
{
    return store_coil_sample((uint32_t)u);
}

static void door_reset(double y0)
{
    g_store_door_moving_sum = (int32_t)y0 * STORE_DOOR_N;
}

static double door_step(double u)
{
    store_door_sample((int32_t)u);
    return g_store_door_cms;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "store_air_sample", .state = "store_air_acc", .integer = 1, .scale = 4096,
     .reset = air_reset, .step = air_step, .signed_range = 1},
    {.function = "store_coil_sample", .state = "g_store_coil_acc", .integer = 1,
     .scale = 4096, .reset = coil_reset, .step = coil_step, .signed_range = 0, .hold = 64},
    {.function = "store_door_sample", .state = "g_store_door_moving_sum", .integer = 1,
     .scale = 4096, .reset = door_reset, .step = door_step, .signed_range = 1},
    {0},
};
