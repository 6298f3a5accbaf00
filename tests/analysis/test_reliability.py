"""Silent wrong answers and valid circuits refused (issue 13, points 1 and 3).

Each answer is compared with a reference computed here: closed forms, a scalar equation solved
with scipy's brentq, or a nodal solve in exact fractions.
"""

from __future__ import annotations

import math
from pathlib import Path
from fractions import Fraction

import numpy as np
import pytest
from scipy.optimize import brentq

import dcnet
from dcnet.errors import NoOperatingPointError, NumericalError

K_OVER_Q = 1.380649e-23 / 1.602176634e-19  # Boltzmann constant / elementary charge (SI 2019 exact values)


def vt(n=1.0, temp=25.0):
    return n * K_OVER_Q * (temp + 273.15)


# --- 1 (a): a battery behind an isolator, a constant-power inverter, a solar charger's current ----

E, RB, P, IPV = 12.8, 0.010, 600.0, 8.0


def _isolator(diode: str, charger: str = "supply PV bus 0 current=8A") -> str:
    return f"cell B1 b+ 0 emf=12.8V r=10mOhm\ndiode D1 b+ bus {diode}\nload INV bus 0 power=600W\n{charger}\nground 0\n"


def test_isolator_bus_with_a_junction_diode_is_near_12_volts_not_gigavolts():
    # before: the start left 'bus' held only by the junction's 1 pS floor (8 A x 1e12 Ohm = 8e12 V),
    # and Newton settled there with every check passed
    sol = dcnet.parse(_isolator("is=1e-9A n=1.5")).solve()
    n_vt = vt(1.5)

    def diode_current(vbus):  # battery and junction in series: E - I RB - vbus = n Vt ln(I / is + 1)
        return brentq(lambda i: E - i * RB - vbus - n_vt * math.log1p(i / 1e-9), 0.0, (E - vbus) / RB)

    # the stable operating point: the upper root of KCL at the bus, I_D + I_PV = P / V (brentq)
    vbus = brentq(lambda x: diode_current(x) + IPV - P / x, 6.0, E - 1e-6)
    assert sol.potential("bus") == pytest.approx(vbus, rel=1e-9)
    assert sol.current("D1") == pytest.approx(diode_current(vbus), rel=1e-9)
    assert np.abs(sol.potentials).max() < 13.0


def test_isolator_bus_with_a_piecewise_linear_diode():
    sol = dcnet.parse(_isolator("drop=0.3V r=5mOhm")).solve()
    # closed form: (E - drop - V) / (RB + rD) + I_PV = P / V, a quadratic; the stable (upper) root
    r = RB + 0.005
    a, b, c = 1.0 / r, -((E - 0.3) / r + IPV), P  # V^2 / r - ((E - drop) / r + I) V + P = 0
    vbus = (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)
    assert sol.potential("bus") == pytest.approx(vbus, rel=1e-9)


def test_a_current_source_into_a_node_only_a_blocked_junction_returns_is_refused():
    # nothing but the junction's stand-in leak could carry the 8 A back: no operating point
    text = "cell B1 b+ 0 emf=12.8V r=10mOhm\ndiode D1 b+ bus is=1e-9A\nsupply PV bus 0 current=8A\nground 0\n"
    with pytest.raises(NumericalError) as info:
        dcnet.parse(text).solve()
    assert "D1" in info.value.culprits


# --- 1 (b): an ideal source straight across a junction diode -----------------------------------------


@pytest.mark.parametrize("emf", [5.0, 11.6, 17.0])
def test_ideal_source_across_a_junction_is_refused_with_the_current_it_would_take(emf):
    # before: 0 A (or 1e188 A) reported with the self-check "ok"
    with pytest.raises(NoOperatingPointError) as info:
        dcnet.parse(f"source S1 p 0 emf={emf}V\ndiode D1 p 0 is=1e-14A\nground 0\n").solve()
    assert set(info.value.culprits) == {"D1", "S1"}
    expected = 1e-14 * math.expm1(emf / vt())  # the junction law (closed form)
    assert f"{expected:.3g} A" in info.value.message


def test_ideal_source_across_a_junction_below_the_ceiling_is_solved_exactly():
    sol = dcnet.parse("source S1 p 0 emf=0.7V\ndiode D1 p 0 is=1e-14A\nground 0\n").solve()
    assert sol.current("D1") == pytest.approx(1e-14 * math.expm1(0.7 / vt()), rel=1e-9)  # junction law


# --- 1 (c): 1 nOhm beside 1 GOhm --------------------------------------------------------------------

NANO_GIGA = "cell B1 p 0 emf=12V r=1nOhm\nresistor R1 p m r=1GOhm\nresistor R2 m 0 r=1GOhm\ncell B2 m 0 emf=3V r=1GOhm\nground 0\n"


def _exact_nano_giga():
    """Nodal solve in exact fractions: unknowns V(p), V(m) (Kirchhoff's current law)."""
    g1, G = Fraction(10**9), Fraction(1, 10**9)
    # p: g1 (Vp - 12) + G (Vp - Vm) = 0 ; m: G (Vm - Vp) + G Vm + G (Vm - 3) = 0
    a11, a12, z1 = g1 + G, -G, 12 * g1
    a21, a22, z2 = -G, 3 * G, 3 * G
    det = a11 * a22 - a12 * a21
    vp = (z1 * a22 - a12 * z2) / det
    vm = (a11 * z2 - a21 * z1) / det
    return {"B1": g1 * (vp - 12), "R1": G * (vp - vm), "R2": G * vm, "B2": G * (vm - 3)}


