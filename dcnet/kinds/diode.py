"""``diode``: a one-way element (blocking or isolating diode, battery isolator).

Two forms:

* piecewise-linear: ``drop`` (forward voltage) and optional ``r`` (forward resistance):
  conducting, ``i = (v - drop) / r`` (or ``v = drop`` exactly without ``r``); blocked, no
  current;
* junction: ``is`` (saturation current), optional ``n`` (ideality, default 1) and ``temp``
  (default 25 degC): ``i = is * (exp(v / (n * Vt)) - 1)`` with ``Vt = k T / q``.

Optional ``roff`` is the reverse (leakage) resistance. A blocked piecewise-linear diode
without ``roff`` is open: it carries nothing, and a part of the network that only blocked
diodes (or open switches) join to the rest is an idle island, placed where a 1 pS leak per
blocked diode would hold it (``dcnet.analysis.islands``), never a 1e-12 S entry in the matrix
beside kilosiemens ones. For the topology check and as the Newton start a blocked diode still
counts as a connection (its starting model leaks 1 pS). The first node is the anode: current
flows from the first node to the second when it conducts. A blocked diode reports its
reverse voltage (``reverse_V``).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..units import CURRENT, DIMENSIONLESS, RESISTANCE, TEMPERATURE, VOLTAGE
from .base import Kind, Prop, above_absolute_zero, admittance, mixed, nonnegative, positive

BLOCKED, CONDUCTING = 0, 1
G_FLOOR = 1e-12
K_OVER_Q = 1.380649e-23 / 1.602176634e-19  # Boltzmann constant / elementary charge (SI 2019 exact values)


class Diode(Kind):
    def finish(self, values):
        pwl, junction = "drop" in values, "is" in values
        if pwl == junction:
            raise InputError(
                "a diode takes drop= (piecewise-linear form) or is= (junction form), exactly one of them",
                hint="for example: diode D1 a b drop=0.45V r=5mOhm   or   diode D1 a b is=10uA n=1.1",
            )
        if junction and "r" in values:
            raise InputError("the junction form takes no r=", hint="put a resistor in series with the diode")
        if pwl and ("n" in values or "temp" in values):
            raise InputError("n= and temp= belong to the junction form (is=)", hint="drop them, or give is= instead of drop=")
        if junction:
            values.setdefault("n", 1.0)
            values.setdefault("temp", 25.0)
        return values

    def _goff(self, cols):
        roff = cols["roff"]
        return np.where(roff > 0, 1.0 / np.where(roff > 0, roff, 1.0), G_FLOOR)

    def _gblocked(self, cols):
        """Conductance of a blocked diode in the solved model: 1/roff, or open (0) without roff."""
        roff = cols["roff"]
        return np.where(roff > 0, 1.0 / np.where(roff > 0, roff, 1.0), 0.0)

    def _vt(self, cols):
        return cols["n"] * K_OVER_Q * (cols["temp"] + 273.15)

    def branches(self, cols):
        # for topology and as the starting model: blocked (a tiny leak) everywhere
        return admittance(self._goff(cols), 0.0)

    def nonlinear_mask(self, cols):
        return np.ones(len(cols["drop"]), dtype=bool)

    def companion(self, cols, v, i, mode, prev, itol=0.0):
        drop, r = cols["drop"], cols["r"]
        junction = ~np.isnan(cols["is"])
        goff = self._goff(cols)
        mode = mode.copy()
        pwl = ~junction
        mode[pwl & (mode == BLOCKED) & (v > drop)] = CONDUCTING
        # a conducting diode blocks when its current turns negative beyond the round-off (a
        # diode that carries nothing, on a branch with no return path, stays where it is)
        mode[pwl & (mode == CONDUCTING) & (i < -itol)] = BLOCKED
        ideal = pwl & ~(r > 0)
        cond = pwl & (mode == CONDUCTING)
        with np.errstate(divide="ignore", invalid="ignore"):
            g_on = np.where(r > 0, 1.0 / r, 0.0)
        g = np.where(cond, g_on, np.where(junction, goff, self._gblocked(cols)))
        leak = np.where(pwl & ~cond & ~(cols["roff"] > 0), G_FLOOR, np.nan)
        c = np.where(cond & ~ideal, -drop * g_on, 0.0)
        is_v = cond & ideal
        e = np.where(is_v, drop, 0.0)
        v_used = v.copy()
        if junction.any():
            j = junction
            vt = self._vt(cols)[j]
            isat = cols["is"][j]
            vj = _limit_junction(v[j], prev[j], vt, isat)
            ex = np.exp(np.minimum(vj / vt, 700.0))
            gj = isat / vt * ex + goff[j]
            ij = isat * (ex - 1.0) + goff[j] * vj
            g = g.copy()
            c = c.copy()
            g[j] = gj
            c[j] = ij - gj * vj
            v_used[j] = vj
        br = mixed(is_v, g, c, e)
        br.leak = leak
        return br, mode, v_used

    def exact_current(self, cols, v, i, mode):
        drop, r = cols["drop"], cols["r"]
        junction = ~np.isnan(cols["is"])
        goff = self._goff(cols)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            pwl_on = np.where(r > 0, (v - drop) / r, i)
            vt = np.where(junction, self._vt(cols), 1.0)
            jc = np.where(junction, cols["is"] * (np.exp(np.minimum(v / vt, 700.0)) - 1.0) + goff * v, 0.0)
        out = np.where(mode == CONDUCTING, pwl_on, self._gblocked(cols) * v)
        return np.where(junction, jc, out)

    def extras(self, cols, v, i, ctx):
        return {"reverse_V": np.where(v < 0, -v, 0.0)}

    def state(self, cols, v, i):
        junction = ~np.isnan(cols["is"])
        forward = np.where(junction, v > 0.5 * self._vt(cols) * 10, (i > 0) & (v >= cols["drop"] * (1 - 1e-9)))
        return np.where(forward, "conducting", "blocked")


def _limit_junction(v_new, v_old, vt, isat):
    """Keep a junction's voltage step small where the exponential is steep (the usual
    logarithmic step limit for junction models)."""
    vcrit = vt * np.log(vt / (np.sqrt(2.0) * isat))
    out = v_new.copy()
    big = (v_new > vcrit) & (np.abs(v_new - v_old) > 2 * vt)
    with np.errstate(invalid="ignore", divide="ignore"):
        arg = 1.0 + (v_new - v_old) / vt
        stepped = np.where(arg > 0, v_old + vt * np.log(np.where(arg > 0, arg, 1.0)), vcrit)
    out[big] = np.where(v_old[big] > 0, stepped[big], vt[big] * np.log(np.maximum(v_new[big] / vt[big], 1e-300)))
    return out


KIND = Diode(
    name="diode",
    doc="one-way element: piecewise-linear (drop, r) or junction (is, n, temp); first node is the anode",
    props={
        "drop": Prop("drop", VOLTAGE, check=nonnegative, doc="forward voltage (piecewise-linear form)"),
        "r": Prop("r", RESISTANCE, check=positive, doc="forward resistance (piecewise-linear form)"),
        "is": Prop("is", CURRENT, check=positive, doc="saturation current (junction form)"),
        "n": Prop("n", DIMENSIONLESS, check=positive, doc="ideality factor (junction form, default 1)"),
        "temp": Prop("temp", TEMPERATURE, check=above_absolute_zero, doc="junction temperature (junction form, default 25 degC)"),
        "roff": Prop("roff", RESISTANCE, check=positive, doc="reverse (leakage) resistance"),
    },
    columns=("drop", "r", "is", "n", "temp", "roff"),
    nonlinear=True,
)
