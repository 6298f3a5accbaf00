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

import numpy as np

from ..errors import NumericalError, TopologyError
from ..netlist import Netlist
from .branches import BranchTable, branch_table
from .mna import System, assemble, solve_system
from .solution import Solution

__all__ = ["solve", "currents", "verify", "WARN_REL", "REFUSE_REL"]

#: relative residual above which a warning is attached to the result
WARN_REL = 1e-9
#: relative residual above which the result is refused
REFUSE_REL = 1e-6


def currents(bt: BranchTable, system: System, x: np.ndarray, g=None, c=None):
    """Potentials of all nodes, and voltage and passive-sign current of every element."""
    g = bt.g if g is None else g
    c = bt.c if c is None else c
    pot = system.potentials(x)
    v = pot[bt.a] - pot[bt.b]
    i = g * v + c
    if len(system.vbranch):
        i[system.vbranch] = x[system.n_node_rows :]
    return pot, v, i


def verify(bt: BranchTable, v: np.ndarray, i: np.ndarray, potentials: np.ndarray | None = None) -> dict:
    """Kirchhoff current residual at every node and the power sum (Tellegen).

    Residuals are judged relative to the size of the quantities that make them
    (the largest current, and the largest conductance times the largest
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
        float(np.abs(bt.g[adm]).max(initial=0.0)) * vmax,
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


def solve(net: Netlist, *, check_topology: bool = True) -> Solution:
    """Solve a linear netlist and verify the result."""
    from .. import topology

    bt = branch_table(net)
    warnings: list[str] = []
    if net.ground_rule and net.ground_rule != "ground statement":
        warnings.append(net.ground_rule)
    if check_topology:
        try:
            warnings += topology.check(net, bt)
        except TopologyError as err:
            name = err.element or (err.culprits[0] if err.culprits else None)
            if err.span is None and name and net.has_element(name):
                err.span = net.element(name).span
            raise
    system = assemble(bt)
    x, factor = solve_system(system)
    if not np.all(np.isfinite(x)):
        raise NumericalError("the solve gave a value that is not finite; the circuit matrix is singular or badly scaled")
    pot, v, i = currents(bt, system, x)
    balance = verify(bt, v, i, pot)
    if not balance["ok"]:
        # one round of iterative refinement on the assembled system
        r = system.z - system.A @ x
        x = x + factor.solve(r)
        pot, v, i = currents(bt, system, x)
        balance = verify(bt, v, i, pot)
        balance["refined"] = True
    worst = max(balance["kcl_relative"], balance["power_relative"])
    if worst > REFUSE_REL:
        raise NumericalError(
            f"the solution does not verify: Kirchhoff residual {balance['kcl_max_residual_A']:.3g} A at "
            f"'{balance['kcl_worst_node']}', power sum {balance['power_sum_W']:.3g} W",
            hint="element values may span too many decades; check for extreme resistances",
        )
    if not balance["ok"]:
        warnings.append(
            f"self-check residuals are larger than usual (Kirchhoff {balance['kcl_relative']:.2g}, power {balance['power_relative']:.2g} relative)"
        )
    return Solution(net, bt, pot, v, i, balance, warnings)
