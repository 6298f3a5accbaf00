"""Many samples of one circuit, solved together: one topology, values per sample.

A study (``dcnet sweep``, ``dcnet spread``) changes element values but not which
nodes they join, so every sample has the same MNA layout. This module assembles the
samples' systems side by side and solves them together:

* **dense** systems (up to :data:`~dcnet.analysis.mna.DENSE_LIMIT` unknowns) are stacked
  into one ``(samples, n, n)`` array and solved by numpy's stacked ``np.linalg.solve``
  (LAPACK ``gesv`` for each matrix, with no Python loop). The entries are accumulated in
  exactly the order :func:`dcnet.analysis.mna.assemble` uses, so a sample gives the very
  same floats as solving that circuit on its own;
* **sparse** systems share one analysis of their pattern: the compressed-column structure
  and the fill-reducing column ordering are computed once (from the nominal circuit's
  factorisation), each sample only scatters its values into the fixed structure and is
  factored numerically with that ordering.

Every sample is verified as a single solve is (Kirchhoff's current law at every node and the
power sum), with one round of iterative refinement for the samples that need it; a sample
that still does not verify is refused, naming it.
"""

from __future__ import annotations

import numpy as np

from ..errors import NumericalError
from .branches import BranchTable
from .solve import BOUND_EPS, REFUSE_REL, WARN_REL, _incident, _leaving, node_check, recover_currents, roundoff_gamma

__all__ = ["BatchSolution", "solve_batch", "dense_chunk"]


class BatchSolution:
    """Potentials, element voltages and currents of many samples (one row per sample)."""

    def __init__(self, potentials: np.ndarray, v: np.ndarray, i: np.ndarray, balance: dict, systems=None):
        self.potentials = potentials
        self.v = v
        self.i = i
        self.balance = balance
        # (dense stack A or sparse [(A, lu)], the sparse pattern or None, (row, N, vb)): for
        # further right-hand sides on the same matrices (prospective fault currents)
        self._systems = systems

    def solve_more(self, B: np.ndarray) -> np.ndarray:
        """Solve every sample's own matrix for the columns of ``B`` (unknowns x k, the same for
        every sample, or samples x unknowns x k); returns (samples, unknowns, k)."""
        mats, sparse, _layout = self._systems
        S = mats.shape[0] if sparse is None else len(mats)
        B = np.asarray(B, dtype=float)
        if B.ndim == 2:
            B = np.broadcast_to(B, (S,) + B.shape)
        if sparse is None:
            A = mats
            if A.shape[1] == 0:
                return np.zeros((A.shape[0], 0, B.shape[2]))
            return np.linalg.solve(A, B)
        return np.stack([np.asarray(sparse.Pc @ lu.solve(np.ascontiguousarray(B[k]))).reshape(B[k].shape) for k, (_A, lu) in enumerate(mats)])

    @property
    def rows(self):
        """(row of each node in the system, -1 for ground; number of node rows; voltage branches)."""
        return self._systems[2]


def _rows(bt: BranchTable):
    n = bt.n_nodes
    row = np.arange(n, dtype=np.int64)
    row = row - (row > bt.ground)
    row[bt.ground] = -1
    return row, n - 1


def _pattern(bt: BranchTable, g: np.ndarray, c: np.ndarray):
    """The triplet layout of :func:`dcnet.analysis.mna.triplets`, for values that vary per sample.

    Returns the matrix triplet targets (I, J), which branch feeds each triplet and with what
    sign, and the right-hand side's targets and sources, all in mna's order.
    """
    row, N = _rows(bt)
    ra, rb = row[bt.a], row[bt.b]
    gnz = (g != 0).any(axis=0) if g.ndim == 2 else g != 0
    loop = bt.a == bt.b  # left out as mna.triplets leaves them out
    adm = np.flatnonzero(~bt.is_voltage & gnz & ~loop)
    pa, pb = ra[adm], rb[adm]
    vb = np.flatnonzero(bt.solved_voltage)
    k = np.arange(N, N + len(vb), dtype=np.int64)
    va, vbb = ra[vb], rb[vb]
    I = np.concatenate([pa, pb, pa, pb, va, vbb, k, k])
    J = np.concatenate([pa, pb, pb, pa, k, k, va, vbb])
    # source of each triplet's value: a branch's g (with a sign) or a constant +-1
    src = np.concatenate([adm, adm, adm, adm, np.full(4 * len(vb), -1)])
    sign = np.concatenate([np.ones(2 * len(adm)), -np.ones(2 * len(adm)), np.ones(len(vb)), -np.ones(len(vb)), np.ones(len(vb)), -np.ones(len(vb))])
    keep = (I >= 0) & (J >= 0)
    I, J, src, sign = I[keep], J[keep], src[keep], sign[keep]
    cur_nz = (c != 0).any(axis=0) if c.ndim == 2 else c != 0
    nz = np.flatnonzero(~bt.is_voltage & cur_nz & ~loop)
    sa, sb = ra[nz], rb[nz]
    # mna subtracts c at the first node for every branch, then adds it at the second
    z_tgt = np.concatenate([sa[sa >= 0], sb[sb >= 0]])
    z_src = np.concatenate([nz[sa >= 0], nz[sb >= 0]])
    z_sign = np.concatenate([-np.ones(int((sa >= 0).sum())), np.ones(int((sb >= 0).sum()))])
    return row, N, vb, I, J, src, sign, z_tgt, z_src, z_sign


