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

What can go wrong where the work runs stays with the task that met it:

* a worker process that dies (out of memory, a signal) loses its task, and with a local pool
  every task queued with it; :meth:`PoolRunner.map` runs what was lost again file by file in
  fresh workers, then each file that was in a dying worker alone, so that only a file that
  kills its worker again is given up (``lost`` makes its stand-in result, with the reason);
  on a cluster the scheduler retries a task on other workers and gives up with
  ``KilledWorker``, after which the files of the task are run one per task;
* Ctrl-C (SIGINT) and SIGTERM stop the run at once: nothing more is started, local workers
  are ended and reaped (they ignore SIGINT themselves and die with their parent), cluster
  futures are cancelled, and the exception goes on to the command line (exit 130 or 143);
* a cluster address is judged before it is used and reached with a short timeout
  (``--cluster-timeout``).
"""

from __future__ import annotations

import os
import sys
import time

__all__ = ["default_jobs", "Progress", "InlineRunner", "PoolRunner", "DaskRunner", "make_runner", "CLUSTER_TIMEOUT"]

CLUSTER_TIMEOUT = 5.0  # seconds to reach a cluster's scheduler (--cluster-timeout)


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


# ----------------------------------------------------------------- workers
def _worker_start(study=None) -> None:
    """Every local worker process starts here: Ctrl-C is for the parent (which stops the workers
    itself), SIGTERM ends the worker at once, and the worker dies with its parent even when the
    parent is killed outright (Linux: PR_SET_PDEATHSIG), so no worker outlives a run."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
        except Exception:  # pragma: no cover - no libc to ask: the parent still stops its workers
            pass
        if os.getppid() == 1:  # pragma: no cover - the parent died before the line above
            os._exit(1)
    if study is not None:
        _set_study(study)


def _death(procs) -> str:
    """How a worker process of ``procs`` ended, in words ("signal 9, SIGKILL: out of memory?",
    "exit status 3"), or ''. The pool itself ends the other workers with SIGTERM once one
    died, so another ending is preferred to SIGTERM."""
    import signal

    deadline = time.monotonic() + 1.0
    ended: dict = {}
    while True:
        for p in procs:
            if id(p) in ended:
                continue
            try:
                p.join(max(0.0, min(0.05, deadline - time.monotonic())))  # a dead worker is reaped a moment after its pool knows
                code = p.exitcode
            except (OSError, ValueError, AssertionError):
                code = None
            # the pool's own thread may reap the same process at the same moment: the reading that loses
            # that race sees no status yet (None), so a process is read again until the deadline
            if code is not None:
                ended[id(p)] = code
        if len(ended) == len(procs) or time.monotonic() >= deadline:
            break
        time.sleep(0.01)
    codes = [c for c in ended.values() if c]
    codes.sort(key=lambda c: c == -signal.SIGTERM)
    for code in codes:
        if code < 0:
            try:
                name = signal.Signals(-code).name
            except ValueError:
                name = "?"
            return f"signal {-code}, {name}" + (": out of memory?" if -code == signal.SIGKILL else "")
        return f"exit status {code}"
    return ""


def _workers(pool) -> list:
    """The worker processes of a ProcessPoolExecutor (empty once it is shut down)."""
    return list((getattr(pool, "_processes", None) or {}).values())


def _stop(pool, procs) -> None:
    """Stop a pool now: nothing more is started, the workers are ended (SIGTERM, then SIGKILL
    after half a second) and reaped, so no process outlives the run."""
    procs = list({id(p): p for p in [*procs, *_workers(pool)]}.values())
    pool.shutdown(wait=False, cancel_futures=True)
    for p in procs:
        if p.exitcode is None:
            try:
                p.terminate()
            except (OSError, ValueError, AttributeError):
                pass
    deadline = time.monotonic() + 0.5
    for p in procs:
        try:
            p.join(max(0.0, deadline - time.monotonic()))
            if p.exitcode is None:
                p.kill()
                p.join(1.0)
        except (OSError, ValueError, AttributeError, AssertionError):
            pass
    manager = getattr(pool, "_executor_manager_thread", None)
    if manager is not None:  # once it is gone this process has one thread again, and the next pool may fork
        manager.join(1.0)


