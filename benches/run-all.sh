#!/usr/bin/env bash
# Runs every benchmark script in this folder (benches/bench-*.sh) against the
# anchors in ../shared/bench/ (or $LEGWORK_BENCH_ANCHORS) and prints their ratios.
# Benchmarks are never part of the test suite: they need a quiet machine and a
# release build, and report ratios measured in one run, not pass/fail times.
set -euo pipefail
cd "$(dirname "$0")/.."
bash tests/setup/python.sh >/dev/null
export LEGWORK_PYTHON="$PWD/.venv/bin/python"
export LEGWORK_BENCH_ANCHORS="${LEGWORK_BENCH_ANCHORS:-$(cd .. && pwd)/shared/bench}"
cargo build --release --bins
for b in benches/bench-*.sh; do
  [ -e "$b" ] || continue
  echo "== $b"
  bash "$b"
done
