/*
 * Drives the folder fixtures/forms/sonde_modems: each channel is set up as sonde_setup
 * does for its modem, then its display tracker is stepped.
 *
 * Expected by hand (the attack is set after the init of the channel's own modem):
 *   sonde_tone_sample   c->level  alpha 0.5 * 0.2 = 0.1     dc 1  float
 *   sonde_chirp_sample  c->level  alpha 0.05 * 0.2 = 0.01   dc 1  float
 */
#include "../../fixtures/forms/sonde_modems/sonde_setup.c"
#include "../../fixtures/forms/sonde_modems/sonde_tone.c"
#include "../../fixtures/forms/sonde_modems/sonde_chirp.c"

#include "drive.h"

static void tone_reset(double y0)
{
    sonde_setup(0);
    sonde_chans[0].level = (float)y0;
}
static double tone_step(double u)
{
    sonde_tone_sample(&sonde_chans[0], (float)u);
    return sonde_chans[0].level;
}
static void chirp_reset(double y0)
{
    sonde_setup(1);
    sonde_chans[1].level = (float)y0;
}
static double chirp_step(double u)
{
    sonde_chirp_sample(&sonde_chans[1], (float)u);
    return sonde_chans[1].level;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "sonde_tone_sample", .state = "c->level", .integer = 0, .scale = 1000.0,
     .reset = tone_reset, .step = tone_step, .signed_range = 1, .file = "sonde_tone.c"},
    {.function = "sonde_chirp_sample", .state = "c->level", .integer = 0, .scale = 1000.0,
     .reset = chirp_reset, .step = chirp_step, .signed_range = 1, .file = "sonde_chirp.c"},
    {0},
};
