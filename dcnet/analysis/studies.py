"""Studies: one circuit solved for many values of its ``let`` values.

A :class:`Study` takes a circuit file and the names of the ``let`` values it varies, and
solves the circuit for any number of samples (a sweep's grid points, a spread's random
draws). How, it decides once:

``batch``
    The netlist records the expression tree of every ``let`` value and of every element
    property that uses one (``Netlist.exprs``). The study evaluates those trees over arrays
    of samples (:func:`dcnet.language.expressions.evaluate_array`), lets each affected
    element's kind derive its values (``Kind.finish_batch``: a cable's resistance from its
    length, ...), builds per-sample property columns, stamps them with the kinds' own
    ``branches`` and solves all samples together (:mod:`dcnet.analysis.batch`). No file is
    read again.
``rebuild``
    Nonlinear circuits (diodes, constant-power loads, current-limited sources), and samples
    whose values change which branches are ideal, are solved point by point: each sample's
    netlist is the nominal one with the affected elements' values replaced (still no
    re-reading), solved by the ordinary pipeline with every check.
``reparse``
    When a varied value is used where the netlist does not record it (inside a block, in a
    bank's counts or ageing, in a ``limit`` statement), each sample re-reads the file with
    the value substituted (``Options.let_values``) and solves it with every check.

The choice is verified, not assumed: before a study runs, the netlist the study would build
for one of its own samples is compared with the netlist read from the file with that
sample's values; if they differ anywhere, the study re-reads the file for every sample.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from ..errors import DcnetError, InputError, NumericalError, UnknownNameError
from ..kinds import KINDS
from ..language.expressions import ExpressionProblem, evaluate_array, names_in
from ..netlist import Element, Netlist
from ..units import Quantity
from .batch import SparsePattern, solve_batch
from .branches import branch_table
from .mna import DENSE_LIMIT
from .solution import SampleLookups, string_currents

__all__ = ["Study", "ChunkResult", "StudyResult", "CheckSeries", "study_from_file", "sweep", "spread", "axis_values", "sweep_values", "spread_values", "statistics"]


# --------------------------------------------------------------- results
@dataclasses.dataclass
class CheckSeries:
    """One check (rule and subject) over every sample; NaN where it did not apply."""

    rule: str
    subject: str
    unit: str
    sense: str
    source: str
    value: np.ndarray
    limit: np.ndarray
    ok: np.ndarray

    @property
    def applies(self) -> np.ndarray:
        return ~np.isnan(self.value) | ~self.ok

    @property
    def pass_share(self) -> float:
        n = int(self.applies.sum())
        return float(self.ok[self.applies].sum() / n) if n else float("nan")

    def worst(self) -> int | None:
        """Index of the sample nearest its limit, or furthest beyond it."""
        app = np.flatnonzero(self.applies)
        if not len(app):
            return None
        v, lim = np.abs(self.value[app]), np.abs(self.limit[app])
        with np.errstate(divide="ignore", invalid="ignore"):
            margin = v / lim if self.sense == "max" else lim / v
        margin = np.where(np.isnan(margin), -np.inf, margin)
        return int(app[int(np.argmax(margin))])


@dataclasses.dataclass
class ChunkResult:
    """What a worker returns for one chunk of samples: compact arrays, never whole solutions."""

    start: int
    quantities: np.ndarray  # (samples, quantities)
    checks: dict[tuple[str, str], dict[str, Any]]
    mode: str


@dataclasses.dataclass
class StudyResult:
    """Every sample's quantities and checks, with how they were computed."""

    n: int
    labels: list[str]
    units: list[str]
    quantities: np.ndarray  # (samples, quantities)
    nominal: list[float]
    checks: list[CheckSeries]
    modes: dict[str, int]
    checks_covered: str

    def report_section(self, title: str = "Tolerance spread", percentiles=(5, 50, 95), notes=()) -> dict:
        """This result as a section of the HTML report (``dcnet.report.html.render(..., spread=result)``)."""
        from ..report.text import si

        stats = {lab: statistics(self.quantities[:, j], self.nominal[j], percentiles) for j, lab in enumerate(self.labels)}
        rows = []
        for lab, unit in zip(self.labels, self.units):
            st = stats[lab]
            if st.get("n"):
                rows.append([lab, si(st["nominal"], unit), si(st["mean"], unit), si(st["std"], unit)] + [si(x, unit) for x in st["percentiles"].values()] + [si(st["worst"], unit)])
        checks = sorted(self.checks, key=lambda c: c.pass_share)
        check_rows = []
        for c in checks[:30]:
            k = c.worst()
            check_rows.append([c.rule, c.subject, f"{c.pass_share * 100:.2f} %", si(c.value[k], c.unit) if k is not None else "-", si(c.limit[k], c.unit) if k is not None else "-"])
        plots = []
        for j, (lab, unit) in enumerate(zip(self.labels, self.units)):
            v = self.quantities[:, j]
            plots.append({"kind": "histogram", "title": lab, "x_label": f"{lab} ({unit})", "values": v[~np.isnan(v)].tolist(), "bins": 40,
                          "marks": [{"name": "nominal", "x": self.nominal[j]}]})
        return {
            "title": title,
            "summary": [("samples", f"{self.n:,}"), ("solved", "; ".join(f"{n:,} {m}" for m, n in self.modes.items())),
                        ("samples failing a check", f"{int(self.failed.sum()):,} ({self.failed.mean() * 100:.2f} %)")],
            "tables": [
                {"caption": "Quantities over the samples", "columns": ["quantity", "nominal", "mean", "std dev"] + [f"p{p:g}" for p in percentiles] + ["worst"],
                 "rows": rows, "numeric": list(range(1, 5 + len(percentiles)))},
                {"caption": "Share of samples passing each check (lowest first)", "columns": ["rule", "subject", "passing", "worst sample", "limit"],
                 "rows": check_rows, "numeric": [2, 3, 4]},
            ],
            "plots": plots,
            "notes": list(notes) + [f"Checks evaluated per sample: {self.checks_covered}."],
        }

    @property
    def failed(self) -> np.ndarray:
        """Per sample: did any check fail?"""
        out = np.zeros(self.n, dtype=bool)
        for c in self.checks:
            out |= ~c.ok
        return out


