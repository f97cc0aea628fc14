#!/usr/bin/env python3
"""Writes metrics_table.csv: reference figures of EMAs, moving averages and cascades of them,
computed with scipy.signal and numpy, for tests/metrics_reference.rs to compare against.

The Rust side uses closed forms, bisection and its own simulations; this script uses only
scipy's general-purpose routines on the transfer-function coefficients, so the two agree only
if both are right. CI reads the committed table and needs no Python.

    python3 tests/reference/generate_metrics_table.py > tests/reference/metrics_table.csv

Columns: stages,metric,argument,value
  stages    stages in series, joined by '>': 'ema:ALPHA' (b = [alpha], a = [1, alpha - 1]) or
            'ma:N' (b = ones(N) / N, a = [1])
  metric    magnitude  |H(w)| by freqz at w = argument (rad/sample)
            cutoff     first w where |H|^2 = 1/2: freqz on a grid of 2^16 + 1 points over
                       [0, pi], then brentq between the grid points around the first crossing,
                       with freqz at single points; 'none' when no grid point reaches it
            lag        group_delay at w = 0, in samples
            step       step response after argument samples (lfilter on ones; EMAs only)
            samples_to_fraction
                       samples (the first counted as 1) until the lfilter step response first
                       reaches fraction q = argument, counting
                       1 - y <= (1 - q) (1 + 1e-9) + 2 eps as reached so that exact decimal
                       ties survive binary rounding
            noise_ratio
                       sqrt(sum(h^2)) of the lfilter impulse response, long enough for
                       the slowest pole to decay by e^-40 (its energy by e^-80)
  value     repr() of a float, or 'none'
"""

import math
import platform
import sys

import numpy as np
import scipy
from scipy.optimize import brentq
from scipy.signal import freqz, group_delay, lfilter

ALPHAS = [
    0.0001, 0.001, 0.005, 0.01, 0.02, 0.05, 1 / 16, 0.1, 1 / 8.5, 1 / 8, 0.15, 0.2, 0.25,
    0.3, 1 / 3, 0.4, 0.5, 0.6, 0.7, 0.75, 0.8, 0.82, 0.8284, 0.8285, 0.83, 0.9, 0.95, 0.99,
    1.0,
]
MOVING_AVERAGES = [1, 2, 3, 4, 5, 8, 10, 16, 32, 64, 100, 256]
CASCADES = [
    [("ema", 0.1), ("ema", 0.1)],
    [("ema", 0.05), ("ema", 0.2)],
    [("ema", 0.5), ("ema", 0.5)],
    [("ema", 0.2), ("ema", 0.2), ("ema", 0.2)],
    [("ema", 0.9), ("ema", 0.9)],
    [("ema", 1.0), ("ema", 1.0)],
    [("ema", 0.25), ("ma", 4)],
    [("ema", 0.1), ("ma", 8)],
    [("ema", 0.83), ("ma", 2)],
    [("ma", 1), ("ema", 0.3)],
    [("ma", 4), ("ma", 4)],
    [("ma", 3), ("ema", 0.05), ("ma", 5)],
]
FREQUENCIES = [0.001, 0.01, 0.1, 0.5, 1.0, 2.0, 3.0, math.pi]
FRACTIONS = [0.5, 1 - 1 / math.e, 0.75, 0.9, 0.95, 0.99]
# Fractions that an EMA reaches exactly after a whole number of updates (1 - p^n written out
# in decimal), where a plain ceil(ln(1 - q) / ln p) lands one update late.
TIES = {0.25: [0.578125], 0.5: [0.875], 0.6: [0.936], 0.9: [0.9999]}
STEP_COUNTS = [1, 2, 3, 10, 100, 1000]
GRID_POINTS = 2**16 + 1
TIE_TOLERANCE = 1e-9
# A second, much tighter slack: a count that changes between the two would sit so close to
# its fraction that the Rust closed forms and this simulation could honestly disagree.
TIGHT_TIE_TOLERANCE = 1e-13
# Absolute slack for the rounding of q itself (half an ulp of 1 for q in [0.5, 1)).
FRACTION_ROUNDING_SLACK = 2 * np.finfo(float).eps


def coefficients(stage):
    kind, value = stage
    if kind == "ema":
        return np.array([value]), np.array([1.0, value - 1.0])
    return np.ones(value) / value, np.array([1.0])


