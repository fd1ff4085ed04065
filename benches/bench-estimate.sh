#!/usr/bin/env bash
# `legwork estimate` against the numpy/pandas anchors (benches/estimate.py).
set -euo pipefail
cd "$(dirname "$0")/.."
py="${LEGWORK_PYTHON:-.venv/bin/python}"
exec "$py" benches/estimate.py --bench "${LEGWORK_BENCH_ANCHORS:-$(cd .. && pwd)/shared/bench}" "$@"
