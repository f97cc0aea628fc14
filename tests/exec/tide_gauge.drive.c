/*
 * Drives fixtures/forms/tide_gauge.c: updates spread over several statements.
 *
 * The two station fields are updated through tide_task's calls, which tauscan lists as
 * instances in tide_task with the global's own field as state; each case drives the one
 * under test through tide_task and holds the other input at zero. Expected by hand:
 *   tide_task          g_tide_station.level_m  alpha 0.2    dc 1  float
 *     t = 0.8 y; t += 0.2 u; y = t: from rest at 0, 0.2 * 1000 = 200.
 *   tide_task          g_tide_station.surge_m  alpha 0.125  dc 1  float
 *     the same with s->samples++ between: 0.125 * 1000 = 125.
 *   tide_baro_sample   tide_baro_pa            alpha 1/8    dc 1  stall 7 / 0
 *     d = u - y; d >>= 3; y += d is y + ((u - y) >> 3): arithmetic shift, one-sided.
 *   tide_wave_step     tide_wave_z1            alpha 3277 / 32768 = 0.100006103515625
 *     dc 1  stall 9 / 0
 *     tmp = sat16(u - z1); tmp = z1 + ((tmp * 3277) >> 15); z1 = tmp. The saturation
 *     does not bite inside +-16384. From rest at 0, 16384 * 3277 >> 15 = 1638 (1638.5
 *     floored, within a count of alpha * 16384). The shift floors: a rise of d moves
 *     the state only once d * 3277 >= 32768, that is d >= 10 (9 * 3277 = 29493,
 *     10 * 3277 = 32770), so it rests up to 9 below a rising input; a fall of any d
 *     moves it by at least -1, so it reaches a falling one.
 */
#include "../../fixtures/forms/tide_gauge.c"

#include "drive.h"

static void level_reset(double y0)
{
    g_tide_station.level_m = (float)y0;
}

static double level_step(double u)
{
    tide_task((float)u, 0.0f);
    return g_tide_station.level_m;
}

static void surge_reset(double y0)
{
    g_tide_station.surge_m = (float)y0;
}

static double surge_step(double u)
{
    tide_task(0.0f, (float)u);
    return g_tide_station.surge_m;
}

static void baro_reset(double y0)
{
    tide_baro_pa = (int32_t)y0;
}

static double baro_step(double u)
{
    return tide_baro_sample((int32_t)u);
}

static void wave_reset(double y0)
{
    tide_wave_z1 = (int16_t)y0;
}

static double wave_step(double u)
{
    return tide_wave_step((int16_t)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "tide_task", .state = "g_tide_station.level_m", .integer = 0,
     .scale = 1000.0, .reset = level_reset, .step = level_step, .signed_range = 1},
    {.function = "tide_task", .state = "g_tide_station.surge_m", .integer = 0,
     .scale = 1000.0, .reset = surge_reset, .step = surge_step, .signed_range = 1},
    {.function = "tide_baro_sample", .state = "tide_baro_pa", .integer = 1, .scale = 4096,
     .reset = baro_reset, .step = baro_step, .signed_range = 1},
    {.function = "tide_wave_step", .state = "tide_wave_z1", .integer = 1, .scale = 16384,
     .reset = wave_reset, .step = wave_step, .signed_range = 1},
    {0},
};
