"""Topology refusals: circuits that cannot be solved are refused with a TopologyError
that names the elements (culprits) and, where it helps, the node and the line.

These are structural facts, not numbers from a source: a node with no conducting path
to ground has no defined potential; a loop of ideal voltage sources and ideal links
leaves its circulating current undetermined (and contradicts itself if the EMFs do not
add to zero - Kirchhoff's voltage law); a current source whose current has no way back
violates Kirchhoff's current law or leaves a potential undetermined.
"""

from __future__ import annotations

import pickle

import pytest

import dcnet
from dcnet import topology
from dcnet.errors import TopologyError

BASE = ["cell B pos gnd emf=12V r=0.1Ohm", "load L pos gnd r=2Ohm"]


def _refusal(*lines: str) -> TopologyError:
    text = "\n".join(list(lines) + ["ground gnd"])
    with pytest.raises(TopologyError) as info:
        dcnet.parse(text).solve()
    return info.value


# --------------------------------------------------------------------------- floating islands


def test_floating_island_is_named():
    err = _refusal(*BASE, "resistor R3 x y r=1Ohm", "resistor R4 y z r=1Ohm")
    assert set(err.culprits) == {"R3", "R4"}
    assert err.node in {"x", "y", "z"}
    for word in ("floating", "R3", "R4", "x", "y", "z"):
        assert word in str(err)
    assert err.line == 3  # the first culprit's line
    assert "R3" in err.render()


def test_two_floating_islands():
    err = _refusal(*BASE, "resistor R3 x y r=1Ohm", "resistor R4 u w r=1Ohm")
    assert set(err.culprits) == {"R3", "R4"}
    assert "2 floating parts" in str(err)


def test_a_part_switched_off_by_an_open_switch_is_idle_not_refused():
    # an open switch that cuts off a part on purpose is no mistake: the part is solved as idle
    # (Kirchhoff's current law: no path, no current), its potential marked as set by leakage only
    sol = dcnet.parse("\n".join(BASE + ["switch S1 pos mid state=open", "resistor R3 mid far r=1Ohm", "resistor R4 far mid r=2Ohm", "ground gnd"])).solve()
    assert sol.current("R3") == 0 and sol.current("R4") == 0 and sol.state("R3") == "idle"
    assert not sol.failed
    assert any("cut off by" in w and "S1" in w for w in sol.warnings)
    # the rest is untouched: Ohm's law on the loop B, L
    assert sol.current("L") == pytest.approx(12 / 2.1, rel=1e-12)
    # closed, the part carries no current either, and sits at the potential of pos
    sol = dcnet.parse(
        "\n".join(BASE + ["switch S1 pos mid state=closed", "resistor R3 mid far r=1Ohm", "resistor R4 far mid r=2Ohm", "ground gnd"])
    ).solve()
    assert sol.potential("far") == pytest.approx(sol.potential("pos"), rel=1e-12)


def test_open_switch_to_a_loaded_node_is_not_floating():
    """An open switch ahead of a load leaves the load at ground potential, not floating."""
    sol = dcnet.parse("\n".join(BASE + ["switch S1 pos mid state=open", "load L2 mid gnd r=5Ohm", "ground gnd"])).solve()
    assert sol.current("L2") == 0.0
    assert sol.current("S1") == 0.0


# --------------------------------------------------------------------------- ideal loops


def test_loop_of_ideal_sources_and_a_link():
    err = _refusal("source V1 a gnd emf=12V", "link J1 a b", "source V2 b gnd emf=12V", "load L a gnd r=1Ohm")
    assert set(err.culprits) == {"V1", "J1", "V2"}
    assert "loop" in str(err) and "ideal" in str(err)
    # EMFs that agree around the loop are still refused (the circulating current is undetermined),
    # and the message does not claim a contradiction
    assert "contradict" not in str(err)


def test_contradicting_parallel_ideal_sources():
    err = _refusal("source V1 a gnd emf=12V", "source V2 a gnd emf=13V", "load L a gnd r=1Ohm")
    assert set(err.culprits) == {"V1", "V2"}
    # Kirchhoff's voltage law around the loop: 12 V - 13 V is not zero
    assert "contradict" in str(err)


def test_ideal_link_across_an_ideal_source():
    err = _refusal("source V1 a gnd emf=12V", "link J1 a gnd", "load L a gnd r=1Ohm")
    assert set(err.culprits) == {"V1", "J1"}


def test_ideal_fuse_and_closed_switch_count_as_links():
    err = _refusal("source V1 a gnd emf=12V", "fuse F1 a b rating=10A", "switch S1 b gnd", "load L a gnd r=1Ohm")
    assert set(err.culprits) == {"V1", "F1", "S1"}


def test_source_on_itself():
    err = _refusal("source V1 a a emf=12V", "resistor R a gnd r=1Ohm")
    assert err.culprits == ("V1",)


