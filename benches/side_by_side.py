#!/usr/bin/env python3
"""Time `magproof calibrate` and a reference fitting script side by side in one run.

    python3 benches/side_by_side.py [--log FILE] [--samples N] [--runs K] --shared DIR

Builds nothing: run `cargo build --release` first. Writes the benchmark log with
`DIR/make_big_log.py` (DIR: the folder holding the reference scripts `make_big_log.py`
and `ref_fit.py`; they are not part of magproof) into a
temporary folder unless --log is given, then, K times (default 3), runs
`target/release/magproof calibrate LOG --reference-nt R --json` and
`python3 DIR/ref_fit.py LOG --reference-nt R` one after the other under
`/usr/bin/time` (Debian package `time`), so both see the same machine state.

Before any time is printed, both answers are checked against the truth the log writer
printed: hard iron within 1 nT per axis and soft-iron elements within 1e-4 (a fast wrong
answer is not a result). It then prints the median wall time, CPU time (user + sys) and
peak resident memory of each, the speed ratio, `nproc`, the CPU model and the load
average before and after, and, with --linear, the same for the first tenth of the log
(cost 1e6 against 1e5).

Exit status: 0 when every check passed and every target was met (10x, 150 MB, 12x),
1 when a target was missed, 2 when an answer was wrong or a tool is missing.
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
FORMAT = "%e %U %S %M"  # wall s, user s, sys s, peak RSS KB


def timed(cmd, out_path):
    """Run cmd under /usr/bin/time; return (wall s, cpu s, peak MB) and write stdout."""
    with open(out_path, "w") as out:
        p = subprocess.run([TIME, "-f", FORMAT] + cmd, stdout=out, stderr=subprocess.PIPE, text=True)
    last = p.stderr.strip().splitlines()[-1] if p.stderr.strip() else ""
    if p.returncode not in (0, 1):  # magproof exits 1 when a verdict fails; still a result
        sys.exit(f"error: {' '.join(cmd)} exited {p.returncode}:\n{p.stderr}")
    wall, user, sys_, kb = last.split()
    return float(wall), float(user) + float(sys_), int(kb) / 1000.0


def check(name, got, truth):
    """Refuse to time a wrong answer."""
    hi = got["hard_iron_nt"]
    w = got["soft_iron"]
    err_c = max(abs(hi[a] - truth["hard_iron_nt"][a]) for a in range(3))
    err_w = max(abs(w[i][j] - truth["soft_iron"][i][j]) for i in range(3) for j in range(3))
    print(f"{name}: hard iron off the truth by at most {err_c:.3f} nT, soft iron by {err_w:.1e}")
    if not (err_c < 1.0 and err_w < 1e-4):
        sys.exit(f"error: {name} does not agree with the truth; times would mean nothing")


def machine():
    model = "unknown"
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if line.startswith("model name"):
                    model = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    return f"nproc {os.cpu_count()}, {model}"


def load():
    return "load average {:.2f} {:.2f} {:.2f}".format(*os.getloadavg())


def compare(log, truth, runs, shared, work, label):
    mp_cmd = [os.path.join(ROOT, "target", "release", "magproof"), "calibrate", log,
              "--reference-nt", str(truth["reference_nt"]), "--json"]
    ref_cmd = [sys.executable, os.path.join(shared, "ref_fit.py"), log,
               "--reference-nt", str(truth["reference_nt"])]
    # One warm-up run of each (disk cache, Python imports) that is not counted.
    timed(mp_cmd, os.path.join(work, "mp.json"))
    timed(ref_cmd, os.path.join(work, "ref.json"))
    mp, ref = [], []
    for i in range(runs):
        mp.append(timed(mp_cmd, os.path.join(work, f"mp{i}.json")))
        ref.append(timed(ref_cmd, os.path.join(work, f"ref{i}.json")))
    with open(os.path.join(work, "mp0.json")) as f:
        check(f"magproof ({label})", json.load(f), truth)
    with open(os.path.join(work, "ref0.json")) as f:
        check(f"reference ({label})", json.load(f), truth)
    med = lambda rows, k: statistics.median(r[k] for r in rows)
    print(f"{label}: median of {runs} runs, alternating")
    print(f"  magproof   wall {med(mp, 0):.3f} s  cpu {med(mp, 1):.3f} s  peak {med(mp, 2):.1f} MB"
          f"  (walls {', '.join(f'{r[0]:.3f}' for r in mp)})")
    print(f"  reference  wall {med(ref, 0):.3f} s  cpu {med(ref, 1):.3f} s  peak {med(ref, 2):.1f} MB"
          f"  (walls {', '.join(f'{r[0]:.3f}' for r in ref)})")
    ratio = med(ref, 0) / med(mp, 0)
    print(f"  speed-up (wall) {ratio:.1f}x, (cpu) {med(ref, 1) / med(mp, 1):.1f}x")
    return ratio, med(mp, 1), med(mp, 2)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--log", help="existing log (then --truth is required)")
    ap.add_argument("--truth", help="truth JSON printed by make_big_log.py")
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--linear", action="store_true", help="also time the first tenth")
    ap.add_argument("--shared", required=True)
    a = ap.parse_args()
    if not os.path.exists(TIME):
        sys.exit(f"error: {TIME} not found (apt-get install time)")
    binary = os.path.join(ROOT, "target", "release", "magproof")
    if not os.path.exists(binary):
        sys.exit(f"error: {binary} not found (cargo build --release)")
    work = tempfile.mkdtemp(prefix="magproof-bench-")
    if a.log:
        if not a.truth:
            sys.exit("error: --log needs --truth")
        log = a.log
        with open(a.truth) as f:
            truth = json.load(f)
    else:
        log = os.path.join(work, "big.csv")
        out = subprocess.run([sys.executable, os.path.join(a.shared, "make_big_log.py"), log,
                              str(a.samples)], capture_output=True, text=True, check=True)
        truth = json.loads(out.stdout)
    print(machine())
    print(f"log {log}: {os.path.getsize(log)} bytes; before: {load()}")
    ratio, cpu_big, peak = compare(log, truth, a.runs, a.shared, work, "full log")
    met = ratio >= 10.0 and peak <= 150.0
    if a.linear:
        tenth = os.path.join(work, "tenth.csv")
        with open(log) as src, open(tenth, "w") as dst:
            rows = 0
            for line in src:
                dst.write(line)
                if not line.startswith("#") and line.strip() and line[0] not in "tT":
                    rows += 1
                    if rows >= truth["samples"] // 10:
                        break
        _, cpu_small, _ = compare(tenth, truth, a.runs, a.shared, work, "first tenth")
        print(f"cost of 10x the samples: {cpu_big / cpu_small:.1f}x CPU (target at most 12x; "
              "CPU times this short are coarse, see docs/performance.md for instruction counts)")
        met = met and cpu_big / cpu_small <= 12.0
    print(f"after: {load()}")
    print("targets met" if met else "a target was missed")
    sys.exit(0 if met else 1)


if __name__ == "__main__":
    main()
