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
        for (k, cur, _, _), r in zip(need, _resistances(m, ia, ib, gk, comp, [(u, w) for _, _, u, w in need])):
            terms.append((bt.names[k], cur, r))
    value = emf_sum + sum(c * r for _, c, r in terms)
    return PotentialBound(value, emf_sum, terms)


#: conductances more than this many times the smallest one are merged before the linear solve
SPAN = 1e8


def _resistances(m: int, ia, ib, gk, comp, pairs: list[tuple[int, int]]) -> list[float]:
    """For each node pair, an upper bound on the resistance between them in the network of
    conductances ``gk`` on edges ``(ia, ib)`` over ``m`` nodes (components ``comp``).

    Where the conductances span at most ``SPAN`` the grounded Laplacian is solved as it is and
    the answer is the effective resistance itself. Wider spans (a 1e-5 m cable of 0.6 m2 beside
    600 kOhm resistors: 1e18) leave a floating-point Laplacian singular or wrong, so every edge
    above ``SPAN`` times the smallest conductance is first merged into its nodes; that lowers
    the resistance, by at most the resistances of a spanning forest of the merged edges (the
    unit current of the merged network enters and leaves each merged group once, and no
    branch of a tree inside it carries more than that unit: Thomson's principle then bounds
    the resistance by the energy of that current), so their sum is added back. Each result is
    also held to the series resistance of the least resistive path (Rayleigh's monotonicity),
    which alone stands where the solve fails.
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components, dijkstra, minimum_spanning_tree

    gk = np.asarray(gk, dtype=float)
    gmin = float(gk.min(initial=1.0))
    stiff = gk > SPAN * gmin
    extra = 0.0
    node = np.arange(m)
    if stiff.any():
        merged = coo_matrix((np.ones(int(stiff.sum())), (ia[stiff], ib[stiff])), shape=(m, m))
        _, node = connected_components(merged, directed=False)
        # any spanning forest of the merged edges carries the argument; the least resistive is the tightest
        extra = float(minimum_spanning_tree(_edge_matrix(m, ia[stiff], ib[stiff], 1.0 / gk[stiff])).sum())
    soft = ~stiff & (node[ia] != node[ib])
    labels, sub = np.unique(node, return_inverse=True)
    sa, sb, gs = sub[ia[soft]], sub[ib[soft]], gk[soft]
    n = len(labels)
    solved: list[float] = [float("nan")] * len(pairs)
    try:
        rows = np.concatenate([sa, sb, sa, sb])
        cols_ = np.concatenate([sa, sb, sb, sa])
        vals = np.concatenate([gs, gs, -gs, -gs])
        # each component pinned at one node (no extra path between two of its nodes)
        first = np.unique(comp[np.unique(node, return_index=True)[1]], return_index=True)[1]
        pin = float(gs.max(initial=1.0))
        L = coo_matrix((np.concatenate([vals, np.full(len(first), pin)]), (np.concatenate([rows, first]), np.concatenate([cols_, first]))), shape=(n, n)).tocsc()
        U = np.zeros((n, len(pairs)))
        for j, (u, w_) in enumerate(pairs):
            U[sub[u], j] += 1.0
            U[sub[w_], j] -= 1.0
        if n <= 400:
            X = np.linalg.solve(L.toarray(), U)
        else:
            from scipy.sparse.linalg import splu

            X = splu(L).solve(U)
        for j, (u, w_) in enumerate(pairs):
            r = float(X[sub[u], j] - X[sub[w_], j])
            if np.isfinite(r) and r >= 0:
                solved[j] = r + extra
    except (np.linalg.LinAlgError, RuntimeError, ValueError):
        pass
    if not stiff.any() and all(np.isfinite(solved)):
        return solved
    # the least resistive path: series resistance along it, an upper bound with no solve
    R = _edge_matrix(m, ia, ib, 1.0 / gk)
    sources = sorted({u for u, _ in pairs})
    dist = dijkstra(R, directed=False, indices=sources)
    row = {u: k for k, u in enumerate(sources)}
    out = []
    for (u, w_), r in zip(pairs, solved):
        path = float(dist[row[u], w_]) * (1 + 1e-12)
        out.append(min(r, path) if np.isfinite(r) else path)
    return out


def _edge_matrix(m: int, ia, ib, r) -> "csr_matrix":
    """Upper-triangular sparse matrix of edge weights ``r`` (the smallest of parallel edges)."""
    from scipy.sparse import csr_matrix

    lo, hi = np.minimum(ia, ib), np.maximum(ia, ib)
    keys, inv = np.unique(lo.astype(np.int64) * m + hi, return_inverse=True)
    best = np.full(len(keys), np.inf)
    np.minimum.at(best, inv.reshape(-1), r)
    return csr_matrix((best, (keys // m, keys % m)), shape=(m, m))


def _has_emf(bt) -> np.ndarray:
    """Elements whose kind has an emf column (counted from the columns, not from e)."""
    out = np.zeros(bt.n_elements, dtype=bool)
    for _, (pos, cols) in bt.groups.items():
        if "emf" in cols:
            out[pos] = True
    return out
