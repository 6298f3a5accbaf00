"""Cables: current against the ampacity of their size, metal and insulation rating."""

from __future__ import annotations

from . import Verdict, elements_of


def check(net, sol) -> list[Verdict]:
    try:
        from ..data import ampacity
    except ImportError:  # pragma: no cover
        return []
    out: list[Verdict] = []
    for el in elements_of(net, "cable"):
        v = el.values
        area = v.get("area")
        if area is None:
            continue  # r= per length: no cross-section to look up
        insulation = v.get("insulation", 75.0)
        amps, source = ampacity(area, v.get("awg"), v.get("metal", "copper"), insulation)
        i = abs(sol.current(el.name))
        if amps is None:
            out.append(Verdict("cable ampacity", el.name, i, None, "A", True, source, "not checked", "info"))
            continue
        out.append(Verdict("cable ampacity", el.name, i, amps, "A", i <= amps, source))
    return out
