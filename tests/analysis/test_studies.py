"""Studies (sweeps and spreads): batched solves against point-by-point solves, statistics against closed forms."""

import math
import re
from pathlib import Path

import numpy as np
import pytest

import dcnet
from dcnet.analysis.studies import Study, axis_values, spread_values, statistics, study_from_file, sweep_values

ROOT = Path(__file__).resolve().parents[2]
CABIN = ROOT / "circuits" / "cabin.dcn"
SHED = ROOT / "circuits" / "shed-bank-spread.dcn"


def _all_quantities(net):
    return [f"{el.name}.current" for el in net.elements] + [f"{n}.potential" for n in net.node_index]


def _substituted(text: str, values: dict[str, float], units: dict[str, str]) -> str:
    """The circuit text with each let line's value replaced by a literal in SI units (an exact float)."""
    for name, value in values.items():
        literal = f"{float(value)!r} {units[name]} "
        text, n = re.subn(rf"(?m)^(let\s+{name}\s*=\s*)[^#\n]*", lambda m, lit=literal: m.group(1) + lit, text)
        assert n == 1
    return text


def _point_solve(path: Path, values, units):
    text = _substituted(path.read_text(), values, units)
    return dcnet.parse(text, str(path), base_dir=path.parent).solve()


def _run_sweep(path, axes, quantities, fault=False):
    study = study_from_file(str(path), [n for n, _ in axes], quantities=quantities, fault=fault)
    values = sweep_values(study, axes)
    study.prepare({n: float(v[-1]) for n, v in axes})
    return study, values, study.run(values)


def test_sweep_matches_point_by_point_solves_exactly():
    # Reference: each grid point written into the file as a literal and solved on its own by the
    # ordinary pipeline (numpy's LAPACK solve of that one system). Batched and single solves must
    # agree to the last bit: the same assembly order and the same LAPACK routine.
    net = dcnet.load(CABIN)
    qs = _all_quantities(net) + ["PB.drop_pct", "F1.loading_pct", "A.loss_W", "a+,bus+"]
    axes = [("run", axis_values(0.5, 12.0, 4, False)), ("r_int", axis_values(2e-3, 20e-3, 3, True))]
    study, values, res = _run_sweep(CABIN, axes, qs)
    assert study.mode == "batch"
    assert res.n == 12 and res.modes == {"solved together": 12}
    for k in range(res.n):
        sol = _point_solve(CABIN, {"run": values["run"][k], "r_int": values["r_int"][k]}, {"run": "m", "r_int": "Ohm"})
        ref = np.array([sol.quantity(q)[1] for q in qs])
        np.testing.assert_array_equal(res.quantities[k], ref)


def test_sweep_of_bank_and_cable_properties_matches_point_solves(tmp_path):
    # bank-level values (strap, lead) through the bank expansion; a cable with r= per length and
    # one from the IEC 60228 table, both derived again for every point
    src = tmp_path / "bank.dcn"
    src.write_text(
        "let strap_r = 0.2 mOhm\nlet lead_r = 0.5 mOhm\nlet r_cell = 6 mOhm\nlet run = 3 m\nlet hot = 30 degC\n"
        "part c12 cell emf=12.8V r=r_cell\n"
        "bank B p n series=2 parallel=3 cell=c12 strap=strap_r lead=lead_r bus=0.1mOhm tap=opposite s2.c1.r=1.5*r_cell\n"
        "cable W1 p q length=run r=0.8mOhm/m\n"
        "cable W2 n gnd length=run size=25mm2 model=table temp=hot\n"
        "load L q gnd r=0.5Ohm\nground gnd\n"
    )
    net = dcnet.load(src)
    qs = _all_quantities(net)
    axes = [("strap_r", axis_values(0.1e-3, 1e-3, 3, False)), ("run", axis_values(1.0, 9.0, 3, False)), ("hot", axis_values(-10.0, 60.0, 2, False))]
    study, values, res = _run_sweep(src, axes, qs)
    assert study.mode == "batch"
    for k in range(res.n):
        sol = _point_solve(src, {n: values[n][k] for n, _ in axes}, {"strap_r": "Ohm", "run": "m", "hot": "degC"})
        np.testing.assert_array_equal(res.quantities[k], [sol.quantity(q)[1] for q in qs])


