"""Current sharing among parallel strings: imbalance under load, circulating current at rest.

* **Imbalance** is the largest deviation of a string's current from the strings' mean, as a
  share of the mean. It is judged only while the bank carries a net current well above the
  solve's round-off (a thousand times the round-off bound of the string currents, summed): at
  rest the mean is round-off and any percentage of it is noise.
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

__all__ = ["rules", "imbalance_values", "BANK_QUANTITIES", "bank_limits", "AT_REST_FACTOR"]

DEFAULT_MAX = 0.10
DEFAULT_SOURCE = "default 10 % (common practice, no source)"
#: a net current within this many round-off bounds of zero is "at rest"
AT_REST_FACTOR = 1000.0
#: default circulating-current limit, as a fraction of a string's capacity per hour (C/20)
CIRCULATING_C = 1 / 20
CIRCULATING_SOURCE = "default C/20 of the smallest string capacity (common practice, no source)"

#: per-bank result quantities (``BANK.imbalance_pct``, ``BANK.circulating_A``) and their units
BANK_QUANTITIES = {"imbalance_pct": "%", "circulating_A": "A"}


def imbalance_values(cur: np.ndarray, bound: np.ndarray | None = None) -> np.ndarray:
    """Per sample (rows of ``cur``): the largest deviation from the mean in % of the mean; NaN
    where the net current is within :data:`AT_REST_FACTOR` times its round-off ``bound``
    (summed over the members; without bounds, within 1e-9 of the largest member current)."""
    cur = np.atleast_2d(cur)
    mean = cur.mean(axis=1)
    net = np.abs(cur.sum(axis=1))
    if bound is None:
        rest = net <= 1e-9 * np.abs(cur).max(axis=1, initial=0.0)
    else:
        rest = net <= AT_REST_FACTOR * np.atleast_2d(bound).sum(axis=1)
    rest |= mean == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.abs(cur - mean[:, None]).max(axis=1) / np.abs(mean) * 100
    return np.where(rest, np.nan, value)


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
        last = [cells[-1] for cells in bank["strings"]]
        cur = np.column_stack([s.current(c) for c in last])
        bound = np.column_stack([s.bound(c) for c in last])
        limit, source = bank_limit[name]
        value = imbalance_values(cur, bound)
        rest = np.isnan(value)
        circ, circ_bound = s.circulating(bank)
        circ = np.where(circ <= circ_bound, 0.0, circ)
        detail = ""
        if s.single:
            labels = [f"s{j + 1}" for j in range(len(last))]
            detail = f"string currents (passive sign, + charging) {_signed(labels, cur[0])} A; net {cur[0].sum():+.4g} A"
            if rest[0]:
                detail += "; the bank is at rest (net current within round-off): imbalance not judged, see its circulating current"
        out.append(Series("imbalance", f"bank {name}", "%", source, value, limit * 100, value <= limit * 100, judged=~rest, detail=detail))
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
        value = imbalance_values(cur, bound)
        rest = np.isnan(value)
        limit = lim.values["max"].value if "max" in lim.values else DEFAULT_MAX
        detail = ""
        if s.single:
            detail = f"currents (passive sign) {_signed(among, cur[0])} A"
            if rest[0]:
                detail += "; at rest (net current within round-off): imbalance not judged"
        out.append(
            Series("imbalance", ", ".join(among), "%", f"limit statement at {lim.span}", value, limit * 100, value <= limit * 100, judged=~rest, detail=detail)
        )
    return out


def bank_quantity(net, s, name: str, attr: str) -> np.ndarray:
    """``imbalance_pct`` (NaN at rest) or ``circulating_A`` of a bank, one value per sample of ``s``."""
    bank = net.banks[name]
    if attr == "imbalance_pct":
        last = [cells[-1] for cells in bank["strings"]]
        return imbalance_values(np.column_stack([s.current(c) for c in last]), np.column_stack([s.bound(c) for c in last]))
    circ, bound = s.circulating(bank)
    return np.where(circ <= bound, 0.0, circ)
