"""``cell``: a battery, cell or module as an EMF behind an internal resistance.

Stamped as its Norton equivalent (conductance 1/r in parallel with a current
source emf/r), so it adds no unknown to the system. Passive sign: a discharging
cell has negative current and power.
"""

from __future__ import annotations

import numpy as np

from ..units import CHARGE, CURRENT, DIMENSIONLESS, RESISTANCE, VOLTAGE
from .base import Kind, Prop, admittance, positive

CHEMISTRIES = ("lead-acid", "agm", "gel", "lifepo4", "nmc", "lto", "nimh")


class Cell(Kind):
    def finish(self, values):
        soc = values.get("soc")
        if soc is not None and not 0.0 <= soc <= 1.0:
            from ..errors import ValueRangeError

            raise ValueRangeError(f"soc must lie between 0% and 100%, got {soc * 100:g}%")
        return values

    def branches(self, cols):
        g = 1.0 / cols["r"]
        return admittance(g, -cols["emf"] * g)

    def extras(self, cols, v, i, ctx):
        return {"loss_W": i * i * cols["r"], "emf_power_W": cols["emf"] * i}

    def state(self, cols, v, i):
        scale = max(float(np.abs(i).max(initial=0.0)), 1e-300)
        return np.where(np.abs(i) <= 1e-12 * scale, "idle", np.where(i > 0, "charging", "discharging"))


KIND = Cell(
    name="cell",
    doc="battery, cell or module: EMF behind internal resistance; first node positive",
    props={
        "emf": Prop("emf", VOLTAGE, required=True, doc="open-circuit voltage"),
        "r": Prop("r", RESISTANCE, required=True, check=positive, doc="internal resistance"),
        "capacity": Prop("capacity", CHARGE, check=positive, doc="rated capacity"),
        "chemistry": Prop("chemistry", form="word", words=CHEMISTRIES, doc="cell chemistry"),
        "soc": Prop("soc", DIMENSIONLESS, doc="state of charge (0..100 %)"),
        "vmin": Prop("vmin", VOLTAGE, doc="lowest allowed terminal voltage"),
        "vmax": Prop("vmax", VOLTAGE, doc="highest allowed terminal voltage"),
        "imax": Prop("imax", CURRENT, check=positive, doc="largest allowed current magnitude"),
    },
    columns=("emf", "r", "capacity", "vmin", "vmax", "imax"),
    is_source=True,
)
