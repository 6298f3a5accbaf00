"""Long fuzzing campaign, run by hand: N generated inputs per family, outcomes counted.

    python bench/fuzz_run.py --examples 25000                  # every in-process family
    python bench/fuzz_run.py --examples 2000 --families hostile-demos,hostile-seeds,extreme-netlists
    python bench/fuzz_run.py --families limits --examples 40 --timeout 10 --memory 2048

Every input must either solve (and pass the oracle of tests/fuzz/test_fuzz.py check_one:
Kirchhoff's law at each node, passivity, the physical potential bound, no numpy warning) or
raise one of dcnet's own errors. A fault does not stop the run: it is counted under its class
(exception type and the dcnet source line it came from, or the oracle's check), and the input
is written to --out (bench/out/, not tracked): every fault input as FAMILY-N.dcn with a .txt
beside it, and the shortest input of each class as smallest-K.dcn; faults.tsv lists the classes.

Inputs are drawn first (hypothesis, generation only), then run in --jobs worker processes,
each under an address-space limit (--memory) and a per-input time limit (--timeout): a worker
that passes it is killed and replaced, and the input counts as a "timeout" fault. The
"limits" family runs the dcnet command line on generated file trees (include fan-out, big
banks, block fan-out, blank-line floods) in a fresh process per input, with the same limits;
it expects a refusal up front, so anything slower than --timeout is a fault.
"""

from __future__ import annotations

import argparse
import collections
import multiprocessing as mp
import os
import re
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import traceback
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

IN_PROCESS = ["token-soup", "mutated-demos", "random-netlists", "mixed", "hostile-demos", "hostile-seeds", "extreme-netlists"]
FAMILIES = IN_PROCESS + ["big-seeds", "limits"]


# ------------------------------------------------------------------------------ generation
def strategy(name: str):
    from tests.fuzz import strategies as s

    return {
        "token-soup": s.token_soup,
        "mutated-demos": s.mutated_file(),
        "random-netlists": s.valid_netlist(),
        "mixed": s.any_input,
        "hostile-demos": s.hostile_demo,
        "hostile-seeds": s.hostile_seed,
        "extreme-netlists": s.extreme_netlist(),
        "big-seeds": s.hostile_big_seed,
        "limits": s.limits_case(),
    }[name]


def limit_seeds() -> list[dict]:
    """The fixed cases of bench/fuzz_seeds/limits/: each .dcn file, and each folder (main.dcn with
    the files it includes), run before the generated ones."""
    out = []
    base = ROOT / "bench" / "fuzz_seeds" / "limits"
    for p in sorted(base.iterdir()) if base.is_dir() else []:
        if p.suffix == ".dcn":
            out.append({"files": {"main.dcn": p.read_text(encoding="utf-8")}, "main": "main.dcn", "args": ["check"], "what": "seed " + p.name})
        elif p.is_dir() and (p / "main.dcn").exists():
            files = {f.name: f.read_text(encoding="utf-8") for f in sorted(p.glob("*.dcn"))}
            out.append({"files": files, "main": "main.dcn", "args": ["check"], "what": "seed " + p.name})
    return out


def draw(name: str, n: int, seed: int | None) -> list:
    from hypothesis import HealthCheck, Phase, given, settings
    from hypothesis import seed as hseed

    out: list = []

    @settings(max_examples=n, deadline=None, suppress_health_check=list(HealthCheck), database=None, phases=[Phase.generate])
    @given(strategy(name))
    def collect(x):
        out.append(x)

    if seed is not None:
        collect = hseed(seed)(collect)
    collect()
    return out


