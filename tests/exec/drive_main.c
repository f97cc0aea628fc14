/*
 * Generic execution driver: measures what each smoother of one fixture really does.
 *
 * Linked with one tests/exec/<case>.drive.c, it runs every entry of DRIVE_CASES and prints
 * one tab-separated line per case:
 *
 *   function  state  integer  scale  alpha  dc_gain  stall_rising  stall_falling
 *
 * alpha is the first step of the step response from rest at zero, divided by the scale.
 * dc_gain is where a step of the scale comes to rest, divided by the scale. The stalls are
 * printed for integer forms only ("-" for float): the most counts the output rests below a
 * constant input it approached from below (rising), or above one it approached from above
 * (falling).
 *
 * Cases of the optional kinds of drive.h add tab-separated key=value fields after these:
 *
 *   window=N                 a moving average: the update at which a step from rest first
 *                            comes out whole (it must do so exactly, never before)
 *   stages=S settle63=n settle90=n settle95=n settle99=n lag=x
 *                            the last stage of a cascade: the updates (the first counted
 *                            as 1) at which the chain's step response first reaches
 *                            1 - 1/e, 90 %, 95 % and 99 % of the step, and its delay to a
 *                            ramp in samples
 *   alpha_alt=a              a gain that follows the time step: the first step run with
 *                            the other time step
 *   rate_hz=r                the update rate the fixture's own constants give
 *   design_dt_s=t            a gain from a design law: the period the reset configured
 *   file=name                for a fixture folder: the file of the update in it
 *
 * Matching these figures with tauscan's is left to tests/exec_truth.rs.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "drive.h"

/* No smoother of the fixtures needs this many updates to settle; a form that never comes
 * to rest (a float state flickering between two neighbours) is stopped here. */
#define STEP_CAP 1000000L

/* Bases B, B+1, ..., B+15 are used for the dead band, because a form whose terms truncate
 * on their own (7*y/8 + u/8) rests at points that depend on the residues of y and u, not
 * only on their difference; 16 covers every residue of the divisors the fixtures use. */
#define BASE_OFFSETS 16

/* Feed u until the output has not changed for `hold` updates in a row, and return it.
 * One unchanged update is not enough: a scaled state keeps moving under an output that
 * holds still for up to 2^k updates. */
static double settle(const struct drive_case *c, double u, long hold)
{
    double last = c->step(u);
    long unchanged = 0;
    for (long n = 1; n < STEP_CAP && unchanged < hold; n++) {
        double y = c->step(u);
        if (y == last) {
            unchanged++;
        } else {
            unchanged = 0;
            last = y;
        }
    }
    return last;
}

/* The window of a moving average: the first update at which the step response from rest
 * at zero equals the step. A running sum has the whole step exactly once the ring holds
 * nothing but the new input, so exact equality is the test, not a tolerance. */
static int measure_window(const struct drive_case *c)
{
    c->reset(0.0);
    for (long n = 1; n < STEP_CAP; n++) {
        if (c->step(c->scale) == c->scale) {
            printf("\twindow=%ld", n);
            return 0;
        }
    }
    fprintf(stderr, "%s %s: the step never came out whole\n", c->function, c->state);
    return 1;
}

/* Settling and ramp lag of a whole cascade, driven through chain_reset/chain_step. */
static int measure_chain(const struct drive_case *c)
{
    const double fractions[4] = {1.0 - exp(-1.0), 0.90, 0.95, 0.99};
    const char *names[4] = {"63", "90", "95", "99"};
    long first[4] = {0, 0, 0, 0};
    int found = 0;
    c->chain_reset(0.0);
    for (long n = 1; n < STEP_CAP && found < 4; n++) {
        double y = c->chain_step(c->scale);
        for (int i = 0; i < 4; i++) {
            if (first[i] == 0 && y >= fractions[i] * c->scale) {
                first[i] = n;
                found++;
            }
        }
    }
    if (found < 4) {
        fprintf(stderr, "%s %s: the chain never settled\n", c->function, c->state);
        return 1;
    }
    printf("\tstages=%d", c->chain_stages);
    for (int i = 0; i < 4; i++) {
        printf("\tsettle%s=%ld", names[i], first[i]);
    }
    /* The ramp climbs with slope 1 to end at zero, so that its last samples, where the
     * lag is read, are small numbers with small rounding errors. Its start-up transient
     * dies like the step response's remainder, which is under 1 % after the 99 % time; ten
     * times that leaves under 1e-20 of it. */
    long length = 10 * first[3] + 100;
    double slope = 1.0;
    c->chain_reset(-slope * (double)length);
    double y = 0.0;
    for (long n = 1; n <= length; n++) {
        y = c->chain_step(slope * (double)(n - length));
    }
    printf("\tlag=%.17g", (0.0 - y) / slope);
    return 0;
}

