/*
 * Drives fixtures/forms/hub_design.c: each gain is computed by hub_start from the factory
 * configuration (hub_config_reset: torque 8 Hz, speed 0.5 s, cadence 2 Hz, 1000 us loop).
 *
 * The configuration is read from flash at run time, so no alpha is a constant of the code;
 * tauscan reports the design law, its figure in terms of the configuration, and the
 * figures at the factory defaults. Expected by hand (dt = 0.001 s):
 *   torque   rc law           alpha = w / (w + 1), w = 2 pi 8 dt      = 0.0478598  cutoff 8 Hz
 *   speed    exponential law  alpha = 1 - exp(-dt / 0.5)              = 0.0019980  tau 0.5 s
 *   cadence  euler law        alpha = 2 pi 2 dt                       = 0.0125664  cutoff 2 Hz
 * dc 1, float, each.
 */

int hub_flash_read(void *to, unsigned size);

#include "../../fixtures/forms/hub_design.c"

#include "drive.h"

/* No flash on the bench: the configuration is the factory one. */
int hub_flash_read(void *to, unsigned size)
{
    (void)to;
    (void)size;
    return 0;
}

static void start(void)
{
    hub_config_load();
    hub_start();
}

static void torque_reset(double y0)
{
    start();
    hub_torque_lpf.y = (float)y0;
}
static double torque_step(double u)
{
    hub_control_tick((float)u, (float)hub_speed_kmh, (float)hub_cadence_rpm);
    return hub_torque_lpf.y;
}
static void speed_reset(double y0)
{
    start();
    hub_speed_kmh = (float)y0;
}
static double speed_step(double u)
{
    hub_control_tick(hub_torque_lpf.y, (float)u, hub_cadence_rpm);
    return hub_speed_kmh;
}
static void cadence_reset(double y0)
{
    start();
    hub_cadence_rpm = (float)y0;
}
static double cadence_step(double u)
{
    hub_control_tick(hub_torque_lpf.y, hub_speed_kmh, (float)u);
    return hub_cadence_rpm;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "hub_control_tick", .state = "hub_torque_lpf.y", .integer = 0, .scale = 1000.0,
     .reset = torque_reset, .step = torque_step, .signed_range = 1, .design_dt_s = 0.001},
    {.function = "hub_control_tick", .state = "hub_speed_kmh", .integer = 0, .scale = 1000.0,
     .reset = speed_reset, .step = speed_step, .signed_range = 1, .design_dt_s = 0.001},
    {.function = "hub_control_tick", .state = "hub_cadence_rpm", .integer = 0, .scale = 1000.0,
     .reset = cadence_reset, .step = cadence_step, .signed_range = 1, .design_dt_s = 0.001},
    {0},
};
