"""``limit current`` and ``limit voltage`` statements (imbalance and drop have their own modules)."""

from __future__ import annotations

from . import Verdict


def check(net, sol) -> list[Verdict]:
    out: list[Verdict] = []
    for lim in net.limits:
        if lim.rule not in ("current", "voltage"):
            continue
        source = f"limit statement at {lim.span}"
        subjects = []
        if lim.rule == "current":
            for name in lim.values.get("of", ()):
                subjects.append((name, abs(sol.current(name)), "A"))
        else:
            for name in lim.values.get("of", ()):
                subjects.append((name, abs(sol.voltage(name)), "V"))
            if "from" in lim.values and "to" in lim.values:
                a, b = lim.values["from"], lim.values["to"]
                subjects.append((f"{a} to {b}", abs(sol.voltage(a, b)), "V"))
        for subject, value, unit in subjects:
            if "max" in lim.values:
                m = lim.values["max"].value
                out.append(Verdict(f"{lim.rule} (highest)", subject, value, m, unit, value <= m, source))
            if "min" in lim.values:
                m = lim.values["min"].value
                out.append(Verdict(f"{lim.rule} (lowest)", subject, value, m, unit, value >= m, source, sense="min"))
    return out
