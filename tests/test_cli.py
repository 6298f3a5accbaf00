"""The command line: formats, --show, several files, exit codes, errors without tracebacks."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from dcnet.cli import main

ROOT = Path(__file__).resolve().parent.parent
CABIN = str(ROOT / "circuits" / "cabin.dcn")


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_table_output(capsys):
    code, out, err = run(capsys, "solve", CABIN)
    assert code == 0
    assert "Hillside cabin" in out
    assert "discharging" in out
    assert "Self-check" in out
    assert "licensed practitioners" in out  # the safety caution closes every report


def test_json_schema_and_sign_convention(capsys):
    code, out, _ = run(capsys, "solve", CABIN, "--format", "json")
    assert code == 0
    data = json.loads(out)
    for key in ("title", "ground", "nodes", "elements", "balance", "checks"):
        assert key in data
    assert data["nodes"]["gnd"]["potential_V"] == 0.0
    a = data["elements"]["A"]
    assert a["kind"] == "cell"
    # passive sign convention: a discharging cell has negative current and power
    assert a["current_A"] < 0 and a["power_W"] < 0
    assert a["power_W"] == pytest.approx(a["emf_power_W"] + a["loss_W"])
    fan = data["elements"]["FAN"]
    assert fan["current_A"] > 0 and fan["power_W"] > 0
    assert "drop_pct" in data["elements"]["PA"] and "resistance_ohm" in data["elements"]["PA"]
    assert "loading_pct" in data["elements"]["F1"]
    assert abs(data["balance"]["power_sum_W"]) < 1e-6
    assert data["balance"]["kcl_max_residual_A"] < 1e-6


def test_csv_and_markdown(capsys):
    code, out, _ = run(capsys, "solve", CABIN, "--format", "csv")
    assert code == 0
    lines = out.strip().splitlines()
    assert lines[0].startswith("record,name,kind,node1,node2,potential_V,current_A")
    assert any(line.startswith("element,A,cell,") for line in lines)
    code, out, _ = run(capsys, "solve", CABIN, "--format", "markdown")
    assert code == 0 and out.startswith("# Hillside cabin") and "| name | kind |" in out


def test_show_quantities(capsys):
    code, out, _ = run(capsys, "solve", CABIN, "--show", "A.current", "bus+", "a+,bus+", "PB.drop_pct", "--format", "json")
    assert code == 0
    values = json.loads(out)["values"]
    assert set(values) == {"A.current", "bus+.potential", "V(a+,bus+)", "PB.drop_pct"}
    assert values["A.current"] < 0


def test_show_unknown_quantity_exits_2(capsys):
    code, _, err = run(capsys, "solve", CABIN, "--show", "A.curent")
    assert code == 2
    assert "has no result 'curent'" in err


def test_bad_file_exits_2_with_location(capsys, tmp_path):
    bad = tmp_path / "bad.dcn"
    bad.write_text("cell A1 a b emf=12V r=1mohms\nload L a b r=1Ohm\n")
    code, out, err = run(capsys, "solve", str(bad))
    assert code == 2
    assert f"{bad}:1:24: unknown unit 'mohms'" in err
    assert "^^^^^" in err and "did you mean 'mOhm'" in err
    assert "Traceback" not in err


def test_several_files_one_bad(capsys, tmp_path):
    bad = tmp_path / "bad.dcn"
    bad.write_text("load L a b r=1Ohm\nload M c d r=1Ohm\n")
    before = bad.read_bytes()
    code, out, err = run(capsys, "solve", CABIN, str(bad), str(ROOT / "circuits" / "ebike-segment.dcn"))
    assert code == 2
    assert "3 files: 2 ok, 0 failed a check, 1 refused" in out
    assert "refused" in out and "floating" in err
    assert bad.read_bytes() == before  # nothing the user wrote is touched


def test_missing_file(capsys, tmp_path):
    code, _, err = run(capsys, "solve", str(tmp_path / "nope.dcn"))
    assert code == 2 and "file not found" in err


def test_real_process_reads_standard_input():
    # the real process: exit codes, and no traceback on bad input
    good = "cell B pos gnd emf=12.6V r=20mOhm\nload L pos gnd r=1.2Ohm\n"
    proc = subprocess.run([sys.executable, "-m", "dcnet", "solve", "-", "--show", "L.current"], input=good, capture_output=True, text=True, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr
    assert "L.current" in proc.stdout and "10.33 A" in proc.stdout
    proc = subprocess.run([sys.executable, "-m", "dcnet", "solve", "-"], input="cell B pos\n", capture_output=True, text=True, cwd=ROOT)
    assert proc.returncode == 2
    assert "<stdin>:1:" in proc.stderr
    assert "Traceback" not in proc.stderr


def test_output_file_is_written_atomically_and_never_over_an_input(capsys, tmp_path):
    import shutil

    src = tmp_path / "cabin.dcn"
    shutil.copy(CABIN, src)
    before = src.read_bytes()
    out = tmp_path / "result.json"
    code, stdout, _ = run(capsys, "solve", str(src), "--format", "json", "-o", str(out))
    assert code == 0 and stdout == ""
    assert json.loads(out.read_text())["title"].startswith("Hillside")
    # asking to write over the circuit itself is refused, and the circuit is untouched
    code, _, err = run(capsys, "solve", str(src), "-o", str(src))
    assert code == 2 and "refusing to write over the input file" in err
    assert src.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []


def test_folder_of_a_thousand_files_with_a_few_bad(capsys, tmp_path):
    folder = tmp_path / "fleet"
    folder.mkdir()
    bad = {7: "cell A a gnd emf=12V r=1mohms\n", 345: "load L a b r=1Ohm\nload M c d r=1Ohm\n", 999: "cell A a emf=12V\n"}
    for k in range(1000):
        text = bad.get(k, f"cell A pos gnd emf={12 + k / 1000:.3f}V r=20mOhm\ncable W pos load length=2m size=6mm2\nload L load gnd r=1.5Ohm\nground gnd\n")
        (folder / f"site{k:04d}.dcn").write_text(text)
    hashes = {p.name: p.read_bytes() for p in folder.iterdir()}
    code, out, err = run(capsys, "solve", str(folder), "--show", "L.current")
    assert code == 2  # some files were refused
    assert "1000 files: 997 ok, 0 failed a check, 3 refused" in out
    assert out.count(" ok ") + out.count(" ok\n") >= 997
    for k in bad:
        assert f"site{k:04d}.dcn" in err
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == hashes  # nothing overwritten


def test_verbose_prints_the_iterations(capsys):
    code = main(["solve", str(ROOT / "circuits" / "cabin-inverter.dcn"), "--show", "INV.power", "-v"])
    out, err = capsys.readouterr()
    assert code == 0
    assert "nonlinear solve" in err and "residual" in err
    assert "2.000 kW" in out


def test_a_fault_of_dcnet_itself_is_a_message_and_exit_2_not_a_traceback(monkeypatch, capsys):
    """Anything dcnet did not foresee (here a KeyError planted in the solve command) ends with a
    message that says it is dcnet's fault and how to see the traceback, exit 2; DCNET_DEBUG=1
    lets the exception through for a developer."""
    import pytest

    from dcnet import cli
    from dcnet.commands import solve as solve_command

    def broken(args):
        raise KeyError("planted")

    monkeypatch.setattr(solve_command, "run", broken)
    monkeypatch.delenv("DCNET_DEBUG", raising=False)
    code = cli.main(["solve", str(Path(__file__).resolve().parents[1] / "circuits" / "cabin.dcn")])
    err = capsys.readouterr().err
    assert code == 2
    assert "internal fault in dcnet (KeyError" in err and "Traceback" not in err
    monkeypatch.setenv("DCNET_DEBUG", "1")
    with pytest.raises(KeyError):
        cli.main(["solve", str(Path(__file__).resolve().parents[1] / "circuits" / "cabin.dcn")])
