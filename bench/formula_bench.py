"""Time symbolic formulas: string currents of a three-string bank with six interconnect
resistances kept as symbols, with LaTeX output.

    python bench/formula_bench.py               # 5 repeats in this process, 3 fresh command-line runs
    python bench/formula_bench.py --repeat 3 --cli 1

The bank: three 48 V strings (each an EMF behind its internal resistance), joined at the
positive end by two bus segments and at the negative end by two, with a main lead from
each end of the bus to a 1.2 ohm load: six interconnect resistances, each a let value.

Two requests are timed:

* ``six``: the six interconnects kept (``--keep-all``), everything else a number;
* ``all``: also every string's EMF and resistance and the load kept (13 symbols).

For each, in this process (sympy already imported), the stages: building the symbolic
model from the stamps, the fraction-free solve, and turning the three string currents into
checked, factored formulas with their LaTeX; then the whole ``dcnet formula ... --format
latex`` command in fresh processes (including Python's start and sympy's import), beside
a fresh process that only imports dcnet and sympy. Nothing is written into the repository:
the circuit goes into a temporary folder.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

BANK = """title "Three-string bank, six interconnects"
let r_bp1 = 0.20 mOhm    # positive bus, string 1 to 2
let r_bp2 = 0.25 mOhm    # positive bus, string 2 to 3
let r_bn1 = 0.20 mOhm    # negative bus, string 1 to 2
let r_bn2 = 0.30 mOhm    # negative bus, string 2 to 3
let r_mp  = 0.50 mOhm    # main positive lead, at string 1
let r_mn  = 0.60 mOhm    # main negative lead, at string 3
cell S1 p1 n1 emf=51.2V r=12mOhm
cell S2 p2 n2 emf=51.1V r=13mOhm
cell S3 p3 n3 emf=51.3V r=11mOhm
link BP1 p1 p2 r=r_bp1
link BP2 p2 p3 r=r_bp2
link BN1 n1 n2 r=r_bn1
link BN2 n2 n3 r=r_bn2
link MP p1 out r=r_mp
link MN n3 gnd r=r_mn
load L out gnd r=1.2Ohm
ground gnd
"""

QUANTITIES = ["S1.current", "S2.current", "S3.current"]
REQUESTS = {
    "six": {"keep_all": True, "keep": []},
    "all": {
        "keep_all": False,
        "keep": [
            "r_bp1",
            "r_bp2",
            "r_bn1",
            "r_bn2",
            "r_mp",
            "r_mn",
            "S1.r",
            "S2.r",
            "S3.r",
            "S1.emf",
            "S2.emf",
            "S3.emf",
            "L.r",
        ],
    },
}


def stages(net, keep, keep_all):
    from dcnet.analysis.symbolic import MAX_TERMS, _Engine

    t0 = time.perf_counter()
    engine = _Engine(net, keep, keep_all)
    specs = [engine.parse_quantity(q) for q in QUANTITIES]
    engine.estimate(MAX_TERMS)
    t1 = time.perf_counter()
    engine.solve()
    t2 = time.perf_counter()
    found = [engine.formula(s) for s in specs]
    latex = [f.latex() for f in found]
    t3 = time.perf_counter()
    return {"model": t1 - t0, "solve": t2 - t1, "formulas": t3 - t2, "total": t3 - t0}, found, latex, engine


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--cli", type=int, default=3, help="fresh command-line runs per request")
    args = ap.parse_args()

    import sympy

    import dcnet

    print(
        f"python {sys.version.split()[0]}, sympy {sympy.__version__}, {os.cpu_count()} CPUs; load {os.getloadavg()[0]:.2f}"
    )
    net = dcnet.parse(BANK)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bank3.dcn"
        path.write_text(BANK)
        for name, req in REQUESTS.items():
            stages(net, req["keep"], req["keep_all"])  # warm sympy's caches of this kind of work
            runs = []
            for _ in range(args.repeat):
                t, found, latex, engine = stages(dcnet.parse(BANK), req["keep"], req["keep_all"])
                runs.append(t)
            kept = len(found[0].kept)
            den_terms = len(sympy.Add.make_args(sympy.expand(found[0].denominator)))
            print(
                f"\n[{name}] {kept} kept symbols; symbolic part {engine.size} unknowns; "
                f"spanning-tree bound {engine.term_bound:,.0f}; denominator {den_terms} terms"
            )
            for stage in ("model", "solve", "formulas", "total"):
                xs = [r[stage] for r in runs]
                print(f"  {stage:<9} best {min(xs):7.3f} s   median {statistics.median(xs):7.3f} s")
            worst = max(f.deviation for f in found)
            print(
                f"  checked against the numeric solve: largest deviation {worst:.1e}; LaTeX of S1.current {len(latex[0]):,} characters"
            )
            cmd = [sys.executable, "-m", "dcnet", "formula", str(path), "--for", *QUANTITIES, "--format", "latex"]
            cmd += ["--keep-all"] if req["keep_all"] else ["--keep", ",".join(req["keep"])]
            env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
            base_cmd = [
                sys.executable,
                "-c",
                "import dcnet, dcnet.cli, sympy; from sympy.polys.matrices import DomainMatrix",
            ]
            times, base = [], []
            for _ in range(args.cli):  # interleaved with the baseline: the machine's load moves both alike
                t0 = time.perf_counter()
                res = subprocess.run(cmd, capture_output=True, text=True, env=env)
                times.append(time.perf_counter() - t0)
                if res.returncode != 0:
                    print(res.stderr)
                    return 1
                t0 = time.perf_counter()
                subprocess.run(base_cmd, capture_output=True, text=True, env=env, check=True)
                base.append(time.perf_counter() - t0)
            if times:
                print(
                    f"  whole command (fresh process, sympy import included): best {min(times):.3f} s, median {statistics.median(times):.3f} s"
                )
                print(
                    f"  baseline, a fresh process importing dcnet and sympy only: best {min(base):.3f} s, median {statistics.median(base):.3f} s"
                )
    return 0


if __name__ == "__main__":
    sys.exit(main())
