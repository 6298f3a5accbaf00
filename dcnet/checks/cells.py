"""Cells: current against ``imax`` (or a chemistry's C-rate), terminal voltage against the window.

A cell element may be one cell or a module of several in series (a 12 V lead-acid block is
six cells). For chemistry defaults the number of cells in series is taken as the EMF divided
by the chemistry's nominal cell voltage, rounded (common practice, no source); the window is
then that many times the per-cell window. ``vmin``/``vmax``/``imax`` on the cell override.
"""

from __future__ import annotations

from . import Verdict, elements_of


def _chemistry(name):
    try:
        from ..data import chemistry
    except ImportError:  # pragma: no cover
        return None
    return chemistry(name) if name else None


def check(net, sol) -> list[Verdict]:
    out: list[Verdict] = []
    for el in elements_of(net, "cell"):
        v = el.values
        i = sol.current(el.name)
        vt = sol.voltage(el.name)
        chem = _chemistry(v.get("chemistry"))
        series = None
        if chem and chem.get("nominal_V"):
            series = max(1, round(abs(v["emf"]) / chem["nominal_V"]))
        # current
        if "imax" in v:
            out.append(Verdict("cell current", el.name, abs(i), v["imax"], "A", abs(i) <= v["imax"], f"imax of {el.name} (as given)"))
        elif chem and chem.get("max_c_rate") and "capacity" in v:
            limit = chem["max_c_rate"] * v["capacity"] / 3600.0
            out.append(
                Verdict("cell current", el.name, abs(i), limit, "A", abs(i) <= limit, f"{chem['max_c_rate']:g} C: {chem['sources']['max_c_rate']}")
            )
        # terminal voltage window
        for key, sense, word in (("vmin", "min", "lowest"), ("vmax", "max", "highest")):
            if key in v:
                limit, source = v[key], f"{key} of {el.name} (as given)"
            elif chem and series and chem.get(f"{key}_V"):
                limit = chem[f"{key}_V"] * series
                source = f"{series} x {chem[f'{key}_V']:g} V per cell ({series} cells from EMF / {chem['nominal_V']:g} V nominal, common practice, no source); per-cell value: {chem['sources'][f'{key}_V']}"
            else:
                continue
            ok = vt >= limit if sense == "min" else vt <= limit
            out.append(Verdict(f"cell voltage ({word})", el.name, vt, limit, "V", ok, source, sense=sense))
    return out
