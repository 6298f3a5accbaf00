"""``cable``: one conductor whose resistance follows from metal, cross-section, length and temperature.

Two models, chosen with ``model=``:

``resistivity`` (the default)
    ``R = rho20 * (1 + alpha * (temp - 20 degC)) * length / area``, with ``rho20``
    and ``alpha`` from ``dcnet/data/metals.tsv`` and the area from ``size`` (mm²)
    or an AWG ``gauge`` (ASTM B258 diameters).
``table`` (copper only)
    a ``size`` uses the IEC 60228 maximum resistance at 20 degC of its ``class``
    (2 stranded, 5 flexible; default 5, as battery cables usually are flexible);
    a ``gauge`` uses NEC Chapter 9 Table 8 (stranded, at 75 degC). Either is
    corrected to ``temp`` by the metal's linear temperature law referred to
    20 degC: ``R(T) = R(T0) * (1 + alpha*(T - 20)) / (1 + alpha*(T0 - 20))``, so at
    the table's own temperature the result is exactly the tabulated value times
    the length. A size the table does not list is refused, naming the sizes it has.

``r=`` gives a resistance per length instead of either model. ``insulation`` is
the temperature rating of the insulation (default 75 degC), kept for the ampacity
lookup (``dcnet.data.ampacity``); it does not change the resistance. A cable is
one conductor: a two-wire run is two cables (or twice the length).
"""

from __future__ import annotations

import math
import re

import numpy as np

from ..data import awg_name, iec60228_max_resistance, iec60228_table, metals, nec_table8, nec_table8_resistance
from ..errors import InputError, ValueRangeError
from ..units import AREA, LENGTH, RESISTANCE_PER_LENGTH, TEMPERATURE
from .base import Kind, Prop, above_absolute_zero, admittance, check_samples, positive

__all__ = ["awg_diameter", "awg_area", "conductor_resistance", "table_resistance", "KIND"]

_METAL_ALIASES = {"cu": "copper", "al": "aluminium", "aluminum": "aluminium"}
_GAUGE = re.compile(r"^[ \t]*([0-9]+)(?:[ \t]*/[ \t]*0)?[ \t]*$")


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


#: melting points of the conductor metals at atmospheric pressure, degC (from memory: copper
#: 1084.62, aluminium 660.32, the fixed points of the temperature scale ITS-90 for both)
MELTING_C = {"copper": 1084.62, "aluminium": 660.32}


def zero_resistance_temp(metal: str) -> float:
    """The temperature (degC) at which the linear law ``1 + alpha (T - 20)`` reaches zero:
    ``20 - 1 / alpha`` (copper, alpha 3.93e-3 /K: -234.45 degC; aluminium, 4.03e-3 /K: -228.1 degC)."""
    _, alpha, _ = metals()[metal]
    return 20.0 - 1.0 / alpha


def check_temperature(metal: str, temp, where: str = "") -> None:
    """Refuse conductor temperatures (a number, or an array of samples) where the linear law
    gives no resistance (at or below its zero) or the metal is molten."""
    low, melt = zero_resistance_temp(metal), MELTING_C[metal]
    if type(temp) is float and low < temp < melt:
        return  # one element's temperature, the common case
    t = np.asarray(temp, dtype=float)
    bad = np.flatnonzero((t <= low) | (t >= melt))
    if not len(bad):
        return
    k = int(bad[0])
    x = float(t.flat[k])
    at = f" (sample {k + 1})" if t.ndim else ""
    _, alpha, _ = metals()[metal]
    if x <= low:
        raise _about("temp", ValueRangeError(
            f"temp={x:g} degC is at or below {low:.1f} degC, where {metal}'s linear resistance law "
            f"(alpha {alpha:g} /K at 20 degC) reaches zero resistance{at}",
            hint="the linear law is for service temperatures; for a conductor this cold give its resistance with r= per length",
        ))
    raise _about("temp", ValueRangeError(f"temp={x:g} degC is at or above the melting point of {metal} ({melt:g} degC){at}"))


def _about(prop: str, err):
    """Mark which property an error is about (the language layer points at its value)."""
    err.prop = prop
    return err


def _temperature_factor(metal: str, temp: float, table_temp: float) -> float:
    """Resistance at ``temp`` over resistance at ``table_temp`` (linear law with alpha at 20 degC)."""
    _, alpha, _ = metals()[metal]
    return (1.0 + alpha * (temp - 20.0)) / (1.0 + alpha * (table_temp - 20.0))


def table_resistance(
    length: float, *, area: float | None = None, awg: int | None = None, cls: int = 5, temp: float = 20.0
) -> tuple[float, str]:
    """Resistance in ohms of one copper conductor from the published tables, and the table's source.

    An AWG number (``awg``; 0 is 1/0, -3 is 4/0) uses NEC Chapter 9 Table 8 (75 degC); otherwise
    ``area`` (m²) uses the IEC 60228 maximum of class ``cls`` (20 degC). Both are corrected to
    ``temp`` with copper's temperature coefficient. A size the table does not list is an
    :class:`InputError` naming the sizes it has.
    """
    if awg is not None:
        found = nec_table8_resistance(awg)
        if found is None:
            sizes = ", ".join(awg_name(n) for n in sorted(nec_table8(), reverse=True))
            raise InputError(
                f"AWG {awg_name(awg)} is not in NEC Chapter 9 Table 8 as dcnet has it (sizes: {sizes})",
                hint="use a tabulated gauge, or model=resistivity",
            )
        per_m, source = found
        table_temp = 75.0
    else:
        if cls not in (2, 5):
            raise InputError(f"IEC 60228 class {cls} is not in dcnet's table", hint="class=2 (stranded) or class=5 (flexible)")
        found = iec60228_max_resistance(area, cls)
        if found is None:
            sizes = ", ".join(f"{s:g}" for s in sorted(iec60228_table()))
            raise InputError(
                f"{area * 1e6:g} mm2 is not a size in the IEC 60228 table (sizes: {sizes} mm2)",
                hint="use a tabulated size, or model=resistivity",
            )
        per_m, source = found
        table_temp = 20.0
    return per_m * _temperature_factor("copper", temp, table_temp) * length, source


