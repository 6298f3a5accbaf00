"""Data tables (conductors, protection, chemistries) as commented text files, each row with its source.

Every reader returns SI values (ohms per metre, amperes, volts; temperatures in degC) together
with the source string of the row it used, so a result can always say where its number came from.
The files are read once and cached. AWG sizes are counted as in the circuit language: 10 is 10 AWG,
0 is 1/0, -1 is 2/0, -3 is 4/0.

Files (in this folder) and their readers:

``metals.tsv``
    resistivity and temperature coefficient at 20 degC of copper (IEC 60028) and 61 % IACS
    aluminium (IEC 60889, IEC 60287-1-1); read by :func:`metals`.
``iec60228.tsv``
    IEC 60228 maximum DC resistance at 20 degC of plain copper, class 2 and class 5, 0.5 mm2 to
    630 mm2; read by :func:`iec60228_table` and :func:`iec60228_max_resistance`.
``nec_ch9_table8.tsv``
    NEC Chapter 9 Table 8, stranded uncoated copper at 75 degC, 18 AWG to 4/0; read by
    :func:`nec_table8` and :func:`nec_table8_resistance`.
``ampacity.tsv``
    copper ampacity, the 60, 75 and 90 degC columns of NEC Table 310.16 (2020 and later; the same
    values are Table 310.15(B)(16) in the 2011 to 2017 editions), 14 AWG to 4/0; read by
    :func:`ampacity_table` and :func:`ampacity`.
``small_conductors.tsv``
    NEC 240.4(D): the highest overcurrent-device rating allowed for 18 to 10 AWG copper; read by
    :func:`small_conductor_table` and :func:`small_conductor_limit`.
``standard_ratings.tsv``
    NEC 240.6(A): standard ampere ratings of fuses and inverse-time circuit breakers, 15 A to
    6000 A; read by :func:`standard_ratings`, :func:`standard_ratings_source` and
    :func:`next_standard_rating`.
``practices.tsv``
    rule sets a circuit can say it is built to (``practice NAME``): voltage-drop limits with
    their sources (:func:`practice`, :func:`practice_names`);
``chemistries.tsv``
    per cell: nominal, lowest and highest terminal voltage, resting voltage empty and full, and a
    default discharge rate; read by :func:`chemistry_table` and :func:`chemistry`.
``ocv.tsv``
    resting (open-circuit) voltage per cell against state of charge; read by :func:`ocv_curve`.
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
    "small_conductor_table",
    "small_conductor_limit",
    "standard_ratings",
    "standard_ratings_source",
    "next_standard_rating",
    "chemistry_table",
    "chemistry",
    "ocv_curve",
    "practice",
    "practice_names",
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
_COLUMNS = (60.0, 75.0, 90.0)  # insulation ratings (degC) with a column in ampacity.tsv


@lru_cache(maxsize=None)
def ampacity_table() -> dict[int, tuple[float, float, float, str]]:
    """``AWG number -> (amperes at 60 °C, at 75 °C, at 90 °C insulation, source)``, copper."""
    table = {}
    for awg, a60, a75, a90, source in read_table("ampacity.tsv", 5):
        table[_awg_number(awg)] = (float(a60), float(a75), float(a90), source)
    return table


def ampacity(
    area_m2: float | None, awg: int | None, metal: str, insulation_C: float
) -> tuple[float, str] | tuple[None, str]:
    """Allowable continuous current of one conductor, and where the number comes from.

    Returns ``(amperes, source)``, or ``(None, reason)`` when the tables have no value.

    - ``awg`` (0 is 1/0, -3 is 4/0) picks its own row; otherwise, and for an AWG size without a
      row, the row of the largest tabulated AWG size whose area does not exceed the conductor's
      (conservative; common practice, no source).
    - ``insulation_C`` picks the column: the highest of the 60, 75 and 90 °C columns that does not
      exceed the rating (70 °C -> 60 °C column, 80 °C -> 75 °C, 105 °C -> 90 °C); below 60 °C there
      is no column, so no value.
    - Copper only: for aluminium there is no reference data, and no value is invented.

    The ampacity is not the largest fuse allowed: NEC 240.4(D) (:func:`small_conductor_limit`)
    caps it for 18 to 10 AWG.
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
            "(the 60, 75 and 90 degC columns of NEC Table 310.16 are in the data), so no value"
        )
    column = max(k for k, rating in enumerate(_COLUMNS) if rating <= insulation_C)
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
    *amps_by_column, source = table[row]
    return amps_by_column[column], f"{source}, {_COLUMNS[column]:g} degC column, {how}"


# ------------------------------------------------------------------------ overcurrent protection

