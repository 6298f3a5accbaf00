"""Wiring mistakes fail with their culprits; parts left idle on purpose do not.

These are structural facts (Kirchhoff's laws: a load whose terminals join nothing draws nothing;
a charger whose current flows into its positive terminal absorbs power), no source needed.
"""

from __future__ import annotations

import pytest

import dcnet
from dcnet.cli import main
from dcnet.topology import one_edit_apart


def wiring(sol):
    return [v for v in sol.verdicts if v.rule == "wiring"]


def test_a_bank_wired_backwards_against_its_charger_fails():
    # the bank's + on the charger's -: the charger is driven to its 40 A limit into about -25 V,
    # absorbing about a kilowatt (v i with the passive sign), and the check says so
    text = (
        "source CH bus gnd emf=28.8V r=20mOhm imax=40A\n"
        "cell BANK gnd bus emf=25.4V r=10mOhm\n"  # backwards: first node is its positive terminal
        "load L bus gnd r=5Ohm\nground gnd\n"
    )
    sol = dcnet.parse(text).solve()
    (v,) = wiring(sol)
    assert not v.ok and "CH" in v.subject
    p = sol.power("CH")
    assert p > 900  # the loop rule: V(bus) = -(25.4 + I r), I about 40 A + what L takes
    assert v.value == pytest.approx(p, rel=1e-12) and "backwards" in v.detail


def test_a_misspelt_node_that_leaves_a_load_dead_fails_with_a_suggestion():
    text = "cell B b+ gnd emf=12.6V r=5mOhm\nfuse F b+ feed rating=20A r=2mOhm\nload FAN fede gnd r=2Ohm\nload LED feed gnd r=6Ohm\nground gnd\n"
    sol = dcnet.parse(text).solve()
    fails = {v.subject: v for v in wiring(sol)}
    assert "load FAN supplied" in fails
    assert "did you mean 'feed'" in fails["load FAN supplied"].detail
    assert sol.failed


def test_a_misspelt_node_on_a_constant_current_load_is_a_wiring_fail_not_a_refusal(capsys):
    text = "cell B b+ gnd emf=12.6V r=5mOhm\nload LED b+ gdn current=2A\nload M b+ gnd r=6Ohm\nground gnd\n"
    sol = dcnet.parse(text).solve()
    (v,) = wiring(sol)
    assert "LED" in v.subject and "did you mean 'gnd'" in v.detail
    assert sol.current("LED") == 0 and sol.current("M") == pytest.approx(12.6 / 6.005, rel=1e-12)


def test_a_cable_that_ends_nowhere_fails():
    text = "cell B b+ gnd emf=12.6V r=5mOhm\ncable C b+ lod length=2m size=6mm2\nload L load gnd r=2Ohm\ncable D b+ load length=2m size=6mm2\nground gnd\n"
    sol = dcnet.parse(text).solve()
    subjects = {v.subject for v in wiring(sol)}
    assert "cable C connected" in subjects
    (c,) = [v for v in wiring(sol) if v.subject == "cable C connected"]
    assert "did you mean 'load'" in c.detail


def test_parts_idle_on_purpose_and_free_battery_terminals_are_not_mistakes():
    text = (
        "cell B b+ gnd emf=12.6V r=5mOhm\n"
        "switch S b+ s state=open\nload L s gnd r=2Ohm\n"  # switched off on purpose
        "cell SPARE sp+ gnd emf=12.6V r=5mOhm\n"  # a battery with a free terminal
        "diode D b+ d drop=0.5V\ncell HI d gnd emf=13.5V r=5mOhm\nload M b+ gnd r=4Ohm\n"  # a blocked diode
        "ground gnd\n"
    )
    sol = dcnet.parse(text).solve()
    assert wiring(sol) == []
    assert sol.state("D") == "blocked" and sol.current("L") == 0


def test_one_edit_apart():
    for a, b in (("feed", "fede"), ("feed", "fed"), ("feed", "feeds"), ("gnd", "gdn"), ("bus+", "bus-")):
        assert one_edit_apart(a, b) and one_edit_apart(b, a)
    for a, b in (("feed", "feed"), ("feed", "food"), ("gnd", "ground"), ("ab", "ba c")):
        assert not one_edit_apart(a, b)


def test_check_command_exits_1_on_a_wiring_fail(tmp_path, capsys):
    f = tmp_path / "w.dcn"
    f.write_text("cell B b+ gnd emf=12.6V r=5mOhm\nload FAN fan gnd r=2Ohm\nload LED b+ gnd r=6Ohm\nground gnd\n")
    assert main(["check", str(f)]) == 1
    out = capsys.readouterr().out
    assert "wiring" in out and "FAN" in out
