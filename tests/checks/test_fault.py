"""Prospective fault currents against nodal solves written in the test (tests/checks/reference.py).

Every reference is the faulted network solved directly: the bolted fault as a zero-ohm link
(two nodes merged), the network in its fault state (constant-power and constant-current loads
drawing nothing, chargers at their current limit, diodes in the state the fault gives them),
which is what dcnet's check promises (dcnet/checks/fault.py). Physics: Kirchhoff's laws and
Ohm's law; Thevenin's theorem only inside dcnet.
"""

from __future__ import annotations

import pytest

import dcnet

from .reference import solve as ref_solve


def fault(sol, subject):
    (v,) = [v for v in sol.verdicts if v.rule == "fault current" and v.subject == subject]
    return v


def worst_return(branches, ground, terminal_nodes, returns, watch):
    """Largest current through branch ``watch`` over bolted faults terminal -> return (reference)."""
    best = (0.0, None, None)
    for t in terminal_nodes:
        for r in returns:
            if r == t:
                continue
            _, cur, _ = ref_solve(branches, ground, merge=[(t, r)])
            if abs(cur[watch]) > best[0]:
                best = (abs(cur[watch]), t, r)
    return best


def test_a_constant_power_load_collapses_in_the_fault():
    # An inverter (constant power) on the bus: at its operating point it looks like a negative
    # conductance plus a current source; in the fault it draws nothing. The reference network
    # has the cell, the fuse and the cable only.
    text = (
        "cell B pos neg emf=12.6V r=6mOhm\n"
        "fuse F pos a rating=200A r=1mOhm interrupt=1500A\n"
        "cable W a b length=2m size=35mm2\n"
        "load INV b neg power=1.2kW\n"
        "ground neg\n"
    )
    sol = dcnet.parse(text).solve()
    r_w = sol.extras("W")["resistance_ohm"]
    # worst fault for F: at its load side (a) to the negative pole (neg), through cell and fuse only
    branches = [("emf", "pos", "neg", 12.6, 6e-3), ("r", "pos", "a", 1e-3), ("r", "a", "b", r_w)]
    expected, t, r = worst_return(branches, "neg", ["pos", "a"], ["neg", "b"], watch=1)
    assert (t, r) == ("a", "neg")
    v = fault(sol, "F")
    assert v.value == pytest.approx(expected, rel=1e-9)  # 12.6 / 7 mOhm = 1800 A
    assert expected == pytest.approx(12.6 / 7e-3, rel=1e-12)
    assert v.ok is False  # above the 1.5 kA rating
    assert "from a to neg" in v.detail


def test_constant_current_loads_do_not_move_the_figure():
    # the figure is the fault state's, whatever the operating point: a regulated load drawing
    # 0, 40 or 150 A gives the same prospective current (reference: no load at all)
    base = "cell B pos neg emf=25.4V r=9mOhm\nfuse F pos a rating=200A r=0.5mOhm interrupt=10kA\ncable W a b length=3m size=50mm2\n"
    figures = []
    for amps in (0, 40, 150):
        text = base + (f"load L b neg current={amps}A\n" if amps else "load L b neg r=1MOhm\n") + "ground neg\n"
        figures.append(fault(dcnet.parse(text).solve(), "F").value)
    r_w = dcnet.parse(base + "load L b neg r=1Ohm\nground neg\n").solve().extras("W")["resistance_ohm"]
    branches = [("emf", "pos", "neg", 25.4, 9e-3), ("r", "pos", "a", 0.5e-3), ("r", "a", "b", r_w), ("r", "b", "neg", 1e6)]
    expected, _, _ = worst_return(branches, "neg", ["pos", "a"], ["neg", "b"], watch=1)
    assert figures[1] == pytest.approx(expected, rel=1e-9) and figures[2] == pytest.approx(expected, rel=1e-9)
    assert figures[0] == pytest.approx(expected, rel=1e-6)  # the 1 MOhm stand-in for "no load"


