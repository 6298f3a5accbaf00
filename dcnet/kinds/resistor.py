"""``resistor``: a linear resistance."""

from __future__ import annotations

from ..units import RESISTANCE
from .base import Kind, Prop, admittance, positive


class Resistor(Kind):
    def branches(self, cols):
        return admittance(1 / cols["r"])


KIND = Resistor(
    name="resistor",
    doc="linear resistance",
    props={"r": Prop("r", RESISTANCE, required=True, check=positive, doc="resistance")},
    columns=("r",),
)
