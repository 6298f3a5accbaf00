"""Data tables (conductors, chemistries) as commented text files, each row with its source.

Every reader returns SI values (ohms per metre, amperes, volts; temperatures in degC) together
with the source string of the row it used, so a result can always say where its number came from.
The files are read once and cached.

Files (in this folder):

``metals.tsv``
    resistivity and temperature coefficient of copper and aluminium;
``iec60228.tsv``
    IEC 60228 maximum DC resistance at 20 degC of plain copper, class 2 and class 5;
``nec_ch9_table8.tsv``
    NEC Chapter 9 Table 8, stranded uncoated copper at 75 degC;
``ampacity.tsv``
    copper ampacity, 75 degC and 90 degC columns of NEC Table 310.16;
``chemistries.tsv``
    per-cell voltages (nominal, lowest, highest) and a default discharge rate per chemistry.
"""

from __future__ import annotations

import math
from functools import lru_cache
from importlib import resources

from ..errors import ValueRangeError

__all__ = [
    "read_table",
    "metals",
    "iec60228_table",
    "iec60228_max_resistance",
    "nec_table8",
    "nec_table8_resistance",
    "ampacity_table",
    "ampacity",
    "chemistry_table",
    "chemistry",
    "awg_name",
]

_KM = 1000.0  # metres per kilometre
_KFT = 304.8  # metres per 1000 ft (1 ft = 0.3048 m exactly)
_SIZE_RTOL = 1e-6  # relative tolerance when matching a cross-section to a nominal size


def read_table(name: str, columns: int) -> list[list[str]]:
    """Rows of a whitespace-separated data file; the last column takes the rest of the line."""
    text = resources.files(__package__).joinpath(name).read_text(encoding="utf-8")
    rows = []
    for line in text.splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        rows.append(line.split(None, columns - 1))
    return rows


def _awg_number(text: str) -> int:
    """AWG number as dcnet counts it: ``10`` -> 10, ``1/0`` -> 0, ``4/0`` -> -3 (data files only)."""
    if text.endswith("/0"):
        return 1 - int(text[:-2])
    return int(text)


def awg_name(n: int) -> str:
    """The written form of AWG number ``n``: 10 -> ``"10"``, 0 -> ``"1/0"``, -3 -> ``"4/0"``."""
    return f"{1 - n}/0" if n <= 0 else str(n)


@lru_cache(maxsize=None)
def metals() -> dict[str, tuple[float, float, str]]:
    """``name -> (resistivity in ohm·m at 20 °C, temperature coefficient 1/K, source)``."""
    table = {}
    for name, rho, alpha, source in read_table("metals.tsv", 4):
        table[name] = (float(rho) * 1e-6, float(alpha), source)
    return table


# ------------------------------------------------------------------------ conductor tables


@lru_cache(maxsize=None)
def iec60228_table() -> dict[float, tuple[float, float, str]]:
    """``size in mm² -> (class 2 max ohm/m, class 5 max ohm/m, source)``, at 20 °C, plain copper."""
    table = {}
    for size, c2, c5, source in read_table("iec60228.tsv", 4):
        table[float(size)] = (float(c2) / _KM, float(c5) / _KM, source)
    return table


def iec60228_max_resistance(area_m2: float, cls: int) -> tuple[float, str] | None:
    """IEC 60228 maximum DC resistance at 20 °C of plain copper, in ohms per metre, and its source.

    ``cls`` is the conductor class: 2 (stranded) or 5 (flexible). ``None`` when the class is not
    2 or 5 or the cross-section is not one of the tabulated nominal sizes (matched with a relative
    tolerance of 1e-6).
    """
    if cls not in (2, 5):
        return None
    for size, (c2, c5, source) in iec60228_table().items():
        if math.isclose(area_m2, size * 1e-6, rel_tol=_SIZE_RTOL):
            return (c2 if cls == 2 else c5), f"{source}, class {cls}"
    return None


@lru_cache(maxsize=None)
def nec_table8() -> dict[int, tuple[float, str]]:
    """``AWG number -> (ohm/m at 75 °C, source)``, stranded uncoated copper (NEC Ch. 9 Table 8)."""
    table = {}
    for awg, per_kft, source in read_table("nec_ch9_table8.tsv", 3):
        table[_awg_number(awg)] = (float(per_kft) / _KFT, source)
    return table


def nec_table8_resistance(awg: int) -> tuple[float, str] | None:
    """NEC Chapter 9 Table 8 resistance at 75 °C in ohms per metre, and its source; ``None`` if untabulated.

    ``awg`` counts as in the circuit language: 0 is 1/0, -1 is 2/0, -3 is 4/0.
    """
    return nec_table8().get(awg)


# ------------------------------------------------------------------------ ampacity

_COPPER = ("copper", "cu")
_ALUMINIUM = ("aluminium", "aluminum", "al")
_COLUMNS = (75.0, 90.0)  # insulation ratings (degC) with a column in ampacity.tsv


@lru_cache(maxsize=None)
def ampacity_table() -> dict[int, tuple[float, float, str]]:
    """``AWG number -> (amperes at 75 °C insulation, amperes at 90 °C insulation, source)``, copper."""
    table = {}
    for awg, a75, a90, source in read_table("ampacity.tsv", 4):
        table[_awg_number(awg)] = (float(a75), float(a90), source)
    return table


