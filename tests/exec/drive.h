/*
 * The execution driver's contract with the per-fixture drivers.
 *
 * Each tests/exec/<case>.drive.c includes fixtures/forms/<case>.c (or the .c files of the
 * folder fixtures/forms/<case>/, for a case made of several files), wraps every smoother of
 * that fixture in a reset/step pair working in the smoother's output units, and lists them
 * in DRIVE_CASES, ended by an all-zero entry. drive_main.c runs every case and prints what
 * the C actually does; tests/exec_truth.rs holds that against what tauscan reports. This
 * header knows nothing of tauscan's recogniser: the function and state strings are only
 * the keys by which the Rust test finds the matching record.
 */
#ifndef TAUSCAN_EXEC_DRIVE_H
#define TAUSCAN_EXEC_DRIVE_H

struct drive_case {
    /* Name of the C function whose body holds the update, as tauscan reports it (for an
     * instance of a filter function or macro, the function that calls it). */
    const char *function;
    /* Text of the state expression, as tauscan reports it ("y", "g_vent.temp_f", "f->y"). */
    const char *state;
    /* 1 for integer and fixed-point forms, whose dead band is measured; 0 for float. */
    int integer;
    /* Test amplitude in output units; chosen so that alpha * scale is a whole number for
     * integer forms, which makes the first step of the step response exact. */
    double scale;
    /* Put the smoother at rest at y0 (output units). */
    void (*reset)(double y0);
    /* One update with input u; returns the output (the state, acc >> k for a scaled
     * state, or the running sum divided by the window for a moving average). */
    double (*step)(double u);
    /* 1 when the state's type is signed and negative values are part of its range, so the
     * dead band is also measured around -scale/2; 0 for unsigned states. */
    int signed_range;

    /* The fields below are optional: a designated initialiser leaves them zero or NULL,
     * which means "not this kind of case". */

    /* 1 when the case is a moving average (a running sum over a ring buffer): the driver
     * then measures its window, the update at which a step from rest first comes out
     * whole, and the step returns the sum divided by the window. */
    int window;
    /* For the last stage of a cascade: put every stage at rest at y0, and run one update
     * of the whole chain with input u, returning the last stage's output. The driver then
     * measures the chain's settling and its lag behind a ramp. */
    void (*chain_reset)(double y0);
    double (*chain_step)(double u);
    /* How many stages the chain has, first to last, when chain_step is set. */
    int chain_stages;
    /* For a gain that follows a time step given at run time: the same update run with
     * another time step than step uses (reset with reset). The driver then measures the
     * first step with both. */
    double (*step_alt)(double u);
    /* The update rate in Hz as the fixture's own constants give it (1.0 / DT_S), when they
     * state one; 0 when they do not. */
    double rate_hz;
    /* For a gain a design law computes from a period and a configuration: the period in
     * seconds that reset configures (with the code's own defaults). The driver prints it,
     * and the test holds the reported law and design figures against the executed first
     * step: the law's coordinate of alpha over this period is 2 pi times the cutoff. */
    double design_dt_s;
    /* For a fixture that is a folder of files (fixtures/forms/<case>/): the file of the
     * update, relative to that folder ("tone.c"); NULL for a one-file fixture. */
    const char *file;
    /* The most updates in a row the output may stay unchanged while the state still
     * moves, when that is more than the 2 / alpha + 2 the driver allows by default: a
     * scaled state that carries more bits than 1 / alpha (its input shifted up as well)
     * holds its read-out longer. 0 for the default. */
    long hold;
    /* The farthest rise or fall from rest the dead-band search tries, when more than the
     * 4 / alpha + 8 counts it tries by default: a form that truncates in two statements
     * can rest about 1 / alpha^2 counts away. 0 for the default. */
    long reach;
};

/* Defined by each <case>.drive.c, ended by an entry whose function is NULL. */
extern const struct drive_case DRIVE_CASES[];

#endif
