"""``source``: a voltage source (charger in voltage mode, DC bus), ideal unless ``r``."""

from __future__ import annotations

import numpy as np

from ..units import RESISTANCE, VOLTAGE
from .base import Kind, Prop, mixed, nonnegative, safe_inverse


class Source(Kind):
    def branches(self, cols):
        r, emf = cols["r"], cols["emf"]
        ideal = ~(r > 0)
        g = safe_inverse(r, ~ideal)
        return mixed(ideal, g, -emf * g, np.where(ideal, emf, 0.0))


KIND = Source(
    name="source",
    doc="voltage source; first node positive; no r = ideal",
    props={
        "emf": Prop("emf", VOLTAGE, required=True, doc="open-circuit voltage"),
        "r": Prop("r", RESISTANCE, check=nonnegative, doc="internal resistance (absent: ideal)"),
    },
    columns=("emf", "r"),
    is_source=True,
)
