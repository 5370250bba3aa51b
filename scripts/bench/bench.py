#!/usr/bin/env python3
"""Benchmark drivers for fitwright (SPEC §11, issue 10). Each prints the median, min and max
wall time of several runs and the peak memory (maximum resident set size from
`/usr/bin/time -v`). Speed targets live here, never in timed tests.

  python3 scripts/bench/bench.py large [--runs 5] [--rows 1000000]   # (a) one 1M-row nonlinear run
  python3 scripts/bench/bench.py batch [--runs 3] [--recipes 1000]   # (b) 1,000 small recipes
  python3 scripts/bench/bench.py nist                                 # (c) 54 NIST StRD fits
  python3 scripts/bench/bench.py expr                                 # (d) tape vs recursive
  python3 scripts/bench/bench.py all

Builds `cargo build --release` (and the bench binaries) first. Generated data goes to
target/bench/ (see make_data.py). The machine is shared: read the load average printed with
each result, and prefer the callgrind instruction counts of DEVELOPERS.md for before/after
comparisons of a change.
"""
import argparse
import json
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.path.join(ROOT, "target", "release", "fitwright")
BENCH_DIR = os.path.join(ROOT, "target", "bench")


def sh(cmd, **kw):
    return subprocess.run(cmd, check=True, **kw)


def build():
    sh(["cargo", "build", "--release", "--quiet"], cwd=ROOT)


def bench_binary(name):
    """Path of a bench executable, built with the bench profile."""
    out = subprocess.run(
        ["cargo", "bench", "--bench", name, "--no-run", "--message-format=json", "--quiet"],
        cwd=ROOT, check=True, capture_output=True, text=True).stdout
    for line in out.splitlines():
        try:
            msg = json.loads(line)
        except json.JSONDecodeError:
            continue
        if msg.get("reason") == "compiler-artifact" and msg.get("executable") \
                and msg.get("target", {}).get("name") == name:
            return msg["executable"]
    sys.exit(f"bench binary {name} not found")


def timed(cmd, cwd=None):
    """Run under /usr/bin/time -v: (wall s, user+sys s, max RSS MB, stdout)."""
    p = subprocess.run(["/usr/bin/time", "-v"] + cmd, cwd=cwd, capture_output=True, text=True)
    if p.returncode not in (0, 1):
        sys.stderr.write(p.stdout + p.stderr)
        sys.exit(f"{cmd[0]} failed with exit code {p.returncode}")
    err = p.stderr
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (.+)", err).group(1)
    parts = [float(x) for x in wall.split(":")]
    seconds = sum(v * 60 ** i for i, v in enumerate(reversed(parts)))
    user = float(re.search(r"User time \(seconds\): ([\d.]+)", err).group(1))
    system = float(re.search(r"System time \(seconds\): ([\d.]+)", err).group(1))
    rss_kb = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", err).group(1))
    return seconds, user + system, rss_kb / 1024.0, p.stdout


def load():
    return "load average " + " ".join(f"{v:.2f}" for v in os.getloadavg())


def summary(label, walls, cpus, rss):
    print(f"{label}: wall median {statistics.median(walls):.3f} s, min {min(walls):.3f} s, "
          f"max {max(walls):.3f} s; CPU (user+sys) median {statistics.median(cpus):.3f} s; "
          f"peak memory {max(rss):.0f} MB ({len(walls)} runs; {load()})")


def large(a):
    data = os.path.join(BENCH_DIR, "large")
    recipe = os.path.join(data, "decay.toml")
    csv = os.path.join(data, "decay.csv")
    if not os.path.exists(csv) or sum(1 for _ in open(csv)) - 1 != a.rows:
        sh([sys.executable, os.path.join(ROOT, "scripts/bench/make_data.py"), "large",
            "--rows", str(a.rows), "--out", data])
    walls, cpus, rss = [], [], []
    for _ in range(a.runs):
        out = tempfile.mkdtemp(prefix="fw-bench-")
        w, c, m, _ = timed([BIN, "run", recipe, "--no-history", "--quiet", "--out", out])
        walls.append(w), cpus.append(c), rss.append(m)
        run = next(os.path.join(dp, "result.json") for dp, _, fs in os.walk(out) if "result.json" in fs)
        sizes = {f: os.path.getsize(os.path.join(os.path.dirname(run), f))
                 for f in ("result.json", "report.html", "report.md")}
        shutil.rmtree(out)
    summary(f"(a) {a.rows:,}-row CSV, y = a*exp(-b*t) + c, nonlinear, full run with reports",
            walls, cpus, rss)
    print("    output sizes: " + ", ".join(f"{k} {v / 1e6:.2f} MB" for k, v in sizes.items()))
    print("    targets: under 1 s wall, under 300 MB peak")