def test_a_tiny_and_a_huge_resistance_give_the_exact_currents():
    # before: the cell's current was round-off of g (V - emf) with g = 1e9 S, judged against its
    # 1.2e10 A short-circuit current, and the resistors' nanoamperes were shown as zero
    sol = dcnet.parse(NANO_GIGA).solve()
    for name, ref in _exact_nano_giga().items():
        assert sol.current(name) == pytest.approx(float(ref), rel=1e-6), name


def test_a_tiny_resistance_in_a_chain_gets_its_current_from_kirchhoffs_law():
    text = "cell B1 p 0 emf=12V r=1nOhm\nlink L1 p q r=1nOhm\nresistor R1 q 0 r=1GOhm\nsupply S1 0 q current=5nA\nground 0\n"
    sol = dcnet.parse(text).solve()
    # q sits at 12 V less a few 1e-17 V: R1 carries 12 nA (Ohm's law); the supply pushes 5 nA out of its
    # first node (ground), so it takes them from q, and the link and the cell carry 12 + 5 = 17 nA
    # (Kirchhoff's current law at q and at p)
    assert sol.current("R1") == pytest.approx(12e-9, rel=1e-9)
    assert sol.current("L1") == pytest.approx(17e-9, rel=1e-9)
    assert sol.current("B1") == pytest.approx(-17e-9, rel=1e-9)


# --- point 3: many branches ---------------------------------------------------------------------------


def test_1300_blocking_diode_branches_settle():
    # before: "did not settle" with the residual at round-off, naming D0..D4
    n, emf, rb, drop, rd, r = 1300, 12.0, 1e-3, 0.7, 1e-3, 1000.0
    lines = [f"cell BAT bus 0 emf={emf}V r=1mOhm"]
    for k in range(n):
        lines += [f"diode D{k} bus d{k} drop={drop}V r=1mOhm", f"resistor R{k} d{k} 0 r=1kOhm"]
    sol = dcnet.parse("\n".join(lines) + "\nground 0\n").solve()
    # closed form: the battery's current (E - V) / rb feeds n branches of (V - drop) / (rd + r)
    v = (emf / rb + n * drop / (rd + r)) / (1 / rb + n / (rd + r))
    assert sol.potential("bus") == pytest.approx(v, rel=1e-9)
    assert sol.current("D700") == pytest.approx((v - drop) / (rd + r), rel=1e-9)


def test_1300_junction_branches_settle():
    n, emf, rb, r, isat, nid = 1300, 12.6, 5e-3, 50.0, 1e-12, 1.2
    lines = [f"cell BAT bus 0 emf={emf}V r=5mOhm"]
    for k in range(n):
        lines += [f"diode D{k} bus d{k} is=1e-12A n={nid}", f"resistor R{k} d{k} 0 r=50Ohm"]
    sol = dcnet.parse("\n".join(lines) + "\nground 0\n").solve()
    n_vt = vt(nid)

    def branch(vbus):  # diode and resistor in series: vbus = n Vt ln(i / is + 1) + i r
        return brentq(lambda i: n_vt * math.log1p(i / isat) + i * r - vbus, 0.0, vbus / r)

    vbus = brentq(lambda x: (emf - x) / rb - n * branch(x), 1.0, emf)
    assert sol.potential("bus") == pytest.approx(vbus, rel=1e-9)
    assert sol.current("D5") == pytest.approx(branch(vbus), rel=1e-8)


def test_1000_small_constant_power_loads_settle():
    n, emf, rb, rc, p = 1000, 12.6, 5e-3, 0.05, 2.0
    lines = [f"cell BAT bus 0 emf={emf}V r=5mOhm"]
    for k in range(n):
        lines += [f"resistor C{k} bus l{k} r=50mOhm", f"load P{k} l{k} 0 power=2W"]
    sol = dcnet.parse("\n".join(lines) + "\nground 0\n").solve()

    def load_v(vbus):  # u (vbus - u) / rc = p, the upper root
        return (vbus + math.sqrt(vbus * vbus - 4 * p * rc)) / 2

    vbus = brentq(lambda x: (emf - x) / rb - n * p / load_v(x), 6.0, emf)
    assert sol.potential("bus") == pytest.approx(vbus, rel=1e-9)
    assert sol.potential("l17") == pytest.approx(load_v(vbus), rel=1e-9)


def test_a_load_at_exactly_the_power_limit_gets_the_power_limit_message():
    with pytest.raises(NoOperatingPointError) as info:  # E^2 / 4R = 144 / 2 = 72 W (closed form)
        dcnet.parse("cell B1 p 0 emf=12V r=0.5Ohm\nload P1 p 0 power=72W\nground 0\n").solve()
    assert "at most 72 W" in info.value.message and info.value.culprits == ("P1",)
    # just below it: V = (E + sqrt(E^2 - 4 P R)) / 2 (closed form, the stable root)
    sol = dcnet.parse("cell B1 p 0 emf=12V r=0.5Ohm\nload P1 p 0 power=71W\nground 0\n").solve()
    assert sol.potential("p") == pytest.approx((12 + math.sqrt(144 - 4 * 71 * 0.5)) / 2, rel=1e-9)


