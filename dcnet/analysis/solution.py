"""The result of a solve: potentials, element currents, voltages, powers, extras.

Sign convention (passive, for every element): ``current_A`` flows through the
element from its first node to its second; ``voltage_V`` is first-node minus
second-node potential; ``power_W = voltage_V * current_A`` is absorbed power
(negative = delivering). A discharging cell has negative current and power.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import UnknownNameError
from ..kinds import KINDS
from ..netlist import Netlist
from .branches import BranchTable

__all__ = ["Solution", "QuantityError", "SampleLookups", "string_currents"]


class SampleLookups:
    """The lookups of solved samples as arrays, one entry per sample: ``potentials``, ``v`` and
    ``i`` are (samples x nodes / elements) arrays and ``bounds`` the current round-off bounds.
    Shared by a single solve seen as one sample (dcnet.checks.view.OneSample) and the samples of
    a study (dcnet.analysis.studies.Samples)."""

    netlist: Netlist
    potentials: np.ndarray
    v: np.ndarray
    i: np.ndarray
    bounds: np.ndarray | None = None
    vbounds: np.ndarray | None = None

    def _pos(self, name: str) -> int:
        return self.netlist.element_position(name)

    def current(self, name: str) -> np.ndarray:
        return self.i[:, self._pos(name)]

    def voltage(self, name: str, other: str | None = None) -> np.ndarray:
        if other is not None:
            return self.potential(name) - self.potential(other)
        return self.v[:, self._pos(name)]

    def power(self, name: str) -> np.ndarray:
        k = self._pos(name)
        return self.v[:, k] * self.i[:, k]

    def potential(self, node: str) -> np.ndarray:
        return self.potentials[:, self.netlist.node_index[node]]

    def bound(self, name: str) -> np.ndarray:
        """The round-off bound of an element's current, per sample (zero where none is known)."""
        if self.bounds is None:
            return np.zeros(self.i.shape[0])
        return self.bounds[:, self._pos(name)]

    def vbound(self, name: str) -> np.ndarray:
        """The round-off bound of an element's voltage, per sample (zero where none is known)."""
        if self.vbounds is None:
            return np.zeros(self.v.shape[0])
        return self.vbounds[:, self._pos(name)]

    def strings(self, bank: dict) -> tuple[np.ndarray, np.ndarray]:
        """(samples x strings) current of each string of a bank and its round-off bound
        (:func:`string_currents`)."""
        return string_currents(bank, self.current, self.bound)


def string_currents(bank: dict, current, bound) -> tuple[np.ndarray, np.ndarray]:
    """Each string's current (passive sign of its cells: charging positive) and its round-off
    bound, per sample, from ``current(name)`` and ``bound(name)`` (arrays over samples).

    Every element in series in a string carries the string's current (Kirchhoff's current law);
    the one read is, per sample, the member with the smallest round-off bound, so a small current
    through stiff cells is read on the lead or strap that carries it with the least error. A bank
    without its members recorded is read on its last cells."""
    chains = bank.get("members") or [[(cells[-1], 1)] for cells in bank["strings"]]
    cur, bnd = [], []
    for chain in chains:
        c = np.column_stack([sign * np.asarray(current(name), dtype=float) for name, sign in chain])
        b = np.column_stack([np.asarray(bound(name), dtype=float) for name, _ in chain])
        k = b.argmin(axis=1)
        rows = np.arange(c.shape[0])
        cur.append(c[rows, k])
        bnd.append(b[rows, k])
    return np.column_stack(cur), np.column_stack(bnd)


class QuantityError(UnknownNameError, KeyError):
    """An asked-for quantity names no element or node (an input error: it is a
    :class:`~dcnet.errors.DcnetError`, and a ``KeyError`` for lookups that expect one)."""


