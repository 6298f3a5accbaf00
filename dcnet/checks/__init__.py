"""Installation checks: rules over a solved circuit that return verdicts.

Every rule is written once, on arrays with one entry per sample: a rule module defines
``rules(net, s) -> list[Series]``, where ``s`` is a view of solved samples with the lookups of
a Solution returning arrays (:class:`dcnet.checks.view.OneSample` for one solve,
:class:`dcnet.analysis.studies.Samples` for the samples of a sweep or spread). A single solve
is one sample: :func:`run` turns each :class:`Series` into a :class:`Verdict`, and studies
(:func:`run_samples`) keep the arrays.

A verdict always carries the value, the limit, pass or fail, and the source of the limit (a
standard, a data sheet, "from memory", or "common practice, no source"). A rule that cannot
tell is silent about the subject and says why in ``s.notes`` (the solve's warnings); it never
guesses.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np

__all__ = ["Verdict", "Series", "run", "run_samples", "RULES", "elements_of"]


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
        self.value = None if self.value is None or (isinstance(self.value, float) and math.isnan(self.value)) else float(self.value)
        self.limit = None if self.limit is None or (isinstance(self.limit, float) and math.isnan(self.limit)) else float(self.limit)

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


@dataclass
class Series:
    """One rule and subject over every sample.

    ``value``/``limit`` are floats per sample (NaN where there is none), ``ok`` per sample;
    ``judged`` False where the rule does not apply to that sample (no verdict, e.g. imbalance
    of a bank at rest). ``detail`` describes the first sample (one solve). ``quiet`` series
    (wiring checks) are listed for one solve only when they fail.
    """

    rule: str
    subject: str
    unit: str
    source: str
    value: np.ndarray
    limit: np.ndarray
    ok: np.ndarray
    sense: str = "max"
    judged: np.ndarray | None = None
    detail: str = ""
    quiet: bool = False
    extra: dict = field(default_factory=dict)

    def __post_init__(self):
        n = max(np.size(self.value), np.size(self.limit), np.size(self.ok), 1 if self.judged is None else np.size(self.judged))
        self.value = np.broadcast_to(np.asarray(self.value, dtype=float), (n,)).copy()
        self.limit = np.broadcast_to(np.asarray(self.limit, dtype=float), (n,)).copy()
        self.ok = np.broadcast_to(np.asarray(self.ok, dtype=bool), (n,)).copy()
        judged = np.ones(n, dtype=bool) if self.judged is None else self.judged
        self.judged = np.broadcast_to(np.asarray(judged, dtype=bool), (n,)).copy()
        self.ok |= ~self.judged

    def verdict(self, k: int = 0) -> Verdict | None:
        if not self.judged[k]:
            return None
        lim = None if np.isnan(self.limit[k]) else float(self.limit[k])
        return Verdict(self.rule, self.subject, float(self.value[k]), lim, self.unit, bool(self.ok[k]), self.source, self.detail, self.sense)

    def as_samples(self) -> dict:
        """The study form: value NaN where not judged (CheckSeries in dcnet.analysis.studies)."""
        return {
            "rule": self.rule,
            "subject": self.subject,
            "unit": self.unit,
            "sense": self.sense,
            "source": self.source,
            "value": np.where(self.judged, self.value, np.nan),
            "limit": np.where(self.judged, self.limit, np.nan),
            "ok": self.ok.copy(),
        }


def elements_of(net, *kinds):
    """The elements of the given kinds, in file order, without walking the whole netlist."""
    _, _, by_kind = net.indices()
    positions = sorted(p for k in kinds for p in by_kind.get(k, ()))
    return [net.elements[p] for p in positions]


def _rules():
    from . import cables, cells, drop, fault, fuses, imbalance, limits, protection, wiring

    return [wiring.rules, imbalance.rules, cells.rules, cables.rules, protection.rules, fuses.rules, drop.rules, fault.rules, limits.rules]


RULES = _rules


def _order(v: Verdict):
    return (v.ok, -v.margin if math.isfinite(v.margin) else -1e300)


def run(net, sol) -> list[Verdict]:
    """All checks of a solved circuit, failures first, then by how close each is to its limit.

    What a rule could not judge is added to the solution's warnings.
    """
    from .view import OneSample

    s = OneSample(sol)
    verdicts: list[Verdict] = []
    for rule in _rules():
        for series in rule(net, s):
            v = series.verdict(0)
            if v is None or (series.quiet and v.ok):
                continue
            verdicts.append(v)
    for note in s.notes:
        if note not in sol.warnings:
            sol.warnings.append(note)
    verdicts.sort(key=_order)
    return verdicts


def run_samples(net, s, *, fault: bool = False) -> list[dict]:
    """Every check of every sample (studies): dicts with per-sample ``value``, ``limit`` and ``ok``.

    Information lines (no limit) are left out; the prospective fault current is included
    when ``fault`` is set (it costs more right-hand sides on every sample's matrix).
    """
    out: list[dict] = []
    for rule in _rules():
        if rule.__module__.endswith(".fault") and not fault:
            continue
        for series in rule(net, s):
            if series.sense == "info":
                continue
            out.append(series.as_samples())
    return out
