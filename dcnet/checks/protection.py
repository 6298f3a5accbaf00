"""Cable protection: the fuse that protects a cable must not be rated above what the cable may carry.

A fuse *protects* a cable when it stands between the cable and every source terminal along
conductors: with the fuse removed, no conductor path joins the cable to a source (the
cable's conductor group, dcnet.analysis.sections). Where several fuses do, the smallest rating
counts. The limit is the cable's ampacity (NEC Table 310.16, as the ampacity check takes it),
raised to the next standard rating of NEC 240.6(A) where the ampacity is not one and is at most
800 A (NEC 240.4(B)), and capped for 18 to 10 AWG copper by NEC 240.4(D) (7, 10, 15, 20, 30 A).
A metric size takes the AWG row of the ampacity check (the largest tabulated AWG size whose area
does not exceed it), so the cap is conservative.

Cables that no fuse separates from their sources (a battery's own leads, usually) get no
verdict; the warnings list them.
"""

from __future__ import annotations

import numpy as np

from . import Series, elements_of
from .cables import cable_ampacity

__all__ = ["rules", "protecting_fuses", "allowed_rating"]

NEXT_RATING_UP_TO = 800.0


def protecting_fuses(net, s) -> dict[str, list[str]]:
    """Cable name -> the fuses that separate it from every source terminal of its conductor group."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    from ..analysis.sections import _conducting
    from ..kinds import KINDS

    bt = s.branches
    n = bt.n_nodes
    conducting_diodes = None
    if s.single and "diode" in bt.groups:
        conducting_diodes = np.zeros(bt.n_elements, dtype=bool)
        for p in bt.groups["diode"][0]:
            conducting_diodes[p] = s.state(bt.names[int(p)]) == "conducting"
    cond = _conducting(bt, conducting_diodes)
    terminals = np.zeros(n, dtype=bool)
    for kind_name, (pos, _cols) in bt.groups.items():
        if KINDS[kind_name].is_source:
            terminals[bt.a[pos]] = True
            terminals[bt.b[pos]] = True
    fuses = [net.element_position(el.name) for el in elements_of(net, "fuse")]
    cables = elements_of(net, "cable")
    out: dict[str, list[str]] = {el.name: [] for el in cables}
    labels_all = s.sections.labels

    def reach(mask) -> np.ndarray:
        k = np.flatnonzero(mask)
        adj = coo_matrix((np.ones(len(k)), (bt.a[k], bt.b[k])), shape=(n, n))
        labels = connected_components(adj, directed=False)[1]
        fed = np.zeros(labels.max() + 1, dtype=bool)
        fed[labels[terminals]] = True
        return fed[labels]

    for f in fuses:
        m = cond.copy()
        m[f] = False
        fed = reach(m)
        for el in cables:
            k = net.element_position(el.name)
            if labels_all[bt.a[k]] != labels_all[bt.a[f]]:
                continue
            if not fed[bt.a[k]] and not fed[bt.b[k]]:
                out[el.name].append(bt.names[f])
    return out


def _awg_row(el) -> int | None:
    from ..data import ampacity_table
    from ..kinds.cable import awg_area

    table = ampacity_table()
    awg = el.values.get("awg")
    if awg is not None and awg in table:
        return awg
    area = awg_area(awg) if awg is not None else el.values.get("area")
    fits = [n for n in table if awg_area(n) <= area * (1 + 1e-9)]
    row = min(fits) if fits else None
    if awg is not None and awg > 14:
        return awg  # 16 and 18 AWG: thinner than the ampacity table, covered by 240.4(D)
    return row


def allowed_rating(amps: float, awg_row: int | None, metal: str) -> tuple[float, str]:
    """The largest fuse rating that protects a cable of ampacity ``amps`` (amperes), with its source."""
    from ..data import next_standard_rating, small_conductor_limit

    limit, parts = amps, [f"ampacity {amps:g} A"]
    if amps <= NEXT_RATING_UP_TO:
        nxt = next_standard_rating(amps)
        if nxt is not None and nxt[0] > amps * (1 + 1e-9):
            limit = min(nxt[0], NEXT_RATING_UP_TO)
            parts.append(f"next standard rating {limit:g} A allowed (NEC 240.4(B), from memory; {nxt[1]})")
    if metal in ("copper", "cu") and awg_row is not None:
        cap = small_conductor_limit(awg_row)
        if cap is not None and cap[0] < limit:
            limit = cap[0]
            parts.append(f"capped at {cap[0]:g} A: {cap[1]}")
    return limit, "; ".join(parts)


def rules(net, s) -> list[Series]:
    out: list[Series] = []
    cables = [el for el in elements_of(net, "cable") if el.values.get("area") is not None]
    if not cables or not elements_of(net, "fuse"):
        return out
    guard = protecting_fuses(net, s)
    unprotected = []
    for el in cables:
        fuses = guard.get(el.name, [])
        if not fuses:
            unprotected.append(el.name)
            continue
        amps, amp_source = cable_ampacity(s, el)
        ratings = np.column_stack([np.broadcast_to(np.asarray(s.value(f, "rating"), dtype=float), (s.n,)) for f in fuses])
        pick = np.argmin(ratings, axis=1)
        rating = ratings[np.arange(s.n), pick]
        if np.isnan(amps).all():
            continue  # no ampacity for this cable: the ampacity check says why
        row = _awg_row(el)
        limit = np.full(s.n, np.nan)
        source = ""
        for a in np.unique(amps[~np.isnan(amps)]):
            lim, source = allowed_rating(float(a), row, el.values.get("metal", "copper"))
            limit[amps == a] = lim
        detail = f"protected by fuse {fuses[int(pick[0])]}; {source}" if s.single else ""
        out.append(
            Series("cable protection", el.name, "A", f"{source}; ampacity: {amp_source}", rating, limit, rating <= limit, judged=~np.isnan(limit), detail=detail)
        )
    if s.single and unprotected:
        from ..topology import _names

        s.notes.append(f"cable protection not checked for {_names(unprotected)}: no fuse stands between them and their sources")
    return out
