"""A 16s x 48p bank (768 cells with straps, string fuses, leads and bus segments): elaborate,
solve and check it, timing each stage.

    python bench/bank_bench.py [--series 16] [--parallel 48] [--repeat 5]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def circuit(series: int, parallel: int) -> str:
    return (
        "title \"bench: large telecom-style bank\"\n"
        "part lfp cell emf=3.3V r=0.9mOhm capacity=280Ah chemistry=lifepo4\n"
        f"bank B pos neg series={series} parallel={parallel} cell=lfp strap=0.12mOhm bus=0.05mOhm lead=0.3mOhm "
        "fuse=250A fuse_r=0.2mOhm interrupt=20kA tap=opposite spread=5% seed=11 s7.ageing=1.3\n"
        "cable MP pos p1 length=4m size=120mm2\ncable MN n1 neg length=4m size=120mm2\n"
        "fuse MF p1 load+ rating=2000A r=0.05mOhm interrupt=50kA\n"
        "load INV load+ n1 current=1500A\nground neg\n"
    )


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--series", type=int, default=16)
    ap.add_argument("--parallel", type=int, default=48)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    import dcnet
    from dcnet.analysis.solve import solve

    text = circuit(args.series, args.parallel)
    dcnet.parse(text).solve()  # warm imports and caches
    t_parse, t_solve, t_check = [], [], []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        net = dcnet.parse(text)
        t1 = time.perf_counter()
        sol = solve(net)
        t2 = time.perf_counter()
        sol.run_checks()
        t3 = time.perf_counter()
        t_parse.append(t1 - t0)
        t_solve.append(t2 - t1)
        t_check.append(t3 - t2)
    cells = sum(1 for e in net.elements if e.kind == "cell")
    print(f"bank {args.series}s x {args.parallel}p: {cells} cells, {len(net.elements)} elements, {len(net.node_index)} nodes")
    print(f"  elaborate (text -> netlist): median {statistics.median(t_parse) * 1e3:8.1f} ms")
    print(f"  solve + self-check:          median {statistics.median(t_solve) * 1e3:8.1f} ms")
    print(f"  checks ({len(sol.verdicts)} verdicts):      median {statistics.median(t_check) * 1e3:8.1f} ms")
    print(f"  solve + checks:              median {(statistics.median(t_solve) + statistics.median(t_check)) * 1e3:8.1f} ms")
    failed = [v for v in sol.verdicts if not v.ok]
    print(f"  {len(failed)} failed checks; balance ok: {sol.balance['ok']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
