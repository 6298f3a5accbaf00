"""Where many independent pieces of work run: this process, local worker processes, or a Dask cluster.

Folder runs (many files) and studies (many samples) split their work into tasks that share
nothing but their inputs, so any of three runners can carry them out, with the same results:

* :class:`InlineRunner`: in this process, one task after another;
* :class:`PoolRunner`: ``--jobs N`` local worker processes (the default: one per core);
* :class:`DaskRunner`: the workers of a Dask distributed cluster (``--cluster tcp://host:port``).
  ``dask`` and ``distributed`` are imported only here and only then
  (``pip install "dcnet[cluster]"``).

Tasks return plain data (records of files, compact arrays of samples); results come back in
the order of the tasks whatever order they finish in. Errors the user can cause travel back as
data too (dcnet errors pickle cleanly), so one bad file never stops the others.

A progress bar is drawn on standard error when it is a terminal (:class:`Progress`).
"""

from __future__ import annotations

import os
import sys
import time

__all__ = ["default_jobs", "Progress", "InlineRunner", "PoolRunner", "DaskRunner", "make_runner"]


def default_jobs() -> int:
    """The cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


class Progress:
    """A one-line progress bar on standard error, drawn only when it is a terminal."""

    def __init__(self, total: int, what: str, stream=None, every: float = 0.1):
        self.total = max(int(total), 0)
        self.what = what
        self.done = 0
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = bool(getattr(self.stream, "isatty", lambda: False)()) and self.total > 0
        self.start = time.perf_counter()
        self.every = every
        self._last = 0.0

    def advance(self, n: int = 1) -> None:
        self.done += n
        if not self.enabled:
            return
        now = time.perf_counter()
        if now - self._last >= self.every or self.done >= self.total:
            self._last = now
            self._draw(now)

    def _draw(self, now: float) -> None:
        width = 30
        frac = min(self.done / self.total, 1.0) if self.total else 1.0
        bar = "#" * int(frac * width) + "." * (width - int(frac * width))
        self.stream.write(f"\r[{bar}] {self.done:,}/{self.total:,} {self.what}  {now - self.start:6.1f} s")
        self.stream.flush()

    def close(self) -> None:
        if self.enabled:
            self._draw(time.perf_counter())
            self.stream.write("\n")
            self.stream.flush()


# ------------------------------------------------------------------ tasks
# Module-level functions, so every runner can ship them to a worker.
_STUDY = None


def _set_study(study) -> None:
    global _STUDY
    _STUDY = study


def _study_task(start, values):
    return _STUDY.run_chunk(values, start)


def _study_task_with(study, start, values):
    return study.run_chunk(values, start)


def _call_batch(fn, items, args):
    return [fn(item, *args) for item in items]


def _batches(items: list, size: int) -> list[list]:
    return [items[k : k + size] for k in range(0, len(items), size)]


# ----------------------------------------------------------------- runners
class InlineRunner:
    """Everything in this process."""

    name = "this process"

    def map(self, fn, items, args=(), progress=None, batch: int = 1):
        out = []
        for item in items:
            out.append(fn(item, *args))
            if progress:
                progress.advance()
        return out

    def run_study(self, study, tasks, progress=None):
        out = []
        for start, values in tasks:
            out.append(study.run_chunk(values, start))
            if progress:
                progress.advance(len(next(iter(values.values()))))
        return out

    def close(self) -> None:
        pass


class PoolRunner:
    """``jobs`` local worker processes (forked where the system allows it and this process has a
    single thread: they start at once and share the parent's imported modules)."""

    def __init__(self, jobs: int):
        self.jobs = max(1, int(jobs))
        self.name = f"{self.jobs} local worker processes"

    def _context(self):
        """fork when this process has one thread (workers start at once); with other threads
        alive (a Dask client, a host application) a fork could copy a lock in use, so the
        workers come from a fork server instead."""
        import multiprocessing as mp
        import threading

        methods = mp.get_all_start_methods()
        if sys.platform.startswith("linux") and "fork" in methods:
            return mp.get_context("fork" if threading.active_count() == 1 else "forkserver")
        return mp.get_context()

    def map(self, fn, items, args=(), progress=None, batch: int = 1):
        from concurrent.futures import ProcessPoolExecutor, as_completed

        items = list(items)
        chunks = _batches(items, max(1, batch))
        results: list = [None] * len(chunks)
        with ProcessPoolExecutor(max_workers=min(self.jobs, max(1, len(chunks))), mp_context=self._context()) as pool:
            futures = {pool.submit(_call_batch, fn, chunk, args): k for k, chunk in enumerate(chunks)}
            for fut in as_completed(futures):
                k = futures[fut]
                results[k] = fut.result()
                if progress:
                    progress.advance(len(chunks[k]))
        return [r for chunk in results for r in chunk]

    def run_study(self, study, tasks, progress=None):
        from concurrent.futures import ProcessPoolExecutor, as_completed

        results: list = [None] * len(tasks)
        with ProcessPoolExecutor(
            max_workers=min(self.jobs, len(tasks)), mp_context=self._context(), initializer=_set_study, initargs=(study,)
        ) as pool:
            futures = {pool.submit(_study_task, start, values): k for k, (start, values) in enumerate(tasks)}
            for fut in as_completed(futures):
                k = futures[fut]
                results[k] = fut.result()
                if progress:
                    progress.advance(len(next(iter(tasks[k][1].values()))))
        return results

    def close(self) -> None:
        pass


class DaskRunner:
    """The workers of a Dask distributed cluster, reached at its scheduler's address."""

    def __init__(self, address: str, timeout: float = 10.0):
        from .errors import InputError

        try:
            from distributed import Client
        except ImportError:
            raise InputError("--cluster needs dask's distributed scheduler", hint='install it with: pip install "dcnet[cluster]"') from None
        try:
            self.client = Client(address, timeout=timeout, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise InputError(
                f"cannot reach the Dask scheduler at {address} ({exc})",
                hint="start one with: dask scheduler --host HOST --port PORT, and workers with: dask worker tcp://HOST:PORT",
            ) from None
        self.address = address
        self.name = f"the Dask cluster at {address}"

    def map(self, fn, items, args=(), progress=None, batch: int = 1):
        from distributed import as_completed

        chunks = _batches(list(items), max(1, batch))
        futures = [self.client.submit(_call_batch, fn, chunk, args, pure=False) for chunk in chunks]
        index = {f.key: k for k, f in enumerate(futures)}
        results: list = [None] * len(chunks)
        with self.client.as_current():
            for fut in as_completed(futures):
                k = index[fut.key]
                results[k] = fut.result()
                if progress:
                    progress.advance(len(chunks[k]))
        return [r for chunk in results for r in chunk]

    def run_study(self, study, tasks, progress=None):
        from distributed import as_completed

        shared = self.client.scatter(study, broadcast=True)
        futures = [self.client.submit(_study_task_with, shared, start, values, pure=False) for start, values in tasks]
        index = {f.key: k for k, f in enumerate(futures)}
        results: list = [None] * len(tasks)
        with self.client.as_current():
            for fut in as_completed(futures):
                k = index[fut.key]
                results[k] = fut.result()
                if progress:
                    progress.advance(len(next(iter(tasks[k][1].values()))))
        return results

    def close(self) -> None:
        self.client.close()


def make_runner(jobs: int | None, cluster: str | None, tasks: int):
    """The runner for ``tasks`` pieces of work: the cluster when given, local processes when
    there is more than one task and more than one job, else this process."""
    if jobs is not None and jobs < 1:
        from .errors import InputError

        raise InputError(f"--jobs {jobs}: give at least 1 worker process")
    if cluster:
        return DaskRunner(cluster)
    jobs = default_jobs() if jobs is None else jobs
    if jobs > 1 and tasks > 1:
        return PoolRunner(jobs)
    return InlineRunner()


def add_options(p) -> None:
    """``--jobs`` and ``--cluster`` for a command."""
    g = p.add_argument_group("where the work runs")
    g.add_argument("--jobs", type=int, metavar="N", help=f"local worker processes (default: one per core, here {default_jobs()})")
    g.add_argument("--cluster", metavar="ADDRESS", help="run on the Dask cluster whose scheduler is at ADDRESS, e.g. tcp://10.0.0.5:8786")
