"""Where to take a bank's main leads: the same bank solved with each tap position.

Taking both leads at the same end of the buses makes the nearest string carry the most
current; taking them at opposite ends (or the centre) evens the paths out. Each layout is a
separate elaboration of the same file with every bank's tap overridden, so bus segments,
leads and loads are exactly as written.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..errors import InputError

__all__ = ["compare_taps", "TAPS"]

TAPS = ("same", "opposite", "centre")


def compare_taps(path: str, options=None, only: str | None = None) -> list[dict]:
    """For each bank (or only ``only``): string currents, imbalance and bank voltage per tap."""
    from ..checks.imbalance import imbalance_values
    from ..language import Options, load, parse
    from .solution import string_currents

    options = options or Options()
    text = None
    if path == "-":
        from ..language import read_stdin

        text = read_stdin(options)

    def build(tap):
        opts = dataclasses.replace(options, tap_override=tap)
        return parse(text, "<stdin>", opts) if text is not None else load(path, opts)

    layouts = {tap: build(tap) for tap in TAPS}
    first = layouts["same"]
    names = [only] if only else list(first.banks)
    if only and only not in first.banks:
        from ..language.parser import suggest

        near = suggest(only, first.banks)
        raise InputError(f"no bank named '{only}'", hint=f"did you mean '{near}'?" if near else f"banks: {', '.join(first.banks) or 'none'}")
    if not names:
        raise InputError(f"{path} has no bank statement", hint="layouts compares the tap positions of banks written with: bank NAME POS NEG series=S parallel=P cell=PART ...")
    solved = {tap: net.solve(checks=False) for tap, net in layouts.items()}
    tables = []
    for name in names:
        bank = first.banks[name]
        rows = []
        for tap in TAPS:
            net, sol = layouts[tap], solved[tap]
            b = net.banks[name]
            c2, b2 = string_currents(b, lambda n, sol=sol: np.array([sol.current(n)]), lambda n, sol=sol, net=net: sol.current_bounds[None, net.element_position(n)])
            cur = -c2[0]  # discharging positive
            imb = float(imbalance_values(c2, b2)[0])
            imb = None if np.isnan(imb) else imb / 100
            rows.append(
                {
                    "tap": tap,
                    "string_currents_A": [float(c) for c in cur],
                    "imbalance_pct": None if imb is None else imb * 100,
                    "bank_voltage_V": sol.voltage(b["pos"], b["neg"]),
                }
            )
        tables.append({"bank": name, "series": bank["series"], "parallel": bank["parallel"], "layouts": rows})
    return tables
