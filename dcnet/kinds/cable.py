"""``cable``: one conductor whose resistance follows from metal, cross-section, length and temperature.

``R = rho20 * (1 + alpha * (temp - 20 degC)) * length / area``, with ``rho20``
and ``alpha`` from ``dcnet/data/metals.tsv`` and the area from ``size`` (mm²)
or an AWG ``gauge`` (ASTM B258 diameters). ``r=`` gives a resistance per length
instead. A cable is one conductor: a two-wire run is two cables (or twice the
length).
"""

from __future__ import annotations

import math
import re

import numpy as np

from ..data import metals
from ..errors import InputError, ValueRangeError
from ..units import AREA, LENGTH, RESISTANCE_PER_LENGTH, TEMPERATURE
from .base import Kind, Prop, admittance, nonnegative, positive

__all__ = ["awg_diameter", "awg_area", "conductor_resistance", "KIND"]

_METAL_ALIASES = {"cu": "copper", "al": "aluminium", "aluminum": "aluminium"}
_GAUGE = re.compile(r"^\s*(\d+)(?:\s*/\s*0)?\s*$")


def parse_gauge(text: str) -> int:
    """AWG number from its written form: ``10`` -> 10, ``1/0`` -> 0, ``2/0`` -> -1, ``4/0`` -> -3."""
    m = _GAUGE.match(text)
    if not m:
        raise InputError(f"'{text}' is not an AWG gauge", hint="write e.g. gauge=10, gauge=1/0 or gauge=4/0")
    n = int(m.group(1))
    if "/" in text:
        if not 1 <= n <= 4:
            raise ValueRangeError(f"AWG {text} is outside 1/0..4/0")
        return 1 - n
    if n > 40:
        raise ValueRangeError(f"AWG {n} is thinner than the tables go (40)")
    return n


def awg_diameter(n: int) -> float:
    """Diameter in metres of AWG number ``n`` (``0`` for 1/0, ``-3`` for 4/0); ASTM B258."""
    return 0.127e-3 * 92.0 ** ((36 - n) / 39)


def awg_area(n: int) -> float:
    """Cross-section in m² of a solid round conductor of AWG ``n``."""
    return math.pi / 4 * awg_diameter(n) ** 2


def conductor_resistance(length: float, area: float, metal: str = "copper", temp: float = 20.0) -> float:
    """Resistance in ohms of one conductor (SI inputs, temperature in degC)."""
    rho20, alpha, _ = metals()[metal]
    return rho20 * (1.0 + alpha * (temp - 20.0)) * length / area


class Cable(Kind):
    def finish(self, values):
        metal = _METAL_ALIASES.get(values["metal"], values["metal"])
        values["metal"] = metal
        has_size, has_gauge, has_r = "size" in values, "gauge" in values, "r" in values
        if has_size and has_gauge:
            raise InputError("a cable takes size= or gauge=, not both", hint="keep one of them")
        length = values["length"]
        if has_r:
            values["r_per_m"] = values.pop("r")
            values["r"] = values["r_per_m"] * length
            return values
        if has_gauge:
            values["awg"] = parse_gauge(values["gauge"])
            values["area"] = awg_area(values["awg"])
        elif has_size:
            values["area"] = values["size"]
        else:
            raise InputError(
                "a cable needs its cross-section: size= (mm2) or gauge= (AWG), or r= per length",
                hint="for example: cable P1 a b length=2m size=25mm2",
            )
        temp = values["temp"]
        if temp < -273.15:
            raise ValueRangeError(f"temp={temp:g} degC is below absolute zero")
        values["r"] = conductor_resistance(length, values["area"], metal, temp)
        values["r_per_m"] = values["r"] / length if length else 0.0
        return values

    def branches(self, cols):
        return admittance(1.0 / cols["r"])

    def extras(self, cols, v, i, ctx):
        ref = ctx.get("system_voltage", 0.0)
        drop = np.abs(v) / ref * 100.0 if ref > 0 else np.full(len(v), np.nan)
        return {"resistance_ohm": cols["r"], "drop_pct": drop}


KIND = Cable(
    name="cable",
    doc="one conductor; resistance from metal, cross-section, length and temperature",
    props={
        "length": Prop("length", LENGTH, required=True, check=positive, doc="conductor length (one way)"),
        "size": Prop("size", AREA, check=positive, doc="cross-section, e.g. 25mm2"),
        "gauge": Prop("gauge", form="gauge", doc="AWG number: 10, 1/0, 4/0"),
        "metal": Prop("metal", form="word", words=("copper", "aluminium", "aluminum", "cu", "al"), default="copper", doc="conductor metal"),
        "temp": Prop("temp", TEMPERATURE, default=20.0, doc="conductor temperature"),
        "r": Prop("r", RESISTANCE_PER_LENGTH, check=nonnegative, doc="resistance per length (overrides the model)"),
    },
    columns=("r", "length"),
)
