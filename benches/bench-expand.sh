#!/usr/bin/env bash
# Benchmark of `legwork expand` on a synthetic campaign of 100,000 window tasks
# (250 edges × 2 legs × 5 replicas × 40 windows, plus 2,500 per-leg tasks).
# Prints, measured in the same run:
#   first expand / make_files.py writing the same files   (target ≤ 1.3)
#   unchanged re-expand / first expand                      (target ≤ 0.05)
# Not a test: nothing here asserts a time.
# usage: benches/bench-expand.sh [WORKDIR]   (default: a fresh temporary folder)
set -euo pipefail
cd "$(dirname "$0")/.."
anchor="${LEGWORK_BENCH_ANCHORS:-$(cd .. && pwd)/shared/bench}/make_files.py"
[ -f "$anchor" ] || anchor=/work/shared/bench/make_files.py
cargo build --release --quiet --bin legwork
bin="$(pwd)/target/release/legwork"
work="${1:-$(mktemp -d)}"
mkdir -p "$work/templates"
python3 - "$work" <<'PY'
import sys, os
w = sys.argv[1]
edges, legs, replicas, windows = 250, 2, 5, 40
with open(os.path.join(w, "campaign.yaml"), "w") as f:
    f.write("campaign: bench\nseed: 1\ntemplates: templates\nscheduler: { kind: slurm, options: { partition: gpu } }\n")
    f.write("vars: { engine: /opt/engine/bin/run, steps: 500000 }\nligands:\n")
    for i in range(edges + 1):
        f.write(f"  - {{ id: lig-{i:03d}, vars: {{ charge: {i % 3 - 1} }} }}\n")
    f.write("edges:\n")
    for i in range(edges):
        f.write(f"  - [lig-{i:03d}, lig-{i+1:03d}]\n")
    f.write("legs:\n")
    for name, sign in (("complex", 1), ("solvent", -1))[:legs]:
        f.write(f"  {name}:\n    sign: {sign}\n    lambdas: {{ count: {windows}, spacing: ends }}\n")
        f.write(f"    replicas: {replicas}\n    resources: {{ cpus: 8, gpus: 1, memory: 8G, walltime: 12h }}\n")
        f.write(f"    vars: {{ environment: {name} }}\n")
    f.write("stages:\n  - { name: prepare, per: leg, template: prepare.sh.tera }\n")
    f.write("  - { name: production, per: window, after: [prepare], template: production.sh.tera, output: window.tsv, frames: 5000 }\n")
with open(os.path.join(w, "templates", "prepare.sh.tera"), "w") as f:
    f.write("#!/bin/bash\n# {{ task.id }}\nset -euo pipefail\ncd {{ task.dir | shell_quote }}\n"
            "{{ vars.engine }} prepare --ligands {{ ligand_a.id }} {{ ligand_b.id }} --env {{ vars.environment }}\n")
with open(os.path.join(w, "templates", "production.sh.tera"), "w") as f:
    f.write("""#!/bin/bash
# {{ task.id }}: attempt {{ task.attempt }}{% if task.restart %} (restart){% endif %}
# campaign {{ campaign.name }} at {{ campaign.temperature_K }} K, leg {{ leg.name }} (sign {{ leg.sign }})
set -euo pipefail
cd {{ task.dir | shell_quote }}
export OMP_NUM_THREADS={{ resources.cpus }}
args=(
  --seed {{ task.seed }}
  --state {{ window.index }}
  --lambda {{ window.lambda }}
  --lambdas "{{ lambdas | join(sep=' ') }}"
  --steps {{ vars.steps }}
  --frames {{ task.frames }}
  --from {{ after.prepare.dir | shell_quote }}
  --charge-a {{ ligand_a.vars.charge }} --charge-b {{ ligand_b.vars.charge }}
  --partition {{ scheduler.options.partition }}
)
{% if task.restart %}args+=(--continue checkpoint.chk){% endif %}
{{ vars.engine }} run "${args[@]}" --out {{ task.output | shell_quote }}
""")
PY
now() { python3 -c 'import time; print(time.perf_counter())'; }
rm -rf "$work/tree" "$work/copy"
sync
t0=$(now); "$bin" -q expand "$work/campaign.yaml" --root "$work/tree"; t1=$(now)
first=$(python3 -c "print($t1 - $t0)")
files=$(find "$work/tree" -type f | wc -l)
sync
anchor_json=$(python3 "$anchor" "$work/tree" "$work/copy")
anchor_s=$(python3 -c "import json,sys; print(json.loads(sys.argv[1])['seconds'])" "$anchor_json")
t0=$(now); "$bin" -q expand "$work/campaign.yaml" --root "$work/tree"; t1=$(now)
again=$(python3 -c "print($t1 - $t0)")
python3 - "$files" "$first" "$anchor_s" "$again" <<'PY'
import sys
files, first, anchor, again = int(sys.argv[1]), *map(float, sys.argv[2:])
print(f"files written: {files}")
print(f"first expand        {first:8.3f} s")
print(f"make_files.py       {anchor:8.3f} s")
print(f"unchanged re-expand {again:8.3f} s")
print(f"ratio first / make_files.py   = {first / anchor:.3f}  (target <= 1.3)")
print(f"ratio re-expand / first       = {again / first:.3f}  (target <= 0.05)")
PY
[ -n "${1:-}" ] || rm -rf "$work"
