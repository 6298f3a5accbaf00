"""``limit current`` and ``limit voltage`` statements (imbalance and drop have their own modules)."""

from __future__ import annotations

from . import Verdict


def measures(lim, current, voltage):
    """The figures a ``limit current``/``limit voltage`` statement judges.

    ``current(name)`` and ``voltage(name)`` / ``voltage(a, b)`` give one value or one per
    sample; yields ``(rule, subject, value, limit, unit, ok, sense)``. Shared by the checks of
    one solution and the per-sample checks of studies.
    """
    subjects = []
    if lim.rule == "current":
        subjects += [(name, abs(current(name)), "A") for name in lim.values.get("of", ())]
    else:
        subjects += [(name, abs(voltage(name)), "V") for name in lim.values.get("of", ())]
        if "from" in lim.values and "to" in lim.values:
            a, b = lim.values["from"], lim.values["to"]
            subjects.append((f"{a} to {b}", abs(voltage(a, b)), "V"))
    for subject, value, unit in subjects:
        if "max" in lim.values:
            m = lim.values["max"].value
            yield f"{lim.rule} (highest)", subject, value, m, unit, value <= m, "max"
        if "min" in lim.values:
            m = lim.values["min"].value
            yield f"{lim.rule} (lowest)", subject, value, m, unit, value >= m, "min"


def check(net, sol) -> list[Verdict]:
    out: list[Verdict] = []
    for lim in net.limits:
        if lim.rule in ("current", "voltage"):
            source = f"limit statement at {lim.span}"
            for rule, subject, value, m, unit, ok, sense in measures(lim, sol.current, sol.voltage):
                out.append(Verdict(rule, subject, value, m, unit, ok, source, sense=sense))
    return out
