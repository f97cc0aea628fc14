/*
 * Drives fixtures/forms/frost_fan.c: a smoother in a task that never returns, and
 * smoothers whose input is an expression.
 *
 * frost_sensor_task keeps its state in a local of an endless loop, so it cannot be
 * called once per update. The driver replays it instead: each step appends the new input
 * to the inputs given since the reset, runs the task from its start with
 * frost_read_top_c() handing out those inputs in turn, and leaves it by longjmp (C11
 * 7.13.2.1, to a caller still running) from the frost_publish() call that publishes the
 * last of them. The local starts at 0 on every run, which is the rest at 0 the driver
 * asks of a float case (reset is called with 0 only for float cases; another rest point
 * is refused).
 *
 * Expected by hand (each step feeds the expression's inputs so that the expression the
 * update smooths equals u):
 *   frost_sensor_task       top_c                alpha 0.1    dc 1  float
 *     top_c = 0.9 top_c + 0.1 raw: from 0, 0.1f * 1000 = 100.
 *   frost_shunt_sample      frost_pull_a         alpha 0.01   dc 1  float
 *     y = 0.99 y - 0.01 m approaches -m: the input is -m, so the driver feeds m = -u;
 *     0.01f * 1000 = 10. Against m itself the gain would be -1; the smoother follows -m
 *     with unity gain.
 *   frost_inversion_sample  g_frost_inversion_k  alpha 0.05   dc 1  float
 *     y = 0.95 y + 0.05 * 0.5 * (top - ground): the input is 0.5 * (top - ground); the
 *     driver feeds top = 2u + 4, ground = 4; 0.05f * 0.5f * 2000 = 50.
 *   frost_wind_sample       frost_wind_ms        alpha 0.125  dc 1  float
 *     y = y (1 - 0.125) + 0.25 * pulses * 0.125: the input is 0.25 * pulses; the driver
 *     feeds pulses = 4u; 0.25 * 4000 * 0.125 = 125.
 *   frost_ground_sample     frost_ground_c       alpha 0.25   dc 1  float
 *     primed with the first reading (the reset does that), then y += 0.25 (u - y);
 *     listed once, for the update: 0.25 * 1000 = 250.
 */
#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>

#include "../../fixtures/forms/frost_fan.c"

#include "drive.h"

/* No case needs this many updates between two resets (a float case settles within a
 * few hundred); the replay stops with a message rather than overrun. */
#define TASK_HISTORY 100000

static double task_inputs[TASK_HISTORY];
static long task_given;
static long task_read;
static long task_published;
static float task_last;
static jmp_buf task_exit;

float frost_read_top_c(void)
{
    if (task_read >= task_given) {
        fprintf(stderr, "frost_sensor_task read past the inputs given\n");
        exit(1);
    }
    return (float)task_inputs[task_read++];
}

void frost_publish(float top_c)
{
    task_published++;
    if (task_published == task_given) {
        task_last = top_c;
        longjmp(task_exit, 1);
    }
}

static void task_reset(double y0)
{
    if (y0 != 0.0) {
        fprintf(stderr, "frost_sensor_task starts at 0 and cannot be put at rest at %g\n", y0);
        exit(1);
    }
    task_given = 0;
}

static double task_step(double u)
{
    if (task_given >= TASK_HISTORY) {
        fprintf(stderr, "frost_sensor_task: more than %d updates since the reset\n",
                TASK_HISTORY);
        exit(1);
    }
    task_inputs[task_given++] = u;
    task_read = 0;
    task_published = 0;
    if (setjmp(task_exit) == 0) {
        frost_sensor_task();
    }
    return task_last;
}

static void shunt_reset(double y0) { frost_pull_a = (float)y0; }
static double shunt_step(double u) { frost_shunt_sample((float)-u); return frost_pull_a; }
static void inversion_reset(double y0) { g_frost_inversion_k = (float)y0; }
static double inversion_step(double u)
{
    frost_inversion_sample((float)(2.0 * u + 4.0), 4.0f);
    return g_frost_inversion_k;
}
static void wind_reset(double y0) { frost_wind_ms = (float)y0; }
static double wind_step(double u) { frost_wind_sample((int32_t)(4.0 * u)); return frost_wind_ms; }
static void ground_reset(double y0)
{
    frost_ground_primed = 0;
    frost_ground_sample((float)y0);
}
static double ground_step(double u) { frost_ground_sample((float)u); return frost_ground_c; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "frost_sensor_task", .state = "top_c", .integer = 0, .scale = 1000.0,
     .reset = task_reset, .step = task_step, .signed_range = 1},
    {.function = "frost_shunt_sample", .state = "frost_pull_a", .integer = 0, .scale = 1000.0,
     .reset = shunt_reset, .step = shunt_step, .signed_range = 1},
    {.function = "frost_inversion_sample", .state = "g_frost_inversion_k", .integer = 0,
     .scale = 1000.0, .reset = inversion_reset, .step = inversion_step, .signed_range = 1},
    {.function = "frost_wind_sample", .state = "frost_wind_ms", .integer = 0, .scale = 1000.0,
     .reset = wind_reset, .step = wind_step, .signed_range = 1},
    {.function = "frost_ground_sample", .state = "frost_ground_c", .integer = 0,
     .scale = 1000.0, .reset = ground_reset, .step = ground_step, .signed_range = 1},
    {0},
};
