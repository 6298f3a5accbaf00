"""Nonlinear elements: closed forms, the charger's crossover by the loop rule, diodes, and
random networks that must converge and satisfy Kirchhoff's laws."""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import dcnet
from dcnet import errors as E


def solve(text):
    return dcnet.parse(text + "ground gnd\n").solve()


@pytest.mark.parametrize("E0, R, P", [(12.0, 0.1, 200.0), (48.0, 0.05, 5000.0), (25.4, 0.012, 900.0), (12.0, 0.1, 359.0)])
def test_constant_power_load_matches_the_closed_form(E0, R, P):
    # P = V (E - V) / R  =>  V = (E + sqrt(E^2 - 4 P R)) / 2, the stable (high-voltage) root
    sol = solve(f"source S a gnd emf={E0}V r={R}Ohm\nload L a gnd power={P}W\n")
    V = (E0 + math.sqrt(E0 * E0 - 4 * P * R)) / 2
    assert sol.voltage("L") == pytest.approx(V, rel=1e-9)
    assert sol.power("L") == pytest.approx(P, rel=1e-9)
    low = (E0 - math.sqrt(E0 * E0 - 4 * P * R)) / 2
    assert any(f"{low:.4g} V" in w for w in sol.warnings)  # the other operating point is named
    assert sol.balance["ok"]


def test_no_operating_point_reports_the_limit():
    # maximum power transfer: at most E^2 / 4R = 144 / 0.4 = 360 W
    with pytest.raises(E.NoOperatingPointError) as info:
        solve("source S a gnd emf=12V r=0.1Ohm\nload L a gnd power=400W\n")
    assert "400 W" in info.value.message and "360 W" in info.value.message
    assert info.value.culprits == ("L",)


def test_undervoltage_dropout():
    sol = solve("source S a gnd emf=12V r=0.1Ohm\nload L a gnd power=400W vmin=10.5V\nload LED a gnd r=10Ohm\n")
    assert sol.state("L") == "dropped out" and sol.current("L") == 0
    assert sol.current("LED") == pytest.approx(12 / 10.1)
    assert any("dropped out" in w for w in sol.warnings)
    # a load that can run above its vmin keeps running
    sol = solve("source S a gnd emf=12V r=0.1Ohm\nload L a gnd power=100W vmin=10.5V\n")
    assert sol.state("L") == "drawing"


@pytest.mark.parametrize("r_charger", [0.0, 0.01])
def test_charger_crossover_follows_the_loop_rule(r_charger):
    # loop rule: holding its EMF E_ch behind r_ch, the charger drives (E_ch - E_b)/(r_ch + r_b)
    # into the cell; that exceeds imax when E_b < E_ch - imax (r_ch + r_b): the crossover EMF
    E_ch, imax, r_b = 14.4, 20.0, 0.02
    rpart = f" r={r_charger}Ohm" if r_charger else ""
    crossover = E_ch - imax * (r_charger + r_b)
    for emf, limited in ((crossover - 1e-3, True), (crossover + 1e-3, False)):
        sol = solve(f"source CH p gnd emf={E_ch}V{rpart} imax={imax}A\ncell B p gnd emf={emf}V r={r_b}Ohm\n")
        if limited:
            assert sol.state("CH") == "current-limited"
            assert sol.current("B") == pytest.approx(imax, rel=1e-12)
            assert sol.voltage("B") == pytest.approx(emf + imax * r_b, rel=1e-12)
        else:
            assert sol.state("CH") == "delivering"
            assert sol.current("B") == pytest.approx((E_ch - emf) / (r_charger + r_b), rel=1e-9)
            assert sol.current("B") < imax


def test_diode_isolator_blocks_with_its_reverse_voltage():
    text = (
        "source CH bus gnd emf=14.0V r=10mOhm imax=40A\n"
        "diode DH bus house drop=0.45V r=4mOhm\n"
        "diode DS bus start drop=0.45V r=4mOhm\n"
        "cell HOUSE house gnd emf=12.3V r=8mOhm\n"
        "cell START start gnd emf=13.3V r=15mOhm\n"
        "source SOLAR start gnd emf=14.6V r=0.1Ohm imax=8A\n"
    )
    sol = solve(text)
    assert sol.state("DH") == "conducting" and sol.state("DS") == "blocked"
    assert sol.extras("DS")["reverse_V"] == pytest.approx(sol.potential("start") - sol.potential("bus"), rel=1e-9)
    assert sol.extras("DS")["reverse_V"] > 0
    assert abs(sol.current("DS")) < 1e-9
    # the conducting diode obeys its law exactly
    assert sol.current("DH") == pytest.approx((sol.voltage("DH") - 0.45) / 0.004, rel=1e-9)


