#!/usr/bin/env bash
# Coverage of the estimators' error bars at the full replicate counts of issue 14
# (1,200 correlated legs, 40 poor-overlap legs twice, 300 two-component legs, 300
# legs with a slow transient), against those targets; exits 1 when one is missed.
# The integration tests (tests/it/estimate_calibration.rs) run the same scenarios
# with fewer replicates. Optional arguments: scenario (all, correlated, poor,
# components, transient) and replicate count.
set -euo pipefail
cd "$(dirname "$0")/.."
exec cargo run --quiet --release --locked -p legwork-numerics --example calibration -- "$@"
