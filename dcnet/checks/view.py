"""A single solve seen as one sample, with the lookups every rule uses (arrays of length one).

The same lookups exist, with one entry per sample, on the samples of a study
(:class:`dcnet.analysis.studies.Samples`); a rule written against them serves both.

Lookups: ``current(name)``, ``voltage(name[, other])``, ``power(name)``, ``potential(node)``
(arrays over samples), ``value(name, key, default)`` (an element's value: a scalar, or one per
sample where a study varies it), ``bound(name)`` (the round-off bound of its current),
``state(name)`` (one solve only), ``sections`` (dcnet.analysis.sections), ``g``/``c``/``e``
(samples x elements: the solved linear model) with ``is_voltage``, ``solve_more(B)`` (further
right-hand sides on each sample's own matrix), ``rows`` (the unknowns' layout),
``circulating(bank)`` (the bank alone at rest), ``unsupplied`` (loads without supply),
``islands``, ``nonlinear`` (a circuit solved by Newton iterations) and ``notes`` (what a rule
could not judge, with why).
"""

from __future__ import annotations

import numpy as np

from ..analysis.solution import SampleLookups, string_currents

__all__ = ["OneSample"]


class OneSample(SampleLookups):
    """A :class:`~dcnet.analysis.solution.Solution` as one sample."""

    single = True
    n = 1

    def __init__(self, sol):
        self.solution = sol
        self.netlist = sol.netlist
        self.branches = sol.branches
        self.potentials = sol.potentials[None, :]
        self.v = sol.v[None, :]
        self.i = sol.i[None, :]
        self.notes: list[str] = []
        self.unsupplied = list(getattr(sol, "unsupplied", []))
        self.islands = getattr(sol, "islands", None)
        self.nonlinear = bool(sol.branches.is_nonlinear) or getattr(sol, "newton_history", None) is not None
        bt = sol.branches
        self.g, self.c, self.e = bt.g[None, :], bt.c[None, :], bt.e[None, :]
        self.is_voltage = bt.is_voltage
        self.bounds = sol.current_bounds[None, :]
        self.vbounds = sol.voltage_bounds[None, :]

    def value(self, name: str, key: str, default=None):
        return self.netlist.element(name).values.get(key, default)

    def state(self, name: str) -> str:
        return self.solution.state(name)

    @property
    def sections(self):
        return self.solution.sections

    @property
    def rows(self):
        system = self.solution.system
        return system.row_of_node, system.n_node_rows, system.vbranch

    def solve_more(self, B: np.ndarray) -> np.ndarray:
        """Solve the matrix for the columns of ``B`` (unknowns x k, or 1 x unknowns x k)."""
        B = np.asarray(B, dtype=float)
        if B.ndim == 3:
            B = B[0]
        if B.shape[0] == 0:
            return np.zeros((1, 0, B.shape[1]))
        return np.asarray(self.solution.factor.solve(B)).reshape(B.shape)[None, :, :]

    def circulating(self, bank: dict) -> tuple[np.ndarray, np.ndarray]:
        """(largest string current, its round-off bound) with the bank alone at rest."""
        from ..netlist import bank_alone

        sol = bank_alone(self.netlist, bank).solve(checks=False)
        cur, bnd = string_currents(bank, lambda n: sol.i[None, sol.netlist.element_position(n)], lambda n: sol.current_bounds[None, sol.netlist.element_position(n)])
        return _largest(cur, bnd)


def _largest(cur: np.ndarray, bnd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per sample: the largest |string current| and that string's bound."""
    k = np.abs(cur).argmax(axis=1)
    rows = np.arange(cur.shape[0])
    return np.abs(cur[rows, k]), bnd[rows, k]
