"""Folder runs in worker processes and on a local Dask cluster; the progress bar; the light single-file path."""

import io
import json
import pickle
import subprocess
import sys
from pathlib import Path

import pytest

from dcnet import errors
from dcnet.cli import main
from dcnet.parallel import Progress

ROOT = Path(__file__).resolve().parent.parent
CABIN = str(ROOT / "circuits" / "cabin.dcn")

GOOD = "cell A pos gnd emf={emf:.3f}V r=20mOhm\ncable W pos f length=2m size=6mm2\nfuse F f load rating={rating}A\nload L load gnd r=1.5Ohm\nground gnd\n"
BAD = {3: "cell A a gnd emf=12V r=1mohms\n", 11: "load L a b r=1Ohm\nload M c d r=1Ohm\n", 17: "cell A a emf=12V\n"}


def _fleet(folder: Path, n: int = 24) -> Path:
    folder.mkdir()
    for k in range(n):
        # every fifth file has a fuse rated too small for its load (a failed check)
        text = BAD.get(k, GOOD.format(emf=12 + k / 100, rating=8 if k % 5 == 0 else 30))
        (folder / f"site{k:03d}.dcn").write_text(text)
    return folder


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def _lines(out: str) -> list[dict]:
    return [json.loads(line) for line in out.splitlines()]


def test_parallel_folder_run_equals_a_run_in_one_process(capsys, tmp_path):
    folder = _fleet(tmp_path / "fleet")
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    code1, one, err1 = run(capsys, "solve", str(folder), "--format", "jsonl", "--show", "L.current", "--jobs", "1")
    code2, two, err2 = run(capsys, "solve", str(folder), "--format", "jsonl", "--show", "L.current", "--jobs", "2")
    assert code1 == code2 == 2  # some files were refused
    assert one == two and err1 == err2
    rows = _lines(one)
    assert [Path(r["file"]).name for r in rows] == sorted(p.name for p in folder.iterdir())  # every file, in order
    assert [r["status"] for r in rows].count("refused") == 3
    assert {Path(r["file"]).name for r in rows if r["status"] == "refused"} == {f"site{k:03d}.dcn" for k in BAD}
    assert "24 files: 16 ok, 5 failed a check, 3 refused" in err1
    assert "site003.dcn:1:25: unknown unit 'mohms'" in err1
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == before  # nothing written into the inputs


def test_check_summary_row_per_file(capsys, tmp_path):
    folder = _fleet(tmp_path / "fleet", 12)
    code, out, err = run(capsys, "check", str(folder), "--jobs", "2")
    assert code == 2
    assert "12 files: 7 passed every check, 3 failed a check, 2 refused" in out
    assert "fuse loading F" in out and "FAILED" in out or "failed" in out
    assert "licensed practitioners" in out
    code, out, _ = run(capsys, "check", str(folder), "--format", "csv", "--jobs", "2")
    lines = out.strip().splitlines()
    assert lines[0].startswith("file,result,checks,failed,worst_rule")
    assert len(lines) == 13


def test_progress_bar_only_on_a_terminal():
    class Tty(io.StringIO):
        def isatty(self):
            return True

    tty, pipe = Tty(), io.StringIO()
    for stream in (tty, pipe):
        bar = Progress(10, "files", stream=stream, every=0.0)
        for _ in range(10):
            bar.advance()
        bar.close()
    assert "10/10 files" in tty.getvalue() and "[" + "#" * 30 + "]" in tty.getvalue()
    assert pipe.getvalue() == ""


def test_errors_cross_process_boundaries_intact():
    err = errors.UnknownNameError("unknown unit 'mohms'", span=errors.Span("a.dcn", 1, 24, 5), hint="did you mean 'mOhm'?", source_line="cell A a gnd r=1mohms")
    back = pickle.loads(pickle.dumps(err))
    assert type(back) is errors.UnknownNameError and back.render() == err.render()


def test_single_file_run_stays_light():
    # the small-circuit path: no worker processes, no dask, no matplotlib
    code = (
        "import sys; from dcnet.cli import main; rc = main(['solve', %r]); "
        "heavy = [m for m in ('dask', 'distributed', 'matplotlib', 'concurrent.futures.process', 'multiprocessing.pool') if m in sys.modules]; "
        "print('HEAVY', heavy); sys.exit(rc)"
    ).replace("%r", repr(CABIN))
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr
    assert "HEAVY []" in proc.stdout