def _lost(item, why: str, lost):
    """The stand-in result of an item whose worker died each time it ran, or a clear error."""
    if lost is not None:
        return lost(item, why)
    from .errors import RunError

    raise RunError(f"a worker process died while running a task ({why or 'no reason given'})",
                   hint="a task that exhausts a worker's memory ends its process: try fewer --jobs")


# ----------------------------------------------------------------- runners
class InlineRunner:
    """Everything in this process."""

    name = "this process"

    def map(self, fn, items, args=(), progress=None, batch: int = 1, lost=None):
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
        self._ctx = self._context()
        self.forks = self._ctx.get_start_method() == "fork"  # workers start with this process's modules

    def _context(self):
        """fork when this process has one thread (workers start at once); with other threads
        alive (a Dask client, a host application) a fork could copy a lock in use, so the
        workers come from a fork server instead. Decided once, when the runner is made: the
        only threads this runner adds are its own pools' (which hold no lock a worker needs)."""
        import multiprocessing as mp
        import threading

        methods = mp.get_all_start_methods()
        if sys.platform.startswith("linux") and "fork" in methods:
            return mp.get_context("fork" if threading.active_count() == 1 else "forkserver")
        return mp.get_context()

    def _pool(self, workers: int, study=None):
        from concurrent.futures import ProcessPoolExecutor

        return ProcessPoolExecutor(
            max_workers=max(1, min(self.jobs, workers)), mp_context=self._ctx, initializer=_worker_start, initargs=(study,)
        )

    def map(self, fn, items, args=(), progress=None, batch: int = 1, lost=None):
        """``fn(item, *args)`` of every item, in order. A task lost with a dying worker is run
        again file by file, then each file that was in a dying worker alone; an item whose
        worker dies then too gets ``lost(item, reason)`` (or a :class:`~dcnet.errors.RunError`)."""
        items = list(items)
        n = len(items)
        results: list = [None] * n
        size = max(1, batch)
        tasks = [list(range(k, min(k + size, n))) for k in range(0, n, size)]
        # 1. tasks of `batch` items, all queued at once
        failed = self._round(fn, items, args, tasks, results, progress, window=len(tasks))
        if failed:
            # 2. what the dead workers took with them, item by item, as many at a time as there are workers
            failed = self._round(fn, items, args, [[i] for task, _ in failed for i in task], results, progress, window=self.jobs)
        for task, why in failed:
            # 3. each item that was in a worker when it died, alone in a fresh worker
            again = self._round(fn, items, args, [task], results, progress, window=1)
            if again:
                i = task[0]
                results[i] = _lost(items[i], again[0][1] or why, lost)
                if progress:
                    progress.advance()
        return results

    def _round(self, fn, items, args, tasks, results, progress, window: int) -> list:
        """Run ``tasks`` (lists of item indices) with at most ``window`` in flight; returns the
        tasks lost (a worker died, or the task raised), each with the reason."""
        from concurrent.futures import FIRST_COMPLETED, wait
        from concurrent.futures.process import BrokenProcessPool

        failed: list = []
        queue = list(tasks)
        while queue:
            pool = self._pool(min(window, len(queue)))
            procs: list = []
            running: dict = {}
            broken = False
            try:
                while queue or running:
                    while queue and len(running) < window and not broken:
                        task = queue[0]
                        try:
                            fut = pool.submit(_call_batch, fn, [items[i] for i in task], args)
                        except BrokenProcessPool:
                            broken = True
                            break
                        queue.pop(0)
                        running[fut] = task
                        procs.extend(p for p in _workers(pool) if p not in procs)
                    if not running:
                        break
                    finished, _ = wait(running, return_when=FIRST_COMPLETED)
                    for fut in finished:
                        task = running.pop(fut)
                        try:
                            out = fut.result()
                        except BrokenProcessPool:
                            broken = True
                            failed.append((task, None))
                            continue
                        except Exception as exc:  # the task itself failed: its items are tried again alone
                            failed.append((task, f"{type(exc).__name__}: {exc}"))
                            continue
                        for i, r in zip(task, out):
                            results[i] = r
                        if progress:
                            progress.advance(len(task))
            except BaseException:  # Ctrl-C, SIGTERM: stop the workers now, leave nothing running
                _stop(pool, procs)
                raise
            if broken:
                why = _death(procs) or "its worker process ended abruptly"
                failed = [(t, w if w is not None else why) for t, w in failed]
                _stop(pool, procs)
            else:
                pool.shutdown(wait=True)
        return failed

    def run_study(self, study, tasks, progress=None):
        from concurrent.futures import as_completed
        from concurrent.futures.process import BrokenProcessPool

        results: list = [None] * len(tasks)
        pool = self._pool(len(tasks), study)
        procs: list = []
        try:
            futures = {pool.submit(_study_task, start, values): k for k, (start, values) in enumerate(tasks)}
            procs.extend(_workers(pool))
            for fut in as_completed(futures):
                k = futures[fut]
                try:
                    results[k] = fut.result()
                except BrokenProcessPool:
                    from .errors import RunError

                    why = _death([*procs, *_workers(pool)]) or "it ended abruptly"
                    raise RunError(
                        f"a worker process died while solving samples {tasks[k][0]:,} and on ({why})",
                        hint="a circuit whose samples exhaust a worker's memory ends its process: try fewer --jobs, or fewer samples",
                    ) from None
                if progress:
                    progress.advance(len(next(iter(tasks[k][1].values()))))
        except BaseException:
            _stop(pool, procs)
            raise
        pool.shutdown(wait=True)
        return results

    def close(self) -> None:
        pass


