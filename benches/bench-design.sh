#!/usr/bin/env bash
# Pilot-derived λ schedules on the demo's hardest edges, measured with the demo
# engine (benches/design.py). Runs the demo campaign first unless
# LEGWORK_DESIGN_ROOT names a collected demo root.
set -euo pipefail
cd "$(dirname "$0")/.."
py="${LEGWORK_PYTHON:-.venv/bin/python}"
bin="${LEGWORK_BIN:-target/release}"
[ -x "$bin/legwork" ] || cargo build --release --locked
root="${LEGWORK_DESIGN_ROOT:-}"
if [ -z "$root" ]; then
  root="$(mktemp -d)/orrin"
  "$bin/legwork" -q run campaigns/demo.yaml --root "$root" >/dev/null
fi
exec "$py" benches/design.py --bin "$bin" --root "$root" "$@"
