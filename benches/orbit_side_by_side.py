#!/usr/bin/env python3
"""Time `magproof orbit` and a reference orbit-calibration script side by side in one run.

    python3 benches/orbit_side_by_side.py --shared DIR [--log FILE] [--samples N] [--runs K]

Builds nothing: run `cargo build --release` first. DIR holds the reference scripts
`make_orbit_log.py` and `ref_orbit.py` (not part of magproof). Unless --log is given,
writes the benchmark log (1 Hz telemetry from a two-line element set, a solar-array
current regressor, 50 nT noise) with `DIR/make_orbit_log.py` into a temporary folder;
its truth is what that script prints. Then, K times (default 3), runs
`target/release/magproof orbit LOG --plan PLAN --json --no-ground` and
`python3 DIR/ref_orbit.py LOG --plan PLAN` one after the other under `/usr/bin/time`.

Before any time is printed, both answers are checked against the truth: hard iron within
5 nT per axis (50 nT noise on 10^6 samples gives σ ≈ 0.4 nT; 5 nT leaves room for a
model difference), soft iron within 1e-4, the i_solar bias within 5 nT/A. Prints the
median wall time, CPU time and peak memory of each, the ratio, and with --linear the same
for the first tenth of the log (magproof's cost at N against N/10).

Exit status: 0 when every check passed and every target was met (20x, 200 MB, cost
ratio for 10x the samples at most 12), 1 when a target was missed, 2 when an answer was
wrong or a tool is missing.
"""
import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
TIME = "/usr/bin/time"
FORMAT = "%e %U %S %M"


def timed(cmd, out_path):
    with open(out_path, "w") as out:
        p = subprocess.run([TIME, "-f", FORMAT] + cmd, stdout=out, stderr=subprocess.PIPE, text=True)
    last = p.stderr.strip().splitlines()[-1] if p.stderr.strip() else ""
    if p.returncode not in (0, 1):
        sys.exit(f"error: {' '.join(cmd)} exited {p.returncode}:\n{p.stderr}")
    wall, user, sys_, kb = last.split()
    return float(wall), float(user) + float(sys_), int(kb) / 1000.0


def check(name, got, truth):
    hi, w = got["hard_iron_nt"], got["soft_iron"]
    k = next(r["bias_nt_per_unit"] for r in got["regressors"] if r["name"] == "i_solar")
    kt = truth["regressors"][0]["bias_nt_per_unit"]
    err_c = max(abs(hi[a] - truth["hard_iron_nt"][a]) for a in range(3))
    err_w = max(abs(w[i][j] - truth["soft_iron"][i][j]) for i in range(3) for j in range(3))
    err_k = max(abs(k[a] - kt[a]) for a in range(3))
    print(f"{name}: hard iron off the truth by at most {err_c:.2f} nT, soft iron by "
          f"{err_w:.1e}, i_solar bias by {err_k:.2f} nT/A")
    if not (err_c < 5.0 and err_w < 1e-4 and err_k < 5.0):
        sys.exit(f"error: {name} does not agree with the truth; times would mean nothing")


def head(src, dst, rows):
    with open(src) as f, open(dst, "w") as g:
        for n, line in enumerate(f):
            if n > rows:
                break
            g.write(line)


def run_pair(log, plan, truth, runs, tmp, reference=True):
    mp = os.path.join(ROOT, "target", "release", "magproof")
    cmd_mp = [mp, "orbit", log, "--plan", plan, "--json", "--no-ground"]
    cmd_ref = [sys.executable, os.path.join(ARGS.shared, "ref_orbit.py"), log, "--plan", plan]
    res = {"magproof": [], "reference": []}
    for _ in range(runs):
        res["magproof"].append(timed(cmd_mp, os.path.join(tmp, "mp.json")))
        if reference:
            res["reference"].append(timed(cmd_ref, os.path.join(tmp, "ref.json")))
    check("magproof", json.load(open(os.path.join(tmp, "mp.json"))), truth)
    if reference:
        check("reference", json.load(open(os.path.join(tmp, "ref.json"))), truth)
    med = {k: tuple(statistics.median(x[i] for x in v) for i in range(3)) for k, v in res.items() if v}
    for k, (w, c, m) in med.items():
        print(f"  {k:10s} wall {w:7.2f} s   cpu {c:7.2f} s   peak {m:7.1f} MB")
    return med


def main():
    global ARGS
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shared", required=True)
    ap.add_argument("--log")
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--linear", action="store_true")
    ARGS = ap.parse_args()
    if not os.path.exists(TIME):
        sys.exit(2)
    tmp = tempfile.mkdtemp(prefix="orbit-bench-")
    if ARGS.log:
        log = ARGS.log
        truth = json.load(open(os.path.splitext(log)[0] + ".truth.json"))
    else:
        log = os.path.join(tmp, "orbit.csv")
        out = subprocess.run([sys.executable, os.path.join(ARGS.shared, "make_orbit_log.py"), log,
                              str(ARGS.samples)], capture_output=True, text=True, check=True)
        truth = json.loads(out.stdout)
    plan = os.path.splitext(log)[0] + ".toml"
    print(f"nproc {os.cpu_count()}, load before {os.getloadavg()}")
    print(f"log {log}: {truth['samples']} samples")
    med = run_pair(log, plan, truth, ARGS.runs, tmp)
    ratio = med["reference"][0] / med["magproof"][0]
    print(f"magproof is {ratio:.1f}x faster (wall), peak {med['magproof'][2]:.0f} MB")
    ok = ratio >= 20 and med["magproof"][2] <= 200
    if ARGS.linear:
        small = os.path.join(tmp, "tenth.csv")
        head(log, small, truth["samples"] // 10)
        os.link(plan, os.path.splitext(small)[0] + ".toml")
        m_small = run_pair(small, os.path.splitext(small)[0] + ".toml", truth, ARGS.runs, tmp, reference=False)
        cost = med["magproof"][1] / m_small["magproof"][1]
        print(f"cpu cost at N against N/10: {cost:.1f}x (linear: 10x)")
        ok = ok and cost <= 12
    print(f"load after {os.getloadavg()}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
