#!/usr/bin/env bash
# Distribution packages for the Slurm, Grid Engine and browser tests, installed
# only when missing and only as root.
#
#   packages.sh [slurm] [gridengine] [chromium]    (no argument: all three)
#
# Grid Engine's packages would, by default, create the machine's own cell and
# start its daemons; debconf is pre-answered so they create none (so their init
# scripts find nothing to start), and tests/sge/provision.sh builds a private one.
set -euo pipefail
groups=("$@")
[ ${#groups[@]} -gt 0 ] || groups=(slurm gridengine chromium)
want=()
sge=no
for g in "${groups[@]}"; do
  case "$g" in
    slurm)
      command -v slurmctld >/dev/null 2>&1 || want+=(slurm-wlm)
      command -v munged >/dev/null 2>&1 || want+=(munge) ;;
    gridengine)
      if ! [ -x /usr/lib/gridengine/sge_qmaster ] || ! [ -x /usr/lib/gridengine/sge_execd ] ||
         ! command -v qsub >/dev/null 2>&1; then
        want+=(gridengine-master gridengine-exec gridengine-client); sge=yes
      fi ;;
    chromium)
      command -v chromium >/dev/null 2>&1 || want+=(chromium) ;;
    *) echo "!! packages.sh: unknown group $g (slurm, gridengine, chromium)"; exit 2 ;;
  esac
done
if [ ${#want[@]} -eq 0 ]; then echo "present: ${groups[*]}"; exit 0; fi
if [ "$(id -u)" != 0 ] || ! command -v apt-get >/dev/null 2>&1; then
  echo "!! not root or no apt-get: cannot install ${want[*]}"; exit 1
fi
export DEBIAN_FRONTEND=noninteractive
if [ "$sge" = yes ]; then
  # No automatic configuration: no cell under /var/lib/gridengine, no spool.
  debconf-set-selections <<SEL
gridengine-common shared/gridengineconfig boolean false
gridengine-common shared/gridenginecell string default
gridengine-common shared/gridenginemaster string $(hostname)
SEL
fi
apt-get -o DPkg::Lock::Timeout=600 update -qq
apt-get -o DPkg::Lock::Timeout=600 install -y -qq --no-install-recommends "${want[@]}" >/dev/null
echo "installed ${want[*]}"