def test_the_worst_return_is_any_conductor_of_the_other_pole():
    # Two batteries on a positive and a negative bus bar; the load's own negative run is long.
    # A fault from the load fuse's far end to the negative bus bar beats one to the load's own
    # negative terminal: dcnet must find the worst return over every conductor, and name it.
    text = (
        "cell A a+ a- emf=12.8V r=5mOhm\n"
        "cell B b+ b- emf=12.8V r=5mOhm\n"
        "resistor PA a+ bus+ r=1mOhm\nresistor PB b+ bus+ r=2mOhm\n"
        "resistor NA a- bus- r=1mOhm\nresistor NB b- bus- r=2mOhm\n"
        "fuse F bus+ f rating=60A r=1mOhm interrupt=5kA\n"
        "resistor FEED f l+ r=8mOhm\nload L l+ l- r=0.5Ohm\nresistor RET l- bus- r=8mOhm\n"
        "ground bus-\n"
    )
    sol = dcnet.parse(text).solve()
    branches = [
        ("emf", "a+", "a-", 12.8, 5e-3), ("emf", "b+", "b-", 12.8, 5e-3),
        ("r", "a+", "bus+", 1e-3), ("r", "b+", "bus+", 2e-3), ("r", "a-", "bus-", 1e-3), ("r", "b-", "bus-", 2e-3),
        ("r", "bus+", "f", 1e-3), ("r", "f", "l+", 8e-3), ("r", "l+", "l-", 0.5), ("r", "l-", "bus-", 8e-3),
    ]  # fmt: skip
    others = ["a-", "b-", "bus-", "l-", "l+"]
    expected, t, r = worst_return(branches, "bus-", ["bus+", "f"], others, watch=6)
    v = fault(sol, "F")
    assert v.value == pytest.approx(expected, rel=1e-9)
    assert f"from {t} to {r}" in v.detail and r == "a-"  # straight to battery A's terminal
    # 11 % below it is what a fault to the load's own return gives (the figure the old rule took)
    own, _, _ = worst_return(branches, "bus-", ["f"], ["l-"], watch=6)
    assert own < 0.9 * expected


def test_a_string_fuse_carries_the_other_strings_backwards():
    # three strings, each fused at its top; a fault at string 1's cell side of its fuse draws the
    # other two strings' current through it backwards (the classic bank hazard)
    text = (
        "part c cell emf=12.8V r=6mOhm\n"
        "bank K p n series=2 parallel=3 cell=c lead=0.5mOhm fuse=100A fuse_r=0.3mOhm interrupt=4kA\n"
        "load L p n r=2Ohm\nground n\n"
    )
    sol = dcnet.parse(text).solve()
    v = fault(sol, "K.s1.fuse")
    # reference: each string two cells (25.6 V, 12 mOhm) + fuse 0.3 mOhm + two leads 0.5 mOhm; bus ideal
    branches = []
    for j in (1, 2, 3):
        branches += [
            ("emf", f"s{j}.top", f"s{j}.bot", 25.6, 12e-3),
            ("r", f"s{j}.top", f"s{j}.f", 0.3e-3),
            ("r", f"s{j}.f", "p", 0.5e-3),
            ("r", f"s{j}.bot", "n", 0.5e-3),
        ]
    branches.append(("r", "p", "n", 2.0))
    others = ["n", "s1.bot", "s2.bot", "s3.bot"]
    expected, t, r = worst_return(branches, "n", ["s1.top", "s1.f"], others, watch=1)
    assert v.value == pytest.approx(expected, rel=1e-9)
    assert t == "s1.top"  # the cell side: the current comes backwards from strings 2 and 3
    assert v.ok is True  # about 2 x 25.6 V / 13 mOhm shared: within 4 kA


def test_a_charger_delivers_its_limit_into_the_fault():
    # a current-limited charger on the bus pushes its 40 A limit into a fault (reference: a
    # 40 A current source in its place)
    text = (
        "cell B pos neg emf=25.6V r=10mOhm\n"
        "source CH ch neg emf=28.8V r=20mOhm imax=40A\n"
        "resistor CW ch pos r=3mOhm\n"
        "fuse F pos a rating=100A r=1mOhm interrupt=3kA\n"
        "load L a neg r=1Ohm\nground neg\n"
    )
    sol = dcnet.parse(text).solve()
    branches = [("emf", "pos", "neg", 25.6, 10e-3), ("i", "neg", "ch", 40.0), ("r", "ch", "pos", 3e-3), ("r", "pos", "a", 1e-3), ("r", "a", "neg", 1.0)]
    expected, t, r = worst_return(branches, "neg", ["pos", "a"], ["neg", "ch"], watch=3)
    assert fault(sol, "F").value == pytest.approx(expected, rel=1e-9)
    assert (t, r) == ("a", "neg")
    assert expected == pytest.approx((25.6 / 0.010 + 40) * 0.010 / 0.011, rel=1e-12)  # Norton sum through 1 mOhm


