"""dcnet sweep and dcnet spread on the command line: formats, plots, exit codes, errors, reproducibility."""

import csv
import io
import json
import re
from pathlib import Path

import pytest

import dcnet
from dcnet.cli import main

ROOT = Path(__file__).resolve().parent.parent
CABIN = str(ROOT / "circuits" / "cabin.dcn")
SHED = str(ROOT / "circuits" / "shed-bank-spread.dcn")


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_sweep_table_csv_and_json_agree_with_point_solves(capsys):
    code, out, _ = run(capsys, "sweep", CABIN, "--vary", "run=1m..4m:4", "--show", "A.current", "PB.drop_pct")
    assert code == 0
    assert "run from 1.000 m to 4.000 m (4 points)" in out and "solved together" in out
    assert "licensed practitioners" in out  # the safety caution
    code, out, _ = run(capsys, "sweep", CABIN, "--vary", "run=1m..4m:4", "--show", "A.current", "PB.drop_pct", "--format", "csv")
    rows = list(csv.reader(io.StringIO(out)))
    assert rows[0] == ["run [m]", "A.current [A]", "PB.drop_pct [%]", "checks_failed"]
    assert [float(r[0]) for r in rows[1:]] == [1.0, 2.0, 3.0, 4.0]
    code, out, _ = run(capsys, "sweep", CABIN, "--vary", "run=1m..4m:4", "--show", "A.current", "--format", "json")
    data = json.loads(out)
    text = Path(CABIN).read_text()
    for k, run_m in enumerate(data["vary"]["run"]["values"]):
        # reference: the file with the value written in, solved on its own
        sol = dcnet.parse(re.sub(r"let run\s+= 1.8 m", f"let run = {run_m!r} m", text), CABIN, base_dir=ROOT / "circuits").solve()
        assert data["quantities"]["A.current"]["values"][k] == sol.current("A")


def test_sweep_grid_and_log_spacing(capsys):
    code, out, _ = run(capsys, "sweep", CABIN, "--vary", "run=1m..2m:2", "--vary", "r_int=1mOhm..100mOhm:3:log", "--show", "A.current", "--format", "json")
    assert code == 0
    data = json.loads(out)
    assert data["points"] == 6
    assert data["vary"]["run"]["values"] == [1.0, 1.0, 1.0, 2.0, 2.0, 2.0]  # the first --vary varies slowest
    assert data["vary"]["r_int"]["values"][:3] == pytest.approx([1e-3, 1e-2, 1e-1])


def test_sweep_plot_is_written(capsys, tmp_path):
    pytest.importorskip("matplotlib")
    png = tmp_path / "sweep.png"
    code, _, _ = run(capsys, "sweep", CABIN, "--vary", "run=1m..4m:4", "--vary", "r_int=3mOhm..6mOhm:2", "--show", "A.current", "B.current", "--plot", str(png))
    assert code == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize(
    "vary, message",
    [
        ("runn=1m..2m", "has no let value 'runn'"),
        ("run=1..2", "is a plain number, but the let value is a length"),
        ("run=1m-2m", "write NAME=START..STOP"),
        ("run=1m..2m:often", "'often' is neither a number of points nor 'log'"),
        ("run=-1m..2m:log", "a :log range needs positive ends"),
        ("run=1m..2mm2", "is a cross-section"),
        ("run=0m..2m:3", "with run = 0 (SI): length must be greater than zero"),
    ],
)
def test_sweep_bad_options_exit_2_with_a_message(capsys, vary, message):
    code, out, err = run(capsys, "sweep", CABIN, "--vary", vary, "--show", "A.current")
    assert code == 2
    assert message in err, err
    assert "Traceback" not in err


def test_sweep_unknown_quantity_exits_2(capsys):
    code, _, err = run(capsys, "sweep", CABIN, "--vary", "run=1m..2m", "--show", "A.curent")
    assert code == 2 and "has no result 'curent'" in err


def test_spread_report_checks_and_exit_code(capsys):
    code, out, _ = run(capsys, "spread", SHED, "--samples", "3000", "--independent", "all", "--show", "BAT.s1.fuse.current", "bat+,bat-")
    assert code == 1  # some samples fail the imbalance limit written in the demo
    assert "3,000 samples, seed 1, normal distribution" in out
    assert "each of 16 elements its own draw" in out
    m = re.search(r"imbalance\s+bank BAT\s+([\d.]+) %", out)
    assert m and 50 < float(m.group(1)) < 100
    assert "licensed practitioners" in out


