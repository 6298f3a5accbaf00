"""The checks for many samples at once (studies: ``dcnet sweep`` and ``dcnet spread``).

Each rule here is the rule of its own module (same limits, same sources, same rule and
subject words) evaluated on arrays with one entry per sample, from a
:class:`dcnet.analysis.studies.Samples` (which has the lookups of a Solution, returning
arrays). Covered: string imbalance (banks and ``limit imbalance``), cell current and
terminal-voltage window, cable ampacity, fuse loading, voltage drop (to every load and
``limit drop``), ``limit current`` and ``limit voltage``.

The prospective fault current through each fuse with an ``interrupt`` rating, against that
rating, is covered when the study asks for it (``--fault``): it costs a second factorisation
of every sample's matrix (one right-hand side per fuse end, all solved together). The fault
points are chosen as ``dcnet check`` chooses them, on the nominal circuit (each fuse end
against the source terminal farthest from it in potential); each sample takes the end that
drives more current through the fuse. The circulating current at rest has no limit (an
information line in ``dcnet check``); per sample it is the quantity ``BANK.circulating_A``
(:meth:`dcnet.analysis.studies.Samples.bank_quantity`). A test compares every covered rule
here with its own module on the same circuits.
"""

from __future__ import annotations

import numpy as np

from . import elements_of

__all__ = ["run"]


def _series(rule, subject, value, limit, unit, ok, source, sense="max", n=None):
    value = np.asarray(value, dtype=float)
    n = n or len(value)
    return {
        "rule": rule,
        "subject": subject,
        "unit": unit,
        "sense": sense,
        "source": source,
        "value": np.broadcast_to(value, (n,)).copy(),
        "limit": np.broadcast_to(np.asarray(limit, dtype=float), (n,)).copy(),
        "ok": np.broadcast_to(np.asarray(ok, dtype=bool), (n,)).copy(),
    }


def run(net, s) -> list[dict]:
    """Every covered check of every sample: dicts with per-sample ``value``, ``limit`` and ``ok``."""
    out: list[dict] = []
    for rule in (_imbalance, _cells, _cables, _fuses, _drop, _limits):
        out.extend(rule(net, s))
    if getattr(s, "fault", False):
        out.extend(_faults(net, s))
    return out


# ---------------------------------------------------------------- fault current
def _faults(net, s) -> list[dict]:
    """Each rated fuse's share of a bolted fault (Thevenin per sample, superposition for the
    fuse's share: the rule of :mod:`dcnet.checks.fault`)."""
    from ..kinds import KINDS
    from .fault import _far_pole

    fuses = [el for el in elements_of(net, "fuse") if el.values.get("interrupt") is not None]
    if not fuses or s.solution is None:
        return []
    sources = [k for k, kind in KINDS.items() if kind.is_source]
    poles = sorted({n for el in elements_of(net, *sources) for n in el.nodes})
    points = []
    for el in fuses:
        for end in el.nodes:
            pole = _far_pole(s.nominal, end, poles)
            if pole is not None:
                points.append((el, end, pole))
    if not points:
        return []
    bt = s.branches
    idx = net.node_index
    row, N, vb = s.solution.rows
    B = np.zeros((N + len(vb), len(points)))
    for k, (_el, end, pole) in enumerate(points):
        ra, rb = row[idx[end]], row[idx[pole]]
        if ra >= 0:
            B[ra, k] += 1.0
        if rb >= 0:
            B[rb, k] -= 1.0
    W = s.solution.solve_more(B)  # (samples, unknowns, points)
    S = s.n
    pw = np.zeros((S, bt.n_nodes, len(points)))
    mask = row >= 0
    pw[:, mask, :] = W[:, row[mask], :]
    g = s.g
    best: dict[str, np.ndarray] = {}
    for k, (el, end, pole) in enumerate(points):
        p = net.element_position(el.name)
        r_th = pw[:, idx[end], k] - pw[:, idx[pole], k]
        v_oc = s.potential(end) - s.potential(pole)
        scale = np.maximum(1.0, np.abs(v_oc))
        with np.errstate(divide="ignore", invalid="ignore"):
            i_sc = np.where(r_th > 1e-15 * scale, v_oc / r_th, np.inf)
        if bt.is_voltage[p]:
            di = -i_sc * W[:, N + int(np.flatnonzero(vb == p)[0]), k]
        else:
            di = -i_sc * g[:, p] * (pw[:, bt.a[p], k] - pw[:, bt.b[p], k])
        through = np.abs(s.i[:, p] + np.where(np.isfinite(i_sc), di, 0.0))
        through = np.where(np.isfinite(i_sc), through, np.inf)
        best[el.name] = through if el.name not in best else np.maximum(best[el.name], through)
    out = []
    for el in fuses:
        if el.name in best:
            limit = el.values["interrupt"]
            v = best[el.name]
            out.append(_series("fault current", el.name, v, limit, "A", v <= limit, f"interrupt rating of {el.name} (as given)"))
    return out