class Solution:
    """Node potentials and element results of a solved netlist."""

    def __init__(self, netlist: Netlist, bt: BranchTable, potentials, v, i, balance: dict, warnings: list[str]):
        self.netlist = netlist
        self.branches = bt
        self.potentials = potentials
        self.v = v
        self.i = i
        self.p = v * i
        self.balance = balance
        self.warnings = list(warnings)
        self.checks: list[dict] = []
        self.verdicts: list = []
        #: the assembled system and its factorisation (reused by fault-current checks and equivalents)
        self.system = None
        self.factor = None
        #: the round-off bound of every element current (amperes); currents within it are zero
        self.current_bounds = np.zeros(len(i))
        #: the round-off bound of every element voltage (volts)
        self.voltage_bounds = np.zeros(len(i))
        #: parts cut off by open elements (dcnet.analysis.islands.Islands), or None
        self.islands = None
        #: loads that cross into a part with no path to ground: no supply, they draw nothing
        self.unsupplied: list[str] = []
        self._extras: dict[str, dict[str, np.ndarray]] | None = None
        self._sections = None
        self._states: np.ndarray | None = None

    @property
    def _pos(self) -> dict[str, int]:
        """Element name -> position (built on first lookup; the netlist already has it)."""
        return self.netlist._by_name

    def run_checks(self) -> list:
        """Run the installation checks (dcnet.checks) and keep their verdicts."""
        from ..checks import run

        self.verdicts = run(self.netlist, self)
        self.checks = [v.to_dict() for v in self.verdicts]
        return self.verdicts

    @property
    def failed(self) -> bool:
        """True if any check failed."""
        return any(not c["ok"] for c in self.checks)

    # ------------------------------------------------------------ lookups
    def _element_pos(self, name: str) -> int:
        try:
            return self._pos[name]
        except KeyError:
            raise QuantityError(_unknown("element", name, self._pos)) from None

    def potential(self, node: str) -> float:
        """Potential of a node relative to ground, in volts."""
        try:
            return float(self.potentials[self.netlist.node_index[node]])
        except KeyError:
            raise QuantityError(_unknown("node", node, self.netlist.node_index)) from None

    def current(self, name: str) -> float:
        """Passive-sign current through an element (first node to second), in amperes."""
        return float(self.i[self._element_pos(name)])

    def voltage(self, name: str, other: str | None = None) -> float:
        """An element's voltage (first node minus second), or with two node names their difference."""
        if other is not None:
            return self.potential(name) - self.potential(other)
        return float(self.v[self._element_pos(name)])

    def power(self, name: str) -> float:
        """Absorbed power of an element in watts (negative = delivering)."""
        return float(self.p[self._element_pos(name)])

    # ------------------------------------------------------------- extras
    @property
    def system_voltage(self) -> float:
        """Reference for percentage drops: the highest source EMF, or the span of node
        potentials when that is larger (a series string of cells)."""
        span = float(self.potentials.max() - self.potentials.min()) if len(self.potentials) else 0.0
        return max(self.branches.max_emf, span)

    @property
    def ctx(self) -> dict:
        return {"max_emf": self.branches.max_emf, "system_voltage": self.system_voltage, "section_voltage": self.section_voltages()}

    @property
    def sections(self):
        """Which sources feed each load, along which conductors (dcnet.analysis.sections)."""
        if self._sections is None:
            from .sections import sections

            bt = self.branches
            conducting = np.zeros(bt.n_elements, dtype=bool)
            if "diode" in bt.groups:
                pos = bt.groups["diode"][0]
                conducting[pos] = [self.state(bt.names[p]) == "conducting" for p in pos]
            self._sections = sections(self.netlist, bt, conducting_diodes=conducting)
        return self._sections

    def section_voltages(self) -> np.ndarray:
        """Per element: the section voltage of its first node's conductor group (NaN where none)."""
        sec = self.sections
        nodes = self.branches.a
        # one evaluation per conductor group that has section pairs (a scan of every element
        # per group was quadratic: a strapped 400x400 bank spent most of its time here)
        labels, first, inverse = np.unique(sec.labels[nodes], return_index=True, return_inverse=True)
        per_group = np.full(len(labels), np.nan)
        for k, lab in enumerate(labels):
            if sec.group_pairs.get(int(lab)):
                per_group[k] = sec.group_voltage(self.potentials, int(nodes[first[k]]))[0]
        return per_group[inverse.reshape(-1)]

    def _compute_states(self) -> None:
        states = np.empty(len(self.i), dtype=object)
        for kind_name, (pos, cols) in self.branches.groups.items():
            states[pos] = KINDS[kind_name].state(cols, self.v[pos], self.i[pos])
        self._states = states

    def _compute(self) -> None:
        extras: dict[str, dict[str, np.ndarray]] = {}
        if self._states is None:
            self._compute_states()  # sections need the diodes' states
        ctx = self.ctx
        for kind_name, (pos, cols) in self.branches.groups.items():
            kind = KINDS[kind_name]
            v, i = self.v[pos], self.i[pos]
            extras[kind_name] = kind.extras(cols, v, i, dict(ctx, section_voltage=ctx["section_voltage"][pos]))
        self._extras = extras

    def extras(self, name: str) -> dict[str, float]:
        """Kind-specific results of one element (a cell's ``loss_W``, a cable's ``drop_pct``...)."""
        if self._extras is None:
            self._compute()
        k = self._element_pos(name)
        kind = self.netlist.elements[k].kind
        pos = self.branches.groups[kind][0]
        j = int(np.searchsorted(pos, k))
        return {key: float(arr[j]) for key, arr in self._extras[kind].items()}

    def state(self, name: str) -> str:
        """A plain word for what the element does: charging, discharging, delivering, absorbing..."""
        if self._states is None:
            self._compute_states()
        return str(self._states[self._element_pos(name)])

    def element_result(self, name: str) -> dict[str, Any]:
        k = self._element_pos(name)
        el = self.netlist.elements[k]
        out = {
            "kind": el.kind,
            "nodes": list(el.nodes),
            "current_A": float(self.i[k]),
            "voltage_V": float(self.v[k]),
            "power_W": float(self.p[k]),
            "state": self.state(name),
        }
        out.update(self.extras(name))
        return out

    # ---------------------------------------------------------- quantities
    def quantity(self, spec: str) -> tuple[str, float, str]:
        """Value of a quantity written as on the command line.

        ``ELEMENT.current``, ``ELEMENT.voltage``, ``ELEMENT.power``,
        ``NODE.potential``, ``NODE`` (its potential), ``NODE,NODE`` (their
        difference), ``ELEMENT.<extra>`` such as ``P1.drop_pct``, or a bank's
        ``BANK.imbalance_pct`` and ``BANK.circulating_A`` (its strings at rest).
        Returns (label, value, unit).
        """
        spec = spec.strip()
        if "," in spec:
            n1, n2 = (s.strip() for s in spec.split(",", 1))
            return (f"V({n1},{n2})", self.voltage(n1, n2), "V")
        name, _, attr = spec.rpartition(".")
        if not name:
            name, attr = spec, ""
        if attr in ("current", "voltage", "power") and name in self._pos:
            unit = {"current": "A", "voltage": "V", "power": "W"}[attr]
            return (spec, getattr(self, attr)(name), unit)
        if attr == "potential":
            return (spec, self.potential(name), "V")
        if name in self._pos and attr:
            ex = self.extras(name)
            if attr in ex:
                unit = attr.rsplit("_", 1)[-1] if "_" in attr else ""
                return (spec, ex[attr], {"pct": "%", "ohm": "Ohm"}.get(unit, unit))
            known = ["current", "voltage", "power"] + list(ex)
            raise QuantityError(f"{name} has no result '{attr}'; it has: {', '.join(known)}")
        if spec in self.netlist.node_index:
            return (f"{spec}.potential", self.potential(spec), "V")
        if name in self.netlist.banks and attr:
            from ..checks.imbalance import BANK_QUANTITIES, bank_quantity
            from ..checks.view import OneSample

            if attr not in BANK_QUANTITIES:
                raise QuantityError(f"bank {name} has no result '{attr}'; it has: {', '.join(BANK_QUANTITIES)}")
            return (spec, float(bank_quantity(self.netlist, OneSample(self), name, attr)[0]), BANK_QUANTITIES[attr])
        if spec in self._pos:
            raise QuantityError(f"say which result of {spec}: {spec}.current, {spec}.voltage or {spec}.power")
        raise QuantityError(
            _unknown("element or node", name if attr else spec, list(self._pos) + list(self.netlist.node_index) + list(self.netlist.banks))
        )

    # --------------------------------------------------------------- export
    def to_dict(self) -> dict[str, Any]:
        """The machine-readable result (the JSON schema of the README)."""
        net = self.netlist
        return {
            "title": net.title,
            "ground": net.ground,
            "nodes": {n: {"potential_V": float(self.potentials[k])} for n, k in net.node_index.items()},
            "elements": {name: self.element_result(name) for name in self.branches.names},
            "balance": {
                "power_sum_W": self.balance["power_sum_W"],
                "kcl_max_residual_A": self.balance["kcl_max_residual_A"],
                "ok": self.balance["ok"],
            },
            "checks": list(self.checks),
            "warnings": list(self.warnings),
        }


def _unknown(what: str, name: str, known) -> str:
    from ..language.parser import suggest

    near = suggest(name, known)
    return f"no {what} named '{name}'" + (f"; did you mean '{near}'?" if near else "")
