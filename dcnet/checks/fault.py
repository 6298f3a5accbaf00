"""Prospective short-circuit current: a bolted fault at a point, all sources contributing.

By Thevenin's theorem the current into a zero-ohm fault between nodes X and Y is
``V_oc / R_th``: the open-circuit voltage from the solution, and the resistance seen
between X and Y with every source zeroed (ideal voltage sources shorted, current sources
opened, cells reduced to their internal resistance). Zeroing the sources does not change
the circuit matrix, so ``R_th`` comes from the same factorisation as the solve: one extra
right-hand side per fault point (``dcnet.analysis.equivalent.thevenin``, which the
``dcnet equivalent`` command uses too). The currents of every element during the fault follow by
superposition, so a fuse's own share of the fault current is exact too.

Fault points: each fuse (at whichever of its ends gives it the larger fault current; the
other pole is the source terminal farthest in potential from that point), and each bank's
terminals (POS to NEG).
"""

from __future__ import annotations

import numpy as np

from . import Verdict, elements_of

SOURCE_NO_RATING = "no interrupt rating given: figure for information"


def fault_response(sol, x: str, y: str):
    """(fault current, element currents during the fault) for a bolted fault from node x to y.

    Returns (inf, None) when x and y are joined by an ideal path with sources (no finite answer)
    and (0, currents) when no source drives the point.
    """
    from ..analysis.equivalent import thevenin

    system, bt = sol.system, sol.branches
    v_oc, r_th, pot_w, w = thevenin(sol, x, y)
    if r_th <= 1e-15 * max(1.0, abs(v_oc)):
        return (np.inf if v_oc != 0 else 0.0), None
    i_sc = v_oc / r_th
    # superposition: the fault draws i_sc out of x into y
    dv = -i_sc * (pot_w[bt.a] - pot_w[bt.b])
    di = bt.g * dv
    if len(system.vbranch):
        di[system.vbranch] = -i_sc * w[system.n_node_rows :]
    return abs(i_sc), sol.i + di


def _far_pole(sol, node: str, poles: list[str]) -> str | None:
    v = sol.potential(node)
    best = max(poles, key=lambda p: abs(sol.potential(p) - v), default=None)
    if best is None or abs(sol.potential(best) - v) == 0:
        return None
    return best


def check(net, sol) -> list[Verdict]:
    if sol.system is None:
        return []
    from ..kinds import KINDS

    out: list[Verdict] = []
    poles = sorted({n for el in elements_of(net, *(k for k, kind in KINDS.items() if kind.is_source)) for n in el.nodes})
    pos_of = {n: k for k, n in enumerate(sol.branches.names)}
    for el in elements_of(net, "fuse"):
        best = None
        for end in el.nodes:
            pole = _far_pole(sol, end, poles)
            if pole is None:
                continue
            total, currents = fault_response(sol, end, pole)
            through = np.inf if currents is None else abs(currents[pos_of[el.name]])
            if best is None or through > best[0]:
                best = (through, total, end, pole)
        if best is None:
            continue
        through, total, end, pole = best
        detail = f"bolted fault from {end} to {pole}: {_amps(total)} in the fault, {_amps(through)} through the fuse"
        interrupt = el.values.get("interrupt")
        if interrupt is None:
            out.append(Verdict("fault current", el.name, through, None, "A", True, SOURCE_NO_RATING, detail, "info"))
        else:
            out.append(Verdict("fault current", el.name, through, interrupt, "A", through <= interrupt, f"interrupt rating of {el.name} (as given)", detail))
    for name, bank in net.banks.items():
        total, _ = fault_response(sol, bank["pos"], bank["neg"])
        out.append(
            Verdict("fault current", f"bank {name} terminals", total, None, "A", True, "prospective short-circuit current (Thevenin)", f"bolted fault from {bank['pos']} to {bank['neg']}", "info")
        )
    return out


def _amps(x: float) -> str:
    return "unlimited (ideal path)" if not np.isfinite(x) else f"{x:.4g} A"
