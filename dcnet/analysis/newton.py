"""Damped Newton iterations on the MNA system, for circuits with nonlinear elements.

Each iteration asks every nonlinear kind for its linear model at the latest operating
point (its *companion*: a conductance and a current, or a voltage-form branch), assembles
the same MNA system as the linear path, solves it, and takes a step towards the answer,
halving the step while the Kirchhoff residual (evaluated with the elements' exact laws)
does not fall. Piecewise-linear kinds (ideal diodes, current-limited sources, loads that
drop out) switch modes between iterations.

When plain Newton does not settle, two fallbacks follow: source stepping (every source
scaled from a tenth up to its full value, each answer starting the next) and then a
conductance ramp (a shunt from every node to ground, reduced decade by decade to zero).
Failure to converge is an error naming the elements that did not settle, with the
iteration history; constant-power demands beyond what the network can deliver, and ideal
current sources forcing more current through current-limited sources than their limits
allow, and nonlinear elements held by ideal sources where their law has no answer, are
reported with their figures instead.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..errors import ConvergenceError, NoOperatingPointError, NumericalError
from ..kinds import KINDS
from ..kinds.diode import K_OVER_Q
from .branches import BranchTable
from .mna import assemble, solve_system

__all__ = ["NewtonResult", "newton_solve", "VTOL", "ITOL", "MAX_ITER"]

VTOL = 1e-9  # volts, plus the same relative to the largest potential
ITOL = 1e-9  # relative to the current scale
LOCAL_ITOL = 1e-6  # relative to the other currents at an element's quieter node
MAX_ITER = 60
#: iterations in a row that switch some mode before Newton starts again from everything on
CYCLE = 6
#: a junction diode held by ideal branches at a voltage where its law gives more than this current
#: (amperes) is refused: far beyond any fault current of a DC installation (common practice, no
#: source), and where the companion model's conductance would swamp the rest of the matrix
HELD_CEILING = 1e6
#: a constant-power demand within this share of the most the network can deliver counts as beyond it
LIMIT_EDGE = 1e-9
#: conductance, relative to the largest in the circuit, that stands in for a voltage-form
#: nonlinear branch for one step when the voltage forms together are contradictory
STIFF = 1e6


@dataclasses.dataclass
class NewtonResult:
    bt: BranchTable  # the branch table with the converged linear models of the nonlinear elements
    system: object
    factor: object
    x: np.ndarray
    potentials: np.ndarray
    v: np.ndarray
    i: np.ndarray
    modes: dict[str, np.ndarray]
    history: list[dict]


class _Group:
    """The nonlinear elements of one kind."""

    def __init__(self, kind_name: str, pos: np.ndarray, cols: dict[str, np.ndarray]):
        self.kind = KINDS[kind_name]
        self.name = kind_name
        self.pos = pos
        self.cols = cols
        self.mode = self.kind.initial_mode(cols)
        self.prev = np.zeros(len(pos))


def _groups(bt: BranchTable, dropped: set[int] = frozenset()) -> list[_Group]:
    out = []
    for kind_name, (pos, cols) in bt.groups.items():
        mask = bt.nonlinear[pos]
        if mask.any():
            grp = _Group(kind_name, pos[mask], {k: col[mask] for k, col in cols.items()})
            if kind_name == "load":
                from ..kinds.load import DROPPED

                # a constant-power load with both terminals on one node sees no voltage: it cannot run
                grp.mode[bt.a[grp.pos] == bt.b[grp.pos]] = DROPPED
                if dropped:
                    grp.mode[np.isin(grp.pos, list(dropped))] = DROPPED
            out.append(grp)
    return out


def _model(bt: BranchTable, groups: list[_Group], v: np.ndarray, i: np.ndarray, scale: float = 1.0) -> BranchTable:
    """The branch table with every nonlinear element replaced by its companion at (v, i)."""
    is_v, g, c, e = bt.is_voltage.copy(), bt.g.copy(), bt.c.copy(), bt.e.copy()
    if scale != 1.0:  # source stepping: every independent source scaled
        lin = ~bt.nonlinear
        c[lin] *= scale
        e[lin] *= scale
    # the round-off of currents, which no current switching rule should act on: relative to
    # the scale the linear elements set (their source currents, and conductance times EMF),
    # not to the iterate's own currents, which a junction far from its answer can blow up
    itol = _switching_tolerance(bt, v, i)
    leak = np.full(len(g), np.nan)
    for grp in groups:
        cols = grp.cols
        if scale != 1.0:
            cols = _scaled(grp, scale)
        br, grp.mode, grp.prev = grp.kind.companion(cols, v[grp.pos], i[grp.pos], grp.mode, grp.prev, itol=itol[grp.pos])
        is_v[grp.pos], g[grp.pos], c[grp.pos], e[grp.pos] = br.is_voltage, br.g, br.c, br.e
        if br.leak is not None:
            leak[grp.pos] = br.leak
    return dataclasses.replace(bt, is_voltage=is_v, g=g, c=c, e=e, leak=leak)


def _switching_tolerance(bt: BranchTable, v: np.ndarray, i: np.ndarray) -> np.ndarray:
    """Per element, the current within which no switching rule acts (see ``_model``)."""
    lin = ~bt.nonlinear & ~bt.is_voltage
    itol_all = ITOL * max(
        float(np.abs(bt.c[lin]).max(initial=0.0)),
        float(np.abs(bt.g[lin]).max(initial=0.0)) * max(bt.max_emf, float(np.abs(v).max(initial=0.0))),
    )
    return _local_itol(bt, i, itol_all)


def _local_itol(bt: BranchTable, i: np.ndarray, itol_all: float) -> np.ndarray:
    """Per element, the round-off below which its current does not switch a mode.

    The network-wide figure alone let a kiloampere branch elsewhere hide a real reverse
    current of 44 mA in an ideal diode whose other node meets only milliamperes: the answer
    then had the wrong diode state and every current around it wrong. An element's current
    is what Kirchhoff's law leaves at either of its nodes, so it is judged against the
    currents of the other elements at its quieter node (``LOCAL_ITOL`` of them), and never
    more loosely than the network-wide figure.
    """
    from .solve import _incident

    mag = np.abs(np.nan_to_num(i, nan=0.0, posinf=0.0, neginf=0.0))
    meet = _incident(bt.a, bt.b, bt.n_nodes, mag)
    other = np.minimum(meet[bt.a] - mag, meet[bt.b] - mag)
    local = LOCAL_ITOL * np.maximum(other, 0.0)
    return np.minimum(itol_all, np.maximum(local, 1e-12 * itol_all))


def _scaled(grp: _Group, s: float) -> dict[str, np.ndarray]:
    cols = dict(grp.cols)
    for key, power in (("emf", 1), ("imax", 1), ("power", 2)):
        if key in cols:
            cols[key] = cols[key] * s**power
    return cols


def _exact(bt: BranchTable, model: BranchTable, groups: list[_Group], v: np.ndarray, i_model: np.ndarray) -> np.ndarray:
    """Element currents with the nonlinear elements' exact laws at voltages v."""
    i = i_model.copy()
    for grp in groups:
        i[grp.pos] = grp.kind.exact_current(grp.cols, v[grp.pos], i_model[grp.pos], grp.mode)
    return i


