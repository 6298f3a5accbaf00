"""The netlist as arrays: one branch per element, grouped by kind.

This is the only place that walks the element records one by one; everything
after it (topology, assembly, verification, results) works on arrays.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..kinds import KINDS
from ..netlist import Netlist

__all__ = ["BranchTable", "branch_table", "kind_columns"]


@dataclass
class BranchTable:
    """Arrays in element order; ``groups`` maps a kind to (positions, columns)."""

    names: list[str]
    node_names: list[str]
    a: np.ndarray
    b: np.ndarray
    ground: int
    groups: dict[str, tuple[np.ndarray, dict[str, np.ndarray]]]
    is_voltage: np.ndarray
    g: np.ndarray
    c: np.ndarray
    e: np.ndarray
    max_emf: float
    #: voltage-form branches that duplicate another one exactly (same two nodes, same EMF):
    #: left out of the system; the group's current is shared equally (see ``parallel_groups``)
    shadow: np.ndarray | None = None
    #: for every branch, the position of its group's representative (itself if not grouped)
    representative: np.ndarray | None = None
    #: branches solved by the Newton solver (their g, c, e here are only starting models)
    nonlinear: np.ndarray | None = None
    #: leak conductance of branches that the model holds open (blocked diodes without roff):
    #: not in the matrix, used only to place parts cut off by them (dcnet.analysis.islands)
    leak: np.ndarray | None = None

    @property
    def is_nonlinear(self) -> bool:
        return self.nonlinear is not None and bool(self.nonlinear.any())

    @property
    def solved_voltage(self) -> np.ndarray:
        """Voltage-form branches that get an unknown in the system."""
        return self.is_voltage & ~self.shadow

    @property
    def n_nodes(self) -> int:
        return len(self.node_names)

    @property
    def n_elements(self) -> int:
        return len(self.names)

    @property
    def connecting(self) -> np.ndarray:
        """Branches that tie their two node potentials together (not pure current sources, not open)."""
        return self.is_voltage | (self.g != 0)


def kind_columns(kind_name: str, elements) -> dict[str, np.ndarray]:
    """Float columns of the kind's declared properties (NaN where absent)."""
    kind = KINDS[kind_name]
    nan = float("nan")
    return {col: np.array([el.values.get(col, nan) for el in elements], dtype=float) for col in kind.columns}


def branch_table(net: Netlist) -> BranchTable:
    """Build (once per netlist state) the branch arrays of a netlist."""
    return net.cached("branch_table", lambda: _build(net))


def _build(net: Netlist) -> BranchTable:
    idx = net.node_index
    els = net.elements
    n = len(els)
    a_list, b_list, by_kind = net.indices()
    a = np.array(a_list, dtype=np.int64)
    b = np.array(b_list, dtype=np.int64)
    is_v = np.zeros(n, dtype=bool)
    g = np.zeros(n)
    c = np.zeros(n)
    e = np.zeros(n)
    groups = {}
    nonlinear = np.zeros(n, dtype=bool)
    max_emf = 0.0
    for kind_name, positions in by_kind.items():
        pos = np.asarray(positions, dtype=np.int64)
        cols = kind_columns(kind_name, [els[p] for p in positions])
        kind = KINDS[kind_name]
        br = kind.branches(cols)
        is_v[pos], g[pos], c[pos], e[pos] = br.is_voltage, br.g, br.c, br.e
        nonlinear[pos] = kind.nonlinear_mask(cols)
        groups[kind_name] = (pos, cols)
        if "emf" in cols and len(pos):
            max_emf = max(max_emf, float(np.nanmax(np.abs(cols["emf"]))))
    shadow, rep = parallel_duplicates(a, b, is_v & ~nonlinear, e)
    return BranchTable(
        names=[el.name for el in els],
        node_names=list(idx),
        a=a,
        b=b,
        ground=idx[net.ground],
        groups=groups,
        is_voltage=is_v,
        g=g,
        c=c,
        e=e,
        max_emf=max_emf,
        shadow=shadow,
        representative=rep,
        nonlinear=nonlinear,
    )


def parallel_duplicates(a, b, is_voltage, e):
    """Group voltage-form branches on the same pair of nodes with the same EMF.

    Returns ``shadow`` (True for every member but the first of a group) and the
    representative position of every branch.
    """
    n = len(a)
    shadow = np.zeros(n, dtype=bool)
    rep = np.arange(n, dtype=np.int64)
    vb = np.flatnonzero(is_voltage & (a != b))
    if len(vb) < 2:
        return shadow, rep
    lo, hi = np.minimum(a[vb], b[vb]), np.maximum(a[vb], b[vb])
    oriented = np.where(a[vb] < b[vb], e[vb], -e[vb])
    keys = np.rec.fromarrays([lo, hi, oriented])
    _, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    rep[vb] = vb[first[inverse]]
    shadow[vb] = rep[vb] != vb
    return shadow, rep