def _ranks(targets: np.ndarray) -> list[np.ndarray]:
    """Positions grouped by how many earlier positions hit the same target (0, 1, 2...).

    Adding rank 0, then rank 1, ... reproduces a sequential ``np.add.at`` exactly, since within
    a rank every target appears once.
    """
    if not len(targets):
        return []
    order = np.argsort(targets, kind="stable")
    t = targets[order]
    start = np.r_[0, np.flatnonzero(t[1:] != t[:-1]) + 1]
    group_start = np.repeat(start, np.diff(np.r_[start, len(t)]))
    rank = np.empty(len(t), dtype=np.int64)
    rank[order] = np.arange(len(t)) - group_start
    return [np.flatnonzero(rank == r) for r in range(int(rank.max()) + 1)]


def _values(src: np.ndarray, sign: np.ndarray, g: np.ndarray, S: int) -> np.ndarray:
    """Triplet values per sample: sign * g[branch], or the sign itself for constants."""
    out = np.empty((S, len(src)))
    from_g = src >= 0
    gs = g[:, src[from_g]] if g.ndim == 2 else np.broadcast_to(g[src[from_g]], (S, int(from_g.sum())))
    out[:, from_g] = np.where(sign[from_g] > 0, gs, -gs)
    out[:, ~from_g] = sign[~from_g]
    return out


def dense_chunk(bt: BranchTable, g, c, e, *, refine: bool = True):
    """Assemble and solve the dense systems of one chunk of samples.

    ``g``, ``c``, ``e`` are ``(samples, elements)`` arrays (or one row shared by all samples).
    Returns (x, A, z, layout, W) with ``x`` of shape ``(samples, unknowns)`` and ``W`` the
    solutions of the round-off bound's right-hand sides (``mna.bound_rhs``), solved in the same call.
    """
    S = max(np.shape(a)[0] if np.ndim(a) == 2 else 1 for a in (g, c, e))
    row, N, vb, I, J, src, sign, z_tgt, z_src, z_sign = _pattern(bt, g, c)
    m = N + len(vb)
    A = np.zeros((S, m * m))
    V = _values(src, sign, g, S)
    flat = I * m + J
    for r, sel in enumerate(_ranks(flat)):
        if r == 0:
            A[:, flat[sel]] = V[:, sel]  # 0 + x is x: the first value at each entry is placed
        else:
            A[:, flat[sel]] += V[:, sel]
    z = np.zeros((S, m))
    zv = _values(z_src, z_sign, c, S)
    for r, sel in enumerate(_ranks(z_tgt)):
        if r == 0:
            z[:, z_tgt[sel]] = zv[:, sel]
        else:
            z[:, z_tgt[sel]] += zv[:, sel]
    if len(vb):
        z[:, N:] = e[:, vb] if np.ndim(e) == 2 else e[vb]
    A = A.reshape(S, m, m)
    finite = np.isfinite(V).all(axis=1)  # A is made of these values
    if not finite.all():
        k = int(np.flatnonzero(~finite)[0])
        raise NumericalError(f"the circuit matrix holds a value that is not finite (sample {k + 1})")
    # row sums of |A| over the potential and the current unknowns, from the entries' values (an
    # upper bound where entries add up), for the round-off bound's right-hand sides (mna.bound_rhs)
    slot = (I + m * (J >= N))[None, :] + (2 * m * np.arange(S))[:, None]
    sums = np.bincount(slot.ravel(), weights=np.abs(V).ravel(), minlength=2 * m * S).reshape(S, 2, m).transpose(0, 2, 1)
    x, W = _stacked_solve(A, z, N, sums)
    return x, A, z, (row, N, vb), W


