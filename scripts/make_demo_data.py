#!/usr/bin/env python3
"""Generate the invented demo data under demo-data/ from known parameter values plus noise.

Run from the repository root:  python3 scripts/make_demo_data.py
Only the Python standard library is used; the seeds are fixed, so the files are reproducible.
All scenarios, instruments and names are invented for the demo.
"""
import math
import os
import random

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "demo-data")


def write(rel, header, rows, comment=None):
    path = os.path.join(ROOT, rel)
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "w", newline="\n") as f:
        if comment:
            for line in comment:
                f.write(f"# {line}\n")
        f.write(",".join(header) + "\n")
        for r in rows:
            f.write(",".join(r) + "\n")


def thermistor_month(rng, month, r25, beta):
    """Cold-room probe CR-A7: beta model R = R25·exp(B·(1/(T+273.15) − 1/298.15)), 0.2 % noise."""
    rows = []
    for t in range(-30, 65, 5):
        t_meas = t + rng.gauss(0, 0.02)
        r = r25 * math.exp(beta * (1 / (t_meas + 273.15) - 1 / 298.15)) * (1 + rng.gauss(0, 0.002))
        rows.append([f"{t_meas:.3f}", f"{r:.2f}"])
    write(f"probes/a7-2026-{month:02d}.csv", ["temp_c", "resistance_ohm"], rows,
          [f"Cold-room probe CR-A7, bench B2, calibration of 2026-{month:02d}", "reference: PRT in stirred bath"])


def main():
    rng = random.Random(20261201)
    # Six monthly calibrations of the same probe; B drifts slowly.
    for i, month in enumerate(range(6, 12)):
        thermistor_month(rng, month, 10000.0 * (1 + 0.0004 * i), 3950.0 * (1 - 0.0003 * i))

    # Gas sensor G12: power law Rs/R0 = a·c^b with 1 % multiplicative noise.
    rows = []
    for c in [10, 20, 50, 100, 200, 500, 1000, 2000]:
        v = 4.2 * c ** -0.38 * (1 + rng.gauss(0, 0.01))
        rows.append([f"{c}", f"{v:.5f}"])
    write("gas/g12-service-2026-10.csv", ["ppm", "rs_r0"], rows)

    # Load cell LC3: quadratic, three replicates per load, additive noise.
    rows = []
    for load in range(0, 110, 10):
        for rep in range(3):
            v = 0.002 + 0.02 * load - 1.5e-6 * load ** 2 + rng.gauss(0, 0.0004)
            rows.append([f"{load}", f"{rep + 1}", f"{v:.5f}"])
    write("loadcell/lc3-2026.csv", ["load_kg", "replicate", "output_mv_v"], rows)

    # Assay standard curve: straight line, duplicates.
    rows = []
    for c in [0, 5, 10, 25, 50, 100, 150, 200]:
        for rep in range(2):
            a = 0.045 + 0.0062 * c + rng.gauss(0, 0.004)
            rows.append([f"{c}", f"{a:.4f}"])
    write("assay/std-curve-b0417.csv", ["conc_ng_ml", "absorbance"], rows)

    # Enzyme electrode E4: saturation y = Vmax·x/(K + x) with additive noise, so the
    # reciprocal transform distorts it. Its own seed was chosen so that the unweighted
    # reciprocal fit has R² above 0.999 yet fails the runs test (residual signs cluster).
    erng = random.Random(123)
    rows = []
    for x in [0.1, 0.15, 0.2, 0.3, 0.4, 0.5, 0.75, 1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0]:
        v = 48.0 * x / (0.9 + x) + erng.gauss(0, 0.3)
        rows.append([f"{x}", f"{v:.3f}"])
    write("enzyme/e4-2026-11.csv", ["substrate_mm", "current_na"], rows)

    # Pressure transducer PT-9: its response has become non-linear; a straight line fails.
    rows = []
    for p in range(0, 11):
        v = 4.0 + 1.6 * p + 0.012 * p ** 2 + rng.gauss(0, 0.004)
        rows.append([f"{p}", f"{v:.4f}"])
    write("pressure/pt9-2026-11.csv", ["pressure_bar", "current_ma"], rows)


if __name__ == "__main__":
    main()
