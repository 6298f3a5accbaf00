"""The physical bound on node potentials: how far from ground any operating point can reach.

Every element other than a source is *sign-conforming*: its current flows from its higher
terminal to its lower one, or not at all (``i·v >= 0``): resistors, cables, fuses, links,
closed switches, resistive loads, diodes of both forms, constant-power loads. At an operating
point each of them therefore behaves as a non-negative *chord* conductance ``i / v``, and the
operating point is also the solution of a *linear* network N_chord: those chord conductances,
the linear elements as they are, voltage sources (EMF behind r, or ideal), and current sources.
By superposition in N_chord:

* the voltage sources alone put every node within ``E = sum |emf|`` of ground (the maximum
  principle: every potential level between the lowest and the highest node is crossed by a
  source delivering current into the nodes above it, and a voltage source delivering current
  spans at most its EMF);
* one current source ``I`` alone puts every node within ``|I| · R`` of ground, ``R`` the
  resistance N_chord shows between its terminals (the nodes lie between those two terminals,
  ground among them).

Leaving every sign-conforming nonlinear element out (open) and every current-type source open
only removes conductances, which can only raise the resistance between two nodes (Rayleigh's
monotonicity law). So with ``R_j`` taken in N*, the network of the linear resistive elements
alone (ideal voltage-form branches as shorts, cells and sources by their ``r``),

    |V(node)| <= B = sum |emf| + sum_j |I_j| · R_j

at every operating point, where the current-type sources j are ideal current sources
(``supply``), constant-current loads, and current-limited sources (their ``imax``; their EMF
counts in the first sum as well). Where a current source has no path in N* (only diodes or
constant-power loads return its current), its ``R_j`` is infinite and so is the bound: nothing
is claimed. A solution beyond ``B`` is not an operating point of the circuit: it rests on the
solver's own devices (a 1 pS leak standing in for a blocked element, a divergent iterate).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["PotentialBound", "potential_bound"]


@dataclass
class PotentialBound:
    value: float  # volts; inf where a current source has no resistive path
    emf_sum: float
    current_terms: list[tuple[str, float, float]]  # (element, |I|, R seen in N*)

    def describe(self) -> str:
        parts = [f"sum of |emf| {self.emf_sum:.4g} V"]
        for name, cur, r in sorted(self.current_terms, key=lambda t: -t[1] * t[2])[:3]:
            parts.append(f"{name} {cur:.4g} A x {r:.4g} Ohm")
        return " + ".join(parts)


def potential_bound(bt) -> PotentialBound:
    """The bound ``B`` of the module docstring for a branch table (its starting models)."""
    n = bt.n_nodes
    nonlinear = bt.nonlinear if bt.nonlinear is not None else np.zeros(bt.n_elements, dtype=bool)
    emf_sum = 0.0
    cur_src: list[tuple[int, float]] = []  # (element, |I|)
    for kind_name, (pos, cols) in bt.groups.items():
        if "emf" in cols:
            emf_sum += float(np.nansum(np.abs(cols["emf"])))
        if kind_name == "source" and "imax" in cols:
            lim = ~np.isnan(cols["imax"])
            cur_src += [(int(p), float(abs(x))) for p, x in zip(pos[lim], cols["imax"][lim])]
    lin = ~nonlinear
    ideal = lin & bt.is_voltage & (bt.a != bt.b)
    # ideal voltage-form branches that are not sources (links, ideal fuses) have e = 0; sources count above
    emf_sum += float(np.abs(bt.e[ideal & ~_has_emf(bt)]).sum())
    current_only = lin & ~bt.is_voltage & (bt.g == 0) & (bt.c != 0)
    cur_src += [(int(k), float(abs(bt.c[k]))) for k in np.flatnonzero(current_only)]
    if not cur_src:
        return PotentialBound(emf_sum, emf_sum, [])
    # N*: contract ideal branches, keep linear conductances
    parent = np.arange(n)

    def find(u: int) -> int:
        while parent[u] != u:
            parent[u] = parent[parent[u]]
            u = parent[u]
        return u

    for k in np.flatnonzero(ideal):
        ra, rb = find(int(bt.a[k])), find(int(bt.b[k]))
        if ra != rb:
            parent[ra] = rb
    top = np.array([find(u) for u in range(n)])
    res = lin & ~bt.is_voltage & (bt.g > 0) & np.isfinite(bt.g)
    ta, tb = top[bt.a[res]], top[bt.b[res]]
    keep = ta != tb
    ta, tb, gk = ta[keep], tb[keep], bt.g[res][keep]
    uniq, inv = np.unique(top, return_inverse=True)
    m = len(uniq)
    ia, ib = np.searchsorted(uniq, ta), np.searchsorted(uniq, tb)
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    adj = coo_matrix((np.ones(len(ia)), (ia, ib)), shape=(m, m))
    _, comp = connected_components(adj, directed=False)
    terms: list[tuple[str, float, float]] = []
    need = []
    for k, cur in cur_src:
        if cur == 0:
            continue
        u, w = int(inv[bt.a[k]]), int(inv[bt.b[k]])
        if u == w:
            continue
        if comp[u] != comp[w]:
            return PotentialBound(float("inf"), emf_sum, [(bt.names[k], cur, float("inf"))])
        need.append((k, cur, u, w))
    if need:
        # grounded Laplacian of N*: each component pinned at one node (no extra path between two of its nodes)
        rows = np.concatenate([ia, ib, ia, ib])
        cols_ = np.concatenate([ia, ib, ib, ia])
        vals = np.concatenate([gk, gk, -gk, -gk])
        first = np.unique(comp, return_index=True)[1]
        gmax = float(gk.max(initial=1.0))
        rows = np.concatenate([rows, first])
        cols_ = np.concatenate([cols_, first])
        vals = np.concatenate([vals, np.full(len(first), gmax)])
        L = coo_matrix((vals, (rows, cols_)), shape=(m, m)).tocsc()
        U = np.zeros((m, len(need)))
        for j, (_, _, u, w) in enumerate(need):
            U[u, j] += 1.0
            U[w, j] -= 1.0
        if m <= 400:
            X = np.linalg.solve(L.toarray(), U)
        else:
            from scipy.sparse.linalg import splu

            X = splu(L).solve(U)
        for j, (k, cur, u, w) in enumerate(need):
            r = abs(float(X[u, j] - X[w, j]))
            terms.append((bt.names[k], cur, r))
    value = emf_sum + sum(c * r for _, c, r in terms)
    return PotentialBound(value, emf_sum, terms)


def _has_emf(bt) -> np.ndarray:
    """Elements whose kind has an emf column (counted from the columns, not from e)."""
    out = np.zeros(bt.n_elements, dtype=bool)
    for _, (pos, cols) in bt.groups.items():
        if "emf" in cols:
            out[pos] = True
    return out