def _check_address(address: str) -> None:
    """Refuse a cluster address that cannot be one, before anything is tried."""
    from .errors import InputError

    hint = "give the scheduler's address as tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786"
    try:
        from distributed.comm.addressing import parse_address, parse_host_port

        scheme, loc = parse_address(address)
        if scheme in ("tcp", "tls"):
            host, port = parse_host_port(loc)
            if not host or not 0 < int(port) < 65536:
                raise ValueError("no host, or a port out of range")
    except (ValueError, TypeError) as exc:
        raise InputError(f"--cluster {address!r} is not a scheduler address ({exc})", hint=hint) from None


def _probe(address: str, timeout: float) -> None:
    """A plain TCP connection to the scheduler first: a refused or unreachable address is
    reported at once (or after ``timeout``), without the Dask client's long wait."""
    import socket

    from distributed.comm.addressing import parse_address, parse_host_port

    from .errors import InputError

    scheme, loc = parse_address(address)
    if scheme not in ("tcp", "tls"):
        return
    host, port = parse_host_port(loc)
    try:
        socket.create_connection((host, port), timeout=timeout).close()
    except (OSError, TimeoutError) as exc:
        why = "no answer" if isinstance(exc, (TimeoutError, socket.timeout)) else (exc.strerror or str(exc))
        after = f" within {timeout:g} s" if isinstance(exc, (TimeoutError, socket.timeout)) else ""
        raise InputError(
            f"cannot reach the Dask scheduler at {address}: {why}{after}",
            hint="start one with: dask scheduler --host HOST --port PORT, and workers with: dask worker tcp://HOST:PORT"
            + ("; a slow network: raise --cluster-timeout" if after else ""),
        ) from None


