"""Installation checks against closed forms and published rules (the fault current, cells, drop,
imbalance, wiring and cable protection have files of their own in this folder)."""

from pathlib import Path

import pytest

import dcnet
from dcnet.cli import main

ROOT = Path(__file__).resolve().parents[2]


def verdicts(sol, rule, subject=None):
    return [v for v in sol.verdicts if v.rule == rule and (subject is None or v.subject == subject)]


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
    sol = dcnet.parse("practice marine\n" + text).solve()
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
    # a 12.8 V lead-acid block is six cells (the only count whose resting range, 1.93..2.17 V per
    # cell, holds 12.8 V); window 6 x 1.75 .. 6 x 2.40 V (per-cell values from memory, as
    # dcnet/data/chemistries.tsv says)
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


def test_limit_current_and_voltage_statements():
    text = "cell B pos neg emf=12.6V r=8mOhm\nload L pos neg r=1Ohm\nlimit current max=15A of=L\nlimit voltage min=12.5V from=pos to=neg\nground neg\n"
    sol = dcnet.parse(text).solve()
    assert verdicts(sol, "current (highest)", "L")[0].ok is True
    assert verdicts(sol, "voltage (lowest)", "pos to neg")[0].ok is True


@pytest.mark.parametrize(
    "demo, code",
    [("cabin", 0), ("ebike-13s4p", 0), ("ebike-segment", 0), ("telecom-shelter", 0), ("boat-isolator", 0), ("telecom-bank", 1), ("boat-house-bank", 1), ("cabin-rack-taps", 1)],
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
