"""Cables: current against the ampacity of their size, metal and insulation rating."""

from __future__ import annotations

import numpy as np

from . import Series, elements_of

__all__ = ["rules", "cable_ampacity"]


def cable_ampacity(s, el) -> tuple[np.ndarray, str]:
    """The ampacity of a cable per sample (NaN where the table has none) and the source (or why none)."""
    from ..data import ampacity

    v = el.values
    area = np.broadcast_to(np.asarray(s.value(el.name, "area"), dtype=float), (s.n,))
    insulation = np.broadcast_to(np.asarray(s.value(el.name, "insulation", 75.0), dtype=float), (s.n,))
    amps = np.full(s.n, np.nan)
    source = ""
    for a, t in np.unique(np.column_stack([area, insulation]), axis=0):
        found, source = ampacity(float(a), v.get("awg"), v.get("metal", "copper"), float(t))
        amps[(area == a) & (insulation == t)] = np.nan if found is None else found
    return amps, source


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    for el in elements_of(net, "cable"):
        if el.values.get("area") is None:
            continue  # r= per length: no cross-section to look up
        amps, source = cable_ampacity(s, el)
        i = np.abs(s.current(el.name))
        if np.isnan(amps).all():
            out.append(Series("cable ampacity", el.name, "A", source, i, np.nan, True, sense="info", detail="not checked"))
            continue
        out.append(Series("cable ampacity", el.name, "A", source, i, amps, i <= amps, judged=~np.isnan(amps)))
    return out
