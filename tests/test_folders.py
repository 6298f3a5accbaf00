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
    scratch = tmp_path_factory.mktemp("dask")
    cluster = distributed.LocalCluster(
        host="127.0.0.1", n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, local_directory=str(scratch), silence_logs=40
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
