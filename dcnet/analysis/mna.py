"""Modified nodal analysis: assemble the system from branch arrays, and solve it.

Unknowns are the potentials of every node but ground, then one current per
voltage-form branch (ideal sources and links). Admittance-form branches
(``i = g*v + c``) stamp ``g`` into the nodal block and ``c`` into the right-hand
side; they add no unknown. Assembly is vectorised: COO triplets for all
branches in one numpy step.

Rows are "current leaving the node through its branches = 0"; the voltage rows
are ``V(a) - V(b) = e``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["System", "assemble", "solve_system", "bound_rhs", "DENSE_LIMIT"]

#: systems with at most this many unknowns are solved densely
DENSE_LIMIT = 400


@dataclass
class System:
    """``A x = z`` with the layout needed to read the answer back."""

    A: object  # dense ndarray or scipy.sparse.csc_matrix
    z: np.ndarray
    row_of_node: np.ndarray  # node index -> unknown row, -1 for ground
    vbranch: np.ndarray  # element positions of voltage-form branches, in unknown order
    n_node_rows: int
    #: parts cut off by open elements, pinned in A and z (dcnet.analysis.islands), or None
    islands: object = None

    @property
    def size(self) -> int:
        return len(self.z)

    @property
    def dense(self) -> bool:
        return isinstance(self.A, np.ndarray)

    def potentials(self, x: np.ndarray) -> np.ndarray:
        """Potentials of all nodes (ground 0) from a solution vector."""
        full = np.zeros(len(self.row_of_node), dtype=x.dtype)
        mask = self.row_of_node >= 0
        full[mask] = x[self.row_of_node[mask]]
        return full


def triplets(bt, g=None, c=None, e=None):
    """COO rows, columns, values and right-hand side of the MNA system.

    ``g``, ``c``, ``e`` default to the branch table's and may be replaced (as
    nonlinear companion models and studies do) without touching the topology.
    They may be object arrays of sympy expressions (symbolic formulas): the triplets
    then hold those expressions.
    """
    g = bt.g if g is None else g
    c = bt.c if c is None else c
    e = bt.e if e is None else e
    n = bt.n_nodes
    row = np.arange(n, dtype=np.int64)
    row = row - (row > bt.ground)
    row[bt.ground] = -1
    N = n - 1
    ra, rb = row[bt.a], row[bt.b]

    # a branch from a node to itself stamps +g and -g on one diagonal entry (and -c, +c on one
    # right-hand side entry): nothing in exact arithmetic, but in floating point a large g
    # there swallows the small conductances of that node (a diode's leak), so it is left out
    loop = bt.a == bt.b
    adm = ~bt.is_voltage & np.asarray(g != 0, dtype=bool) & ~loop  # (object arrays compare entry by entry)
    pa, pb, pg = ra[adm], rb[adm], g[adm]
    vb = np.flatnonzero(bt.solved_voltage)
    k = np.arange(N, N + len(vb), dtype=np.int64)
    va, vbb = ra[vb], rb[vb]
    one = np.ones(len(vb))
    I = np.concatenate([pa, pb, pa, pb, va, vbb, k, k])
    J = np.concatenate([pa, pb, pb, pa, k, k, va, vbb])
    V = np.concatenate([pg, pg, -pg, -pg, one, -one, one, -one])
    keep = (I >= 0) & (J >= 0)
    I, J, V = I[keep], J[keep], V[keep]

    symbolic = object in (np.asarray(c).dtype, np.asarray(e).dtype)  # sympy entries (analysis/symbolic.py)
    z = np.zeros(N + len(vb), dtype=object if symbolic else float)
    cur = np.where(bt.is_voltage, 0.0, c)
    nz = np.asarray(cur != 0, dtype=bool) & ~loop
    if nz.any():
        sa, sb, sc = ra[nz], rb[nz], cur[nz]
        np.subtract.at(z, sa[sa >= 0], sc[sa >= 0])
        np.add.at(z, sb[sb >= 0], sc[sb >= 0])
    z[N:] = e[vb]
    return I, J, V, z, row, vb, N


def assemble(bt, g=None, c=None, e=None, *, dense: bool | None = None) -> System:
    """The MNA system of a branch table (dense when small, sparse CSC otherwise)."""
    I, J, V, z, row, vb, N = triplets(bt, g, c, e)
    size = len(z)
    if dense is None:
        dense = size <= DENSE_LIMIT
    if dense:
        A = np.zeros((size, size))
        np.add.at(A, (I, J), V)
    else:
        from scipy.sparse import csc_matrix

        A = csc_matrix((V, (I, J)), shape=(size, size))
        A.sum_duplicates()
    return System(A, z, row, vb, N)


class Factor:
    """A factorisation of A that can solve for many right-hand sides.

    Small dense systems keep A and use LAPACK's solver each time (no scipy
    import on the small-circuit path); sparse ones keep a SuperLU factor.
    """

    def __init__(self, system: System):
        from ..errors import NumericalError

        self.system = system
        self.bound_columns = None  # solutions of bound_rhs, when the solve computed them
        if system.dense:
            self._lu = None
            if system.size and not np.all(np.isfinite(system.A)):
                raise NumericalError("the circuit matrix holds a value that is not finite")
        else:
            from scipy.sparse.linalg import splu

            try:
                self._lu = splu(system.A, permc_spec="MMD_AT_PLUS_A")
            except RuntimeError as exc:
                raise NumericalError(f"the circuit matrix is singular ({exc})") from None

    def solve(self, z: np.ndarray) -> np.ndarray:
        from ..errors import NumericalError

        if self._lu is None:
            if self.system.size == 0:
                return np.zeros(0)
            try:
                return np.linalg.solve(self.system.A, z)
            except np.linalg.LinAlgError:
                raise NumericalError("the circuit matrix is singular") from None
        return self._lu.solve(z)


def bound_rhs(A, N: int, z) -> np.ndarray:
    """Right-hand sides for the round-off bound of a solve (dcnet.analysis.solve.current_bounds):
    the row sums of ``|A|`` over the potential unknowns, over the branch-current unknowns, and
    ``|z|`` (componentwise: a large source term at one node is not spread over every other).
    Known before the solve, they are solved with the system's own right-hand side in one call."""
    absA = np.abs(A) if isinstance(A, np.ndarray) else abs(A)
    m = A.shape[0]
    out = np.zeros((m, 3))
    if isinstance(A, np.ndarray):
        out[:, 0] = absA[:, :N].sum(axis=1)
        out[:, 1] = absA[:, N:].sum(axis=1)
    else:
        out[:, 0] = np.asarray(absA[:, :N].sum(axis=1)).ravel()
        out[:, 1] = np.asarray(absA[:, N:].sum(axis=1)).ravel()
    out[:, 2] = np.abs(z)
    return out


def solve_system(system: System) -> tuple[np.ndarray, Factor]:
    """Factor and solve; return the solution vector and the factor (for refinement or reuse).

    The round-off bound's right-hand sides (:func:`bound_rhs`) are solved in the same call and
    kept as ``factor.bound_columns``.
    """
    f = Factor(system)
    if system.size == 0:
        f.bound_columns = np.zeros((0, 3))
        return np.zeros(0), f
    B = np.column_stack([system.z, bound_rhs(system.A, system.n_node_rows, system.z)])
    X = np.asarray(f.solve(B)).reshape(B.shape)
    f.bound_columns = X[:, 1:]
    return X[:, 0].copy(), f
