"""The bank shorthand and blocks: expansion, names, and the circuit theory they must obey."""

from fractions import Fraction

import pytest

import dcnet

PART = "part c cell emf=12.8V r=5mOhm capacity=100Ah chemistry=agm\n"


def bank(props, load="load L pos neg r=0.5Ohm\n"):
    return dcnet.parse(PART + f"bank B pos neg {props}\n" + load + "ground neg\n")


def string_currents(sol, net, name="B"):
    return [sol.current(cells[-1]) for cells in net.banks[name]["strings"]]


def test_every_cell_and_interconnect_has_a_result():
    net = bank("series=4 parallel=3 cell=c strap=0.2mOhm bus=0.1mOhm lead=0.5mOhm fuse=100A fuse_r=0.3mOhm")
    sol = net.solve()
    for j in range(1, 4):
        for i in range(1, 5):
            assert sol.state(f"B.s{j}.c{i}") == "discharging"
        for i in range(1, 4):
            assert sol.current(f"B.s{j}.strap{i}") == pytest.approx(-sol.current(f"B.s{j}.c4"))
        assert sol.extras(f"B.s{j}.fuse")["loading_pct"] > 0
        assert f"B.s{j}.lead+" in net._by_name and f"B.s{j}.lead-" in net._by_name
    for j in (1, 2):
        assert net.has_element(f"B.bus+.{j}") and net.has_element(f"B.bus-.{j}")
    assert len([e for e in net.elements if e.kind == "cell"]) == 12


def test_uniform_bank_with_symmetric_interconnects_has_zero_imbalance():
    # no bus resistance: every string sees the same path, so by symmetry the currents are equal
    net = bank("series=4 parallel=5 cell=c strap=0.2mOhm lead=0.5mOhm fuse=100A fuse_r=0.3mOhm")
    sol = net.solve()
    cur = string_currents(sol, net)
    assert max(cur) - min(cur) == pytest.approx(0, abs=1e-9 * abs(cur[0]))


def test_bank_without_interconnects_matches_millman_for_its_strings():
    # Millman's theorem: V = sum(E_k/R_k + 0) / (sum(1/R_k) + 1/R_load), strings as E_k, R_k
    net = dcnet.parse(
        PART + "bank B pos neg series=3 parallel=3 cell=c s2.ageing=1.5 s3.c1.r=9mOhm s3.c2.emf=12.6V\n"
        "load L pos neg r=0.25Ohm\nground neg\n"
    )
    sol = net.solve()
    E = [Fraction("38.4"), Fraction("38.4"), Fraction("38.2")]
    R = [Fraction("0.015"), Fraction("0.0225"), Fraction("0.019")]
    RL = Fraction("0.25")
    V = sum(e / r for e, r in zip(E, R)) / (sum(1 / r for r in R) + 1 / RL)
    assert sol.potential("pos") == pytest.approx(float(V), rel=1e-9)
    for cells, e, r in zip(net.banks["B"]["strings"], E, R):
        assert sol.current(cells[0]) == pytest.approx(float((V - e) / r), rel=1e-9)


def test_tap_positions_change_imbalance():
    # common practice, no source: taking the leads at opposite ends evens out the string currents
    spans = {}
    for tap in ("same", "opposite", "centre"):
        net = bank(f"series=4 parallel=4 cell=c strap=0.2mOhm bus=0.5mOhm tap={tap}")
        cur = string_currents(net.solve(), net)
        spans[tap] = (max(cur) - min(cur)) / abs(sum(cur) / len(cur))
    assert spans["opposite"] < spans["same"]
    assert spans["centre"] < spans["same"]


def test_two_string_bank_is_exactly_balanced_with_opposite_taps():
    # symmetry: with two equal strings and opposite taps each string's path has one bus segment
    net = bank("series=2 parallel=2 cell=c bus=1mOhm tap=opposite")
    cur = string_currents(net.solve(), net)
    assert cur[0] == pytest.approx(cur[1], rel=1e-12)


def test_spread_is_seeded_and_bounded():
    a = bank("series=8 parallel=4 cell=c spread=10% seed=3")
    b = bank("series=8 parallel=4 cell=c spread=10% seed=3")
    c = bank("series=8 parallel=4 cell=c spread=10% seed=4")
    ra = [e.values["r"] for e in a.elements if e.kind == "cell"]
    rb = [e.values["r"] for e in b.elements if e.kind == "cell"]
    rc = [e.values["r"] for e in c.elements if e.kind == "cell"]
    assert ra == rb and ra != rc
    assert all(0.9 * 5e-3 <= r <= 1.1 * 5e-3 for r in ra)
    assert len(set(ra)) == len(ra)


def test_overrides_and_ageing_compose():
    net = bank("series=2 parallel=2 cell=c ageing=1.2 s2.ageing=1.5 s2.c2.r=7mOhm s1.emf=12.6V")
    r = {e.name: e.values["r"] for e in net.elements if e.kind == "cell"}
    assert r["B.s1.c1"] == pytest.approx(5e-3 * 1.2)
    assert r["B.s2.c1"] == pytest.approx(5e-3 * 1.2 * 1.5)
    assert r["B.s2.c2"] == pytest.approx(7e-3 * 1.2 * 1.5)  # explicit value, ageing still applies
    assert net.element("B.s1.c2").values["emf"] == pytest.approx(12.6)


def test_blocks_with_ports_parameters_and_nesting():
    net = dcnet.parse(
        "block box (p, n)\n  let r_box = 5mOhm\n  cell C p mid emf=6.4V r=r_box\n  cell D mid n emf=6.4V r=r_box\nend\n"
        "block pair (p, n)\n  use left box (p, n)\n  use right box (p, n) r_box=8mOhm\nend\n"
        "use P1 pair (bus, gnd)\nload L bus gnd r=1Ohm\nground gnd\n"
    )
    assert net.element("P1.right.C").values["r"] == pytest.approx(8e-3)
    assert net.element("P1.left.D").nodes == ("P1.left.mid", "gnd")
    sol = net.solve()
    # two 12.8 V strings of 10 mOhm and 16 mOhm on 1 Ohm (Millman)
    g = [1 / 0.010, 1 / 0.016]
    V = 12.8 * sum(g) / (sum(g) + 1.0)
    assert sol.potential("bus") == pytest.approx(V, rel=1e-12)


def test_bank_inside_a_block():
    net = dcnet.parse(PART + "block cabinet (p, n)\n  bank K p n series=2 parallel=2 cell=c\nend\nuse A cabinet (pos, neg)\nload L pos neg r=1Ohm\nground neg\n")
    assert net.has_element("A.K.s2.c2")
    assert "A.K" in net.banks
