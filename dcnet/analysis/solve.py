"""Netlist to verified :class:`~dcnet.analysis.solution.Solution`.

Stages (each a function, timed separately by ``bench/``):
``branch_table`` -> ``topology.check`` -> ``assemble`` -> ``solve_system``
-> ``currents`` -> ``verify``.

Every solve verifies itself: the largest Kirchhoff current residual over all
nodes (from the element currents, recomputed independently of the matrix) and
the power sum over all elements (Tellegen's theorem: zero). A result whose
residuals stay large after one round of iterative refinement is refused.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..errors import NoOperatingPointError, NumericalError, TopologyError
from ..netlist import Netlist
from .branches import BranchTable, branch_table
from .mna import System, solve_system
from .solution import Solution

__all__ = ["solve", "currents", "verify", "current_bounds", "condition_estimate", "value_span", "WARN_REL", "REFUSE_REL"]

#: relative residual above which a warning is attached to the result
WARN_REL = 1e-9
#: relative residual above which the result is refused
REFUSE_REL = 1e-6
#: worst-case relative error (condition number x machine epsilon) above which a result is
#: refused, and above which it carries a warning
COND_REFUSE = 1e-2
COND_WARN = 1e-8
#: conductances spanning more decades than this get a warning
SPAN_WARN_DECADES = 12


def currents(bt: BranchTable, system: System, x: np.ndarray, g=None, c=None):
    """Potentials of all nodes, and voltage and passive-sign current of every element."""
    g = bt.g if g is None else g
    c = bt.c if c is None else c
    pot = system.potentials(x)
    v = pot[bt.a] - pot[bt.b]
    i = g * v + c
    if len(system.vbranch):
        i[system.vbranch] = x[system.n_node_rows :]
    if system.islands:
        # parts cut off by open elements: where their leaks hold them (analysis/islands.py)
        pot = system.islands.place(bt, pot, bt.leak, i)
        v = pot[bt.a] - pot[bt.b]
        i = g * v + c
        if len(system.vbranch):
            i[system.vbranch] = x[system.n_node_rows :]
    if bt.shadow is not None and bt.shadow.any():
        # exact parallel duplicates of ideal sources or links share their group's current equally
        idx = np.arange(len(i))
        members = np.flatnonzero(bt.shadow | np.isin(idx, bt.representative[bt.shadow]))
        reps = bt.representative[members]
        count = np.bincount(reps, minlength=len(i))
        same_way = np.where(bt.a[members] == bt.a[reps], 1.0, -1.0)
        i[members] = same_way * i[reps] / count[reps]
    return pot, v, i


def roundoff_gamma(size: int) -> float:
    """Round-off of one node's Kirchhoff sum per unit of the magnitudes that make it: machine
    epsilon with a safety factor, growing with the square root of the system's size (the usual
    growth of an LU solve's backward error; the worst case grows linearly, which real circuit
    matrices do not show)."""
    return BOUND_EPS * max(1.0, float(np.sqrt(max(size, 1))))


def _incident(a: np.ndarray, b: np.ndarray, n: int, w: np.ndarray) -> np.ndarray:
    """For every node, the sum of ``w`` over the elements that meet there (``w`` one row per sample
    or a single row). An element with both terminals on one node meets no node: its current
    leaves where it enters, it is left out of the assembly, and a 299 kA loop once widened a
    node's allowance to 0.6 A."""
    w = np.where(a != b, w, 0.0)
    if w.ndim == 1:
        return np.bincount(a, weights=w, minlength=n) + np.bincount(b, weights=w, minlength=n)
    S = w.shape[0]
    base = (np.arange(S, dtype=np.int64) * n)[:, None]
    out = np.bincount((base + a).ravel(), weights=w.ravel(), minlength=S * n)
    out += np.bincount((base + b).ravel(), weights=w.ravel(), minlength=S * n)
    return out.reshape(S, n)


def _leaving(a: np.ndarray, b: np.ndarray, n: int, i: np.ndarray) -> np.ndarray:
    if i.ndim == 1:
        return np.bincount(a, weights=i, minlength=n) - np.bincount(b, weights=i, minlength=n)
    S = i.shape[0]
    base = (np.arange(S, dtype=np.int64) * n)[:, None]
    out = np.bincount((base + a).ravel(), weights=i.ravel(), minlength=S * n)
    out -= np.bincount((base + b).ravel(), weights=i.ravel(), minlength=S * n)
    return out.reshape(S, n)


