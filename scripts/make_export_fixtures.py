#!/usr/bin/env python3
"""Write the instrument-export fixtures under tests/fixtures/exports/ with general-purpose libraries.

Run from the repository root:
    pip install openpyxl odfpy xlsxwriter
    python3 scripts/make_export_fixtures.py

Workbooks are written by openpyxl (.xlsx), XlsxWriter (.xlsx with stored formula results,
which openpyxl cannot write) and odfpy (.ods); text files by the Python codecs. The values
written are also saved in expected.json, and the SHA-256 of every file (hashlib) in
SHA256SUMS, so that tests compare what fitwright reads with what these libraries wrote.
All benches, probes and names are invented. Workbooks carry timestamps, so re-running the
script changes their bytes (and SHA256SUMS); commit the files and the sums together.
"""
import datetime as dt
import hashlib
import json
import os

import openpyxl
import xlsxwriter
from odf.opendocument import OpenDocumentSpreadsheet
from odf.table import Table, TableCell, TableRow
from odf.text import P

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests", "fixtures", "exports")

# A platinum resistance probe on an invented bench: R = 100·(1 + A·T + B·T²), with the
# IEC 60751 coefficients A = 3.9083e-3, B = -5.775e-7 (the C term below 0 °C is left out:
# these are test values, not a reference table).
SETPOINTS = [-20, 0, 20, 40, 60, 80, 100, 120]


def reading(t, r0=100.0):
    return round(r0 * (1 + 3.9083e-3 * t - 5.775e-7 * t * t), 4)


READINGS = [reading(t) for t in SETPOINTS]
START = dt.datetime(2026, 11, 28, 9, 0, 0)
LOGGED = [START + dt.timedelta(minutes=15 * i) for i in range(len(SETPOINTS))]


def serial(d):
    """Serial day number of the 1900 date system (days since 1899-12-30)."""
    return (d - dt.datetime(1899, 12, 30)).total_seconds() / 86400.0


def path(name):
    return os.path.join(OUT, name)


def plain_rows():
    return [["setpoint_c", "reading_ohm"]] + [[t, r] for t, r in zip(SETPOINTS, READINGS)]


def write_run3_xlsx():
    """openpyxl: first sheet plain; "Run 3" with a preamble, a "Data:" marker, a date column."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Plain"
    for row in plain_rows():
        ws.append(row)
    ws = wb.create_sheet("Run 3")
    ws.append(["Bench B2 export, probe PX-4"])
    ws.append(["Operator: R. Holmqvist"])
    ws.append([])
    ws.append(["Data:"])
    ws.append(["setpoint_c", "reading_ohm", "logged_at", "note"])  # row 5
    for t, r, when in zip(SETPOINTS, READINGS, LOGGED):
        ws.append([t, r, when, "stable"])
    for row in ws.iter_rows(min_row=6, min_col=3, max_col=3):
        for c in row:
            c.number_format = "yyyy-mm-dd hh:mm"
    ws.append([])
    ws.append(["Checked by: —"])  # below the data, outside A5:D13
    ws = wb.create_sheet("Error cell")
    for row in plain_rows():
        ws.append(row)
    ws["B4"] = "#DIV/0!"  # openpyxl stores an error code as an error cell (type "e")
    ws = wb.create_sheet("Text cell")
    for row in plain_rows():
        ws.append(row)
    ws["B7"] = "OVL"
    ws["B8"] = "119,4"  # a number stored as text
    wb.save(path("run3.xlsx"))


def write_formulas_xlsx():
    """XlsxWriter: formula cells with their stored (cached) results."""
    wb = xlsxwriter.Workbook(path("formulas.xlsx"))
    ws = wb.add_worksheet("Calc")
    ws.write_row(0, 0, ["setpoint_c", "reading_ohm", "reading_kohm"])
    for i, (t, r) in enumerate(zip(SETPOINTS, READINGS), start=1):
        ws.write_number(i, 0, t)
        ws.write_number(i, 1, r)
        ws.write_formula(i, 2, f"=B{i + 1}/1000", None, r / 1000)
    wb.close()


def write_nocache_xlsx():
    """openpyxl writes formulas without results: a file nobody calculated."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Calc"
    ws.append(["setpoint_c", "reading_ohm", "reading_kohm"])
    for i, (t, r) in enumerate(zip(SETPOINTS, READINGS), start=2):
        ws.append([t, r, f"=B{i}/1000"])
    wb.save(path("nocache.xlsx"))


def ods_cell(value=None, kind="float", formula=None, text=None):
    if value is None and text is None:
        return TableCell()
    attrs = {"valuetype": kind}
    if kind == "float":
        attrs["value"] = value
    elif kind == "date":
        attrs["datevalue"] = value.strftime("%Y-%m-%dT%H:%M:%S")
    if formula:
        attrs["formula"] = formula
    cell = TableCell(**attrs)
    shown = text if text is not None else (value.isoformat() if kind == "date" else str(value))
    cell.addElement(P(text=shown))
    return cell


def ods_row(cells):
    row = TableRow()
    for c in cells:
        row.addElement(c)
    return row