@pytest.fixture(scope="module")
def dask_cluster(tmp_path_factory):
    distributed = pytest.importorskip("distributed")
    import dask

    scratch = tmp_path_factory.mktemp("dask")
    # the scheduler gives up on a task at its first dead worker, and a file named *poison.dcn kills its worker
    # (dcnet.folders._test_fault): for the lost-worker test; the other files of the module solve as ever
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        cluster = distributed.LocalCluster(
            host="127.0.0.1", n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, local_directory=str(scratch),
            silence_logs=40, env={"DCNET_TEST_FAULT": "poison.dcn:kill"},
        )
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


def test_folder_sweep_and_spread_identical_on_a_local_dask_cluster(capsys, tmp_path, dask_cluster):
    folder = _fleet(tmp_path / "fleet", 16)
    argv = ["solve", str(folder), "--format", "jsonl", "--show", "L.current", "W.drop_pct"]
    code_local, local, err_local = run(capsys, *argv, "--jobs", "2")
    code_dask, remote, err_dask = run(capsys, *argv, "--cluster", dask_cluster)
    assert code_local == code_dask == 2
    assert remote == local and err_dask == err_local
    argv = ["check", str(folder), "--format", "jsonl"]
    assert run(capsys, *argv, "--jobs", "2")[1] == run(capsys, *argv, "--cluster", dask_cluster)[1]
    shed = str(ROOT / "circuits" / "shed-bank-spread.dcn")
    argv = ["spread", shed, "--samples", "5000", "--independent", "all", "--show", "BAT.s1.fuse.current", "--format", "json"]
    assert run(capsys, *argv, "--jobs", "1")[1] == run(capsys, *argv, "--cluster", dask_cluster)[1]
    argv = ["sweep", CABIN, "--vary", "run=1m..9m:9", "--show", "A.current", "--format", "json"]
    assert run(capsys, *argv, "--jobs", "1")[1] == run(capsys, *argv, "--cluster", dask_cluster)[1]


def test_unreachable_cluster_is_a_clear_error(capsys):
    pytest.importorskip("distributed")
    code, _, err = run(capsys, "solve", CABIN, CABIN, "--cluster", "tcp://127.0.0.1:9", "--format", "jsonl")
    assert code == 2 and "cannot reach the Dask scheduler at tcp://127.0.0.1:9" in err


# ------------------------------------------------- one file's fate stays its own (issue 13, points 4, 7, 8, 10)
def _dcnet(*argv, env=None, **kw):
    """dcnet in a process of its own (a worker that dies, a signal, must not touch the test's process)."""
    import os

    full = {**os.environ, **(env or {})}
    return subprocess.run([sys.executable, "-m", "dcnet", *argv], capture_output=True, text=True, cwd=ROOT, env=full, **kw)


def _others_equal(rows: list[dict], clean: list[dict], culprit: str) -> None:
    assert [r["file"] for r in rows] == [r["file"] for r in clean]  # every file has its line, in order
    for r, c in zip(rows, clean):
        if not r["file"].endswith(culprit):
            assert r == c, r["file"]  # the culprit's neighbours (same task) are solved as in a clean run


@pytest.mark.parametrize("how, said", [("kill", "signal 9, SIGKILL"), ("exit", "exit status 77")])
def test_a_file_that_kills_its_worker_is_the_only_one_refused(capsys, tmp_path, how, said):
    # a worker process that dies (memory exhausted: the kernel's SIGKILL; or an abrupt exit) broke the whole
    # pool: a traceback (BrokenProcessPool), every file lost. Now the lost tasks run again file by file.
    folder = _fleet(tmp_path / "fleet", 40)
    argv = ["solve", str(folder), "--format", "jsonl", "--show", "L.current"]
    _, clean, _ = run(capsys, *argv, "--jobs", "1")
    proc = _dcnet(*argv, "--jobs", "2", env={"DCNET_TEST_FAULT": f"site021.dcn:{how}"})
    assert proc.returncode == 2 and "Traceback" not in proc.stderr
    rows = _lines(proc.stdout)
    _others_equal(rows, _lines(clean), "site021.dcn")
    bad = rows[21]
    assert bad["status"] == "refused" and "its worker process died each time it solved this file" in bad["error"]
    assert said in bad["error"]
    assert "40 files: 28 ok, 8 failed a check, 4 refused" in proc.stderr  # the planted file is one of 29 ok ones


