/*
 * Drives fixtures/forms/canal_lock.c: function-like macros whose body is the update.
 *
 * Each expansion is its own smoother, in the function that expands the macro, with the
 * macro's argument as its state. Expected by hand:
 *   lock_upper_sample    lock_upper_m          alpha 0.2   dc 1  float
 *     v -= k * (v - s) is v + k * (s - v): from rest at 0, 0 - 0.2 * (0 - 1000) = 200.
 *   lock_chamber_sample  c->level_m            alpha 0.05  dc 1  float
 *     the same macro on a field through the function's pointer parameter:
 *     0 - 0.05 * (0 - 1000) = 50.
 *   lock_paddle_sample   g_lock_paddle_counts  alpha 1/8   dc 1  stall 7 / 7
 *     (7y + u) / 8 names its state twice; from rest at 0, 4096 / 8 = 512. Signed
 *     division truncates toward zero: above zero it rests up to 7 below a rising input,
 *     below zero up to 7 above a falling one.
 */
#include "../../fixtures/forms/canal_lock.c"

#include "drive.h"

static void upper_reset(double y0)
{
    lock_upper_m = (float)y0;
}

static double upper_step(double u)
{
    lock_upper_sample((float)u);
    return lock_upper_m;
}

static struct lock_chamber chamber;

static void chamber_reset(double y0)
{
    chamber.level_m = (float)y0;
    chamber.fills = 0;
}

static double chamber_step(double u)
{
    lock_chamber_sample(&chamber, (float)u);
    return chamber.level_m;
}

static void paddle_reset(double y0)
{
    g_lock_paddle_counts = (int32_t)y0;
}

static double paddle_step(double u)
{
    lock_paddle_sample((int32_t)u);
    return g_lock_paddle_counts;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "lock_upper_sample", .state = "lock_upper_m", .integer = 0, .scale = 1000.0,
     .reset = upper_reset, .step = upper_step, .signed_range = 1},
    {.function = "lock_chamber_sample", .state = "c->level_m", .integer = 0, .scale = 1000.0,
     .reset = chamber_reset, .step = chamber_step, .signed_range = 1},
    {.function = "lock_paddle_sample", .state = "g_lock_paddle_counts", .integer = 1,
     .scale = 4096, .reset = paddle_reset, .step = paddle_step, .signed_range = 1},
    {0},
};