def _residual(bt: BranchTable, model: BranchTable, v, i) -> float:
    n = bt.n_nodes
    leaving = np.bincount(bt.a, weights=i, minlength=n) - np.bincount(bt.b, weights=i, minlength=n)
    leaving[bt.ground] = 0.0
    res = float(np.abs(leaving).max(initial=0.0))
    if model.is_voltage.any():
        res = max(res, float(np.abs(v[model.is_voltage] - model.e[model.is_voltage]).max()) * float(np.abs(model.g).max(initial=1.0)))
    return res


def _start_model(bt: BranchTable, scale: float) -> BranchTable:
    """The linear starting model (nonlinear elements as their kinds' ``branches`` give them:
    constant-power loads off, diodes blocked, limited sources holding), sources scaled."""
    if scale == 1.0:
        return bt
    c, e = bt.c.copy(), bt.e.copy()
    c *= scale
    e *= scale
    return dataclasses.replace(bt, c=c, e=e)


def _iterate(bt, groups, start, scale, history, phase, shunt=0.0, max_iter=MAX_ITER, clamp=None):
    """Newton at one source scale from ``start`` = (pot, v, i) or None; returns (converged, state)."""
    from .solve import currents

    if start is None:
        model = _start_model(bt, scale)
        system = _assemble(model, shunt)
        try:
            x, factor = solve_system(system)
        except NumericalError:
            return False, None
        pot, v, i = currents(model, system, x, model.g, model.c)
        if clamp is not None and clamp[1] > 0 and np.abs(pot).max(initial=0.0) > clamp[1]:
            # the starting model can leave a node held only by a stand-in leak (a current source
            # behind blocked diodes, constant-power loads off), far beyond every EMF: start instead
            # from everything on (diodes conducting, constant-power loads linearised at the
            # largest EMF), within the EMFs; from far above, Newton would find the load's unstable
            # high-voltage point on the current source, or the leak's
            on = _all_on_point(bt, groups, scale, shunt)
            if on is not None:
                pot, v, i = on
            pot = np.clip(pot, -clamp[1], clamp[1])
            v = pot[bt.a] - pot[bt.b]
    else:
        pot, v, i = start
    state = None
    restarted = False
    switching = 0
    for it in range(1, max_iter + 1):
        modes_before = [grp.mode.copy() for grp in groups]
        model = _model(bt, groups, v, i, scale)
        changed = int(sum(int((m0 != grp.mode).sum()) for m0, grp in zip(modes_before, groups)))
        system = _assemble(model, shunt, pot)
        x_new, factor = _try_solve(system)
        stiff = model.is_voltage & bt.nonlinear
        if not np.all(np.isfinite(x_new)) and stiff.any():
            # Nonlinear elements that switched to voltage form at once can close a loop of
            # contradictory voltages (ideal diodes of different drops in parallel, both forward
            # biased): take this one step with them as stiff conductances instead, which shows
            # which of them must switch back, and never count the step as settled.
            model = _stiffened(model, stiff, STIFF * max(float(np.abs(bt.g).max(initial=0.0)), 1e-300))
            system = _assemble(model, shunt, pot)
            x_new, factor = _try_solve(system)
            changed += int(stiff.sum())
        if not np.all(np.isfinite(x_new)):
            history.append({"phase": phase, "scale": scale, "iteration": it, "step_V": float("nan"), "residual_A": float("nan"), "alpha": 0.0, "modes_changed": changed})
            return False, state
        pot_new, _, i_model = currents(model, system, x_new, model.g, model.c)
        switching = switching + 1 if changed else 0
        beyond = clamp is not None and np.isfinite(clamp[0]) and np.abs(pot_new).max(initial=0.0) > clamp[0]
        if switching >= CYCLE and not restarted and clamp is not None:
            # modes that keep flipping (a limited source between holding and limiting while a
            # blocked diode never sees its forward voltage): start again from everything on, once
            beyond = True
        if beyond:
            # no operating point lies beyond the physical bound (analysis/bound.py): an iterate
            # that runs past it is diverging, never converging. Once per phase, start again from
            # everything on (a blocked diode whose far side runs away never sees its forward
            # voltage); otherwise hold the iterate within the bound
            if not restarted:
                restarted = True
                on = _all_on_point(bt, groups, scale, shunt)
                if on is not None:
                    pot, v, i = on
                    if np.isfinite(clamp[0]):
                        pot = np.clip(pot, -clamp[0], clamp[0])
                    else:
                        pot = np.clip(pot, -max(clamp[1], bt.max_emf), max(clamp[1], bt.max_emf))
                    v = pot[bt.a] - pot[bt.b]
                    switching = 0
                    history.append({"phase": phase, "scale": scale, "iteration": it, "step_V": float("nan"), "residual_A": float("nan"), "alpha": 0.0, "modes_changed": -1})
                    continue
            if np.isfinite(clamp[0]):
                pot_new = np.clip(pot_new, -clamp[0], clamp[0])
        res_old = _residual(bt, model, v, _exact(bt, model, groups, v, np.where(model.is_voltage, i_model, model.g * v + model.c)))
        alpha = 1.0
        # each node's residual judged as the self-check judges it (solve.node_check): against the
        # currents that meet there, beyond the round-off of the solve (its componentwise bounds)
        bounds = _round_off(model, system, factor, x_new, pot_new)
        while True:
            pot_try = pot + alpha * (pot_new - pot)
            v_try = pot_try[bt.a] - pot_try[bt.b]
            i_try = _exact(bt, model, groups, v_try, np.where(model.is_voltage, i_model, model.g * v_try + model.c))
            res = _residual(bt, model, v_try, i_try)
            settled, rel = _settled(bt, model, system, pot_try, i_try, bounds)
            if res <= res_old or settled or alpha <= 1 / 64 or changed:
                break
            alpha /= 2
        step = float(np.abs(pot_try - pot).max(initial=0.0))
        history.append({"phase": phase, "scale": scale, "iteration": it, "step_V": step, "residual_A": res, "alpha": alpha, "modes_changed": changed, "relative": rel})
        pot, v, i = pot_try, v_try, i_try
        state = (model, system, factor, x_new, pot, v, i)
        vscale = max(float(np.abs(pot).max(initial=0.0)), 1.0)
        if changed == 0 and step <= VTOL * vscale and settled:
            switched, impossible = _settled_modes(groups, v)
            if impossible:
                return False, state  # a mode with no operating point here: no answer
            if switched:
                continue  # modes switched where no operating point of theirs lies: go on from there
            shown = _modes_against_shown_currents(bt, model, groups, v, i, bounds)
            if shown is None:
                return True, state
            # a mode the currents as they will be shown contradict (an ideal diode "conducting" a
            # reverse current that Kirchhoff's law recovers at a node its own solve cannot resolve):
            # go on from those currents, and the kinds' own rules switch it
            i = shown
    return False, state


