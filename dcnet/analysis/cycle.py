"""Charge and discharge cycles: time stepping with cell state and an energy ledger.

A schedule is a list of :class:`Phase` records (``phase`` statements of the circuit file,
or built from the API). In each phase only the sources, supplies and loads named in ``on``
are connected; cells and the wiring between them always are. Time advances in quasi-static
steps: at each step the cells' EMFs (and, with ``r_empty``, their internal resistances)
follow their states of charge, the circuit is solved, and the states of charge move by the
charge that flowed. While the resistances stay put, one factorisation of the circuit matrix
serves every step (only the right-hand side changes); nonlinear circuits are solved by the
Newton solver at each step.

State of charge: charging adds ``eta * I * dt / C``; discharging removes ``I * dt / C``, or
with a Peukert exponent ``k`` (lead-acid) ``I * dt / C * (I / I_H)^(k - 1)`` where
``I_H = C / H`` is the current that empties the battery in its rated time ``H`` (``rate``,
default 20 h): at constant current a full battery then lasts ``t = H * (C / (I H))^k``.

A phase also ends when a cell's state of charge reaches 0 % while it discharges. With the
rate held over a step (Euler) the state of charge is linear in the step, so the moment the
first cell empties has a closed form, ``soc / -rate``: the step is cut there and the phase
ends at that moment, whatever the step size.

The energy ledger integrates every element's absorbed power with the same rule, so it
closes to round-off by Tellegen's theorem. A cell's share, EMF times current plus the heat
in its internal resistance, is split step by step into: energy stored (net), which is the
EMF times the charge the state of charge actually gained or lost (``E * C * dsoc``, after
clipping at 0 % and 100 %); charge not stored while charging (coulombic loss, and
overcharge: all the charge once the cell is full, or the part of a step beyond full); and,
with a Peukert exponent, the capacity lost to the discharge rate: the charge the state of
charge lost beyond the charge that left the terminals, times the EMF (negative below the
rated current ``I_H``, where Peukert's law gives back more than the rated capacity).
"""

from __future__ import annotations

import dataclasses
import sys
import time as _time
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputError, Span, UnknownNameError
from ..units import CURRENT, DIMENSIONLESS, TIME, VOLTAGE

__all__ = ["Phase", "Condition", "CycleResult", "run", "PHASE_PROPS"]

PHASE_PROPS: dict[str, Any] = {
    "on": "words",
    "for": TIME,
    "max": TIME,
    "step": TIME,
    "soc_above": DIMENSIONLESS,
    "soc_below": DIMENSIONLESS,
    "of": "words",
    "volts_above": VOLTAGE,
    "volts_below": VOLTAGE,
    "amps_above": CURRENT,
    "amps_below": CURRENT,
    "at": "word",
}

EMPTY = "a cell reached 0 % state of charge"
RATE_LOSS = "capacity lost to the discharge rate (Peukert)"
CLOSED_SOC = 0.01  # a cycle is closed when no cell's state of charge moved by more than this
DEFAULT_MAX = 100 * 3600.0
DEFAULT_STEP = 60.0
MAX_SOC_STEP = 0.002  # largest change of any cell's state of charge in one step
EVENT_TOL = 1e-3  # seconds


@dataclass
class Condition:
    """Stop when ``quantity`` (soc, volts, amps) goes above/below ``threshold``."""

    quantity: str
    sense: str
    threshold: float
    at: str | None = None
    of: tuple[str, ...] = ()

    def describe(self) -> str:
        unit = {"soc": "%", "volts": "V", "amps": "A"}[self.quantity]
        value = self.threshold * 100 if self.quantity == "soc" else self.threshold
        where = f" at {self.at}" if self.at else (f" of {','.join(self.of)}" if self.of else "")
        return f"{self.quantity}{where} {self.sense} {value:g} {unit}"


