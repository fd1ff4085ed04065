#!/usr/bin/env bash
# A private one-host Grid Engine cell for the tests.
#
#   provision.sh start DIR   installs gridengine-master, -exec and -client when
#                            missing (root and apt-get only; debconf pre-answered
#                            so the packages create no cell of their own), builds
#                            a private SGE_ROOT in DIR (its own cell, classic
#                            flat-file spooling, private ports), starts
#                            sge_qmaster and sge_execd, waits for the queue, and
#                            writes DIR/env (SGE_ROOT, SGE_CELL and the ports).
#   provision.sh stop DIR    stops the daemons and their jobs (by the pids in DIR).
#
# Exit 0 when the cell is up; exit 77 (skip) with a reason when it cannot be: not
# root, no packages and no way to install them. Nothing outside DIR is touched
# except the distribution packages: the machine's own cell (/var/lib/gridengine/
# default) is neither created nor read.
set -euo pipefail
cmd=${1:?start|stop}; dir=${2:?DIR}
mkdir -p "$dir"; dir=$(cd "$dir" && pwd)
here=$(cd "$(dirname "$0")" && pwd)

stop() {
  [ -s "$dir/env" ] || return 0
  # shellcheck disable=SC1091
  . "$dir/env"
  # execd first, with its jobs (-kej), then the qmaster; then make sure by pid.
  qconf -kej "$(hostname)" >/dev/null 2>&1 || true
  qconf -km >/dev/null 2>&1 || true
  # The execd names its spool folder by the name it resolves for itself.
  for f in "$dir"/spool/execd/*/execd.pid "$dir/spool/qmaster/qmaster.pid"; do
    if [ -s "$f" ]; then
      pid=$(cat "$f")
      for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
      kill -9 "$pid" 2>/dev/null || true
      rm -f "$f"
    fi
  done
}
if [ "$cmd" = stop ]; then stop; exit 0; fi
[ "$cmd" = start ] || { echo "usage: provision.sh start|stop DIR" >&2; exit 2; }

if ! [ -x /usr/lib/gridengine/sge_qmaster ] || ! [ -x /usr/lib/gridengine/sge_execd ] ||
   ! command -v qsub >/dev/null; then
  if [ "$(id -u)" != 0 ] || ! command -v apt-get >/dev/null; then
    echo "SKIPPED: gridengine-master/-exec/-client missing and cannot install them (need root and apt-get)" >&2
    exit 77
  fi
  bash "$here/../setup/packages.sh" gridengine >&2 ||
    { echo "SKIPPED: could not install the gridengine packages" >&2; exit 77; }
fi
if [ "$(id -u)" != 0 ]; then
  echo "SKIPPED: the private Grid Engine runs its daemons as root; not root" >&2; exit 77
fi

host=$(hostname)
root="$dir/root"
cell=legwork
common="$root/$cell/common"
spool="$dir/spool"
stop  # a cell left running in DIR by an earlier start
rm -rf "$root" "$spool" "$dir/tmp" "$dir/setup.log"
# Ports from the directory name's hash, in 10000-19999 (below the kernel's
# ephemeral range and apart from tests/slurm/provision.sh's 20000-39999), moved
# on while either one of the pair is taken.
port=$(( 10000 + ($(echo "$dir" | cksum | cut -d' ' -f1) % 4999) * 2 ))
taken() { ss -Htan "( sport = :$1 )" 2>/dev/null | grep -q . ; }
for _ in $(seq 50); do
  if command -v ss >/dev/null && { taken "$port" || taken $((port + 1)); }; then
    port=$(( port + 2 )); [ "$port" -lt 19998 ] || port=10000
  else
    break
  fi
done

mkdir -p "$common" "$spool/qmaster" "$spool/execd" "$dir/tmp"
for d in bin lib utilbin util; do ln -s "/var/lib/gridengine/$d" "$root/$d"; done

# 127.0.0.1 reverse-resolves to `localhost` here while the host has another
# name, and the qmaster then refuses its own clients: one canonical name for
# both. Read when the qmaster starts, so written before.
echo "$host localhost" > "$common/host_aliases"
echo "$host" > "$common/act_qmaster"
echo legworktest > "$common/cluster_name"
cat > "$common/bootstrap" <<CONF
# Private test cell (written by tests/sge/provision.sh).
admin_user              root
default_domain          none
ignore_fqdn             true
spooling_method         classic
spooling_lib            libspoolc
spooling_params         $common;$spool/qmaster
binary_path             /usr/lib/gridengine
qmaster_spool_dir       $spool/qmaster
security_mode           none
listener_threads        2
worker_threads          2
scheduler_threads       1
jvm_threads             0
CONF
cat > "$dir/env" <<ENV
export SGE_ROOT=$root
export SGE_CELL=$cell
export SGE_QMASTER_PORT=$port
export SGE_EXECD_PORT=$((port + 1))
export SGE_CLUSTER_NAME=legworktest
ENV
# shellcheck disable=SC1091
. "$dir/env"

# The global configuration: jobs as root allowed (min_uid 0), scripts not run as
# login shells (a login shell sources the machine's profile, which can be slow or
# wait on locks), accounting written at once so qacct sees a job as soon as it
# ends, and a short load report.
sed -e "s|^execd_spool_dir .*|execd_spool_dir        $spool/execd|" \
    -e 's|^login_shells .*|login_shells           none|' \
    -e 's|^min_uid .*|min_uid                0|' \
    -e 's|^min_gid .*|min_gid                0|' \
    -e 's|^load_report_time .*|load_report_time       00:00:05|' \
    -e 's|^max_unheard .*|max_unheard            00:01:00|' \
    -e 's|^mailer .*|mailer                 /bin/true|' \
    -e 's|^reporting_params .*|reporting_params       accounting=true reporting=false flush_time=00:00:15 joblog=false sharelog=00:00:00 accounting_flush_time=00:00:00|' \
    /usr/share/gridengine/default-configuration > "$dir/configuration"
U=/usr/lib/gridengine
{
  $U/spoolinit classic libspoolc "$common;$spool/qmaster" init
  $U/spooldefaults configuration "$dir/configuration"
  $U/spooldefaults complexes /usr/share/gridengine/util/resources/centry
  $U/spooldefaults usersets /usr/share/gridengine/util/resources/usersets
  $U/spooldefaults managers root
  $U/spooldefaults adminhosts "$host"
} > "$dir/init.log" 2>&1 || { echo "!! initialising the cell failed:" >&2; cat "$dir/init.log" >&2; exit 1; }

# qconf reports success on stderr: keep its words in DIR/setup.log, and show
# them only when a step fails.
q() {
  "$@" >> "$dir/setup.log" 2>&1 ||
    { echo "!! $* failed:" >&2; tail -n 20 "$dir/setup.log" >&2; stop; exit 1; }
}
t0=$(date +%s)
# A client that cannot get through waits for its own timeouts: bound each try.
answers() { timeout 10 qstat -g c >/dev/null 2>&1; }
$U/sge_qmaster
up=no
while [ $(( $(date +%s) - t0 )) -lt 30 ]; do answers && { up=yes; break; }; sleep 0.2; done
if [ "$up" = no ]; then
  echo "!! the private qmaster did not answer; its messages:" >&2
  tail -n 30 "$spool/qmaster/messages" >&2 || true
  stop; exit 1
fi

# The scheduler looks every second and dispatches at once on submission and end.
qconf -ssconf 2>> "$dir/setup.log" | sed -e 's/^schedule_interval .*/schedule_interval 0:0:1/' \
  -e 's/^flush_submit_sec .*/flush_submit_sec 1/' -e 's/^flush_finish_sec .*/flush_finish_sec 1/' \
  > "$dir/sched.conf"
q qconf -Msconf "$dir/sched.conf"
q qconf -as "$host"
cat > "$dir/host.conf" <<CONF
hostname              $host
load_scaling          NONE
complex_values        NONE
user_lists            NONE
xuser_lists           NONE
projects              NONE
xprojects             NONE
usage_scaling         NONE
report_variables      NONE
CONF
q qconf -Ae "$dir/host.conf"
# More slots than the machine has cores: the test's tasks are light, and a
# hanging one must not hold the others back. No load thresholds: a loaded test
# machine must not put the queue in alarm state.
cat > "$dir/queue.conf" <<CONF
qname                 test.q
hostlist              $host
seq_no                0
load_thresholds       NONE
suspend_thresholds    NONE
nsuspend              1
suspend_interval      00:05:00
priority              0
min_cpu_interval      00:05:00
processors            UNDEFINED
qtype                 BATCH INTERACTIVE
ckpt_list             NONE
pe_list               NONE
rerun                 FALSE
slots                 8
tmpdir                $dir/tmp
shell                 /bin/bash
prolog                NONE
epilog                NONE
shell_start_mode      posix_compliant
starter_method        NONE
suspend_method        NONE
resume_method         NONE
terminate_method      NONE
notify                00:00:60
owner_list            NONE
user_lists            NONE
xuser_lists           NONE
subordinate_list      NONE
complex_values        NONE
projects              NONE
xprojects             NONE
calendar              NONE
initial_state         default
s_rt                  INFINITY
h_rt                  INFINITY
s_cpu                 INFINITY
h_cpu                 INFINITY
s_fsize               INFINITY
h_fsize               INFINITY
s_data                INFINITY
h_data                INFINITY
s_stack               INFINITY
h_stack               INFINITY
s_core                INFINITY
h_core                INFINITY
s_rss                 INFINITY
h_rss                 INFINITY
s_vmem                INFINITY
h_vmem                INFINITY
CONF
q qconf -Aq "$dir/queue.conf"
$U/sge_execd
while [ $(( $(date +%s) - t0 )) -lt 60 ]; do
  if timeout 10 qstat -f -q test.q 2>/dev/null | awk '$1 ~ /^test.q@/ && NF == 5 {ok=1} END {exit !ok}'; then
    echo "grid engine up in $(( $(date +%s) - t0 )) s: SGE_ROOT=$SGE_ROOT SGE_CELL=$SGE_CELL SGE_QMASTER_PORT=$SGE_QMASTER_PORT"
    exit 0
  fi
  sleep 0.2
done
echo "!! the private execd did not report; queue state and messages:" >&2
qstat -f >&2 || true
tail -n 30 "$spool/qmaster/messages" "$spool/execd/$host/messages" >&2 || true
stop
exit 1
