#!/usr/bin/env python3
"""Benchmark of `legwork estimate` against the side-by-side anchors in the shared
bench directory (numpy MBAR, pandas parsing), measured in one run on the same input.

usage: benches/estimate.py [--runs N] [--states K] [--samples N] [--bench DIR]

Builds legwork in release mode, writes K window tables of N samples with the
anchor's generator, then alternates the commands N times and prints the medians:
end-to-end wall time of `legwork estimate --method mbar` vs mbar_numpy.py, the
MBAR solve (legwork's `mbar_solve_s`, which includes the BAR start, Newton and the
covariance) vs numpy's `solve_s`, reading throughput (legwork's `read_s`) vs
parse_pandas.py, and legwork's peak resident memory (from /usr/bin/time) vs the
size of the energies held as f64. Ratios only: these machines are noisy."""
import argparse, json, os, statistics, subprocess, sys, tempfile, time

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.dirname(here)
ap = argparse.ArgumentParser()
ap.add_argument("--runs", type=int, default=5)
ap.add_argument("--states", type=int, default=30)
ap.add_argument("--samples", type=int, default=20000)
ap.add_argument("--bench", default=os.environ.get("LEGWORK_BENCH_DIR", "/work/shared/bench"))
ap.add_argument("--data", default=None, help="reuse/keep the generated tables here")
a = ap.parse_args()
py = sys.executable

subprocess.run(["cargo", "build", "--release", "--quiet", "--bin", "legwork"], cwd=root, check=True)
exe = os.path.join(root, "target", "release", "legwork")
data = a.data or tempfile.mkdtemp(prefix="legwork-bench-")
files = sorted(os.path.join(data, f) for f in os.listdir(data) if f.endswith(".tsv")) if os.path.isdir(data) else []
if len(files) != a.states:
    subprocess.run([py, os.path.join(a.bench, "harmonic_windows.py"), str(a.states), str(a.samples), "1", data], check=True)
    files = sorted(os.path.join(data, f) for f in os.listdir(data) if f.endswith(".tsv"))
nbytes = sum(os.path.getsize(f) for f in files)
energy_bytes = a.states * a.samples * a.states * 8

def timed(cmd):
    """(wall seconds, peak RSS in bytes, stdout) of one run, via /usr/bin/time."""
    t = time.perf_counter()
    p = subprocess.run(["/usr/bin/time", "-f", "%M"] + cmd, capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t
    rss = int(p.stderr.strip().splitlines()[-1]) * 1024
    return wall, rss, p.stdout

rows = {k: [] for k in ("e2e", "np_e2e", "solve", "solve_all", "np_solve", "read_mbps", "pd_mbps", "rss", "dg", "dg_all", "np_dg")}
for r in range(a.runs + 1):
    w, rss, out = timed([exe, "estimate", "--method", "mbar", "--unit", "kT", "--json"] + files)
    ours = json.loads(out)
    _, _, out_all = timed([exe, "estimate", "--method", "mbar", "--unit", "kT", "--json", "--equilibration", "none", "--subsample", "none"] + files)
    every = json.loads(out_all)
    w2, _, out2 = timed([py, os.path.join(a.bench, "mbar_numpy.py")] + files)
    ref = json.loads(out2)
    _, _, out3 = timed([py, os.path.join(a.bench, "parse_pandas.py")] + files)
    pd = json.loads(out3)
    if r == 0:
        continue  # warm-up: page cache, CPU frequency
    rows["e2e"].append(w); rows["np_e2e"].append(w2)
    rows["solve"].append(ours["mbar_solve_s"]); rows["np_solve"].append(ref["solve_s"])
    rows["read_mbps"].append(nbytes / ours["read_s"] / 1e6); rows["pd_mbps"].append(pd["mb_per_s"])
    rows["rss"].append(rss)
    rows["solve_all"].append(every["mbar_solve_s"]); rows["dg_all"].append(every["estimates"]["mbar"]["delta_g"])
    rows["dg"].append(ours["estimates"]["mbar"]["delta_g"]); rows["np_dg"].append(ref["delta_f_kT"])

m = {k: statistics.median(v) for k, v in rows.items()}
print(f"input: {a.states} states x {a.samples} samples, {nbytes/1e6:.0f} MB of text, energies {energy_bytes/1e6:.0f} MB as f64; {a.runs} runs, medians")
print(f"end to end   legwork {m['e2e']:.3f} s   numpy {m['np_e2e']:.3f} s   speed-up {m['np_e2e']/m['e2e']:.1f}x (want >= 10)")
print(f"MBAR solve   legwork {m['solve']:.4f} s  numpy {m['np_solve']:.3f} s   speed-up {m['np_solve']/m['solve']:.1f}x (want >= 20)")
print(f"  same frames (--equilibration none --subsample none): legwork {m['solve_all']:.4f} s, speed-up {m['np_solve']/m['solve_all']:.1f}x")
print(f"reading      legwork {m['read_mbps']:.0f} MB/s  pandas {m['pd_mbps']:.0f} MB/s  ratio {m['read_mbps']/m['pd_mbps']:.1f}x (want >= 5)")
print(f"peak memory  legwork {m['rss']/1e6:.0f} MB = {m['rss']/energy_bytes:.2f}x the energies (want <= 2)")
print(f"ΔF (kT)      numpy {m['np_dg']:.12f}; legwork on the same frames {m['dg_all']:.12f} (difference {abs(m['dg_all']-m['np_dg']):.1e}); legwork default (subsampled) {m['dg']:.6f}")
