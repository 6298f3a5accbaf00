"""``load``: a resistive (``r``) or constant-current (``current``) consumer.

Constant-power loads (``power``) are nonlinear and are solved by the Newton
solver; the linear path refuses them with a clear message until it exists.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..units import CURRENT, POWER, RESISTANCE, VOLTAGE
from .base import Kind, Prop, admittance, positive


class Load(Kind):
    def finish(self, values):
        given = [k for k in ("r", "current", "power") if k in values]
        if len(given) != 1:
            found = ", ".join(given) if given else "none"
            raise InputError(
                f"a load needs exactly one of r, current, power (found: {found})",
                hint="for example: load HEAT feed gnd r=1.6Ohm",
            )
        if "power" in values:
            raise InputError(
                "constant-power loads (power=) are not supported yet",
                hint="model the load as r= (its resistance at the working voltage) or current=",
            )
        return values

    def branches(self, cols):
        r, cur = cols["r"], cols["current"]
        resistive = ~np.isnan(r)
        g = np.zeros(len(r))
        np.divide(1.0, r, out=g, where=resistive)
        return admittance(g, np.where(resistive, 0.0, cur))


KIND = Load(
    name="load",
    doc="consumer: resistive (r) or constant-current (current)",
    props={
        "r": Prop("r", RESISTANCE, check=positive, doc="resistance"),
        "current": Prop("current", CURRENT, doc="constant current drawn (first node to second)"),
        "power": Prop("power", POWER, check=positive, doc="constant power drawn"),
        "vmin": Prop("vmin", VOLTAGE, doc="lowest working voltage"),
        "critical": Prop("critical", form="word", words=("yes", "no"), default="no", doc="a critical load (3 % drop limit instead of 10 %)"),
    },
    columns=("r", "current", "vmin"),
    busy_word="drawing",
)
