"""Folder runs: many circuit files solved (and checked) independently, one record per file.

:func:`run_files` sends the files to a runner (this process, local worker processes or a
Dask cluster: :mod:`dcnet.parallel`); each worker solves its files with
:func:`solve_record` and returns plain records, in the order of the files. A file that
cannot be read or solved gives a ``refused`` record with its rendered error; it never
stops the run. Records are the same whichever runner made them.

Whatever happens to one file stays with its record: an unexpected exception while solving it
(a fault of dcnet's) becomes a ``refused`` record naming the exception as an internal fault;
a file whose worker process dies each time it is run (memory exhausted, a signal) becomes a
``refused`` record saying so, while the files that shared a task with it are solved again
(:mod:`dcnet.parallel`).

For a cluster, the client reads each file and sends its text (files it includes are read
by the worker, so they must be reachable at the same path there).
"""

from __future__ import annotations

from typing import Any

__all__ = ["solve_record", "run_files"]

INTERNAL = (
    "this is a fault in dcnet, not a mistake found in the file: please report it with the file; "
    "the other files of the run are not affected"
)


def _refused(path: str, message: str, hint: str | None, read=None) -> dict[str, Any]:
    """A ``refused`` record for a file dcnet could not finish, with a rendered message."""
    from .errors import DcnetError, Span

    err = DcnetError(message, span=Span(path), hint=hint)
    return {"file": path, "status": "refused", "error": str(err), "message": err.render(), "warnings": [], "read": read or [path]}


def _test_fault(path: str) -> None:
    """For the tests of this module only: ``DCNET_TEST_FAULT=NAME:HOW`` makes the file whose
    name ends in NAME end its worker process (``exit``), run out of memory (``memory``) or
    raise an unexpected exception (``raise``). Unset, this costs one dictionary look-up."""
    import os

    spec = os.environ.get("DCNET_TEST_FAULT")
    if not spec:
        return
    name, _, how = spec.rpartition(":")
    if name and str(path).endswith(name):
        if how == "exit":
            os._exit(77)
        if how == "kill":
            import signal

            os.kill(os.getpid(), signal.SIGKILL)
        if how == "memory":
            raise MemoryError()
        if how == "raise":
            raise RuntimeError("a fault planted by DCNET_TEST_FAULT")


def solve_record(item, options, mode: str = "solve", show=(), result: bool = False) -> dict[str, Any]:
    """Solve one file and describe it as plain data.

    ``item`` is a path, or (path, text) when the text was read elsewhere. ``mode`` is
    ``solve`` or ``check`` (which keeps every verdict); ``result`` keeps the whole solution
    (``Solution.to_dict``). Never raises for one file's sake: an unexpected exception becomes
    a ``refused`` record that names it as an internal fault (Ctrl-C and SIGTERM go through).
    """
    path = item[0] if isinstance(item, tuple) else item
    try:
        _test_fault(path)
        return _solve_record(item, options, mode, show, result)
    except (KeyboardInterrupt, SystemExit, GeneratorExit):
        raise
    except MemoryError:
        return _refused(
            path, "refused: dcnet ran out of memory while solving this file (MemoryError)",
            "the file asks for more memory than this process may use: look for very large banks or blocks, or run it alone",
        )
    except BaseException as exc:  # noqa: BLE001 - one file's fault must not stop the others
        text = str(exc).strip()
        return _refused(path, "internal fault in dcnet while solving this file: " + type(exc).__name__ + (f": {text}" if text else ""), INTERNAL)


def _lost_record(item, why: str) -> dict[str, Any]:
    """The record of a file whose worker process died each time it was run."""
    path = item[0] if isinstance(item, tuple) else item
    return _refused(
        path,
        f"refused: its worker process died each time it solved this file ({why}); the other files were solved without it",
        "a file that exhausts a worker's memory ends its process: look for very large banks or blocks, or solve it alone "
        "(dcnet solve FILE) to see how much it needs",
    )


def _solve_record(item, options, mode: str = "solve", show=(), result: bool = False) -> dict[str, Any]:
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
    except (KeyboardInterrupt, SystemExit):
        raise
    except MemoryError:
        return _refused(path, "refused: dcnet ran out of memory while reading this file (MemoryError)", None)
    except Exception as exc:  # noqa: BLE001 - one file's fault must not stop the others
        return _refused(path, f"internal fault in dcnet while reading this file: {type(exc).__name__}: {exc}", INTERNAL)


def _warm_up(options) -> None:
    """Solve a two-element circuit here before worker processes are forked from this one: they
    start with the solver's modules imported, instead of each importing them (about half a
    second), which matters most for the fresh workers that retry the files of a dead one."""
    from .commands.common import solve_one

    try:
        solve_one("warm-up.dcn", options, text="cell A a gnd emf=12V r=1Ohm\nload L a gnd r=10Ohm\nground gnd\n")
    except Exception:  # noqa: BLE001 - only a head start
        pass


def run_files(files: list[str], options, *, mode: str = "solve", show=(), result: bool = False, jobs=None, cluster=None, progress=True,
              cluster_timeout=None) -> list[dict]:
    """Records of every file, in order, from the runner that ``jobs``/``cluster`` select."""
    from .parallel import Progress, make_runner

    # a cluster is reached first: a wrong address is said at once, before any file is read
    runner = make_runner(jobs, cluster, len(files), cluster_timeout) if cluster else None
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
    try:
        if runner is None:
            runner = make_runner(jobs, cluster, len(items), cluster_timeout)
        if getattr(runner, "forks", False):
            _warm_up(options)
        # small tasks of several files: fewer round trips, still an even spread over the workers
        workers = getattr(runner, "jobs", 4)
        batch = max(1, min(64, len(items) // (8 * workers) or 1))
        records = runner.map(solve_record, items, (options, mode, tuple(show or ()), result), progress=bar, batch=batch,
                             lost=_lost_record)
    finally:
        if runner is not None:
            runner.close()
        if bar:
            bar.close()
    out: list[dict] = []
    it = iter(records)
    for k in range(len(files)):
        out.append(ready[k] if k in ready else next(it))
    return out
