#!/usr/bin/env python3
# Reference values for the expression engine's exponential (src/expr/exp.rs), written once
# to tests/data/reference_exp.json and read by tests/exp_reference.rs.
#
# Command (from the crate root):
#     pip install mpmath && python3 scripts/reference_exp.py
#
# Source of the values: mpmath (PyPI), exp evaluated with 60 significant digits. For each
# argument x (a double, stored as its 64-bit pattern in hex) the file holds the correctly
# rounded double nearest e^x ("hi", hex bits) and the rest e^x - hi rounded to double ("lo"),
# so a test can measure the error of a computed value in units in the last place as
# ((value - hi) - lo) / ulp(hi).
#
# Arguments (fixed seed, so the file is reproducible): 1,000 uniform in [-1, 1]; 1,000
# uniform in [-708, 708] (the main range of the implementation); 250 each uniform in
# [-745, -708] (subnormal results) and [708, 709.78] (near overflow); the multiples k*ln2/2
# for k = -2040..2040 in steps of 17 rounded to double (reduction boundaries); and small
# magnitudes 2^-60 .. 2^-1.
import json
import random
import struct

import mpmath

mpmath.mp.dps = 60


def bits(v):
    return struct.unpack("<Q", struct.pack("<d", v))[0]


def entry(x):
    e = mpmath.exp(mpmath.mpf(x))
    hi = float(e)  # mpmath rounds to nearest
    lo = float(e - mpmath.mpf(hi)) if hi not in (0.0, float("inf")) else 0.0
    return [f"{bits(x):016x}", f"{bits(hi):016x}", f"{bits(lo):016x}"]


def main():
    rng = random.Random(20261202)
    xs = []
    xs += [rng.uniform(-1.0, 1.0) for _ in range(1000)]
    xs += [rng.uniform(-708.0, 708.0) for _ in range(1000)]
    xs += [rng.uniform(-745.0, -708.0) for _ in range(250)]
    xs += [rng.uniform(708.0, 709.78) for _ in range(250)]
    ln2 = mpmath.log(2)
    xs += [float(k * ln2 / 2) for k in range(-2040, 2041, 17)]
    for e in range(1, 61):
        xs += [2.0 ** -e, -(2.0 ** -e)]
    out = {
        "source": "mpmath " + mpmath.__version__ + ", exp at 60 significant digits",
        "command": "python3 scripts/reference_exp.py",
        "values": [entry(x) for x in xs],
    }
    with open("tests/data/reference_exp.json", "w") as f:
        f.write("{\n")
        f.write(f' "source": {json.dumps(out["source"])},\n')
        f.write(f' "command": {json.dumps(out["command"])},\n')
        f.write(' "columns": ["x", "hi", "lo"],\n')
        f.write(' "values": [\n')
        f.write(",\n".join("  " + json.dumps(v) for v in out["values"]))
        f.write("\n ]\n}\n")


if __name__ == "__main__":
    main()
