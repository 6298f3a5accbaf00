"""Voltage drop: from the sources that feed each load to the load, and ``limit drop`` statements.

The definition is :mod:`dcnet.analysis.sections`' (the one every check, study and report
uses): a load's drop is the voltage between its feeding source terminals (the nearest positive
one along conductors from its first node, the nearest negative one from its second) less the
load's own voltage, as a share of the voltage between those terminals. Diodes, fuses and
switches on the way are part of the drop and are named in the verdict's detail.

Limits come from the rule set the circuit names (``practice NAME``; data/practices.tsv),
by default ``general``: 3 % for loads marked ``critical=yes`` and 5 % for the others
(common practice, no source). A load that draws nothing is not judged; a load that no
source reaches along conductors is not judged either, and the solve's warnings say why.
"""

from __future__ import annotations

import numpy as np

from . import Series, elements_of

__all__ = ["rules", "practice_of", "DEFAULT_PRACTICE"]

DEFAULT_PRACTICE = "general"


def practice_of(net) -> tuple[str, dict]:
    from ..data import practice

    name = getattr(net, "practice", None) or DEFAULT_PRACTICE
    return name, practice(name)


def _along(s, feed, k: int = 0) -> str:
    """The non-cable elements on a feed's paths with their voltages (one solve)."""
    net = s.netlist
    parts = []
    for p in feed.path:
        el = net.elements[p]
        if el.kind in ("cable", "link"):
            continue
        parts.append(f"{el.kind} {el.name} {abs(float(s.v[k, p])):.4g} V")
    return ("; on the way: " + ", ".join(parts)) if parts else ""


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    pname, rule_set = practice_of(net)
    crit, crit_src = rule_set["drop_critical"]
    other, other_src = rule_set["drop_other"]
    sec = s.sections
    idx = net.node_index
    with np.errstate(divide="ignore", invalid="ignore"):
        for lim in net.limits:
            if lim.rule != "drop":
                continue
            a, b = lim.values.get("from"), lim.values.get("to")
            if a is None or b is None:
                continue
            limit = lim.values["max"].value if "max" in lim.values else other
            vs = sec.group_voltage(s.potentials, idx[a])
            vs = np.where(np.isnan(vs), sec.group_voltage(s.potentials, idx[b]), vs)
            drop = np.abs(s.voltage(a, b))
            pct = drop / vs * 100
            judged = np.isfinite(pct) & (vs > 0)
            detail = f"{float(drop[0]):.4g} V of {float(vs[0]):.4g} V (the section voltage at {a})" if s.single else ""
            if s.single and not judged[0]:
                s.notes.append(f"limit drop from {a} to {b} ({lim.span}) not checked: no source section reaches {a} or {b} along conductors")
            out.append(Series("voltage drop", f"{a} to {b}", "%", f"limit statement at {lim.span}", pct, limit * 100, pct <= limit * 100, judged=judged, detail=detail))
        for el in elements_of(net, "load"):
            p = net.element_position(el.name)
            if el.nodes[0] == el.nodes[1]:
                continue
            critical = el.values.get("critical", "no") == "yes"
            limit, src = (crit, crit_src) if critical else (other, other_src)
            source = f"practice {pname}: {src}"
            vs = sec.section_voltage(s.potentials, p)
            vl = s.voltage(el.name)
            running = s.current(el.name) != 0
            pct = np.maximum(0.0, (vs - vl) / vs * 100)
            judged = running & np.isfinite(pct) & (vs > 0)
            detail = ""
            if s.single:
                f = sec.feeds.get(p)
                if judged[0]:
                    f = f.chosen(s.potentials[0])
                    detail = (
                        f"{float(vs[0] - vl[0]):.4g} V of {float(vs[0]):.4g} V from the terminals of {f.plus_source} ({net.nodes[f.plus]}) "
                        f"and {f.minus_source} ({net.nodes[f.minus]}) to the load" + _along(s, f) + (" (critical load)" if critical else "")
                    )
                elif running[0]:
                    where = "its first node reaches no source's positive terminal" if f is None or f.plus is None else (
                        "its second node reaches no source's negative terminal" if f.minus is None else "its section has no voltage"
                    )
                    s.notes.append(f"voltage drop to load {el.name} not checked: {where} along conductors (cables, links, fuses, closed switches, conducting diodes)")
            out.append(Series("voltage drop", f"to load {el.name}", "%", source, pct, limit * 100, pct <= limit * 100, judged=judged, detail=detail))
    return out
