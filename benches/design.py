"""Pilot-derived λ schedules on the demo's hardest edges (issue target: the
smallest adjacent overlap >= 0.03 with no more windows than the uniform
schedule), measured by running the demo engine on the proposed states.

For each hard edge and leg: `legwork propose lambdas --json` on replica 1's
windows of a collected demo campaign; then the demo engine samples every
proposed state (same wells, 2000 frames, same correlation) and
`legwork estimate --json` measures the overlap. The demo engine's answers are
exact, so the proposal's MBAR ΔG is also compared with the engine's --exact.

Usage: design.py --bin DIR --root CAMPAIGN_ROOT [--edges a+b,...]
"""
import argparse
import json
import re
import subprocess
import sys
import tempfile
from pathlib import Path


def run(cmd):
    out = subprocess.run(cmd, capture_output=True, text=True)
    if out.returncode != 0:
        sys.exit(f"{' '.join(map(str, cmd))} failed:\n{out.stderr}")
    return out.stdout


def well_args(task_sh):
    text = Path(task_sh).read_text()
    keep = []
    for flag in ["--a-offset", "--a-k", "--a-shift", "--b-offset", "--b-k", "--b-shift",
                 "--dimensions", "--temperature", "--unit", "--phi"]:
        m = re.search(re.escape(flag) + r"\s+(\S+)", text)
        if m:
            keep += [flag, m.group(1)]
    return keep


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", required=True)
    ap.add_argument("--root", required=True)
    ap.add_argument("--edges", default="ork-05+ork-06,ork-07+ork-08,ork-05+ork-08")
    ap.add_argument("--min-overlap", default="0.03")
    a = ap.parse_args()
    lw = Path(a.bin) / "legwork"
    eng = Path(a.bin) / "legwork-demo-engine"
    root = Path(a.root)
    print(f"{'edge/leg':<26} {'uniform':>7} {'proposed':>8} {'pilot min':>9} "
          f"{'predicted':>9} {'measured':>8} {'MBAR ΔG':>9} {'exact':>8} {'σ':>6}")
    ok = True
    for edge in a.edges.split(","):
        for leg in ["complex", "solvent"]:
            wins = sorted((root / edge / leg / "r1").glob("w*/production/window.tsv"))
            prop = json.loads(run([lw, "propose", "lambdas", "--json", "--min-overlap",
                                   a.min_overlap, *wins]))
            lam = prop["proposal"]["lambdas"]
            params = well_args(wins[0].parent / "task.sh")
            lams = ",".join(f"{x:.6f}" for x in lam)
            with tempfile.TemporaryDirectory() as d:
                files = []
                for s in range(len(lam)):
                    f = Path(d) / f"w{s:02}.tsv"
                    run([eng, "run", *params, "--lambdas", lams, "--state", str(s),
                         "--frames", "2000", "--seed", str(9000 + s), "--attempt", "1",
                         "--output", f])
                    files.append(f)
                est = json.loads(run([lw, "estimate", "--json", "--method", "mbar", *files]))
            exact = json.loads(run([eng, "run", *params, "--lambdas", lams, "--exact", "--json"]))
            dg = est["estimates"]["mbar"]
            measured = est["min_adjacent_overlap"]
            pilot = min(prop["pilot"]["measured_adjacent_overlap"])
            pred = min(prop["proposal"]["predicted_adjacent_overlap"])
            ex = exact.get("delta_g", exact.get("dg"))
            print(f"{edge + '/' + leg:<26} {len(wins):>7} {len(lam):>8} {pilot:>9.3f} "
                  f"{pred:>9.3f} {measured:>8.3f} {dg['delta_g']:>9.3f} {ex:>8.3f} {dg['sigma']:>6.3f}")
            ok &= measured >= float(a.min_overlap) and len(lam) <= len(wins)
    print("target (every measured min overlap >= %s, no more windows than uniform): %s"
          % (a.min_overlap, "met" if ok else "NOT met"))


if __name__ == "__main__":
    main()
