"""The prospective fault check (dcnet/checks/fault.py) on banks of many fused strings.

    python bench/fault_bench.py                       # 500, 1000, 2000, 4000 fused strings
    python bench/fault_bench.py --parallel 1000 4000  # chosen sizes
    python bench/fault_bench.py --series 2            # two cells per string

Each bank is ``series`` x ``parallel`` cells with a fuse per string (rating and interrupt
rating), leads and bus segments, feeding a resistive load through a main fuse. The circuit is
solved once; the fault rule alone is then timed (best of ``--repeat``), with the process's peak
memory at the end (resource.getrusage, which only grows: run one size per process for clean
memory figures, e.g. ``--parallel 4000``).
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def circuit(series: int, parallel: int) -> str:
    return (
        'title "bench: a wide bank of fused strings"\n'
        "part lfp cell emf=3.3V r=0.9mOhm capacity=280Ah chemistry=lifepo4\n"
        f"bank B pos neg series={series} parallel={parallel} cell=lfp bus=0.02mOhm lead=0.3mOhm "
        "fuse=125A fuse_r=0.3mOhm interrupt=20kA tap=opposite spread=5% seed=3\n"
        "fuse MF pos load+ rating=2000A r=0.05mOhm interrupt=50kA\n"
        "load LOAD load+ neg r=20mOhm\nground neg\n"
    )


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--parallel", type=int, nargs="+", default=[500, 1000, 2000, 4000])
    ap.add_argument("--series", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=1)
    args = ap.parse_args()
    import dcnet
    from dcnet.checks import fault
    from dcnet.checks.view import OneSample

    dcnet.parse(circuit(1, 4)).solve()  # warm imports and caches
    for p in args.parallel:
        net = dcnet.parse(circuit(args.series, p))
        t0 = time.perf_counter()
        sol = net.solve(checks=False)
        t_solve = time.perf_counter() - t0
        times = []
        for _ in range(args.repeat):
            t1 = time.perf_counter()
            series = fault.rules(net, OneSample(sol))
            times.append(time.perf_counter() - t1)
        worst = max(float(s.value[0]) for s in series if s.subject.endswith(".fuse"))
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(
            f"{args.series} x {p:5d}: {len(net.elements):6d} elements, {len(net.node_index):6d} nodes; "
            f"solve {t_solve:6.2f} s; fault check {min(times):7.2f} s ({len(series)} series, "
            f"worst through a string fuse {worst:.6g} A); peak memory so far {peak:,.0f} MB"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