@dataclass
class Phase:
    """One phase of a schedule: what is connected, and when it ends."""

    label: str
    on: tuple[str, ...] = ()
    duration: float | None = None
    max_time: float | None = None
    step: float | None = None
    conditions: list[Condition] = field(default_factory=list)
    span: Span | None = None

    @classmethod
    def from_values(cls, label: str, values: dict[str, Any], span: Span | None = None) -> Phase:
        conditions = []
        at, of = values.get("at"), tuple(values.get("of", ()))
        for key in ("soc_above", "soc_below", "volts_above", "volts_below", "amps_above", "amps_below"):
            if key in values:
                quantity, sense = key.split("_")
                if quantity != "soc" and not at:
                    raise InputError(f"{key}= needs at= (the node, two nodes 'a,b', or the element it watches)", span=span)
                conditions.append(Condition(quantity, sense, values[key], at if quantity != "soc" else None, of if quantity == "soc" else ()))
        if "for" in values and conditions:
            raise InputError("a phase ends after for= or on a condition, not both", span=span, hint="use max= as the time limit of a condition")
        if "for" not in values and not conditions and "max" not in values:
            raise InputError(
                f"phase {label} has no end: give for=DURATION, or a condition (soc_above=, volts_below=, amps_below= ...) with max=",
                span=span,
            )
        return cls(label, tuple(values.get("on", ())), values.get("for"), values.get("max"), values.get("step"), conditions, span)

    def check_names(self, net) -> None:
        from ..kinds import KINDS
        from ..language.parser import suggest

        for name in self.on:
            if not net.has_element(name):
                raise UnknownNameError(f"phase {self.label}: no element named '{name}'", span=self.span, hint=_near(name, net._by_name, suggest))
            kind = KINDS[net.element(name).kind]
            if not (kind.is_source or net.element(name).kind == "load"):
                raise InputError(f"phase {self.label}: {name} is a {net.element(name).kind}; on= lists sources, supplies and loads", span=self.span)
        for c in self.conditions:
            for name in c.of:
                if not net.has_element(name) and name not in net.banks:
                    raise UnknownNameError(f"phase {self.label}: no cell or bank named '{name}'", span=self.span, hint=_near(name, net._by_name, suggest))
            if c.at:
                for part in c.at.split(","):
                    if part not in net.node_index and not net.has_element(part):
                        raise UnknownNameError(
                            f"phase {self.label}: no node or element named '{part}'",
                            span=self.span,
                            hint=_near(part, list(net.node_index) + list(net._by_name), suggest),
                        )


def _near(name, known, suggest) -> str | None:
    near = suggest(name, known)
    return f"did you mean '{near}'?" if near else None


