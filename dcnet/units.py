"""Units and dimensions of the circuit language.

A dimension is a tuple of integer exponents over our five base quantities
``(volt, ampere, second, metre, temperature)``. Every value inside dcnet is an
SI float (volts, amperes, ohms, seconds, metres, square metres, joules) except
temperature, which is kept in degrees Celsius because every temperature rule we
use (conductor resistance, chemistry windows) is written in Celsius.

Units are only known at the edges: here, for parsing, and in ``report`` for
printing.
"""

from __future__ import annotations

import difflib
import math
from typing import NamedTuple

__all__ = [
    "Dim",
    "Quantity",
    "DIMENSIONLESS",
    "VOLTAGE",
    "CURRENT",
    "RESISTANCE",
    "RESISTANCE_PER_LENGTH",
    "CONDUCTANCE",
    "POWER",
    "ENERGY",
    "CHARGE",
    "TIME",
    "LENGTH",
    "AREA",
    "TEMPERATURE",
    "UNITS",
    "lookup_unit",
    "suggest_unit",
    "dim_name",
]

Dim = tuple[int, int, int, int, int]

DIMENSIONLESS: Dim = (0, 0, 0, 0, 0)
VOLTAGE: Dim = (1, 0, 0, 0, 0)
CURRENT: Dim = (0, 1, 0, 0, 0)
TIME: Dim = (0, 0, 1, 0, 0)
LENGTH: Dim = (0, 0, 0, 1, 0)
TEMPERATURE: Dim = (0, 0, 0, 0, 1)
RESISTANCE: Dim = (1, -1, 0, 0, 0)
RESISTANCE_PER_LENGTH: Dim = (1, -1, 0, -1, 0)
CONDUCTANCE: Dim = (-1, 1, 0, 0, 0)
POWER: Dim = (1, 1, 0, 0, 0)
ENERGY: Dim = (1, 1, 1, 0, 0)
CHARGE: Dim = (0, 1, 1, 0, 0)
AREA: Dim = (0, 0, 0, 2, 0)

_DIM_NAMES: dict[Dim, str] = {
    DIMENSIONLESS: "a plain number",
    VOLTAGE: "a voltage (V)",
    CURRENT: "a current (A)",
    TIME: "a time (s, min, h)",
    LENGTH: "a length (m, mm, ft)",
    TEMPERATURE: "a temperature (degC)",
    RESISTANCE: "a resistance (Ohm)",
    RESISTANCE_PER_LENGTH: "a resistance per length (e.g. mOhm/m)",
    CONDUCTANCE: "a conductance (S)",
    POWER: "a power (W)",
    ENERGY: "an energy (J, Wh)",
    CHARGE: "a charge (Ah)",
    AREA: "a cross-section (mm2)",
}

_BASE_SYMBOLS = ("V", "A", "s", "m", "degC")


def dim_name(dim: Dim) -> str:
    """Words for a dimension, e.g. ``"a resistance (Ohm)"``."""
    if dim in _DIM_NAMES:
        return _DIM_NAMES[dim]
    parts = []
    for sym, exp in zip(_BASE_SYMBOLS, dim):
        if exp == 1:
            parts.append(sym)
        elif exp:
            parts.append(f"{sym}^{exp}")
    return "a quantity in " + "·".join(parts)


class Quantity(NamedTuple):
    """A value in SI (Celsius for temperature) with its dimension."""

    value: float
    dim: Dim = DIMENSIONLESS


def _unit_table() -> dict[str, Quantity]:
    prefixes = {"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3, "k": 1e3, "M": 1e6, "G": 1e9}
    prefixable = {
        "V": Quantity(1.0, VOLTAGE),
        "A": Quantity(1.0, CURRENT),
        "Ohm": Quantity(1.0, RESISTANCE),
        "ohm": Quantity(1.0, RESISTANCE),
        "Ω": Quantity(1.0, RESISTANCE),
        "S": Quantity(1.0, CONDUCTANCE),
        "W": Quantity(1.0, POWER),
        "Wh": Quantity(3600.0, ENERGY),
        "Ah": Quantity(3600.0, CHARGE),
        "J": Quantity(1.0, ENERGY),
        "s": Quantity(1.0, TIME),
    }
    table: dict[str, Quantity] = {}
    for sym, q in prefixable.items():
        table[sym] = q
        for p, f in prefixes.items():
            table[p + sym] = Quantity(q.value * f, q.dim)
    plain = {
        "min": Quantity(60.0, TIME),
        "h": Quantity(3600.0, TIME),
        "m": Quantity(1.0, LENGTH),
        "mm": Quantity(1e-3, LENGTH),
        "cm": Quantity(1e-2, LENGTH),
        "km": Quantity(1e3, LENGTH),
        "ft": Quantity(0.3048, LENGTH),
        "mm2": Quantity(1e-6, AREA),
        "mm²": Quantity(1e-6, AREA),
        "degC": Quantity(1.0, TEMPERATURE),
        "°C": Quantity(1.0, TEMPERATURE),
        "%": Quantity(0.01, DIMENSIONLESS),
    }
    table.update(plain)
    return table


UNITS: dict[str, Quantity] = _unit_table()
_LOWER: dict[str, str] = {}
for _name in sorted(UNITS, key=len):
    _LOWER.setdefault(_name.lower(), _name)


def lookup_unit(symbol: str) -> Quantity | None:
    """The quantity one ``symbol`` stands for, or None when unknown."""
    return UNITS.get(symbol)


def suggest_unit(symbol: str) -> str | None:
    """The nearest known unit to a misspelt one (``mohms`` -> ``mOhm``)."""
    low = symbol.lower()
    for cand in (low, low.rstrip("s"), low.replace("ohms", "ohm")):
        if cand in _LOWER:
            return _LOWER[cand]
    close = difflib.get_close_matches(low, list(_LOWER), n=1, cutoff=0.6)
    return _LOWER[close[0]] if close else None


def is_finite(x: float) -> bool:
    return math.isfinite(x)