def test_ideal_elements_without_a_loop_are_accepted():
    """A tree of ideal sources and links is fine: a string of ideal sources, linked to a bus."""
    sol = dcnet.parse(
        "\n".join(
            [
                "source V1 m gnd emf=12V",
                "source V2 top m emf=12V",
                "link J1 top bus",
                "fuse F1 bus feed rating=30A",
                "load L feed gnd r=4Ohm",
                "ground gnd",
            ]
        )
    ).solve()
    assert sol.potential("feed") == pytest.approx(24.0, rel=1e-15)
    assert sol.current("J1") == pytest.approx(6.0, rel=1e-12)
    assert sol.current("V1") == pytest.approx(-6.0, rel=1e-12)


def test_giving_one_source_a_resistance_breaks_the_loop():
    sol = dcnet.parse("source V1 a gnd emf=12V\nsource V2 a gnd emf=13V r=0.5Ohm\nground gnd").solve()
    # loop rule: (13 - 12) V across 0.5 Ohm; V2 delivers 2 A into V1 (passive signs)
    assert sol.current("V2") == pytest.approx(-2.0, rel=1e-12)
    assert sol.current("V1") == pytest.approx(2.0, rel=1e-12)


# --------------------------------------------------------------------------- current sources


def test_current_source_with_no_return_path():
    err = _refusal(*BASE, "supply S x gnd current=1A")
    assert err.culprits == ("S",)
    assert err.node == "x"
    assert "return path" in str(err)


def test_current_sources_in_series_have_no_return_path():
    err = _refusal(*BASE, "supply S1 x gnd current=1A", "supply S2 pos x current=1A")
    assert set(err.culprits) == {"S1", "S2"}


def test_current_source_feeding_an_island_through_resistors():
    err = _refusal(*BASE, "supply S x gnd current=1A", "resistor R3 x y r=1Ohm")
    assert err.culprits == ("S",)


def test_constant_current_load_with_no_return_path_has_no_supply():
    # a load whose other node connects to nothing cannot draw its current: no supply, a wiring
    # FAIL naming it (not a refusal at the load's line)
    sol = dcnet.parse("cell B pos gnd emf=12V r=0.1Ohm\nload L2 x gnd current=2A\nground gnd").solve()
    assert sol.unsupplied == ["L2"] and sol.current("L2") == 0
    (v,) = [v for v in sol.verdicts if v.rule == "wiring"]
    assert not v.ok and "L2" in v.subject and "no supply" in v.detail and "x" in v.detail


# --------------------------------------------------------------------------- error objects and helpers


def test_topology_error_pickles_with_its_fields():
    err = _refusal(*BASE, "supply S x gnd current=1A")
    back = pickle.loads(pickle.dumps(err))
    assert type(back) is TopologyError
    assert back.culprits == err.culprits and back.node == err.node and str(back) == str(err)


def test_graph_and_islands():
    net = dcnet.parse("\n".join(BASE + ["resistor R3 x y r=1Ohm", "ground gnd"]))
    G = topology.graph(net)
    assert set(G.nodes) == {"pos", "gnd", "x", "y"}
    assert {d["name"] for _, _, d in G.edges(data=True)} == {"B", "L", "R3"}
    from dcnet.analysis.branches import branch_table

    bt = branch_table(net)
    labels = topology.islands(bt)
    idx = net.node_index
    assert labels[idx["pos"]] == labels[idx["gnd"]]
    assert labels[idx["x"]] == labels[idx["y"]] != labels[idx["gnd"]]


def test_self_loop_resistor_is_a_warning_not_an_error():
    sol = dcnet.parse("\n".join(BASE + ["resistor R3 pos pos r=1Ohm", "ground gnd"])).solve()
    assert sol.current("R3") == 0.0
    assert any("R3" in w for w in sol.warnings)


def test_elements_on_one_node_are_shown_carrying_nothing_as_the_warning_says():
    # found by the fuzz campaign: a constant-current load and a supply with both ends on one node
    # were shown "drawing 299 kA" beside the warning that they carry no current. Reference: the
    # rest of the circuit alone, a 12 V cell behind 0.1 Ohm into 6 Ohm: 12 / 6.1 A (loop rule)
    text = "cell B p 0 emf=12V r=0.1Ohm\nload L p 0 r=6Ohm\nload C p p current=5A\nsupply S 0 0 current=2A\ndiode D p p drop=0.7V r=1Ohm\nground 0\n"
    sol = dcnet.parse(text).solve()
    for name in ("C", "S", "D"):
        assert sol.current(name) == 0.0
    assert sol.current("L") == pytest.approx(12 / 6.1, rel=1e-12)
    assert any("carry no current" in w and "C" in w for w in sol.warnings)
