#!/usr/bin/env bash
# The one test command (README, .ci/run): sets up what the tests need on a fresh
# machine, then runs every test. Safe to run again; each set-up step is skipped
# when already done. Set-up that cannot happen here (not root, no package
# registry) is reported loudly; the tests that need it then say SKIPPED (and fail
# when CI is set), and the last line says the run was incomplete.
set -euo pipefail
cd "$(dirname "$0")/.."
here=$(pwd)

echo "== set-up: python (numpy, scipy, pandas) for the reference checks"
setup_failed=()
bash tests/setup/python.sh || { echo "!! python set-up failed: reference checks will be skipped loudly"; setup_failed+=(python); }
if [ -x "$here/.venv/bin/python" ]; then export LEGWORK_PYTHON="$here/.venv/bin/python"; fi

echo "== set-up: distribution packages (slurm-wlm, munge, gridengine, chromium) when root"
bash tests/setup/packages.sh || { echo "!! package set-up failed: Slurm, Grid Engine and browser tests will be skipped loudly"; setup_failed+=(packages); }

echo "== build and test"
cargo build --workspace --all-targets --locked
cargo test --workspace --all-targets --locked -- --test-threads="${LEGWORK_TEST_THREADS:-2}"
cargo test --workspace --doc --locked
if [ ${#setup_failed[@]} -gt 0 ]; then
    echo "== tests ran, but set-up failed (${setup_failed[*]}): the checks that need it were skipped, so this run is incomplete"
    exit 1
fi
echo "== all tests passed"
