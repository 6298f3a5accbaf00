"""Installation checks: functions over a netlist and its solution that return verdicts.

Each rule module defines ``check(net, sol) -> list[Verdict]``; :func:`run` runs them all
(the default rules and the file's ``limit`` statements) and returns the verdicts worst
first. A verdict always carries the value, the limit, pass or fail, and the source of
the limit (a standard, a data sheet, or "common practice, no source").
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = ["Verdict", "run", "RULES", "elements_of"]


@dataclass
class Verdict:
    """One check of one subject."""

    rule: str
    subject: str
    value: float | None
    limit: float | None
    unit: str
    ok: bool
    source: str
    detail: str = ""
    #: "max" (value must not exceed limit), "min" (must not fall below) or "info" (no limit)
    sense: str = "max"

    def __post_init__(self):
        # plain Python types, so verdicts serialise to JSON and pickle across processes
        self.ok = bool(self.ok)
        self.value = None if self.value is None else float(self.value)
        self.limit = None if self.limit is None else float(self.limit)

    @property
    def margin(self) -> float:
        """value/limit for a maximum, limit/value for a minimum (above 1 = failing)."""
        if self.value is None or self.limit is None or self.sense == "info":
            return 0.0
        v, lim = abs(self.value), abs(self.limit)
        if self.sense == "max":
            return v / lim if lim else math.inf
        return lim / v if v else math.inf

    def to_dict(self) -> dict:
        """Plain JSON-ready data; an unlimited value (an ideal path) becomes null with ``unlimited`` true."""
        d = asdict(self)
        margin = self.margin
        d["margin"] = margin if math.isfinite(margin) else None
        d["unlimited"] = self.value is not None and not math.isfinite(self.value)
        if d["unlimited"]:
            d["value"] = None
        return d


def elements_of(net, *kinds):
    """The elements of the given kinds, in file order, without walking the whole netlist."""
    _, _, by_kind = net.indices()
    positions = sorted(p for k in kinds for p in by_kind.get(k, ()))
    return [net.elements[p] for p in positions]


def _rules():
    from . import cables, cells, drop, fault, fuses, imbalance, limits

    return [imbalance.check, cells.check, cables.check, fuses.check, drop.check, fault.check, limits.check]


RULES = _rules


def run(net, sol) -> list[Verdict]:
    """All checks of a solved circuit, failures first, then by how close each is to its limit."""
    verdicts: list[Verdict] = []
    for rule in _rules():
        verdicts.extend(rule(net, sol))
    verdicts.sort(key=lambda v: (v.ok, -v.margin if math.isfinite(v.margin) else -1e300))
    return verdicts
