"""Cells: current against ``imax`` (or a chemistry's C-rate), terminal voltage against the window.

A cell element may be one cell or a module of several in series (a 12 V lead-acid block is
six cells). The window of a chemistry is per cell, so it needs the number of cells in series:

* ``cells=N`` on the element (or its part) states it;
* without it, the count is inferred only when the chemistry's resting-voltage range admits
  exactly one whole number ``n`` with ``n * rest_min <= EMF <= n * rest_max`` (the verdict's
  source says it was inferred, and from which range);
* otherwise there is no window verdict: a warning says the window was not checked and how to
  state the count. A count is never rounded out of an EMF.

``vmin``/``vmax``/``imax`` on the cell override the chemistry's values.
"""

from __future__ import annotations

import numpy as np

from . import Series, elements_of

__all__ = ["rules", "series_count", "chemistry_of"]


def chemistry_of(name):
    from ..data import chemistry

    return chemistry(name) if name else None


def series_count(emf, chem) -> np.ndarray:
    """The number of cells in series that a resting voltage admits: a whole number where exactly
    one fits the chemistry's resting range, NaN where none or several do (per sample)."""
    emf = np.abs(np.atleast_1d(np.asarray(emf, dtype=float)))
    lo_v, hi_v = (chem or {}).get("rest_min_V"), (chem or {}).get("rest_max_V")
    if not lo_v or not hi_v:
        return np.full(emf.shape, np.nan)
    tiny = 1e-9
    lo = np.ceil(emf / hi_v - tiny)
    hi = np.floor(emf / lo_v + tiny)
    return np.where((lo == hi) & (lo >= 1), lo, np.nan)


def _window_note(name, emf, chem, chem_name) -> str:
    lo_v, hi_v = chem["rest_min_V"], chem["rest_max_V"]
    lo = int(np.ceil(emf / hi_v - 1e-9))
    hi = int(np.floor(emf / lo_v + 1e-9))
    if hi < lo or hi < 1:
        why = f"no whole number of {chem_name} cells rests at {emf:.4g} V ({lo_v:g} to {hi_v:g} V per cell)"
    else:
        first = max(lo, 1)
        # a range, not a list, where many fit (an absurd EMF of 1e12 V once listed billions)
        counts = ", ".join(str(k) for k in range(first, hi + 1)) if hi - first < 6 else f"any of {first:,} to {hi:,}"
        why = f"{emf:.4g} V fits {counts} {chem_name} cells in series ({lo_v:g} to {hi_v:g} V per cell at rest)"
    return (
        f"cell {name}: terminal-voltage window not checked: {why}, and dcnet does not guess the count; "
        f"state it with cells=N on the cell or its part (a 12 V lead-acid battery has cells=6), or give vmin= and vmax="
    )


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    for el in elements_of(net, "cell"):
        v = el.values
        name = el.name
        i = s.current(name)
        vt = s.voltage(name)
        chem_name = v.get("chemistry")
        chem = chemistry_of(chem_name)
        # current
        if "imax" in v:
            imax = s.value(name, "imax")
            out.append(Series("cell current", name, "A", f"imax of {name} (as given)", np.abs(i), imax, np.abs(i) <= imax))
        elif chem and chem.get("max_c_rate") and "capacity" in v:
            limit = chem["max_c_rate"] * np.asarray(s.value(name, "capacity"), dtype=float) / 3600.0
            out.append(Series("cell current", name, "A", f"{chem['max_c_rate']:g} C: {chem['sources']['max_c_rate']}", np.abs(i), limit, np.abs(i) <= limit))
        # the count of cells in series, for a chemistry's per-cell window
        needs_count = chem is not None and any(key not in v and chem.get(f"{key}_V") for key in ("vmin", "vmax"))
        count = None
        how = ""
        if needs_count:
            emf = np.broadcast_to(np.asarray(s.value(name, "emf"), dtype=float), (s.n,))
            if "cells" in v:
                count = np.broadcast_to(np.asarray(s.value(name, "cells"), dtype=float), (s.n,))
                how = f"cells={int(count[0])} of {name} (as given)"
                if s.single and chem.get("rest_min_V") and chem.get("rest_max_V"):
                    per = abs(float(emf[0])) / float(count[0])
                    if not chem["rest_min_V"] * (1 - 1e-9) <= per <= chem["rest_max_V"] * (1 + 1e-9):
                        s.notes.append(
                            f"cell {name}: EMF {float(emf[0]):.4g} V over cells={int(count[0])} is {per:.3g} V per cell, outside the "
                            f"resting range of {chem_name} ({chem['rest_min_V']:g} to {chem['rest_max_V']:g} V): check cells= and emf="
                        )
            else:
                count = series_count(emf, chem)
                if np.isfinite(count[0]):
                    how = (
                        f"{int(count[0])} cells inferred from EMF: the only whole number n with n x {chem['rest_min_V']:g} V <= EMF "
                        f"<= n x {chem['rest_max_V']:g} V ({chem_name} resting range: {chem['sources']['rest_min_V']})"
                    )
                elif s.single:
                    s.notes.append(_window_note(name, abs(float(emf[0])), chem, chem_name))
        # terminal voltage window
        for key, sense, word in (("vmin", "min", "lowest"), ("vmax", "max", "highest")):
            if key in v:
                limit, source, judged = s.value(name, key), f"{key} of {name} (as given)", True
            elif chem and chem.get(f"{key}_V") and count is not None:
                per = chem[f"{key}_V"]
                limit = per * count
                judged = np.isfinite(count)
                if not judged.any():
                    continue
                source = f"{how}; x {per:g} V per cell: {chem['sources'][f'{key}_V']}"
            else:
                continue
            ok = vt >= limit if sense == "min" else vt <= limit
            out.append(Series(f"cell voltage ({word})", name, "V", source, vt, limit, ok, sense=sense, judged=judged))
    return out