def test_ideal_diodes_pick_the_higher_bank():
    sol = solve("cell B1 b1 gnd emf=12.6V r=10mOhm\ncell B2 b2 gnd emf=12.2V r=10mOhm\ndiode D1 b1 x drop=0.4V\ndiode D2 b2 x drop=0.4V\nload L x gnd r=1Ohm\n")
    assert sol.state("D1") == "conducting" and sol.state("D2") == "blocked"
    assert sol.voltage("D1") == pytest.approx(0.4, rel=1e-12)
    i = (12.6 - 0.4) / 1.01  # loop rule through B1, D1 and L
    assert sol.current("L") == pytest.approx(i, rel=1e-9)


@pytest.mark.parametrize("order", ["low first", "high first"])
def test_parallel_ideal_diodes_of_different_drops_leave_only_the_lower_conducting(order):
    # Constant-voltage-drop diode model (from memory, any electronics text): two ideal diodes in
    # parallel cannot both conduct with different drops; the lower drop clamps the voltage and
    # the other is reverse- or zero-biased below its drop, so it carries no current.
    # Both switch on together in the first iteration, which once left a singular system.
    low, high = "diode DL a gnd drop=0.1V", "diode DH a gnd drop=0.93V"
    pair = [low, high] if order == "low first" else [high, low]
    sol = solve("cell B a gnd emf=60V r=0.175Ohm\n" + "\n".join(pair) + "\n")
    assert sol.state("DL") == "conducting" and sol.state("DH") == "blocked"
    assert sol.voltage("DL") == pytest.approx(0.1, abs=1e-12)
    assert sol.current("DL") == pytest.approx((60 - 0.1) / 0.175, rel=1e-9)
    assert abs(sol.current("DH")) < 1e-9


def test_junction_diode_obeys_the_shockley_law():
    # Shockley diode equation with Vt = kT/q (SI 2019 exact constants), checked at the solution
    sol = solve("cell B b gnd emf=5V r=10mOhm\ndiode D b x is=1e-12A n=1.2 temp=25degC\nresistor R x gnd r=10Ohm\n")
    vt = 1.380649e-23 * 298.15 / 1.602176634e-19
    v, i = sol.voltage("D"), sol.current("D")
    assert i == pytest.approx(1e-12 * (math.exp(v / (1.2 * vt)) - 1) + 1e-12 * v, rel=1e-9)
    assert i == pytest.approx(sol.current("R"), rel=1e-12)
    assert 0.5 < v < 0.9


def test_iteration_history_is_available():
    sol = solve("source S a gnd emf=12V r=0.1Ohm\nload L a gnd power=200W\n")
    h = sol.newton_history
    assert h and h[-1]["residual_A"] < 1e-6 and {"phase", "iteration", "step_V", "residual_A"} <= set(h[0])


@st.composite
def nonlinear_network(draw):
    n = draw(st.integers(3, 7))
    nodes = ["gnd"] + [f"n{k}" for k in range(1, n)]
    lines = [f"cell B0 n1 gnd emf={draw(st.floats(6, 60))}V r={draw(st.floats(0.005, 0.5))}Ohm"]
    # a resistive spanning tree keeps every node connected
    for k in range(2, n):
        lines.append(f"resistor T{k} {nodes[draw(st.integers(0, k - 1))]} {nodes[k]} r={draw(st.floats(0.01, 10))}Ohm")
    for k in range(draw(st.integers(1, 6))):
        a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes))
        if a == b:
            continue
        kind = draw(st.sampled_from(["resistor", "cell", "diode", "jdiode", "cc", "power"]))
        if kind == "resistor":
            lines.append(f"resistor X{k} {a} {b} r={draw(st.floats(0.01, 100))}Ohm")
        elif kind == "cell":
            lines.append(f"cell X{k} {a} {b} emf={draw(st.floats(1, 30))}V r={draw(st.floats(0.01, 1))}Ohm")
        elif kind == "diode":
            rpart = draw(st.sampled_from(["", f" r={draw(st.floats(0.001, 1))}Ohm"]))
            lines.append(f"diode X{k} {a} {b} drop={draw(st.floats(0.1, 1.0))}V{rpart}")
        elif kind == "jdiode":
            lines.append(f"diode X{k} {a} {b} is={draw(st.floats(1e-14, 1e-8))}A n={draw(st.floats(1, 2))}")
        elif kind == "cc":
            lines.append(f"source X{k} {a} {b} emf={draw(st.floats(1, 30))}V r={draw(st.floats(0.01, 1))}Ohm imax={draw(st.floats(0.1, 20))}A")
        else:
            lines.append(f"load X{k} {a} {b} power={draw(st.floats(0.01, 5))}W vmin=0.5V")
    return "\n".join(lines) + "\nground gnd\n"