def _grid_text(n: int) -> str:
    lines = ["let r_src = 0.05 Ohm", "let r_mesh = 1 Ohm"]
    for y in range(n):
        for x in range(n):
            if x + 1 < n:
                lines.append(f"resistor H{x}_{y} n{x}_{y} n{x + 1}_{y} r=r_mesh")
            if y + 1 < n:
                lines.append(f"resistor V{x}_{y} n{x}_{y} n{x}_{y + 1} r=1Ohm")
    lines += ["cell S1 n0_0 gnd emf=12V r=r_src", f"cell S2 n{n - 1}_{n - 1} gnd emf=11V r=0.1Ohm", f"load L n{n // 2}_{n // 2} gnd r=2Ohm", "ground gnd"]
    return "\n".join(lines) + "\n"


def test_sparse_sweep_matches_point_solves(tmp_path):
    # 22 x 22 grid: 484 unknowns, above the dense limit; one structure and one column ordering
    # shared by the points. Reference: scipy's SuperLU on each point's own matrix (the ordinary
    # solve). The fill-reducing ordering depends on the structure alone, so it is the one each
    # point's own solve would choose, and the results agree to the last bit, over values that
    # span five decades as well.
    src = tmp_path / "grid.dcn"
    src.write_text(_grid_text(22))
    qs = ["L.current", "S1.current", "S2.current", "n3_4.potential", "n20_21.potential"]
    axes = [("r_src", axis_values(0.01, 0.2, 3, False)), ("r_mesh", axis_values(0.5, 2.0, 2, False))]
    study, values, res = _run_sweep(src, axes, qs)
    assert study.mode == "batch" and "sparse" in next(iter(res.modes))
    for k in range(res.n):
        sol = _point_solve(src, {n: values[n][k] for n, _ in axes}, {"r_src": "Ohm", "r_mesh": "Ohm"})
        np.testing.assert_array_equal(res.quantities[k], [sol.quantity(q)[1] for q in qs])
    axes = [("r_src", axis_values(1e-4, 10, 6, True)), ("r_mesh", axis_values(0.01, 200.0, 3, True))]
    study, values, res = _run_sweep(src, axes, qs)
    for k in range(res.n):
        sol = _point_solve(src, {n: values[n][k] for n, _ in axes}, {"r_src": "Ohm", "r_mesh": "Ohm"})
        np.testing.assert_array_equal(res.quantities[k], [sol.quantity(q)[1] for q in qs])


def test_sparse_sweep_fault_current_matches_point_checks(tmp_path):
    # the fault-current rule on the sparse path (each sample's own SuperLU factor) against the
    # ordinary check of each point solved on its own (Thevenin on that solve's factorisation)
    src = tmp_path / "grid.dcn"
    src.write_text(_grid_text(21) + "fuse F n10_10 fx rating=20A r=1mOhm interrupt=25A\nload LF fx gnd r=3Ohm\n")
    axes = [("r_src", axis_values(0.01, 0.2, 4, False))]
    study, values, res = _run_sweep(src, axes, ["LF.current"], fault=True)
    assert "sparse" in next(iter(res.modes))
    (c,) = [c for c in res.checks if c.rule == "fault current"]
    for k in range(res.n):
        sol = _point_solve(src, {"r_src": values["r_src"][k]}, {"r_src": "Ohm"})
        (v,) = [v for v in sol.verdicts if v.rule == "fault current" and v.subject == "F"]
        assert c.value[k] == pytest.approx(v.value, rel=1e-9) and c.ok[k] == v.ok


def test_nonlinear_circuit_falls_back_to_point_solves(tmp_path):
    # a constant-power load: solved point by point (Newton for each), results as the point solves
    src = tmp_path / "inv.dcn"
    src.write_text(
        "let p_inv = 2 kW\nlet run = 6 m\ncell BANK b+ b- emf=25.2V r=4.5mOhm\n"
        "cable P1 b+ inv+ length=run size=35mm2\nload INV inv+ inv- power=p_inv vmin=21V\n"
        "cable N1 inv- b- length=run size=35mm2\nground b-\n"
    )
    qs = ["INV.current", "INV.voltage", "BANK.current"]
    axes = [("p_inv", axis_values(500.0, 3000.0, 6, False))]
    study, values, res = _run_sweep(src, axes, qs)
    assert study.mode == "rebuild" and "nonlinear" in study.reason
    for k in range(res.n):
        sol = _point_solve(src, {"p_inv": values["p_inv"][k]}, {"p_inv": "W"})
        np.testing.assert_array_equal(res.quantities[k], [sol.quantity(q)[1] for q in qs])