def _check_derived(out: dict) -> None:
    """A study's derived resistances, held to what :func:`~dcnet.kinds.base.check_finished` holds one element to."""
    from .base import MAX_MAGNITUDE, MIN_MAGNITUDE

    for key in ("r", "r_per_m"):
        arr = np.asarray(out[key], dtype=float)
        bad = np.flatnonzero(~np.isfinite(arr) | (arr <= MIN_MAGNITUDE) | (arr > MAX_MAGNITUDE))
        if len(bad):
            k = int(bad[0])
            at = f" (sample {k + 1})" if arr.ndim else ""
            raise ValueRangeError(f"the cable's {key}={float(arr.flat[k]):g} is not a resistance of physical size{at}")


class Cable(Kind):
    def finish(self, values):
        metal = _METAL_ALIASES.get(values["metal"], values["metal"])
        values["metal"] = metal
        values["class"] = int(values["class"])
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
        check_temperature(metal, temp)
        if values["model"] == "table":
            if metal != "copper":
                raise InputError(
                    f"model=table has tables for copper only, not {metal}",
                    hint="use model=resistivity for this metal",
                )
            values["r"], values["table_source"] = table_resistance(
                length, area=values["area"], awg=values.get("awg"), cls=values["class"], temp=temp
            )
        else:
            values["r"] = conductor_resistance(length, values["area"], metal, temp)
        values["r_per_m"] = values["r"] / length if length else 0.0
        return values

    def finish_batch(self, values, varied):
        """The resistance (and what it derives from) for every sample of a study, by the same
        arithmetic as :meth:`finish`."""
        out = {key: check_samples(self.props[key], key, arr) for key, arr in varied.items()}
        length = out.get("length", values["length"])
        if "area" not in values:  # r= per length
            r_per_m = out.pop("r", values["r_per_m"])
            out["r_per_m"] = np.broadcast_to(r_per_m, np.shape(length)) if np.ndim(r_per_m) < np.ndim(length) else r_per_m
            out["r"] = out["r_per_m"] * length
            _check_derived(out)
            return out
        area = out.get("size", values["area"])
        temp = out.get("temp", values["temp"])
        if "temp" in out:
            check_temperature(values["metal"], temp)
        if "size" in varied:
            out["area"] = area  # "size" stays as written, "area" is what the models use
        if values["model"] == "table":
            n = max(np.size(length), np.size(area), np.size(temp))
            r = np.empty(n)
            areas = np.broadcast_to(area, (n,))
            for a in np.unique(areas):
                at = areas == a
                pick = lambda x: np.broadcast_to(x, (n,))[at]  # noqa: E731
                r[at], _ = table_resistance(pick(length), area=float(a), awg=values.get("awg"), cls=values["class"], temp=pick(temp))
        else:
            r = conductor_resistance(length, area, values["metal"], temp)
        out["r"] = r
        out["r_per_m"] = r / length
        _check_derived(out)
        return out

    def branches(self, cols):
        return admittance(1 / cols["r"])

    def extras(self, cols, v, i, ctx):
        # drop as a share of the section voltage of the cable's conductor group (the one
        # definition of dcnet.analysis.sections); NaN where the group has no section
        ref = np.asarray(ctx.get("section_voltage", np.nan), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            drop = np.where(ref > 0, np.abs(v) / ref * 100.0, np.nan)
        return {"resistance_ohm": cols["r"], "drop_pct": drop}


KIND = Cable(
    name="cable",
    doc="one conductor; resistance from metal, cross-section, length and temperature",
    props={
        "length": Prop("length", LENGTH, required=True, check=positive, doc="conductor length (one way)"),
        "size": Prop("size", AREA, check=positive, doc="cross-section, e.g. 25mm2"),
        "gauge": Prop("gauge", form="gauge", doc="AWG number: 10, 1/0, 4/0"),
        "metal": Prop("metal", form="word", words=("copper", "aluminium", "aluminum", "cu", "al"), default="copper", doc="conductor metal"),
        "temp": Prop("temp", TEMPERATURE, default=20.0, check=above_absolute_zero, doc="conductor temperature"),
        "r": Prop("r", RESISTANCE_PER_LENGTH, check=positive, doc="resistance per length (overrides the model)"),
        "model": Prop(
            "model", form="word", words=("resistivity", "table"), default="resistivity",
            doc="resistance model: resistivity (rho x length / area) or table (IEC 60228 / NEC Table 8)",
        ),
        "class": Prop(
            "class", form="word", words=("2", "5"), default="5",
            doc="IEC 60228 conductor class for model=table with size=: 2 stranded, 5 flexible (default)",
        ),
        "insulation": Prop("insulation", TEMPERATURE, default=75.0, check=above_absolute_zero, doc="insulation temperature rating, for ampacity"),
    },
    columns=("r", "length"),
)