# --- the physical bound ---------------------------------------------------------------------------------


def test_the_potential_bound_is_the_emfs_plus_current_times_resistance_seen():
    from dcnet.analysis.bound import potential_bound
    from dcnet.analysis.branches import branch_table

    text = "cell B p 0 emf=12V r=1Ohm\nresistor R p 0 r=5Ohm\nsupply S 0 q current=2A\nresistor RQ q p r=3Ohm\nground 0\n"
    net = dcnet.parse(text)
    pb = potential_bound(branch_table(net))
    # closed form: sum |emf| + |I| (3 + 1 || 5)
    assert pb.value == pytest.approx(12 + 2 * (3 + 5 / 6), rel=1e-12)
    sol = net.solve()
    assert np.abs(sol.potentials).max() <= pb.value


def test_potentials_beyond_the_bound_are_refused_naming_the_elements():
    from dcnet.analysis.branches import branch_table
    from dcnet.analysis.solve import _check_potential_bound

    net = dcnet.parse("cell B p 0 emf=12V r=1Ohm\nload L p 0 r=5Ohm\nground 0\n")
    bt = branch_table(net)
    pot = np.zeros(bt.n_nodes)
    pot[bt.node_names.index("p")] = 8e12
    with pytest.raises(NoOperatingPointError) as info:
        _check_potential_bound(net, bt, pot)
    assert set(info.value.culprits) == {"B", "L"}


# --- a wrong solve never passes the self-check ---------------------------------------------------------


def _random_network(rng) -> str:
    nodes = ["0"] + [f"n{k}" for k in range(int(rng.integers(2, 6)))]
    lines = ["cell B n0 0 emf=12V r=10mOhm"]
    for k, node in enumerate(nodes[1:], 1):  # a spanning chain keeps it connected
        lines.append(f"resistor T{k} {nodes[k - 1]} {node} r={rng.uniform(0.01, 100):.4g}Ohm")
    for k in range(int(rng.integers(1, 6))):
        a, b = rng.choice(len(nodes), 2, replace=False)
        kind = rng.integers(3)
        if kind == 0:
            lines.append(f"resistor X{k} {nodes[a]} {nodes[b]} r={10 ** rng.uniform(-3, 3):.4g}Ohm")
        elif kind == 1:
            lines.append(f"cell C{k} {nodes[a]} {nodes[b]} emf={rng.uniform(1, 24):.4g}V r={10 ** rng.uniform(-3, 0):.4g}Ohm")
        else:
            lines.append(f"load L{k} {nodes[a]} {nodes[b]} r={10 ** rng.uniform(-1, 2):.4g}Ohm")
    return "\n".join(lines) + "\nground 0\n"


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("size", [1e-4, 1e-7])
def test_a_perturbed_solve_is_refused(seed, size, monkeypatch):
    # every solve with the factorisation returns the answer plus a fixed wrong vector (a solver that is
    # off by the same offset each time: one step of refinement cannot take it away)
    from dcnet.analysis.mna import Factor

    rng = np.random.default_rng(seed)
    text = _random_network(rng)
    dcnet.parse(text).solve()  # the honest solve verifies
    real = Factor.solve
    offset = {}

    def wrong(self, z):
        x = np.array(real(self, z), dtype=float)
        first = x if x.ndim == 1 else x[:, 0]
        if "d" not in offset:
            offset["d"] = size * np.abs(first).max() * np.random.default_rng(seed + 1).standard_normal(len(first))
        if x.ndim == 1:
            return x + offset["d"]
        x[:, 0] += offset["d"]
        return x

    monkeypatch.setattr(Factor, "solve", wrong)
    with pytest.raises(NumericalError):
        dcnet.parse(text).solve()


def test_a_perturbed_newton_answer_is_refused(monkeypatch):
    import dcnet.analysis.newton as newton_mod

    text = "cell B p 0 emf=12V r=0.1Ohm\ndiode D p q drop=0.6V r=10mOhm\nload L q 0 power=50W\nground 0\n"
    sol = dcnet.parse(text).solve()
    real = newton_mod.newton_solve

    def wrong(bt):
        res = real(bt)
        res.potentials = res.potentials * (1 + 1e-5)
        res.v = res.potentials[bt.a] - res.potentials[bt.b]
        res.i = res.i * (1 + 1e-5 * np.arange(len(res.i)))
        return res

    monkeypatch.setattr(newton_mod, "newton_solve", wrong)
    with pytest.raises(NumericalError):
        dcnet.parse(text).solve()
    assert sol.balance["ok"]


def test_a_constant_power_load_behind_a_diode_does_not_run_away():
    # before: the load's node ran off (12, 24, 48 ... V) behind the blocked diode and nothing settled
    sol = dcnet.parse("cell B p 0 emf=12V r=0.1Ohm\ndiode D p q drop=0.6V r=10mOhm\nload L q 0 power=50W\nground 0\n").solve()
    # closed form: (E - drop - V) / (r + rD) = P / V, the upper root of V^2 - (E - drop) V + P (r + rD) = 0
    v = (11.4 + math.sqrt(11.4**2 - 4 * 50 * 0.11)) / 2
    assert sol.potential("q") == pytest.approx(v, rel=1e-9)