class DaskRunner:
    """The workers of a Dask distributed cluster, reached at its scheduler's address."""

    def __init__(self, address: str, timeout: float = CLUSTER_TIMEOUT):
        from .errors import InputError

        try:
            import distributed  # noqa: F401
        except ImportError:
            raise InputError("--cluster needs dask's distributed scheduler", hint='install it with: pip install "dcnet[cluster]"') from None
        _check_address(address)
        _probe(address, timeout)
        import logging

        logging.getLogger("distributed.client").setLevel(logging.CRITICAL)  # its tracebacks: dcnet says what failed itself
        import dask
        from distributed import Client

        class _Client(Client):
            def __del__(self):  # a client that never connected is let go at once, not after twice its timeout
                try:
                    if self.status != "running":
                        self.status = "closed"
                    super().__del__()
                except BaseException:  # noqa: BLE001 - at exit, nothing to report to
                    pass

        got: list = []

        def connect():
            try:
                with dask.config.set({"distributed.comm.timeouts.connect": f"{timeout}s"}):
                    got.append(_Client(address, timeout=timeout, set_as_default=False))
            except BaseException as exc:  # noqa: BLE001 - handed to the caller below
                got.append(exc)

        # the client waits without end on a listener that never answers: it gets its own thread and a deadline
        import threading

        t = threading.Thread(target=connect, name="dcnet-cluster-connect", daemon=True)
        t.start()
        t.join(2 * timeout + 1)
        try:
            if not got:
                raise TimeoutError(f"no Dask handshake within {2 * timeout + 1:g} s: is it a Dask scheduler?")
            if isinstance(got[0], BaseException):
                raise got[0]
            self.client = got[0]
        except Exception as exc:  # something answers there, but not a Dask scheduler (or not in time)
            raise InputError(
                f"cannot reach the Dask scheduler at {address}: {type(exc).__name__}: {str(exc)[:200]}",
                hint="is a Dask scheduler (of the same dask version) listening there? start one with: dask scheduler --host HOST --port PORT"
                + (f"; a slow network: raise --cluster-timeout (now {timeout:g} s)" if isinstance(exc, (TimeoutError, OSError)) else ""),
            ) from None
        self.address = address
        self.name = f"the Dask cluster at {address}"

    def _collect(self, futures, on_result):
        """Wait for ``futures``; hand each result on; ``KilledWorker`` tasks come back as lost.
        Anything else wrong with the cluster is a :class:`~dcnet.errors.RunError`."""
        from distributed import as_completed
        from distributed.scheduler import KilledWorker

        from .errors import RunError

        index = {f.key: k for k, f in enumerate(futures)}
        lost: list = []
        try:
            with self.client.as_current():
                for fut in as_completed(futures):
                    k = index[fut.key]
                    try:
                        out = fut.result()
                    except KilledWorker as exc:
                        tries = getattr(exc, "allowed_failures", None)
                        n = tries + 1 if isinstance(tries, int) else 0
                        lost.append((k, f"{n or 'several'} Dask worker{'' if n == 1 else 's'} died running it: out of memory?"))
                        continue
                    on_result(k, out)
        except RunError:
            raise
        except Exception as exc:
            self._cancel(futures)
            raise RunError(
                f"the work on the Dask cluster at {self.address} failed: {type(exc).__name__}: {exc}",
                hint="is the same dcnet installed on every worker, and the scheduler still running?",
            ) from None
        except BaseException:  # Ctrl-C, SIGTERM: nothing more runs for us
            self._cancel(futures)
            raise
        return lost

    def _cancel(self, futures) -> None:
        try:
            self.client.cancel(futures, asynchronous=False)
        except BaseException:  # noqa: BLE001 - stopping anyway
            pass

    def map(self, fn, items, args=(), progress=None, batch: int = 1, lost=None):
        items = list(items)
        n = len(items)
        size = max(1, batch)
        tasks = [list(range(k, min(k + size, n))) for k in range(0, n, size)]
        results: list = [None] * n

        def keep(task_list):
            def on_result(k, out):
                for i, r in zip(task_list[k], out):
                    results[i] = r
                if progress:
                    progress.advance(len(task_list[k]))

            return on_result

        def run(task_list):
            futures = [self.client.submit(_call_batch, fn, [items[i] for i in t], args, pure=False) for t in task_list]
            return self._collect(futures, keep(task_list))

        # 1. tasks of `batch` items; 2. what dead workers took with them, one item per task
        dead = run(tasks)
        if dead and size > 1:
            tasks = [[i] for k, _ in dead for i in tasks[k]]
            dead = run(tasks)
        for k, why in dead:
            # 3. each item that was on a dying worker, alone on the cluster: the culprit dies again
            task = [tasks[k]]
            again = run(task)
            if again:
                i = task[0][0]
                results[i] = _lost(items[i], again[0][1] or why, lost)
                if progress:
                    progress.advance()
        return results

    def run_study(self, study, tasks, progress=None):
        from .errors import RunError

        shared = self.client.scatter(study, broadcast=True)
        futures = [self.client.submit(_study_task_with, shared, start, values, pure=False) for start, values in tasks]
        results: list = [None] * len(tasks)

        def on_result(k, out):
            results[k] = out
            if progress:
                progress.advance(len(next(iter(tasks[k][1].values()))))

        dead = self._collect(futures, on_result)
        if dead:
            k, why = dead[0]
            raise RunError(f"the Dask workers solving samples {tasks[k][0]:,} and on died ({why})",
                           hint="a circuit whose samples exhaust a worker's memory ends its process: give the workers more memory")
        return results

    def close(self) -> None:
        try:
            self.client.close(timeout=2)
        except BaseException:  # noqa: BLE001 - closing a client that lost its scheduler
            pass