# ---------------------------------------------------------------- imbalance
def _imbalance_values(cur: np.ndarray) -> np.ndarray:
    """Largest deviation from the mean as a percentage of the mean, per sample (NaN where the mean is ~0)."""
    mean = cur.mean(axis=1)
    scale = np.abs(cur).max(axis=1, initial=0.0)
    undefined = (scale == 0) | (np.abs(mean) <= 1e-9 * scale)
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.abs(cur - mean[:, None]).max(axis=1) / np.abs(mean) * 100
    return np.where(undefined, np.nan, value)


def _imbalance(net, s) -> list[dict]:
    from .imbalance import DEFAULT_MAX, bank_limits

    out = []
    limits = [lim for lim in net.limits if lim.rule == "imbalance"]
    bank_limit = bank_limits(net)
    for name, bank in net.banks.items():
        if bank["parallel"] < 2:
            continue
        cur = np.column_stack([s.current(cells[-1]) for cells in bank["strings"]])
        limit, source = bank_limit[name]
        value = _imbalance_values(cur)
        out.append(_series("imbalance", f"bank {name}", value, limit * 100, "%", np.isnan(value) | (value <= limit * 100), source))
    for lim in limits:
        among = lim.values.get("among", ())
        if (len(among) == 1 and among[0] in net.banks) or len(among) < 2:
            continue
        cur = np.column_stack([s.current(n) for n in among])
        value = _imbalance_values(cur)
        limit = lim.values["max"].value if "max" in lim.values else DEFAULT_MAX
        out.append(_series("imbalance", ", ".join(among), value, limit * 100, "%", np.isnan(value) | (value <= limit * 100), f"limit statement at {lim.span}"))
    return out


# -------------------------------------------------------------------- cells
def _cells(net, s) -> list[dict]:
    from .cells import _chemistry

    out = []
    n = s.n
    for el in elements_of(net, "cell"):
        v = el.values
        i = s.current(el.name)
        vt = s.voltage(el.name)
        chem = _chemistry(v.get("chemistry"))
        emf = np.broadcast_to(np.asarray(s.value(el.name, "emf"), dtype=float), (n,))
        series = None
        if chem and chem.get("nominal_V"):
            series = np.maximum(1, np.round(np.abs(emf) / chem["nominal_V"]))
        if "imax" in v:
            imax = s.value(el.name, "imax")
            out.append(_series("cell current", el.name, np.abs(i), imax, "A", np.abs(i) <= imax, f"imax of {el.name} (as given)"))
        elif chem and chem.get("max_c_rate") and "capacity" in v:
            limit = chem["max_c_rate"] * s.value(el.name, "capacity") / 3600.0
            out.append(_series("cell current", el.name, np.abs(i), limit, "A", np.abs(i) <= limit, f"{chem['max_c_rate']:g} C: {chem['sources']['max_c_rate']}"))
        for key, sense, word in (("vmin", "min", "lowest"), ("vmax", "max", "highest")):
            if key in v:
                limit, source = s.value(el.name, key), f"{key} of {el.name} (as given)"
            elif chem and series is not None and chem.get(f"{key}_V"):
                limit = chem[f"{key}_V"] * series
                nominal = int(series[0])
                source = (
                    f"{nominal} x {chem[f'{key}_V']:g} V per cell ({nominal} cells from EMF / {chem['nominal_V']:g} V nominal, "
                    f"common practice, no source); per-cell value: {chem['sources'][f'{key}_V']}"
                )
            else:
                continue
            ok = vt >= limit if sense == "min" else vt <= limit
            out.append(_series(f"cell voltage ({word})", el.name, vt, limit, "V", ok, source, sense=sense))
    return out