# ------------------------------------------------------------------------------ one input
def fault_class(err: BaseException) -> str:
    """A fault's class: the oracle's check, or the exception type and the dcnet line it left."""
    if isinstance(err, AssertionError):
        msg = str(err)
        if msg.startswith("RuntimeWarning:"):
            where = re.search(r"\(([^()]*):(\d+)\)\s*$", msg)
            what = msg.split(":", 1)[1].split("(")[0].strip()
            return f"RuntimeWarning {what} at {_short(where.group(1))}:{where.group(2)}" if where else msg[:80]
        head = msg.split(":", 1)[0]
        if head == "Kirchhoff":
            return "Kirchhoff, a current reported at 0 A" if "exactly 0 A" in msg else "Kirchhoff"
        if head in ("bound", "passivity"):
            return head
        return "assertion in check_one: " + msg[:60]
    frames = traceback.extract_tb(err.__traceback__)
    mine = [f for f in frames if "/dcnet/" in f.filename] or frames
    if not mine:
        return type(err).__name__
    key = f"{type(err).__name__} at {_short(mine[-1].filename)}:{mine[-1].lineno}"
    if len(mine) > 1:  # the caller too: one helper (a lookup, a path call) may fail for several reasons
        key += f" from {_short(mine[-2].filename)}:{mine[-2].lineno}"
    return key


def _short(path: str) -> str:
    p = path.replace("\\", "/")
    return p[p.index("dcnet/"):] if "dcnet/" in p else p


def worker(conn, memory_mb: int) -> None:
    """Run inputs sent over conn; answer (outcome, fault class or None, detail, seconds, peak KB)."""
    if memory_mb:
        lim = memory_mb * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (lim, lim))
    os.nice(0)
    from tests.fuzz.test_fuzz import check_one

    while True:
        try:
            text = conn.recv()
        except (EOFError, OSError):
            return  # the campaign has ended
        if text is None:
            return
        t = time.perf_counter()
        try:
            outcome, fault, detail = check_one(text), None, ""
        except BaseException as err:  # noqa: BLE001 - a fuzz worker classifies everything
            outcome, fault = "FAULT", fault_class(err)
            detail = "".join(traceback.format_exception(err))[-4000:]
        conn.send((outcome, fault, detail, time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss))


class Pool:
    """Worker processes with a per-input time limit; a worker that overruns is replaced."""

    def __init__(self, jobs: int, timeout: float, memory_mb: int):
        self.timeout, self.memory_mb = timeout, memory_mb
        self.ctx = mp.get_context("fork")
        self.workers = [self._start() for _ in range(jobs)]

    def _start(self):
        parent, child = self.ctx.Pipe()
        p = self.ctx.Process(target=worker, args=(child, self.memory_mb), daemon=True)
        p.start()
        return [p, parent, None, 0.0]  # process, connection, current job, start time

    def run(self, jobs, on_result) -> None:
        from multiprocessing.connection import wait

        pending = list(enumerate(jobs))[::-1]
        busy = 0
        while pending or busy:
            for w in self.workers:
                if w[2] is None and pending:
                    job = pending.pop()
                    w[1].send(job[1])
                    w[2], w[3] = job, time.perf_counter()
                    busy += 1
            ready = wait([w[1] for w in self.workers if w[2] is not None], timeout=0.2)
            now = time.perf_counter()
            for k, w in enumerate(self.workers):
                if w[2] is None:
                    continue
                if w[1] in ready:
                    try:
                        res = w[1].recv()
                    except (EOFError, OSError):
                        res = ("FAULT", "worker died (memory limit or crash)", "", now - w[3], 0)
                        self._replace(k)
                    job, self.workers[k][2] = w[2], None
                    busy -= 1
                    on_result(job, res)
                elif now - w[3] > self.timeout or not w[0].is_alive():
                    what = "timeout" if w[0].is_alive() else "worker died (memory limit or crash)"
                    job = w[2]
                    self._replace(k)
                    busy -= 1
                    on_result(job, ("FAULT", what, f"over {self.timeout} s" if what == "timeout" else "", now - w[3], 0))

    def _replace(self, k: int) -> None:
        p = self.workers[k][0]
        if p.is_alive():
            p.kill()
        p.join()
        self.workers[k] = self._start()

    def close(self) -> None:
        for w in self.workers:
            try:
                w[1].send(None)
            except OSError:
                pass
            w[0].join(timeout=5)
            if w[0].is_alive():
                w[0].kill()


