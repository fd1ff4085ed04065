#!/usr/bin/env bash
# Distribution packages for the Slurm and browser tests, installed only when
# missing and only as root.
set -euo pipefail
want=()
command -v slurmctld >/dev/null 2>&1 || want+=(slurm-wlm)
command -v munged >/dev/null 2>&1 || want+=(munge)
command -v chromium >/dev/null 2>&1 || want+=(chromium)
if [ ${#want[@]} -eq 0 ]; then echo "slurm, munge and chromium present"; exit 0; fi
if [ "$(id -u)" != 0 ] || ! command -v apt-get >/dev/null 2>&1; then
  echo "!! not root or no apt-get: cannot install ${want[*]}"; exit 1
fi
export DEBIAN_FRONTEND=noninteractive
apt-get -o DPkg::Lock::Timeout=600 update -qq
apt-get -o DPkg::Lock::Timeout=600 install -y -qq --no-install-recommends "${want[@]}" >/dev/null
echo "installed ${want[*]}"
