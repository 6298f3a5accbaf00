"""Charge and discharge cycles: closed forms, Peukert's law, the ledger, strings that drift apart."""

from pathlib import Path

import numpy as np
import pytest

import dcnet
from dcnet import errors as E
from dcnet.analysis.cycle import run

ROOT = Path(__file__).resolve().parents[2]


def cycle(text, **kw):
    return run(dcnet.parse(text + "ground gnd\n"), **kw)


def test_flat_emf_charge_matches_joules_law_and_the_loop_rule():
    # one cell of EMF E and internal resistance r charged at a constant I for t seconds:
    # the charger delivers (E + I r) I t (loop rule), I^2 r t is heat (Joule's law), E I t is
    # stored, and the state of charge rises by I t / C
    E0, r, I, t, C = 12.0, 0.05, 10.0, 7200.0, 100 * 3600.0
    res = cycle(f"supply CH p gnd current={I}A\ncell B p gnd emf={E0}V r={r}Ohm capacity=100Ah soc=20% curve=flat\nphase charge on=CH for=2h\n")
    cats = res.ledger["categories_J"]
    assert cats["put in by chargers and sources"] == pytest.approx((E0 + I * r) * I * t, rel=1e-12)
    assert cats["heat in cells' internal resistance"] == pytest.approx(I * I * r * t, rel=1e-12)
    assert cats["stored in cells (net)"] == pytest.approx(E0 * I * t, rel=1e-12)
    assert res.soc[-1][0] - res.soc[0][0] == pytest.approx(I * t / C, rel=1e-12)
    assert abs(res.ledger["closure_relative"]) < 1e-12


def test_discharge_through_a_load_and_coulombic_efficiency():
    # eta applies to charging only: 95 % of the charge is stored, the rest is not
    res = cycle(
        "supply CH p gnd current=5A\ncell B p gnd emf=12V r=0.02Ohm capacity=50Ah soc=50% eta=95% curve=flat\n"
        "load L p gnd current=3A\nphase charge on=CH for=1h\nphase use on=L for=1h\n"
    )
    dsoc = res.soc[-1][0] - res.soc[0][0]
    assert dsoc == pytest.approx((0.95 * 5 * 3600 - 3 * 3600) / (50 * 3600), rel=1e-12)
    assert res.ledger["categories_J"]["charge not stored (coulombic loss, overcharge)"] == pytest.approx(0.05 * 12 * 5 * 3600, rel=1e-12)


@pytest.mark.parametrize("amps", [5.0, 20.0])
def test_peukert_run_time(amps):
    # Peukert's law: t = H (C / (I H))^k, C rated at H hours (REFERENCES.md; k 1.1-1.3 for lead-acid)
    C_ah, H_h, k = 100.0, 20.0, 1.2
    res = cycle(
        f"cell B p gnd emf=12.6V r=0.01Ohm capacity={C_ah}Ah soc=100% peukert={k} rate={H_h}h chemistry=lead-acid curve=flat\n"
        f"load L p gnd current={amps}A\nphase drain on=L soc_below=0% max=100h\n",
        step=600.0,
    )
    expected_h = H_h * (C_ah / (amps * H_h)) ** k
    assert res.phases[0]["duration_s"] / 3600 == pytest.approx(expected_h, rel=1e-6)
    assert res.phases[0]["ended_by"].startswith("soc")


def test_event_located_on_a_voltage_threshold():
    # with a flat EMF and a constant current the terminal voltage is constant; with the
    # lead-acid curve it falls, and the phase must stop within a second of the crossing
    res = cycle(
        "cell B p gnd emf=12.65V r=0.01Ohm capacity=100Ah soc=100% chemistry=lead-acid\n"
        "load L p gnd current=10A\nphase drain on=L volts_below=12.2V at=p max=20h\n",
        step=300.0,
    )
    assert res.phases[0]["ended_by"].startswith("volts at p below 12.2")
    # at the end the terminal voltage is the threshold (to the event tolerance)
    assert res.potentials[-1][res.node_names.index("p")] == pytest.approx(12.2, abs=1e-6)


def test_factor_reused_while_resistances_stay():
    res = cycle("supply CH p gnd current=10A\ncell B p gnd emf=12V r=0.05Ohm capacity=100Ah soc=20%\nload L p gnd r=2Ohm\nphase a on=CH for=1h\nphase b on=L for=1h\n")
    assert res.factorisations == 2 and res.solves > 100
    ref = cycle("supply CH p gnd current=10A\ncell B p gnd emf=12V r=0.05Ohm capacity=100Ah soc=20%\nload L p gnd r=2Ohm\nphase a on=CH for=1h\nphase b on=L for=1h\n", force_refactor=True)
    assert ref.factorisations == ref.solves
    np.testing.assert_allclose(res.soc, ref.soc, rtol=1e-12)


