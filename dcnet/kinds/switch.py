"""``switch``: open = absent from the network; closed = a link (ideal unless ``r``)."""

from __future__ import annotations

import numpy as np

from ..units import RESISTANCE
from .base import Kind, Prop, nonnegative
from .link import resistive_or_ideal


class Switch(Kind):
    def finish(self, values):
        values["closed"] = 1.0 if values.get("state", "closed") == "closed" else 0.0
        return values

    def branches(self, cols):
        br = resistive_or_ideal(cols["r"])
        open_ = cols["closed"] == 0
        br.is_voltage = br.is_voltage & ~open_
        br.g = np.where(open_, 0.0, br.g)
        return br

    def state(self, cols, v, i):
        return np.where(cols["closed"] == 0, "open", "closed")


KIND = Switch(
    name="switch",
    doc="switch or isolator; open = absent from the network",
    props={
        "state": Prop("state", form="word", words=("open", "closed"), default="closed", doc="open or closed"),
        "r": Prop("r", RESISTANCE, check=nonnegative, doc="contact resistance when closed (absent: ideal)"),
    },
    columns=("r", "closed"),
)
