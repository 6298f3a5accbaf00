"""The cell voltage window: the count of cells in series is stated or inferred, never guessed.

Per-cell figures written here (from memory, as dcnet/data/chemistries.tsv says): lead-acid
1.75 V discharge cut-off, 2.40 V charge voltage, resting 1.93..2.17 V; LiFePO4 2.5 / 3.65 V,
resting 2.80..3.45 V; NMC 3.0 / 4.2 V, resting 3.00..4.20 V.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import dcnet
from dcnet.checks.cells import chemistry_of, series_count

REST = {"lead-acid": (1.93, 2.17), "lifepo4": (2.80, 3.45), "nmc": (3.00, 4.20)}


def window(sol, name):
    return {v.rule: v for v in sol.verdicts if v.subject == name and v.rule.startswith("cell voltage")}


def solve_with_charger(cell_line, charger_emf, r_ch=0.05):
    text = f"{cell_line}\nsource CH pos neg emf={charger_emf}V r={r_ch}Ohm\nground neg\n"
    return dcnet.parse(text).solve()


def test_a_24v_lead_acid_battery_at_rest_voltage_is_not_guessed():
    # 25.3 V fits 12 cells (23.2..26.0 V) and 13 cells (25.1..28.2 V) at rest: no count is
    # inferred, no window verdict, and a warning says how to state it
    sol = dcnet.parse("cell B pos neg emf=25.3V r=10mOhm chemistry=lead-acid\nload L pos neg r=2Ohm\nground neg\n").solve()
    assert window(sol, "B") == {}
    (note,) = [w for w in sol.warnings if "window not checked" in w]
    assert "12, 13" in note and "cells=" in note


def test_an_absurd_emf_names_the_range_of_counts_not_a_list_of_billions():
    # found by the fuzz campaign: an EMF of 1e12 V listed every count that fits, one by one, and
    # ran out of memory. The range is the whole numbers n with n x 1.93 <= 1e12 <= n x 2.17 V
    # (lead-acid resting range as dcnet's table gives it, REST above)
    lo_v, hi_v = REST["lead-acid"]
    sol = dcnet.parse("cell B pos neg emf=1e12V r=1Ohm chemistry=lead-acid\nload L pos neg r=1MOhm\nground neg\n").solve()
    (note,) = [w for w in sol.warnings if "window not checked" in w]
    assert f"any of {math.ceil(1e12 / hi_v):,} to {math.floor(1e12 / lo_v):,}" in note
    assert len(note) < 400


def test_a_24v_lead_acid_battery_held_at_2_5_v_per_cell_fails_with_its_count():
    # 12 cells at 2.5 V each = 30 V at the terminals, above 12 x 2.40 = 28.8 V
    sol = solve_with_charger("cell B pos neg emf=25.3V r=10mOhm chemistry=lead-acid cells=12", 31.0, r_ch=2e-3)
    vt = sol.voltage("B")
    assert vt == pytest.approx(25.3 + (31.0 - 25.3) / 12e-3 * 10e-3, rel=1e-12)  # loop rule: E + I r
    assert vt / 12 > 2.45
    hi = window(sol, "B")["cell voltage (highest)"]
    assert hi.limit == pytest.approx(12 * 2.40) and hi.ok is False
    assert "cells=12 of B (as given)" in hi.source


def test_a_three_cell_nmc_module_at_4_5_v_per_cell_fails():
    # 12.6 V fits 3 cells (9..12.6 V) and 4 cells (12..16.8 V): stated as cells=3 it is checked
    sol = dcnet.parse("cell M pos neg emf=12.6V r=30mOhm chemistry=nmc\nsource CH pos neg emf=14V r=0.05Ohm\nground neg\n").solve()
    assert window(sol, "M") == {}  # not guessed
    sol = solve_with_charger("cell M pos neg emf=12.6V r=30mOhm chemistry=nmc cells=3", 14.2, r_ch=0.02)
    vt = sol.voltage("M")
    assert vt / 3 > 4.4
    hi = window(sol, "M")["cell voltage (highest)"]
    assert hi.limit == pytest.approx(3 * 4.2) and hi.ok is False


def test_a_16_cell_lifepo4_pack_at_54_4_v_is_not_guessed():
    sol = dcnet.parse("cell P pos neg emf=54.4V r=20mOhm chemistry=lifepo4\nload L pos neg r=5Ohm\nground neg\n").solve()
    assert window(sol, "P") == {}
    sol = dcnet.parse("cell P pos neg emf=54.4V r=20mOhm chemistry=lifepo4 cells=16\nload L pos neg r=5Ohm\nground neg\n").solve()
    lo = window(sol, "P")["cell voltage (lowest)"]
    assert lo.limit == pytest.approx(16 * 2.5) and lo.ok is True


def test_a_12v_block_is_inferred_as_six_cells_and_says_so():
    # 12.7 V: 6 cells rest at 11.58..13.02 V; 5 cells at most 10.85 V, 7 cells at least 13.51 V
    lo_v, hi_v = REST["lead-acid"]
    admits = [n for n in range(1, 20) if n * lo_v <= 12.7 <= n * hi_v]
    assert admits == [6]
    sol = dcnet.parse("cell B pos neg emf=12.7V r=5mOhm chemistry=agm\nload L pos neg r=1Ohm\nground neg\n").solve()
    w = window(sol, "B")
    assert w["cell voltage (lowest)"].limit == pytest.approx(6 * 1.75)
    assert w["cell voltage (highest)"].limit == pytest.approx(6 * 2.40)
    assert "6 cells inferred" in w["cell voltage (lowest)"].source


def test_a_count_at_odds_with_the_emf_is_warned():
    sol = dcnet.parse("cell B pos neg emf=25V r=5mOhm chemistry=lead-acid cells=6 vmin=10V\nload L pos neg r=1Ohm\nground neg\n").solve()
    assert any("outside the resting range" in w for w in sol.warnings)


def test_the_count_comes_from_the_part_of_a_bank():
    text = "part m cell emf=25.4V r=8mOhm chemistry=lead-acid cells=12\nbank K p n series=2 parallel=2 cell=m\nload L p n r=5Ohm\nground n\n"
    sol = dcnet.parse(text).solve()
    assert window(sol, "K.s1.c2")["cell voltage (highest)"].limit == pytest.approx(12 * 2.40)


@pytest.mark.parametrize("bad", ["cells=0", "cells=2.5", "cells=-3"])
def test_cells_must_be_a_whole_number(bad):
    with pytest.raises(dcnet.DcnetError):
        dcnet.parse(f"cell B pos neg emf=12V r=5mOhm {bad}\nload L pos neg r=1Ohm\nground neg\n")


@given(
    chem=st.sampled_from(sorted(REST)),
    n=st.integers(1, 30),
    frac=st.floats(0.0, 1.0),
)
def test_inference_never_names_another_count(chem, n, frac):
    # invariant: a battery of n cells resting anywhere in the range is inferred as n or not at all
    lo_v, hi_v = REST[chem]
    emf = n * (lo_v + frac * (hi_v - lo_v))
    got = series_count(np.array([emf]), chemistry_of(chem))[0]
    assert math.isnan(got) or got == n
    # and inferred exactly when no other whole number fits (written out here)
    others = [k for k in range(1, 40) if k != n and k * lo_v <= emf <= k * hi_v]
    if not others:
        assert got == n