def ampacity(
    area_m2: float | None, awg: int | None, metal: str, insulation_C: float
) -> tuple[float, str] | tuple[None, str]:
    """Allowable continuous current of one conductor, and where the number comes from.

    Returns ``(amperes, source)``, or ``(None, reason)`` when the tables have no value.

    - ``awg`` (0 is 1/0, -3 is 4/0) picks its own row; otherwise, and for an AWG size without a
      row, the row of the largest tabulated AWG size whose area does not exceed the conductor's
      (conservative; common practice, no source).
    - ``insulation_C`` picks the column: 90 °C and above the 90 °C column, 75 °C up to 90 °C the
      75 °C column (the lower one); below 75 °C there is no column, so no value.
    - Copper only: for aluminium there is no reference data, and no value is invented.
    """
    if insulation_C is None or not math.isfinite(insulation_C):
        raise ValueRangeError(f"insulation rating {insulation_C!r} is not a finite temperature")
    word = metal.strip().lower()
    if word in _ALUMINIUM:
        return None, "no ampacity data for aluminium: dcnet's table (ampacity.tsv) holds copper only, and no value is invented"
    if word not in _COPPER:
        return None, f"no ampacity data for metal '{metal}'"
    if insulation_C < _COLUMNS[0]:
        return None, (
            f"insulation rated {insulation_C:g} degC is below the lowest column of the ampacity table "
            "(only the 75 degC and 90 degC columns of NEC Table 310.16 are in the data)"
        )
    column = 1 if insulation_C >= _COLUMNS[1] else 0
    table = ampacity_table()
    if awg is not None and awg in table:
        row, how = awg, f"{awg_name(awg)} AWG"
    else:
        from ..kinds.cable import awg_area  # ASTM B258 geometry (imported here: kinds import this module)

        if awg is not None:
            area, given = awg_area(awg), f"{awg_name(awg)} AWG"
        else:
            if area_m2 is None or not math.isfinite(area_m2) or area_m2 <= 0:
                raise ValueRangeError(f"cross-section {area_m2!r} is not a positive area")
            area, given = area_m2, f"{area_m2 * 1e6:g} mm2"
        fits = [n for n in table if awg_area(n) <= area * (1 + 1e-9)]
        if not fits:
            smallest = max(table)
            return None, f"{given} is thinner than {awg_name(smallest)} AWG, the smallest size in the ampacity table"
        row = min(fits)  # the lowest AWG number is the largest area
        how = (
            f"{given} taken as {awg_name(row)} AWG, the largest tabulated size whose area does not exceed it "
            "(common practice, no source)"
        )
    a75, a90, source = table[row]
    amps = (a75, a90)[column]
    return amps, f"{source}, {_COLUMNS[column]:g} degC column, {how}"


# ------------------------------------------------------------------------ chemistries

_QUANTITIES = ("nominal_V", "vmin_V", "vmax_V", "max_c_rate")


@lru_cache(maxsize=None)
def chemistry_table() -> dict[str, dict[str, tuple[float | str | None, str]]]:
    """``chemistry -> {quantity: (value, source)}`` as written in chemistries.tsv.

    Values are floats, ``None`` for ``-``, or for ``alias`` the name of the chemistry whose rows apply.
    """
    table: dict[str, dict[str, tuple[float | str | None, str]]] = {}
    for name, quantity, value, source in read_table("chemistries.tsv", 4):
        if quantity == "alias":
            parsed: float | str | None = value
        elif quantity in _QUANTITIES:
            parsed = None if value == "-" else float(value)
        else:
            raise ValueError(f"chemistries.tsv: unknown quantity '{quantity}' for {name}")
        table.setdefault(name, {})[quantity] = (parsed, source)
    return table


def chemistry(name: str) -> dict | None:
    """Per-cell data of a chemistry, or ``None`` for a name the table does not know.

    Keys: ``nominal_V``, ``vmin_V``, ``vmax_V`` (volts per cell), ``max_c_rate`` (per hour) — each
    ``None`` where the table has no defensible value — and ``sources`` (quantity -> source string).
    ``agm`` and ``gel`` use the lead-acid rows (the file says why), and their sources say so.
    """
    table = chemistry_table()
    key = name.strip().lower()
    rows = table.get(key)
    if rows is None:
        return None
    note = ""
    if "alias" in rows:
        target, _ = rows["alias"]
        rows = table[str(target)]
        note = f" [the {target} value: {key} has no separate values in chemistries.tsv]"
    out: dict = {"sources": {}}
    for q in _QUANTITIES:
        value, source = rows.get(q, (None, "no row in chemistries.tsv"))
        out[q] = value
        out["sources"][q] = source + note
    return out


# ----------------------------------------------------------------- OCV curves


@lru_cache(maxsize=None)
def ocv_curve(chemistry: str):
    """``(soc fractions, volts per cell, sources)`` of a chemistry's resting-voltage curve, or None.

    ``agm`` and ``gel`` use the lead-acid curve (valve-regulated lead-acid, from memory).
    """
    import numpy as np

    key = {"agm": "lead-acid", "gel": "lead-acid"}.get(chemistry.strip().lower(), chemistry.strip().lower())
    rows = [(float(soc) / 100.0, float(volts), source) for name, soc, volts, source in read_table("ocv.tsv", 4) if name == key]
    if not rows:
        return None
    rows.sort()
    return np.array([r[0] for r in rows]), np.array([r[1] for r in rows]), sorted({r[2] for r in rows})