def _settled_modes(groups, v) -> tuple[bool, bool]:
    """Put the settled voltages to the kinds' ``settled_modes``: (some mode switched, some
    element has no operating point here)."""
    switched = impossible = False
    for grp in groups:
        mode, none = grp.kind.settled_modes(grp.cols, v[grp.pos], grp.mode)
        if (mode != grp.mode).any():
            grp.mode = mode
            switched = True
        impossible = impossible or bool(np.any(none))
    return switched, impossible


def _modes_against_shown_currents(bt, model, groups, v, i, bounds):
    """The currents the solution will show, if their own switching rules would switch some
    element's mode; None where every mode stands.

    Newton switches modes on the previous iterate's currents; an ideal diode's current is an
    unknown of the solve and can turn backwards in the very step that settles (a diode shown
    carrying 2.2 A in reverse at its forward drop). And the shown currents are those of
    dcnet.analysis.solve.recover_currents (a current the solve cannot resolve taken from
    Kirchhoff's law at a neighbouring node): a femto-ohm bar at a node leaves every current
    there uncertain by far more than microamperes, and an ideal diode held conducting by that
    blur once showed 5.4 uA flowing backwards with its far side dragged down by its full drop.
    So the final currents, as shown, are put to the kinds' rules once more: a current counts as
    reversed beyond its own round-off bound and beyond the smaller of its switching tolerance
    and a millionth of itself."""
    from .solve import recover_currents

    with np.errstate(all="ignore"):
        shown, sb = recover_currents(model, i, bounds)
    if not np.all(np.isfinite(shown)):
        return None
    # a current reversed by more than its own round-off bound and a millionth of itself is
    # reversed, however loose the network-wide switching tolerance (a 1e-38 Ohm cable once made
    # that 5e22 A, and a diode was shown carrying 800 kA backwards)
    itol = np.maximum(np.minimum(_switching_tolerance(bt, v, shown), LOCAL_ITOL * np.abs(shown)), sb)
    loop = bt.a == bt.b  # an element on one node carries nothing anywhere: its mode decides nothing
    for grp in groups:
        pos = grp.pos
        _, mode, _ = grp.kind.companion(grp.cols, v[pos], shown[pos], grp.mode, grp.prev, itol=itol[pos])
        if ((mode != grp.mode) & ~loop[pos]).any():
            return shown
    return None