@pytest.mark.parametrize("how, said", [("raise", "internal fault in dcnet while solving this file: RuntimeError"), ("memory", "ran out of memory")])
def test_an_unexpected_exception_in_one_file_is_that_file_s_refused_line(capsys, tmp_path, monkeypatch, how, said):
    folder = _fleet(tmp_path / "fleet", 12)
    argv = ["check", str(folder), "--format", "jsonl", "--jobs", "1"]
    _, clean, _ = run(capsys, *argv)
    monkeypatch.setenv("DCNET_TEST_FAULT", f"site004.dcn:{how}")
    code, out, err = run(capsys, *argv)
    assert code == 2
    rows = _lines(out)
    _others_equal(rows, _lines(clean), "site004.dcn")
    assert rows[4]["status"] == "refused" and said in rows[4]["error"]
    if how == "raise":
        assert "this is a fault in dcnet, not a mistake found in the file" in err


def _group(pgid: int) -> list[int]:
    """Processes still alive in a process group (zombies are dead)."""
    import os

    found = []
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as fh:
                    fields = fh.read().rsplit(")", 1)[1].split()
                if int(fields[2]) == pgid and fields[0] != "Z":
                    found.append(int(d))
            except (OSError, IndexError, ValueError):
                pass
    return found


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
@pytest.mark.parametrize("signame, code, whole_group", [("SIGINT", 130, True), ("SIGTERM", 143, False)])
def test_interrupting_a_folder_run_ends_it_at_once_leaving_no_process_and_the_old_output(tmp_path, signame, code, whole_group):
    # before: Ctrl-C waited for the pool to finish every queued file (12-40 s); SIGTERM left the workers
    # running, orphaned. Ctrl-C from a terminal reaches the whole process group; `kill PID` the parent only.
    import os
    import signal
    import time

    folder = tmp_path / "fleet"
    folder.mkdir()
    text = GOOD.format(emf=12.0, rating=30)
    for k in range(3000):
        (folder / f"s{k:04d}.dcn").write_text(text)
    target = tmp_path / "summary.jsonl"
    target.write_text("the old summary\n")
    proc = subprocess.Popen(
        [sys.executable, "-m", "dcnet", "check", str(folder), "--jobs", "2", "--format", "jsonl", "-o", str(target)],
        cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, start_new_session=True,
    )
    try:
        deadline = time.monotonic() + 60
        while len(_group(proc.pid)) < 3 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.05)  # wait for the two workers
        assert proc.poll() is None and len(_group(proc.pid)) >= 3, "the run did not start its workers"
        sent = time.monotonic()
        sig = getattr(signal, signame)
        if whole_group:
            os.killpg(proc.pid, sig)
        else:
            os.kill(proc.pid, sig)
        _, err = proc.communicate(timeout=30)
        took = time.monotonic() - sent
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
    assert proc.returncode == code, err
    assert "Traceback" not in err and ("interrupted" in err or "terminated" in err)
    assert took < 10, f"took {took:.1f} s to stop"  # generous; measured about 0.1 s on 2 cores
    time.sleep(0.2)
    assert _group(proc.pid) == []  # no worker outlived the run
    assert target.read_text() == "the old summary\n"  # the old output in place
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []  # no temporary file left


def test_jobs_above_the_cores_are_capped_and_said(capsys, tmp_path):
    from dcnet.parallel import default_jobs

    folder = _fleet(tmp_path / "fleet", 6)
    code, out, err = run(capsys, "solve", str(folder), "--format", "jsonl", "--jobs", "4096")
    assert code == 2 and len(_lines(out)) == 6
    assert f"--jobs 4096 is more than the {default_jobs()} cores this process may use: running {default_jobs()} worker processes" in err


@pytest.mark.parametrize("value, said", [("0", "give at least 1 worker process"), ("-3", "give at least 1"), ("two", "not a whole number")])
def test_jobs_below_one_is_refused_before_any_work(capsys, value, said):
    with pytest.raises(SystemExit) as exc:
        main(["solve", CABIN, CABIN, "--jobs", value])
    assert exc.value.code == 2 and said in capsys.readouterr().err


