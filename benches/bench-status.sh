#!/usr/bin/env bash
# One status poll and a journal replay at 100,000 tasks (benches/status.rs).
set -euo pipefail
cd "$(dirname "$0")/.."
exec cargo bench --quiet --bench status