def test_isolator_bus_with_a_current_limited_charger():
    # before: the charger flipped between holding and limiting every iteration: "did not settle"
    sol = dcnet.parse(_isolator("drop=0.3V r=5mOhm", "source PV bus 0 emf=14.4V r=10mOhm imax=20A")).solve()
    # closed form: limited at 20 A (the bus stays below its knee 14.4 - 20 x 0.01 V), so
    # (E - drop - V) / (RB + rD) + 20 = P / V, the upper root
    r = RB + 0.005
    a, b, c = 1.0 / r, -((E - 0.3) / r + 20.0), P
    vbus = (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)
    assert sol.potential("bus") == pytest.approx(vbus, rel=1e-9)
    assert sol.current("PV") == pytest.approx(-20.0, rel=1e-12)


def test_the_elements_named_as_not_settled_are_those_at_the_nodes_that_do_not_balance():
    # a settled solve of 300 identical branches with one branch node moved off its answer: the
    # stopping rule's per-node judgement names that branch's diode first, not D0..D4 by position
    from dcnet.analysis.branches import branch_table
    from dcnet.analysis.newton import _groups, _raise_unsettled, newton_solve
    from dcnet.errors import ConvergenceError

    lines = ["cell BAT bus 0 emf=12V r=1mOhm"]
    for k in range(300):
        lines += [f"diode D{k} bus d{k} drop=0.7V r=1mOhm", f"resistor R{k} d{k} 0 r=1kOhm"]
    bt = branch_table(dcnet.parse("\n".join(lines) + "\nground 0\n"))
    res = newton_solve(bt)
    groups = _groups(bt)
    for grp in groups:
        grp.mode = res.modes[grp.name]
    pot = res.potentials.copy()
    pot[bt.node_names.index("d177")] += 0.5
    v = pot[bt.a] - pot[bt.b]
    i = res.bt.g * v + res.bt.c  # the converged linear models' currents at the moved potentials
    state = (res.bt, res.system, res.factor, res.x, pot, v, i)
    with pytest.raises(ConvergenceError) as info:
        _raise_unsettled(bt, groups, state, [{"phase": "newton", "iteration": 1, "step_V": 0.0, "residual_A": 0.0}])
    assert info.value.culprits[0] == "D177"


# ------------------------------------------------------------------ what is shown must add up
# (found by the fuzz campaign of bench/fuzz_run.py after the per-node self-check landed)


def _node_balance(net, sol):
    """Kirchhoff's current law at every node, recomputed here from the currents shown and the
    netlist's node lists: (largest |sum| / sum of |currents| meeting there) over the nodes."""
    total, meet = {}, {}
    for e in net.elements:
        a, b = e.nodes[0], e.nodes[1]
        if a == b:
            continue
        x = sol.current(e.name)
        total[a] = total.get(a, 0.0) + x
        total[b] = total.get(b, 0.0) - x
        meet[a] = meet.get(a, 0.0) + abs(x)
        meet[b] = meet.get(b, 0.0) + abs(x)
    return max((abs(total[n]) / meet[n] for n in total if meet[n] > 0), default=0.0)


def test_a_micro_ohm_fuse_current_is_not_shown_as_zero():
    """A 1 V cell (1 Ohm inside), 14 Ohm and a 0.5 micro-ohm fuse rated 50 mA in one loop: the
    fuse carries I = E / (R + r + r_fuse) (Ohm's law around the loop) = 66.7 mA and fails its
    check. Its round-off bound once exceeded the current, which was shown as 0 A with a PASS."""
    text = """cell B a gnd emf=1V r=1Ohm
resistor R a f r=14Ohm
fuse F f gnd rating=50mA r=0.5uOhm
ground gnd
"""
    net = dcnet.parse(text, "loop.dcn")
    sol = net.solve()
    expect = 1.0 / (1.0 + 14.0 + 0.5e-6)
    assert sol.current("F") == pytest.approx(expect, rel=1e-9)
    assert any(v.rule == "fuse loading" and not v.ok for v in sol.verdicts)


BOAT_WITH_FEMTO_JUMPER = (Path(__file__).resolve().parents[2] / "circuits" / "boat-house-bank.dcn").read_text() + """
resistor FZLO38 h3+ dist+ r=1e-15Ohm
resistor FZHI39 dist+ h3+ r=1e12Ohm
"""


def test_currents_that_cannot_be_resolved_are_refused_not_shown_unbalanced():
    """A femto-ohm jumper across a boat's bank and panel: its current is g dV with g = 1e15 S, so
    round-off of the potentials is amperes there and no neighbour gives it by Kirchhoff's law.
    The answer was shown with the panel's currents off by 1.3 A of 164 A (0.8 %). Either the
    currents shown balance at every node (to 1e-6, recomputed here) or the circuit is refused."""
    net = dcnet.parse(BOAT_WITH_FEMTO_JUMPER, "boat.dcn")
    try:
        sol = net.solve()
    except NumericalError as err:
        assert "cannot be resolved" in str(err) or "does not verify" in str(err)
        return
    assert _node_balance(net, sol) <= 1e-6


