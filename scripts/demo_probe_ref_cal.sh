#!/bin/sh
# Reproduce the report of the probe-ref-cal demo shown in README.md: last year's calibration
# first (so the history holds a curve whose criteria were met), then this year's with
# --as-found against it. Usage: scripts/demo_probe_ref_cal.sh [OUT_DIR]
# (FITWRIGHT names the binary; default: target/debug/fitwright, built by `cargo build`).
set -eu
root=$(cd "$(dirname "$0")/.." && pwd)
out=${1:-/tmp/probe-ref-cal-demo}
bin=${FITWRIGHT:-$root/target/debug/fitwright}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# Last year's run: its data file and measurement date, and no amendment.
sed -e "s#\"../demo-data/probes/tp14-2026-11.csv\"#\"$root/demo-data/probes/tp14-2025-11.csv\"#" \
    -e 's#^measured_on = .*#measured_on = 2025-11-27#' \
    -e '/^supersedes = /d' \
    "$root/recipes/probe-ref-cal.toml" > "$tmp/probe-ref-cal.toml"
SOURCE_DATE_EPOCH=1764252000 "$bin" run --out "$out" "$tmp/probe-ref-cal.toml"
SOURCE_DATE_EPOCH=1796029200 "$bin" run --out "$out" --as-found "$root/recipes/probe-ref-cal.toml"