def write_run3_ods():
    """odfpy: numbers, dates, a formula with its result; error and text cells on other sheets."""
    doc = OpenDocumentSpreadsheet()
    t = Table(name="Run 3")
    t.addElement(ods_row([ods_cell(text=h, kind="string") for h in
                          ["setpoint_c", "reading_ohm", "logged_at", "reading_kohm"]]))
    for i, (s, r, when) in enumerate(zip(SETPOINTS, READINGS, LOGGED), start=2):
        t.addElement(ods_row([
            ods_cell(s), ods_cell(r), ods_cell(when, kind="date"),
            ods_cell(r / 1000, formula=f"of:=[.B{i}]/1000"),
        ]))
    doc.spreadsheet.addElement(t)
    t = Table(name="Error cell")
    t.addElement(ods_row([ods_cell(text=h, kind="string") for h in ["setpoint_c", "reading_ohm"]]))
    for i, (s, r) in enumerate(zip(SETPOINTS, READINGS), start=2):
        if i == 5:
            # How spreadsheet programs store a failed formula: a string result.
            cell = ods_cell(kind="string", text="#DIV/0!", formula="of:=1/0")
        else:
            cell = ods_cell(r)
        t.addElement(ods_row([ods_cell(s), cell]))
    doc.spreadsheet.addElement(t)
    t = Table(name="Text cell")
    t.addElement(ods_row([ods_cell(text=h, kind="string") for h in ["setpoint_c", "reading_ohm"]]))
    for i, (s, r) in enumerate(zip(SETPOINTS, READINGS), start=2):
        cell = ods_cell(kind="string", text="n/a") if i == 6 else ods_cell(r)
        t.addElement(ods_row([ods_cell(s), cell]))
    doc.spreadsheet.addElement(t)
    doc.save(path("run3.ods"))


def write_channels_xlsx():
    """openpyxl: three channels in one sheet, CH2 with an overload reading."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Export"
    ws.append(["channel", "setpoint_c", "reading_ohm"])
    offsets = {"CH1": 0.00, "CH10": 0.05, "CH2": -0.03}
    for t in SETPOINTS[:4]:
        for ch in ["CH10", "CH2", "CH1"]:
            r = reading(t, 100.0 + offsets[ch])
            ws.append([ch, t, "OVL" if (ch == "CH2" and t == 20) else r])
    wb.save(path("channels.xlsx"))


def write_text_files():
    # Decimal comma with a point in one number (mixed separators).
    with open(path("mixed-decimal.csv"), "w", encoding="utf-8", newline="\n") as f:
        f.write("setpoint_c;reading_ohm\n")
        for i, (t, r) in enumerate(zip(SETPOINTS, READINGS)):
            text = f"{r:.4f}" if i == 3 else f"{r:.4f}".replace(".", ",")
            f.write(f"{t};{text}\n")
    # Thousands separators: readings in milliohm, 1.234,5 style.
    with open(path("thousands.csv"), "w", encoding="utf-8", newline="\n") as f:
        f.write("setpoint_c;reading_mohm\n")
        for t, r in zip(SETPOINTS, READINGS):
            whole, frac = f"{r * 1000:.1f}".split(".")
            grouped = f"{int(whole):,}".replace(",", ".")
            f.write(f"{t};{grouped},{frac}\n")
    # Windows-1252 with a preamble (° and µ are single bytes; Ω does not exist in it, so the
    # unit is spelt Ohm, as such exports do), a "Data:" marker and a units row; CRLF lines.
    preamble = [
        "Thermal bench TB-3 export",
        "Probe: PX-4, 100 Ohm at 0 °C, excitation 500 µA",
        "Range: -20 °C … 120 °C",
        "Data:",
    ]
    lines = preamble + ["setpoint;reading", "[°C];[Ohm]"]
    lines += [f"{t};{r:.4f}".replace(".", ",") for t, r in zip(SETPOINTS, READINGS)]
    with open(path("legacy-1252.csv"), "wb") as f:
        f.write(("\r\n".join(lines) + "\r\n").encode("cp1252"))
    # Windows-1253 (Greek) has Ω: the same export from a bench set to a Greek locale.
    lines = ["Bench export", "Data:", "setpoint;reading", "°C;Ω"]
    lines += [f"{t};{r:.4f}".replace(".", ",") for t, r in zip(SETPOINTS, READINGS)]
    with open(path("legacy-1253.csv"), "wb") as f:
        f.write(("\r\n".join(lines) + "\r\n").encode("cp1253"))
    # UTF-16 with a byte-order mark, little- and big-endian.
    lines = ["setpoint_c,reading_ohm", "°C,Ω"] + [f"{t},{r}" for t, r in zip(SETPOINTS, READINGS)]
    text = "\r\n".join(lines) + "\r\n"
    with open(path("utf16le.csv"), "wb") as f:
        f.write(b"\xff\xfe" + text.encode("utf-16-le"))
    tsv = text.replace(",", "\t")
    with open(path("utf16be.tsv"), "wb") as f:
        f.write(b"\xfe\xff" + tsv.encode("utf-16-be"))


def main():
    os.makedirs(OUT, exist_ok=True)
    write_run3_xlsx()
    write_formulas_xlsx()
    write_nocache_xlsx()
    write_run3_ods()
    write_channels_xlsx()
    write_text_files()
    expected = {
        "setpoint_c": SETPOINTS,
        "reading_ohm": READINGS,
        "reading_kohm": [r / 1000 for r in READINGS],
        "reading_mohm": [float(f"{r * 1000:.1f}") for r in READINGS],
        "logged_at_serial": [serial(d) for d in LOGGED],
    }
    with open(path("expected.json"), "w", encoding="utf-8", newline="\n") as f:
        json.dump(expected, f, indent=1)
        f.write("\n")
    names = sorted(n for n in os.listdir(OUT) if n not in ("SHA256SUMS",))
    with open(path("SHA256SUMS"), "w", encoding="utf-8", newline="\n") as f:
        for n in names:
            with open(path(n), "rb") as g:
                f.write(f"{hashlib.sha256(g.read()).hexdigest()}  {n}\n")


if __name__ == "__main__":
    main()
