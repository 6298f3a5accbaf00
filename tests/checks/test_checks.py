"""Installation checks against closed forms and published rules."""

from fractions import Fraction
from pathlib import Path

import pytest

import dcnet
from dcnet.analysis.solution import QuantityError
from dcnet.checks.fault import fault_response
from dcnet.cli import main

ROOT = Path(__file__).resolve().parents[2]


def verdicts(sol, rule, subject=None):
    return [v for v in sol.verdicts if v.rule == rule and (subject is None or v.subject == subject)]


def test_fault_current_at_bank_terminals_is_the_thevenin_closed_form():
    # Thevenin/Norton: strings E_k behind R_k in parallel; a bolted fault across the terminals
    # draws V_oc / R_th = sum(E_k / R_k), with or without a passive load in parallel
    text = (
        "part c cell emf=12.8V r=5mOhm\n"
        "bank B pos neg series=4 parallel=3 cell=c s2.ageing=1.4 s3.c1.emf=12.5V\n"
        "load L pos neg r=0.8Ohm\nground neg\n"
    )
    sol = dcnet.parse(text).solve()
    E = [4 * 12.8, 4 * 12.8, 3 * 12.8 + 12.5]
    R = [4 * 5e-3, 4 * 5e-3 * 1.4, 4 * 5e-3]
    expected = sum(e / r for e, r in zip(E, R))
    (v,) = verdicts(sol, "fault current", "bank B terminals")
    assert v.value == pytest.approx(expected, rel=1e-9)


def test_fault_current_through_a_fuse():
    # one cell, a fuse and a cable to a load; a bolted fault just after the fuse to the negative
    # pole is limited only by the cell's and the fuse's resistance (Ohm's law), and the fuse
    # carries all of it
    text = "cell B pos neg emf=12.6V r=8mOhm\nfuse F pos a rating=100A r=2mOhm interrupt=1kA\ncable W a b length=3m size=16mm2\nload L b neg r=2Ohm\nground neg\n"
    sol = dcnet.parse(text).solve()
    (v,) = verdicts(sol, "fault current", "F")
    assert v.value == pytest.approx(12.6 / 0.010, rel=1e-9)
    assert v.ok is False  # 1260 A exceeds the 1 kA interrupt rating
    total, currents = fault_response(sol, "a", "neg")
    assert total == pytest.approx(1260.0, rel=1e-9)


def test_fault_current_equals_an_explicit_short():
    # superposition check: the Thevenin figure equals solving the circuit with a tiny resistor as the fault
    text = "cell A p n emf=25.4V r=4.5mOhm\ncell B p2 n emf=25.4V r=6mOhm\ncable C p2 p length=2m size=25mm2\nfuse F p x rating=125A r=0.25mOhm\nload L x n r=1.6Ohm\nground n\n"
    sol = dcnet.parse(text).solve()
    total, currents = fault_response(sol, "x", "n")
    shorted = dcnet.parse(text + "resistor FAULT x n r=1e-9Ohm\n").solve(checks=False)
    assert shorted.current("FAULT") == pytest.approx(total, rel=1e-6)
    assert shorted.current("F") == pytest.approx(currents[sol.branches.names.index("F")], rel=1e-6)


