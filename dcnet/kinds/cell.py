"""``cell``: a battery, cell or module as an EMF behind an internal resistance.

Stamped as its Norton equivalent (conductance 1/r in parallel with a current
source emf/r), so it adds no unknown to the system. Passive sign: a discharging
cell has negative current and power.
"""

from __future__ import annotations

import numpy as np

from ..units import CHARGE, CURRENT, DIMENSIONLESS, RESISTANCE, TIME, VOLTAGE
from .base import Kind, Prop, admittance, positive

CHEMISTRIES = ("lead-acid", "agm", "gel", "lifepo4", "nmc", "lto", "nimh")


class Cell(Kind):
    def finish(self, values):
        from ..errors import ValueRangeError

        soc = values.get("soc")
        if soc is not None and not 0.0 <= soc <= 1.0:
            raise ValueRangeError(f"soc must lie between 0% and 100%, got {soc * 100:g}%")
        eta = values.get("eta")
        if eta is not None and not 0.0 < eta <= 1.0:
            raise ValueRangeError(f"eta (coulombic efficiency) must lie above 0% and at most 100%, got {eta * 100:g}%")
        n = values.get("cells")
        if n is not None and (n != int(n) or n < 1):
            raise ValueRangeError(f"cells (cells in series inside the element) must be a whole number of at least 1, got {n:g}")
        lo, hi = values.get("vmin"), values.get("vmax")
        if lo is not None and hi is not None and lo >= hi:
            raise ValueRangeError(f"vmin ({lo:g} V) must lie below vmax ({hi:g} V)")
        k = values.get("peukert")
        if k is not None and not 1.0 <= k <= 2.0:
            raise ValueRangeError(f"peukert exponent must lie between 1 and 2, got {k:g}", hint="lead-acid batteries are typically 1.1 to 1.3")
        return values

    def branches(self, cols):
        g = 1 / cols["r"]
        return admittance(g, -cols["emf"] * g)

    def extras(self, cols, v, i, ctx):
        return {"loss_W": i * i * cols["r"], "emf_power_W": cols["emf"] * i}

    def state(self, cols, v, i):
        return np.where(i == 0, "idle", np.where(i > 0, "charging", "discharging"))


KIND = Cell(
    name="cell",
    doc="battery, cell or module: EMF behind internal resistance; first node positive",
    props={
        "emf": Prop("emf", VOLTAGE, required=True, doc="open-circuit voltage"),
        "r": Prop("r", RESISTANCE, required=True, check=positive, doc="internal resistance"),
        "capacity": Prop("capacity", CHARGE, check=positive, doc="rated capacity"),
        "chemistry": Prop("chemistry", form="word", words=CHEMISTRIES, doc="cell chemistry"),
        "cells": Prop("cells", DIMENSIONLESS, check=positive, doc="cells in series inside the element (a 12 V lead-acid battery has 6), for the voltage window"),
        "soc": Prop("soc", DIMENSIONLESS, doc="state of charge (0..100 %)"),
        "vmin": Prop("vmin", VOLTAGE, doc="lowest allowed terminal voltage"),
        "vmax": Prop("vmax", VOLTAGE, doc="highest allowed terminal voltage"),
        "imax": Prop("imax", CURRENT, check=positive, doc="largest allowed current magnitude"),
        # for charge/discharge cycles (dcnet cycle)
        "curve": Prop("curve", form="word", words=("chemistry", "flat"), doc="EMF against state of charge in cycles: the chemistry's curve (default where it has one) or flat"),
        "r_empty": Prop("r_empty", RESISTANCE, check=positive, doc="internal resistance at 0 % state of charge (linear in between)"),
        "eta": Prop("eta", DIMENSIONLESS, doc="coulombic (charge) efficiency, default 100 %"),
        "peukert": Prop("peukert", DIMENSIONLESS, check=positive, doc="Peukert exponent (discharge), default 1"),
        "rate": Prop("rate", TIME, check=positive, doc="discharge time at which capacity is rated (Peukert), default 20 h"),
    },
    columns=("emf", "r", "capacity", "vmin", "vmax", "imax", "cells"),
    is_source=True,
)
