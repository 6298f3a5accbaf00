"""Wall-clock time of a whole small ``dcnet solve`` run beside a bare import of its libraries.

A small circuit of our own (a cell, a cable, a fuse and a load) is written into
a temporary folder, then these commands are run alternately, ``--repeat`` times
each, in fresh Python processes:

* ``dcnet solve FILE`` (the ``dcnet`` console script if it is on PATH and
  belongs to this checkout, else ``python -m dcnet solve FILE``);
* the baseline ``python -c "import numpy, scipy.sparse.linalg, networkx, lark"``;
* for reference, ``python -c pass`` (the interpreter alone).

It prints the median and best of each and the ratio of the medians
(dcnet solve / bare imports). Target: <= 1.3.

Run from the repository root::

    python bench/startup_bench.py
    python bench/startup_bench.py --repeat 20
    python bench/startup_bench.py --importtime   # also show dcnet's slowest imports
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
TARGET = 1.3

SMALL_CIRCUIT = """\
# Startup benchmark: one 12 V battery feeding a fridge through a cable and a fuse
title "Startup benchmark: battery, cable, fuse, fridge"

let run = 3.5 m

cell   BAT   bat+  gnd    emf=12.8V r=25mOhm capacity=100Ah chemistry=lifepo4
cable  FEED  bat+  fuse.in length=run size=6mm2 metal=copper
fuse   F1    fuse.in fridge rating=20A r=1.5mOhm
load   FRIDGE fridge gnd  r=2.4Ohm
ground gnd
"""

BARE = "import numpy, scipy.sparse.linalg, networkx, lark"


def _env() -> dict[str, str]:
    env = dict(os.environ)  # OPENBLAS_CORETYPE and the like pass through unchanged
    env["PYTHONPATH"] = str(REPO) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


def dcnet_command(file: Path) -> list[str]:
    """The console script if it runs this checkout's code, else ``python -m dcnet``."""
    script = shutil.which("dcnet")
    if script:
        probe = subprocess.run(
            [sys.executable, "-c", "import dcnet, sys; sys.stdout.write(dcnet.__file__)"],
            capture_output=True, text=True, env=_env(), cwd=file.parent,
        )
        if probe.returncode == 0 and Path(probe.stdout).resolve().is_relative_to(REPO):
            return [script, "solve", str(file)]
    return [sys.executable, "-m", "dcnet", "solve", str(file)]


def cli_ready() -> bool:
    return (REPO / "dcnet" / "cli.py").is_file() and (REPO / "dcnet" / "__main__.py").is_file()


def run_once(cmd: list[str], cwd: Path) -> float:
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=_env(), cwd=cwd)
    dt = time.perf_counter() - t0
    if proc.returncode not in (0, 1):  # 1 = solved, a check failed: still a whole run
        raise SystemExit(f"command failed ({proc.returncode}): {' '.join(cmd)}\n{proc.stderr.decode(errors='replace')}")
    return dt


def importtime(file: Path) -> None:
    """The slowest imports of one ``dcnet solve`` run (``python -X importtime``)."""
    proc = subprocess.run(
        [sys.executable, "-X", "importtime", "-m", "dcnet", "solve", str(file)],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, env=_env(), cwd=file.parent,
    )
    rows = []
    for line in proc.stderr.splitlines():
        if not line.startswith("import time:"):
            continue
        parts = line[len("import time:"):].split("|")
        if len(parts) != 3 or not parts[1].strip().isdigit():
            continue  # the header line
        name = parts[2][1:]  # one blank after the bar; more blanks = nested import
        depth = len(name) - len(name.lstrip(" "))
        rows.append((int(parts[1]), depth, name.strip()))
    print("\nslowest imports of one dcnet solve run (cumulative ms; top level, and dcnet's own modules):")
    picked = [r for r in rows if r[1] == 0 or r[2].startswith("dcnet")]
    for cum, depth, name in sorted(picked, reverse=True)[:15]:
        print(f"  {cum / 1000:8.1f}  {'  ' * (depth // 2)}{name}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=15, help="runs of each command (default 15)")
    ap.add_argument("--wait", type=float, default=0.0, help="seconds to wait for dcnet/cli.py to appear (default 0)")
    ap.add_argument("--importtime", action="store_true", help="also list the slowest imports of dcnet solve")
    args = ap.parse_args(argv)

    deadline = time.monotonic() + args.wait
    while not cli_ready():
        if time.monotonic() >= deadline:
            print("dcnet/cli.py (with dcnet/__main__.py) is not there yet; nothing to time", file=sys.stderr)
            return 2
        time.sleep(5)

    with tempfile.TemporaryDirectory(prefix="dcnet-startup-") as tmp:
        folder = Path(tmp)
        circuit = folder / "small.dcn"
        circuit.write_text(SMALL_CIRCUIT, encoding="utf-8")
        commands = {
            "dcnet solve small.dcn": dcnet_command(circuit),
            "bare imports": [sys.executable, "-c", BARE],
            "python -c pass": [sys.executable, "-c", "pass"],
        }
        # one untimed run of each: fills the OS file cache, byte-code and the grammar cache
        for cmd in commands.values():
            run_once(cmd, folder)
        shown = subprocess.run(commands["dcnet solve small.dcn"], capture_output=True, text=True, env=_env(), cwd=folder)
        times: dict[str, list[float]] = {k: [] for k in commands}
        for _ in range(args.repeat):  # interleaved, so drifts in machine load hit all alike
            for key, cmd in commands.items():
                times[key].append(run_once(cmd, folder))

        print(f"dcnet startup benchmark: {args.repeat} runs of each, interleaved; "
              f"python {sys.version.split()[0]}; OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}")
        print(f"dcnet command: {' '.join(Path(c).name if i == 0 else c for i, c in enumerate(commands['dcnet solve small.dcn']))}")
        print()
        w = 26
        print(f"{'command':<{w}} {'median s':>9} {'best s':>9} {'worst s':>9}")
        print("-" * (w + 30))
        for key, t in times.items():
            print(f"{key:<{w}} {statistics.median(t):>9.3f} {min(t):>9.3f} {max(t):>9.3f}")
        print()
        med = {k: statistics.median(t) for k, t in times.items()}
        ratio = med["dcnet solve small.dcn"] / med["bare imports"]
        ratio_best = min(times["dcnet solve small.dcn"]) / min(times["bare imports"])
        print(f"ratio dcnet solve / bare imports: {ratio:.2f}x (medians), {ratio_best:.2f}x (bests)   "
              f"target <= {TARGET}x: {'met' if ratio <= TARGET else 'MISSED'}")
        print(f"(dcnet's own cost beyond the imports: {1000 * (med['dcnet solve small.dcn'] - med['bare imports']):.0f} ms)")
        if args.importtime:
            importtime(circuit)
        if shown.returncode not in (0, 1):
            print(shown.stderr)
    return 0 if ratio <= TARGET else 1


if __name__ == "__main__":
    sys.exit(main())
