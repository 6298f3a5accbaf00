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

from ..errors import NumericalError, TopologyError
from ..netlist import Netlist
from .branches import BranchTable, branch_table
from .mna import System, solve_system
from .solution import Solution

__all__ = ["solve", "currents", "verify", "current_bounds", "condition_estimate", "value_span", "WARN_REL", "REFUSE_REL"]

#: relative residual above which a warning is attached to the result
WARN_REL = 1e-9
#: relative residual above which the result is refused
REFUSE_REL = 1e-6
#: the share of (largest conductance x largest potential) that counts in the current scale the
#: residuals are judged against: that product bounds the round-off of a current computed as
#: g·ΔV, which is a few machine epsilons of it in a sound solve, so a thousandth keeps a margin
#: of about a million while a tiny resistance at a high voltage can no longer hide a residual
#: that is large beside the currents that actually flow
ROUNDOFF_SHARE = 1e-3
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


def verify(bt: BranchTable, v: np.ndarray, i: np.ndarray, potentials: np.ndarray | None = None) -> dict:
    """Kirchhoff current residual at every node and the power sum (Tellegen).

    Residuals are judged relative to the size of the quantities that make them
    (the largest current, and a share of the largest conductance times the largest
    potential, which bounds the round-off in a current computed as g·ΔV), so a
    network whose true currents are all zero is not condemned for round-off.
    """
    n = bt.n_nodes
    leaving = np.bincount(bt.a, weights=i, minlength=n) - np.bincount(bt.b, weights=i, minlength=n)
    kcl = float(np.abs(leaving).max(initial=0.0))
    vmax = float(np.abs(potentials).max(initial=0.0)) if potentials is not None else float(np.abs(v).max(initial=0.0))
    adm = ~bt.is_voltage
    scale_i = max(
        float(np.abs(i).max(initial=0.0)),
        ROUNDOFF_SHARE * float(np.abs(bt.g[adm]).max(initial=0.0)) * vmax,
        float(np.abs(bt.c[adm]).max(initial=0.0)),
    )
    p = v * i
    psum = float(p.sum())
    pscale = max(float(np.abs(p).sum()), scale_i * vmax)
    vres = 0.0
    if bt.is_voltage.any():
        vres = float(np.abs(v[bt.is_voltage] - bt.e[bt.is_voltage]).max())
    kcl_rel = kcl / scale_i if scale_i > 0 else kcl
    p_rel = abs(psum) / pscale if pscale > 0 else abs(psum)
    worst = int(np.abs(leaving).argmax()) if n else 0
    return {
        "kcl_max_residual_A": kcl,
        "kcl_worst_node": bt.node_names[worst] if n else None,
        "current_scale_A": scale_i,
        "power_sum_W": psum,
        "power_scale_W": pscale,
        "source_residual_V": vres,
        "kcl_relative": kcl_rel,
        "power_relative": p_rel,
        "ok": bool(kcl_rel <= WARN_REL and p_rel <= WARN_REL),
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
    from .mna import bound_rhs

    n = bt.n_elements
    if system.size == 0:
        return np.full(n, floor)
    W = getattr(factor, "bound_columns", None)
    if W is None:
        W = np.asarray(factor.solve(bound_rhs(system.A, system.n_node_rows))).reshape(system.size, 3)
    return _bounds_from(bt, system.row_of_node, system.n_node_rows, system.vbranch, x, system.z, W, pot, bt.g, bt.c) + floor


def _bounds_from(bt, rows, N, vb, x, z, W, pot, g, c) -> np.ndarray:
    """Element current bounds from the bound columns W (unknowns x 3), for one sample."""
    xv = float(np.abs(x[:N]).max(initial=0.0))
    xi = float(np.abs(x[N:]).max(initial=0.0))
    zn = float(np.abs(z).max(initial=0.0))
    dx = BOUND_EPS * (np.abs(W[:, 0]) * xv + np.abs(W[:, 1]) * xi + np.abs(W[:, 2]) * zn)
    dv = np.zeros(bt.n_nodes)
    mask = rows >= 0
    dv[mask] = dx[rows[mask]]
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
        balance = verify(model, v, i, pot)
        warnings += _second_operating_points(net, model, v)
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
    balance = verify(bt, v, i, pot)
    return _finish(
        net, bt, system, factor, x, pot, v, i, balance, warnings, refine=True, span=span, estimate_condition=estimate_condition, unsupplied=unsupplied
    )


def _finish(
    net, bt, system, factor, x, pot, v, i, balance, warnings, *, refine: bool, span: float = 0.0, estimate_condition: bool = False, unsupplied=()
) -> Solution:
    """Refinement, conditioning and the verdict on the self-check; builds the Solution."""
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
        balance = verify(bt, v, i, pot)
        balance["refined"] = True
    worst = max(balance["kcl_relative"], balance["power_relative"])
    if not np.all(np.isfinite(v)) or not np.all(np.isfinite(i)) or not np.isfinite(balance["power_sum_W"]):
        raise NumericalError(
            "the solution holds values too large to verify (a current or power overflows)",
            hint="check for an element driven far outside its range, e.g. a diode across a high-voltage source",
        )
    if not worst <= REFUSE_REL:  # also refuses a NaN residual
        raise NumericalError(
            f"the solution does not verify: Kirchhoff residual {balance['kcl_max_residual_A']:.3g} A at "
            f"'{balance['kcl_worst_node']}', power sum {balance['power_sum_W']:.3g} W",
            hint="element values may span too many decades; check for extreme resistances",
        )
    if not balance["ok"]:
        warnings.append(
            f"self-check residuals are larger than usual (Kirchhoff {balance['kcl_relative']:.2g}, power {balance['power_relative']:.2g} relative)"
        )
    # currents within the solve's round-off are zero (their elements are idle)
    bounds = current_bounds(bt, system, factor, x, pot, floor=balance["kcl_max_residual_A"])
    i = np.where(np.abs(i) <= bounds, 0.0, i)
    if system.islands:
        warnings.append(_island_note(net, bt, system.islands, pot))
    sol = Solution(net, bt, pot, v, i, balance, warnings)
    sol.system, sol.factor = system, factor
    sol.current_bounds = bounds
    sol.islands = system.islands or None
    sol.unsupplied = list(unsupplied)
    return sol


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


def _second_operating_points(net, model: BranchTable, v: np.ndarray) -> list[str]:
    """Constant-power loads have two operating points on a Thevenin source; say where the other is."""
    if "load" not in model.groups:
        return []
    pos, cols = model.groups["load"]
    out = []
    for k in np.flatnonzero(~np.isnan(cols["power"])):
        p = pos[k]
        if model.g[p] == 0 and model.c[p] == 0:
            continue  # dropped out
        g, c = model.g.copy(), model.c.copy()
        g[p] = c[p] = 0.0
        alone = dataclasses.replace(model, g=g, c=c)
        from .islands import pinned_system

        system = pinned_system(alone)
        try:
            x, factor = solve_system(system)
        except NumericalError:
            continue
        pot, _, _ = currents(alone, system, x, g, c)
        a, b = model.a[p], model.b[p]
        rhs = np.zeros(system.size)
        if system.row_of_node[a] >= 0:
            rhs[system.row_of_node[a]] += 1.0
        if system.row_of_node[b] >= 0:
            rhs[system.row_of_node[b]] -= 1.0
        w = system.potentials(factor.solve(rhs))
        v_th, r_th = pot[a] - pot[b], w[a] - w[b]
        if r_th <= 0 or v_th <= 0:
            continue
        low = v_th - v[p]  # the two roots of v^2 - V_th v + P R_th = 0 add up to V_th
        if 0 < low < v[p]:
            out.append(
                f"load {model.names[p]} has a second, unstable operating point at about {low:.4g} V (the same power "
                f"at {cols['power'][k] / low:.4g} A); the stable one at {v[p]:.4g} V is reported"
            )
    return out
