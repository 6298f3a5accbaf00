"""Long fuzzing campaign, run by hand: N generated inputs per family, outcomes counted.

    python bench/fuzz_run.py --examples 25000      # 4 families x 25,000 = 100,000 inputs

Every input must either solve (and verify) or raise one of dcnet's own errors; anything
else stops the run with the failing input. Figures go to bench/RESULTS.md.
"""

from __future__ import annotations

import argparse
import collections
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--examples", type=int, default=2500, help="inputs per family (default 2500)")
    ap.add_argument("--seed", type=int, default=None)
    args = ap.parse_args()

    from hypothesis import HealthCheck, given, seed, settings

    from tests.fuzz.strategies import any_input, mutated_file, token_soup, valid_netlist
    from tests.fuzz.test_fuzz import check_one

    families = {"token soup": token_soup, "mutated demo files": mutated_file(), "random netlists": valid_netlist(), "mixed": any_input}
    total = collections.Counter()
    t0 = time.perf_counter()
    for label, strategy in families.items():
        counts: collections.Counter = collections.Counter()

        @settings(max_examples=args.examples, deadline=None, suppress_health_check=list(HealthCheck), database=None)
        @given(strategy)
        def run(text):
            counts[check_one(text)] += 1

        if args.seed is not None:
            run = seed(args.seed)(run)
        t = time.perf_counter()
        run()
        n = sum(counts.values())
        print(f"{label:20s} {n:7d} inputs in {time.perf_counter() - t:7.1f} s: " + ", ".join(f"{k} {v}" for k, v in counts.most_common()))
        total.update(counts)
    n = sum(total.values())
    print(f"{'all':20s} {n:7d} inputs in {time.perf_counter() - t0:7.1f} s; nothing but dcnet's own errors")
    return 0


if __name__ == "__main__":
    sys.exit(main())
