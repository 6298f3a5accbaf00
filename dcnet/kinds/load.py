"""``load``: a resistive (``r``), constant-current (``current``) or constant-power (``power``) consumer.

Constant-power loads (inverters, DC-DC converters) draw ``i = P / v`` and are solved by
the Newton solver. With ``vmin`` such a load drops out (draws nothing) when its voltage
would fall below ``vmin``, as real inverters do at undervoltage; once dropped it stays
dropped for that solve. Without ``vmin`` a demand the network cannot meet is an error that
gives the figures.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError, ValueRangeError
from ..units import CURRENT, POWER, RESISTANCE, VOLTAGE
from .base import Kind, Prop, admittance, finite, nonnegative, positive, present, safe_inverse

ON, DROPPED = 0, 1

_SOURCE_HINT = "a load only draws; something that feeds the network is a supply (a current source) or a source (a voltage source)"


def drawn_current(name: str, x: float) -> None:
    finite(name, x)
    if x < 0:
        raise ValueRangeError(f"a load's {name} must not be negative, got {x:g} A", hint=_SOURCE_HINT)


def drawn_power(name: str, x: float) -> None:
    finite(name, x)
    if x <= 0:
        raise ValueRangeError(f"a load's {name} must be greater than zero, got {x:g} W", hint=_SOURCE_HINT if x < 0 else "leave the load out, or give it its power")


class Load(Kind):
    def finish(self, values):
        given = [k for k in ("r", "current", "power") if k in values]
        if len(given) != 1:
            found = ", ".join(given) if given else "none"
            raise InputError(
                f"a load needs exactly one of r, current, power (found: {found})",
                hint="for example: load HEAT feed gnd r=1.6Ohm",
            )
        return values

    def branches(self, cols):
        r, cur, power = cols["r"], cols["current"], cols["power"]
        resistive = present(r)
        g = safe_inverse(r, resistive)
        # constant-power loads start switched off; the Newton solver linearises them
        return admittance(g, np.where(resistive | present(power), 0.0, cur))

    def nonlinear_mask(self, cols):
        return ~np.isnan(cols["power"])

    def companion(self, cols, v, i, mode, prev, itol=0.0):
        P, vmin = cols["power"], cols["vmin"]
        mode = mode.copy()
        drop = (mode == ON) & ~np.isnan(vmin) & (v < vmin)
        # at the first linearisation (prev = 0) a load that sees no or reverse voltage with
        # every constant-power load off is wired the wrong way round: it cannot run
        drop |= (mode == ON) & (prev == 0) & (v <= 0)
        mode[drop] = DROPPED
        # never linearise at or below zero volts: a constant-power load has no such operating point
        floor = np.maximum(np.abs(prev), 1e-6) * 0.5
        v0 = np.where(v > floor, v, floor)
        with np.errstate(over="ignore"):  # at absurd voltages v0**2 overflows: the load's g is then 0
            g = np.where(mode == ON, -P / v0**2, 0.0)
        c = np.where(mode == ON, 2 * P / v0, 0.0)
        return admittance(g, c), mode, v0

    def settled_modes(self, cols, v, mode):
        # a constant-power load has no operating point at or below zero volts (P = V I would
        # make it a generator): where Newton settled it there, through a companion linearised
        # at its positive floor, it drops out if it has a vmin, and otherwise the point is no
        # answer. Once a load settled at -1.1 V in a loop with an ideal diode was shown drawing
        # 13 GA (14 GW of a 751 kW demand)
        on = (mode == ON) & ~np.isnan(cols["power"])
        vmin = cols["vmin"]
        out = mode.copy()
        out[on & ~np.isnan(vmin) & (v < vmin)] = DROPPED
        return out, on & np.isnan(vmin) & (v <= 0)

    def exact_current(self, cols, v, i, mode):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(mode == ON, cols["power"] / v, 0.0)

    def state(self, cols, v, i):
        words = super().state(cols, v, i)
        dropped = ~np.isnan(cols["power"]) & (i == 0)
        return np.where(dropped, "dropped out", words)


KIND = Load(
    name="load",
    doc="consumer: resistive (r), constant-current (current) or constant-power (power)",
    props={
        "r": Prop("r", RESISTANCE, check=positive, doc="resistance"),
        "current": Prop("current", CURRENT, check=drawn_current, doc="constant current drawn (first node to second)"),
        "power": Prop("power", POWER, check=drawn_power, doc="constant power drawn"),
        "vmin": Prop("vmin", VOLTAGE, check=nonnegative, doc="lowest working voltage (a constant-power load drops out below it)"),
        "critical": Prop("critical", form="word", words=("yes", "no"), default="no", doc="a critical load (3 % drop limit instead of 10 %)"),
    },
    columns=("r", "current", "power", "vmin"),
    busy_word="drawing",
)
