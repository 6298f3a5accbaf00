"""Studies at scale: spread throughput, a folder of small files, a sweep; each beside its baseline.

Three measurements, each against what it replaces:

1. **spread**: ``dcnet spread``'s work (draws, per-sample values, assembly, stacked solve,
   currents, self-check, quantities and every per-sample check) for ``--samples`` samples of the
   four-string demo bank (``circuits/shed-bank-spread.dcn``, every tolerance drawn element by
   element), in this process, beside numpy's stacked ``np.linalg.solve`` of the very same
   systems (assembled beforehand, so only the solve is timed), in the same chunks.
   Target: spread throughput >= half of numpy's.
2. **folder**: ``dcnet solve FOLDER --jobs J`` on ``--files`` small circuits (one process
   start, J worker processes) beside separate ``dcnet solve FILE`` runs, one process each: a
   sample of ``--sample-runs`` of them is timed and the total for every file is extrapolated
   from its median. Target: the folder run takes no longer than 15 single-file runs.
3. **sweep**: a 100-point ``dcnet sweep`` of the cabin demo's cable run, in this process,
   beside 100 separate solves of the same points (each file text written with the value and
   read, solved and checked on its own, in this process), and beside 100 separate
   ``dcnet solve`` processes (extrapolated from a sample).

Run from the repository root::

    python bench/study_bench.py
    python bench/study_bench.py --samples 20000 --files 200   # quicker look
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO))

SHED = REPO / "circuits" / "shed-bank-spread.dcn"
CABIN = REPO / "circuits" / "cabin.dcn"

SMALL = """\
# bench: a 12 V battery, a cable, a fuse and a fridge ({k})
cell   BAT   bat+  gnd     emf={emf:.3f}V r=25mOhm capacity=100Ah chemistry=lifepo4
cable  FEED  bat+  fuse.in length={run:.2f}m size=6mm2
fuse   F1    fuse.in fridge rating=20A r=1.5mOhm
load   FRIDGE fridge gnd   r=2.4Ohm
ground gnd
"""


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(REPO) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


def _cli() -> list[str]:
    return [sys.executable, "-m", "dcnet"]


def bench_spread(samples: int, repeat: int) -> dict:
    import numpy as np

    from dcnet.analysis import batch
    from dcnet.analysis.studies import spread_values, study_from_file

    names = ["r_mono", "emf_mono", "lead_r"]
    qs = ["BAT.s1.fuse.current", "BAT.s4.fuse.current", "bat+,bat-"]
    study = study_from_file(str(SHED), names, independent=names, quantities=qs)
    values = spread_values(study, samples, seed=1)
    study.prepare({n: float(v.flat[0]) for n, v in values.items()})
    size = study.chunk_size()
    m = int(study.bt.solved_voltage.sum() + study.bt.n_nodes - 1)
    # the same systems, assembled once, for numpy's own stacked solve
    stacks = []
    for start in range(0, samples, size):
        chunk = {n: v[start : start + size] for n, v in values.items()}
        s = len(chunk[names[0]])
        g, c, e, _ = study._branch_arrays(study.element_samples(chunk, s), s)
        _, A, z, _, _ = batch.dense_chunk(study.bt, g, c, e)
        stacks.append((A.copy(), z.copy()))
    ours, theirs = [], []
    for _ in range(repeat):
        t = time.perf_counter()
        vals = spread_values(study, samples, seed=1)
        study.run(vals)
        ours.append(time.perf_counter() - t)
        t = time.perf_counter()
        for A, z in stacks:
            np.linalg.solve(A, z[..., None])
        theirs.append(time.perf_counter() - t)
    return {"samples": samples, "unknowns": m, "chunk": size, "ours": ours, "numpy": theirs}


def bench_folder(files: int, jobs: int, sample_runs: int, folder: Path) -> dict:
    folder.mkdir()
    for k in range(files):
        (folder / f"site{k:04d}.dcn").write_text(SMALL.format(k=k, emf=12.8 + (k % 50) / 1000, run=2 + (k % 17) / 10))
    env = _env()
    one = folder / "site0000.dcn"
    subprocess.run(_cli() + ["solve", str(one)], env=env, capture_output=True, check=True)  # warm the caches
    singles = []
    for k in range(sample_runs):
        t = time.perf_counter()
        subprocess.run(_cli() + ["solve", str(folder / f"site{k:04d}.dcn")], env=env, capture_output=True, check=True)
        singles.append(time.perf_counter() - t)
    runs = []
    for _ in range(2):
        t = time.perf_counter()
        proc = subprocess.run(_cli() + ["solve", str(folder), "--jobs", str(jobs), "--format", "csv"], env=env, capture_output=True, text=True)
        runs.append(time.perf_counter() - t)
        listed = len(proc.stdout.strip().splitlines()) - 1
        assert proc.returncode == 0 and listed == files, (proc.returncode, listed, proc.stderr[-500:])
    return {"files": files, "jobs": jobs, "singles": singles, "folder": runs, "listed": listed}


def bench_sweep(points: int, sample_runs: int, tmp: Path) -> dict:
    import numpy as np

    import dcnet
    from dcnet.analysis.studies import axis_values, study_from_file, sweep_values

    text = CABIN.read_text()
    runs = axis_values(0.5, 10.0, points, False)
    qs = ["A.current", "B.current", "PB.drop_pct"]
    t = time.perf_counter()
    study = study_from_file(str(CABIN), ["run"], quantities=qs)
    values = sweep_values(study, [("run", runs)])
    study.prepare({"run": float(runs[-1])})
    result = study.run(values)
    swept = time.perf_counter() - t
    t = time.perf_counter()
    ref = []
    for r in runs:
        src = re.sub(r"let run\s+= 1.8 m", f"let run = {float(r)!r} m", text)
        sol = dcnet.parse(src, str(CABIN), base_dir=CABIN.parent).solve()
        ref.append([sol.quantity(q)[1] for q in qs])
    separate = time.perf_counter() - t
    same = bool(np.array_equal(np.array(ref), result.quantities))
    env = _env()
    t = time.perf_counter()
    subprocess.run(_cli() + ["sweep", str(CABIN), "--vary", f"run=0.5m..10m:{points}", "--show", *qs, "--format", "csv"], env=env, capture_output=True, check=True)
    cli_sweep = time.perf_counter() - t
    singles = []
    for k in range(sample_runs):
        f = tmp / f"cabin{k}.dcn"
        f.write_text(re.sub(r"let run\s+= 1.8 m", f"let run = {float(runs[k]):.6g} m", text))
        t = time.perf_counter()
        subprocess.run(_cli() + ["solve", str(f), "--show", *qs], env=env, capture_output=True, check=True)
        singles.append(time.perf_counter() - t)
    return {"points": points, "sweep": swept, "separate": separate, "identical": same, "cli_sweep": cli_sweep, "cli_singles": singles}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=100_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--files", type=int, default=1000)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--sample-runs", type=int, default=15)
    ap.add_argument("--points", type=int, default=100)
    args = ap.parse_args()
    print(f"python {sys.version.split()[0]}; OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}; cores {os.cpu_count()}")
    with open("/proc/loadavg") as fh:
        print("load average at start:", fh.read().split()[:3])
    ok = True

    s = bench_spread(args.samples, args.repeat)
    best_ours, best_np = min(s["ours"]), min(s["numpy"])
    ratio = (s["samples"] / best_ours) / (s["samples"] / best_np)
    print(f"\n1. spread: {s['samples']:,} samples of the four-string bank, {s['unknowns']} unknowns, chunks of {s['chunk']}")
    print(f"   dcnet spread work : best {best_ours:.3f} s, median {statistics.median(s['ours']):.3f} s -> {s['samples'] / best_ours:,.0f} samples/s")
    print(f"   numpy stacked solve: best {best_np:.3f} s, median {statistics.median(s['numpy']):.3f} s -> {s['samples'] / best_np:,.0f} samples/s")
    print(f"   throughput ratio {ratio:.2f} (target >= 0.5: {'met' if ratio >= 0.5 else 'MISSED'})")
    ok &= ratio >= 0.5

    tmp = Path(tempfile.mkdtemp(prefix="dcnet-bench-"))
    try:
        f = bench_folder(args.files, args.jobs, args.sample_runs, tmp / "fleet")
        med = statistics.median(f["singles"])
        best_folder = min(f["folder"])
        print(f"\n2. folder: {f['files']:,} small files, --jobs {f['jobs']}; summary lists {f['listed']:,} files")
        print(f"   one folder run     : best {best_folder:.2f} s, runs {', '.join(f'{x:.2f}' for x in f['folder'])} s")
        print(f"   single CLI runs    : median {med:.3f} s over {len(f['singles'])} timed runs (best {min(f['singles']):.3f}, worst {max(f['singles']):.3f})")
        print(f"   15 single runs     : {15 * med:.2f} s; all {f['files']:,} as separate runs (extrapolated): {f['files'] * med:.1f} s")
        print(f"   folder run / 15 single runs = {best_folder / (15 * med):.2f} (target <= 1: {'met' if best_folder <= 15 * med else 'MISSED'})")
        ok &= best_folder <= 15 * med

        w = bench_sweep(args.points, min(args.sample_runs, args.points), tmp)
        med = statistics.median(w["cli_singles"])
        print(f"\n3. sweep: {w['points']} points of the cabin's cable run")
        print(f"   in this process    : sweep {w['sweep']:.3f} s (incl. the nominal solve and the check) vs {w['points']} separate solves {w['separate']:.3f} s -> {w['separate'] / w['sweep']:.1f}x; results identical: {w['identical']}")
        print(f"   command line       : one dcnet sweep {w['cli_sweep']:.2f} s vs {w['points']} dcnet solve runs ~{w['points'] * med:.1f} s (median {med:.3f} s x {w['points']}, extrapolated from {len(w['cli_singles'])})")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    with open("/proc/loadavg") as fh:
        print("\nload average at end:", fh.read().split()[:3])
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