@settings(max_examples=80, deadline=None, suppress_health_check=list(HealthCheck))
@given(nonlinear_network())
def test_random_nonlinear_networks_converge_and_balance(text):
    # Kirchhoff's current law and Tellegen's theorem hold at the converged point, with every
    # nonlinear element on its own law
    try:
        sol = dcnet.parse(text).solve(checks=False)
    except (E.TopologyError, E.NoOperatingPointError):
        return  # ideal loops from random wiring, or demands no network could meet, are refused properly
    assert sol.balance["kcl_relative"] < 1e-6, sol.balance
    assert sol.balance["power_relative"] < 1e-6, sol.balance
    # each constant-power load that runs draws its power
    for el in sol.netlist.elements:
        if el.kind == "load" and "power" in el.values and sol.state(el.name) == "drawing":
            assert sol.power(el.name) == pytest.approx(el.values["power"], rel=1e-6)
    assert np.all(np.isfinite(sol.i))


def test_a_self_loop_does_not_swallow_a_diode_leak():
    # Kirchhoff's current law: a branch from a node to itself takes no current out of it, so
    # node b hangs on the blocked diode's documented 1 pS leak alone and sits at a's potential.
    # (A 1 MS self-loop stamped +g and -g on b's diagonal used to round the leak away: a
    # singular matrix and a convergence failure.)
    sol = solve("source S a gnd emf=12V r=1Ohm\nload L a gnd r=11Ohm\ndiode D a b drop=0.7V\nresistor LOOP b b r=1uOhm\n")
    assert sol.voltage("D") == pytest.approx(0.0, abs=1e-9)
    assert sol.current("D") == pytest.approx(0.0, abs=1e-12)
    assert sol.current("LOOP") == 0.0
    assert sol.voltage("L") == pytest.approx(11.0, rel=1e-12)  # divider 12 V * 11 / (1 + 11)


@pytest.mark.parametrize("imax, n_sources", [(10.0, 1), (4.0, 2)])
def test_current_sources_forcing_more_than_the_limits_have_no_operating_point(imax, n_sources):
    # Kirchhoff's current law at the cut {chargers, L} around node a: the constant-current load
    # takes 25 A out of a, and only the current-limited chargers can feed a, at most imax each
    chargers = "".join(f"source C{k} a gnd emf=14V r=10mOhm imax={imax}A\n" for k in range(n_sources))
    with pytest.raises(E.NoOperatingPointError) as info:
        solve(chargers + "load L a gnd current=25A\n")
    msg = info.value.message
    assert "25 A" in msg and f"{imax * n_sources:.4g} A" in msg
    assert set(info.value.culprits) == {"L"} | {f"C{k}" for k in range(n_sources)}
    assert info.value.line == 1  # the first charger's line


def test_a_limited_source_within_a_cut_of_current_sources_still_solves():
    # Kirchhoff's current law at node a with two 6 A limits against a 10 A load: each charger
    # holds (14 V behind 10 mOhm) and they share the 10 A equally, 5 A each
    sol = solve("source C0 a gnd emf=14V r=10mOhm imax=6A\nsource C1 a gnd emf=14V r=10mOhm imax=6A\nload L a gnd current=10A\n")
    assert sol.current("C0") == pytest.approx(-5.0, rel=1e-9)
    assert sol.voltage("L") == pytest.approx(14.0 - 5.0 * 0.01, rel=1e-9)


def test_a_resistor_across_the_cut_gives_the_excess_a_path():
    # not a cut of current sources: the 15 A the 10 A charger cannot feed comes up through R,
    # so V(a) = -15 A * 2 Ohm = -30 V by Ohm's law (ideal current source model: the load's 25 A
    # flows whatever its voltage)
    sol = solve("source C a gnd emf=14V r=10mOhm imax=10A\nload L a gnd current=25A\nresistor R a gnd r=2Ohm\n")
    assert sol.current("C") == pytest.approx(-10.0, rel=1e-12)
    assert sol.voltage("R") == pytest.approx(-30.0, rel=1e-9)
    assert sol.state("C") == "current-limited"


def test_a_diode_on_a_dead_end_settles_in_a_half_teravolt_network():
    # Kirchhoff's current law: the dead end x-y carries no current, so D sits on its drop with
    # no current (the point where both of its modes hold). At -4.75e11 V the iterate's current
    # through D is round-off of either sign (1e-10 A beside 545 kA), which used to switch it
    # between conducting and blocked forever.
    sol = solve("source S p gnd emf=170kV r=872kOhm\nsupply I gnd p current=545kA\ndiode D x p drop=1.3V r=726kOhm\nresistor R y x r=630kOhm\n")
    assert sol.voltage("S") == pytest.approx(170e3 - 872e3 * 545e3, rel=1e-12)  # Ohm's law: emf + r i, i = -545 kA
    assert abs(sol.current("D")) < 1e-9 * 545e3
    assert sol.voltage("D") <= 1.3 + 1e-9 * 4.75e11
    assert sol.balance["ok"]