static int measure(const struct drive_case *c)
{
    c->reset(0.0);
    double alpha = c->step(c->scale) / c->scale;
    if (!(alpha > 0.0 && alpha <= 1.0)) {
        fprintf(stderr, "%s %s: first step gives alpha %g, not in (0, 1]\n", c->function,
                c->state, alpha);
        return 1;
    }
    /* Twice the time constant covers the longest run of an unchanged output while a
     * scaled state is still moving (at most 1/alpha updates for a difference of 1), unless
     * the case says its state carries more bits than that. */
    long hold = (long)ceil(2.0 / alpha) + 2;
    if (c->hold > hold) {
        hold = c->hold;
    }

    c->reset(0.0);
    double dc = settle(c, c->scale, hold) / c->scale;

    char rising_text[32] = "-";
    char falling_text[32] = "-";
    if (c->integer) {
        /* The dead bands of the forms under test are below 1/alpha counts; four times that
         * leaves room for forms that truncate twice. */
        long limit = (long)ceil(4.0 / alpha) + 8;
        if (c->reach > limit) {
            limit = c->reach;
        }
        double half = floor(c->scale / 2.0);
        double rising = 0.0;
        double falling = 0.0;
        int signs = c->signed_range ? 2 : 1;
        for (int s = 0; s < signs; s++) {
            double centre = s == 0 ? half : -half;
            for (int j = 0; j < BASE_OFFSETS; j++) {
                double base = centre + j;
                for (long d = 1; d <= limit; d++) {
                    c->reset(base);
                    double up = base + (double)d;
                    double rest = settle(c, up, hold);
                    if (up - rest > rising) {
                        rising = up - rest;
                    }
                    double down = base - (double)d;
                    if (!c->signed_range && down < 0.0) {
                        continue;
                    }
                    c->reset(base);
                    rest = settle(c, down, hold);
                    if (rest - down > falling) {
                        falling = rest - down;
                    }
                }
            }
        }
        snprintf(rising_text, sizeof rising_text, "%.0f", rising);
        snprintf(falling_text, sizeof falling_text, "%.0f", falling);
    }
    printf("%s\t%s\t%d\t%.17g\t%.17g\t%.17g\t%s\t%s", c->function, c->state, c->integer,
           c->scale, alpha, dc, rising_text, falling_text);
    int failed = 0;
    if (c->window) {
        failed |= measure_window(c);
    }
    if (c->chain_step != NULL) {
        failed |= measure_chain(c);
    }
    if (c->step_alt != NULL) {
        c->reset(0.0);
        printf("\talpha_alt=%.17g", c->step_alt(c->scale) / c->scale);
    }
    if (c->rate_hz > 0.0) {
        printf("\trate_hz=%.17g", c->rate_hz);
    }
    if (c->design_dt_s > 0.0) {
        printf("\tdesign_dt_s=%.17g", c->design_dt_s);
    }
    if (c->file != NULL) {
        printf("\tfile=%s", c->file);
    }
    printf("\n");
    return failed;
}

int main(void)
{
    int failed = 0;
    int count = 0;
    for (const struct drive_case *c = DRIVE_CASES; c->function != NULL; c++) {
        failed |= measure(c);
        count++;
    }
    if (count == 0) {
        fprintf(stderr, "no drive cases\n");
        return 1;
    }
    return failed;
}
