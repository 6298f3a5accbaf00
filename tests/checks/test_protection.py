"""Cable protection: the protecting fuse's rating against what the cable may carry.

Reference figures written here: NFPA 70 (NEC) Table 310.16 copper (2020 numbering; 310.15(B)(16)
in 2011-2017), 60/75/90 degC: 14 AWG 15/20/25 A, 12 AWG 20/25/30 A, 10 AWG 30/35/40 A, 8 AWG
40/50/55 A, 6 AWG 55/65/75 A (secondary); NEC 240.4(D): 14 AWG 15 A, 12 AWG 20 A, 10 AWG 30 A
(secondary); NEC 240.4(B): the next standard rating above an ampacity that is not one, up to
800 A (from memory); NEC 240.6(A) standard ratings ... 60, 70, 80 ... (secondary).
"""

from __future__ import annotations

import pytest

import dcnet


def protection(sol, cable):
    found = [v for v in sol.verdicts if v.rule == "cable protection" and v.subject == cable]
    return found[0] if found else None


def circuit(cable_props, rating, load="r=3Ohm"):
    return dcnet.parse(
        f"cell B b+ gnd emf=12.8V r=5mOhm\nfuse F b+ f rating={rating} r=1mOhm\ncable C f l {cable_props}\nload L l gnd {load}\nground gnd\n"
    ).solve()


@pytest.mark.parametrize(
    "props, rating, limit, ok",
    [
        ("length=3m gauge=14", "20A", 15.0, False),  # 240.4(D): 14 AWG at most 15 A, though 310.16 gives 20 A at 75 degC
        ("length=3m gauge=14", "15A", 15.0, True),
        ("length=3m gauge=12", "25A", 20.0, False),  # 240.4(D)
        ("length=3m gauge=10", "30A", 30.0, True),
        ("length=3m gauge=6", "70A", 70.0, True),  # 65 A is not a standard rating: the next one, 70 A (240.4(B))
        ("length=3m gauge=6", "80A", 70.0, False),
        ("length=3m gauge=6 insulation=60degC", "60A", 60.0, True),  # 55 A at 60 degC; next standard 60 A
        ("length=3m gauge=8", "60A", 50.0, False),  # 50 A is a standard rating: no allowance
    ],
)
def test_fuse_against_cable(props, rating, limit, ok):
    sol = circuit(props, rating)
    v = protection(sol, "C")
    assert v.limit == pytest.approx(limit) and v.ok is ok
    assert "F" in v.detail


def test_a_metric_cable_takes_the_awg_row_below_it():
    # 10 mm2 lies between 8 AWG (8.37 mm2) and 7 AWG: the 8 AWG row, 50 A at 75 degC (conservative)
    v = protection(circuit("length=3m size=10mm2", "125A"), "C")
    assert v.limit == pytest.approx(50.0) and v.ok is False


def test_a_cable_no_fuse_separates_from_its_source_is_named_not_judged():
    sol = dcnet.parse("cell B b+ gnd emf=12.8V r=5mOhm\ncable C b+ f length=1m size=35mm2\nfuse F f l rating=100A\nload L l gnd r=3Ohm\nground gnd\n").solve()
    assert protection(sol, "C") is None
    assert any("cable protection not checked for C" in w for w in sol.warnings)
