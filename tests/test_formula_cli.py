"""``dcnet formula`` and ``dcnet equivalent`` on the command line: formats, checks, errors."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

import dcnet
from dcnet.cli import main

ROOT = Path(__file__).resolve().parent.parent
VAN = str(ROOT / "circuits" / "van-two-strings.dcn")


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_text_output_says_it_was_checked(capsys):
    code, out, err = run(capsys, "formula", VAN, "--for", "A1.current", "B1.current", "--keep-all")
    assert code == 0, err
    assert "kept as symbols: r_strap = " in out and "r_cable1" in out and "r_cable2" in out
    assert "A1.current (A)" in out and "  = -" in out
    assert "checked against the numeric solve at the file's values" in out
    sol = dcnet.load(VAN).solve(checks=False)
    assert f"numeric solve: {sol.current('A1'):.6g}"[:20] in out or "numeric solve: -17.0249 A" in out


def test_latex_output(capsys):
    code, out, _ = run(
        capsys, "formula", VAN, "--for", "A1.current", "bus+,gnd", "--keep", "r_strap,r_cable1", "--format", "latex"
    )
    assert code == 0
    assert out.count(r"\begin{align}") == 1 and r"\end{align}" in out
    assert r"I_{\mathrm{A1}} &= - \frac{" in out
    assert r"r_{\mathrm{cable1}}" in out and r"V_{\mathrm{bus+},\mathrm{gnd}}" in out


def test_python_output_runs_and_matches_the_solve(capsys):
    code, out, _ = run(
        capsys,
        "formula",
        VAN,
        "--for",
        "A1.current",
        "PUMP.power",
        "--keep",
        "r_cable2",
        "--keep",
        "A1.emf",
        "--format",
        "python",
    )
    assert code == 0
    space: dict = {}
    exec(out, space)  # noqa: S102 - code dcnet wrote
    sol = dcnet.load(VAN).solve(checks=False)
    # at its defaults (the file's values) each function gives the numeric solve's answer
    assert space["A1_current"]() == pytest.approx(sol.current("A1"), rel=1e-10)
    assert space["PUMP_power"]() == pytest.approx(sol.power("PUMP"), rel=1e-10)
    text = Path(VAN).read_text().replace("let r_cable2 = 1.9 mOhm", "let r_cable2 = 4 mOhm")
    other = dcnet.parse(text).solve(checks=False)
    assert space["A1_current"](r_cable2=4e-3) == pytest.approx(other.current("A1"), rel=1e-10)


def test_json_output(capsys):
    code, out, _ = run(capsys, "formula", VAN, "--for", "B2.voltage", "--keep", "B2.r", "--format", "json")
    assert code == 0
    data = json.loads(out)
    assert data["kept"] == {"B2.r": pytest.approx(0.004)}
    (f,) = data["formulas"]
    assert f["quantity"] == "B2.voltage" and f["value"] == pytest.approx(f["solved"], rel=1e-12)
    assert "checked" in data


def test_output_file_and_keep_all_note(capsys, tmp_path):
    src = tmp_path / "c.dcn"
    src.write_text(
        "let L1 = 3 m\nlet r_h = 0.5 Ohm\ncell A a gnd emf=12V r=4mOhm\ncable P a b length=L1 size=16mm2\nload H b gnd r=r_h\n"
    )
    target = tmp_path / "out.txt"
    code, out, _ = run(capsys, "formula", str(src), "--for", "H.current", "--keep-all", "-o", str(target))
    assert code == 0 and out == ""
    text = target.read_text()
    assert "kept as symbols: r_h = 500.0 mOhm" in text
    assert "note: left as numbers" in text and "L1" in text


@pytest.mark.parametrize(
    "argv, phrase",
    [
        (["--for", "A1.current", "--keep", "r_strp"], "did you mean 'r_strap'"),
        (["--for", "A1.current"], "at least one kept value"),
        (["--for", "A9.current", "--keep", "r_strap"], "no element or node named 'A9'"),
        (["--for", "F1.loading_pct", "--keep", "r_strap"], "derived result"),
        (["--for", "A1.current", "--keep", "A1.capacity"], "does not enter the circuit equations"),
    ],
)
def test_errors_exit_2_without_traceback(capsys, argv, phrase):
    code, out, err = run(capsys, "formula", VAN, *argv)
    assert code == 2
    assert phrase in err and "Traceback" not in err
    assert "van-two-strings.dcn" in err


def test_bad_circuit_file_has_location(capsys, tmp_path):
    bad = tmp_path / "bad.dcn"
    bad.write_text("cell A a gnd emf=12V r=1mohms\n")
    code, _, err = run(capsys, "formula", str(bad), "--for", "A.current", "--keep", "A.r")
    assert code == 2 and "bad.dcn:1:" in err and "did you mean 'mOhm'" in err


def test_equivalent_numeric(capsys):
    code, out, _ = run(capsys, "equivalent", VAN, "--between", "feed", "gnd")
    assert code == 0
    eq = dcnet.equivalent(dcnet.load(VAN), "feed", "gnd")
    assert "V_th" in out and "R_th" in out and "I_N" in out and "G_N" in out
    assert "open-circuit voltage from feed to gnd" in out
    # Thevenin's theorem (REFERENCES.md): the equivalent drives the same current into a load
    # as the network does
    text = Path(VAN).read_text() + "load EXTRA feed gnd r=0.25Ohm\n"
    sol = dcnet.parse(text).solve(checks=False)
    assert sol.current("EXTRA") == pytest.approx(eq.v_th / (eq.r_th + 0.25), rel=1e-10)
    code, out, _ = run(capsys, "equivalent", VAN, "--between", "feed", "gnd", "--format", "json")
    data = json.loads(out)
    assert data["r_th_ohm"] == pytest.approx(eq.r_th) and data["i_n_A"] == pytest.approx(eq.v_th / eq.r_th)


def test_equivalent_symbolic(capsys):
    code, out, _ = run(capsys, "equivalent", VAN, "--between", "feed", "gnd", "--keep", "r_cable1,r_cable2")
    assert code == 0
    for name in ("V_th (V)", "R_th (Ohm)", "I_N (A)", "G_N (S)"):
        assert name in out
    assert "checked against the numeric solve" in out
    code, out, _ = run(capsys, "equivalent", VAN, "--between", "feed", "gnd", "--keep", "r_cable1", "--format", "latex")
    assert r"R_{\mathrm{th}} &= " in out


def test_equivalent_errors(capsys):
    code, _, err = run(capsys, "equivalent", VAN, "--between", "fed", "gnd")
    assert code == 2 and "did you mean 'feed'" in err and "Traceback" not in err


def test_solve_path_does_not_import_sympy():
    # sympy is imported only inside the symbolic commands (DEVELOPERS.md)
    code = (
        f"import sys; from dcnet.cli import main; main(['solve', {VAN!r}]); "
        "print('SYMPY' if 'sympy' in sys.modules else 'NO-SYMPY', file=sys.stderr)"
    )
    res = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env={"PYTHONPATH": str(ROOT), "PATH": ""},
    )
    assert "NO-SYMPY" in res.stderr, res.stderr