def make_runner(jobs: int | None, cluster: str | None, tasks: int, cluster_timeout: float | None = None):
    """The runner for ``tasks`` pieces of work: the cluster when given, local processes when
    there is more than one task and more than one job, else this process. ``jobs`` above the
    cores this process may use is lowered to them (said on standard error)."""
    if jobs is not None and jobs < 1:
        from .errors import InputError

        raise InputError(f"--jobs {jobs}: give at least 1 worker process")
    if cluster:
        return DaskRunner(cluster, CLUSTER_TIMEOUT if cluster_timeout is None else cluster_timeout)
    cores = default_jobs()
    if jobs is None:
        jobs = cores
    elif jobs > cores:
        print(f"dcnet: --jobs {jobs} is more than the {cores} cores this process may use: running {cores} worker processes", file=sys.stderr)
        jobs = cores
    if jobs > 1 and tasks > 1:
        return PoolRunner(jobs)
    return InlineRunner()


def _jobs(text: str) -> int:
    import argparse

    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number of worker processes") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value}: give at least 1 worker process (1: everything in dcnet's own process)")
    return value


def _seconds(text: str) -> float:
    import argparse
    import math

    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number of seconds") from None
    if not (math.isfinite(value) and value > 0):
        raise argparse.ArgumentTypeError(f"{text}: give a positive number of seconds")
    return value


def add_options(p) -> None:
    """``--jobs``, ``--cluster`` and ``--cluster-timeout`` for a command."""
    g = p.add_argument_group("where the work runs (Ctrl-C stops the run at once: exit 130; SIGTERM: exit 143)")
    g.add_argument(
        "--jobs", type=_jobs, metavar="N",
        help=f"local worker processes, at least 1, at most the cores this process may use (default: one per core, here {default_jobs()})",
    )
    g.add_argument("--cluster", metavar="ADDRESS", help="run on the Dask cluster whose scheduler is at ADDRESS, e.g. tcp://10.0.0.5:8786")
    g.add_argument(
        "--cluster-timeout", type=_seconds, metavar="SECONDS",
        help=f"how long to try to reach the cluster's scheduler (default {CLUSTER_TIMEOUT:g})",
    )
