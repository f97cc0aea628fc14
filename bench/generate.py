#!/usr/bin/env python3
"""Writes a synthetic firmware tree for tauscan's benchmark.

usage: generate.py OUT_DIR LINES [SEED]

The tree mixes what real firmware holds: drivers with smoothers in every form tauscan
reads (float EMAs, shifts, divisions, Q15, scaled states, moving averages, filter-library
instances with gains set in init functions, function-like macros), decoys (integrators,
counters, slew limiters, peak holds), plenty of code with no smoother at all, headers with
register maps and #if configuration blocks. It stops at about LINES lines. The scenario
names are invented. Deterministic for a given seed.
"""
import os
import random
import sys

FORMS = [
    "    s_{n} += (u - s_{n}) >> {k};",
    "    s_{n} += (u - s_{n}) / {d};",
    "    s_{n} = (s_{n} * {dm1} + u) / {d};",
    "    s_{n} += ((u - s_{n}) * {q}) >> 15;",
    "    acc_{n} += u - (acc_{n} >> {k});",
]
FLOAT_FORMS = [
    "    f_{n} += {a}f * (v - f_{n});",
    "    f_{n} = {a}f * v + (1.0f - {a}f) * f_{n};",
    "    f_{n} -= {a}f * (f_{n} - v);",
]
DECOYS = [
    "    integ_{n} += e * 0.01f;",
    "    count_{n}++;",
    "    if (v > peak_{n}) peak_{n} = v;",
    "    total_{n} = total_{n} + (int32_t)e;",
]


def header(i, rng):
    lines = [f"#ifndef BENCH_REGS_{i}_H", f"#define BENCH_REGS_{i}_H", "#include <stdint.h>"]
    for r in range(rng.randint(20, 60)):
        lines.append(f"#define REG_{i}_{r} (*(volatile uint32_t *)0x{0x40000000 + 4 * r + 0x1000 * i:08x}u)")
    lines.append(f"#if defined(BOARD_REV) && BOARD_REV >= {rng.randint(1, 4)}")
    lines.append(f"#define GAIN_SHIFT_{i} {rng.randint(2, 6)}")
    lines.append("#else")
    lines.append(f"#define GAIN_SHIFT_{i} {rng.randint(2, 6)}")
    lines.append("#endif")
    lines.append(f"#define LPF_{i}(y, u, k) ((y) += ((u) - (y)) >> (k))")
    lines.append("#endif")
    return lines


def driver(i, rng):
    n_smooth = rng.randint(1, 4)
    lines = ["#include <stdint.h>", f'#include "regs_{i % 50}.h"', ""]
    lines.append("typedef struct { float k; float y; } lpf_t;")
    for n in range(n_smooth):
        lines.append(f"static int32_t s_{n}, acc_{n}, integ_{n}, count_{n}, peak_{n}, total_{n};")
        lines.append(f"static float f_{n};")
    lines.append(f"static lpf_t flt_{i};")
    lines.append(f"static void lpf_init_{i}(lpf_t *f, float k) {{ f->k = k; f->y = 0.0f; }}")
    lines.append(f"static float lpf_apply_{i}(lpf_t *f, float x) {{ f->y += f->k * (x - f->y); return f->y; }}")
    lines.append(f"void setup_{i}(void) {{ lpf_init_{i}(&flt_{i}, 0.0{rng.randint(1, 9)}f); }}")
    # Code with no smoother: the bulk of real firmware.
    for h in range(rng.randint(8, 30)):
        lines.append(f"int helper_{i}_{h}(int a, int b)")
        lines.append("{")
        lines.append(f"    int t = a * {rng.randint(2, 9)} + b;")
        lines.append(f"    if (t > {rng.randint(50, 500)}) {{")
        lines.append("        t -= b;")
        lines.append("    } else {")
        lines.append(f"        t = (t << 1) | {rng.randint(0, 7)};")
        lines.append("    }")
        lines.append("    for (int q = 0; q < 4; q++) {")
        lines.append("        t ^= q;")
        lines.append("    }")
        lines.append(f"    REG_{i % 50}_{h % 20} = (uint32_t)t;")
        lines.append("    return t;")
        lines.append("}")
    lines.append(f"void tick_{i}(int32_t u, float v, float e)")
    lines.append("{")
    for n in range(n_smooth):
        form = rng.choice(FORMS)
        d = rng.choice([4, 8, 16, 32])
        lines.append(form.format(n=n, k=rng.randint(2, 6), d=d, dm1=d - 1, q=rng.randint(500, 8000)))
        lines.append(rng.choice(FLOAT_FORMS).format(n=n, a=f"0.{rng.randint(1, 9)}"))
        lines.append(rng.choice(DECOYS).format(n=n))
    lines.append(f"    LPF_{i % 50}(s_0, u, GAIN_SHIFT_{i % 50});")
    lines.append(f"    (void)lpf_apply_{i}(&flt_{i}, v);")
    lines.append("}")
    return lines


def main():
    if len(sys.argv) < 3:
        sys.exit(__doc__)
    out, target = sys.argv[1], int(sys.argv[2])
    rng = random.Random(int(sys.argv[3]) if len(sys.argv) > 3 else 1)
    os.makedirs(os.path.join(out, "inc"), exist_ok=True)
    os.makedirs(os.path.join(out, "src"), exist_ok=True)
    total = 0
    for i in range(50):
        text = header(i, rng)
        with open(os.path.join(out, "inc", f"regs_{i}.h"), "w") as f:
            f.write("\n".join(text) + "\n")
        total += len(text)
    i = 0
    while total < target:
        text = driver(i, rng)
        sub = os.path.join(out, "src", f"mod{i // 200}")
        os.makedirs(sub, exist_ok=True)
        with open(os.path.join(sub, f"drv_{i}.c"), "w") as f:
            f.write("\n".join(text) + "\n")
        total += len(text)
        i += 1
    print(f"{out}: {i} drivers, {total} lines")


if __name__ == "__main__":
    main()
