"""``link``: a busbar, strap or jumper; without ``r`` an ideal zero-ohm connection."""

from __future__ import annotations

import numpy as np

from ..units import RESISTANCE
from .base import Kind, Prop, mixed, nonnegative, resistive_mask, safe_inverse


def resistive_or_ideal(r: np.ndarray):
    """Branches for kinds that are a resistance, or an ideal connection when ``r`` is absent or zero."""
    ideal = ~resistive_mask(r)  # NaN (absent) and 0 are ideal
    n = len(r)
    return mixed(ideal, safe_inverse(r, ~ideal), np.zeros(n), np.zeros(n))


class Link(Kind):
    def branches(self, cols):
        return resistive_or_ideal(cols["r"])


KIND = Link(
    name="link",
    doc="busbar, strap or jumper; no r = ideal zero-ohm connection",
    props={"r": Prop("r", RESISTANCE, check=nonnegative, doc="resistance (absent: ideal)")},
    columns=("r",),
)