# ------------------------------------------------------------------- cables
def _cables(net, s) -> list[dict]:
    try:
        from ..data import ampacity
    except ImportError:  # pragma: no cover
        return []
    out = []
    for el in elements_of(net, "cable"):
        v = el.values
        if v.get("area") is None:
            continue
        area = np.broadcast_to(np.asarray(s.value(el.name, "area"), dtype=float), (s.n,))
        insulation = np.broadcast_to(np.asarray(s.value(el.name, "insulation", 75.0), dtype=float), (s.n,))
        amps = np.full(s.n, np.nan)
        source = ""
        for a, t in np.unique(np.column_stack([area, insulation]), axis=0):
            found, source = ampacity(float(a), v.get("awg"), v.get("metal", "copper"), float(t))
            amps[(area == a) & (insulation == t)] = np.nan if found is None else found
        if np.isnan(amps).all():
            continue  # no ampacity for this cable: an info line in dcnet check
        i = np.abs(s.current(el.name))
        out.append(_series("cable ampacity", el.name, i, amps, "A", np.isnan(amps) | (i <= amps), source))
    return out


# -------------------------------------------------------------------- fuses
def _fuses(net, s) -> list[dict]:
    from .fuses import CONTINUOUS_FACTOR, SOURCE

    out = []
    for el in elements_of(net, "fuse"):
        limit = CONTINUOUS_FACTOR * np.asarray(s.value(el.name, "rating"), dtype=float)
        i = np.abs(s.current(el.name))
        out.append(_series("fuse loading", el.name, i, limit, "A", i <= limit, SOURCE))
    return out


# --------------------------------------------------------------------- drop
def _source_voltage(net, s) -> np.ndarray:
    """Per sample: the span of potentials over the terminals of the elements delivering power."""
    from ..kinds import KINDS

    sources = elements_of(net, *(k for k, kind in KINDS.items() if kind.is_source))
    if not sources:
        return np.zeros(s.n)
    pa = np.column_stack([s.potential(el.nodes[0]) for el in sources])
    pb = np.column_stack([s.potential(el.nodes[1]) for el in sources])
    deliver = np.column_stack([s.power(el.name) < 0 for el in sources])
    hi = np.where(deliver, np.maximum(pa, pb), -np.inf).max(axis=1)
    lo = np.where(deliver, np.minimum(pa, pb), np.inf).min(axis=1)
    return np.where(deliver.any(axis=1), hi - lo, 0.0)


def _drop(net, s) -> list[dict]:
    from .drop import CRITICAL, OTHER, SOURCE_DEFAULT

    out = []
    vs = _source_voltage(net, s)
    live = vs > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        for lim in net.limits:
            if lim.rule != "drop":
                continue
            a, b = lim.values.get("from"), lim.values.get("to")
            if a is None or b is None:
                continue
            limit = lim.values["max"].value if "max" in lim.values else OTHER
            pct = np.where(live, np.abs(s.voltage(a, b)) / vs * 100, np.nan)
            out.append(_series("voltage drop", f"{a} to {b}", pct, limit * 100, "%", pct <= limit * 100, f"limit statement at {lim.span}"))
        for el in elements_of(net, "load"):
            vl = np.abs(s.voltage(el.name))
            pct = np.where(live, np.maximum(0.0, (vs - vl) / vs * 100), np.nan)
            critical = el.values.get("critical", "no") == "yes"
            limit = (CRITICAL if critical else OTHER) * 100
            out.append(_series("voltage drop", f"to load {el.name}", pct, limit, "%", ~live | (pct <= limit), SOURCE_DEFAULT))
    return out


# ------------------------------------------------------------------- limits
def _limits(net, s) -> list[dict]:
    from .limits import measures

    out = []
    for lim in net.limits:
        if lim.rule in ("current", "voltage"):
            source = f"limit statement at {lim.span}"
            for rule, subject, value, m, unit, ok, sense in measures(lim, s.current, s.voltage):
                out.append(_series(rule, subject, value, m, unit, ok, source, sense=sense))
    return out