# ------------------------------------------------------------------------------ limits family
def run_limits_case(case: dict, timeout: float, memory_mb: int):
    """Write the case's files to a temporary folder and run the command line on its main file
    in a fresh process (address-space limit, killed after the timeout)."""
    tmp = tempfile.mkdtemp(prefix="dcnet-fuzz-")
    try:
        for name, text in case["files"].items():
            p = Path(tmp, name)
            p.parent.mkdir(parents=True, exist_ok=True)
            if text is None:
                os.mkfifo(p)
            else:
                p.write_text(text, encoding="utf-8", errors="surrogatepass")

        def limit():
            if memory_mb:
                lim = memory_mb * 1024 * 1024
                resource.setrlimit(resource.RLIMIT_AS, (lim, lim))

        env = dict(os.environ, PYTHONPATH=str(ROOT))
        cmd = [sys.executable, "-m", "dcnet", *case["args"], str(Path(tmp, case["main"]))]
        t = time.perf_counter()
        errfile = Path(tmp, ".stderr")
        with open(errfile, "wb") as ef:
            proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=ef, stdin=subprocess.DEVNULL, preexec_fn=limit, cwd=tmp, env=env)
        timed_out = False
        while True:  # reap the child ourselves: os.wait4 gives its own peak memory
            pid, status, usage = os.wait4(proc.pid, os.WNOHANG)
            if pid:
                break
            if time.perf_counter() - t > timeout:
                proc.kill()
                pid, status, usage = os.wait4(proc.pid, 0)
                timed_out = True
                break
            time.sleep(0.02)
        proc.returncode = os.waitstatus_to_exitcode(status)
        secs = time.perf_counter() - t
        peak = usage.ru_maxrss
        err = errfile.read_bytes()
        text = err.decode("utf-8", "replace")
        if timed_out:
            return ("FAULT", "timeout (not refused up front)", text[-2000:], secs, peak)
        if "Traceback" in text:
            last = [ln for ln in text.splitlines() if ln.strip()][-1]
            where = re.findall(r'File "([^"]*dcnet/[^"]*)", line (\d+)', text)
            loc = f" at {_short(where[-1][0])}:{where[-1][1]}" if where else ""
            kind = "MemoryError" if "MemoryError" in last else last.split(":")[0]
            return ("FAULT", kind + loc, text[-4000:], secs, peak)
        if proc.returncode not in (0, 1, 2):
            return ("FAULT", f"exit {proc.returncode}", text[-2000:], secs, peak)
        return ({0: "solved", 1: "checks failed", 2: "refused"}[proc.returncode], None, "", secs, peak)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


