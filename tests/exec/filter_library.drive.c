/*
 * Drives fixtures/forms/filter_library.c: four instances of one filter library.
 *
 * tauscan reports each call of hydro_lpf_apply in hydro_task as an instance, with the
 * instance's own state and gain; the driver sets each instance up as hydro_setup does and
 * applies it as hydro_task does. The rate is the fixture's own: 1 / HYDRO_DT_S.
 *
 * Expected by hand (DOMAIN.md section 1, alpha = dt / (dt + 1 / (2 pi fc)), dt = 0.02 s):
 *   hydro_task  g_pump_flow.y       fc 2 Hz    alpha 0.2008486...  dc 1  float  50 Hz
 *   hydro_task  g_pump_pressure.y   fc 5 Hz    alpha 0.3858695...  dc 1  float  50 Hz
 *   hydro_task  g_reservoir_ph.y    fc 0.1 Hz  alpha 0.0124104...  dc 1  float  50 Hz
 *   hydro_task  g_reservoir_ec.y    fc 0.4 Hz  alpha 0.0478597...  dc 1  float  50 Hz
 */
#include "../../fixtures/forms/filter_library.c"

#include "drive.h"

static void flow_reset(double y0)
{
    hydro_lpf_init(&g_pump_flow, hydro_lpf_gain(HYDRO_FLOW_FC_HZ, HYDRO_DT_S));
    g_pump_flow.y = (float)y0;
}

static double flow_step(double u)
{
    return hydro_lpf_apply(&g_pump_flow, (float)u);
}

static void pressure_reset(double y0)
{
    hydro_lpf_init(&g_pump_pressure, hydro_lpf_gain(HYDRO_PRESSURE_FC_HZ, HYDRO_DT_S));
    g_pump_pressure.y = (float)y0;
}

static double pressure_step(double u)
{
    return hydro_lpf_apply(&g_pump_pressure, (float)u);
}

static void ph_reset(double y0)
{
    hydro_lpf_init(&g_reservoir_ph, hydro_lpf_gain(HYDRO_PH_FC_HZ, HYDRO_DT_S));
    g_reservoir_ph.y = (float)y0;
}

static double ph_step(double u)
{
    return hydro_lpf_apply(&g_reservoir_ph, (float)u);
}

static void ec_reset(double y0)
{
    hydro_lpf_init(&g_reservoir_ec, hydro_lpf_gain(HYDRO_EC_FC_HZ, HYDRO_DT_S));
    g_reservoir_ec.y = (float)y0;
}

static double ec_step(double u)
{
    return hydro_lpf_apply(&g_reservoir_ec, (float)u);
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "hydro_task", .state = "g_pump_flow.y", .integer = 0, .scale = 1000.0,
     .reset = flow_reset, .step = flow_step, .signed_range = 1, .rate_hz = 1.0 / HYDRO_DT_S},
    {.function = "hydro_task", .state = "g_pump_pressure.y", .integer = 0, .scale = 1000.0,
     .reset = pressure_reset, .step = pressure_step, .signed_range = 1,
     .rate_hz = 1.0 / HYDRO_DT_S},
    {.function = "hydro_task", .state = "g_reservoir_ph.y", .integer = 0, .scale = 1000.0,
     .reset = ph_reset, .step = ph_step, .signed_range = 1, .rate_hz = 1.0 / HYDRO_DT_S},
    {.function = "hydro_task", .state = "g_reservoir_ec.y", .integer = 0, .scale = 1000.0,
     .reset = ec_reset, .step = ec_step, .signed_range = 1, .rate_hz = 1.0 / HYDRO_DT_S},
    {0},
};