def _merge(chunks: list[ChunkResult], n: int, nq: int) -> tuple[np.ndarray, list[CheckSeries], dict[str, int]]:
    q = np.full((n, nq), np.nan)
    series: dict[tuple[str, str], CheckSeries] = {}
    modes: dict[str, int] = {}
    for ch in chunks:
        s = ch.quantities.shape[0]
        q[ch.start : ch.start + s] = ch.quantities
        modes[ch.mode] = modes.get(ch.mode, 0) + s
        for key, d in ch.checks.items():
            cs = series.get(key)
            if cs is None:
                cs = series[key] = CheckSeries(
                    key[0], key[1], d["unit"], d["sense"], d["source"], np.full(n, np.nan), np.full(n, np.nan), np.ones(n, dtype=bool)
                )
            cs.value[ch.start : ch.start + s] = d["value"]
            cs.limit[ch.start : ch.start + s] = d["limit"]
            cs.ok[ch.start : ch.start + s] = d["ok"]
    return q, list(series.values()), modes


# --------------------------------------------------------------- the study
def study_from_file(path: str, names: list[str], options=None, *, independent=(), quantities=(), fault: bool = False) -> Study:
    """Load a circuit file and set up a study of the named ``let`` values."""
    from ..language import load

    net = load(path, options)
    return Study(net, names, path=str(path), options=options, independent=independent, quantities=quantities, fault=fault)


