#!/usr/bin/env python3
"""Generate the invented data of the probe-ref-cal demo (recipes/probe-ref-cal.toml).

Freezer-monitoring thermistor probe TP-14 read against a reference platinum resistance
thermometer in a stirred bath, once in 2025-11 and once in 2026-11 (the probe's B drifts a
little). Beta model R = R25*exp(B*(1/(T+273.15) - 1/298.15)); the bath temperature is what the
reference thermometer reads (to 0.001 °C); the probe's resistance carries 0.02 % relative
noise and is read to 0.1 Ω. Everything here is invented.

Run from the repository root:  python3 scripts/make_probe_ref_data.py
Only the Python standard library is used; the seed is fixed, so the files are reproducible.
"""
import math
import os
import random

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "demo-data", "probes")


def calibration(rng, label, r25, beta):
    rows = []
    for setpoint in range(-30, 65, 5):
        t_ref = setpoint + rng.gauss(0, 0.03)
        t_ref = round(t_ref, 3)
        r = r25 * math.exp(beta * (1 / (t_ref + 273.15) - 1 / 298.15)) * (1 + rng.gauss(0, 0.0002))
        rows.append((f"{t_ref:.3f}", f"{r:.1f}"))
    path = os.path.join(ROOT, f"tp14-{label}.csv")
    with open(path, "w", newline="\n") as f:
        f.write(f"# Freezer probe TP-14 against reference PRT REF-PRT-2, stirred bath B1, {label}\n")
        f.write("t_ref_c,r_probe_ohm\n")
        for t, r in rows:
            f.write(f"{t},{r}\n")


def main():
    rng = random.Random(20261127)
    calibration(rng, "2025-11", 10012.0, 3947.0)
    calibration(rng, "2026-11", 10020.0, 3953.5)


if __name__ == "__main__":
    main()
