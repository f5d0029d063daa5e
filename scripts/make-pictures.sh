#!/usr/bin/env bash
# Regenerate the README's pictures in docs/ from the demo scenarios
# (needs rsvg-convert, from Debian's librsvg2-bin).
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
H="${CARGO_TARGET_DIR:-target}/release/halfwire"
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
$H run scenarios/buoy-link.toml --plot-timing docs/timing-buoy.svg --window 10ms..10.2ms >/dev/null
$H run scenarios/fruit-grader.toml --plot-timing docs/timing-fruit-grader.svg --window 107us..108.5us >/dev/null
$H run scenarios/vineyard-probes.toml --plot-timing docs/timing-vineyard.svg --vcd docs/vineyard-collision.vcd --window 2.0088s..2.0094s >/dev/null
$H run scenarios/fruit-grader.toml --plot-latency docs/latency-fruit-grader.svg >/dev/null
$H sweep scenarios/fruit-grader.toml --vary "nodes.traffic.rate=1000/s..4000/s step 500/s" \
    --vary "access.turnaround=20ns,500ns,1us" --out "$T/rows.jsonl" \
    --plot docs/sweep-fruit-grader.svg --y latency_s.all.p99 2>/dev/null
for f in docs/*.svg; do
    rsvg-convert "$f" -o "${f%.svg}.png"
done
ls -l docs/