def test_drop_agrees_with_the_circular_mil_formula():
    # ABYC E-11 (secondary): CM = K * I * L / E, K = 10.75 for copper, L the round-trip length in
    # feet. K corresponds to a resistivity of 10.75 ohm-cmil/ft = 0.017865 ohm-mm2/m, which our
    # copper model reaches at 20 + (0.017865/0.017241 - 1)/0.00393 = 29.2 degC.
    k = 10.75
    rho_k = k * 5.067075e-4 / 0.3048  # ohm mm2/m; 1 cmil = 5.067075e-4 mm2, 1 ft = 0.3048 m
    temp = 20 + (rho_k / 0.017241 - 1) / 0.00393
    one_way_m, amps, awg, cmil = 6.0, 8.0, 12, 6530  # 12 AWG = 6530 cmil (ASTM B258, secondary)
    text = (
        "source S pos neg emf=12.6V\n"
        f"cable P pos a length={one_way_m}m gauge={awg} temp={temp}degC\n"
        f"cable N b neg length={one_way_m}m gauge={awg} temp={temp}degC\n"
        f"load L a b current={amps}A\nground neg\n"
    )
    sol = dcnet.parse(text).solve()
    drop_ours = 12.6 - sol.voltage("L")
    drop_abyc = k * amps * (2 * one_way_m / 0.3048) / cmil
    assert drop_ours == pytest.approx(drop_abyc, rel=5e-3)  # 6530 cmil is the rounded table area
    (v,) = verdicts(sol, "voltage drop", "to load L")
    assert v.value == pytest.approx(drop_ours / 12.6 * 100, rel=1e-9)


def test_drop_limits_critical_and_declared():
    text = (
        "source S pos neg emf=12V\ncable P pos a length=10m gauge=14\ncable N b neg length=10m gauge=14\n"
        "load NAV a b current=3A critical=yes\nload CAB a b current=1A\nlimit drop max=1% from=pos to=a\nground neg\n"
    )
    sol = dcnet.parse(text).solve()
    nav, cab = verdicts(sol, "voltage drop", "to load NAV")[0], verdicts(sol, "voltage drop", "to load CAB")[0]
    assert nav.limit == 3.0 and cab.limit == 10.0  # ABYC E-11 (secondary): 3 % critical, 10 % other
    assert nav.ok is False and cab.ok is True  # about 5.5 % on 2 x 10 m of 14 AWG at 4 A
    (declared,) = verdicts(sol, "voltage drop", "pos to a")
    assert declared.limit == 1.0 and declared.ok is False


def test_fuse_continuous_loading():
    # 125 % rule for continuous loads (NEC 210.20(A), from memory): at most 80 % of the rating
    text = "cell B pos neg emf=12.6V r=8mOhm\nfuse F pos a rating=10A\nload L a neg current=8.5A\nground neg\n"
    (v,) = verdicts(dcnet.parse(text).solve(), "fuse loading")
    assert v.limit == pytest.approx(8.0) and v.ok is False


def test_cell_window_from_chemistry_and_explicit_limits():
    # a 12.8 V lead-acid block is six cells (12.8 / 2.0 V rounded); window 6 x 1.75 .. 6 x 2.40 V
    # (per-cell values from memory, as dcnet/data/chemistries.tsv says)
    text = "cell B pos neg emf=12.8V r=8mOhm chemistry=lead-acid\nsource CH pos neg emf=16V r=2mOhm\nground neg\n"
    sol = dcnet.parse(text).solve()
    (hi,) = verdicts(sol, "cell voltage (highest)", "B")
    assert hi.limit == pytest.approx(14.4) and hi.ok is False  # charged at 320 A from 16 V: 15.36 V at the terminals
    text = "cell B pos neg emf=12.8V r=8mOhm imax=50A vmin=12V\nload L pos neg r=0.2Ohm\nground neg\n"
    sol = dcnet.parse(text).solve()
    (cur,) = verdicts(sol, "cell current", "B")
    assert cur.limit == 50 and cur.ok is False  # 12.8/0.208 = 61.5 A
    (lo,) = verdicts(sol, "cell voltage (lowest)", "B")
    assert lo.ok is True and lo.sense == "min"