def test_values_used_where_the_netlist_does_not_record_them_reread_the_file(tmp_path):
    # a let used inside a block and as a bank's ageing factor: the study notices (its own netlist
    # for a sample differs from the file read with that sample's values) and re-reads the file
    src = tmp_path / "blocks.dcn"
    src.write_text(
        "let r_box = 5 mOhm\nlet age = 1.2\n"
        "block box (p, n)\n  cell C p n emf=12.6V r=r_box\nend\n"
        "part c cell emf=12.6V r=6mOhm\nbank B p gnd series=1 parallel=2 cell=c ageing=age\n"
        "use left box (p, gnd)\nload L p gnd r=1Ohm\nground gnd\n"
    )
    qs = ["L.current", "left.C.current", "B.s1.c1.current"]
    for name, vals, unit in (("r_box", axis_values(2e-3, 9e-3, 3, False), "Ohm"), ("age", axis_values(1.0, 2.0, 3, False), "")):
        study, values, res = _run_sweep(src, [(name, vals)], qs)
        assert study.mode == "reparse", study.reason
        for k in range(res.n):
            sol = _point_solve(src, {name: values[name][k]}, {name: unit})
            np.testing.assert_array_equal(res.quantities[k], [sol.quantity(q)[1] for q in qs])


CHARGED_BANK = """let r_mono = 6mOhm ± 25%
let emf_mono = 12.8V ± 1%
let r_ch = 30mOhm ± 50%
part m cell emf=emf_mono r=r_mono capacity=100Ah chemistry=agm
bank B b+ b- series=2 parallel=3 cell=m lead=0.4mOhm fuse=100A fuse_r=0.3mOhm interrupt=6kA
source CH ch b- emf=28.4V r=r_ch
fuse CF ch b+ rating=125A r=1mOhm interrupt=6kA
cable P b+ l length=5m size=16mm2
fuse LF l f rating=40A r=1mOhm interrupt=3kA
cable PF f lf length=3m size=10mm2
load L lf b- current=30A critical=yes
load H l b- r=1.5Ohm
limit imbalance max=8% among=B
limit drop max=2% from=b+ to=l
ground b-
"""


@pytest.mark.parametrize("fault", [False, True], ids=["default", "with fault current"])
@pytest.mark.parametrize("which", ["shed", "charged bank"])
def test_batched_checks_equal_the_checks_of_each_sample(fault, which, tmp_path):
    # the rules on arrays (a study's samples) against the same rules on each sample solved on
    # its own: same rule and subject words, values to 1e-12 (fault currents, solved with several
    # right-hand sides at once, to 1e-9), same verdicts. Quiet series (wiring) are listed for a
    # single solve only when they fail.
    if which == "shed":
        path, names = SHED, ["r_mono", "emf_mono", "lead_r"]
        independent = names
    else:
        path = tmp_path / "charged.dcn"
        path.write_text(CHARGED_BANK)
        names, independent = ["r_mono", "emf_mono", "r_ch"], ["r_mono"]
    study = study_from_file(str(path), names, independent=independent, fault=fault)
    values = spread_values(study, 40, seed=3)
    study.prepare({n: float(v.flat[0]) for n, v in values.items()})
    assert study.mode == "batch"
    res = study.run(values)
    assert res.failed.any() and not res.failed.all()  # limits fail in some samples
    changed = study.element_samples(values, 40)
    for k in (0, 7, int(np.flatnonzero(res.failed)[0]), int(np.flatnonzero(~res.failed)[0])):
        sol = study.rebuild(values, k, changed).solve()
        verdicts = {(v.rule, v.subject): v for v in sol.verdicts if v.sense != "info"}
        batched = {(c.rule, c.subject): c for c in res.checks if c.rule != "wiring" or not c.ok[k]}
        judged = {key for key, c in batched.items() if not np.isnan(c.value[k]) or not c.ok[k]}
        assert {key for key in verdicts if fault or key[0] != "fault current"} == judged
        for key in judged:
            c, v = batched[key], verdicts[key]
            rel = 1e-9 if key[0] == "fault current" else 1e-12
            assert c.ok[k] == v.ok, key
            if v.value is not None:
                assert c.value[k] == pytest.approx(v.value, rel=rel), key
            if v.limit is not None:
                assert c.limit[k] == pytest.approx(v.limit, rel=1e-12), key