def _all_on_point(bt: BranchTable, groups: list[_Group], scale: float, shunt: float):
    """(potentials, voltages, currents) of the model with everything on (``_all_on``), or None
    where there is nothing to turn on or its solve fails."""
    from .solve import currents

    model = _all_on(bt, groups, scale)
    if model is None:
        return None
    system = _assemble(model, shunt)
    x, _ = _try_solve(system)
    if not np.all(np.isfinite(x)):
        return None
    return currents(model, system, x, model.g, model.c)


def _all_on(bt: BranchTable, groups: list[_Group], scale: float) -> BranchTable | None:
    """A starting model with everything on: piecewise-linear diodes conducting (their modes set so),
    junction diodes linearised at 1 A forward, current-limited sources delivering their limit,
    constant-power loads linearised at the largest EMF.
    None when there is nothing to turn on."""
    from ..kinds.diode import CONDUCTING

    if bt.max_emf <= 0:
        return None
    model = _start_model(bt, scale)
    is_v, g, c, e = model.is_voltage.copy(), model.g.copy(), model.c.copy(), model.e.copy()
    gbig = STIFF * max(float(np.abs(bt.g).max(initial=0.0)), 1e-300)
    any_on = False
    for grp in groups:
        cols = grp.cols
        if grp.name == "diode":
            pwl = np.isnan(cols["is"])
            r = np.where(cols["r"] > 0, cols["r"], 1.0 / gbig)
            gd = np.where(pwl, 1.0 / r, 0.0)
            cd = np.where(pwl, -cols["drop"] * gd, 0.0)
            j = ~pwl
            if j.any():
                vt = cols["n"][j] * K_OVER_Q * (cols["temp"][j] + 273.15)
                isat = cols["is"][j]
                v0 = vt * np.log1p(1.0 / isat)
                gj = (1.0 + isat) / vt
                gd[j] = gj
                cd[j] = 1.0 - gj * v0
                prev = grp.prev.copy()
                prev[j] = v0
                grp.prev = prev
            g[grp.pos], c[grp.pos], is_v[grp.pos] = gd, cd, False
            grp.mode = np.where(pwl, CONDUCTING, grp.mode)
            any_on = True
        elif grp.name == "source" and "imax" in cols:
            # current-limited sources delivering their limit
            from ..kinds.source import LIMIT

            g[grp.pos], c[grp.pos], is_v[grp.pos] = 0.0, -cols["imax"] * scale, False
            grp.mode = np.full(len(grp.pos), LIMIT)
            any_on = True
        elif grp.name == "load":
            P = cols["power"] * scale**2
            vn = bt.max_emf * scale
            g[grp.pos] = -P / vn**2
            c[grp.pos] = 2 * P / vn
            grp.prev = np.full(len(grp.pos), vn)
            any_on = True
    if not any_on:
        return None
    return dataclasses.replace(model, is_voltage=is_v, g=g, c=c, e=e)


def _round_off(model, system, factor, x, pot) -> np.ndarray:
    """The componentwise round-off bound of every current of this iteration's linear solve."""
    from .solve import current_bounds

    if factor is None or not np.all(np.isfinite(x)):
        return np.zeros(model.n_elements)
    with np.errstate(all="ignore"):
        b = current_bounds(model, system, factor, x, pot)
    return np.where(np.isfinite(b), b, 0.0)


def _settled(bt, model, system, pot, i, bounds) -> tuple[bool, float]:
    """Newton's stopping rule on the residual: every node balances within ``ITOL`` of the currents
    that meet there, beyond the solve's round-off (which grows with the system's size), as the
    self-check judges it (:func:`dcnet.analysis.solve.node_check`)."""
    from .solve import node_check, roundoff_gamma

    with np.errstate(all="ignore"):
        chk = node_check(bt.a, bt.b, bt.n_nodes, pot, i, model.g, model.c, model.is_voltage, roundoff_gamma(system.size), bounds, bt.ground)
    rel = float(np.max(chk["relative"], initial=0.0))
    if not np.isfinite(rel):
        return False, rel
    return rel <= ITOL, rel