def test_imbalance_limit_and_circulating_current():
    text = "part c cell emf=13.2V r=4mOhm\nbank R p n series=1 parallel=3 cell=c s3.emf=13.1V lead=1mOhm\nload L p n current=60A\nlimit imbalance max=5% among=R\nground n\n"
    sol = dcnet.parse(text).solve()
    (imb,) = verdicts(sol, "imbalance", "bank R")
    # closed form: strings of 4 mOhm + two 1 mOhm leads; string currents (E_k - V)/R; V from
    # Millman with a 60 A sink
    E = [Fraction("13.2"), Fraction("13.2"), Fraction("13.1")]
    R = Fraction("0.006")
    V = (sum(E) / R - 60) / (3 / R)
    cur = [(e - V) / R for e in E]
    mean = sum(cur) / 3
    expected = max(abs(c - mean) for c in cur) / mean * 100
    assert imb.value == pytest.approx(float(expected), rel=1e-9)
    assert imb.limit == 5 and imb.ok is False
    (circ,) = verdicts(sol, "circulating current", "bank R")
    # at rest the two 13.2 V strings drive the 13.1 V one: 0.1 V / (6 mOhm + 3 mOhm) = 11.1 A
    assert circ.value == pytest.approx(0.1 / 0.009, rel=1e-9)
    # the same figures as the bank's result quantities (dcnet solve --show R.imbalance_pct ...)
    assert sol.quantity("R.imbalance_pct") == ("R.imbalance_pct", pytest.approx(float(expected), rel=1e-9), "%")
    assert sol.quantity("R.circulating_A")[1:] == (pytest.approx(0.1 / 0.009, rel=1e-9), "A")
    with pytest.raises(QuantityError, match="imbalance_pct, circulating_A"):
        sol.quantity("R.sharing")


def test_equal_strings_circulate_nothing():
    # identical strings at rest: no current flows (by symmetry); round-off is shown as zero
    sol = dcnet.parse("part c cell emf=12.9V r=5.2mOhm\nbank B p n series=4 parallel=4 cell=c strap=0.1mOhm bus=0.2mOhm\nload L p n r=1Ohm\nground n\n").solve()
    assert sol.quantity("B.circulating_A")[1] == 0.0


def test_limit_current_and_voltage_statements():
    text = "cell B pos neg emf=12.6V r=8mOhm\nload L pos neg r=1Ohm\nlimit current max=15A of=L\nlimit voltage min=12.5V from=pos to=neg\nground neg\n"
    sol = dcnet.parse(text).solve()
    assert verdicts(sol, "current (highest)", "L")[0].ok is True
    assert verdicts(sol, "voltage (lowest)", "pos to neg")[0].ok is True


@pytest.mark.parametrize(
    "demo, code",
    [("cabin", 0), ("ebike-13s4p", 0), ("ebike-segment", 0), ("telecom-shelter", 0), ("telecom-bank", 1), ("boat-house-bank", 1), ("cabin-rack-taps", 1)],
)
def test_check_command_on_demos(capsys, demo, code):
    assert main(["check", str(ROOT / "circuits" / f"{demo}.dcn")]) == code
    out = capsys.readouterr().out
    assert "Checks:" in out and "licensed practitioners" in out
    assert ("FAIL" in out) == (code == 1)


def test_check_json_lists_every_verdict(capsys):
    import json

    assert main(["check", str(ROOT / "circuits" / "boat-house-bank.dcn"), "--format", "json"]) == 1
    data = json.loads(capsys.readouterr().out)
    failed = [c for c in data["checks"] if not c["ok"]]
    assert failed and failed[0]["rule"] == "fault current" and failed[0]["subject"] == "MF"
    assert all({"rule", "subject", "value", "limit", "unit", "ok", "source"} <= set(c) for c in data["checks"])


def test_layouts_command(capsys):
    import json

    assert main(["layouts", str(ROOT / "circuits" / "cabin-rack-taps.dcn"), "--format", "json"]) == 0
    (table,) = json.loads(capsys.readouterr().out)
    by_tap = {lay["tap"]: lay for lay in table["layouts"]}
    assert by_tap["opposite"]["imbalance_pct"] < by_tap["same"]["imbalance_pct"]
    for lay in table["layouts"]:
        assert sum(lay["string_currents_A"]) == pytest.approx(180.0, rel=1e-9)  # KCL: the strings carry the load