# ------------------------------------------------------------------------------ campaign
def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--examples", type=int, default=2500, help="inputs per family (default 2500)")
    ap.add_argument("--families", default=",".join(IN_PROCESS), help=f"comma-separated, from {', '.join(FAMILIES)} (default: all but limits)")
    ap.add_argument("--seed", type=int, default=None)
    ap.add_argument("--jobs", type=int, default=1, help="worker processes (default 1)")
    ap.add_argument("--timeout", type=float, default=30.0, help="seconds per input before it counts as a fault (default 30)")
    ap.add_argument("--memory", type=int, default=3072, help="address-space limit per worker in MB (default 3072; 0: none)")
    ap.add_argument("--out", type=Path, default=ROOT / "bench" / "out", help="where fault inputs go (default bench/out/)")
    ap.add_argument("--keep", type=int, default=20, help="fault inputs written per class (default 20)")
    args = ap.parse_args()
    families = [f.strip() for f in args.families.split(",") if f.strip()]
    bad = [f for f in families if f not in FAMILIES]
    if bad:
        ap.error(f"unknown family {bad[0]!r}; choose from {', '.join(FAMILIES)}")
    args.out.mkdir(parents=True, exist_ok=True)
    # the workers are forked: import the oracle here so they share this very version of it
    from tests.fuzz.test_fuzz import check_one  # noqa: F401

    total: collections.Counter = collections.Counter()
    faults: dict[str, dict] = {}
    worst_time = (0.0, "", -1)
    worst_mem = (0, "", -1)
    t0 = time.perf_counter()
    for family in families:
        t = time.perf_counter()
        inputs = (limit_seeds() if family == "limits" else []) + draw(family, args.examples, args.seed)
        t_draw = time.perf_counter() - t
        counts: collections.Counter = collections.Counter()

        def record(job, res, family=family, counts=counts):
            nonlocal worst_time, worst_mem
            index, item = job
            outcome, fault, detail, secs, peak = res
            text = (item["what"] + ":" + str(sum(len(t or "") for t in item["files"].values()))) if isinstance(item, dict) else item
            if secs > worst_time[0]:
                worst_time = (secs, family, index)
            if peak > worst_mem[0]:
                worst_mem = (peak, family, index)
            if fault is None:
                counts[outcome + (f" [{item['what']}]" if isinstance(item, dict) else "")] += 1
                return
            counts["FAULT: " + fault] += 1
            entry = faults.setdefault(fault, {"count": 0, "families": collections.Counter(), "smallest": None})
            entry["count"] += 1
            entry["families"][family] += 1
            if entry["count"] <= args.keep:
                stem = args.out / f"{family}-{index}"
                _write_case(stem, item)
                stem.with_suffix(".txt").write_text(f"{fault}\n\n{detail}\n", encoding="utf-8", errors="replace")
            if entry["smallest"] is None or len(text) < len(entry["smallest"][0]):
                entry["smallest"] = (text, item, detail)

        t = time.perf_counter()
        if family == "limits":
            for index, case in enumerate(inputs):
                res = run_limits_case(case, args.timeout, args.memory)
                if res[1] is not None:
                    res = (res[0], f"{res[1]} [{case['what']}]", *res[2:])
                record((index, case), res)
        else:
            pool = Pool(args.jobs, args.timeout, args.memory)
            try:
                pool.run(inputs, record)
            finally:
                pool.close()
        n = sum(counts.values())
        print(
            f"{family:18s} {n:7d} inputs in {time.perf_counter() - t:7.1f} s (+{t_draw:.0f} s drawing): "
            + ", ".join(f"{k} {v}" for k, v in counts.most_common()),
            flush=True,
        )
        total.update(counts)
    n = sum(total.values())
    n_faults = sum(v for k, v in total.items() if k.startswith("FAULT"))
    print(f"{'all':18s} {n:7d} inputs in {time.perf_counter() - t0:7.1f} s; {n_faults} faults in {len(faults)} classes")
    print(f"peak memory {worst_mem[0] / 1024:.0f} MB (reached with {worst_mem[1]} #{worst_mem[2]}; a worker's peak is its largest so far); "
          f"slowest input {worst_time[0]:.2f} s ({worst_time[1]} #{worst_time[2]})")
    rows = ["class\tcount\tfamilies\tsmallest"]
    for k, (fault, entry) in enumerate(sorted(faults.items(), key=lambda kv: -kv[1]["count"])):
        text, item, detail = entry["smallest"]
        stem = args.out / f"smallest-{k}"
        _write_case(stem, item)
        stem.with_suffix(".txt").write_text(f"{fault}\n\n{detail}\n", encoding="utf-8", errors="replace")
        fams = ", ".join(f"{f} {c}" for f, c in entry["families"].most_common())
        rows.append(f"{fault}\t{entry['count']}\t{fams}\t{stem.name}")
        print(f"  FAULT {fault}: {entry['count']} ({fams}); smallest {len(text)} characters in {stem.name}")
    (args.out / "faults.tsv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    return 1 if faults else 0


def _write_case(stem: Path, item) -> None:
    if isinstance(item, dict):
        folder = stem.with_suffix("")
        for name, text in item["files"].items():
            p = folder / name
            p.parent.mkdir(parents=True, exist_ok=True)
            if text is None:
                p.with_name(p.name + ".FIFO").write_text("make this file a named pipe: mkfifo " + name + "\n", encoding="utf-8")
            else:
                p.write_text(text, encoding="utf-8", errors="surrogatepass")
        (folder / "ARGS").write_text(" ".join(item["args"]) + " " + item["main"] + "\n", encoding="utf-8")
    else:
        stem.with_suffix(".dcn").write_text(item, encoding="utf-8", errors="surrogatepass")


if __name__ == "__main__":
    sys.exit(main())