def test_fault_current_per_sample_follows_each_samples_cell(tmp_path):
    # One cell, a fuse and a load; a bolted fault at the fuse's load end draws E / (r + r_fuse)
    # through the fuse (Ohm's law on the Thevenin equivalent). With the cell's resistance drawn
    # +-20 %, the 6 kA interrupt rating holds in some samples and not in others: each sample's
    # figure is that closed form at its own drawn resistance.
    src = tmp_path / "fault.dcn"
    src.write_text(
        "let r_cell = 2 mOhm ± 20%\ncell B b+ gnd emf=12.8V r=r_cell\n"
        "fuse F b+ x rating=100A r=0.1mOhm interrupt=6kA\nload L x gnd r=1Ohm\nground gnd\n"
    )
    study = study_from_file(str(src), ["r_cell"], fault=True)
    values = spread_values(study, 400, seed=5)
    study.prepare({n: float(v.flat[0]) for n, v in values.items()})
    res = study.run(values)
    (c,) = [c for c in res.checks if c.rule == "fault current"]
    expected = 12.8 / (values["r_cell"].reshape(-1) + 0.1e-3)
    np.testing.assert_allclose(c.value, expected, rtol=1e-9)
    np.testing.assert_array_equal(c.ok, expected <= 6000.0)
    assert 0 < c.ok.sum() < len(c.ok)


def _series_resistor(tmp_path, tol: str = "10%"):
    # a 2 A current source through two resistors drawn from one toleranced value: V = I * r
    src = tmp_path / "r.dcn"
    src.write_text(f"let r = 5 Ohm ± {tol}\nsupply I a gnd current=2A\nresistor R1 a m r=r\nresistor R2 m gnd r=r\nground gnd\n")
    return src


@pytest.mark.parametrize("dist", ["uniform", "normal"])
def test_spread_statistics_against_closed_forms(tmp_path, dist):
    # V(R1) = 2 A * r with r = 5 Ohm +- 0.5 Ohm. Closed forms (standard results, from memory):
    #   uniform on [r0 - t, r0 + t]: sd = t / sqrt(3), quantile q at r0 - t + 2 t q;
    #   normal with sigma = t/3 cut at +-3 sigma: sd = sigma * sqrt(1 - 2*3*phi(3) / (2*Phi(3) - 1)).
    src = _series_resistor(tmp_path)
    study = study_from_file(str(src), ["r"], quantities=["R1.voltage"])
    n = 200_000
    values = spread_values(study, n, seed=11, dist=dist)
    study.prepare({"r": float(values["r"][0])})
    res = study.run(values)
    v = res.quantities[:, 0]
    t = 0.5
    if dist == "uniform":
        sd = t / math.sqrt(3)
    else:
        phi3 = math.exp(-4.5) / math.sqrt(2 * math.pi)
        Phi3 = 0.5 * (1 + math.erf(3 / math.sqrt(2)))
        sd = (t / 3) * math.sqrt(1 - 2 * 3 * phi3 / (2 * Phi3 - 1))
        assert np.abs(values["r"] - 5).max() <= t  # cut at the tolerance
    se = 2 * sd / math.sqrt(n)  # standard error of the mean of V = 2 r
    assert abs(v.mean() - 10.0) < 5 * se
    assert v.std(ddof=1) == pytest.approx(2 * sd, rel=0.01)
    stats = statistics(v, 10.0, (5, 50, 95))
    if dist == "uniform":
        assert stats["percentiles"][5.0] == pytest.approx(2 * (5 - t + 2 * t * 0.05), abs=0.01)
        assert stats["min"] >= 2 * (5 - t) and stats["max"] <= 2 * (5 + t)
    assert stats["percentiles"][50.0] == pytest.approx(10.0, abs=0.01)