def _try_solve(system):
    try:
        return solve_system(system)
    except NumericalError:
        return np.full(system.size, np.nan), None


def _stiffened(model: BranchTable, mask: np.ndarray, g_stiff: float) -> BranchTable:
    """The model with the voltage-form branches in ``mask`` as conductances ``g_stiff`` behind
    the same EMF (a Norton form with a very small resistance)."""
    is_v, g, c = model.is_voltage.copy(), model.g.copy(), model.c.copy()
    is_v[mask] = False
    g[mask] = g_stiff
    c[mask] = -model.e[mask] * g_stiff
    return dataclasses.replace(model, is_voltage=is_v, g=g, c=c)


def _assemble(model: BranchTable, shunt: float, pot_guess=None):
    from .islands import pinned_system

    system = pinned_system(model, pot_guess)
    if shunt:
        N = system.n_node_rows
        if system.dense:
            system.A[np.arange(N), np.arange(N)] += shunt
        else:
            from scipy.sparse import diags

            d = np.zeros(system.size)
            d[:N] = shunt
            system.A = (system.A + diags(d)).tocsc()
    return system


def newton_solve(bt: BranchTable) -> NewtonResult:
    """Solve a branch table with nonlinear elements; raise with figures when it cannot.

    If no phase settles and some constant-power loads with ``vmin`` ask for more than the
    network can deliver at the last iterate, those loads drop out (as an inverter does at
    undervoltage) and the solve starts again.
    """
    history: list[dict] = []
    _check_limited_cuts(bt)
    # constant-power loads held at no or reverse voltage cannot run: they start dropped out
    held_off = _check_held_voltages(bt)
    only_power = all(kind == "load" for kind, (pos, _) in bt.groups.items() if bt.nonlinear[pos].any())
    if only_power:  # with no other nonlinear element the Thevenin figures are exact up front
        _check_power_demands(bt, dropped=held_off)
    from .bound import potential_bound

    pb = potential_bound(bt)
    hard = pb.value * (1 + 1e-6) + 1e-9 if np.isfinite(pb.value) else float("inf")
    clamp = (hard, hard if np.isfinite(hard) else pb.emf_sum)
    gscale = float(np.abs(bt.g).max(initial=1.0))
    plans = [
        ("newton", [(1.0, 0.0)]),
        ("source stepping", [(0.1 * k, 0.0) for k in range(1, 11)]),
        ("conductance ramp", [(1.0, gscale * 10.0**-k) for k in range(0, 13)] + [(1.0, 0.0)]),
    ]
    dropped: set[int] = set(held_off)
    while True:
        groups: list[_Group] = []
        state = None
        for phase, steps in plans:
            groups = _groups(bt, dropped)
            start = None
            ok = False
            for scale, shunt in steps:
                ok, state = _iterate(bt, groups, start, scale, history, phase, shunt=shunt, clamp=clamp)
                if not ok:
                    break
                start = state[4:7]
            if ok:
                model, system, factor, x, pot, v, i = state
                return NewtonResult(model, system, factor, x, pot, v, i, {g.name: g.mode for g in groups}, history)
        more = _check_power_demands(bt, frozen=state, dropped=dropped) or _weakest_load(bt, groups, state, dropped)
        if not more:
            _raise_unsettled(bt, groups, state, history)
        dropped |= more
        history.append({"phase": "dropout", "iteration": 0, "step_V": float("nan"), "residual_A": float("nan"), "alpha": 0.0, "modes_changed": len(more)})


def _weakest_load(bt: BranchTable, groups: list[_Group], state, dropped: set[int]) -> set[int]:
    """The running constant-power load with ``vmin`` whose last voltage is lowest relative to
    its ``vmin``: the first to cut out when nothing settles."""
    if state is None or state[5] is None:
        return set()
    v = state[5]
    best = None
    for grp in groups:
        if grp.name != "load":
            continue
        vmin = grp.cols["vmin"]
        for k, p in enumerate(grp.pos):
            if int(p) in dropped or np.isnan(vmin[k]) or vmin[k] <= 0:
                continue
            ratio = v[p] / vmin[k]
            if best is None or ratio < best[0]:
                best = (ratio, int(p))
    return {best[1]} if best else set()