@pytest.mark.parametrize(
    "address, said",
    [
        ("not-an-address", "--cluster 'not-an-address' is not a scheduler address"),
        ("tcp://127.0.0.1:99999", "is not a scheduler address"),
        ("tcp://[::1", "is not a scheduler address"),
        ("tcp://127.0.0.1:1", "cannot reach the Dask scheduler at tcp://127.0.0.1:1: Connection refused"),
    ],
)
def test_a_wrong_cluster_address_is_said_at_once(capsys, address, said):
    # before: a traceback after 20 s (a malformed address), or a 10 s wait (a closed port)
    pytest.importorskip("distributed")
    code, out, err = run(capsys, "solve", CABIN, CABIN, "--cluster", address, "--format", "jsonl")
    assert code == 2 and said in err and out == ""


def test_a_listener_that_is_not_a_scheduler_is_given_up_after_the_timeout(capsys):
    pytest.importorskip("distributed")
    import socket

    with socket.socket() as quiet:  # accepts connections, never says a word
        quiet.bind(("127.0.0.1", 0))
        quiet.listen()
        address = f"tcp://127.0.0.1:{quiet.getsockname()[1]}"
        code, _, err = run(capsys, "check", CABIN, CABIN, "--cluster", address, "--cluster-timeout", "0.3")
    assert code == 2 and f"cannot reach the Dask scheduler at {address}" in err and "--cluster-timeout" in err


def test_a_file_that_kills_its_dask_worker_is_the_only_one_refused(capsys, tmp_path, dask_cluster):
    # a worker lost on a cluster (killed for its memory) took its task's neighbours with it, and the run
    # ended in a traceback (KilledWorker). The test cluster's scheduler gives up on a task at its first dead worker.
    folder = _fleet(tmp_path / "fleet", 24)
    (folder / "site009.dcn").rename(folder / "site009poison.dcn")
    argv = ["solve", str(folder), "--format", "jsonl", "--show", "L.current"]
    _, clean, _ = run(capsys, *argv, "--jobs", "1")
    code, out, err = run(capsys, *argv, "--cluster", dask_cluster)
    assert code == 2 and "Traceback" not in err
    rows = _lines(out)
    _others_equal(rows, _lines(clean), "site009poison.dcn")
    assert rows[9]["status"] == "refused" and "its worker process died each time it solved this file" in rows[9]["error"]
    assert "1 Dask worker died running it" in rows[9]["error"]
    # the cluster is whole again for what follows: a folder without the culprit solves as in one process
    (folder / "site009poison.dcn").unlink()
    assert run(capsys, *argv, "--cluster", dask_cluster)[1] == run(capsys, *argv, "--jobs", "1")[1]


def test_an_interruption_swallowed_in_a_finalizer_is_delivered_again_without_a_traceback(monkeypatch):
    # a SIGTERM that lands inside a finalizer cannot be raised there: Python printed "Exception
    # ignored in ... Traceback" and the run went on (seen about once in five SIGTERM runs of the
    # test above). The hook prints nothing for it and sends the same signal again
    import signal
    from types import SimpleNamespace

    import dcnet.cli as cli

    import threading
    import time

    sent, passed = [], []
    monkeypatch.setattr("os.kill", lambda pid, sig: sent.append((sig, threading.current_thread() is threading.main_thread())))
    hook = cli._unraisable(passed.append)
    monkeypatch.setattr(cli, "_ending", False)
    hook(SimpleNamespace(exc_value=cli.Terminated()))
    hook(SimpleNamespace(exc_value=KeyboardInterrupt()))
    deadline = time.monotonic() + 5
    while len(sent) < 2 and time.monotonic() < deadline:
        time.sleep(0.01)
    # sent again from another thread, so that it is not raised inside the hook itself
    assert sorted(sent) == sorted([(signal.SIGTERM, False), (signal.SIGINT, False)]) and passed == []
    sent.clear()
    monkeypatch.setattr(cli, "_ending", True)  # already ending: nothing is sent again
    hook(SimpleNamespace(exc_value=cli.Terminated()))
    time.sleep(0.1)
    assert sent == []
    other = SimpleNamespace(exc_value=ValueError("x"))
    hook(other)
    assert passed == [other]  # anything else goes to the hook that was there