def test_shared_and_independent_draws(tmp_path):
    src = _series_resistor(tmp_path)
    shared = study_from_file(str(src), ["r"], quantities=["R1.voltage", "R2.voltage"])
    vals = spread_values(shared, 500, seed=2)
    res = shared.prepare({"r": float(vals["r"][0])}).run(vals)
    np.testing.assert_allclose(res.quantities[:, 0], res.quantities[:, 1], rtol=1e-14)  # one draw, both resistors
    each = study_from_file(str(src), ["r"], independent=["r"], quantities=["R1.voltage", "R2.voltage"])
    vals = spread_values(each, 500, seed=2)
    assert vals["r"].shape == (500, 2)
    res = each.prepare({"r": float(vals["r"][0, 0])}).run(vals)
    np.testing.assert_allclose(res.quantities, 2.0 * vals["r"], rtol=1e-12)  # V = I r, element by element
    corr = np.corrcoef(res.quantities.T)[0, 1]
    assert abs(corr) < 0.2


def test_seeded_draws_are_reproducible_and_independent_of_chunking(tmp_path):
    src = _series_resistor(tmp_path)
    study = study_from_file(str(src), ["r"], quantities=["R1.voltage"])
    a = spread_values(study, 1000, seed=5)
    b = spread_values(study, 1000, seed=5)
    c = spread_values(study, 1000, seed=6)
    np.testing.assert_array_equal(a["r"], b["r"])
    assert not np.array_equal(a["r"], c["r"])
    study.prepare({"r": 5.0})
    whole = study.run(a)
    study.chunk_size = lambda: 64  # many small chunks: the same answers
    np.testing.assert_array_equal(study.run(a).quantities, whole.quantities)


def test_sample_out_of_range_is_refused_with_its_number(tmp_path):
    src = tmp_path / "r.dcn"
    src.write_text("let r = 1 Ohm\nsupply I a gnd current=2A\nresistor R1 a gnd r=r\nground gnd\n")
    study = study_from_file(str(src), ["r"], quantities=["R1.voltage"])
    study.prepare({"r": 2.0})
    with pytest.raises(dcnet.DcnetError, match=r"greater than zero.*sample 3"):
        study.run({"r": np.array([1.0, 0.5, -0.5, 2.0])})


def test_study_survives_pickling(tmp_path):
    import pickle

    study = study_from_file(str(CABIN), ["run"], quantities=["A.current"])
    study.prepare({"run": 3.0})
    copy = pickle.loads(pickle.dumps(study))
    vals = {"run": np.array([1.0, 2.0])}
    np.testing.assert_array_equal(copy.run_chunk(vals).quantities, study.run_chunk(vals).quantities)


def test_unknown_let_names_the_nearest():
    net = dcnet.load(CABIN)
    with pytest.raises(dcnet.DcnetError, match="is not a let value") as exc:
        Study(net, ["runn"], path=str(CABIN))
    assert "did you mean 'run'" in exc.value.hint


def test_spread_result_is_a_section_of_the_html_report():
    from dcnet.analysis import studies
    from dcnet.report.html import render

    study, _, res = studies.spread(str(SHED), 300, seed=1, independent=["r_mono"], show=["BAT.s1.fuse.current"])
    section = res.report_section()
    assert section["title"] == "Tolerance spread" and section["plots"][0]["kind"] == "histogram"
    page = render(study.nominal_solution, file=str(SHED), spread=res)
    assert "Tolerance spread" in page and "BAT.s1.fuse.current" in page


def test_bank_quantities_per_sample_equal_each_samples_solve():
    # BANK.imbalance_pct and BANK.circulating_A batched (the bank alone solved for every sample
    # together) against the ordinary solve of the same samples
    names = ["r_mono", "emf_mono", "lead_r"]
    qs = ["BAT.imbalance_pct", "BAT.circulating_A"]
    study = study_from_file(str(SHED), names, independent=names, quantities=qs)
    values = spread_values(study, 30, seed=11)
    study.prepare({n: float(v.flat[0]) for n, v in values.items()})
    res = study.run(values)
    assert (res.quantities[:, 1] > 0).all()  # cells that differ exchange current at rest
    changed = study.element_samples(values, 30)
    for k in (0, 9, 29):
        sol = study.rebuild(values, k, changed).solve()
        np.testing.assert_allclose(res.quantities[k], [sol.quantity(q)[1] for q in qs], rtol=1e-9)
