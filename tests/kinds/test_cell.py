"""Sign convention and derived results of the cell kind.

Passive sign (LANGUAGE.md): current flows through the element from its first node
(the positive terminal) to its second; power = voltage * current is absorbed power.
A discharging cell therefore has negative current and power, a charging one positive.
The reference values come from Kirchhoff's laws and Joule's law alone (REFERENCES.md,
"Batteries": of a charger's energy, I^2 r heats the battery and E*I is stored).
"""

from __future__ import annotations

import pytest

import dcnet

EMF, R_INT = 12.6, 0.05


def _solve(text: str):
    return dcnet.parse(text).solve()


@pytest.fixture(scope="module")
def discharging():
    # a van's house battery on a 1.2 Ohm heater
    return _solve(f"cell HOUSE pos gnd emf={EMF}V r={R_INT}Ohm\nload HEATER pos gnd r=1.2Ohm\nground gnd")


@pytest.fixture(scope="module")
def charging():
    # the same battery on a 14.4 V charger with 0.1 Ohm output resistance
    return _solve(f"source CHG pos gnd emf=14.4V r=0.1Ohm\ncell HOUSE pos gnd emf={EMF}V r={R_INT}Ohm\nground gnd")


def test_discharging_cell_signs(discharging):
    sol = discharging
    i = EMF / (R_INT + 1.2)  # magnitude, loop rule (Kirchhoff's voltage law) and Ohm's law
    assert sol.current("HOUSE") == pytest.approx(-i, rel=1e-12)
    assert sol.current("HEATER") == pytest.approx(i, rel=1e-12)
    # terminal voltage sags below the EMF by I*r
    assert sol.voltage("HOUSE") == pytest.approx(EMF - i * R_INT, rel=1e-12)
    assert sol.power("HOUSE") < 0
    assert sol.power("HOUSE") == pytest.approx(-(EMF - i * R_INT) * i, rel=1e-12)
    assert sol.state("HOUSE") == "discharging"
    # the battery delivers what the heater absorbs (energy conservation)
    assert sol.power("HOUSE") == pytest.approx(-sol.power("HEATER"), rel=1e-12)


def test_charging_cell_signs(charging):
    sol = charging
    i = (14.4 - EMF) / (0.1 + R_INT)  # loop rule: charger EMF above cell EMF by I*(r1 + r2)
    assert sol.current("HOUSE") == pytest.approx(i, rel=1e-12)
    assert sol.current("CHG") == pytest.approx(-i, rel=1e-12)
    # a charging battery needs a terminal voltage above its EMF by I*r
    assert sol.voltage("HOUSE") == pytest.approx(EMF + i * R_INT, rel=1e-12)
    assert sol.voltage("HOUSE") > EMF
    assert sol.power("HOUSE") > 0
    assert sol.power("CHG") < 0
    assert sol.state("HOUSE") == "charging"


@pytest.mark.parametrize("which", ["discharging", "charging"])
def test_loss_and_emf_power(which, request):
    sol = request.getfixturevalue(which)
    i = sol.current("HOUSE")
    ex = sol.extras("HOUSE")
    # Joule's law: heat in the internal resistance is I^2 r, whatever the direction
    assert ex["loss_W"] == pytest.approx(i * i * R_INT, rel=1e-12)
    assert ex["loss_W"] > 0
    # power into the EMF (stored when charging, drawn when discharging) is E*I, sign following I
    assert ex["emf_power_W"] == pytest.approx(EMF * i, rel=1e-12)
    # terminal power = EMF power + loss (v = E + I r, so v*I = E*I + I^2 r)
    assert sol.power("HOUSE") == pytest.approx(ex["emf_power_W"] + ex["loss_W"], rel=1e-12)


def test_json_keys_follow_the_same_convention(discharging):
    d = discharging.to_dict()
    cell = d["elements"]["HOUSE"]
    assert cell["kind"] == "cell"
    assert cell["current_A"] < 0 and cell["power_W"] < 0
    assert cell["power_W"] == pytest.approx(cell["voltage_V"] * cell["current_A"], rel=1e-15)
    assert cell["power_W"] == pytest.approx(cell["emf_power_W"] + cell["loss_W"], rel=1e-12)
    assert d["nodes"]["pos"]["potential_V"] == pytest.approx(cell["voltage_V"], rel=1e-15)
    assert d["nodes"]["gnd"]["potential_V"] == 0.0


def test_reversed_terminals_flip_the_signs():
    """Written negative terminal first, the same battery reads with the opposite voltage sign."""
    sol = _solve(f"cell HOUSE gnd neg emf={EMF}V r={R_INT}Ohm\nload HEATER gnd neg r=1.2Ohm\nground gnd")
    i = EMF / (R_INT + 1.2)
    # the first node is the positive terminal: 'gnd' sits EMF - I r above 'neg'
    assert sol.potential("neg") == pytest.approx(-(EMF - i * R_INT), rel=1e-12)
    assert sol.current("HOUSE") == pytest.approx(-i, rel=1e-12)
    assert sol.state("HOUSE") == "discharging"


def test_idle_cell():
    """Two equal cells in parallel with no load carry no current."""
    sol = _solve(f"cell A pos gnd emf={EMF}V r=0.01Ohm\ncell B pos gnd emf={EMF}V r=0.02Ohm\nground gnd")
    assert sol.current("A") == pytest.approx(0.0, abs=1e-12)
    assert sol.voltage("A") == pytest.approx(EMF, rel=1e-12)
    assert sol.extras("A")["loss_W"] == pytest.approx(0.0, abs=1e-20)