LIMITED_SOURCE_AMONG_PICO_OHMS = """load E0 n4 n3 r=821698.4853664411Ohm
source E1 n1 n2 emf=79987.10918411076V r=1.9Ohm imax=0.5A
diode E2 n4 n5 is=6.008940510883035e-07A n=1.1705911022345485
link E3 n4 n4 r=969971.571047311Ohm
resistor E4 n1 n5 r=1.000001Ohm
fuse E5 n2 n1 rating=990408.8317177087A
fuse E6 n2 n2 rating=356396.4429527379A r=555727.5109176517Ohm
fuse E7 n3 n5 rating=6.103515625e-05A
load E8 n4 n6 power=1e-05W
resistor E9 n3 n0 r=0.99999Ohm
diode E10 n1 n4 is=4.482947709529404e-07A n=2.1936217165099756
load E11 n1 n5 r=320207.86530261167Ohm
resistor FZLO12 n4 n4 r=1e-12Ohm
resistor FZHI13 n1 n2 r=1e15Ohm
resistor FZLO14 n4 n2 r=1e-12Ohm
resistor FZHI15 n2 n1 r=1e15Ohm
resistor FZLO16 n3 n1 r=1e-12Ohm
resistor FZHI17 n1 n2 r=1e15Ohm
"""


def test_a_current_limited_source_is_never_shown_beyond_its_limit():
    """An 80 kV source limited to 0.5 A, shorted by a fuse among pico-ohm resistors: it was shown
    delivering 42 kA (its unlimited short-circuit current emf / r) in its holding mode. Either
    it is shown at most at its limit or the answer is refused."""
    net = dcnet.parse(LIMITED_SOURCE_AMONG_PICO_OHMS, "lim.dcn")
    try:
        sol = net.solve(checks=False)
    except NumericalError as err:
        assert "beyond its limit" in str(err) or "cannot be resolved" in str(err)
        return
    assert -sol.current("E1") <= 0.5 * (1 + 1e-9)


def test_numpy_floating_point_warnings_never_escape_the_python_api():
    """An overflow inside the solve is dcnet's NumericalError from the API too (dcnet/floating.py),
    not a numpy warning and an infinity carried on."""
    import warnings

    text = """load E0 n1 n0 current=89785.21898886644A
source E1 n2 n0 emf=665365.8701834542V
load E2 n3 n4 current=2.00001A
load E3 n1 n5 current=921657.0818618339A
source E4 n5 n4 emf=60.0V r=290078.4965141022Ohm imax=126198.99266673559A
load E5 n3 n2 power=999999.0W
supply E6 n0 n1 current=991854.3130585109A
source E8 n0 n1 emf=37571.43247276683V
link E9 n4 n0
supply E10 n4 n3 current=885777.1425457023A
source E11 n3 n2 emf=319864.41953447537V r=0.1Ohm imax=602198.1714446576A
ground n2
"""
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        try:
            sol = dcnet.parse(text, "huge.dcn").solve(checks=False)
        except dcnet.DcnetError:
            return
    net = dcnet.parse(text, "huge.dcn")
    assert _node_balance(net, sol) <= 1e-6


# --- a diode's switching round-off is judged at its own nodes, not by the largest current ------

_QUIET_DIODE = """\
cell     E0 n0 n4 emf=238244.896022455V r=0.99999Ohm
source   E1 n0 n1 emf=584384.0534576589V r=172876.43049450812Ohm
diode    E3 n0 n6 drop=1.6817659586232714V
source   E4 n6 n1 emf=620982.2012098446V r=665157.0951611362Ohm
resistor E5 n6 n4 r=180395.1446006565Ohm
resistor E6 n3 n4 r=83.8uOhm
diode    E7 n0 n3 drop=1.538527235819442V
ground n1
"""


def test_a_reverse_milliamp_in_an_ideal_diode_is_not_hidden_by_a_kiloamp_loop_elsewhere():
    # found by the fuzz campaign (reduced): a 238 kA loop through E7 made the network-wide
    # switching round-off about 7 A, so E3 was kept conducting with 44 mA *reverse* current and
    # E5 was shown at 110 uA instead of 36 mA. Reference: the nodal equations written here with
    # E7 conducting (an ideal drop) and E3 open, then both states checked for consistency.
    F = Fraction
    e0, r0 = F("238244.896022455"), F("0.99999")
    e1, r1 = F("584384.0534576589"), F("172876.43049450812")
    e4, r4 = F("620982.2012098446"), F("665157.0951611362")
    r5, r6 = F("180395.1446006565"), F("83.8e-6")
    d3, d7 = F("1.6817659586232714"), F("1.538527235819442")
    # unknowns V0, V4, V6 (V1 = 0, V3 = V0 - d7), in exact fractions; E0 pushes
    # (e0 - (V0 - V4)) / r0 into n0.  n6: (e4 - V6)/r4 = (V6 - V4)/r5 gives V6 = a + b V4
    a = (e4 / r4) / (1 / r4 + 1 / r5)
    b = (1 / r5) / (1 / r4 + 1 / r5)
    # n0: (e0 - V0 + V4)/r0 + (e1 - V0)/r1 - (V0 - d7 - V4)/r6 = 0
    # n4: -(e0 - V0 + V4)/r0 + (V6 - V4)/r5 + (V0 - d7 - V4)/r6 = 0
    # their sum: (e1 - V0)/r1 + (a + (b - 1) V4)/r5 = 0 gives V0 = p + q V4
    p = e1 + r1 * a / r5
    q = r1 * (b - 1) / r5
    # substitute in n0 and solve the one linear equation for V4
    c0 = (e0 - p) / r0 + (e1 - p) / r1 - (p - d7) / r6
    c1 = (-q + 1) / r0 - q / r1 - (q - 1) / r6
    v4 = -c0 / c1
    v0, v6 = p + q * v4, a + b * v4
    i7 = (v0 - d7 - v4) / r6
    i5 = (v6 - v4) / r5
    assert (e4 - v6) / r4 == i5 and (e0 - v0 + v4) / r0 + (e1 - v0) / r1 == i7  # exact balance at n6, n0
    assert i7 > 0 and v0 - v6 < d3  # the states assumed are the consistent ones
    sol = dcnet.parse(_QUIET_DIODE).solve()
    assert sol.current("E3") == 0.0 and sol.state("E3") == "blocked"
    assert sol.current("E5") == pytest.approx(float(i5), rel=1e-6)  # about 36 mA
    assert sol.potential("n6") - sol.potential("n0") == pytest.approx(float(v6 - v0), rel=1e-6)  # about 6.5 kV reverse


