"""Netlist back to circuit text.

The text parses to an equal netlist (values equal to round-off): the basis of
the parse/print round-trip tests, and a way to write out an elaborated circuit
(parts applied, expressions evaluated) for review.
"""

from __future__ import annotations

from ..kinds import KINDS
from ..netlist import Netlist
from ..units import UNITS

__all__ = ["to_text", "format_quantity"]

_PREFERRED = ("V", "A", "Ohm", "S", "W", "J", "s", "m", "mm2", "Ah", "degC")


def format_quantity(value: float, dim) -> str:
    """``0.0045, RESISTANCE`` -> ``"0.0045Ohm"``; a value in the first unit that fits its dimension."""
    if dim == (0, 0, 0, 0, 0):
        return repr(float(value))
    for sym in _PREFERRED:
        q = UNITS[sym]
        if q.dim == dim:
            return f"{float(value) / q.value!r}{sym}"
    # compound dimensions (e.g. resistance per length): value in SI base units over metres
    if dim == (1, -1, 0, -1, 0):
        return f"{float(value)!r}Ohm/m"
    raise ValueError(f"no unit to print dimension {dim}")


def _quote_word(word: str) -> str:
    return word


def to_text(net: Netlist) -> str:
    """Circuit text for a netlist: title, ground, limits are kept; parts and lets are resolved."""
    lines = []
    if net.title:
        lines.append(f'title "{net.title}"')
    for el in net.elements:
        kind = KINDS[el.kind]
        props = []
        for name, spec in kind.props.items():
            value = _printed_value(el, name)
            if value is None:
                continue
            if spec.form == "quantity":
                props.append(f"{name}={format_quantity(value, spec.dim)}")
            elif spec.form == "words":
                props.append(f"{name}={','.join(value)}")
            else:
                props.append(f"{name}={_quote_word(str(value))}")
        lines.append(" ".join([el.kind, el.name, el.nodes[0], el.nodes[1], *props]))
    for lim in net.limits:
        parts = []
        for k, v in lim.values.items():
            if isinstance(v, tuple) and v and isinstance(v[0], str):
                parts.append(f"{k}={','.join(v)}")
            elif hasattr(v, "dim"):
                parts.append(f"{k}={format_quantity(v.value, v.dim)}")
            else:
                parts.append(f"{k}={v}")
        text = " ".join(["limit", lim.rule, *parts])
        banks = [w for w in lim.values.get("among", ()) if w in net.banks]
        if banks:  # banks are written out as their elements: a limit on a bank has nothing to name
            text = f"# {text}  (bank {', '.join(banks)} is written as its elements; this limit is not kept)"
        lines.append(text)
    if net.ground is not None and net.ground_rule == "ground statement":
        lines.append(f"ground {net.ground}")
    if net.practice:
        lines.append(f"practice {net.practice}")
    return "\n".join(lines) + "\n"


def _printed_value(el, name):
    """The user-facing value of a property (kinds that derive values keep the given one aside)."""
    if el.kind == "cable" and name == "r":
        if "size" in el.values or "gauge" in el.values:
            return None
        return el.values.get("r_per_m")
    return el.values.get(name)
