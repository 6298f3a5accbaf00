"""``supply``: an ideal current source (a charger in current mode).

It pushes ``current`` out of its first (positive) node, so its passive-sign
current is ``-current``.
"""

from __future__ import annotations

import numpy as np

from ..units import CURRENT
from .base import Kind, Prop, admittance


class Supply(Kind):
    def branches(self, cols):
        cur = cols["current"]
        return admittance(np.zeros(len(cur), dtype=cur.dtype), -cur)


KIND = Supply(
    name="supply",
    doc="ideal current source; pushes current out of its first node",
    props={"current": Prop("current", CURRENT, required=True, doc="current delivered")},
    columns=("current",),
    is_source=True,
)