def test_unequal_strings_diverge_under_load_and_exchange_current_at_rest():
    # two strings, one aged: under load the newer string carries more and drains faster;
    # at rest their EMFs differ, so current flows from one to the other until their states
    # of charge (and EMFs) meet: the exchange decays (Kirchhoff's laws with the lead-acid curve)
    text = (
        "part agm cell emf=12.5V r=6mOhm capacity=100Ah chemistry=agm soc=90%\n"
        "bank B pos gnd series=2 parallel=2 cell=agm s2.ageing=2\n"
        "load L pos gnd current=40A\n"
        "phase use on=L for=3h\nphase rest for=24h\n"
    )
    res = cycle(text, step=60.0)
    names = res.cell_names
    s1, s2 = names.index("B.s1.c2"), names.index("B.s2.c2")
    end_use = int(np.searchsorted(res.times, 3 * 3600.0))
    gap_start = res.soc[0][s2] - res.soc[0][s1]
    gap_use = res.soc[end_use][s2] - res.soc[end_use][s1]
    assert gap_start == pytest.approx(0.0)
    assert gap_use > 0.01  # the newer string s1 drained further
    rest = res.phase_of_sample == 1
    i1, i2 = res.cell_current[rest][:, s1], res.cell_current[rest][:, s2]
    assert i1[0] > 0 > i2[0]  # s1 is charged by s2 at the start of the rest
    assert i1[0] == pytest.approx(-i2[0], rel=1e-9)  # nothing else draws: pure exchange (KCL)
    assert abs(i1[-1]) < 0.05 * abs(i1[0])  # and it decays
    assert abs(res.soc[-1][s2] - res.soc[-1][s1]) < 0.2 * gap_use
    assert res.circulating["bank"] == "B" and res.circulating["max_A"] > 0


def test_ledger_closes_on_every_demo_with_phases():
    demos = [p for p in sorted((ROOT / "circuits").glob("*.dcn")) if dcnet.load(p).phases]
    assert demos
    for path in demos:
        res = run(dcnet.load(path), step=120.0)
        assert abs(res.ledger["closure_relative"]) < 1e-3, path.name  # better than 0.1 %


def test_errors():
    with pytest.raises(E.InputError, match="needs capacity="):
        cycle("cell B p gnd emf=12V r=0.05Ohm\nload L p gnd r=2Ohm\nphase a on=L for=1h\n")
    with pytest.raises(E.InputError, match="no phases"):
        cycle("cell B p gnd emf=12V r=0.05Ohm capacity=10Ah\nload L p gnd r=2Ohm\n")
    with pytest.raises(E.UnknownNameError, match="no element named 'LL'"):
        dcnet.parse("cell B p gnd emf=12V r=0.05Ohm capacity=10Ah\nload L p gnd r=2Ohm\nphase a on=LL for=1h\n")
    with pytest.raises(E.InputError, match="has no end"):
        dcnet.parse("cell B p gnd emf=12V r=0.05Ohm capacity=10Ah\nphase a\n")
    with pytest.raises(E.InputError, match="needs at="):
        dcnet.parse("cell B p gnd emf=12V r=0.05Ohm capacity=10Ah\nphase a volts_below=11V max=1h\n")


def test_cycle_command(tmp_path, capsys):
    from dcnet.cli import main

    series, png = tmp_path / "s.csv", tmp_path / "p.png"
    code = main(["cycle", str(ROOT / "circuits" / "cabin-cycle.dcn"), "--step", "5min", "--series", str(series), "--plot", str(png)])
    out = capsys.readouterr().out
    assert code == 0
    assert "Energy ledger" in out and "balance closes" in out and "licensed practitioners" in out
    assert series.read_text().splitlines()[0].startswith("time_s,phase,soc:A,soc:B")
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert main(["cycle", str(ROOT / "circuits" / "cabin-cycle.dcn"), "--step", "5V"]) == 2


def test_report_includes_the_cycle(tmp_path):
    from dcnet.cli import main

    out = tmp_path / "r.html"
    assert main(["report", str(ROOT / "circuits" / "cabin-cycle.dcn"), "--cycle", "--step", "10min", "-o", str(out)]) == 0
    page = out.read_text()
    assert "Charge and discharge cycle" in page and "Energy ledger" in page