_RATING_RTOL = 1e-9  # a current this close below a standard rating counts as that rating


@lru_cache(maxsize=None)
def small_conductor_table() -> dict[int, tuple[float, str]]:
    """``AWG number -> (highest overcurrent-device rating in amperes, source)``: NEC 240.4(D), copper."""
    table = {}
    for awg, amps, source in read_table("small_conductors.tsv", 3):
        table[_awg_number(awg)] = (float(amps), source)
    return table


def small_conductor_limit(awg: int) -> tuple[float, str] | None:
    """NEC 240.4(D) limit on the fuse or breaker rating for a copper conductor of size ``awg``.

    Returns ``(amperes, source)``, or ``None`` for a size 240.4(D) does not list (8 AWG and larger,
    and anything thinner than 18 AWG). ``None`` means "not covered by 240.4(D)", not "no limit":
    for 8 AWG and larger the ampacity with 240.4(B) governs; thinner than 18 AWG the code gives no
    general rule here. Copper only (the aluminium items of 240.4(D) are not in the data). The
    conditions 240.4(D)(1) and (2) attach to 18 and 16 AWG are for the caller (small_conductors.tsv).
    """
    return small_conductor_table().get(awg)


@lru_cache(maxsize=None)
def _standard_rating_rows() -> tuple[tuple[float, str], ...]:
    rows = sorted((float(amps), source) for amps, source in read_table("standard_ratings.tsv", 2))
    if len({amps for amps, _ in rows}) != len(rows):
        raise ValueError("standard_ratings.tsv: a rating is listed twice")
    return tuple(rows)


def standard_ratings() -> list[float]:
    """NEC 240.6(A) standard ampere ratings of fuses and inverse-time breakers, ascending (15 A to 6000 A).

    A new list on each call. The fuse-only ratings of 240.6(A) (1, 3, 6, 10 A) are not included.
    """
    return [amps for amps, _ in _standard_rating_rows()]


def standard_ratings_source() -> str:
    """Where the list of :func:`standard_ratings` comes from."""
    return "; ".join(sorted({source for _, source in _standard_rating_rows()}))


def next_standard_rating(amps: float) -> tuple[float, str] | None:
    """The smallest NEC 240.6(A) standard rating at or above ``amps``, and its source.

    ``None`` above the largest standard rating (6000 A). A current within a relative 1e-9 below a
    standard rating counts as that rating (so round-off in a computed ampacity cannot move it up a
    step). Used with NEC 240.4(B): the next higher standard rating may protect a conductor whose
    ampacity is not a standard rating, up to 800 A; applying that limit and the rule's conditions is
    the caller's part.
    """
    if amps is None or not math.isfinite(amps) or amps < 0:
        raise ValueRangeError(f"current {amps!r} is not a finite non-negative number of amperes")
    for rating, source in _standard_rating_rows():
        if rating >= amps * (1 - _RATING_RTOL):
            return rating, source
    return None


# ------------------------------------------------------------------------ chemistries

_QUANTITIES = ("nominal_V", "vmin_V", "vmax_V", "max_c_rate", "rest_min_V", "rest_max_V")


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

    Keys: ``nominal_V``, ``vmin_V``, ``vmax_V`` (terminal-voltage window, volts per cell),
    ``max_c_rate`` (per hour), ``rest_min_V`` and ``rest_max_V`` (resting voltage of an empty and of
    a full cell, volts) — each ``None`` where the table has no defensible value — and ``sources``
    (quantity -> source string). The resting range serves to infer a battery's number of cells in
    series from its EMF: only when exactly one whole n has n x rest_min_V <= EMF <= n x rest_max_V.
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


# ----------------------------------------------------------------- practices (rule sets)

_PRACTICE_QUANTITIES = ("drop_critical", "drop_other")


@lru_cache(maxsize=None)
def _practice_table() -> dict[str, dict[str, tuple[float, str]]]:
    table: dict[str, dict[str, tuple[float, str]]] = {}
    for name, quantity, value, source in read_table("practices.tsv", 4):
        if quantity not in _PRACTICE_QUANTITIES:
            raise ValueError(f"practices.tsv: unknown quantity '{quantity}' for {name}")
        table.setdefault(name, {})[quantity] = (float(value) / 100.0, source)
    return table


def practice_names() -> list[str]:
    """The rule sets a circuit may name with a ``practice`` statement."""
    return list(_practice_table())


def practice(name: str) -> dict[str, tuple[float, str]] | None:
    """``quantity -> (value as a fraction, source)`` of a rule set (practices.tsv), or None."""
    return _practice_table().get(name)
