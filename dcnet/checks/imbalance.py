"""Current sharing among parallel strings: imbalance under load and circulating current at rest."""

from __future__ import annotations

import numpy as np

from . import Verdict

DEFAULT_MAX = 0.10
DEFAULT_SOURCE = "default 10 % (common practice, no source)"


def _imbalance(currents: np.ndarray) -> float | None:
    """Largest deviation from the mean, as a fraction of the mean; None when the mean is ~0."""
    mean = currents.mean()
    scale = np.abs(currents).max(initial=0.0)
    if scale == 0 or abs(mean) <= 1e-9 * scale:
        return None
    return float(np.abs(currents - mean).max() / abs(mean))


#: per-bank result quantities (``BANK.imbalance_pct``, ``BANK.circulating_A``) and their units
BANK_QUANTITIES = {"imbalance_pct": "%", "circulating_A": "A"}


def bank_alone(net, bank: dict):
    """The bank's own elements as a circuit of their own: terminals open, grounded at NEG."""
    from ..netlist import Netlist

    sub = Netlist(title=net.title)
    prefix = bank["prefix"]
    for el in net.elements:
        if el.name.startswith(prefix):
            sub.add(el)
    sub.ground = bank["neg"]
    sub.ground_rule = "ground statement"
    return sub


def circulating_current(net, bank: dict) -> float:
    """Largest string current when the bank stands alone with its terminals open (at rest)."""
    sol = bank_alone(net, bank).solve(checks=False)
    value = float(max(abs(sol.current(cells[-1])) for cells in bank["strings"]))
    return at_rest_value(value, sol.branches.c)


def at_rest_value(value, c):
    """The circulating current with round-off shown as zero: below 1e-12 of the largest
    short-circuit current (E/r) of the bank's cells, equal strings exchange nothing."""
    scale = np.abs(c).max(axis=-1, initial=0.0)
    out = np.where(np.abs(value) <= 1e-12 * scale, 0.0, value)
    return float(out) if out.ndim == 0 else out


def bank_quantity(net, sol, name: str, attr: str) -> float:
    """``imbalance_pct``: the largest deviation of a string current from the strings' mean, in %
    of the mean (NaN when no net current flows); ``circulating_A``: the largest string current
    with the bank at rest on its own."""
    bank = net.banks[name]
    if attr == "imbalance_pct":
        value = _imbalance(np.array([sol.current(cells[-1]) for cells in bank["strings"]]))
        return float("nan") if value is None else value * 100
    return circulating_current(net, bank)


def bank_limits(net) -> dict[str, tuple[float, str]]:
    """Each bank's imbalance limit (a fraction) and its source: its ``limit imbalance among=BANK``
    statement, or the default."""
    out = {name: (DEFAULT_MAX, DEFAULT_SOURCE) for name in net.banks}
    for lim in net.limits:
        among = lim.values.get("among", ())
        if lim.rule == "imbalance" and len(among) == 1 and among[0] in net.banks:
            out[among[0]] = (lim.values["max"].value if "max" in lim.values else DEFAULT_MAX, f"limit statement at {lim.span}")
    return out


def check(net, sol) -> list[Verdict]:
    out: list[Verdict] = []
    limits = [lim for lim in net.limits if lim.rule == "imbalance"]
    bank_limit = bank_limits(net)
    for name, bank in net.banks.items():
        if bank["parallel"] < 2:
            continue
        cur = np.array([sol.current(cells[-1]) for cells in bank["strings"]])
        limit, source = bank_limit[name]
        value = _imbalance(cur)
        at_rest = circulating_current(net, bank)
        detail = (
            f"string currents {', '.join(f'{abs(c):.3g}' for c in cur)} A; "
            f"circulating current at no load {at_rest:.3g} A"
        )
        if value is None:
            out.append(Verdict("imbalance", f"bank {name}", None, limit * 100, "%", True, source, detail + " (no net current: imbalance not defined)", "info"))
        else:
            out.append(Verdict("imbalance", f"bank {name}", value * 100, limit * 100, "%", value <= limit, source, detail))
        out.append(Verdict("circulating current", f"bank {name}", at_rest, None, "A", True, "physics (Kirchhoff's laws); no limit", "strings exchange this current at rest", "info"))
    for lim in limits:
        among = lim.values.get("among", ())
        if len(among) == 1 and among[0] in net.banks:
            continue
        if len(among) < 2:
            continue
        cur = np.array([sol.current(n) for n in among])
        value = _imbalance(cur)
        limit = lim.values["max"].value if "max" in lim.values else DEFAULT_MAX
        detail = "currents " + ", ".join(f"{n} {abs(c):.3g} A" for n, c in zip(among, cur))
        if value is None:
            out.append(Verdict("imbalance", ", ".join(among), None, limit * 100, "%", True, f"limit statement at {lim.span}", detail, "info"))
        else:
            out.append(Verdict("imbalance", ", ".join(among), value * 100, limit * 100, "%", value <= limit, f"limit statement at {lim.span}", detail))
    return out
