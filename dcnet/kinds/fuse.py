"""``fuse``: conducts like a small resistance; its current is checked against its rating."""

from __future__ import annotations

import numpy as np

from ..units import CURRENT, RESISTANCE
from .base import Kind, Prop, nonnegative, positive
from .link import resistive_or_ideal


class Fuse(Kind):
    def branches(self, cols):
        return resistive_or_ideal(cols["r"])

    def extras(self, cols, v, i, ctx):
        return {"loading_pct": np.abs(i) / cols["rating"] * 100.0}


KIND = Fuse(
    name="fuse",
    doc="fuse or breaker: conducts like a small resistor, checked against its rating",
    props={
        "rating": Prop("rating", CURRENT, required=True, check=positive, doc="rated current"),
        "r": Prop("r", RESISTANCE, check=nonnegative, doc="resistance (absent: ideal)"),
        "interrupt": Prop("interrupt", CURRENT, check=positive, doc="interrupting (breaking) capacity"),
    },
    columns=("rating", "r", "interrupt"),
)