# --- the potential bound where conductances span 18 decades ------------------------------------


def _exact_resistance(edges, nodes, u, w):
    """Resistance between u and w: the grounded Laplacian (w at 0 V, 1 A into u) solved by
    Gaussian elimination in exact fractions."""
    idx = {n: k for k, n in enumerate(x for x in nodes if x != w)}
    size = len(idx)
    A = [[Fraction(0)] * (size + 1) for _ in range(size)]
    for a, b, r in edges:
        g = 1 / Fraction(r)
        for x, y in ((a, b), (b, a)):
            if x in idx:
                A[idx[x]][idx[x]] += g
                if y in idx:
                    A[idx[x]][idx[y]] -= g
    A[idx[u]][size] = Fraction(1)
    for col in range(size):
        piv = next(r for r in range(col, size) if A[r][col] != 0)
        A[col], A[piv] = A[piv], A[col]
        for r in range(size):
            if r != col and A[r][col] != 0:
                f = A[r][col] / A[col][col]
                A[r] = [x - f * y for x, y in zip(A[r], A[col])]
    return A[idx[u]][size] / A[idx[u]][idx[u]]


def test_the_potential_bound_holds_where_conductances_span_eighteen_decades():
    # found by the fuzz campaign: a 1e-5 m cable of 0.64 m2 beside 600 kOhm resistors left the
    # bound's floating-point Laplacian singular, and the solve ended in numpy's LinAlgError.
    # Reference: the resistance seen by the supply, in exact fractions (a bridge whose tiny
    # arms matter only through the large ones); the bound must not be below it (it would then
    # refuse true answers) and is allowed no more than the tiny resistances above it.
    from dcnet.analysis.bound import potential_bound
    from dcnet.analysis.branches import branch_table

    edges = [("q", "a", "1e-12"), ("a", "b", "600e3"), ("a", "c", "600e3"), ("b", "c", "2e-12"),
             ("b", "0", "300e3"), ("c", "0", "1e6"), ("c", "d", "4.7e3"), ("d", "0", "1e-12")]
    text = "supply S 0 q current=2A\n" + "".join(f"resistor R{k} {a} {b} r={r}Ohm\n" for k, (a, b, r) in enumerate(edges))
    exact = _exact_resistance(edges, ["0", "q", "a", "b", "c", "d"], "q", "0")
    pb = potential_bound(branch_table(dcnet.parse(text + "ground 0\n")))
    (name, cur, r), = pb.current_terms
    assert (name, cur) == ("S", 2.0)
    assert Fraction(r) >= exact
    assert r <= float(exact) + 4e-12 + 1e-9 * float(exact)
    assert pb.value == pytest.approx(2 * float(exact), rel=1e-9)


# --- the currents shown balance, whatever a diode's companion term -----------------------------


@pytest.mark.parametrize("r_diode", [3e-3, 1e-6, 1e-9, 1e-12, 1e-15])
def test_a_van_isolator_of_any_resistance_is_solved_to_the_closed_form_or_refused(r_diode):
    # found by the fuzz campaign: an isolator diode of 1e-15 Ohm (written 1e-12 mOhm) had a
    # companion term -drop/r = 4e14 A, and the balance of the shown currents allowed 1e-12 of it
    # (400 A), so a 45.08 A battery was shown feeding a 44.74 A diode with every check passed.
    # Reference: battery E behind RB, diode drop and r in series, bus at V with the inverter's
    # P/V, the lamp's 1.5 A and the charger's 8 A: (E - d - V)/(RB + r) + 8 = P/V + 1.5, so
    # V^2 - a V + P (RB + r) = 0 with a = E - d + 6.5 (RB + r); the upper root is the stable point.
    text = (f"cell HOUSE h+ 0 emf=12.8V r=8mOhm\ndiode ISO h+ bus drop=0.4V r={r_diode!r}Ohm\n"
            "load INV bus 0 power=600W\nsupply PV bus 0 current=8A\nload LAMP bus 0 current=1.5A\nground 0\n")
    R = 0.008 + r_diode
    a = 12.8 - 0.4 + 6.5 * R
    v_bus = (a + math.sqrt(a * a - 4 * 600 * R)) / 2
    i_house = (12.8 - 0.4 - v_bus) / R
    try:
        sol = dcnet.parse(text).solve()
    except NumericalError as err:
        assert r_diode <= 1e-12  # only the absurdly stiff ones may be refused, naming the diode
        assert err.culprits[0] == "ISO" and "ISO's" in (err.hint or "")
        return
    assert sol.potential("bus") == pytest.approx(v_bus, rel=1e-6)
    assert sol.current("HOUSE") == pytest.approx(-i_house, rel=1e-6)
    assert sol.current("ISO") == pytest.approx(i_house, rel=1e-6)


