"""What the trustworthy verdicts cost: this checkout beside an earlier commit, in one run.

The checks now take the network in its fault state (a second factorisation where a circuit
has nonlinear elements), search every return point of every fuse's fault, find each load's
feeding terminals, bound the round-off of every current (one more right-hand side per solve),
and run as one set of rules on arrays in studies. This script times, alternating between the
two versions in fresh processes (medians of ``--repeat`` runs each, interleaved so that the
machine's load falls on both alike):

1. ``solve()`` with every check, for each demo circuit (milliseconds, in-process, after a warm-up);
2. a spread of the shed demo (``--samples`` samples, every tolerance element by element), samples/s;
3. the same spread with ``--fault``;
4. the solve of a square grid of 1 ohm resistors (``--grid`` nodes a side), seconds.

Run from the repository root::

    python bench/verdicts_bench.py --base e121326
    python bench/verdicts_bench.py --base e121326 --samples 5000 --repeat 3   # quicker look

The base commit is checked out into a temporary worktree, which is removed afterwards.
"""

from __future__ import annotations

import argparse
import json
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent

PROBE = r"""
import json, sys, time, glob
sys.path.insert(0, sys.argv[1])
import dcnet
from dcnet.analysis import studies
what, arg = sys.argv[2], sys.argv[3]
out = {}
if what == "demos":
    for f in sorted(glob.glob(sys.argv[1] + "/circuits/*.dcn")):
        net = dcnet.load(f); net.solve()
        best = []
        for _ in range(5):
            net = dcnet.load(f)
            t = time.perf_counter(); net.solve(); best.append(time.perf_counter() - t)
        out[f.rsplit("/", 1)[1]] = sorted(best)[2] * 1e3
elif what in ("spread", "fault"):
    n = int(arg)
    shed = sys.argv[1] + "/circuits/shed-bank-spread.dcn"
    studies.spread(shed, 256, seed=1, independent=["r_mono", "emf_mono", "lead_r"], fault=(what == "fault"))
    t = time.perf_counter()
    studies.spread(shed, n, seed=1, independent=["r_mono", "emf_mono", "lead_r"], fault=(what == "fault"))
    out["samples_per_s"] = n / (time.perf_counter() - t)
elif what == "grid":
    side = int(arg)
    lines = ["cell S n0_0 gnd emf=12V r=10mOhm", f"load L n{side - 1}_{side - 1} gnd r=2Ohm", "ground gnd"]
    for i in range(side):
        for j in range(side):
            if i + 1 < side:
                lines.append(f"resistor H{i}_{j} n{i}_{j} n{i + 1}_{j} r=1Ohm")
            if j + 1 < side:
                lines.append(f"resistor V{i}_{j} n{i}_{j} n{i}_{j + 1} r=1Ohm")
    net = dcnet.parse("\n".join(lines))
    t = time.perf_counter(); net.solve(); out["solve_s"] = time.perf_counter() - t
print(json.dumps(out))
"""


def probe(tree: Path, what: str, arg: str = "0") -> dict:
    res = subprocess.run([sys.executable, "-c", PROBE, str(tree), what, arg], capture_output=True, text=True, check=True)
    return json.loads(res.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--base", required=True, help="the earlier commit to compare with")
    ap.add_argument("--samples", type=int, default=20_000)
    ap.add_argument("--fault-samples", type=int, default=4_000)
    ap.add_argument("--grid", type=int, default=150)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="dcnet-base-"))
    try:
        subprocess.run(["git", "-C", str(REPO), "worktree", "add", "--detach", str(tmp / "base"), args.base], check=True, capture_output=True)
        trees = {"base": tmp / "base", "now": REPO}
        rows = {}
        for what, arg, key in (
            ("spread", str(args.samples), "samples_per_s"),
            ("fault", str(args.fault_samples), "samples_per_s"),
            ("grid", str(args.grid), "solve_s"),
        ):
            runs = {name: [] for name in trees}
            for _ in range(args.repeat):
                for name, tree in trees.items():
                    runs[name].append(probe(tree, what, arg)[key])
            rows[what] = {name: statistics.median(v) for name, v in runs.items()}
        demos = {name: [] for name in trees}
        for _ in range(max(1, args.repeat // 2)):
            for name, tree in trees.items():
                demos[name].append(probe(tree, "demos"))
        print(f"{'measurement':42s} {'base':>12s} {'now':>12s} {'now/base':>9s}")
        labels = {
            "spread": f"spread, {args.samples:,} samples (samples/s)",
            "fault": f"spread --fault, {args.fault_samples:,} samples (samples/s)",
            "grid": f"grid {args.grid}x{args.grid} solve (s)",
        }
        for what, r in rows.items():
            print(f"{labels[what]:42s} {r['base']:12.4g} {r['now']:12.4g} {r['now'] / r['base']:9.2f}")
        for f in sorted(demos["now"][0]):
            b = statistics.median(d[f] for d in demos["base"] if f in d) if f in demos["base"][0] else float("nan")
            n = statistics.median(d[f] for d in demos["now"])
            print(f"{'solve+check ' + f + ' (ms)':42s} {b:12.4g} {n:12.4g} {n / b:9.2f}")
    finally:
        subprocess.run(["git", "-C", str(REPO), "worktree", "remove", "--force", str(tmp / "base")], capture_output=True)
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
