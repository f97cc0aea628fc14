/*
 * Drives fixtures/forms/lock_sluice.c: a statement macro written alone as a statement.
 *
 * The expansion is a smoother in the function that writes the macro, at that line, with
 * the macro's assigned variable as its state. Expected by hand:
 *   lock_sluice_task  lock_sluice_m3s  alpha 0.1  dc 1  float
 *     0.9 y + 0.1 raw: from rest at 0, 0.1f * 1000 = 100.
 * The tick counter is not a smoother and has no case.
 */
#include "../../fixtures/forms/lock_sluice.c"

#include "drive.h"

static void sluice_reset(double y0) { lock_sluice_m3s = (float)y0; }
static double sluice_step(double u) { lock_sluice_task((float)u); return lock_sluice_m3s; }

const struct drive_case DRIVE_CASES[] = {
    {.function = "lock_sluice_task", .state = "lock_sluice_m3s", .integer = 0,
     .scale = 1000.0, .reset = sluice_reset, .step = sluice_step, .signed_range = 1},
    {0},
};