def _raise_unsettled(bt, groups, state, history):
    names = []
    if state is not None:
        model, system, factor, x, pot, v, i = state
        if pot is not None:
            # the nonlinear elements at the nodes that do not balance, worst node first (as the
            # stopping rule judges them), rather than the largest raw differences, which at
            # round-off name arbitrary elements
            from .solve import node_check, roundoff_gamma

            with np.errstate(all="ignore"):
                chk = node_check(bt.a, bt.b, bt.n_nodes, pot, i, model.g, model.c, model.is_voltage, roundoff_gamma(system.size), _round_off(model, system, factor, x, pot), bt.ground)
            rel = np.nan_to_num(chk["relative"], nan=np.inf)
            for k in np.argsort(-rel, kind="stable"):
                if not rel[k] > ITOL or len(names) >= 5:
                    break
                for e in np.flatnonzero(bt.nonlinear & ((bt.a == k) | (bt.b == k))):
                    if bt.names[e] not in names and len(names) < 5:
                        names.append(bt.names[e])
            if not names:  # every node balances: the modes or the steps did not settle
                for grp in groups:
                    exact = grp.kind.exact_current(grp.cols, v[grp.pos], i[grp.pos], grp.mode)
                    off = np.abs(exact - i[grp.pos])
                    order = np.argsort(-off)
                    names += [bt.names[grp.pos[k]] for k in order[:5]]
                names = names[:5]
    if not names:
        names = [bt.names[p] for p in np.flatnonzero(bt.nonlinear)[:5]]
    last = history[-3:]
    summary = "; ".join(f"{h['phase']} #{h['iteration']}: step {h.get('step_V', float('nan')):.3g} V, residual {h['residual_A']:.3g} A" for h in last)
    err = ConvergenceError(
        f"the nonlinear solve did not settle after {len(history)} iterations (Newton, source stepping, conductance ramp); "
        f"elements that did not settle: {', '.join(names)}",
        culprits=tuple(names),
        element=names[0] if names else None,
        hint=_unsettled_hint(bt, summary),
    )
    err.history = history
    raise err


def _unsettled_hint(bt: BranchTable, summary: str) -> str | None:
    """The last iterations, and where the values span so many decades that currents computed
    from potentials carry more round-off than the tolerance, that cause first."""
    from .solve import SPAN_WARN_DECADES, value_span

    parts = []
    span = value_span(bt)
    if span > SPAN_WARN_DECADES:
        parts.append(
            f"element conductances span {span:.0f} decades, so a current computed across the smallest resistance "
            "carries round-off beyond what Kirchhoff's law allows (check for extreme resistances or a missing unit "
            "prefix; a link stands for a negligible connection)"
        )
    if summary:
        parts.append(f"last iterations: {summary}")
    return "; ".join(parts) or None


def _check_power_demands(bt: BranchTable, frozen=None, dropped: set[int] = frozenset()) -> set[int]:
    """Refuse constant-power demands beyond what the network can deliver, with the figures.

    For each constant-power load alone (other constant-power loads off, other nonlinear
    elements at their starting models, or at ``frozen``'s last models after a failed solve),
    the network seen from its terminals is a Thevenin source V_th behind R_th, which can
    deliver at most V_th^2 / (4 R_th).
    """
    if "load" not in bt.groups:
        return set()
    pos, cols = bt.groups["load"]
    cp = np.flatnonzero(~np.isnan(cols["power"]))
    if len(cp) == 0:
        return set()
    base = frozen[0] if frozen is not None and frozen[0] is not None else bt
    g, c = base.g.copy(), base.c.copy()
    cp_pos = pos[cp]
    g[cp_pos] = 0.0
    c[cp_pos] = 0.0
    # other nonlinear elements at their starting linear models unless frozen
    model = dataclasses.replace(base, g=g, c=c)
    system = assemble(model)
    try:
        x, factor = solve_system(system)
    except NumericalError:  # a singular open-circuit network: leave the diagnosis to the solver
        return set()
    from .solve import currents

    pot, _, _ = currents(model, system, x, g, c)
    to_drop: set[int] = set()
    for k, p in zip(cp, cp_pos):
        if int(p) in dropped:
            continue
        demand = cols["power"][k]
        a, b = bt.a[p], bt.b[p]
        rhs = np.zeros(system.size)
        ra, rb = system.row_of_node[a], system.row_of_node[b]
        if ra >= 0:
            rhs[ra] += 1.0
        if rb >= 0:
            rhs[rb] -= 1.0
        w = system.potentials(factor.solve(rhs))
        r_th = w[a] - w[b]
        v_th = pot[a] - pot[b]
        if r_th <= 0:
            continue
        p_max = v_th * v_th / (4 * r_th) if v_th > 0 else 0.0
        has_vmin = not np.isnan(cols["vmin"][k])
        # at the limit itself the two operating points merge into one on the knife edge (a double
        # root Newton cannot settle on, and any further loss stops the load): refused like beyond it
        beyond = demand > p_max * (1 - LIMIT_EDGE)
        if beyond and has_vmin:
            to_drop.add(int(p))
        if beyond and not has_vmin:
            name = bt.names[p]
            raise NoOperatingPointError(
                f"load {name} asks for {demand:.4g} W, but the network can deliver at most {p_max:.4g} W at its "
                f"terminals (V_th^2 / 4 R_th with V_th = {v_th:.4g} V, R_th = {r_th:.4g} Ohm): "
                + (
                    "no operating point exists"
                    if demand > p_max
                    else f"it sits exactly at that limit, whose only operating point ({v_th / 2:.4g} V, half of V_th) is a knife "
                    "edge that any further loss tips over: no stable operating point exists"
                ),
                element=name,
                culprits=(name,),
                hint="lower the demand, strengthen the supply (lower resistance, higher EMF), or give the load vmin= so it drops out as a real inverter would",
            )
    return to_drop