def batch(a):
    data = os.path.join(BENCH_DIR, "batch")
    if not os.path.isdir(data) or len([f for f in os.listdir(data) if f.endswith(".toml")]) != a.recipes:
        shutil.rmtree(data, ignore_errors=True)
        sh([sys.executable, os.path.join(ROOT, "scripts/bench/make_data.py"), "batch",
            "--recipes", str(a.recipes), "--out", data])
    walls, cpus, rss = [], [], []
    for _ in range(a.runs):
        out = tempfile.mkdtemp(prefix="fw-bench-")
        cmd = [BIN, "run", data, "--no-history", "--quiet", "--out", out]
        if a.jobs:
            cmd += ["--jobs", str(a.jobs)]
        w, c, m, _ = timed(cmd)
        walls.append(w), cpus.append(c), rss.append(m)
        shutil.rmtree(out)
    summary(f"(b) {a.recipes} small recipes, full batch with reports", walls, cpus, rss)
    print("    target: under 30 s wall")


def nist(a):
    exe = bench_binary("nist_compare")
    w, c, m, out = timed([exe])
    rows = [l.split("\t") for l in out.splitlines()[1:] if l.strip()]
    if not rows:
        print("(c) skipped: the NIST StRD folder was not found (see README)")
        return
    med = {lvl: [float(r[3]) for r in rows if r[1] == lvl] for lvl in ("lower", "average", "higher")}
    print(f"(c) 54 NIST StRD nonlinear fits (per-fit medians over repeated fits, µs; {load()}):")
    for r in rows:
        print(f"    {r[0]:<9} {r[1]:<8} start {r[2]}  median {float(r[3]):9.1f}  "
              f"min {float(r[4]):9.1f}  max {float(r[5]):9.1f}  ({r[6]} fits{'' if r[7] == 'true' else ', NOT converged'})")
    for lvl, v in med.items():
        if v:
            print(f"    {lvl} difficulty: median of the per-fit medians {statistics.median(v):.1f} µs, "
                  f"min {min(v):.1f}, max {max(v):.1f} ({len(v)} fits)")
    allm = [float(r[3]) for r in rows]
    print(f"    all 54: median {statistics.median(allm):.1f} µs, min {min(allm):.1f}, max {max(allm):.1f}; "
          f"peak memory of the bench process {m:.0f} MB")
    print("    target: median under 50 µs for the lower-difficulty problems")


def expr(a):
    exe = bench_binary("expr_eval")
    w, c, m, out = timed([exe])
    print(f"(d) expression tape vs recursive evaluation ({load()}):")
    for line in out.splitlines():
        if "median" in line or "ratio" in line.lower() or "faster" in line:
            print("    " + line.strip())
    print(f"    peak memory of the bench process {m:.0f} MB (1,000,000 points, 4 outputs)")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("what", choices=["large", "batch", "nist", "expr", "all"])
    ap.add_argument("--runs", type=int, default=None)
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--recipes", type=int, default=1000)
    ap.add_argument("--jobs", type=int, default=None)
    a = ap.parse_args()
    build()
    # The microsecond benchmarks first: the batch writes thousands of report files, and their
    # write-back to disk in the following seconds took CPU from the NIST fits measured after
    # it (lower-difficulty median 51.6 us right after the batch, 37.9 us alone).
    todo = ["nist", "expr", "large", "batch"] if a.what == "all" else [a.what]
    for t in todo:
        runs = a.runs
        ns = argparse.Namespace(**vars(a))
        ns.runs = runs or (5 if t == "large" else 3)
        {"large": large, "batch": batch, "nist": nist, "expr": expr}[t](ns)


if __name__ == "__main__":
    main()