def combined(stages):
    b, a = np.array([1.0]), np.array([1.0])
    for stage in stages:
        sb, sa = coefficients(stage)
        b, a = np.convolve(b, sb), np.convolve(a, sa)
    return b, a


def response_length(stages, decay):
    """Samples after which the slowest EMA has decayed by e^-decay, plus the MA lengths."""
    length = 100
    for kind, value in stages:
        if kind == "ema":
            if value < 1.0:
                length += int(decay / -math.log1p(-value)) + 1
        else:
            length += value
    return length


def run(stages, signal):
    """Runs the stages one after the other, each with lfilter, as the firmware does."""
    for stage in stages:
        b, a = coefficients(stage)
        signal = lfilter(b, a, signal)
    return signal


def power(b, a, w):
    _, h = freqz(b, a, worN=[w])
    return abs(h[0]) ** 2


def cutoff(stages):
    b, a = combined(stages)
    w, h = freqz(b, a, worN=GRID_POINTS, include_nyquist=True)
    below = np.nonzero(np.abs(h) ** 2 <= 0.5)[0]
    if len(below) == 0:
        return None
    i = below[0]
    assert i > 0, "the gain at DC must be 1"
    return brentq(
        lambda x: power(b, a, x) - 0.5,
        w[i - 1],
        w[i],
        xtol=1e-300,
        rtol=4 * np.finfo(float).eps,
        maxiter=500,
    )


def lag(stages):
    b, a = combined(stages)
    _, delay = group_delay((b, a), w=[0.0])
    # Cross-check: group delays of stages in series add up.
    total = 0.0
    for stage in stages:
        _, d = group_delay(coefficients(stage), w=[0.0])
        total += d[0]
    assert abs(delay[0] - total) <= 1e-9 * max(1.0, abs(total)), (stages, delay[0], total)
    return delay[0]


def first_reaching(step, q, tolerance):
    slack = (1.0 - q) * (1.0 + tolerance) + FRACTION_ROUNDING_SLACK
    reached = np.nonzero(1.0 - step <= slack)[0]
    return int(reached[0]) + 1 if len(reached) else None


def samples_to_fraction(stages, step, q):
    count = first_reaching(step, q, TIE_TOLERANCE)
    tight = first_reaching(step, q, TIGHT_TIE_TOLERANCE)
    assert count is not None, (stages, q)
    assert count == tight, f"near tie for {stages} at q = {q!r}: choose another grid point"
    return count


def noise_ratio(stages):
    impulse = np.zeros(response_length(stages, 40.0))
    impulse[0] = 1.0
    h = run(stages, impulse)
    return math.sqrt(float(np.sum(h * h)))


def name(stages):
    return ">".join(f"{kind}:{value!r}" for kind, value in stages)


def fmt(value):
    return "none" if value is None else repr(float(value))


def rows(stages):
    label = name(stages)
    b, a = combined(stages)
    for w in FREQUENCIES:
        yield label, "magnitude", repr(w), fmt(math.sqrt(power(b, a, w)))
    yield label, "cutoff", "", fmt(cutoff(stages))
    yield label, "lag", "", fmt(lag(stages))
    step = run(stages, np.ones(max(response_length(stages, 50.0), max(STEP_COUNTS))))
    if len(stages) == 1 and stages[0][0] == "ema":
        for n in STEP_COUNTS:
            yield label, "step", repr(n), fmt(step[n - 1])
    ties = TIES.get(stages[0][1], []) if len(stages) == 1 and stages[0][0] == "ema" else []
    for q in FRACTIONS + ties:
        yield label, "samples_to_fraction", repr(q), fmt(samples_to_fraction(stages, step, q))
    yield label, "noise_ratio", "", fmt(noise_ratio(stages))


def main():
    lines = [
        "# Generated by tests/reference/generate_metrics_table.py; do not edit by hand.",
        f"# python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}",
        "stages,metric,argument,value",
    ]
    filters = [[("ema", alpha)] for alpha in ALPHAS]
    filters += [[("ma", n)] for n in MOVING_AVERAGES]
    filters += CASCADES
    for stages in filters:
        lines += [",".join(row) for row in rows(stages)]
    # Written only once every row is computed, so a failed assertion leaves no half table.
    sys.stdout.write("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