def _check_limited_cuts(bt: BranchTable) -> None:
    """Refuse ideal current sources that force more current through current-limited sources
    than their limits allow, naming the cut with the figures.

    A current-limited source's passive current is at least ``-imax`` (it delivers at most
    ``imax``; it may absorb any current while holding). Contract every branch that can carry
    any current (resistances, voltage-form branches, diodes, constant-power loads): what is
    left joins the contracted nodes by ideal current sources (fixed currents) and limited
    sources. Kirchhoff's current law over every set of contracted nodes, with each limited
    source within its bound, is a flow problem on the limited sources (``j = i + imax >= 0``
    flows from the first node to the second); it is feasible exactly when a maximum flow meets
    every node's demand, and when it is not, the nodes reachable in the residual graph are a
    set that the fixed sources feed with more than its limited sources can carry away.
    """
    if "source" not in bt.groups:
        return
    pos, cols = bt.groups["source"]
    lim = ~np.isnan(cols["imax"])
    if not lim.any():
        return
    limited = np.zeros(bt.n_elements, dtype=bool)
    limited[pos[lim]] = True
    imax = np.zeros(bt.n_elements)
    imax[pos[lim]] = cols["imax"][lim]
    current_only = ~bt.nonlinear & ~bt.is_voltage & (bt.g == 0)  # current sources and open branches
    fixed = current_only & (bt.c != 0)
    free = ~limited & ~current_only
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    k = np.flatnonzero(free)
    joined = coo_matrix((np.ones(len(k)), (bt.a[k], bt.b[k])), shape=(bt.n_nodes, bt.n_nodes))
    _, top = connected_components(joined, directed=False)  # the contracted node of each node
    top = top.astype(np.int64)
    A, B = top[bt.a], top[bt.b]
    crossing = A != B
    fixed &= crossing
    limited &= crossing
    if not limited.any():
        return
    # d[u]: what must leave contracted node u as flow j on the limited sources
    d: dict[int, float] = {}
    for k in np.flatnonzero(fixed):  # passive current c from a to b
        d[int(B[k])] = d.get(int(B[k]), 0.0) + float(bt.c[k])
        d[int(A[k])] = d.get(int(A[k]), 0.0) - float(bt.c[k])
    arcs: dict[int, set[int]] = {}
    for k in np.flatnonzero(limited):
        d[int(A[k])] = d.get(int(A[k]), 0.0) + imax[k]
        d[int(B[k])] = d.get(int(B[k]), 0.0) - imax[k]
        arcs.setdefault(int(A[k]), set()).add(int(B[k]))
    reach = _flow_shortfall(d, arcs)
    if reach is None:
        return
    inside = np.isin(top, list(reach))
    into = np.flatnonzero(fixed & (inside[bt.b] != inside[bt.a]))
    forced = float(sum(bt.c[k] if inside[bt.b[k]] else -bt.c[k] for k in into))
    outlets = np.flatnonzero(limited & inside[bt.b] & ~inside[bt.a])
    limit = float(imax[outlets].sum())
    scale = max(abs(forced), limit, 1e-300)
    if forced - limit <= 1e-9 * scale:
        return  # within round-off of the limit: leave it to the solver
    from ..topology import _names

    src = [bt.names[k] for k in into]
    lim_names = [bt.names[k] for k in outlets]
    # name the smaller side of the cut (of two alike, the one without ground)
    if (int(inside.sum()), bool(inside[bt.ground])) < (int((~inside).sum()), not inside[bt.ground]):
        side, way, then = np.flatnonzero(inside), "into", "leave only through"
    else:
        side, way, then = np.flatnonzero(~inside), "out of", "be fed only through"
    nodes = [bt.node_names[n] for n in side]
    if lim_names:
        tail = (
            f"which can {then} the current-limited source(s) {_names(lim_names)}, delivering at most "
            f"{limit:.4g} A (the sum of their imax)"
        )
    else:
        tail = "and no current-limited source crosses to carry it"
    names = tuple(lim_names + src)
    raise NoOperatingPointError(
        f"the current source(s) {_names(src)} force {forced:.4g} A {way} node(s) {_names(nodes)} (with what is tied to "
        f"them), {tail}: no operating point exists (Kirchhoff's current law at that cut)",
        element=names[0],
        culprits=names,
        hint="raise the current limit (imax) of the limited source(s), lower the forced current, or give the current another path",
    )