def test_spread_is_reproducible_and_the_same_in_worker_processes(capsys):
    argv = ["spread", SHED, "--samples", "6000", "--independent", "r_mono", "--show", "BAT.s2.fuse.current", "--format", "json"]
    _, one, _ = run(capsys, *argv, "--jobs", "1")
    _, again, _ = run(capsys, *argv, "--jobs", "1")
    _, pool, _ = run(capsys, *argv, "--jobs", "2")
    _, other, _ = run(capsys, *argv, "--jobs", "1", "--seed", "2")
    assert one == again == pool
    assert one != other
    data = json.loads(one)
    q = data["quantities"]["BAT.s2.fuse.current"]
    assert q["min"] <= q["percentiles"]["p5"] <= q["percentiles"]["p50"] <= q["percentiles"]["p95"] <= q["max"]


def test_spread_csv_uniform_and_histogram(capsys, tmp_path):
    pytest.importorskip("matplotlib")
    png = tmp_path / "hist.png"
    code, out, _ = run(capsys, "spread", SHED, "--samples", "500", "--dist", "uniform", "--only", "r_mono", "--show", "BAT.s1.c1.current", "--format", "csv", "--plot", str(png))
    rows = list(csv.reader(io.StringIO(out)))
    assert rows[0][:6] == ["record", "name", "unit", "nominal", "mean", "std"]
    assert rows[1][0] == "quantity" and rows[1][1] == "BAT.s1.c1.current"
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_spread_needs_tolerances(capsys):
    code, _, err = run(capsys, "spread", CABIN, "--samples", "10")
    assert code == 2 and "has no let value with a tolerance" in err
    code, _, err = run(capsys, "spread", SHED, "--samples", "10", "--only", "run")
    assert code == 2 and "'run' has no tolerance" in err


def test_study_output_never_overwrites_the_input(capsys, tmp_path):
    import shutil

    src = tmp_path / "cabin.dcn"
    shutil.copy(CABIN, src)
    before = src.read_bytes()
    code, _, err = run(capsys, "sweep", str(src), "--vary", "run=1m..2m", "--show", "A.current", "-o", str(src))
    assert code == 2 and "refusing to write over the input file" in err
    code, _, err = run(capsys, "sweep", str(src), "--vary", "run=1m..2m", "--show", "A.current", "--plot", str(src))
    assert code == 2 and "refusing to write over the input file" in err
    assert src.read_bytes() == before


def test_sweep_of_a_cable_size_is_batched_and_exact(capsys):
    # the cable's area is derived again for every point (Kind.finish_batch); reference: the
    # file with each end of the range written in, solved on its own
    demo = ROOT / "circuits" / "workshop-feed-spread.dcn"
    code, out, _ = run(capsys, "sweep", str(demo), "--vary", "size_mm=16mm2..70mm2:2", "--show", "BENCH.voltage", "FP.current", "--format", "json")
    data = json.loads(out)
    assert data["solved"] == {"solved together": 2}
    for k, size in enumerate(("16mm2", "70mm2")):
        text = re.sub(r"let size_mm = 35 mm2", f"let size_mm = {size}", demo.read_text())
        sol = dcnet.parse(text, str(demo), base_dir=demo.parent).solve()
        assert data["quantities"]["BENCH.voltage"]["values"][k] == sol.voltage("BENCH")
        assert data["quantities"]["FP.current"]["values"][k] == sol.current("FP")
    assert code == 1  # the thinner cable fails the critical load's drop limit


def test_jobs_must_be_positive(capsys):
    with pytest.raises(SystemExit) as exc:  # refused with the usage, before the file is read
        run(capsys, "spread", SHED, "--samples", "10", "--jobs", "0")
    assert exc.value.code == 2 and "give at least 1 worker process" in capsys.readouterr().err


def test_python_api_sweep_and_spread():
    from dcnet.analysis import studies

    _, values, res = studies.sweep(CABIN, {"run": studies.axis_values(1.0, 3.0, 3, False)}, ["A.current"])
    assert res.quantities.shape == (3, 1) and list(values["run"]) == [1.0, 2.0, 3.0]
    _, values, res = studies.spread(SHED, 50, seed=4, names=["r_mono"], show=["BAT.s1.fuse.current"])
    assert values["r_mono"].shape == (50,) and res.n == 50


def test_spread_and_sweep_with_fault_current(capsys):
    # --fault adds the fault-current rule for every fuse with an interrupt rating (six in the
    # demo: four string fuses, the inverter's and the pump's), also in worker processes
    argv = ["spread", SHED, "--samples", "500", "--fault", "--format", "json"]
    code, one, _ = run(capsys, *argv, "--jobs", "1")
    _, pool, _ = run(capsys, *argv, "--jobs", "2")
    assert one == pool
    data = json.loads(one)
    rules = [c for c in data["checks"] if c["rule"] == "fault current"]
    assert len(rules) == 6 and all(c["pass_share"] == 1.0 for c in rules)
    code, out, _ = run(capsys, "spread", SHED, "--samples", "300")
    assert "not per sample: prospective fault current (add --fault)" in out
    code, out, _ = run(capsys, "sweep", CABIN, "--vary", "run=1m..5m:3", "--show", "A.current", "--fault")
    assert code in (0, 1) and "and the prospective fault current" in out and "add --fault" not in out
