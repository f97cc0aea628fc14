/*
 * Drives fixtures/forms/state_places.c: one kind of update, state in many places.
 *
 * Expected by hand:
 *   wind_apparent_filter  apparent_kt            alpha 0.25   dc 1  float
 *   wind_speed_sample     g_wind.speed_kt        alpha 0.2    dc 1  float
 *   deck_depth_sample     g_deck.depth.metres    alpha 0.1    dc 1  float
 *   winch_load_sample     g_winch_load_n[i]      alpha 1/4    dc 1  stall 3 / 3
 *   vane_task             g_vane.cos_avg             alpha 0.125  dc 1  float
 *   vane_task             g_vane.sin_avg             alpha 0.125  dc 1  float
 * The restart branch of wind_apparent_filter primes the state and then still updates it,
 * which leaves it on the input; the reset relies on that.
 */
#include "../../fixtures/forms/state_places.c"

#include "drive.h"

static void apparent_reset(double y0)
{
    (void)wind_apparent_filter((float)y0, true);
}

static double apparent_step(double u)
{
    return wind_apparent_filter((float)u, false);
}

static void speed_reset(double y0)
{
    g_wind.speed_kt = (float)y0;
}

static double speed_step(double u)
{
    wind_speed_sample((float)u);
    return g_wind.speed_kt;
}

static void depth_reset(double y0)
{
    g_deck.depth.metres = (float)y0;
}

static double depth_step(double u)
{
    deck_depth_sample((float)u);
    return g_deck.depth.metres;
}

/* Winch 2 stands for all of them. */
static void winch_reset(double y0)
{
    g_winch_load_n[2] = (int32_t)y0;
}

static double winch_step(double u)
{
    winch_load_sample(2, (int32_t)u);
    return g_winch_load_n[2];
}

static void vane_reset(double y0)
{
    g_vane.cos_avg = (float)y0;
    g_vane.sin_avg = (float)y0;
}

static double vane_cos_step(double u)
{
    vane_task((float)u, 0.0f);
    return g_vane.cos_avg;
}

static double vane_sin_step(double u)
{
    vane_task(0.0f, (float)u);
    return g_vane.sin_avg;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "wind_apparent_filter", .state = "apparent_kt", .integer = 0, .scale = 1000.0,
     .reset = apparent_reset, .step = apparent_step, .signed_range = 1},
    {.function = "wind_speed_sample", .state = "g_wind.speed_kt", .integer = 0,
     .scale = 1000.0, .reset = speed_reset, .step = speed_step, .signed_range = 1},
    {.function = "deck_depth_sample", .state = "g_deck.depth.metres", .integer = 0,
     .scale = 1000.0, .reset = depth_reset, .step = depth_step, .signed_range = 1},
    {.function = "winch_load_sample", .state = "g_winch_load_n[i]", .integer = 1,
     .scale = 4096, .reset = winch_reset, .step = winch_step, .signed_range = 1},
    {.function = "vane_task", .state = "g_vane.cos_avg", .integer = 0, .scale = 1000.0,
     .reset = vane_reset, .step = vane_cos_step, .signed_range = 1},
    {.function = "vane_task", .state = "g_vane.sin_avg", .integer = 0, .scale = 1000.0,
     .reset = vane_reset, .step = vane_sin_step, .signed_range = 1},
    {0},
};
