#!/usr/bin/env python3
"""Generate the benchmark inputs of scripts/bench (never committed; default folder
target/bench/, which git ignores).

  python3 scripts/bench/make_data.py large  [--rows 1000000] [--out target/bench/large]
  python3 scripts/bench/make_data.py batch  [--recipes 1000]  [--out target/bench/batch]

`large`: one CSV of a gas sensor's recovery after a gas pulse (invented scenario), the
signal decaying as y = a*exp(-b*t) + c with Gaussian noise, and a nonlinear recipe.
`batch`: many small recipes (thermistor-like exponentials, straight lines, quadratics),
each with its own 12-40 row CSV, all with reports and acceptance criteria.
Seeded, so the files are the same on every run.
"""
import argparse
import os
import random

A, B, C = 4.25, 0.137, 0.61  # true values of the large data set (mV, 1/s, mV)
NOISE = 0.02                  # mV


def large(out, rows):
    os.makedirs(out, exist_ok=True)
    rng = random.Random(20240610)
    path = os.path.join(out, "decay.csv")
    with open(path, "w", newline="\n") as f:
        f.write("t_s,signal_mV\n")
        lines = []
        for i in range(rows):
            t = 60.0 * i / rows
            y = A * pow(2.718281828459045, -B * t) + C + rng.gauss(0.0, NOISE)
            lines.append(f"{t:.6f},{y:.6f}\n")
            if len(lines) >= 65536:
                f.writelines(lines)
                lines.clear()
        f.writelines(lines)
    with open(os.path.join(out, "decay.toml"), "w") as f:
        f.write(f"""# Benchmark (a): {rows} rows, 3-parameter nonlinear model, full run with reports.
name = "bench-decay"
title = "Gas sensor recovery, benchmark data set"

[data]
files = ["decay.csv"]
columns = {{ t = "t_s", y = "signal_mV" }}
units = {{ t = "s", y = "mV" }}

[model]
equation = "y = a*exp(-b*t) + c"
[model.parameters]
a = {{ start = 3.0 }}
b = {{ start = 0.2 }}
c = {{ start = 0.0 }}

[fit]
method = "nonlinear"

[acceptance]
r_squared_min = 0.99
max_abs_residual = 0.2

[report]
dir = "reports"
""")
    print(f"wrote {path} ({rows} rows) and decay.toml")


def batch(out, count):
    os.makedirs(os.path.join(out, "data"), exist_ok=True)
    rng = random.Random(7)
    for k in range(count):
        kind = k % 3
        n = rng.randint(12, 40)
        name = f"cal-{k:04d}"
        rows = []
        if kind == 0:  # thermistor-like: R = r0*exp(beta*(1/T - 1/298.15)), T in K
            r0, beta = rng.uniform(2e3, 2e4), rng.uniform(3300, 4200)
            for i in range(n):
                t = 273.15 + 80.0 * i / (n - 1) - 10.0
                r = r0 * pow(2.718281828459045, beta * (1 / t - 1 / 298.15))
                rows.append((t, r * (1 + rng.gauss(0, 0.002))))
            eq = "R = r0*exp(beta*(1/T - 1/298.15))"
            params = "r0 = { start = 10000.0 }\nbeta = { start = 3500.0 }"
            cols = ("T", "R")
            method = "auto"
        elif kind == 1:  # load cell: straight line
            b0, b1 = rng.uniform(-0.05, 0.05), rng.uniform(1.5, 2.5)
            for i in range(n):
                x = 50.0 * i / (n - 1)
                rows.append((x, b0 + b1 * x + rng.gauss(0, 0.01)))
            eq = "V = b0 + b1*m"
            params = "b0 = {}\nb1 = {}"
            cols = ("m", "V")
            method = "auto"
        else:  # pressure sensor: quadratic
            c0, c1, c2 = rng.uniform(0, 1), rng.uniform(8, 12), rng.uniform(-0.02, 0.02)
            for i in range(n):
                x = 100.0 * i / (n - 1)
                rows.append((x, c0 + c1 * x + c2 * x * x + rng.gauss(0, 0.05)))
            eq = "U = c0 + c1*p + c2*p^2"
            params = "c0 = {}\nc1 = {}\nc2 = {}"
            cols = ("p", "U")
            method = "auto"
        data = os.path.join("data", f"{name}.csv")
        with open(os.path.join(out, data), "w") as f:
            f.write(f"{cols[0]},{cols[1]}\n")
            for x, y in rows:
                f.write(f"{x:.6g},{y:.8g}\n")
        with open(os.path.join(out, f"{name}.toml"), "w") as f:
            f.write(f"""name = "{name}"
[data]
files = ["{data}"]
[model]
equation = "{eq}"
[model.parameters]
{params}
[fit]
method = "{method}"
[acceptance]
r_squared_min = 0.99
runs_p_min = 0.001
[report]
dir = "reports/{{name}}"
""")
    print(f"wrote {count} recipes to {out}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("what", choices=["large", "batch"])
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--recipes", type=int, default=1000)
    ap.add_argument("--out")
    a = ap.parse_args()
    if a.what == "large":
        large(a.out or "target/bench/large", a.rows)
    else:
        batch(a.out or "target/bench/batch", a.recipes)


if __name__ == "__main__":
    main()
