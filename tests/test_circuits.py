"""Every demo circuit solves, verifies itself, and tells a plausible story."""

from pathlib import Path

import pytest

import dcnet

ROOT = Path(__file__).resolve().parent.parent
DEMOS = sorted((ROOT / "circuits").glob("*.dcn"))


def test_there_are_demos():
    names = {p.stem for p in DEMOS}
    assert {"cabin", "telecom-shelter", "ebike-segment"} <= names


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_demo_solves_and_verifies(path):
    sol = dcnet.load(path).solve()
    assert sol.balance["ok"]
    assert sol.balance["kcl_relative"] < 1e-9
    assert sol.balance["power_relative"] < 1e-9
    assert sol.netlist.title


def test_cabin_far_string_carries_less():
    sol = dcnet.load(ROOT / "circuits" / "cabin.dcn").solve()
    # both strings discharge; the older string on the longer run gives less current
    assert sol.state("A") == sol.state("B") == "discharging"
    assert abs(sol.current("B")) < abs(sol.current("A"))
    # everything the cells deliver is dissipated or used somewhere (Tellegen)
    delivered = -(sol.power("A") + sol.power("B"))
    used = sum(sol.power(n) for n in ("PA", "PB", "NA", "NB", "F1", "F2", "PH", "FAN", "LIGHTS"))
    assert delivered == pytest.approx(used, rel=1e-9)


def test_telecom_strings_charge_from_rectifier():
    sol = dcnet.load(ROOT / "circuits" / "telecom-shelter.dcn").solve()
    assert sol.state("RECT") == "delivering"
    for s in range(1, 5):
        assert sol.state(f"S{s}C1") == "charging"
    # the positive bus is grounded: the battery side is negative
    assert sol.potential("bus-") < -50


def test_ebike_group_shares_unevenly_with_aged_cell():
    sol = dcnet.load(ROOT / "circuits" / "ebike-segment.dcn").solve()
    assert abs(sol.current("G3B")) < abs(sol.current("G3A"))
    # the series string carries the load current through every group
    for g in range(1, 5):
        assert -(sol.current(f"G{g}A") + sol.current(f"G{g}B")) == pytest.approx(12.0, rel=1e-9)


def test_readme_quick_start_matches_ci():
    readme = (ROOT / "README.md").read_text()
    ci = (ROOT / ".ci" / "run").read_text()
    assert "<!-- test-command -->" in readme and "test-command" in ci
    assert "dcnet solve circuits/cabin.dcn" in readme