def _stacked_solve(A: np.ndarray, z: np.ndarray, N: int, sums: np.ndarray):
    """Every sample's solution and its round-off bound columns (mna.bound_rhs; ``sums`` are the
    row sums of |A| over the potential and the current unknowns), in one stacked call."""
    S, m = A.shape[0], A.shape[1]
    if m == 0:
        return np.zeros((S, 0)), np.zeros((S, 0, 3))
    B = np.empty((S, m, 4))
    B[:, :, 0] = z
    B[:, :, 1:3] = sums
    B[:, :, 3] = np.abs(z)
    try:
        X = np.linalg.solve(A, B)
        return X[:, :, 0].copy(), X[:, :, 1:]
    except np.linalg.LinAlgError:
        # find the singular sample(s) to name them; the others are still solved
        for k in range(A.shape[0]):
            try:
                np.linalg.solve(A[k], z[k])
            except np.linalg.LinAlgError:
                raise NumericalError(f"the circuit matrix is singular (sample {k + 1})") from None
        raise NumericalError("the circuit matrix is singular") from None  # pragma: no cover


class SparsePattern:
    """The fixed compressed-column structure and column ordering shared by every sample."""

    def __init__(self, bt: BranchTable, g, c):
        from scipy.sparse import csc_matrix
        from scipy.sparse.linalg import splu

        self.layout = _pattern(bt, g, c)
        row, N, vb, I, J, src, sign, *_ = self.layout
        m = N + len(vb)
        self.m = m
        key = J * m + I  # column-major: the compressed-column order
        uniq, self.slot = np.unique(key, return_inverse=True)
        self.indices = (uniq % m).astype(np.int32)
        self.indptr = np.r_[0, np.cumsum(np.bincount(uniq // m, minlength=m))].astype(np.int32)
        self.nnz = len(uniq)
        self._csc = csc_matrix
        # the ordering: one fill-reducing analysis of the nominal matrix
        V = _values(src, sign, g if np.ndim(g) == 1 else g[0], 1)[0]
        nominal = self.matrix(V)
        try:
            lu = splu(nominal, permc_spec="MMD_AT_PLUS_A")
        except RuntimeError as exc:
            raise NumericalError(f"the circuit matrix is singular ({exc})") from None
        perm = lu.perm_c  # column j of the factored matrix is column perm^-1... of A
        self.Pc = csc_matrix((np.ones(m), (perm, np.arange(m))), shape=(m, m))
        self.Pc = self.Pc.T.tocsc()  # A @ Pc puts the columns in the factor's order

    def matrix(self, values: np.ndarray):
        data = np.bincount(self.slot, weights=values, minlength=self.nnz)
        return self._csc((data, self.indices, self.indptr), shape=(self.m, self.m))


def sparse_samples(bt: BranchTable, g, c, e, pattern: SparsePattern):
    """Solve sparse samples one after another with the shared structure and ordering."""
    from scipy.sparse.linalg import splu

    S = max(np.shape(a)[0] if np.ndim(a) == 2 else 1 for a in (g, c, e))
    row, N, vb, I, J, src, sign, z_tgt, z_src, z_sign = pattern.layout
    m = pattern.m
    V = _values(src, sign, g, S)
    zv = _values(z_src, z_sign, c, S)
    x = np.empty((S, m))
    W = np.empty((S, m, 3))
    mats, rhs = [], []
    for k in range(S):
        A = pattern.matrix(V[k])
        z = np.zeros(m)
        np.add.at(z, z_tgt, zv[k])
        if len(vb):
            z[N:] = e[k, vb] if np.ndim(e) == 2 else e[vb]
        try:
            lu = splu((A @ pattern.Pc).tocsc(), permc_spec="NATURAL")
        except RuntimeError as exc:
            raise NumericalError(f"the circuit matrix is singular (sample {k + 1}: {exc})") from None
        from .mna import bound_rhs

        X = pattern.Pc @ lu.solve(np.column_stack([z, bound_rhs(A, N, z)]))
        x[k] = X[:, 0]
        W[k] = X[:, 1:]
        mats.append((A, lu))
        rhs.append(z)
    return x, mats, np.array(rhs), (row, N, vb), W


def currents_batch(bt: BranchTable, layout, x: np.ndarray, g, c):
    """Potentials, element voltages and currents for every sample (as :func:`solve.currents`)."""
    row, N, vb = layout
    S = x.shape[0]
    pot = np.zeros((S, bt.n_nodes))
    mask = row >= 0
    pot[:, mask] = x[:, row[mask]]
    v = pot[:, bt.a] - pot[:, bt.b]
    i = g * v + c
    if len(vb):
        i[:, vb] = x[:, N:]
    return pot, v, i


def verify_batch(bt: BranchTable, pot, v, i, g, c, *, size: int | None = None, bounds=None) -> dict:
    """The self-check of :func:`dcnet.analysis.solve.verify`, for every sample at once: each node's
    residual against the currents that meet there, beyond their round-off (``solve.node_check``)."""
    S, n = pot.shape
    m = len(bt.a)
    g2 = np.broadcast_to(g, (S, m))
    c2 = np.broadcast_to(c, (S, m))
    gamma = roundoff_gamma(size if size is not None else n + int(bt.is_voltage.sum()))
    chk = node_check(bt.a, bt.b, n, pot, i, g2, c2, bt.is_voltage, gamma, bounds, bt.ground)
    rel = np.where(np.isnan(chk["relative"]), np.inf, chk["relative"])
    kcl_rel = rel.max(axis=1, initial=0.0)
    kcl = chk["residual"].max(axis=1, initial=0.0)
    p = v * i
    psum = p.sum(axis=1)
    pflow = np.abs(p).sum(axis=1)
    p_round = np.sum(np.abs(pot) * chk["roundoff"], axis=1) + gamma * pflow
    with np.errstate(divide="ignore", invalid="ignore"):
        p_excess = np.where(np.isfinite(psum), np.maximum(np.abs(psum) - p_round, 0.0), np.inf)
        p_rel = np.where(pflow > 0, p_excess / np.where(pflow > 0, pflow, 1.0), np.where(p_excess > 0, np.inf, 0.0))
    return {
        "kcl_max_residual_A": kcl,
        "power_sum_W": psum,
        "kcl_relative": kcl_rel,
        "power_relative": p_rel,
        "ok": (kcl_rel <= WARN_REL) & (p_rel <= WARN_REL),
        "_nodes": chk,
    }


def solve_batch(bt: BranchTable, g, c, e, *, sparse: SparsePattern | None = None) -> BatchSolution:
    """Solve every sample of one chunk and verify each as a single solve is (refining those that
    need it, one step of refinement judged for all, unresolved currents taken from Kirchhoff's law)."""
    if sparse is None:
        x, A, z, layout, W = dense_chunk(bt, g, c, e)
    else:
        x, mats, z, layout, W = sparse_samples(bt, g, c, e, sparse)
    S, m = x.shape
    zero = np.zeros(S)
    pot, v, i = currents_batch(bt, layout, x, g, c)
    bounds = bounds_batch(bt, layout, W, x, z, pot, g, c, zero)
    bal = verify_batch(bt, pot, v, i, g, c, size=m, bounds=bounds)

    def correction(rows, stacked=False):
        rows = np.asarray(list(rows), dtype=np.int64)
        if sparse is None and stacked:  # one stacked solve (for judging only: not applied to x)
            r = z[rows] - np.einsum("sij,sj->si", A[rows], x[rows])
            return np.linalg.solve(A[rows], r[:, :, None])[:, :, 0]
        out = np.zeros((len(rows), m))
        for j, k in enumerate(rows):  # as a single solve refines: the same floats
            if sparse is None:
                out[j] = np.linalg.solve(A[k], z[k] - A[k] @ x[k])
            else:
                Ak, lu = mats[k]
                out[j] = sparse.Pc @ lu.solve(z[k] - Ak @ x[k])
        return out

    bad = np.flatnonzero(~bal["ok"])
    if len(bad):
        # one round of iterative refinement for the samples whose self-check is not clean
        x[bad] = x[bad] + correction(bad)
        pot, v, i = currents_batch(bt, layout, x, g, c)
        bounds = bounds_batch(bt, layout, W, x, z, pot, g, c, zero)
        bal = verify_batch(bt, pot, v, i, g, c, size=m, bounds=bounds)
    worst = np.maximum(bal["kcl_relative"], bal["power_relative"])
    refused = np.flatnonzero(~(worst <= REFUSE_REL))
    if len(refused):
        k = int(refused[0])
        raise NumericalError(
            f"sample {k + 1} does not verify: Kirchhoff residual {bal['kcl_max_residual_A'][k]:.3g} A, "
            f"power sum {bal['power_sum_W'][k]:.3g} W",
            hint="element values may span too many decades in this sample; check the range of the study",
        )
    # the backward error: one step of refinement must not move any sample's answer (solve._check_refinement)
    if m:
        dx = correction(range(S), stacked=True)
        _judge_refinement_batch(bt, layout, x, z, W, dx, g, bal["_nodes"], bounds)
    # unresolved currents from Kirchhoff's law, then currents within round-off are zero, as in a
    # single solve (solve.recover_currents, solve._finish)
    for k in range(S):
        loose = bounds[k] > 1e-3 * np.abs(i[k])
        if loose.any():
            i[k], bounds[k] = recover_currents(bt, i[k], bounds[k])
    n = bt.n_nodes
    end = np.abs(_leaving(bt.a, bt.b, n, i))
    meet = BOUND_EPS * _incident(bt.a, bt.b, n, np.abs(i))
    bounds = bounds + np.minimum(end[:, bt.a], end[:, bt.b]) + np.maximum(meet[:, bt.a], meet[:, bt.b])
    i = np.where((np.abs(i) <= bounds) | (bt.a == bt.b), 0.0, i)  # an element on one node carries nothing (solve._finish)
    bal.pop("_nodes")
    sol = BatchSolution(pot, v, i, bal, (A if sparse is None else mats, sparse, layout))
    sol.bounds = bounds
    return sol


def _judge_refinement_batch(bt, layout, x, z, W, dx, g, nodes, bounds) -> None:
    """:func:`dcnet.analysis.solve._check_refinement` for every sample."""
    from .solve import BOUND_EPS, REFINE_REFUSE

    row, N, vb = layout
    S = x.shape[0]
    xv = np.abs(x[:, :N]).max(axis=1, initial=0.0)
    xi = np.abs(x[:, N:]).max(axis=1, initial=0.0)
    xbound = BOUND_EPS * (np.abs(W[:, :, 0]) * xv[:, None] + np.abs(W[:, :, 1]) * xi[:, None] + np.abs(W[:, :, 2]))
    g2 = np.broadcast_to(g, (S, len(bt.a)))
    gmax = np.abs(g2[:, ~bt.is_voltage]).max(axis=1, initial=0.0)
    zn = np.abs(z).max(axis=1, initial=0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        vscale = np.maximum(np.maximum(xv, bt.max_emf), np.where(gmax > 0, zn / np.where(gmax > 0, gmax, 1.0), 0.0))
    over_v = (np.abs(dx[:, :N]) - (REFINE_REFUSE * vscale[:, None] + 4 * xbound[:, :N])).max(axis=1, initial=-1.0) > 0
    dpot = np.zeros((S, bt.n_nodes))
    mask = row >= 0
    dpot[:, mask] = dx[:, row[mask]]
    di = g2 * (dpot[:, bt.a] - dpot[:, bt.b])
    if len(vb):
        di[:, vb] = dx[:, N:]
    cur, rnd = nodes["current"], nodes["roundoff"]
    allow = REFINE_REFUSE * np.maximum(cur[:, bt.a], cur[:, bt.b]) + 4 * bounds + np.maximum(rnd[:, bt.a], rnd[:, bt.b])
    bad = (np.abs(di) > allow).any(axis=1) | over_v | ~np.isfinite(dx).all(axis=1)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        raise NumericalError(
            f"sample {k + 1} does not verify: one step of iterative refinement moves its answer, so the solve has no "
            "trustworthy digits there",
            hint="element values may span too many decades in this sample; check the range of the study",
        )


def bounds_batch(bt: BranchTable, layout, W, x, z, pot, g, c, floor) -> np.ndarray:
    """The round-off bound of every element current of every sample (solve.current_bounds)."""
    row, N, vb = layout
    S = x.shape[0]
    if x.shape[1] == 0:
        return np.broadcast_to(np.asarray(floor, dtype=float)[:, None], (S, bt.n_elements)).copy()
    xv = np.abs(x[:, :N]).max(axis=1, initial=0.0)
    xi = np.abs(x[:, N:]).max(axis=1, initial=0.0)
    zn = np.abs(z).max(axis=1, initial=0.0)
    dx = BOUND_EPS * (np.abs(W[:, :, 0]) * xv[:, None] + np.abs(W[:, :, 1]) * xi[:, None] + np.abs(W[:, :, 2]))
    dv = np.zeros((S, bt.n_nodes))
    mask = row >= 0
    dv[:, mask] = dx[:, row[mask]]
    ga = np.abs(np.broadcast_to(g, (S, bt.n_elements)))
    ca = np.abs(np.broadcast_to(c, (S, bt.n_elements)))
    pa, pb = np.abs(pot[:, bt.a]), np.abs(pot[:, bt.b])
    bound = ga * (dv[:, bt.a] + dv[:, bt.b]) + BOUND_EPS * (ga * (pa + pb) + ca)
    if len(vb):
        bound[:, vb] = dx[:, N:]
    if bt.shadow is not None and bt.shadow.any():
        bound[:, bt.shadow] = bound[:, bt.representative[bt.shadow]]
    return bound + np.asarray(floor, dtype=float)[:, None]