class Study:
    """A circuit and the ``let`` values a study varies. Picklable: workers get a copy."""

    def __init__(
        self, net: Netlist, names: list[str], *, path: str | None = None, options=None, independent=(), quantities=(), fault: bool = False
    ):
        self.net = net
        self.path = path
        self.fault = fault  # also the prospective fault current through rated fuses, per sample
        self.options = options
        self.names = list(dict.fromkeys(names))
        self.independent = set(independent)
        self.quantity_specs = list(quantities)
        self.lets = [key[1] for key in net.exprs if key[0] == "let" and "." not in key[1]]
        for name in self.names + sorted(self.independent):
            if name not in self.lets:
                from ..language.parser import suggest

                near = suggest(name, self.lets)
                raise UnknownNameError(
                    f"'{name}' is not a let value of {path or 'the circuit'}",
                    hint=(f"did you mean '{near}'? " if near else "") + ("its let values: " + ", ".join(self.lets) if self.lets else "the file has no let values"),
                )
        for name in self.independent:
            if name not in self.names:
                raise InputError(f"--independent {name}: '{name}' is not one of the values the study varies")
        self.dims = {n: net.values[n][1] for n in self.lets}
        self.nominal = {n: net.values[n][0] for n in self.lets}
        self.tolerance = {n: net.values[n][2] for n in self.lets}
        varied = set(self.names)
        # which varied names each let depends on, through other lets
        self.roots: dict[str, set[str]] = {}
        self.let_trees = {}
        for n in self.lets:
            tree = net.exprs[("let", n)][1]
            self.let_trees[n] = tree
            r: set[str] = set()
            for used in names_in(tree):
                if used in varied:
                    r.add(used)
                r |= self.roots.get(used, set())
            self.roots[n] = r if n not in varied else {n}
        # element properties that depend on them
        self.affected: dict[str, dict[str, Any]] = {}
        self.el_roots: dict[str, set[str]] = {}
        for key, tree in net.exprs.items():
            if key[0] != "element":
                continue
            _, el, prop = key
            r = set()
            for used in names_in(tree):
                r |= self.roots.get(used, set())
            if r:
                self.affected.setdefault(el, {})[prop] = tree
                self.el_roots.setdefault(el, set()).update(r)
        order = {name: k for k, name in enumerate(e.name for e in net.elements)}
        self.users = {n: sorted((el for el, r in self.el_roots.items() if n in r), key=order.get) for n in self.independent}
        self.user_index = {n: {el: k for k, el in enumerate(els)} for n, els in self.users.items()}
        for n in self.independent:
            if not self.users[n]:
                raise InputError(f"--independent {n}: no element property uses '{n}'", hint="draw it shared (leave it out of --independent)")
        self.mode = "batch"
        self.reason = ""
        self.nominal_solution = None
        self._bt = None
        self._sparse = None
        self._sections = None

    # ------------------------------------------------------------ pickling
    def __getstate__(self):
        state = dict(self.__dict__)
        state["nominal_solution"] = None
        state["_bt"] = None
        state["_sparse"] = None
        state["_sections"] = None
        return state

    @property
    def bt(self):
        if self._bt is None:
            self._bt = branch_table(self.net)
        return self._bt

    # ----------------------------------------------------------- preparing
    def prepare(self, probe: dict[str, float]) -> Study:
        """Solve the nominal circuit (topology check, warnings, quantity names) and choose the mode.

        ``probe`` is one of the study's own samples (one value per varied name): the netlist the
        study builds for it must equal the one read from the file with those values.
        """
        sol = self.net.solve()
        self.nominal_solution = sol
        for spec in self.quantity_specs:
            sol.quantity(spec)  # raises QuantityError for unknown names
        if self.path is not None:
            from ..language import Options, load

            base = self.options or Options()
            opts = dataclasses.replace(base, let_values=dict(probe))
            try:
                reread = load(self.path, opts)
            except DcnetError as err:
                err.message = "with " + ", ".join(f"{n} = {v:g} (SI)" for n, v in probe.items()) + ": " + err.message
                raise
            one = {n: np.full((1, len(self.users[n])), float(probe[n])) if n in self.independent else np.array([float(probe[n])]) for n in self.names}
            built = self.rebuild(one, 0)
            differs = _difference(built, reread)
            if differs:
                if self.independent:
                    raise InputError(
                        f"--independent needs values the study can follow element by element, but {differs}",
                        hint="draw the value shared (without --independent), or move the element out of the block",
                    )
                self.mode, self.reason = "reparse", f"the file is read again for every sample: {differs}"
                return self
        bt = self.bt
        if bt.is_nonlinear:
            self.mode, self.reason = "rebuild", "nonlinear circuit: solved point by point (Newton iterations for each sample)"
        elif sol.islands or sol.unsupplied:
            self.mode, self.reason = "rebuild", "parts cut off by open switches or loads without supply: solved point by point"
        elif bt.shadow is not None and bt.shadow.any():
            self.mode, self.reason = "rebuild", "parallel ideal sources or links share their current: solved point by point"
        elif len(self.net.elements) and (bt.is_voltage.sum() + bt.n_nodes - 1) > DENSE_LIMIT:
            self.mode, self.reason = "batch", "sparse systems: one structure and column ordering, factored sample by sample"
        else:
            self.mode, self.reason = "batch", "dense systems stacked and solved together (numpy's stacked LAPACK solve)"
        return self

    # -------------------------------------------------------- sample values
    def _let(self, n: str, env) -> Quantity:
        try:
            q = evaluate_array(self.let_trees[n], env)
        except ExpressionProblem as p:
            raise p.error_class(f"let {n}: {p.message}", hint=p.hint) from None
        return Quantity(q.value, q.dim)

    def element_samples(self, values: dict[str, np.ndarray], S: int) -> dict[str, dict[str, np.ndarray]]:
        """Per-sample values of every affected element (after its kind derived what it derives)."""
        env: dict[str, Quantity] = {n: Quantity(self.nominal[n], self.dims[n]) for n in self.lets}
        for n in self.names:
            if n not in self.independent:
                env[n] = Quantity(np.asarray(values[n], dtype=float), self.dims[n])
        for n in self.lets:
            r = self.roots[n]
            if n in self.names or not r or (r & self.independent):
                continue
            env[n] = self._let(n, env)
        out: dict[str, dict[str, np.ndarray]] = {}
        for el_name, props in self.affected.items():
            env_e = env
            ind = self.el_roots[el_name] & self.independent
            if ind:
                env_e = dict(env)
                for n in ind:
                    env_e[n] = Quantity(np.asarray(values[n], dtype=float)[:, self.user_index[n][el_name]], self.dims[n])
                for n in self.lets:
                    if n not in self.names and self.roots[n] & ind:
                        env_e[n] = self._let(n, env_e)
            el = self.net.element(el_name)
            raw = {}
            for prop, tree in props.items():
                try:
                    q = evaluate_array(tree, env_e)
                except ExpressionProblem as p:
                    raise p.error_class(f"{prop} of {el_name}: {p.message}", span=el.span, hint=p.hint, element=el_name) from None
                raw[prop] = np.broadcast_to(np.asarray(q.value, dtype=float), (S,))
            try:
                out[el_name] = KINDS[el.kind].finish_batch(el.values, raw)
            except DcnetError as err:
                err.message = f"{el_name}: {err.message}"
                err.element = err.element or el_name
                err.with_span(el.span)
                raise
        return out

    def rebuild(self, values: dict[str, np.ndarray], k: int, changed=None) -> Netlist:
        """The netlist of sample ``k``: the nominal one with the affected elements' values replaced."""
        if changed is None:
            S = len(next(iter(values.values()))) if values else 1
            changed = self.element_samples(values, S)
        src = self.net
        net = Netlist(title=src.title, ground=src.ground, ground_rule=src.ground_rule, limits=src.limits, values=src.values, exprs=src.exprs, files=src.files, banks=src.banks, notes=src.notes)
        net.phases = src.phases
        net.practice = src.practice
        for el in src.elements:
            ch = changed.get(el.name)
            if ch:
                vals = dict(el.values)
                vals.update({key: float(arr[k]) for key, arr in ch.items()})
                el = Element(el.name, el.kind, el.nodes, vals, el.span)
            net.add(el)
        return net

    def reparsed(self, values: dict[str, np.ndarray], k: int) -> Netlist:
        from ..language import Options, load

        base = self.options or Options()
        opts = dataclasses.replace(base, let_values={n: float(values[n][k]) for n in self.names})
        return load(self.path, opts)

    # -------------------------------------------------------------- solving
    def run_chunk(self, values: dict[str, np.ndarray], start: int = 0) -> ChunkResult:
        """Solve one chunk of samples (``values``: one entry, or row, per sample)."""
        S = len(next(iter(values.values())))
        if self.mode == "batch":
            changed = self.element_samples(values, S)
            arrays = self._branch_arrays(changed, S)
            if arrays is not None:
                return self._batch(changed, arrays, S, start)
            return self._points(values, S, start, changed, "point by point (these values change which branches are ideal)")
        if self.mode == "rebuild":
            return self._points(values, S, start, self.element_samples(values, S), "point by point (nonlinear or shared ideal branches)")
        return self._points(values, S, start, None, "point by point, reading the file again")

    def _branch_arrays(self, changed, S):
        """Per-sample g, c, e and property columns; None when a sample changes the topology."""
        bt = self.bt
        kinds = {self.net.element(el).kind for el in changed}
        g, c, e = bt.g, bt.c, bt.e
        cols_by_kind = {}
        if kinds:
            g, c, e = (np.repeat(x[None, :], S, axis=0) for x in (bt.g, bt.c, bt.e))
        for kind_name in kinds:
            pos, cols = bt.groups[kind_name]
            kind = KINDS[kind_name]
            where = {p: j for j, p in enumerate(pos)}
            big = {col: np.repeat(arr[None, :], S, axis=0) for col, arr in cols.items()}
            for el_name, vals in changed.items():
                p = self.net.element_position(el_name)
                if p not in where:
                    continue
                for key, arr in vals.items():
                    if key in big:
                        big[key][:, where[p]] = arr
            flat = {col: arr.reshape(-1) for col, arr in big.items()}
            br = kind.branches(flat)
            k = len(pos)
            if not (np.asarray(br.is_voltage).reshape(S, k) == bt.is_voltage[pos]).all():
                return None
            if not (np.asarray(kind.nonlinear_mask(flat)).reshape(S, k) == bt.nonlinear[pos]).all():
                return None
            g[:, pos] = np.asarray(br.g, dtype=float).reshape(S, k)
            c[:, pos] = np.asarray(br.c, dtype=float).reshape(S, k)
            e[:, pos] = np.asarray(br.e, dtype=float).reshape(S, k)
            cols_by_kind[kind_name] = big
        return g, c, e, cols_by_kind

    def _batch(self, changed, arrays, S, start) -> ChunkResult:
        from ..checks import run_samples

        g, c, e, cols = arrays
        bt = self.bt
        sparse = None
        if (bt.solved_voltage.sum() + bt.n_nodes - 1) > DENSE_LIMIT:
            if self._sparse is None:
                self._sparse = SparsePattern(bt, g, c)
            sparse = self._sparse
        sol = solve_batch(bt, g, c, e, sparse=sparse)
        if self._sections is None:
            from .sections import sections

            self._sections = sections(self.net, bt)
        samples = Samples(self.net, bt, sol, cols, changed, S, sections=self._sections)
        samples.gce = (g, c, e)
        q = np.column_stack([samples.quantity(spec)[1] for spec in self.quantity_specs]) if self.quantity_specs else np.zeros((S, 0))
        checks = {}
        for cs in run_samples(self.net, samples, fault=self.fault):
            checks[(cs["rule"], cs["subject"])] = cs
        return ChunkResult(start, q, checks, "solved together" if sparse is None else "solved together (sparse, one ordering)")

    def _points(self, values, S, start, changed, why) -> ChunkResult:
        from .solution import QuantityError

        q = np.full((S, len(self.quantity_specs)), np.nan)
        checks: dict[tuple[str, str], dict[str, Any]] = {}
        for k in range(S):
            net = self.rebuild(values, k, changed) if changed is not None else self.reparsed(values, k)
            try:
                sol = net.solve()
            except DcnetError as err:
                err.message = f"sample {start + k + 1}: {err.message}"
                raise
            for j, spec in enumerate(self.quantity_specs):
                try:
                    q[k, j] = sol.quantity(spec)[1]
                except QuantityError:
                    pass
            for vd in sol.verdicts:
                if vd.sense == "info":
                    continue
                key = (vd.rule, vd.subject)
                d = checks.get(key)
                if d is None:
                    d = checks[key] = {"rule": vd.rule, "subject": vd.subject, "unit": vd.unit, "sense": vd.sense, "source": vd.source,
                                       "value": np.full(S, np.nan), "limit": np.full(S, np.nan), "ok": np.ones(S, dtype=bool)}
                d["value"][k] = np.nan if vd.value is None else vd.value
                d["limit"][k] = np.nan if vd.limit is None else vd.limit
                d["ok"][k] = vd.ok
        return ChunkResult(start, q, checks, why)

    # -------------------------------------------------------------- running
    def chunk_size(self) -> int:
        if self.mode != "batch":
            return 8
        m = int(self.bt.solved_voltage.sum() + self.bt.n_nodes - 1)
        if m > DENSE_LIMIT:
            return 4
        return int(min(8192, max(64, 4_000_000 // max(m * m, 1))))

    def run(self, values: dict[str, np.ndarray], runner=None, progress=None) -> StudyResult:
        """Solve every sample (``values``: per name, one entry or row per sample)."""
        n = len(next(iter(values.values()))) if values else 0
        size = self.chunk_size()
        tasks = [(start, {name: arr[start : start + size] for name, arr in values.items()}) for start in range(0, n, size)]
        if runner is None or len(tasks) <= 1:
            chunks = []
            for start, vals in tasks:
                chunks.append(self.run_chunk(vals, start))
                if progress:
                    progress.advance(len(next(iter(vals.values()))))
        else:
            chunks = runner.run_study(self, tasks, progress)
        q, checks, modes = _merge(chunks, n, len(self.quantity_specs))
        nominal = [self.nominal_solution.quantity(s)[1] for s in self.quantity_specs] if self.nominal_solution else [math.nan] * len(self.quantity_specs)
        labels, units = [], []
        for spec in self.quantity_specs:
            label, _, unit = self.nominal_solution.quantity(spec)
            labels.append(label)
            units.append(unit)
        covered = (CHECKS_BATCHED_FAULT if self.fault else CHECKS_BATCHED) if self.mode == "batch" else "every check of dcnet check (the circuit was solved point by point)"
        return StudyResult(n, labels, units, q, nominal, checks, modes, covered)


CHECKS_BATCHED = (
    "every rule of dcnet check, written once on arrays: wiring, string imbalance (banks and limit imbalance) and "
    "circulating current at rest, cell current and voltage window, cable ampacity and protection, fuse loading, "
    "voltage drop (loads and limit drop), limit current and limit voltage; "
    "not per sample: prospective fault current (add --fault)"
)
CHECKS_BATCHED_FAULT = CHECKS_BATCHED.replace("; not per sample: prospective fault current (add --fault)", ", and the prospective fault current")


# ------------------------------------------------------- per-sample results
class Samples(SampleLookups):
    """Results of many samples of one circuit, with the lookups of a Solution (arrays, one entry
    per sample): the view every check rule reads (see dcnet.checks.view for the list)."""

    single = False
    nonlinear = False
    islands = None

    def __init__(self, net: Netlist, bt, sol, cols, changed, S: int, sections=None):
        self.netlist = net
        self.branches = bt
        self.potentials = sol.potentials
        self.v = sol.v
        self.i = sol.i
        self.balance = sol.balance
        self.cols = cols  # kind -> column -> (S, k) for the kinds a study changes
        self.changed = changed  # element -> key -> (S,)
        self.n = S
        self.solution = sol  # the batch solution (its matrices take further right-hand sides)
        self.bounds = getattr(sol, "bounds", None)
        self.gce = None  # the samples' (g, c, e) branch arrays
        self.notes: list[str] = []
        self.unsupplied: list[str] = []
        self.is_voltage = bt.is_voltage
        self._sections = sections

    @property
    def g(self):
        return np.broadcast_to(self.gce[0], (self.n, len(self.branches.g)))

    @property
    def c(self):
        return np.broadcast_to(self.gce[1], (self.n, len(self.branches.g)))

    @property
    def e(self):
        return np.broadcast_to(self.gce[2], (self.n, len(self.branches.g)))

    @property
    def rows(self):
        return self.solution.rows

    def solve_more(self, B: np.ndarray) -> np.ndarray:
        return self.solution.solve_more(B)

    @property
    def sections(self):
        """Feeds and section voltages, found on the nominal circuit's structure (dcnet.analysis.sections)."""
        if self._sections is None:
            from .sections import sections

            self._sections = sections(self.netlist, self.branches)
        return self._sections

    def value(self, name: str, key: str, default=None):
        """An element's value per sample (an array when the study changes it, else the scalar)."""
        ch = self.changed.get(name)
        if ch is not None and key in ch:
            return ch[key]
        return self.netlist.element(name).values.get(key, default)

    @property
    def max_emf(self) -> np.ndarray:
        """The highest source EMF of each sample (as ``BranchTable.max_emf``)."""
        out = np.zeros(self.n)
        for kind_name, (pos, cols) in self.branches.groups.items():
            if "emf" not in cols or not len(pos):
                continue
            if kind_name in self.cols:
                out = np.maximum(out, np.nanmax(np.abs(self.cols[kind_name]["emf"]), axis=1))
            else:
                out = np.maximum(out, float(np.nanmax(np.abs(cols["emf"]))))
        return out

    @property
    def system_voltage(self) -> np.ndarray:
        span = self.potentials.max(axis=1) - self.potentials.min(axis=1) if self.potentials.shape[1] else np.zeros(self.n)
        return np.maximum(self.max_emf, span)

    def extras(self, name: str) -> dict[str, np.ndarray]:
        k = self._pos(name)
        el = self.netlist.elements[k]
        pos, cols = self.branches.groups[el.kind]
        j = int(np.searchsorted(pos, k))
        if el.kind in self.cols:
            own = {col: arr[:, j] for col, arr in self.cols[el.kind].items()}
        else:
            own = {col: np.full(self.n, arr[j]) for col, arr in cols.items()}
        sv = self.sections.group_voltage(self.potentials, int(self.branches.a[k]))
        ctx = {"max_emf": self.max_emf, "system_voltage": self.system_voltage, "section_voltage": sv}
        return {key: np.broadcast_to(np.asarray(val, dtype=float), (self.n,)) for key, val in KINDS[el.kind].extras(own, self.v[:, k], self.i[:, k], ctx).items()}

    def quantity(self, spec: str) -> tuple[str, np.ndarray, str]:
        """As :meth:`Solution.quantity`, with one value per sample."""
        spec = spec.strip()
        net = self.netlist
        if "," in spec:
            n1, n2 = (s.strip() for s in spec.split(",", 1))
            return (f"V({n1},{n2})", self.voltage(n1, n2), "V")
        name, _, attr = spec.rpartition(".")
        if not name:
            name, attr = spec, ""
        if attr in ("current", "voltage", "power") and net.has_element(name):
            unit = {"current": "A", "voltage": "V", "power": "W"}[attr]
            return (spec, getattr(self, attr)(name), unit)
        if attr == "potential":
            return (spec, self.potential(name), "V")
        if net.has_element(name) and attr:
            ex = self.extras(name)
            unit = attr.rsplit("_", 1)[-1] if "_" in attr else ""
            return (spec, ex[attr], {"pct": "%", "ohm": "Ohm"}.get(unit, unit))
        if spec not in net.node_index and name in net.banks:
            from ..checks.imbalance import BANK_QUANTITIES, bank_quantity

            return (spec, bank_quantity(net, self, name, attr), BANK_QUANTITIES[attr])
        return (f"{spec}.potential", self.potential(spec), "V")

    def circulating(self, bank: dict) -> tuple[np.ndarray, np.ndarray]:
        """Per sample: the largest string current with the bank alone at rest, and its round-off
        bound (the bank alone solved for every sample together)."""
        from ..netlist import bank_alone
        from .batch import SparsePattern, solve_batch
        from .branches import branch_table

        sub = bank_alone(self.netlist, bank)
        sbt = branch_table(sub)
        where = [self.netlist.element_position(el.name) for el in sub.elements]
        g, c, e = (np.broadcast_to(a, (self.n, len(self.branches.g)))[:, where] for a in self.gce)
        sparse = SparsePattern(sbt, g, c) if sbt.solved_voltage.sum() + sbt.n_nodes - 1 > DENSE_LIMIT else None
        sol = solve_batch(sbt, g, c, e, sparse=sparse)
        cur, bnd = string_currents(bank, lambda n: sol.i[:, sub.element_position(n)], lambda n: sol.bounds[:, sub.element_position(n)])
        k = np.abs(cur).argmax(axis=1)
        rows = np.arange(cur.shape[0])
        return np.abs(cur[rows, k]), bnd[rows, k]


# ------------------------------------------------------------- comparison
def _difference(a: Netlist, b: Netlist) -> str:
    """Where two netlists differ, in words ('' when they are the same)."""
    if [e.name for e in a.elements] != [e.name for e in b.elements]:
        return "the varied values change which elements the circuit has (a bank's size, a block)"
    for ea, eb in zip(a.elements, b.elements):
        if ea.kind != eb.kind or ea.nodes != eb.nodes:
            return f"element {ea.name} changes its kind or nodes"
        if set(ea.values) != set(eb.values):
            return f"element {ea.name} changes which properties it has"
        for key, va in ea.values.items():
            vb = eb.values[key]
            if isinstance(va, float) or isinstance(vb, float):
                if not (va == vb or (math.isnan(va) and math.isnan(vb)) or math.isclose(va, vb, rel_tol=1e-12, abs_tol=0.0)):
                    return f"{key} of {ea.name} depends on them where the netlist does not record it (a block, a bank's ageing, a part set by a block...)"
            elif va != vb:
                return f"{key} of {ea.name} changes"
    if len(a.limits) != len(b.limits) or any(la.values != lb.values for la, lb in zip(a.limits, b.limits)):
        return "a limit statement uses them"
    if a.ground != b.ground:
        return "the ground changes"
    return ""


def check_finite_samples(values: dict[str, np.ndarray]) -> None:
    for name, arr in values.items():
        if not np.all(np.isfinite(arr)):
            raise NumericalError(f"the values of {name} are not all finite numbers")


# ------------------------------------------------------------ sweep grids
def sweep_values(study: Study, axes: list[tuple[str, np.ndarray]]) -> dict[str, np.ndarray]:
    """The grid of several varied names: every combination, the first name varying slowest."""
    grids = np.meshgrid(*[vals for _, vals in axes], indexing="ij")
    return {name: np.ascontiguousarray(g.ravel()) for (name, _), g in zip(axes, grids)}


def axis_values(start: float, stop: float, count: int, log: bool) -> np.ndarray:
    """``count`` values from ``start`` to ``stop``, evenly or geometrically spaced (both ends exact)."""
    if count == 1:
        return np.array([float(start)])
    vals = np.geomspace(start, stop, count) if log else np.linspace(start, stop, count)
    vals[0], vals[-1] = start, stop
    return vals


# ------------------------------------------------------------ spread draws
#: how a tolerance becomes a distribution
DISTRIBUTIONS = {
    "normal": "the tolerance is three standard deviations; draws beyond the tolerance are drawn again",
    "uniform": "every value within the tolerance equally likely",
}


def spread_values(study: Study, n: int, seed: int, dist: str = "normal") -> dict[str, np.ndarray]:
    """Random values of every varied name for ``n`` samples, reproducible from ``seed``.

    Names are drawn in the order the file defines them; an independent name gets one column
    per element that uses it (in the netlist's order). The same seed gives the same values
    whatever runs the samples (in-process, worker processes or a cluster).
    """
    rng = np.random.default_rng(seed)
    out = {}
    for name in study.lets:
        if name not in study.names:
            continue
        tol = study.tolerance[name]
        if tol is None:
            raise InputError(f"'{name}' has no tolerance", hint=f"write it as: let {name} = VALUE ± 5%")
        shape = (n, len(study.users[name])) if name in study.independent else (n,)
        if dist == "uniform":
            u = rng.uniform(-1.0, 1.0, size=shape)
        else:
            u = rng.standard_normal(size=shape)
            while True:
                beyond = np.abs(u) > 3.0
                if not beyond.any():
                    break
                u[beyond] = rng.standard_normal(size=int(beyond.sum()))
            u = u / 3.0
        out[name] = study.nominal[name] + tol * u
    return out


def statistics(values: np.ndarray, nominal: float, percentiles=(1, 5, 50, 95, 99)) -> dict[str, Any]:
    """Mean, standard deviation (n - 1), percentiles, extremes and the worst case (the sample
    furthest from the nominal value) of one quantity's samples."""
    v = values[~np.isnan(values)]
    if not len(v):
        return {"n": 0}
    far = int(np.argmax(np.abs(v - nominal))) if np.isfinite(nominal) else int(np.argmax(np.abs(v)))
    return {
        "n": int(len(v)),
        "nominal": float(nominal),
        "mean": float(v.mean()),
        "std": float(v.std(ddof=1)) if len(v) > 1 else 0.0,
        "percentiles": {float(p): float(x) for p, x in zip(percentiles, np.percentile(v, percentiles))},
        "min": float(v.min()),
        "max": float(v.max()),
        "worst": float(v[far]),
    }


# -------------------------------------------------------------- the API
def sweep(path: str, vary: dict[str, Any], show=(), options=None, runner=None, fault: bool = False):
    """Sweep a circuit file: ``vary`` maps let names to their values (SI, one array each; several
    names make a grid, the first varying slowest). ``fault``: also check the prospective fault
    current through fuses with an interrupt rating at every point. Returns (study, values, StudyResult).

    >>> study, values, result = sweep("circuits/cabin.dcn", {"run": axis_values(1.0, 10.0, 10, False)}, ["A.current"])  # doctest: +SKIP
    """
    axes = [(name, np.asarray(v, dtype=float)) for name, v in vary.items()]
    study = study_from_file(path, [n for n, _ in axes], options, quantities=show, fault=fault)
    values = sweep_values(study, axes)
    study.prepare({n: float(v[int(np.abs(v - study.nominal[n]).argmax())]) for n, v in axes})
    return study, values, study.run(values, runner)


def spread(
    path: str, samples: int, *, seed: int = 1, dist: str = "normal", names=None, independent=(), show=(), options=None, runner=None, fault: bool = False
):
    """Monte Carlo over the tolerances of a circuit file (every toleranced let, or ``names``).
    ``fault``: also check the prospective fault current through fuses with an interrupt rating
    in every sample (a second factorisation per sample). Returns (study, values, StudyResult)."""
    from ..language import load

    net = load(path, options)
    if names is None:
        names = [k[1] for k in net.exprs if k[0] == "let" and "." not in k[1] and net.values[k[1]][2] is not None]
    study = Study(net, list(names), path=str(path), options=options, independent=independent, quantities=show, fault=fault)
    values = spread_values(study, samples, seed, dist)
    study.prepare({n: float(v.flat[0]) for n, v in values.items()})
    return study, values, study.run(values, runner)
