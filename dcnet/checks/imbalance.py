"""Current sharing among parallel strings: imbalance under load, circulating current at rest.

* **Imbalance** is the largest deviation of a string's current from the strings' mean, as a
  share of the mean. It is not judged at rest, where the bank's net current is within the
  solve's round-off bound of the string currents (summed): the mean is then round-off and any
  percentage of it is noise. Nor is it judged where round-off could carry it across its limit
  (the spread of :func:`imbalance_with_spread`): the detail says so.
* **Circulating current** is the largest string current with the bank alone and its terminals
  open: what the strings exchange at rest. It is judged against ``limit circulating max=...
  among=BANK``, or by default against C/20 of the smallest string capacity (common practice, no
  source) when every cell has a capacity; without either it is shown for information.

``limit imbalance max=... among=BANK`` (or among two or more elements) sets the imbalance limit
(default 10 %, common practice, no source). String currents keep their passive signs in the
details (a string charging at rest reads positive).
"""

from __future__ import annotations

import numpy as np

from . import Series

__all__ = ["rules", "imbalance_values", "imbalance_with_spread", "BANK_QUANTITIES", "bank_limits"]

DEFAULT_MAX = 0.10
DEFAULT_SOURCE = "default 10 % (common practice, no source)"
#: default circulating-current limit, as a fraction of a string's capacity per hour (C/20)
CIRCULATING_C = 1 / 20
CIRCULATING_SOURCE = "default C/20 of the smallest string capacity (common practice, no source)"

#: per-bank result quantities (``BANK.imbalance_pct``, ``BANK.circulating_A``) and their units
BANK_QUANTITIES = {"imbalance_pct": "%", "circulating_A": "A"}


def imbalance_values(cur: np.ndarray, bound: np.ndarray | None = None) -> np.ndarray:
    """Per sample (rows of ``cur``): the largest deviation from the mean in % of the mean; NaN
    at rest, where the net current cannot be told from zero: within the members' round-off
    ``bound`` summed (without bounds, within 1e-9 of the largest member current)."""
    return imbalance_with_spread(cur, bound)[0]


