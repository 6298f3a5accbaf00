"""Parts cut off by blocked diodes and open switches, round-off shown as zero, singular hints.

References: Kirchhoff's current law (a part with no path carries nothing), the leak model's
closed form (a node held only by equal leaks sits at the mean of their far ends), Ohm's law.
"""

from __future__ import annotations

import numpy as np
import pytest

import dcnet
from dcnet.errors import NumericalError

ISOLATOR_OFF = """title "isolator, engine off"
source ALT alt gnd emf=14.2V r=10mOhm imax=60A
switch IGN alt x state=open
cable  AC  x iso length=1m size=35mm2
diode  DH  iso h drop=0.7V r=2mOhm
diode  DS  iso s drop=0.7V r=2mOhm
cable  HC  h house+ length=2m size=35mm2
cable  SC  s start+ length=2m size=35mm2
cell   HOUSE house+ gnd emf=12.6V r=6mOhm
cell   START start+ gnd emf=12.8V r=12mOhm
load   FRIDGE house+ gnd current=4.5A
ground gnd
"""


@pytest.mark.parametrize("with_alternator", [True, False])
def test_an_isolator_with_the_engine_off_is_solved_not_refused(with_alternator):
    # without the alternator the isolator's input is a bare terminal (the cable AC would end
    # nowhere, a wiring mistake of its own)
    text = ISOLATOR_OFF if with_alternator else ISOLATOR_OFF.replace("source ALT alt gnd emf=14.2V r=10mOhm imax=60A\nswitch IGN alt x state=open\n", "").replace("cable  AC  x iso length=1m size=35mm2\n", "")
    sol = dcnet.parse(text).solve()
    # the cut-off part carries nothing (Kirchhoff's current law: no path)
    for name in ("DH", "DS", "HC", "SC", "START") + (("AC",) if with_alternator else ()):
        assert sol.current(name) == 0.0 and sol.state(name) in ("idle", "blocked")
    # the rest is the house battery feeding the fridge: Ohm's law
    assert sol.voltage("HOUSE") == pytest.approx(12.6 - 4.5 * 6e-3, rel=1e-12)
    # the leak model: iso is held by equal 1 pS leaks (DH, DS, and the open switch if there),
    # so it sits at the mean of their far ends
    far = [sol.potential("h"), sol.potential("s")] + ([sol.potential("alt")] if with_alternator else [])
    assert sol.potential("iso") == pytest.approx(np.mean(far), rel=1e-9)
    assert any("cut off by" in w for w in sol.warnings)
    assert not sol.failed


def test_round_off_currents_are_zero_and_idle():
    # the start battery behind a blocked isolator diode: nothing flows in SP and START
    sol = dcnet.load("circuits/boat-isolator.dcn").solve()
    assert sol.current("SP") == 0.0 and sol.state("SP") == "idle"
    assert sol.extras("SP")["drop_pct"] == 0.0
    (amp,) = [v for v in sol.verdicts if v.rule == "cable ampacity" and v.subject == "SP"]
    assert amp.value == 0.0
    # the bound itself: positive, and far below every current that really flows
    b = sol.current_bounds
    assert (b > 0).all()
    flowing = np.abs(sol.i) > 0
    assert (np.abs(sol.i[flowing]) > 1e6 * b[flowing]).all()


def test_the_bound_covers_the_round_off_of_a_symmetric_bank():
    # identical strings at rest: the exact currents are zero; whatever the solve leaves is within
    # the bound (componentwise error bound of the linear solve), so it is shown as zero
    text = "part c cell emf=12.85V r=6mOhm\nbank B p n series=4 parallel=4 cell=c strap=0.15mOhm bus=0.2mOhm lead=0.4mOhm tap=opposite\nground n\n"
    sol = dcnet.parse(text).solve()
    assert np.all(sol.i == 0.0)


def test_a_barely_connected_part_is_refused_naming_its_elements():
    text = "cell B b gnd emf=12V r=5mOhm\nload L b gnd r=2Ohm\ncable C x y length=1m size=35mm2\nresistor RL y gnd r=1e15Ohm\nresistor RH x b r=1e15Ohm\nground gnd\n"
    with pytest.raises(NumericalError) as info:
        dcnet.parse(text).solve()
    err = info.value
    assert set(err.culprits) == {"RL", "RH"}
    assert "x, y" in err.hint


CUT_OFF = "let r = 0.1Ohm\ncell B pos gnd emf=12V r=r\nload L pos gnd r=2Ohm\nswitch S1 pos mid state=open\nresistor R3 mid far r=1Ohm\nresistor R4 far gnd2 r=2Ohm\ncell C far gnd2 emf=5V r=1Ohm\nground gnd\n"


def test_formulas_and_equivalents_of_a_circuit_with_a_cut_off_part():
    from dcnet.errors import InputError

    net = dcnet.parse(CUT_OFF)
    with pytest.raises(InputError, match="cut off by S1"):
        dcnet.formulas(net, ["L.current"], keep=["r"])
    with pytest.raises(InputError, match="not joined"):
        dcnet.equivalent(net, "far", "gnd")
    # within the connected part the equivalent stands: r parallel with the 2 Ohm load (Thevenin)
    eq = dcnet.equivalent(net, "pos", "gnd")
    assert eq.r_th == pytest.approx(0.1 * 2 / 2.1, rel=1e-12)
    # the cut-off part's own loop still carries its current: 5 V over 3 Ohm (Ohm's law)
    sol = net.solve()
    assert sol.current("R4") == pytest.approx(5 / 3, rel=1e-12)  # from far (C+) to gnd2