# --------------------------------------------------------------------- result
@dataclass
class CycleResult:
    """Time series, per-phase summary and the energy ledger of a cycle."""

    netlist: Any
    times: np.ndarray
    phase_of_sample: np.ndarray
    cell_names: list[str]
    soc: np.ndarray  # [samples, cells]
    cell_current: np.ndarray  # [samples, cells], passive sign
    node_names: list[str]
    potentials: np.ndarray  # [samples, nodes]
    phases: list[dict]
    ledger: dict[str, Any]
    throughput: dict[str, dict[str, float]]
    circulating: dict[str, Any]
    solves: int
    factorisations: int
    wall_s: float
    notes: list[str]

    def report_section(self) -> dict:
        """The cycle's section of the HTML report (see dcnet.report.html)."""
        led = self.ledger
        rt = led["round_trip"]
        summary = [
            ("phases", ", ".join(f"{p['phase']} ({p['duration_s'] / 3600:.2f} h, {p['ended_by']})" for p in self.phases)),
            ("ledger closure", f"{abs(led['closure_relative']) * 100:.2g} % of the energy moved"),
        ]
        if rt["cells_round_trip"] is not None and rt["closed_cycle"]:
            summary.append(("round trip at the cells' terminals", f"{rt['cells_round_trip'] * 100:.1f} %"))
        if self.circulating["bank"]:
            c = self.circulating
            summary.append(("largest circulating current", f"{c['max_A']:.4g} A in bank {c['bank']} at {c['time_s'] / 3600:.2f} h ({c['phase']})"))
        rows = [[k, f"{v / 3600:.4g}", f"{v:.4g}"] for k, v in led["categories_J"].items()]
        hours = (self.times / 3600.0).tolist()
        step = max(1, len(hours) // 400)  # keep the inline plots small
        soc_series = [{"name": n, "x": hours[::step], "y": (self.soc[::step, k] * 100).tolist()} for k, n in enumerate(self.cell_names[:24])]
        cur_series = [{"name": n, "x": hours[::step], "y": (-self.cell_current[::step, k]).tolist()} for k, n in enumerate(self.cell_names[:24])]
        return {
            "title": "Charge and discharge cycle",
            "summary": summary,
            "tables": [{"caption": "Energy ledger", "columns": ["energy", "Wh", "J"], "rows": rows, "numeric": [1, 2]}],
            "plots": [
                {"title": "State of charge", "x_label": "time (h)", "y_label": "%", "series": soc_series},
                {"title": "Cell currents (discharge positive)", "x_label": "time (h)", "y_label": "A", "series": cur_series},
            ],
            "notes": list(self.notes),
        }

    def to_dict(self) -> dict:
        return {
            "title": self.netlist.title,
            "phases": self.phases,
            "ledger": self.ledger,
            "throughput_Ah": self.throughput,
            "circulating": self.circulating,
            "final_soc": {n: float(s) for n, s in zip(self.cell_names, self.soc[-1])},
            "solves": self.solves,
            "factorisations": self.factorisations,
            "notes": self.notes,
        }


# --------------------------------------------------------------------- engine
class _Cells:
    """State of every cell: charge, EMF curve, resistance law, efficiency, Peukert."""

    def __init__(self, net, bt):
        from ..data import ocv_curve

        pos, cols = bt.groups.get("cell", (np.zeros(0, dtype=np.int64), {}))
        self.pos = pos
        els = [net.elements[p] for p in pos]
        self.names = [e.name for e in els]
        missing = [e.name for e in els if "capacity" not in e.values]
        if missing:
            raise InputError(
                f"a cycle needs capacity= on every cell; missing on {', '.join(missing[:8])}" + (" ..." if len(missing) > 8 else ""),
                span=els[0].span if els else None,
                hint="e.g. part agm cell emf=12.8V r=5mOhm capacity=100Ah chemistry=agm",
            )
        n = len(els)
        self.capacity = np.array([e.values["capacity"] for e in els])
        self.soc0 = np.array([e.values.get("soc", 1.0) for e in els])
        self.emf0 = np.array([e.values["emf"] for e in els])
        self.r_full = np.array([e.values["r"] for e in els])
        self.r_empty = np.array([e.values.get("r_empty", e.values["r"]) for e in els])
        self.eta = np.array([e.values.get("eta", 1.0) for e in els])
        self.k = np.array([e.values.get("peukert", 1.0) for e in els])
        self.rate = np.array([e.values.get("rate", 20 * 3600.0) for e in els])
        self.varies_r = bool(np.any(self.r_empty != self.r_full))
        self.curves = []
        self.curve_groups: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = {}
        self.notes = []
        defaulted = [e.name for e in els if "soc" not in e.values]
        if defaulted:
            self.notes.append(f"{len(defaulted)} cell(s) start full (no soc= given): {', '.join(defaulted[:5])}{' ...' if len(defaulted) > 5 else ''}")
        for k, e in enumerate(els):
            chem = e.values.get("chemistry")
            mode = e.values.get("curve") or ("chemistry" if chem and ocv_curve(chem) is not None else "flat")
            if mode == "chemistry":
                curve = ocv_curve(chem) if chem else None
                if curve is None:
                    raise InputError(f"cell {e.name}: no resting-voltage curve for chemistry '{chem}'", span=e.span, hint="use curve=flat, or a chemistry with a curve: lead-acid, agm, gel, lifepo4, nmc")
                xs, ys, _ = curve
                scale = self.emf0[k] / np.interp(self.soc0[k], xs, ys)
                self.curves.append((xs, ys * scale))
                key = chem.strip().lower()
                members, scales, _, _ = self.curve_groups.get(key, ([], [], xs, ys))
                self.curve_groups[key] = (members + [k], scales + [scale], xs, ys)
            else:
                self.curves.append(None)
        # per chemistry: cell positions, their scale factors, and the shared curve (vectorised EMF)
        self.curve_groups = {key: (np.array(m), np.array(sc), xs, ys) for key, (m, sc, xs, ys) in self.curve_groups.items()}
        self.flat = all(c is None for c in self.curves)
        self.n = n

    def emf(self, soc: np.ndarray) -> np.ndarray:
        if self.flat:
            return self.emf0
        out = self.emf0.copy()
        for members, scales, xs, ys in self.curve_groups.values():
            out[members] = scales * np.interp(soc[members], xs, ys)
        return out

    def r(self, soc: np.ndarray) -> np.ndarray:
        if not self.varies_r:
            return self.r_full
        return self.r_empty + (self.r_full - self.r_empty) * np.clip(soc, 0.0, 1.0)

    def accepted(self, i: np.ndarray, soc: np.ndarray) -> np.ndarray:
        """Share of a charging current that is stored: eta, and nothing once the cell is full
        (overcharge turns to heat and gas)."""
        return np.where(soc >= 1.0, 0.0, self.eta)

    def peukert_factor(self, i: np.ndarray) -> np.ndarray:
        """State of charge removed per unit of charge drawn: ``(|I| / I_H)^(k - 1)`` while a cell
        with a Peukert exponent discharges, exactly 1 otherwise."""
        out = np.ones_like(i, dtype=float)
        peuk = (i < 0) & (self.k != 1.0)
        if peuk.any():
            i_h = self.capacity / self.rate
            out = np.where(peuk, (np.abs(i) / i_h) ** (self.k - 1.0), out)
        return out

    def dsoc_dt(self, i: np.ndarray, soc: np.ndarray | None = None) -> np.ndarray:
        """Rate of change of state of charge for passive-sign currents i (charging positive)."""
        eta = self.eta if soc is None else self.accepted(i, soc)
        return np.where(i > 0, eta * i / self.capacity, i / self.capacity * self.peukert_factor(i))


class _PhaseSolver:
    """Solves the circuit of one phase for given cell EMFs and resistances, reusing factors."""

    def __init__(self, net, bt, cells: _Cells, phase: Phase, force_refactor: bool):
        from ..kinds import KINDS

        self.net, self.cells, self.force = net, cells, force_refactor
        on = set(phase.on)
        off = np.zeros(len(bt.names), dtype=bool)
        for p, el in enumerate(net.elements):
            if (KINDS[el.kind].is_source and el.kind != "cell") or el.kind == "load":
                off[p] = el.name not in on
        is_v = bt.is_voltage & ~off
        g = np.where(off, 0.0, bt.g)
        c = np.where(off, 0.0, bt.c)
        e = np.where(off, 0.0, bt.e)
        nonlinear = bt.nonlinear & ~off if bt.nonlinear is not None else None
        self.bt = dataclasses.replace(bt, is_voltage=is_v, g=g, c=c, e=e, nonlinear=nonlinear)
        self.nonlinear = bool(nonlinear is not None and nonlinear.any())
        self.pin = self._floating_nodes()
        self.factor = None
        self.system = None
        self.r_used = None
        self.solves = 0
        self.factorisations = 0

    def _floating_nodes(self) -> np.ndarray:
        from ..topology import islands

        labels = islands(self.bt)
        gl = labels[self.bt.ground]
        pins = []
        for lab in np.unique(labels):
            if lab != gl:
                pins.append(int(np.flatnonzero(labels == lab)[0]))
        return np.array(pins, dtype=np.int64)

    def solve(self, emf: np.ndarray, r: np.ndarray):
        from .mna import assemble, solve_system
        from .solve import currents

        bt = self.bt
        pos = self.cells.pos
        g = bt.g.copy()
        c = bt.c.copy()
        g[pos] = 1.0 / r
        c[pos] = -emf / r
        model = dataclasses.replace(bt, g=g, c=c)
        self.solves += 1
        if self.nonlinear:
            from .newton import newton_solve

            res = newton_solve(model)
            self.factorisations += len(res.history) + 1
            return res.potentials, res.v, res.i, res.bt.g
        refactor = self.factor is None or self.force or (self.r_used is not None and not np.array_equal(r, self.r_used))
        if refactor:
            self.system = assemble(model)
            self._pin(self.system)
            self.system_x, self.factor = solve_system(self.system)
            self.factorisations += 1
            self.r_used = r.copy()
            x = self.system_x
        else:
            z = _rhs(model, self.system)
            x = self.factor.solve(z)
        return (*currents(model, self.system, x, g, c), g)

    def _pin(self, system) -> None:
        if len(self.pin) == 0:
            return
        rows = system.row_of_node[self.pin]
        rows = rows[rows >= 0]
        if system.dense:
            system.A[rows, rows] += 1.0
        else:
            from scipy.sparse import csc_matrix

            d = np.zeros(system.size)
            d[rows] = 1.0
            from scipy.sparse import diags

            system.A = csc_matrix(system.A + diags(d))


def _rhs(model, system) -> np.ndarray:
    """Right-hand side of the MNA system for new source values (same structure)."""
    row = system.row_of_node
    N = system.n_node_rows
    z = np.zeros(system.size)
    cur = np.where(model.is_voltage | (model.a == model.b), 0.0, model.c)  # self-loops as in mna.triplets
    nz = np.flatnonzero(cur)
    ra, rb = row[model.a[nz]], row[model.b[nz]]
    sc = cur[nz]
    np.subtract.at(z, ra[ra >= 0], sc[ra >= 0])
    np.add.at(z, rb[rb >= 0], sc[rb >= 0])
    z[N:] = model.e[system.vbranch]
    return z


def _probe(cond: Condition, net, cells: _Cells, soc, pot, v, i) -> float:
    if cond.quantity == "soc":
        if cond.of:
            idx = []
            for name in cond.of:
                if name in net.banks:
                    idx += [cells.names.index(c) for s in net.banks[name]["strings"] for c in s]
                else:
                    idx.append(cells.names.index(name))
            return float(np.mean(soc[idx]))
        return float(np.mean(soc))
    at = cond.at
    if "," in at:
        a, b = at.split(",", 1)
        return float(pot[net.node_index[a]] - pot[net.node_index[b]])
    if at in net.node_index and not net.has_element(at):
        return float(pot[net.node_index[at]])
    k = net.element_position(at)
    return float(abs(i[k])) if cond.quantity == "amps" else float(v[k])


def _crossed(cond: Condition, value: float) -> bool:
    return value >= cond.threshold if cond.sense == "above" else value <= cond.threshold


#: most time steps of one cycle (dcnet cycle --max-steps)
MAX_STEPS = 500_000


def planned_steps(phases, step: float | None, max_steps: int = MAX_STEPS) -> int:
    """The steps a schedule may take at its longest step (a phase's for=, or its max=, or the
    default limit, over its step), refused up front when above ``max_steps``."""
    from ..errors import LimitError

    total = 0
    for ph in phases:
        limit = ph.duration if ph.duration is not None else (ph.max_time if ph.max_time is not None else DEFAULT_MAX)
        hmax = ph.step or step or DEFAULT_STEP
        n = int(np.ceil(limit / hmax))
        total += n
        if total > max_steps:
            how = "for=" if ph.duration is not None else ("max=" if ph.max_time is not None else f"the default limit of {DEFAULT_MAX / 3600:g} h (no max=)")
            raise LimitError(
                f"phase {ph.label}: {limit:g} s ({how}) in steps of {hmax:g} s is {n:,} steps; the schedule up to it {total:,}, "
                f"above the limit of {max_steps:,} steps",
                span=ph.span,
                hint="raise it with --max-steps, or take a longer step (--step, or step= on the phase), or a shorter max=",
            )
    return total


def run(
    net, phases: list[Phase] | None = None, *, step: float | None = None, force_refactor: bool = False, progress: bool = False, max_steps: int = MAX_STEPS
) -> CycleResult:
    """Run a schedule (the file's phases by default) and return the series and ledger."""
    from .branches import branch_table

    phases = list(phases if phases is not None else net.phases)
    if not phases:
        raise InputError(
            "the circuit has no phases to run",
            span=Span(net.files[0] if net.files else "<text>"),
            hint="add phase statements, e.g.: phase charge on=CHARGER soc_above=95% max=10h",
        )
    for ph in phases:
        ph.check_names(net)
    planned_steps(phases, step, max_steps)
    bt = branch_table(net)
    cells = _Cells(net, bt)
    if cells.n == 0:
        raise InputError("a cycle needs at least one cell", span=Span(net.files[0] if net.files else "<text>"))
    t0 = _time.perf_counter()
    energy = np.zeros(len(net.elements))  # absorbed energy per element, J
    stored = np.zeros(cells.n)
    heat_cells = np.zeros(cells.n)
    coulombic = np.zeros(cells.n)
    rate_loss = np.zeros(cells.n)  # EMF times the charge the state of charge lost beyond the terminal charge (Peukert), J
    soc_up = np.zeros(cells.n)  # sum of the rises of each cell's state of charge
    soc_down = np.zeros(cells.n)  # sum of its falls
    ah_in = np.zeros(cells.n)
    ah_out = np.zeros(cells.n)
    term_in = np.zeros(cells.n)  # energy into the cells' terminals while they charge, J
    term_out = np.zeros(cells.n)  # energy out of their terminals while they discharge, J
    soc = cells.soc0.copy()
    t = 0.0
    times, socs, curs, pots, labels = [], [], [], [], []
    summary = []
    circ = {"max_A": 0.0, "time_s": 0.0, "bank": None, "phase": None}
    bank_strings = {name: [[net.element_position(c) for c in s][-1] for s in b["strings"]] for name, b in net.banks.items() if b["parallel"] > 1}
    solves = factorisations = 0
    notes = list(cells.notes)
    last_print = 0.0

    for idx, ph in enumerate(phases):
        solver = _PhaseSolver(net, bt, cells, ph, force_refactor)
        t_start = t
        limit = ph.duration if ph.duration is not None else (ph.max_time if ph.max_time is not None else DEFAULT_MAX)
        if ph.duration is None and ph.max_time is None:
            notes.append(f"phase {ph.label}: no max= given, limited to {DEFAULT_MAX / 3600:g} h")
        hmax = ph.step or step or DEFAULT_STEP
        pot, v, i, g = solver.solve(cells.emf(soc), cells.r(soc))
        reason = "time limit" if ph.duration is None else "duration"
        for cond in ph.conditions:
            if _crossed(cond, _probe(cond, net, cells, soc, pot, v, i)):
                reason = f"{cond.describe()} at the start"
                limit = 0.0
        emptied = False
        while t - t_start < limit - 1e-9:
            if len(times) >= max_steps:  # steps shortened to hold the state of charge's change
                from ..errors import LimitError

                raise LimitError(
                    f"phase {ph.label}: the cycle took {len(times):,} steps (shortened so that no state of charge moves more "
                    f"than {MAX_SOC_STEP * 100:g} % in one), the limit of {max_steps:,}",
                    span=ph.span,
                    hint="raise it with --max-steps",
                )
            icell = i[cells.pos]
            rate = cells.dsoc_dt(icell, soc)
            draining = rate < 0
            if np.any(draining & (soc <= 0.0)):
                # an empty cell would have to give charge it has not got: the phase ends now
                reason = EMPTY + (" at the start" if t == t_start else "")
                emptied = True
                break
            dt = min(hmax, limit - (t - t_start))
            fastest = float(np.abs(rate).max(initial=0.0))
            if fastest > 0:
                dt = min(dt, MAX_SOC_STEP / fastest)
            dt = max(dt, 1e-6)
            # exact empty event: with the rate fixed over the step, soc + rate * dt is linear
            # in dt, and the first cell to empty does so at soc / -rate
            empties = np.zeros(cells.n, dtype=bool)
            if draining.any():
                t_empty = np.full(cells.n, np.inf)
                t_empty[draining] = soc[draining] / -rate[draining]
                first = float(t_empty.min())
                if first <= dt:
                    dt = first
                    empties = t_empty <= first
            # record the start of the step
            times.append(t)
            socs.append(soc.copy())
            curs.append(icell.copy())
            pots.append(pot.copy())
            labels.append(idx)
            p = v * i
            new_soc = soc + rate * dt
            new_soc[empties] = 0.0  # soc + rate * (soc / -rate), without its round-off
            pot2, v2, i2, g2 = solver.solve(cells.emf(new_soc), cells.r(new_soc))
            # event location: shorten the step to the crossing (Euler states are linear in dt)
            hit = None
            for cond in ph.conditions:
                q0 = _probe(cond, net, cells, soc, pot, v, i)
                q1 = _probe(cond, net, cells, new_soc, pot2, v2, i2)
                if _crossed(cond, q1) and not _crossed(cond, q0):
                    frac = (cond.threshold - q0) / (q1 - q0) if q1 != q0 else 1.0
                    for _ in range(30):
                        dt_try = dt * min(max(frac, 0.0), 1.0)
                        trial = soc + rate * dt_try
                        pt, vt, it, gt = solver.solve(cells.emf(trial), cells.r(trial))
                        qt = _probe(cond, net, cells, trial, pt, vt, it)
                        if abs(dt_try - dt * frac) < EVENT_TOL and abs(qt - cond.threshold) <= 1e-9 * max(1.0, abs(cond.threshold)):
                            break
                        # secant on the fraction
                        if qt == q0:
                            break
                        frac = frac * (cond.threshold - q0) / (qt - q0)
                        if abs(dt * frac - dt_try) < EVENT_TOL:
                            dt_try = dt * min(max(frac, 0.0), 1.0)
                            trial = soc + rate * dt_try
                            pt, vt, it, gt = solver.solve(cells.emf(trial), cells.r(trial))
                            break
                    if hit is None or dt_try < hit[0]:
                        hit = (dt_try, cond, trial, pt, vt, it, gt)
            if hit is not None:
                dt, cond, new_soc, pot2, v2, i2, g2 = hit
            # a step never goes past the first empty cell (dt <= soc / -rate), so a draining cell
            # at or below 0 % is empty to round-off: it ends at 0 exactly, and the clip below
            # only ever refuses charge at 100 %
            low = draining & (new_soc <= 0.0)
            new_soc[low] = 0.0
            if hit is not None:
                reason = cond.describe()
                emptied = False  # (a cell left empty ends the next discharge at its start)
            elif low.any():
                reason = EMPTY
                emptied = True
            soc_next = np.clip(new_soc, 0.0, 1.0)
            # ledger (left-rectangle rule for every element alike: the ledger closes exactly)
            energy += p * dt
            r_now = cells.r(soc)
            emf_now = cells.emf(soc)
            chem = emf_now * icell * dt  # EMF times the charge through the terminals
            charging = icell > 0
            accepted = cells.accepted(icell, soc)
            factor = cells.peukert_factor(icell)
            # state of charge the rate asked for but the clip at 100 % refused, as energy: the
            # part of a charging step beyond full is overcharge, not stored
            refused = emf_now * cells.capacity * (new_soc - soc_next)
            # stored: EMF times the charge the state of charge gained or lost (E C dsoc)
            stored += np.where(charging, accepted * chem, factor * chem) - refused
            coulombic += np.where(charging, (1 - accepted) * chem, 0.0) + refused
            # discharging: the state of charge fell by factor * charge drawn; the excess over the
            # charge drawn, times the EMF (exactly 0 without a Peukert exponent)
            rate_loss += np.where(charging, 0.0, (1 - factor) * chem)
            dsoc = soc_next - soc
            soc_up += np.maximum(dsoc, 0.0)
            soc_down += np.maximum(-dsoc, 0.0)
            heat_cells += icell * icell * r_now * dt
            pcell = p[cells.pos]
            term_in += np.maximum(pcell, 0.0) * dt
            term_out += np.maximum(-pcell, 0.0) * dt
            ah_in += np.where(charging, icell, 0.0) * dt / 3600.0
            ah_out += np.where(~charging, -icell, 0.0) * dt / 3600.0
            for bank, pos in bank_strings.items():
                si = i[pos]
                c_now = (np.abs(si).sum() - abs(si.sum())) / 2
                if c_now > circ["max_A"]:
                    circ.update(max_A=float(c_now), time_s=t, bank=bank, phase=ph.label)
            t += dt
            soc = soc_next
            pot, v, i = pot2, v2, i2
            if progress and sys.stderr.isatty() and _time.perf_counter() - last_print > 0.2:
                last_print = _time.perf_counter()
                frac_done = (t - t_start) / limit if limit else 1.0
                print(f"\r  phase {ph.label}: {frac_done * 100:5.1f} % of {limit / 3600:.3g} h", end="", file=sys.stderr)
            if hit is not None or emptied:
                break
        if emptied:
            notes.append(f"phase {ph.label}: stopped when a cell was empty")
        if progress and sys.stderr.isatty():
            print("\r" + " " * 60 + "\r", end="", file=sys.stderr)
        solves += solver.solves
        factorisations += solver.factorisations
        summary.append(
            {
                "phase": ph.label,
                "start_s": t_start,
                "end_s": t,
                "duration_s": t - t_start,
                "ended_by": reason,
                "mean_soc_end": float(np.mean(soc)),
            }
        )
    # final sample
    times.append(t)
    socs.append(soc.copy())
    curs.append(i[cells.pos].copy())
    pots.append(pot.copy())
    labels.append(len(phases) - 1)

    ledger = _ledger(net, energy, cells, stored, heat_cells, coulombic, rate_loss, term_in, term_out, soc)
    # charged/discharged: charge through the terminals; soc_gained/soc_lost: the charge the
    # state of charge rose and fell by (C times its rises and falls), which differs from the
    # terminal charge by eta, overcharge and, with a Peukert exponent, the discharge rate
    throughput = {
        n: {"charged_Ah": float(a), "discharged_Ah": float(b), "soc_gained_Ah": float(u * c / 3600.0), "soc_lost_Ah": float(d * c / 3600.0)}
        for n, a, b, u, d, c in zip(cells.names, ah_in, ah_out, soc_up, soc_down, cells.capacity)
    }
    return CycleResult(
        netlist=net,
        times=np.array(times),
        phase_of_sample=np.array(labels),
        cell_names=cells.names,
        soc=np.array(socs),
        cell_current=np.array(curs),
        node_names=list(net.node_index),
        potentials=np.array(pots),
        phases=summary,
        ledger=ledger,
        throughput=throughput,
        circulating=circ,
        solves=solves,
        factorisations=factorisations,
        wall_s=_time.perf_counter() - t0,
        notes=notes,
    )


_CATEGORY = {
    "cable": "heat in cables",
    "link": "heat in links and straps",
    "fuse": "heat in fuses",
    "switch": "heat in switches",
    "resistor": "heat in resistors",
    "diode": "heat in diodes",
    "load": "delivered to loads",
}


def _ledger(net, energy, cells: _Cells, stored, heat_cells, coulombic, rate_loss, term_in, term_out, soc) -> dict:
    """Energy per category and per element (J and Wh), the closure of the balance, and the
    round-trip figures."""
    from ..kinds import KINDS

    cats: dict[str, float] = {}
    per_element = {}
    for el, e_j in zip(net.elements, energy):
        if el.kind == "cell":
            continue
        if KINDS[el.kind].is_source:
            cat, value = "put in by chargers and sources", -e_j  # delivered energy counted positive
        else:
            cat, value = _CATEGORY.get(el.kind, f"absorbed by {el.kind}s"), e_j
        cats[cat] = cats.get(cat, 0.0) + float(value)
        per_element[el.name] = {"category": cat, "J": float(value), "Wh": float(value) / 3600.0}
    for n, s_j, h_j, c_j, p_j in zip(cells.names, stored, heat_cells, coulombic, rate_loss):
        per_element[n] = {
            "category": "cells",
            "stored_J": float(s_j),
            "heat_J": float(h_j),
            "not_stored_J": float(c_j),
            "rate_loss_J": float(p_j),
            "stored_Wh": float(s_j) / 3600.0,
            "heat_Wh": float(h_j) / 3600.0,
            "not_stored_Wh": float(c_j) / 3600.0,
            "rate_loss_Wh": float(p_j) / 3600.0,
        }
    cats["stored in cells (net)"] = float(stored.sum())
    cats["heat in cells' internal resistance"] = float(heat_cells.sum())
    if coulombic.sum():
        cats["charge not stored (coulombic loss, overcharge)"] = float(coulombic.sum())
    if np.any(cells.k != 1.0):
        cats[RATE_LOSS] = float(rate_loss.sum())
    supplied = cats.get("put in by chargers and sources", 0.0)
    used = sum(v for k, v in cats.items() if k != "put in by chargers and sources")
    scale = sum(abs(v) for v in cats.values()) or 1.0
    loads = cats.get("delivered to loads", 0.0)
    e_in, e_out = float(term_in.sum()), float(term_out.sum())
    return {
        "categories_J": cats,
        "categories_Wh": {k: v / 3600.0 for k, v in cats.items()},
        "elements": per_element,
        # sources give what heat, loads and the cells' net store take: (in - used) / everything
        "closure_relative": float((supplied - used) / scale),
        "round_trip": {
            "cells_terminal_in_Wh": e_in / 3600.0,
            "cells_terminal_out_Wh": e_out / 3600.0,
            "cells_round_trip": (e_out / e_in) if e_in > 0 else None,
            "loads_over_supplied": (loads / supplied) if supplied > 0 else None,
            "mean_soc_change": float(np.mean(soc - cells.soc0)),
            # the round trip compares like with like only if every cell came back (a mean
            # change near zero can hide cells that moved apart)
            "max_abs_soc_change": float(np.max(np.abs(soc - cells.soc0))),
            "closed_cycle": bool(np.max(np.abs(soc - cells.soc0)) < CLOSED_SOC),
        },
    }