def test_an_ideal_diode_held_above_its_drop_by_an_ideal_source_has_no_operating_point():
    # from memory: ideal diode model (v = drop while conducting, any current >= 0); the ideal
    # source S fixes v = 2 V > 0.7 V, which no current satisfies
    with pytest.raises(E.NoOperatingPointError) as info:
        solve("source S a gnd emf=2V\ndiode D a gnd drop=0.7V\nload L a gnd r=1Ohm\n")
    assert "0.7 V" in info.value.message and "2 V" in info.value.message
    assert info.value.culprits == ("D", "S")
    # below its drop it blocks, and the circuit solves (Ohm's law: 0.5 V / 1 Ohm)
    sol = solve("source S a gnd emf=0.5V\ndiode D a gnd drop=0.7V\nload L a gnd r=1Ohm\n")
    assert sol.current("L") == pytest.approx(0.5, rel=1e-12)
    assert sol.state("D") == "blocked"


def test_a_constant_power_load_held_at_zero_volts_drops_out():
    # the kind's documented rule (kinds/load.py): a constant-power load that sees no voltage
    # cannot run and drops out. The zero-resistance fuse E8 holds E0 at 0 V; at ~1e10 V
    # potentials the first iterate used to show it microvolts, and it ran at an unbounded
    # current instead of dropping (a fuzz input).
    text = (
        "load E0 n0 n4 power=305453.6427561315W\ncable E1 n3 n0 length=450238.296299856m size=893060.4144597218mm2\n"
        "resistor E2 n1 n2 r=393876.2451408487Ohm\nswitch E3 n3 n1 state=closed r=640252.4172268666Ohm\n"
        "diode E4 n2 n3 drop=0.6585257962492342V\n"
        "supply E5 n1 n3 current=37059.60654265067A\nlink E6 n3 n0 r=376370.20924823906Ohm\n"
        "switch E7 n0 n4 state=closed r=999994.2258324175Ohm\nfuse E8 n4 n0 rating=219065.26227978512A\nground n2\n"
    )
    sol = dcnet.parse(text).solve(checks=False)
    assert sol.state("E0") == "dropped out" and sol.current("E0") == 0.0
    assert any("E0 sees no voltage" in w for w in sol.warnings)
    assert sol.balance["ok"]


def test_a_junction_diode_held_far_forward_by_an_ideal_source_is_refused_with_its_exponent():
    # Shockley's law i = is (exp(v / (n Vt)) - 1): at 100 V and Vt = 25.7 mV the exponent is
    # 3892, beyond the largest float (about exp(709))
    with pytest.raises(E.NumericalError) as info:
        solve("source S a gnd emf=100V\ndiode D a gnd is=1pA\nload L a gnd r=1Ohm\n")
    assert not isinstance(info.value, E.ConvergenceError)
    assert "exp(3892)" in info.value.message  # 100 V / (k T / q) at 25 degC, k and q exact (SI 2019)


def test_the_round_off_allowance_of_diode_switching_ignores_a_blown_up_iterate():
    # Shockley's law: the junction E3 carries what the supply E1 (59,556 A) and the fuse E5
    # (563 kV / 261.7 kOhm = 2.15 A) need, at v = n Vt ln(i / is) = 0.408 V, and the ideal
    # diode E2, reverse-biased by E4's 563 kV, blocks. An allowance scaled on an iterate whose
    # junction current had blown up (exp(700) A) kept E2 conducting (a fuzz input).
    text = (
        "load E0 n3 n0 r=936359.5880778554Ohm\nsupply E1 n2 n3 current=59556.14752661452A\n"
        "diode E2 n2 n3 drop=0.501819521050603V\ndiode E3 n0 n3 is=7.359246229986894e-07A n=0.6324648293547998\n"
        "source E4 n0 n2 emf=563155.4825370222V\nfuse E5 n3 n2 rating=398211.09881526465A r=261698.12522464248Ohm\nground n2\n"
    )
    sol = dcnet.parse(text).solve(checks=False)
    vt = 0.6324648293547998 * 1.380649e-23 / 1.602176634e-19 * 298.15
    i3 = sol.current("E3")
    assert sol.voltage("E3") == pytest.approx(vt * math.log(i3 / 7.359246229986894e-07 + 1), rel=1e-9)
    # Kirchhoff's current law at n3 (E2's blocked leak is 0.6 uA); it holds to 3e-7 only: the
    # self-check judges residuals against conductance times potential, which the junction's
    # companion conductance (3.7 MS) at 563 kV makes very large
    assert i3 == pytest.approx(59556.14752661452 + sol.current("E5") - sol.current("E0") - sol.current("E2"), rel=1e-6)
    assert sol.state("E2") == "blocked"
