"""Voltage drop: declared ``limit drop`` statements, and from the sources to every load.

The source voltage is the span of potentials over the terminals of every delivering source
(cells, sources, supplies delivering power), which is a bank's or a series string's voltage
as well as a single battery's. A load's drop is how far its terminal voltage falls short of
that, in percent. Defaults: 3 % for loads marked ``critical=yes``, 10 % for the others
(ABYC E-11, secondary; common practice).
"""

from __future__ import annotations

from . import Verdict, elements_of

CRITICAL, OTHER = 0.03, 0.10
SOURCE_DEFAULT = "ABYC E-11 (secondary): 3 % for critical loads, 10 % for others; common practice"


def source_voltage(net, sol) -> float:
    """Span of potentials over the terminals of the elements that deliver power."""
    from ..kinds import KINDS

    nodes = set()
    for el in elements_of(net, *(k for k, kind in KINDS.items() if kind.is_source)):
        if sol.power(el.name) < 0:
            nodes.update(el.nodes)
    if not nodes:
        return 0.0
    pots = [sol.potential(n) for n in nodes]
    return max(pots) - min(pots)


def check(net, sol) -> list[Verdict]:
    out: list[Verdict] = []
    vs = source_voltage(net, sol)
    declared = [lim for lim in net.limits if lim.rule == "drop"]
    for lim in declared:
        a, b = lim.values.get("from"), lim.values.get("to")
        if a is None or b is None:
            continue
        limit = lim.values["max"].value if "max" in lim.values else OTHER
        drop = abs(sol.voltage(a, b))
        pct = drop / vs * 100 if vs > 0 else float("nan")
        out.append(
            Verdict("voltage drop", f"{a} to {b}", pct, limit * 100, "%", pct <= limit * 100, f"limit statement at {lim.span}", f"{drop:.4g} V of {vs:.4g} V")
        )
    if vs <= 0:
        return out
    for el in elements_of(net, "load"):
        vl = abs(sol.voltage(el.name))
        pct = max(0.0, (vs - vl) / vs * 100)
        critical = el.values.get("critical", "no") == "yes"
        limit = (CRITICAL if critical else OTHER) * 100
        out.append(
            Verdict(
                "voltage drop",
                f"to load {el.name}",
                pct,
                limit,
                "%",
                pct <= limit,
                SOURCE_DEFAULT,
                f"{vl:.4g} V at the load of {vs:.4g} V at the sources" + (" (critical load)" if critical else ""),
            )
        )
    return out
