/*
 * The execution driver's contract with the per-fixture drivers.
 *
 * Each tests/exec/<case>.drive.c includes fixtures/forms/<case>.c, wraps every smoother of
 * that fixture in a reset/step pair working in the smoother's output units, and lists them
 * in DRIVE_CASES, ended by an all-zero entry. drive_main.c runs every case and prints what
 * the C actually does; tests/exec_truth.rs holds that against what tauscan reports. This
 * header knows nothing of tauscan's recogniser: the function and state strings are only
 * the keys by which the Rust test finds the matching record.
 */
#ifndef TAUSCAN_EXEC_DRIVE_H
#define TAUSCAN_EXEC_DRIVE_H

struct drive_case {
    /* Name of the C function whose body holds the update, as tauscan reports it. */
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
    /* One update with input u; returns the output (the state, or acc >> k for a scaled
     * state). */
    double (*step)(double u);
    /* 1 when the state's type is signed and negative values are part of its range, so the
     * dead band is also measured around -scale/2; 0 for unsigned states. */
    int signed_range;
};

/* Defined by each <case>.drive.c, ended by an entry whose function is NULL. */
extern const struct drive_case DRIVE_CASES[];

#endif
