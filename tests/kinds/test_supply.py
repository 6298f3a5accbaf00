"""Sign convention of current sources (supply) and voltage sources (source).

LANGUAGE.md: for sources the FIRST node is the positive terminal, and a source that
delivers power pushes current out of its first node. With the passive sign
convention a `supply` of current=I therefore carries element current -I.
Reference values: Kirchhoff's laws and Ohm's law.
"""

from __future__ import annotations

import pytest

import dcnet


def _solve(text: str):
    return dcnet.parse(text).solve()


def test_supply_pushes_current_out_of_its_first_node():
    sol = _solve("supply CHG p gnd current=2A\nresistor R p gnd r=3Ohm\nground gnd")
    # 2 A leave CHG at p and return through R: V(p) = 2 A * 3 Ohm (Ohm's law)
    assert sol.potential("p") == pytest.approx(6.0, rel=1e-12)
    assert sol.current("R") == pytest.approx(2.0, rel=1e-12)
    # passive current = -current; voltage first minus second node; power negative = delivering
    assert sol.current("CHG") == pytest.approx(-2.0, rel=1e-12)
    assert sol.voltage("CHG") == pytest.approx(6.0, rel=1e-12)
    assert sol.power("CHG") == pytest.approx(-12.0, rel=1e-12)
    assert sol.state("CHG") == "delivering"


def test_negative_supply_current_reverses():
    sol = _solve("supply CHG p gnd current=-2A\nresistor R p gnd r=3Ohm\nground gnd")
    assert sol.potential("p") == pytest.approx(-6.0, rel=1e-12)
    assert sol.current("CHG") == pytest.approx(2.0, rel=1e-12)
    assert sol.power("CHG") == pytest.approx(-12.0, rel=1e-12)  # still delivering


def test_supply_charging_a_cell():
    """A charger in current mode forces its current into the battery whatever the battery's EMF."""
    sol = _solve("supply CHG pos gnd current=10A\ncell BAT pos gnd emf=25.6V r=0.02Ohm\nground gnd")
    assert sol.current("BAT") == pytest.approx(10.0, rel=1e-12)
    assert sol.state("BAT") == "charging"
    # the charger's terminal voltage is the battery's EMF plus I*r (loop rule)
    assert sol.voltage("CHG") == pytest.approx(25.6 + 10 * 0.02, rel=1e-12)
    assert sol.power("CHG") == pytest.approx(-(25.6 + 0.2) * 10, rel=1e-12)


def test_supply_absorbing_against_an_ideal_source():
    """A current source driven backwards by a stiff bus absorbs power (positive)."""
    sol = _solve("source BUS p gnd emf=48V\nsupply SINK gnd p current=3A\nground gnd")
    # SINK pushes 3 A out of its first node (gnd); they flow up through BUS from its - to its + node
    # and back into SINK at p. Inside SINK the current runs from p to gnd, against its first->second
    # direction: passive current -3 A, voltage V(gnd) - V(p) = -48 V, power +144 W (absorbing).
    assert sol.current("SINK") == pytest.approx(-3.0, rel=1e-12)
    assert sol.voltage("SINK") == pytest.approx(-48.0, rel=1e-12)
    assert sol.power("SINK") == pytest.approx(144.0, rel=1e-12)
    assert sol.state("SINK") == "absorbing"
    # BUS carries 3 A from its - node to its + node: passive current -3 A, delivering 144 W
    assert sol.current("BUS") == pytest.approx(-3.0, rel=1e-12)
    assert sol.power("BUS") == pytest.approx(-144.0, rel=1e-12)
    assert sol.state("BUS") == "delivering"


def test_ideal_and_resistive_voltage_sources():
    sol = _solve("source PSU a gnd emf=24V\nresistor R a gnd r=8Ohm\nground gnd")
    assert sol.current("PSU") == pytest.approx(-3.0, rel=1e-12)
    assert sol.voltage("PSU") == pytest.approx(24.0, rel=1e-15)
    assert sol.power("PSU") == pytest.approx(-72.0, rel=1e-12)
    sol = _solve("source PSU a gnd emf=24V r=2Ohm\nresistor R a gnd r=8Ohm\nground gnd")
    # a source with r: v = E + r*i (passive), here i = -24/10 A
    assert sol.current("PSU") == pytest.approx(-2.4, rel=1e-12)
    assert sol.voltage("PSU") == pytest.approx(24.0 - 2.0 * 2.4, rel=1e-12)


def test_load_kinds_draw_from_first_to_second_node():
    sol = _solve("source BUS p gnd emf=12V\nload LAMP p gnd current=1.5A\nload FAN p gnd r=6Ohm\nground gnd")
    assert sol.current("LAMP") == pytest.approx(1.5, rel=1e-12)
    assert sol.power("LAMP") == pytest.approx(18.0, rel=1e-12)
    assert sol.current("FAN") == pytest.approx(2.0, rel=1e-12)
    assert sol.current("BUS") == pytest.approx(-3.5, rel=1e-12)
