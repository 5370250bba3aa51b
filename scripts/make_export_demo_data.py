#!/usr/bin/env python3
"""Generate the invented instrument-export demo data: a sixteen-channel temperature-logger
workbook and a Windows-1252 bench export with a preamble and a units row.

Run from the repository root:
    pip install openpyxl
    python3 scripts/make_export_demo_data.py

The seed is fixed, so the values are reproducible (the .xlsx container carries a timestamp,
so its bytes change on every run). Benches, loggers, probes and names are invented.
"""
import datetime as dt
import math
import os
import random

import openpyxl

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "demo-data")

# Platinum resistance probes: R = R0·(1 + A·T + B·T²), nominal IEC 60751 coefficients
# A = 3.9083e-3, B = -5.775e-7, each probe with its own small deviations.
A_NOM = 3.9083e-3
B_NOM = -5.775e-7
SETPOINTS = [-20, 0, 20, 40, 60, 80, 100]
REPLICATES = 3
BAD_CHANNEL = "CH07"


def logger_workbook(rng):
    """Bench TL-16: sixteen Pt100 probes in one bath, read by a sixteen-channel logger.

    The export interleaves channels: for each set point and replicate, one row per channel.
    Channel CH07 has an overload reading ("OVL") at 100 °C, a deliberately bad cell.
    """
    probes = {}
    for i in range(1, 17):
        probes[f"CH{i:02d}"] = (
            100.0 + rng.gauss(0, 0.03),
            A_NOM * (1 + rng.gauss(0, 2e-4)),
            B_NOM * (1 + rng.gauss(0, 5e-3)),
        )
    wb = openpyxl.Workbook()
    info = wb.active
    info.title = "Info"
    for row in [
        ["Logger", "TL-16 bench logger (invented)"],
        ["Bath", "stirred oil bath SB-2"],
        ["Reference", "SPRT REF-9, certificate C-7714"],
        ["Operator", "M. Okafor-Lind"],
        ["Exported", dt.datetime(2026, 11, 27, 16, 40)],
    ]:
        info.append(row)
    ws = wb.create_sheet("Export")
    ws.append(["channel", "setpoint_c", "bath_c", "reading_ohm", "logged_at"])
    when = dt.datetime(2026, 11, 27, 8, 0)
    for sp in SETPOINTS:
        for rep in range(REPLICATES):
            bath = sp + rng.gauss(0, 0.005)
            for ch, (r0, a, b) in probes.items():
                r = r0 * (1 + a * bath + b * bath * bath) + rng.gauss(0, 0.002)
                value = "OVL" if (ch == BAD_CHANNEL and sp == 100 and rep == 1) else round(r, 4)
                ws.append([ch, sp, round(bath, 4), value, when])
            when += dt.timedelta(minutes=2)
        when += dt.timedelta(minutes=40)
    for row in ws.iter_rows(min_row=2, min_col=5, max_col=5):
        for c in row:
            c.number_format = "yyyy-mm-dd hh:mm"
    path = os.path.join(ROOT, "logger", "tl16-bath-2026-11-27.xlsx")
    os.makedirs(os.path.dirname(path), exist_ok=True)
    wb.save(path)


def legacy_csv(rng):
    """Bench TB-3's old PC export of thermistor probe TH-B3: Windows-1252, a preamble ending in
    "Data:", a header and a units row, decimal comma, CRLF lines.

    Beta model R = R25·exp(B·(1/(T + 273.15) − 1/298.15)) in kΩ (written "kOhm": Windows-1252
    has ° and µ but no Ω), 0.2 % noise.
    """
    r25, beta = 10.02, 3935.0
    lines = [
        "TB-3 thermal bench - measurement export",
        "Probe;TH-B3 (NTC, 10 kOhm at 25 °C)",
        "Bath;stirred water/glycol, -20 °C … 80 °C",
        "Excitation;10 µA",
        "Operator;S. Vandermeer-Ruiz",
        "",
        "Data:",
        "Temperature;Resistance",
        "[°C];[kOhm]",
    ]
    for t in range(-20, 85, 5):
        t_meas = t + rng.gauss(0, 0.02)
        r = r25 * math.exp(beta * (1 / (t_meas + 273.15) - 1 / 298.15)) * (1 + rng.gauss(0, 0.002))
        lines.append(f"{t_meas:.3f};{r:.4f}".replace(".", ","))
    path = os.path.join(ROOT, "legacy", "th-b3-2026-11.csv")
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "wb") as f:
        f.write(("\r\n".join(lines) + "\r\n").encode("cp1252"))


def main():
    rng = random.Random(20261127)
    logger_workbook(rng)
    legacy_csv(rng)


if __name__ == "__main__":
    main()
