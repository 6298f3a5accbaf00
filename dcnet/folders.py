"""Folder runs: many circuit files solved (and checked) independently, one record per file.

:func:`run_files` sends the files to a runner (this process, local worker processes or a
Dask cluster: :mod:`dcnet.parallel`); each worker solves its files with
:func:`solve_record` and returns plain records, in the order of the files. A file that
cannot be read or solved gives a ``refused`` record with its rendered error; it never
stops the run. Records are the same whichever runner made them.

For a cluster, the client reads each file and sends its text (files it includes are read
by the worker, so they must be reachable at the same path there).
"""

from __future__ import annotations

from typing import Any

__all__ = ["solve_record", "run_files"]


def solve_record(item, options, mode: str = "solve", show=(), result: bool = False) -> dict[str, Any]:
    """Solve one file and describe it as plain data.

    ``item`` is a path, or (path, text) when the text was read elsewhere. ``mode`` is
    ``solve`` or ``check`` (which keeps every verdict); ``result`` keeps the whole solution
    (``Solution.to_dict``).
    """
    from .analysis.solution import QuantityError
    from .commands.common import solve_one

    path, text = item if isinstance(item, tuple) else (item, None)
    sol, err = solve_one(path, options, text=text)
    if err is not None:
        read = [path, *getattr(err, "files", ())]  # "read": what an output must never overwrite
        return {"file": path, "status": "refused", "error": str(err), "message": err.render(), "warnings": [], "read": read}
    failed = sol.failed
    rec: dict[str, Any] = {
        "file": path,
        "title": sol.netlist.title,
        "status": ("failed" if failed else "passed") if mode == "check" else ("check failed" if failed else "ok"),
        "elements": len(sol.netlist.elements),
        "nodes": len(sol.netlist.node_index),
        "kcl_max_residual_A": sol.balance["kcl_max_residual_A"],
        "power_sum_W": sol.balance["power_sum_W"],
        "checks_run": len(sol.checks),
        "checks_failed": sum(1 for c in sol.checks if not c["ok"]),
        "warnings": list(sol.warnings),
        "read": list(sol.netlist.files),
    }
    worst = next((c for c in sol.checks if c["sense"] != "info"), None)
    if worst is not None:
        rec["worst_check"] = {k: worst[k] for k in ("rule", "subject", "value", "limit", "unit", "ok", "margin")}
    if show:
        try:
            rec["values"] = {label: value for label, value, _ in (sol.quantity(q) for q in show)}
        except QuantityError as exc:
            rec["values"] = {}
            rec["error"] = str(exc)
    if mode == "check":
        rec["checks"] = sol.checks
    if result:
        rec["result"] = sol.to_dict()
    return rec


def _read_for_cluster(path: str, options):
    """(path, text) read here for a cluster worker, or a refused record when the file cannot be read."""
    from pathlib import Path

    from .errors import DcnetError, Span
    from .language.elaborate import _read

    try:
        return (path, _read(Path(path), options, None))
    except DcnetError as err:
        if err.span is None:
            err.span = Span(path)
        return {"file": path, "status": "refused", "error": str(err), "message": err.render(), "warnings": [], "read": [path]}


def run_files(files: list[str], options, *, mode: str = "solve", show=(), result: bool = False, jobs=None, cluster=None, progress=True) -> list[dict]:
    """Records of every file, in order, from the runner that ``jobs``/``cluster`` select."""
    from .parallel import Progress, make_runner

    items: list = []
    ready: dict[int, dict] = {}
    for k, path in enumerate(files):
        if path == "-":
            from .errors import DcnetError
            from .language import read_stdin

            try:
                items.append(("-", read_stdin(options)))
            except DcnetError as err:  # only this input is refused
                ready[k] = {"file": path, "status": "refused", "error": str(err), "message": err.render(), "warnings": [], "read": [path]}
        elif cluster:
            got = _read_for_cluster(path, options)
            if isinstance(got, dict):
                ready[k] = got
            else:
                items.append(got)
        else:
            items.append(path)
    bar = Progress(len(files), "files") if progress else None
    if bar:
        bar.advance(len(ready))
    runner = make_runner(jobs, cluster, len(items))
    try:
        # small tasks of several files: fewer round trips, still an even spread over the workers
        workers = getattr(runner, "jobs", 4)
        batch = max(1, min(64, len(items) // (8 * workers) or 1))
        records = runner.map(solve_record, items, (options, mode, tuple(show or ()), result), progress=bar, batch=batch)
    finally:
        runner.close()
        if bar:
            bar.close()
    out: list[dict] = []
    it = iter(records)
    for k in range(len(files)):
        out.append(ready[k] if k in ready else next(it))
    return out
