"""Parts of a network cut off by open elements: found, pinned for the solve, and placed after it.

A blocked one-way element (a diode without ``roff``), an open switch, or a constant-current
load that has no supply carries no current; what lies behind such elements only may have no
path to ground through anything that ties potentials together. Kirchhoff's laws still fix the
currents inside such a part (zero, unless it holds sources of its own) but not its potential
relative to the rest, which in a real installation is set by leakage alone. Rather than leaving
the matrix singular (or nearly so, as a picosiemens floor would), each such *island* is

1. **pinned** for the linear solve: one of its nodes is tied to ground by a conductance of the
   network's own scale with a source holding it at a guessed potential, so the matrix stays
   well conditioned; the island's internal currents do not depend on the guess;
2. **placed** after the solve: its potentials are shifted together by the offset that
   Kirchhoff's current law over the whole island gives when every open element crossing its
   boundary leaks with its leak conductance (a blocked diode's 1 pS floor, or its ``roff``; an
   open switch or a load without supply the same 1 pS): the answer the leak model gives in
   exact arithmetic, computed without putting a 1e-12 S entry beside 1e3 S ones.

Such parts are reported as idle, with their potentials marked as set only by leakage.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Islands", "find", "LEAK"]

#: leak conductance of an open element that has none of its own (siemens), for placing islands
LEAK = 1e-12


@dataclass
class Islands:
    """Floating parts of one linear model: node lists, the open elements crossing their boundaries."""

    labels: np.ndarray  # component label of every node
    ground_label: int
    nodes: list[np.ndarray]  # node indices of each island
    crossing: list[np.ndarray]  # element positions crossing each island's boundary

    def __bool__(self) -> bool:
        return bool(self.nodes)

    @property
    def floating(self) -> np.ndarray:
        """True for every node in an island."""
        return self.labels != self.ground_label

    def pin(self, system, pot_guess: np.ndarray | None, scale: float) -> None:
        """Tie one node of each island to ground (conductance ``scale``) at its guessed potential."""
        rows = system.row_of_node
        picked, targets = [], []
        for nodes in self.nodes:
            k = int(nodes[0])
            r = int(rows[k])
            if r < 0:
                continue
            target = 0.0 if pot_guess is None else float(pot_guess[k])
            picked.append(r)
            targets.append(target if np.isfinite(target) else 0.0)
        if not picked:
            return
        picked_a = np.array(picked, dtype=np.int64)
        if system.dense:
            system.A[picked_a, picked_a] += scale
        else:
            from scipy.sparse import csc_matrix, diags

            d = np.zeros(system.size)
            d[picked_a] = scale
            system.A = csc_matrix(system.A + diags(d))
        system.z[picked_a] += scale * np.array(targets)

    def place(self, model, pot: np.ndarray, leak: np.ndarray | None, i: np.ndarray | None = None) -> np.ndarray:
        """Potentials with every island shifted to where its boundary leaks put it.

        ``leak`` is each element's leak conductance when open (NaN or 0: the default :data:`LEAK`);
        ``i`` the solved element currents (current sources crossing the boundary inject into the
        island; their current counts in the island's balance).
        """
        pot = pot.copy()
        a, b = model.a, model.b
        for nodes, cross in zip(self.nodes, self.crossing):
            inside = np.zeros(len(pot), dtype=bool)
            inside[nodes] = True
            if not len(cross):
                continue
            ins = np.where(inside[a[cross]], a[cross], b[cross])
            out = np.where(inside[a[cross]], b[cross], a[cross])
            gl = np.full(len(cross), LEAK) if leak is None else np.asarray(leak, dtype=float)[cross]
            gl = np.where(np.isfinite(gl) & (gl > 0), gl, LEAK)
            # current injected into the island by the crossing branches other than their leak
            # (current sources: passive current from a to b enters b)
            inj = 0.0
            if i is not None:
                ic = i[cross]
                inj = float(np.sum(np.where(inside[b[cross]], ic, -ic)))
            delta = (inj - float(np.sum(gl * (pot[ins] - pot[out])))) / float(gl.sum())
            pot[nodes] += delta
        return pot

    def names(self, node_names, limit: int = 8) -> list[str]:
        out = []
        for nodes in self.nodes:
            out += [node_names[k] for k in nodes]
        return out[:limit] + (["..."] if len(out) > limit else [])


def find(model) -> Islands:
    """The islands of a linear model: components of the connecting branches without ground."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = model.n_nodes
    m = (model.is_voltage | (model.g != 0)) & (model.a != model.b)
    adj = coo_matrix((np.ones(int(m.sum())), (model.a[m], model.b[m])), shape=(n, n))
    count, labels = connected_components(adj, directed=False)
    gl = int(labels[model.ground])
    if count <= 1:
        return Islands(labels, gl, [], [])
    order = np.argsort(labels, kind="stable")
    bounds = np.searchsorted(labels[order], np.arange(count + 1))
    nodes = [order[bounds[k] : bounds[k + 1]] for k in range(count) if k != gl]
    la, lb = labels[model.a], labels[model.b]
    crossing_all = np.flatnonzero(la != lb)
    crossing = []
    for part in nodes:
        lab = labels[part[0]]
        sel = crossing_all[(la[crossing_all] == lab) | (lb[crossing_all] == lab)]
        crossing.append(sel)
    return Islands(labels, gl, nodes, crossing)


def pinned_system(model, pot_guess=None):
    """The MNA system of a linear model with every island pinned (``system.islands`` says which)."""
    from .mna import assemble

    system = assemble(model)
    isl = find(model)
    if isl:
        scale = float(np.abs(model.g).max(initial=0.0)) or 1.0
        isl.pin(system, pot_guess, scale)
    system.islands = isl
    return system