def imbalance_with_spread(cur: np.ndarray, bound: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """:func:`imbalance_values` and how far round-off can move each value (percentage points).

    With every member current within ``b_k`` of its true value, the mean moves by at most
    ``B/n`` (``B`` the sum of the bounds) and the largest deviation by at most
    ``max b_k + B/n``: the true imbalance lies between ``(N - max b - B/n) / (|m| + B/n)`` and
    ``(N + max b + B/n) / (|m| - B/n)``; the spread is the larger distance from the value."""
    cur = np.atleast_2d(cur)
    n = cur.shape[1]
    mean = cur.mean(axis=1)
    net = np.abs(cur.sum(axis=1))
    if bound is None:
        b = np.zeros_like(cur)
        rest = net <= 1e-9 * np.abs(cur).max(axis=1, initial=0.0)
    else:
        b = np.broadcast_to(np.atleast_2d(bound), cur.shape)
        rest = net <= b.sum(axis=1)
    rest |= mean == 0
    dm = b.sum(axis=1) / max(n, 1)
    dn = b.max(axis=1, initial=0.0) + dm
    am = np.abs(mean)
    with np.errstate(divide="ignore", invalid="ignore"):
        dev = np.abs(cur - mean[:, None]).max(axis=1)
        value = dev / am * 100
        upper = (dev + dn) / (am - dm) * 100
        lower = np.maximum(dev - dn, 0.0) / (am + dm) * 100
        spread = np.maximum(upper - value, value - lower)
    return np.where(rest, np.nan, value), np.where(rest, np.nan, spread)


def _undecided(value: np.ndarray, spread: np.ndarray, limit: float) -> np.ndarray:
    """Samples whose value is within its round-off spread of the limit: the verdict cannot tell."""
    with np.errstate(invalid="ignore"):
        return np.abs(value - limit) <= spread


def bank_limits(net) -> dict[str, tuple[float, str]]:
    """Each bank's imbalance limit (a fraction) and its source: its ``limit imbalance among=BANK``
    statement, or the default."""
    out = {name: (DEFAULT_MAX, DEFAULT_SOURCE) for name in net.banks}
    for lim in net.limits:
        among = lim.values.get("among", ())
        if lim.rule == "imbalance" and len(among) == 1 and among[0] in net.banks:
            out[among[0]] = (lim.values["max"].value if "max" in lim.values else DEFAULT_MAX, f"limit statement at {lim.span}")
    return out


def circulating_limit(net, name: str, bank: dict) -> tuple[float | None, str]:
    """The circulating-current limit of a bank (amperes) and its source, or (None, why not)."""
    for lim in net.limits:
        among = lim.values.get("among", ())
        if lim.rule == "circulating" and name in among and "max" in lim.values:
            return lim.values["max"].value, f"limit statement at {lim.span}"
    caps = []
    for cells in bank["strings"]:
        c = [net.element(cell).values.get("capacity") for cell in cells]
        if any(x is None for x in c):
            return None, f"no limit: the cells have no capacity; state one with 'limit circulating max=... among={name}'"
        caps.append(min(c))
    return CIRCULATING_C * min(caps) / 3600.0, CIRCULATING_SOURCE


def _signed(names, cur) -> str:
    return ", ".join(f"{n} {c:+.4g}" for n, c in zip(names, cur))


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    bank_limit = bank_limits(net)
    for name, bank in net.banks.items():
        if bank["parallel"] < 2:
            continue
        cur, bound = s.strings(bank)
        limit, source = bank_limit[name]
        value, spread = imbalance_with_spread(cur, bound)
        rest = np.isnan(value)
        close = _undecided(value, spread, limit * 100)
        circ, circ_bound = s.circulating(bank)
        circ = np.where(circ <= circ_bound, 0.0, circ)
        detail = ""
        if s.single:
            labels = [f"s{j + 1}" for j in range(cur.shape[1])]
            detail = f"string currents (passive sign, + charging) {_signed(labels, cur[0])} A; net {cur[0].sum():+.4g} A"
            if rest[0]:
                detail += "; the bank is at rest (net current within round-off): imbalance not judged, see its circulating current"
            elif close[0]:
                detail += f"; within round-off ({spread[0]:.2g} points) of the limit: not judged"
        out.append(Series("imbalance", f"bank {name}", "%", source, value, limit * 100, value <= limit * 100, judged=~rest & ~close, detail=detail))
        climit, csource = circulating_limit(net, name, bank)
        cdetail = "largest string current with the bank alone, terminals open (at rest)"
        if climit is None:
            out.append(Series("circulating current", f"bank {name}", "A", csource, circ, np.nan, True, sense="info", detail=cdetail))
        else:
            out.append(Series("circulating current", f"bank {name}", "A", csource, circ, climit, circ <= climit, detail=cdetail))
    for lim in net.limits:
        if lim.rule != "imbalance":
            continue
        among = lim.values.get("among", ())
        if (len(among) == 1 and among[0] in net.banks) or len(among) < 2:
            continue
        cur = np.column_stack([s.current(n) for n in among])
        bound = np.column_stack([s.bound(n) for n in among])
        value, spread = imbalance_with_spread(cur, bound)
        rest = np.isnan(value)
        limit = lim.values["max"].value if "max" in lim.values else DEFAULT_MAX
        close = _undecided(value, spread, limit * 100)
        detail = ""
        if s.single:
            detail = f"currents (passive sign) {_signed(among, cur[0])} A"
            if rest[0]:
                detail += "; at rest (net current within round-off): imbalance not judged"
            elif close[0]:
                detail += f"; within round-off ({spread[0]:.2g} points) of the limit: not judged"
        judged = ~rest & ~close
        out.append(
            Series("imbalance", ", ".join(among), "%", f"limit statement at {lim.span}", value, limit * 100, value <= limit * 100, judged=judged, detail=detail)
        )
    return out


def bank_quantity(net, s, name: str, attr: str) -> np.ndarray:
    """``imbalance_pct`` (NaN at rest) or ``circulating_A`` of a bank, one value per sample of ``s``."""
    bank = net.banks[name]
    if attr == "imbalance_pct":
        return imbalance_values(*s.strings(bank))
    circ, bound = s.circulating(bank)
    return np.where(circ <= bound, 0.0, circ)
