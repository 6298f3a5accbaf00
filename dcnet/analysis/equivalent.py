"""Thevenin and Norton equivalents seen from two nodes.

Numerically, by Thevenin's theorem: the open-circuit voltage ``V_th`` from node x to node
y is read from the solution, and the resistance ``R_th`` between them with every source
zeroed (ideal voltage sources shorted, current sources opened, cells reduced to their
internal resistance) is the voltage a unit current injected into x and drawn out of y
produces. Zeroing the sources does not change the circuit matrix, so ``R_th`` comes from
the solve's own factorisation with one extra right-hand side (:func:`unit_response`); the
fault-current check (``dcnet.checks.fault``) uses the same function. Norton's current is
``I_N = V_th / R_th`` (the current a zero-ohm link from x to y would carry) and
``G_N = 1 / R_th``.

Symbolically (``keep=...``), the same quantities come from dcnet.analysis.symbolic: the
open-circuit voltage and the unit-injection response are solved together, with one
denominator; each is checked against the numeric figures before it is returned.

No sympy at module level: the numeric path is used by the installation checks.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputError, UnknownNameError

__all__ = ["unit_response", "thevenin", "Equivalent", "equivalent"]


def unit_response(sol, x: str, y: str):
    """Potentials of every node, and the solution vector, when 1 A is injected into node x
    and drawn out of node y with every source zeroed (the solve's own factorisation)."""
    system, factor = sol.system, sol.factor
    idx = sol.netlist.node_index
    rows = system.row_of_node
    rhs = np.zeros(system.size)
    rx, ry = rows[idx[x]], rows[idx[y]]
    if rx >= 0:
        rhs[rx] += 1.0
    if ry >= 0:
        rhs[ry] -= 1.0
    w = factor.solve(rhs)
    return system.potentials(w), w


def thevenin(sol, x: str, y: str) -> tuple[float, float, np.ndarray, np.ndarray]:
    """(V_th, R_th, node potentials of the unit response, its solution vector) from x to y."""
    pot_w, w = unit_response(sol, x, y)
    idx = sol.netlist.node_index
    r_th = float(pot_w[idx[x]] - pot_w[idx[y]])
    v_oc = sol.potential(x) - sol.potential(y)
    return v_oc, r_th, pot_w, w


@dataclass
class Equivalent:
    """Thevenin (``v_th`` behind ``r_th``) and Norton (``i_n`` beside ``g_n``) equivalents of
    the circuit seen from node ``x`` (positive) to node ``y``.

    Numbers are floats; with kept symbols, ``formulas`` holds a checked
    :class:`~dcnet.analysis.symbolic.Formula` for each of ``v_th``, ``r_th``, ``i_n``, ``g_n``
    and the float fields are their values at the file's numbers. ``i_n`` and ``g_n`` are
    ``inf`` when ``r_th`` is zero (an ideal path joins the two nodes).
    """

    x: str
    y: str
    v_th: float
    r_th: float
    formulas: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    @property
    def i_n(self) -> float:
        return self.v_th / self.r_th if self.r_th > 0 else (float("inf") if self.v_th else 0.0)

    @property
    def g_n(self) -> float:
        return 1.0 / self.r_th if self.r_th > 0 else float("inf")

    @property
    def symbolic(self) -> bool:
        return bool(self.formulas)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "between": [self.x, self.y],
            "v_th_V": self.v_th,
            "r_th_ohm": self.r_th,
            "i_n_A": self.i_n if np.isfinite(self.i_n) else None,
            "g_n_S": self.g_n if np.isfinite(self.g_n) else None,
        }
        if self.formulas:
            out["formulas"] = {k: f.to_dict() for k, f in self.formulas.items()}
        if self.notes:
            out["notes"] = list(self.notes)
        return out


def equivalent(net, x: str, y: str, keep=(), *, keep_all: bool = False, time_budget=None, max_terms=None) -> Equivalent:
    """Thevenin and Norton equivalents of a linear circuit seen from node ``x`` to node ``y``.

    Without ``keep`` the figures are numbers from the solve's own factorisation; with
    ``keep`` (let names or element properties, as for :func:`dcnet.formulas`) or
    ``keep_all`` they are also formulas, each checked against those numbers.

    Examples
    --------
    >>> import dcnet
    >>> net = dcnet.parse('''
    ... cell A pos gnd emf=12V r=0.1Ohm
    ... load L pos gnd r=0.4Ohm
    ... ''')
    >>> eq = dcnet.equivalent(net, "pos", "gnd")
    >>> round(eq.v_th, 6), round(eq.r_th, 6), round(eq.i_n, 6)
    (9.6, 0.08, 120.0)
    """
    from .branches import branch_table

    for node in (x, y):
        if node not in net.node_index:
            from ..language.parser import suggest

            near = suggest(node, list(net.node_index))
            raise UnknownNameError(
                f"no node named '{node}'", hint=f"did you mean '{near}'?" if near else "name two nodes of the circuit"
            )
    if x == y:
        raise InputError(f"the two nodes are the same ('{x}')", hint="name two different nodes")
    bt = branch_table(net)
    if bt.is_nonlinear:
        bad = [bt.names[p] for p in np.flatnonzero(bt.nonlinear)]
        raise InputError(
            "equivalents need a linear circuit; nonlinear elements: "
            + ", ".join(bad[:8])
            + (" ..." if len(bad) > 8 else ""),
            hint="a Thevenin equivalent exists only for linear networks; replace diodes, constant-power loads and "
            "current limits by linear models to get one",
            culprits=tuple(bad),
        )
    sol = net.solve(checks=False)
    isl = sol.islands
    if isl and isl.labels[net.node_index[x]] != isl.labels[net.node_index[y]]:
        from .symbolic import _cut_off

        raise InputError(
            f"{x} and {y} are not joined: {_cut_off(sol)}, so seen from them the circuit is open and has no "
            "Thevenin or Norton equivalent",
            hint="name two nodes of one connected part, or close what cuts the part off",
        )
    v_th, r_th, _, _ = thevenin(sol, x, y)
    if abs(r_th) <= 1e-15 * max(1.0, abs(v_th)):
        r_th = 0.0
    eq = Equivalent(x, y, v_th, r_th)
    if r_th == 0.0:
        eq.notes.append(
            f"an ideal path joins {x} and {y}: the Norton equivalent does not exist (its current would be unlimited)"
        )
    if not keep and not keep_all:
        return eq
    from .symbolic import DEFAULT_TIME_BUDGET, MAX_TERMS, equivalent_formulas

    eq.formulas = equivalent_formulas(
        net,
        x,
        y,
        keep,
        keep_all=keep_all,
        time_budget=DEFAULT_TIME_BUDGET if time_budget is None else time_budget,
        max_terms=MAX_TERMS if max_terms is None else max_terms,
        v_th=v_th,
        r_th=r_th,
    )
    return eq
