"""Fuses: the current they carry against their rating, with a continuous-load factor.

A fuse or breaker should not carry more than 80 % of its rating continuously: the 125 %
sizing rule for continuous loads (NEC 210.20(A), from memory; common practice).
"""

from __future__ import annotations

import numpy as np

from . import Series, elements_of

__all__ = ["rules", "CONTINUOUS_FACTOR", "SOURCE"]

CONTINUOUS_FACTOR = 0.8
SOURCE = "80 % of rating for continuous current: the 125 % sizing rule for continuous loads (NEC 210.20(A), from memory; common practice)"


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    for el in elements_of(net, "fuse"):
        rating = np.asarray(s.value(el.name, "rating"), dtype=float)
        i = np.abs(s.current(el.name))
        limit = CONTINUOUS_FACTOR * rating
        out.append(Series("fuse loading", el.name, "A", SOURCE, i, limit, i <= limit, detail=f"rating {float(np.ravel(rating)[0]):g} A"))
    return out
