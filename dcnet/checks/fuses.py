"""Fuses: the current they carry against their rating, with a continuous-load factor.

A fuse or breaker should not carry more than 80 % of its rating continuously: the 125 %
sizing rule for continuous loads (NEC 210.20(A), from memory; common practice).
"""

from __future__ import annotations

from . import Verdict, elements_of

CONTINUOUS_FACTOR = 0.8
SOURCE = "80 % of rating for continuous current: the 125 % sizing rule for continuous loads (NEC 210.20(A), from memory; common practice)"


def check(net, sol) -> list[Verdict]:
    out: list[Verdict] = []
    for el in elements_of(net, "fuse"):
        rating = el.values["rating"]
        i = abs(sol.current(el.name))
        limit = CONTINUOUS_FACTOR * rating
        out.append(Verdict("fuse loading", el.name, i, limit, "A", i <= limit, SOURCE, f"rating {rating:g} A"))
    return out
