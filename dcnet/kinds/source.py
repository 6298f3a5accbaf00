"""``source``: a voltage source (charger in voltage mode, DC bus), ideal unless ``r``.

With ``imax`` it is a current-limited source (constant-current/constant-voltage charging):
it holds its EMF (behind ``r``) while it delivers less than ``imax``, and delivers exactly
``imax`` when holding the voltage would take more. Such sources are solved by the
nonlinear solver; their state reads ``current-limited`` or, when holding, the usual
delivering/absorbing.
"""

from __future__ import annotations

import numpy as np

from ..units import CURRENT, RESISTANCE, VOLTAGE
from .base import Kind, Prop, mixed, nonnegative, positive, resistive_mask, safe_inverse

HOLD, LIMIT = 0, 1


class Source(Kind):
    def branches(self, cols):
        r, emf = cols["r"], cols["emf"]
        ideal = ~resistive_mask(r)
        g = safe_inverse(r, ~ideal)
        return mixed(ideal, g, -emf * g, np.where(ideal, emf, 0.0))

    def nonlinear_mask(self, cols):
        return ~np.isnan(cols["imax"])

    def companion(self, cols, v, i, mode, prev, itol=0.0):
        r, emf, imax = cols["r"], cols["emf"], cols["imax"]
        ideal = ~(r > 0)
        mode = mode.copy()
        # hold -> limit when holding would deliver more than imax (passive current below -imax)
        mode[(mode == HOLD) & (i < -imax * (1 + 1e-12) - itol)] = LIMIT
        # limit -> hold when the terminal voltage would rise above what holding gives at imax
        knee = emf - np.where(ideal, 0.0, imax * np.nan_to_num(r))
        mode[(mode == LIMIT) & (v > knee + 1e-12 * np.abs(emf))] = HOLD
        hold = self.branches(cols)
        limited = mode == LIMIT
        br = mixed(
            hold.is_voltage & ~limited,
            np.where(limited, 0.0, hold.g),
            np.where(limited, -imax, hold.c),
            np.where(limited, 0.0, hold.e),
        )
        return br, mode, v

    def exact_current(self, cols, v, i, mode):
        r, emf, imax = cols["r"], cols["emf"], cols["imax"]
        ideal = ~(r > 0)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # only rows it picks matter; a non-finite current is refused later
            held = np.where(ideal, i, (v - emf) / r)
        return np.where(mode == LIMIT, -imax, held)

    def state(self, cols, v, i):
        words = super().state(cols, v, i)
        imax = cols["imax"]
        limited = ~np.isnan(imax) & np.isclose(i, -imax, rtol=1e-9, atol=0)
        return np.where(limited, "current-limited", words)


KIND = Source(
    name="source",
    doc="voltage source; first node positive; no r = ideal; imax = current-limited",
    props={
        "emf": Prop("emf", VOLTAGE, required=True, doc="open-circuit voltage"),
        "r": Prop("r", RESISTANCE, check=nonnegative, doc="internal resistance (absent: ideal)"),
        "imax": Prop("imax", CURRENT, check=positive, doc="current limit (constant-current charging)"),
    },
    columns=("emf", "r", "imax"),
    is_source=True,
)