# --- round-off voltages are no polarity mistake ------------------------------------------------

_IDEAL_FUSE_ACROSS_SUPPLY = """\
diode E0 n1 n0 drop=0.209081157460215V
fuse E1 n0 n1 rating=1.000001A
link E2 n1 n2
supply E3 n1 n0 current=433611.06461663585A
cable E4 n1 n2 length=937760.2326674236m size=1000000.0mm2
switch E5 n2 n1 state=closed
supply E6 n1 n2 current=461515.6297065645A
cable E7 n3 n2 length=0.05m size=479869.87664741033mm2
ground n0
"""


def test_a_supply_shorted_by_an_ideal_fuse_is_not_failed_as_driven_backwards():
    # found by the fuzz campaign: the ideal fuse E1 joins E3's terminals, so E3's voltage and
    # power are exactly zero (Kirchhoff's voltage law around E1-E3); the solve showed 1.1 pV
    # beside 434 kA and the wiring check failed E3 as "driven backwards" on 497 nW of round-off
    sol = dcnet.parse(_IDEAL_FUSE_ACROSS_SUPPLY).solve()
    assert abs(sol.voltage("E3")) <= 1e-11
    assert abs(sol.current("E1")) == pytest.approx(433611.06461663585, rel=1e-9)  # all of E3's current returns through E1
    assert not [v for v in sol.verdicts if v.rule == "wiring" and "E3" in v.subject and not v.ok]
    # a supply really wired backwards against a battery still fails (cell 12 V behind 0.1 Ohm; the
    # supply pushes 2 A out of its first node, the ground, so it draws them from p and the cell
    # discharges: V(p) = 12 - 2 x 0.1 V by the loop rule, and the supply absorbs 2 A x 11.8 V)
    back = dcnet.parse("cell B p 0 emf=12V r=0.1Ohm\nsupply S 0 p current=2A\nground 0\n").solve()
    (fail,) = [v for v in back.verdicts if v.rule == "wiring" and "S" in v.subject]
    assert not fail.ok and fail.value == pytest.approx(2 * (12 - 2 * 0.1), rel=1e-9)


# --- a diode mode the shown currents contradict -------------------------------------------------


def test_an_ideal_diode_held_on_by_round_off_never_drags_its_far_side_by_its_drop():
    # found by the fuzz campaign (a mutation of bench/fuzz_seeds/faults/tera-span-bridge.dcn): a
    # 2 pOhm bar between b and c left every current at c uncertain by some 1e-4 A, so the ideal
    # diode a->c stayed "conducting" while Kirchhoff's law at b and c gave it 5.4 uA *backwards*,
    # and b and c were shown at -0.7 V. With the diode open, b and c are held only by resistors
    # to a and to ground, so by the maximum principle they lie between 0 and V(a); the answer must
    # say so, or be refused (the b-c cluster is barely fixed: 600 kOhm against 2 pOhm)
    text = (
        "supply S 0 q current=2A\ncable C1 q a length=1e-5m size=644484mm2\nresistor R2 a b r=600kOhm\n"
        "resistor R3 a c r=600kOhm\nresistor R4 b c r=2e-12Ohm\nresistor R5 b 0 r=300kOhm\nresistor R6 c 0 r=1MOhm\n"
        "cell B1 a 0 emf=12V r=10mOhm\nground 0\nresistor L1 a m r=0.1nOhm\nresistor H1 m 0 r=1e10Ohm\n"
        "resistor L2 a 0 r=0.1nOhm\nresistor H2 b 0 r=1e10Ohm\ndiode D a c drop=0.7V\nresistor L3 0 a r=0.1nOhm\n"
        "resistor H3 m a r=1e12Ohm\nresistor L4 a a r=0.1nOhm\nresistor H4 0 a r=1e12Ohm\n"
    )
    try:
        sol = dcnet.parse(text).solve()
    except (NumericalError, NoOperatingPointError, dcnet.errors.ConvergenceError):
        return
    va = sol.potential("a")
    for node in ("b", "c"):
        assert min(0.0, va) - 1e-9 <= sol.potential(node) <= max(0.0, va) + 1e-9
    assert sol.current("D") >= 0


# --- an element on one node meets no node -------------------------------------------------------


