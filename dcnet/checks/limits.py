"""``limit current`` and ``limit voltage`` statements (imbalance, circulating and drop have their own modules)."""

from __future__ import annotations

import numpy as np

from . import Series

__all__ = ["rules"]


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    for lim in net.limits:
        if lim.rule not in ("current", "voltage"):
            continue
        source = f"limit statement at {lim.span}"
        subjects = []
        if lim.rule == "current":
            subjects += [(name, np.abs(s.current(name)), "A") for name in lim.values.get("of", ())]
        else:
            subjects += [(name, np.abs(s.voltage(name)), "V") for name in lim.values.get("of", ())]
            if "from" in lim.values and "to" in lim.values:
                a, b = lim.values["from"], lim.values["to"]
                subjects.append((f"{a} to {b}", np.abs(s.voltage(a, b)), "V"))
        for subject, value, unit in subjects:
            if "max" in lim.values:
                m = lim.values["max"].value
                out.append(Series(f"{lim.rule} (highest)", subject, unit, source, value, m, value <= m))
            if "min" in lim.values:
                m = lim.values["min"].value
                out.append(Series(f"{lim.rule} (lowest)", subject, unit, source, value, m, value >= m, sense="min"))
    return out
