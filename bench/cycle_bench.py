"""A 96s x 4p pack through a two-hour cycle at one-second resolution: one factorisation
reused for every step, beside refactorising at every step.

    python bench/cycle_bench.py [--series 96] [--parallel 4] [--step 1]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def circuit(series: int, parallel: int) -> str:
    return (
        'title "bench: 96s4p pack, one hour of discharge and one of charge"\n'
        "part nmc cell emf=3.7V r=1.8mOhm capacity=50Ah chemistry=nmc soc=90%\n"
        f"bank P pos neg series={series} parallel={parallel} cell=nmc strap=0.1mOhm bus=0.05mOhm lead=0.2mOhm "
        "tap=opposite spread=3% seed=5 s2.ageing=1.25\n"
        "cable LP pos d+ length=2m size=70mm2\ncable LN d- neg length=2m size=70mm2\n"
        "load DRIVE d+ d- current=120A\n"
        "supply CHARGER d+ d- current=100A\n"
        "phase drive on=DRIVE for=1h\nphase charge on=CHARGER for=1h\nground neg\n"
    )


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--series", type=int, default=96)
    ap.add_argument("--parallel", type=int, default=4)
    ap.add_argument("--step", type=float, default=1.0)
    args = ap.parse_args()
    import dcnet
    from dcnet.analysis.cycle import run

    net = dcnet.parse(circuit(args.series, args.parallel))
    rows = []
    for label, refactor in (("factor reused", False), ("refactored every step", True)):
        t0 = time.perf_counter()
        res = run(net, step=args.step, force_refactor=refactor)
        wall = time.perf_counter() - t0
        rows.append((label, wall, res))
        print(f"{label:24s} {wall:8.2f} s  {res.solves} solves, {res.factorisations} factorisations, "
              f"{len(res.times)} samples, ledger closure {abs(res.ledger['closure_relative']):.1e}")
    same = abs(rows[0][2].soc - rows[1][2].soc).max()
    print(f"cells: {len(rows[0][2].cell_names)}, elements {len(net.elements)}, nodes {len(net.node_index)}")
    print(f"speed-up from reuse: {rows[1][1] / rows[0][1]:.2f}x; largest state-of-charge difference between the runs {same:.1e}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