def _flow_shortfall(d: dict[int, float], arcs: dict[int, set[int]]) -> set[int] | None:
    """Maximum flow from the nodes with ``d > 0`` to those with ``d < 0`` along uncapacitated
    arcs (networkx's minimum cut). Returns None when every demand is met, otherwise the nodes
    on the source side of a minimum cut (those reachable from the surplus in the residual
    graph)."""
    import networkx as nx

    G = nx.DiGraph()
    SRC, SNK = "s", "t"
    G.add_nodes_from((SRC, SNK))
    total = 0.0
    for u, x in d.items():
        if x > 0:
            G.add_edge(SRC, u, capacity=x)
            total += x
        elif x < 0:
            G.add_edge(u, SNK, capacity=-x)
    if total <= 0:
        return None
    for u, vs in arcs.items():
        for v in vs:
            G.add_edge(u, v)  # no capacity attribute: unbounded
    flow, (side, _other) = nx.minimum_cut(G, SRC, SNK)
    if total - flow <= 1e-9 * total:
        return None
    return {u for u in side if u != SRC}


def _check_held_voltages(bt: BranchTable) -> set[int]:
    """Refuse nonlinear elements whose voltage is fixed by a path of ideal linear branches
    (ideal sources, links, zero-resistance fuses) at a value their law cannot take:

    * an ideal piecewise-linear diode (no ``r``) held above its drop would have to carry an
      unlimited current: no operating point;
    * a junction diode held so far forward that ``is * exp(v / (n Vt))`` overflows has no
      current a float can hold.

    Returns the constant-power loads held at zero or reverse voltage: like a load that sees
    no voltage at the first linearisation, they cannot run and drop out (the iterate's
    round-off could otherwise show them a few microvolts and run them at an enormous current).
    """
    held_off: set[int] = set()
    lin_v = np.flatnonzero(bt.is_voltage & ~bt.nonlinear & (bt.a != bt.b))
    if len(lin_v) == 0:
        return held_off
    import networkx as nx

    G = nx.Graph()
    for k in lin_v:
        if not G.has_edge(int(bt.a[k]), int(bt.b[k])):  # parallel ideal branches hold one voltage
            G.add_edge(int(bt.a[k]), int(bt.b[k]), k=int(k))
    comp = np.full(bt.n_nodes, -1, dtype=np.int64)
    off = np.zeros(bt.n_nodes)  # potentials within each group of nodes the ideal branches tie
    for c, nodes in enumerate(nx.connected_components(G)):
        root = min(nodes)
        comp[list(nodes)] = c
        for u, w in nx.bfs_edges(G, root):
            k = G[u][w]["k"]
            off[w] = off[u] - bt.e[k] if int(bt.a[k]) == u else off[u] + bt.e[k]  # v = V(a) - V(b) = e

    def path(a: int, b: int) -> list[str]:
        nodes = nx.shortest_path(G, a, b)
        return [bt.names[G[x][y]["k"]] for x, y in zip(nodes, nodes[1:])]

    for kind_name, (pos, cols) in bt.groups.items():
        nl = bt.nonlinear[pos]
        if not nl.any() or kind_name not in ("diode", "load"):
            continue
        for j in np.flatnonzero(nl):
            p = int(pos[j])
            a, b = int(bt.a[p]), int(bt.b[p])
            if a == b or comp[a] < 0 or comp[a] != comp[b]:
                continue
            v = float(off[a] - off[b])
            name = bt.names[p]
            held = path(a, b)
            by = f"the ideal branch(es) {', '.join(held)}"
            if kind_name == "diode" and np.isnan(cols["is"][j]) and not cols["r"][j] > 0:
                drop = float(cols["drop"][j])
                if v > drop + 1e-12 * max(abs(v), abs(drop)):
                    raise NoOperatingPointError(
                        f"ideal diode {name} (drop {drop:.4g} V, no r) is held at {v:.4g} V by {by}: above its drop it "
                        "would have to carry an unlimited current, so no operating point exists",
                        element=name,
                        culprits=(name, *held),
                        hint="give the diode its forward resistance (r=), or put a resistance in the loop",
                    )
            elif kind_name == "diode" and not np.isnan(cols["is"][j]):
                vt = float(cols["n"][j]) * K_OVER_Q * (float(cols["temp"][j]) + 273.15)
                held_current = float(cols["is"][j]) * np.expm1(min(v / vt, 700.0))
                if v / vt <= 700.0 and held_current > HELD_CEILING:
                    raise NoOperatingPointError(
                        f"junction diode {name} is held at {v:.4g} V by {by}: its law would make it carry "
                        f"{held_current:.3g} A, beyond any current a DC installation can carry ({HELD_CEILING:.0g} A); "
                        "no physical operating point exists",
                        element=name,
                        culprits=(name, *held),
                        hint="a junction diode forward-biased by an ideal source needs a series resistance (the source's r=, "
                        "or a resistor or cable in the loop)",
                    )
                if v / vt > 700.0:
                    raise NumericalError(
                        f"junction diode {name} is held at {v:.4g} V by {by}: its current is * exp(v / (n Vt)) "
                        f"= exp({v / vt:.4g}) times is, beyond any number the solver can hold",
                        element=name,
                        culprits=(name, *held),
                        hint="a junction diode forward-biased by an ideal source needs a series resistance",
                    )
            elif kind_name == "load" and not np.isnan(cols["power"][j]) and v <= 0:
                held_off.add(p)
    return held_off