def test_a_current_loop_on_one_node_does_not_widen_that_nodes_balance():
    # found by the fuzz campaign: a 299 kA constant-current load with both ends on n3 counted
    # twice among the currents meeting there, so a 3.3 mA imbalance of the shown currents at n3
    # (a 26 nOhm cable at 1.2 MV) passed. Reference: each node's balance is summed here over
    # the elements with two different nodes
    text = (
        "load E0 n2 n1 current=128125.0629452461A\ncell E1 n1 n0 emf=952932.3428168588V r=466247.196427009Ohm\n"
        "supply E2 n0 n0 current=1084.62A\nlink E3 n0 n1 r=1.5Ohm\nsource E4 n0 n2 emf=60399.874240020836V\n"
        "diode E5 n3 n0 drop=1.748376055090528V\ncable E6 n1 n3 length=1.4m size=925713.7965853591mm2\n"
        "diode E7 n2 n3 drop=1.9723592108939454V r=229433.2425163116Ohm\nresistor E8 n1 n1 r=137080.02978381072Ohm\n"
        "cell E9 n0 n1 emf=197079.79584346255V r=107656.33270429006Ohm\nsupply E10 n0 n1 current=928169.201428087A\n"
        "load E11 n2 n0 r=40.0Ohm\nload E12 n3 n3 current=299132.5010994836A\nswitch FZW13 n0 n3 state=open\n"
        "source FZPS14 fz_cp14 n3 emf=1000.0V r=1.0Ohm\nload FZCP14 n1 n3 power=249999.75W\n"
    )
    net = dcnet.parse(text)
    try:
        sol = net.solve()
    except NumericalError as err:
        assert "n3" in str(err)
        return
    for node in net.node_index:
        total = meet = 0.0
        for e in net.elements:
            a, b = e.nodes[0], e.nodes[1]
            if a == b:
                continue
            i = sol.current(e.name)
            total += i if a == node else (-i if b == node else 0.0)
            meet += abs(i) if node in (a, b) else 0.0
        assert abs(total) <= 1e-6 * meet + 1e-9


# --- a settled point must obey every element's own law ------------------------------------------

_CP_LOAD_IN_A_DIODE_LOOP = """\
cable E0 n4 n4 length=858406.2624962847m size=65538.83197543563mm2
load E1 n3 n2 power=1.1W
fuse E2 n2 n2 rating=198839.0518036179A r=151407.72568841785Ohm
source E3 n3 n0 emf=806648.6708985643V
load E4 n0 n3 current=1.5A
diode E5 n0 n1 drop=1.1641932953473983V r=735121.111416587Ohm
diode E6 n2 n4 drop=1.0937621688359165V
cable E7 n2 n1 length=0.2m size=670231.210631035mm2
source E8 n3 n4 emf=0.99999V r=366761.43915966764Ohm imax=132023.2012069436A
cell E9 n2 n2 emf=6.103515625e-05V r=826766.4626915965Ohm
load E10 n4 n2 power=750961.4212610202W
supply E11 n0 n1 current=517083.88745449524A
cable E12 n2 n0 length=477190.0700040184m size=892695.6340849791mm2
ground n0
"""


def test_a_settled_point_obeys_the_constant_power_and_diode_laws_or_is_refused():
    # found by the fuzz campaign: Newton settled the 751 kW load E10 at -1.09 V (its companion
    # linearised at a positive floor) in a loop with the ideal diode E6, and the answer showed
    # E10 drawing 13 GA (14 GW); with that fixed, E6 was next shown carrying 2.2 A backwards at
    # its forward drop. The laws, checked here on whatever is shown: a running constant-power
    # load has V I = P with V > 0; an ideal diode carries current only forwards, and only at its
    # drop. (E10 cannot run here at all: E8 behind 367 kOhm delivers at most V^2 / 4r, some
    # 449 kW at 811 kV, less than 751 kW, the maximum power theorem.)
    assert 811.4e3**2 / (4 * 366761.43915966764) < 750961.4212610202
    try:
        sol = dcnet.parse(_CP_LOAD_IN_A_DIODE_LOOP).solve()
    except (NumericalError, NoOperatingPointError, dcnet.errors.ConvergenceError):
        return
    for name, p in (("E1", 1.1), ("E10", 750961.4212610202)):
        v, i = sol.voltage(name), sol.current(name)
        assert i == 0 or (v > 0 and v * i == pytest.approx(p, rel=1e-6))
    v6, i6 = sol.voltage("E6"), sol.current("E6")
    assert i6 >= -1e-9 and (i6 <= 1e-9 or v6 == pytest.approx(1.0937621688359165, rel=1e-9))


def test_a_diode_is_never_shown_carrying_current_backwards_however_stiff_its_neighbour():
    # found by the fuzz campaign (a mutation of bench/fuzz_seeds/faults/current-loop-one-node.dcn):
    # a cable 1e-30 m long (1.9e-38 Ohm) made the network-wide switching tolerance some 5e22 A,
    # so the ideal diode E5 stayed "conducting" while Kirchhoff's law gave it 800 kA *backwards*.
    # The law checked here on whatever is shown: an ideal diode carries current only forwards,
    # and only at its drop; a constant-power load that runs has V I = P with V > 0. (The 250 kW
    # load FZCP14 sits across that cable, where no power can reach it: a refusal is right.)
    path = Path(__file__).resolve().parents[2] / "bench" / "fuzz_seeds" / "faults" / "current-loop-one-node.dcn"
    text = path.read_text(encoding="utf-8").replace("length=1.4m", "length=1e-30m") + "load FZL20 n0 n2 power=600W vmin=10.5V\n"
    try:
        sol = dcnet.parse(text).solve()
    except (NumericalError, NoOperatingPointError, dcnet.errors.ConvergenceError):
        return
    for name in ("E5", "E7"):
        assert sol.current(name) >= -1e-9 * max(1.0, float(np.abs(sol.i).max()))
    for name, p in (("FZCP14", 249999.75), ("FZL20", 600.0)):
        v, i = sol.voltage(name), sol.current(name)
        assert i == 0 or (v > 0 and v * i == pytest.approx(p, rel=1e-6))