def node_check(a, b, n: int, pot, i, g, c, is_voltage, gamma: float, bounds=None, ground: int | None = None) -> dict:
    """Each node's Kirchhoff residual judged against the currents that meet there.

    For node k: ``residual_k = |sum of currents leaving k|``; ``current_k = sum |i_e|`` over the
    elements meeting at k; ``roundoff_k = gamma * sum (2 |g_e| V_max + |c_e|)`` over the same elements
    (a voltage-form branch counts its own |i_e| and the largest current, an unknown of the same
    system; ``V_max`` the largest potential; plus the largest current once, the normwise share
    of an LU solve's error that reaches every unknown): the size of the
    terms whose rounding makes the residual in a sound solve (the backward error of an LU solve
    is ``gamma`` times ``|L| |U| |x|``, which mixes the potentials of the whole system into a row, so
    a node near 0 V beside a 12 V one is allowed the round-off of 12 V). The judged figure is the residual beyond
    round-off as a share of the currents that meet: ``max(residual_k - roundoff_k, 0) / current_k``,
    at most 1 (a residual cannot exceed the currents that make it), 0 where the node balances
    within round-off. A tiny resistance at a high potential therefore widens only its own nodes'
    allowance, never the whole network's, and a source's short-circuit current never stands in
    for currents that do not flow. ``bounds`` (each current's componentwise round-off bound, when known) adds to the
    allowance of the nodes it meets. Works on one solve or on stacked samples (one row each).
    """
    ai = np.abs(i)
    vmax = np.abs(pot).max(axis=-1, initial=0.0)
    if i.ndim > 1:
        vmax = vmax[:, None]
    imax = ai.max(axis=-1, initial=0.0)
    if i.ndim > 1:
        imax = imax[:, None]
    mag = np.where(is_voltage, ai + imax, np.abs(g) * (2 * vmax) + np.abs(c))
    if np.any(is_voltage):
        # a voltage-form branch's current is solved from the rows of the nodes it joins: it carries
        # their round-off (passed along chains of such branches a few hops)
        for _ in range(3):
            at = _incident(a, b, n, mag)
            ends = np.maximum(at[..., a], at[..., b])
            mag = np.where(is_voltage, ai + imax + ends, mag)
    leaving = _leaving(a, b, n, i)
    residual = np.abs(leaving)
    current = _incident(a, b, n, ai)
    roundoff = gamma * (_incident(a, b, n, mag) + imax)
    if bounds is not None:
        # the round-off each current carries from the potentials it is computed from (the solve's
        # componentwise error bound, current_bounds): a node's residual can be as large as their sum
        roundoff = roundoff + _incident(a, b, n, bounds)
    if ground is not None:
        # the ground node's balance is no equation of the system: it is minus the sum of all others
        residual = residual.copy()
        residual[..., ground] = 0.0
    excess = np.maximum(residual - roundoff, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(current > 0, excess / np.where(current > 0, current, 1.0), np.where(excess > 0, np.inf, 0.0))
    rel = np.where(np.isnan(residual), np.inf, rel)
    return {"leaving": leaving, "residual": residual, "current": current, "roundoff": roundoff, "relative": rel, "mag": mag}


def verify(bt: BranchTable, v: np.ndarray, i: np.ndarray, potentials: np.ndarray | None = None, *, g=None, c=None, size: int | None = None, bounds=None) -> dict:
    """Kirchhoff current residual at every node and the power sum (Tellegen).

    Each node's residual is judged against the currents that actually meet there, beyond the
    round-off of the terms that make it (:func:`node_check`); the power sum against the powers
    that flow, beyond the round-off its node residuals carry (the power sum is the sum over nodes
    of potential times residual).
    """
    n = bt.n_nodes
    g = bt.g if g is None else g
    c = bt.c if c is None else c
    pot = potentials if potentials is not None else np.zeros(n)
    gamma = roundoff_gamma(size if size is not None else n + int(bt.is_voltage.sum()))
    chk = node_check(bt.a, bt.b, n, pot, i, g, c, bt.is_voltage, gamma, bounds, bt.ground)
    rel = chk["relative"]
    worst = int(np.argmax(np.where(np.isnan(rel), np.inf, rel))) if n else 0
    if n and rel[worst] == 0:
        worst = int(np.argmax(chk["residual"]))
    kcl = float(chk["residual"].max(initial=0.0))
    p = v * i
    psum = float(p.sum())
    pflow = float(np.abs(p).sum())
    p_round = float(np.sum(np.abs(pot) * chk["roundoff"])) + gamma * pflow
    p_excess = max(abs(psum) - p_round, 0.0) if np.isfinite(psum) else float("inf")
    p_rel = p_excess / pflow if pflow > 0 else (0.0 if p_excess == 0 else float("inf"))
    vres = 0.0
    if bt.is_voltage.any():
        vres = float(np.abs(v[bt.is_voltage] - bt.e[bt.is_voltage]).max())
    kcl_rel = float(rel[worst]) if n else 0.0
    return {
        "kcl_max_residual_A": kcl,
        "kcl_worst_node": bt.node_names[worst] if n else None,
        "current_scale_A": float(chk["current"][worst]) if n else 0.0,
        "power_sum_W": psum,
        "power_scale_W": pflow,
        "source_residual_V": vres,
        "kcl_relative": kcl_rel,
        "power_relative": p_rel,
        "ok": bool(kcl_rel <= WARN_REL and p_rel <= WARN_REL),
        "_nodes": chk,
    }


def value_span(bt: BranchTable) -> float:
    """Decades between the largest and smallest non-zero conductance."""
    linear = ~bt.is_voltage if bt.nonlinear is None else ~bt.is_voltage & ~bt.nonlinear
    g = np.abs(bt.g[linear])
    g = g[g > 0]
    if len(g) < 2:
        return 0.0
    return float(np.log10(g.max() / g.min()))


def _equilibrate(A, dense: bool, rounds: int = 8):
    """Row and column scalings r, c (Ruiz's iteration) that bring every row and column of
    diag(r) A diag(c) to largest entry about 1."""
    n = A.shape[0]
    r = np.ones(n)
    c = np.ones(n)
    absA = np.abs(A) if dense else abs(A).tocsr()
    for _ in range(rounds):
        if dense:
            S = absA * r[:, None] * c[None, :]
            rmax, cmax = S.max(axis=1), S.max(axis=0)
        else:
            from scipy.sparse import diags

            S = diags(r) @ absA @ diags(c)
            rmax = np.asarray(S.max(axis=1).todense()).ravel()
            cmax = np.asarray(S.max(axis=0).todense()).ravel()
        rmax[rmax == 0] = 1.0
        cmax[cmax == 0] = 1.0
        r /= np.sqrt(rmax)
        c /= np.sqrt(cmax)
    return r, c


def condition_estimate(system: System, factor) -> float:
    """1-norm condition number of the equilibrated system matrix.

    Rows and columns are scaled first (Ruiz's iteration), so a circuit that is
    merely badly scaled (a 1 mOhm cable beside a 1 MOhm sensing resistor, an
    ideal source across a busbar) is not mistaken for a nearly singular one.
    Exact for dense systems; estimated for sparse ones (Hager-Higham,
    ``scipy.sparse.linalg.onenormest``).
    """
    if system.size == 0:
        return 1.0
    A = system.A
    r, c = _equilibrate(A, system.dense)
    if system.dense:
        return float(np.linalg.cond(A * r[:, None] * c[None, :], 1))
    from scipy.sparse import diags
    from scipy.sparse.linalg import LinearOperator, onenormest

    lu = factor._lu
    n = system.size
    # (R A C)^-1 = C^-1 A^-1 R^-1
    inv = LinearOperator(
        (n, n),
        matvec=lambda y: lu.solve(np.ravel(y) / r) / c,
        rmatvec=lambda y: lu.solve(np.ravel(y) / c, trans="T") / r,
        dtype=float,
    )
    norm_scaled = float(abs(diags(r) @ A @ diags(c)).sum(axis=0).max())
    return norm_scaled * float(onenormest(inv))


def current_bounds(bt: BranchTable, system: System, factor, x: np.ndarray, pot: np.ndarray, floor: float = 0.0) -> np.ndarray:
    """The round-off bound of every element current of a solve (amperes).

    A componentwise forward-error bound of the linear solve in the manner of Skeel's: the error
    of the unknowns is at most a few machine epsilons times ``|A^-1| (|A| |x| + |z|)``, bounded
    further by ``|A^-1| (|A|_V 1 ||x_V|| + |A|_I 1 ||x_I|| + 1 ||z||)`` (potentials V and branch
    currents I taken apart), whose right-hand sides are known before the solve and solved with
    it (:func:`dcnet.analysis.mna.bound_rhs`). ``|A^-1| y`` for a non-negative ``y`` is taken as
    ``|A^-1 y|`` (exact for a nodal matrix, whose inverse is non-negative; an estimate where voltage
    rows make it indefinite, hence the safety factor). An element current ``g (V_a - V_b) + c``
    carries ``|g| (dV_a + dV_b)`` plus its own rounding; a voltage-form branch's current is an
    unknown. ``floor`` (the measured Kirchhoff residual) is added to every bound: a current below
    what the solve balances to cannot be told from zero.
    """
    n = bt.n_elements
    if system.size == 0:
        return np.full(n, floor)
    W = _bound_columns(system, factor)
    return _bounds_from(bt, system.row_of_node, system.n_node_rows, system.vbranch, x, system.z, W, pot, bt.g, bt.c) + floor


def _bound_columns(system: System, factor) -> np.ndarray:
    """The solutions of the bound right-hand sides (dcnet.analysis.mna.bound_rhs): kept by the
    factorisation when the solve computed them, else solved here."""
    from .mna import bound_rhs

    W = getattr(factor, "bound_columns", None)
    if W is None:
        W = np.asarray(factor.solve(bound_rhs(system.A, system.n_node_rows, system.z))).reshape(system.size, 3)
    return W


def voltage_bounds(bt: BranchTable, system: System, factor, x: np.ndarray, pot: np.ndarray) -> np.ndarray:
    """An estimate of the round-off bound of every element voltage of a solve (volts): the bounds
    of its two node potentials (as in :func:`current_bounds`) and the rounding of their difference
    (the solve adds what it measured: the refinement step and the voltage rows' residual). An
    ideal link's 1 pV beside 400 kA is round-off, not a voltage: a check that weighs a voltage
    (a source absorbing power) allows for it."""
    if system.size == 0:
        return np.zeros(bt.n_elements)
    W = _bound_columns(system, factor)
    dv = _potential_bounds(bt, system.row_of_node, _unknown_bounds(system.n_node_rows, x, W))
    return dv[bt.a] + dv[bt.b] + BOUND_EPS * (np.abs(pot[bt.a]) + np.abs(pot[bt.b]))


def _unknown_bounds(N, x, W) -> np.ndarray:
    xv = float(np.abs(x[:N]).max(initial=0.0))
    xi = float(np.abs(x[N:]).max(initial=0.0))
    return BOUND_EPS * (np.abs(W[:, 0]) * xv + np.abs(W[:, 1]) * xi + np.abs(W[:, 2]))


def _potential_bounds(bt, rows, dx) -> np.ndarray:
    dv = np.zeros(bt.n_nodes)
    mask = rows >= 0
    dv[mask] = dx[rows[mask]]
    return dv


def _bounds_from(bt, rows, N, vb, x, z, W, pot, g, c) -> np.ndarray:
    """Element current bounds from the bound columns W (unknowns x 3), for one sample."""
    dx = _unknown_bounds(N, x, W)
    dv = _potential_bounds(bt, rows, dx)
    pa, pb = np.abs(pot[bt.a]), np.abs(pot[bt.b])
    ga, ca = np.abs(g), np.abs(c)
    bound = ga * (dv[bt.a] + dv[bt.b]) + BOUND_EPS * (ga * (pa + pb) + ca)
    if len(vb):
        bound[vb] = dx[N:]
    if bt.shadow is not None and bt.shadow.any():
        bound[bt.shadow] = bound[bt.representative[bt.shadow]]
    return bound


#: machine epsilon times a safety factor, for the componentwise round-off bound of currents
BOUND_EPS = 16 * float(np.finfo(float).eps)


def solve(net: Netlist, *, check_topology: bool = True, estimate_condition: bool = False) -> Solution:
    """Solve a netlist and verify the result (see :func:`_solve`).

    numpy's floating-point warnings (an overflow, a division by zero, an invalid value) inside
    the solve are dcnet's NumericalError, from the Python API as from the command line
    (dcnet/floating.py): an infinity that entered unguarded arithmetic is never an answer."""
    from ..floating import as_error, is_floating_point_warning, refused

    try:
        with refused():
            return _solve(net, check_topology=check_topology, estimate_condition=estimate_condition)
    except RuntimeWarning as exc:
        if not is_floating_point_warning(exc):
            raise
        raise as_error(exc, net.files[0] if net.files else None) from None


def _solve(net: Netlist, *, check_topology: bool = True, estimate_condition: bool = False) -> Solution:
    """Solve a netlist and verify the result.

    The condition number is computed for small (dense) systems always, and for
    large ones when values span many decades, when the self-check is not clean,
    or on request (``estimate_condition=True``). Parts of the network that only open switches,
    blocked diodes or loads without supply join to the rest are solved as idle islands
    (dcnet.analysis.islands); loads without supply draw nothing (``Solution.unsupplied``).
    """
    from .. import topology
    from .islands import pinned_system

    bt = branch_table(net)
    warnings: list[str] = []
    if net.ground_rule and net.ground_rule != "ground statement":
        warnings.append(net.ground_rule)
    unsupplied: list[str] = []
    if check_topology:
        try:
            warnings += topology.check(net, bt)
        except TopologyError as err:
            name = err.element or (err.culprits[0] if err.culprits else None)
            if err.span is None and name and net.has_element(name):
                err.span = net.element(name).span
            raise
        dead = topology.unsupplied(net, bt)
        if len(dead):
            g, c, nl = bt.g.copy(), bt.c.copy(), bt.nonlinear.copy()
            g[dead] = c[dead] = 0.0
            nl[dead] = False
            bt = dataclasses.replace(bt, g=g, c=c, nonlinear=nl)
            unsupplied = [bt.names[p] for p in dead]
    span = value_span(bt)
    if span > SPAN_WARN_DECADES:
        warnings.append(
            f"element conductances span {span:.0f} decades; results may lose precision "
            "(check for extreme resistances, e.g. a missing unit prefix)"
        )
    if bt.is_nonlinear:
        from .newton import newton_solve

        try:
            newton = newton_solve(bt)
        except NumericalError as err:
            name = err.element or (err.culprits[0] if err.culprits else None)
            if err.span is None and name and net.has_element(name):
                err.span = net.element(name).span  # point at the element's line
            raise
        model = newton.bt
        system, factor, x = newton.system, newton.factor, newton.x
        pot, v, i = newton.potentials, newton.v, newton.i
        balance = verify(model, v, i, pot, size=system.size)
        _check_leak_floors(model, v, i, balance["_nodes"]["current"])
        warnings += _second_operating_points(net, model, v, system, factor)
        warnings += _dropped_out(model, newton.modes, v)
        sol = _finish(net, model, system, factor, x, pot, v, i, balance, warnings, refine=False, unsupplied=unsupplied)
        sol.newton_history = newton.history
        return sol
    system = pinned_system(bt)
    try:
        x, factor = solve_system(system)
    except NumericalError as err:
        found = _singular_culprits(net, bt, system, None, span)
        if found.get("culprits") or found.get("hint"):
            err.hint = found.get("hint")
            err.culprits = found.get("culprits", ())
            err.element = found.get("element")
            if err.element and err.span is None and net.has_element(err.element):
                err.span = net.element(err.element).span
        raise
    pot, v, i = currents(bt, system, x)
    balance = verify(bt, v, i, pot, size=system.size)
    return _finish(
        net, bt, system, factor, x, pot, v, i, balance, warnings, refine=True, span=span, estimate_condition=estimate_condition, unsupplied=unsupplied
    )


def _finish(
    net, bt, system, factor, x, pot, v, i, balance, warnings, *, refine: bool, span: float = 0.0, estimate_condition: bool = False, unsupplied=(), g=None, c=None
) -> Solution:
    """Refinement, conditioning and the verdict on the self-check; builds the Solution.

    ``g``, ``c`` are the conductances of the system solved (the nonlinear elements' companions);
    ``i`` holds the elements' currents by their own laws."""
    g = bt.g if g is None else g
    c = bt.c if c is None else c
    if system.dense or span > SPAN_WARN_DECADES or not balance["ok"] or estimate_condition:
        cond = condition_estimate(system, factor)
        balance["condition_estimate"] = cond
        bound = cond * np.finfo(float).eps  # worst-case relative error of the solution vector
        if bound > COND_REFUSE:
            raise NumericalError(
                f"the circuit matrix is numerically singular (condition number about {cond:.1g}); "
                "no trustworthy answer can be computed",
                **_singular_culprits(net, bt, system, factor, span),
            )
        if bound > COND_WARN:
            warnings.append(
                f"the circuit matrix is ill-conditioned (condition number about {cond:.1g}): "
                f"up to {-np.log10(bound):.0f} significant digits can be trusted in the worst case"
            )
    if not balance["ok"] and refine:
        # one round of iterative refinement on the assembled system
        r = system.z - system.A @ x
        x = x + factor.solve(r)
        pot, v, i = currents(bt, system, x)
        balance = verify(bt, v, i, pot, size=system.size)
        balance["refined"] = True
    if not np.all(np.isfinite(v)) or not np.all(np.isfinite(i)) or not np.isfinite(balance["power_sum_W"]):
        raise NumericalError(
            "the solution holds values too large to verify (a current or power overflows)",
            hint="check for an element driven far outside its range, e.g. a diode across a high-voltage source",
        )
    # each node's residual against the currents that meet there and their round-off bounds
    bounds = current_bounds(bt, system, factor, x, pot)
    kept = {k: balance[k] for k in ("refined", "condition_estimate") if k in balance}
    balance = verify(bt, v, i, pot, g=g, c=c, size=system.size, bounds=bounds)
    balance.update(kept)
    # the backward error of the solve: one step of refinement must not move the answer
    _check_refinement(bt, system, factor, x, pot, i, g, c, balance, bounds)
    nodes = balance.pop("_nodes")
    worst = max(balance["kcl_relative"], balance["power_relative"])
    if not worst <= REFUSE_REL:  # also refuses a NaN residual
        raise NumericalError(
            f"the solution does not verify: Kirchhoff residual {balance['kcl_max_residual_A']:.3g} A at "
            f"'{balance['kcl_worst_node']}' (beside {balance['current_scale_A']:.3g} A that meet there), "
            f"power sum {balance['power_sum_W']:.3g} W",
            **_node_culprits(bt, balance["kcl_worst_node"]),
        )
    if not balance["ok"]:
        warnings.append(
            f"self-check residuals are larger than usual (Kirchhoff {balance['kcl_relative']:.2g}, power {balance['power_relative']:.2g} relative)"
        )
    _check_potential_bound(net, bt, pot)
    # an element with both terminals on one node carries no current through the circuit (the
    # topology warning says so): its source term (a 299 kA constant-current load, a diode's
    # -drop/r) is no current anywhere
    i = np.where(bt.a == bt.b, 0.0, i)
    # currents within the solve's round-off are zero (their elements are idle); a current the
    # solve cannot resolve (a tiny resistance's) is taken from Kirchhoff's law at a node where
    # every other current is resolved
    i, bounds = recover_currents(bt, i, bounds)
    res = np.abs(_leaving(bt.a, bt.b, bt.n_nodes, i))
    if bt.n_nodes:
        res[bt.ground] = 0.0  # no equation of the system (minus the sum of all others)
        balance["kcl_max_residual_A"] = float(res.max())
        balance["kcl_worst_node"] = bt.node_names[int(res.argmax())]
        balance["power_sum_W"] = float((v * i).sum())
    # a current below what its nodes balance to cannot be told from zero (the better of its two
    # ends: a current fixed by Kirchhoff's law at one end is not blurred by the other's round-off)
    # and no current is known better than machine precision of what meets at its nodes
    end = np.abs(_leaving(bt.a, bt.b, bt.n_nodes, i))
    meet = BOUND_EPS * _incident(bt.a, bt.b, bt.n_nodes, np.abs(i))
    bounds = bounds + np.minimum(end[bt.a], end[bt.b]) + np.maximum(meet[bt.a], meet[bt.b])
    i = zero_within_bounds(bt, i, bounds)
    _check_reported_balance(bt, i)
    _check_source_limits(bt, i)
    del nodes
    if system.islands:
        warnings.append(_island_note(net, bt, system.islands, pot))
    sol = Solution(net, bt, pot, v, i, balance, warnings)
    sol.system, sol.factor = system, factor
    sol.current_bounds = bounds
    # the estimate above can miss where voltage rows make the matrix indefinite; what one step of
    # refinement moved a potential, and the residual of the voltage rows, are measured
    measured = max(float(balance.get("refinement_V", 0.0)), float(balance.get("source_residual_V", 0.0)))
    sol.voltage_bounds = voltage_bounds(bt, system, factor, x, pot) + 2 * measured
    sol.islands = system.islands or None
    sol.unsupplied = list(unsupplied)
    return sol


#: a refinement step that moves a current by more than this share of the currents meeting at its
#: nodes (beyond round-off), or a potential by more than this share of the largest, refuses the answer;
#: the same share as the worst-case error the condition estimate accepts
REFINE_REFUSE = COND_REFUSE


def _check_refinement(bt, system, factor, x, pot, i, g, c, balance, bounds) -> None:
    """Backward error of the solve: ``dx = A^-1 (z - A x)`` (one step of iterative refinement with
    the same factorisation) must be small beside the answer: potentials within ``REFINE_REFUSE``
    of the largest, each current within that share of the currents meeting at its nodes plus its
    round-off. A solve that a step of refinement would move further is refused."""
    if system.size == 0 or factor is None:
        return
    r = system.z - system.A @ x
    dx = np.asarray(factor.solve(r), dtype=float)
    if not np.all(np.isfinite(dx)):
        raise NumericalError("the solution does not verify: one step of iterative refinement does not give a finite correction")
    N = system.n_node_rows
    W = _bound_columns(system, factor)
    xv = float(np.abs(x[:N]).max(initial=0.0))
    zn = float(np.abs(system.z).max(initial=0.0))
    xbound = _unknown_bounds(N, x, W)
    # the potentials' own scale, at least the EMFs and what the source currents make across the conductances
    gmax = float(np.abs(g[~bt.is_voltage]).max(initial=0.0))
    vmax = max(xv, bt.max_emf, zn / gmax if gmax > 0 else 0.0)
    over_v = np.abs(dx[:N]) - (REFINE_REFUSE * vmax + 4 * xbound[:N])
    dv = float(np.abs(dx[:N]).max(initial=0.0))
    dpot = system.potentials(dx)
    di = g * (dpot[bt.a] - dpot[bt.b])
    if len(system.vbranch):
        di[system.vbranch] = dx[N:]
    nodes = balance["_nodes"]
    cur = nodes["current"]
    allow = REFINE_REFUSE * np.maximum(cur[bt.a], cur[bt.b]) + 4 * bounds + np.maximum(nodes["roundoff"][bt.a], nodes["roundoff"][bt.b])
    bad = np.abs(di) > allow
    balance["refinement_V"] = dv
    if (over_v > 0).any() or bad.any():
        k = int(np.argmax(np.abs(di) - allow)) if bad.any() else int(np.argmax(np.abs(dpot)))
        what = (
            f"element {bt.names[k]}'s current by {abs(di[k]):.3g} A" if bad.any() else f"the potentials by {dv:.3g} V (of {vmax:.3g} V)"
        )
        raise NumericalError(
            f"the solution does not verify: one step of iterative refinement moves {what}, so the solve has no "
            "trustworthy digits there",
            culprits=(bt.names[k],) if bad.any() else (),
            element=bt.names[k] if bad.any() else None,
            hint="element values may span too many decades; check for extreme resistances",
        )


#: the currents shown must balance at every node to this share of the currents meeting there
#: (plus this share of the largest current, and a far smaller share of the largest source term
#: (a cell's short-circuit current, a supply's current), for nodes where only round-off meets)
SHOWN_REL = 1e-6
SHOWN_FLOOR = 1e-9
SHOWN_SOURCE_FLOOR = 1e-12


def _check_reported_balance(bt: BranchTable, i: np.ndarray) -> None:
    """The currents as they will be shown must obey Kirchhoff's current law at every node.

    The self-check above allows each node the round-off its ``g V`` terms can carry; where
    conductances span very many decades (a femto-ohm jumper beside a kilo-ohm branch) that
    allowance can cover a residual of a few percent, and no current there can be recovered from
    its neighbours. Such an answer has no trustworthy currents at that node: it is refused
    rather than shown with currents that do not add up."""
    if not bt.n_nodes or not len(i):
        return
    n = bt.n_nodes
    res = np.abs(_leaving(bt.a, bt.b, n, i))
    meet = _incident(bt.a, bt.b, n, np.abs(i))
    # the source terms of the circuit's own sources; a nonlinear element's companion term is a
    # device of the solve (a femto-ohm diode's -drop/r is 4e14 A) and no source of current
    own = ~bt.nonlinear if bt.nonlinear is not None else np.ones(len(bt.c), dtype=bool)
    source = float(np.abs(bt.c[own]).max(initial=0.0)) if len(bt.c) else 0.0
    # ground included: its balance is the sum of every other node's, and is shown like theirs
    allow = SHOWN_REL * meet + SHOWN_FLOOR * float(np.abs(i).max(initial=0.0)) + SHOWN_SOURCE_FLOOR * source
    over = res - allow
    if (over > 0).any():
        k = int(np.argmax(over))
        raise NumericalError(
            f"the currents at node '{bt.node_names[k]}' cannot be resolved: they add up to {res[k]:.3g} A "
            f"beside {meet[k]:.3g} A that meet there, because the circuit's conductances span too many "
            "decades for the solve's round-off",
            **_stiffest(bt, _node_culprits(bt, bt.node_names[k])),
        )


def _stiffest(bt: BranchTable, found: dict) -> dict:
    """Add the element of the smallest resistance (as the solve modelled it) to an error's
    culprits and hint: its round-off, times its conductance, is what no node can absorb."""
    g = np.where(bt.is_voltage, 0.0, np.abs(bt.g))
    if not len(g) or not g.max() > 0:
        return found
    k = int(np.argmax(g))
    name = bt.names[k]
    out = dict(found)
    out["culprits"] = (name,) + tuple(x for x in found.get("culprits", ()) if x != name)
    out["element"] = name
    out["hint"] = (
        f"the smallest resistance is {name}'s, {1 / g[k]:.3g} Ohm: leave its r out where it stands for an ideal "
        f"connection (or use a link); {found.get('hint', '')}"
    ).rstrip("; ")
    return out


def _check_source_limits(bt: BranchTable, i: np.ndarray) -> None:
    """No current-limited source is shown delivering more than its ``imax``.

    Newton switches such a source to its limit only when holding its voltage would take more than
    ``imax`` beyond the round-off of the solve; where that round-off is huge (femto-ohm parts
    beside a kilo-volt source) it could stay "holding" while delivering a short-circuit current
    thousands of times its limit. Such an answer breaks the source's own law and is refused."""
    if "source" not in bt.groups:
        return
    pos, cols = bt.groups["source"]
    imax = cols["imax"]
    limited = ~np.isnan(imax)
    if not limited.any():
        return
    p, lim = pos[limited], imax[limited]
    over = -i[p] - lim * (1 + 1e-9)
    if (over > 0).any():
        k = int(np.argmax(over))
        name = bt.names[p[k]]
        raise NumericalError(
            f"the solve shows current-limited source {name} delivering {-i[p[k]]:.4g} A, beyond its limit of "
            f"{lim[k]:.4g} A: its mode could not be settled within the solve's round-off",
            culprits=(name,),
            element=name,
            hint="element values may span too many decades; check for extreme resistances (a tiny one can often be a link)",
        )


def zero_within_bounds(bt: BranchTable, i: np.ndarray, bounds: np.ndarray) -> np.ndarray:
    """Currents within their round-off bounds set to exactly zero, except where Kirchhoff's law
    shows they are real.

    The bounds are worst-case figures; in a stiff network (a micro-ohm fuse beside kilo-ohm
    parts) they can exceed a current that is plainly there: a 67 mA fuse current once showed as
    0 A and its check passed. So a node whose balance the zeroing breaks (its residual grows past
    the self-check's share of the currents meeting there) gets back the currents zeroed at it,
    as the solve computed them; repeated until no node is broken that way."""
    zero = (np.abs(i) <= bounds) & (i != 0)
    if not zero.any() or not bt.n_nodes:
        return np.where(zero, 0.0, i)
    n = bt.n_nodes
    before = np.abs(_leaving(bt.a, bt.b, n, i))
    allow = before + REFUSE_REL * _incident(bt.a, bt.b, n, np.abs(i))
    allow[bt.ground] = np.inf  # no equation of its own
    for _ in range(len(i)):
        after = np.abs(_leaving(bt.a, bt.b, n, np.where(zero, 0.0, i)))
        broken = after > allow
        back = zero & (broken[bt.a] | broken[bt.b])
        if not back.any():
            break
        zero &= ~back
    return np.where(zero, 0.0, i)


def recover_currents(bt: BranchTable, i: np.ndarray, bounds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Currents the solve cannot resolve, taken from Kirchhoff's current law where it can.

    A current is *unresolved* when its round-off bound exceeds a thousandth of it (fewer than
    three digits: a 1 nOhm cell's current is ``g (V_a - V_b - emf)`` with ``g = 1e9``, so a
    potential rounded to 1e-15 V leaves it uncertain by a microampere). At a node where it is the
    only unresolved current, Kirchhoff's law gives it from the others exactly, with the sum of
    their bounds; this is repeated until no node has a single unresolved current.
    """
    n = bt.n_nodes
    i = i.copy()
    bounds = bounds.copy()
    loose = (bounds > 1e-3 * np.abs(i)) & (bt.a != bt.b)
    if not loose.any():
        return i, bounds
    for _ in range(len(i)):
        count = np.bincount(bt.a[loose], minlength=n) + np.bincount(bt.b[loose], minlength=n)
        leaving = _leaving(bt.a, bt.b, n, np.where(loose, 0.0, i))
        tight = _incident(bt.a, bt.b, n, np.where(loose, 0.0, bounds))
        e = np.flatnonzero(loose)
        ta = np.where(count[bt.a[e]] == 1, tight[bt.a[e]], np.inf)
        tb = np.where(count[bt.b[e]] == 1, tight[bt.b[e]], np.inf)
        use_a = ta <= tb
        best = np.minimum(ta, tb)
        ok = np.isfinite(best)
        if not ok.any():
            break
        e, use_a, best = e[ok], use_a[ok], best[ok]
        # the current leaving its first node a balances the others there; entering b likewise
        new = np.where(use_a, -leaving[bt.a[e]], leaving[bt.b[e]])
        better = best < bounds[e]
        i[e[better]] = new[better]
        bounds[e[better]] = best[better]
        loose[e] = False
    return i, bounds


def _check_leak_floors(model: BranchTable, v: np.ndarray, i: np.ndarray, node_current: np.ndarray) -> None:
    """Refuse an answer that rests on the solver's 1 pS floor of a junction diode without ``roff``.

    That floor keeps the junction's conductance positive for the solve; it is no part of the
    diode. Where it carries a real share of the current at the diode's nodes (a quarter of what
    meets there: all of it flows through one element), the answer is an artefact of it: a current
    source pushing its current backwards through a blocked diode, the node driven to wherever
    1 pS carries it. The circuit then has no operating point on that branch."""
    from ..kinds.diode import G_FLOOR

    if "diode" not in model.groups:
        return
    pos, cols = model.groups["diode"]
    floor = ~np.isnan(cols["is"]) & ~(cols["roff"] > 0)
    if not floor.any():
        return
    p = pos[floor]
    leak = G_FLOOR * np.abs(v[p])
    share = np.maximum(node_current[model.a[p]], node_current[model.b[p]])
    bad = leak > 0.25 * share
    if not bad.any():
        return
    k = int(p[np.argmax(np.where(bad, leak, -1.0))])
    names = (model.names[k],) + tuple(
        model.names[e] for e in np.flatnonzero(((model.a == model.a[k]) | (model.b == model.a[k]) | (model.a == model.b[k]) | (model.b == model.b[k])) & (np.arange(len(model.names)) != k))
    )[:11]
    raise NoOperatingPointError(
        f"no physical operating point found: junction diode {model.names[k]} would carry {abs(i[k]):.4g} A backwards at "
        f"{-v[k]:.4g} V reverse, through nothing but the solver's 1 pS stand-in leak; elements at its nodes: "
        f"{', '.join(names[1:])}",
        culprits=names,
        element=names[0],
        hint="a current source or charger feeds a node whose only return is a blocked diode; check polarities, or give "
        "the diode its real reverse resistance (roff=)",
    )


def _node_culprits(bt: BranchTable, node: str | None) -> dict:
    """The elements that meet at a node, for an error that names where a check failed."""
    if node is None or node not in bt.node_names:
        return {"hint": "element values may span too many decades; check for extreme resistances"}
    k = bt.node_names.index(node)
    names = tuple(bt.names[e] for e in np.flatnonzero((bt.a == k) | (bt.b == k)))[:12]
    return {
        "culprits": names,
        "element": names[0] if names else None,
        "hint": f"the elements meeting at '{node}' are {', '.join(names) or 'none'}; element values may span too many decades (check for extreme resistances)",
    }


def _check_potential_bound(net, bt: BranchTable, pot: np.ndarray) -> None:
    """Refuse potentials beyond the physical bound of :mod:`dcnet.analysis.bound` (no operating
    point of the circuit lies there)."""
    from .bound import potential_bound

    vmax = float(np.abs(pot).max(initial=0.0))
    if vmax <= bt.max_emf * (1 + 1e-9):
        return  # within the largest EMF: every bound is at least that
    pb = net.cached("potential_bound", lambda: potential_bound(bt)) if net is not None else potential_bound(bt)
    if not vmax > pb.value * (1 + 1e-6) + 1e-9:
        return
    k = int(np.argmax(np.abs(pot)))
    node = bt.node_names[k]
    names = tuple(bt.names[e] for e in np.flatnonzero((bt.a == k) | (bt.b == k)))[:12]
    raise NoOperatingPointError(
        f"no physical operating point: the solve put node '{node}' at {pot[k]:.4g} V, beyond the {pb.value:.4g} V that any "
        f"operating point of this circuit can reach ({pb.describe()}); the elements at that node are {', '.join(names)}",
        culprits=names,
        element=names[0] if names else None,
        hint="a current source or charger may be feeding a node that only blocked diodes or open elements join to the rest; "
        "check the polarity of sources and diodes",
    )


def _island_note(net, bt, islands, pot) -> str:
    from ..topology import _names

    nodes = [bt.node_names[k] for part in islands.nodes for k in part]
    by = sorted({bt.names[k] for cross in islands.crossing for k in cross}, key=bt.names.index)
    shown = ", ".join(f"{bt.node_names[part[0]]} {pot[part[0]]:.4g} V" for part in islands.nodes[:4])
    return (
        f"node(s) {_names(nodes)} are cut off by {_names(by)} (open, blocked or without supply): nothing flows "
        f"there, and their potential is set only by leakage (shown where a 1 pS leak per open element would "
        f"hold it: {shown})"
    )


def _weak_parts(bt: BranchTable) -> tuple[list[str], list[str]]:
    """Nodes joined to the rest only by conductances below a round-off share of the largest
    (1e-12 of it): (their names, the weak elements that join them)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    gmax = float(np.abs(bt.g).max(initial=0.0))
    strong = bt.is_voltage | (np.abs(bt.g) > 1e-12 * gmax)
    strong &= bt.a != bt.b
    n = bt.n_nodes
    adj = coo_matrix((np.ones(int(strong.sum())), (bt.a[strong], bt.b[strong])), shape=(n, n))
    labels = connected_components(adj, directed=False)[1]
    weak_nodes = labels != labels[bt.ground]
    if not weak_nodes.any():
        return [], []
    edge = np.flatnonzero((weak_nodes[bt.a] != weak_nodes[bt.b]) & (bt.g != 0))
    return [bt.node_names[k] for k in np.flatnonzero(weak_nodes)], [bt.names[k] for k in edge]


def _singular_culprits(net, bt, system, factor, span: float) -> dict:
    """Culprits and a hint for a (numerically) singular matrix: the nodes whose common potential
    the matrix barely fixes and the elements that join them to the rest: found structurally
    (conductances below 1e-12 of the largest), else as the direction the matrix nearly
    annihilates (inverse iteration with the solve's own factorisation)."""
    from ..topology import _names

    nodes, names = _weak_parts(bt)
    if not nodes and factor is not None:
        try:
            rng = np.random.default_rng(0)
            w = rng.standard_normal(system.size)
            for _ in range(4):
                w = factor.solve(w)
                w /= np.abs(w).max() or 1.0
            rows = system.row_of_node
            nodal = np.zeros(bt.n_nodes)
            mask = rows >= 0
            nodal[mask] = np.abs(w[rows[mask]])
            if nodal.any():
                weak = nodal >= 0.5 * nodal.max()
                nodes = [bt.node_names[k] for k in np.flatnonzero(weak)]
                names = [bt.names[k] for k in np.flatnonzero(weak[bt.a] != weak[bt.b])]
        except Exception:  # noqa: BLE001 - a diagnosis must never hide the refusal itself
            pass
    if not nodes:
        hint = "element values span too many decades; check for extreme resistances" if span > SPAN_WARN_DECADES else None
        return {"hint": hint}
    text = (
        f"the potential of node(s) {_names(nodes)} is barely fixed: they join the rest of the circuit only through "
        f"{_names(names) if names else 'nothing'}"
    )
    if span > SPAN_WARN_DECADES:
        text += f", and element values span {span:.0f} decades (check for extreme resistances or a missing unit prefix)"
    else:
        text += " (give such a part a real connection, or check those elements' values)"
    return {"hint": text, "culprits": tuple(names[:12]), "element": names[0] if names else None}


def _dropped_out(model: BranchTable, modes: dict, v: np.ndarray) -> list[str]:
    from ..kinds.load import DROPPED

    if "load" not in modes or "load" not in model.groups:
        return []
    pos, cols = model.groups["load"]
    cp = np.flatnonzero(~np.isnan(cols["power"]))
    out = []
    for k, mode in zip(cp, modes["load"]):
        if mode == DROPPED and (np.isnan(cols["vmin"][k]) or v[pos[k]] <= 0):
            out.append(f"load {model.names[pos[k]]} sees no voltage, or a reversed one, and cannot run (check its polarity)")
        elif mode == DROPPED:
            out.append(
                f"load {model.names[pos[k]]} dropped out: it cannot draw {cols['power'][k]:.4g} W without its voltage "
                f"falling below vmin = {cols['vmin'][k]:.4g} V"
            )
    return out


def _second_operating_points(net, model: BranchTable, v: np.ndarray, system=None, factor=None) -> list[str]:
    """Constant-power loads have two operating points on a Thevenin source; say where the other is.

    The Thevenin source each load sees (every other element at its final linear model) comes from
    the final system's own factorisation in one solve with a column per load: the driving-point
    resistance ``z`` with the load's companion conductance ``g`` in, then ``R_th = z / (1 - g z)``
    with it taken out (Sherman-Morrison) and ``V_th = v + R_th i`` (its companion current ``i``).
    """
    if "load" not in model.groups:
        return []
    pos, cols = model.groups["load"]
    ks = [k for k in np.flatnonzero(~np.isnan(cols["power"])) if not (model.g[pos[k]] == 0 and model.c[pos[k]] == 0)]
    if not ks:
        return []
    if system is None or factor is None:
        from .islands import pinned_system

        system = pinned_system(model)
        try:
            _, factor = solve_system(system)
        except NumericalError:
            return []
    U = np.zeros((system.size, len(ks)))
    for j, k in enumerate(ks):
        p = pos[k]
        ra, rb = system.row_of_node[model.a[p]], system.row_of_node[model.b[p]]
        if ra >= 0:
            U[ra, j] += 1.0
        if rb >= 0:
            U[rb, j] -= 1.0
    W = np.asarray(factor.solve(U)).reshape(system.size, len(ks))
    out = []
    for j, k in enumerate(ks):
        p = pos[k]
        w = system.potentials(W[:, j])
        z = w[model.a[p]] - w[model.b[p]]
        gp = model.g[p]
        if not np.isfinite(z) or 1 - gp * z == 0:
            continue
        r_th = z / (1 - gp * z)
        v_th = v[p] + r_th * (gp * v[p] + model.c[p])
        if r_th <= 0 or v_th <= 0:
            continue
        low = v_th - v[p]  # the two roots of v^2 - V_th v + P R_th = 0 add up to V_th
        if 0 < low < v[p]:
            out.append(
                f"load {model.names[p]} has a second, unstable operating point at about {low:.4g} V (the same power "
                f"at {cols['power'][k] / low:.4g} A); the stable one at {v[p]:.4g} V is reported"
            )
    return out