def test_a_blocking_diode_that_conducts_only_in_the_fault():
    # A backup battery behind a blocking diode stays off while the main battery holds the bus
    # higher; a bus fault pulls the bus down and the diode conducts, so the backup adds to the
    # fault. Reference: the backup's diode as its forward drop behind its resistance.
    text = (
        "cell MAIN bus neg emf=13.2V r=8mOhm\n"
        "cell BACK bk neg emf=12.6V r=10mOhm\n"
        "diode D bk bus drop=0.6V r=4mOhm\n"
        "fuse F bus a rating=60A r=2mOhm interrupt=5kA\n"
        "load L a neg r=1Ohm\nground neg\n"
    )
    sol = dcnet.parse(text).solve()
    assert sol.state("D") == "blocked"
    branches = [("emf", "bus", "neg", 13.2, 8e-3), ("emf", "bk", "neg", 12.6, 10e-3), ("emf", "bk", "bus", 0.6, 4e-3), ("r", "bus", "a", 2e-3), ("r", "a", "neg", 1.0)]
    _, cur, _ = ref_solve(branches, "neg", merge=[("a", "neg")])
    assert cur[2] > 0  # the diode does conduct in this fault
    assert fault(sol, "F").value == pytest.approx(abs(cur[3]), rel=1e-9)


def test_an_isolator_keeps_the_other_battery_out_of_the_fault():
    # a charger feeds two batteries through a two-way isolator; a fault on the house side is fed
    # by the house battery and the charger (at its limit, through DH), not by the start battery,
    # whose diode the fault biases backwards
    text = (
        "source CH chg gnd emf=14.4V r=8mOhm imax=40A\n"
        "diode DH chg house drop=0.45V r=3mOhm\n"
        "diode DS chg start drop=0.45V r=3mOhm\n"
        "cell HOUSE house gnd emf=12.5V r=6mOhm\n"
        "cell START start gnd emf=13.0V r=12mOhm\n"
        "fuse F house a rating=30A r=3mOhm interrupt=3kA\n"
        "load FRIDGE a gnd current=4A\nground gnd\n"
    )
    sol = dcnet.parse(text).solve()
    branches = [("i", "gnd", "chg", 40.0), ("emf", "chg", "house", 0.45, 3e-3), ("emf", "house", "gnd", 12.5, 6e-3), ("r", "house", "a", 3e-3)]
    _, cur, _ = ref_solve(branches + [("emf", "start", "gnd", 13.0, 12e-3)], "gnd", merge=[("a", "gnd")])
    assert cur[1] > 0  # DH conducts in the fault
    v = fault(sol, "F")
    assert v.value == pytest.approx(abs(cur[3]), rel=1e-9)
    # and the start battery's diode stays blocked in that fault: its anode sits below 13.0 V
    pot, _, _ = ref_solve(branches + [("emf", "start", "gnd", 13.0, 12e-3)], "gnd", merge=[("a", "gnd")])
    assert pot["chg"] - pot["start"] < 0.45


def test_fault_current_at_bank_terminals_is_the_thevenin_closed_form():
    # Thevenin/Norton: strings E_k behind R_k in parallel; a bolted fault across the terminals
    # draws sum(E_k / R_k), with or without a passive load in parallel
    text = (
        "part c cell emf=12.8V r=5mOhm\n"
        "bank B pos neg series=4 parallel=3 cell=c s2.ageing=1.4 s3.c1.emf=12.5V\n"
        "load L pos neg r=0.8Ohm\nground neg\n"
    )
    sol = dcnet.parse(text).solve()
    E = [4 * 12.8, 4 * 12.8, 3 * 12.8 + 12.5]
    R = [4 * 5e-3, 4 * 5e-3 * 1.4, 4 * 5e-3]
    assert fault(sol, "bank B terminals").value == pytest.approx(sum(e / r for e, r in zip(E, R)), rel=1e-9)


def test_the_same_figure_per_sample_in_a_study(tmp_path):
    # the study's per-sample fault rule is the same rule: at each drawn cell resistance, E / (r + r_fuse)
    src = tmp_path / "f.dcn"
    src.write_text("let rc = 6mOhm ± 20%\ncell B pos neg emf=12.6V r=rc\nfuse F pos a rating=50A r=1mOhm interrupt=1700A\nload L a neg r=1Ohm\nground neg\n")
    from dcnet.analysis import studies

    _, values, res = studies.spread(str(src), 64, seed=5, show=["B.current"], fault=True)
    (series,) = [c for c in res.checks if c.rule == "fault current"]
    expected = 12.6 / (values["rc"] + 1e-3)
    assert series.value == pytest.approx(expected, rel=1e-9)
    assert list(series.ok) == list(expected <= 1700)


def test_an_ideal_fuse_beside_an_ideal_link_takes_its_equal_share():
    # found by the fuzz campaign (a traceback): equal ideal branches in parallel share their
    # current equally (the circuit does not decide the split; the solve says so), in a fault too:
    # 12 V over 1 Ohm into the fault, half of it through the fuse (Ohm's law)
    text = "cell B p gnd emf=12V r=1Ohm\nlink K p q\nfuse F p q rating=20A interrupt=5kA\nload L q gnd r=10Ohm\nground gnd\n"
    sol = dcnet.parse(text).solve()
    assert fault(sol, "F").value == pytest.approx(6.0, rel=1e-12)
