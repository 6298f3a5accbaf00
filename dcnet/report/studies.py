"""Sweeps and spreads for people and for other tools: tables, CSV, JSON and plots.

Numbers come from :class:`dcnet.analysis.studies.StudyResult`; only presentation lives
here. matplotlib is imported inside the plot functions, and only there.
"""

from __future__ import annotations

import csv
import io
import math
import os
from typing import Any

import numpy as np

from ..units import (
    AREA,
    CHARGE,
    CONDUCTANCE,
    CURRENT,
    DIMENSIONLESS,
    ENERGY,
    LENGTH,
    POWER,
    RESISTANCE,
    RESISTANCE_PER_LENGTH,
    TEMPERATURE,
    TIME,
    VOLTAGE,
)
from .text import columns, si, wrapped_caution

__all__ = ["let_unit", "show_value", "sweep_table", "sweep_csv", "sweep_json", "spread_table", "spread_csv", "spread_json", "plot_sweep", "plot_spread"]

_UNITS = {
    VOLTAGE: ("V", 1.0),
    CURRENT: ("A", 1.0),
    RESISTANCE: ("Ohm", 1.0),
    RESISTANCE_PER_LENGTH: ("Ohm/m", 1.0),
    CONDUCTANCE: ("S", 1.0),
    POWER: ("W", 1.0),
    ENERGY: ("Wh", 3600.0),
    CHARGE: ("Ah", 3600.0),
    TIME: ("s", 1.0),
    LENGTH: ("m", 1.0),
    AREA: ("mm2", 1e-6),
    TEMPERATURE: ("degC", 1.0),
    DIMENSIONLESS: ("", 1.0),
}


def let_unit(dim) -> tuple[str, float]:
    """The unit a let value of dimension ``dim`` is shown in, and its size in SI."""
    return _UNITS.get(dim, ("SI", 1.0))


def show_value(value: float, dim) -> str:
    unit, scale = let_unit(dim)
    if unit in ("mm2", "degC", "Ah", "Wh", "SI", ""):
        return f"{value / scale:.6g}" + (f" {unit}" if unit else "")
    return si(value, unit)


def _num(x: float) -> str:
    return "" if x is None or (isinstance(x, float) and math.isnan(x)) else repr(float(x))


def _failed_checks(result) -> np.ndarray:
    out = np.zeros(result.n, dtype=np.int64)
    for c in result.checks:
        out += ~c.ok
    return out


# ------------------------------------------------------------------ sweeps
def sweep_table(file: str, study, axes, values, result, describe: str) -> str:
    names = [name for name, _ in axes]
    lines = [f"Sweep of {file}: {describe}", f"solved: {_modes(result)}", ""]
    header = [f"{n}" for n in names] + result.labels + ["checks failed"]
    rows = [header]
    failed = _failed_checks(result)
    for k in range(result.n):
        row = [show_value(values[n][k], study.dims[n]) for n in names]
        row += [si(result.quantities[k, j], result.units[j]) for j in range(len(result.labels))]
        row.append(str(int(failed[k])))
        rows.append(row)
    lines += columns(rows, right=set(range(len(header))))
    lines += [""] + _check_lines(result, points="points")
    lines += ["", wrapped_caution()]
    return "\n".join(lines) + "\n"


def _modes(result) -> str:
    parts = []
    for mode, count in result.modes.items():
        parts.append(f"{count:,} {'sample' if count == 1 else 'samples'} {mode}")
    return "; ".join(parts)


def _check_lines(result, points: str) -> list[str]:
    failing = [c for c in result.checks if (~c.ok).any()]
    lines = [f"checks per {points[:-1]}: {len(result.checks)} evaluated, {len(failing)} fail somewhere ({result.checks_covered})"]
    if failing:
        rows = [["rule", "subject", "passing", "worst", "limit"]]
        for c in sorted(failing, key=lambda c: c.pass_share):
            k = c.worst()
            rows.append([c.rule, c.subject, f"{c.pass_share * 100:.2f} %", si(c.value[k], c.unit) if k is not None else "-", si(c.limit[k], c.unit) if k is not None else "-"])
        lines += columns(rows, right={2, 3, 4})
    return lines


def sweep_csv(study, axes, values, result) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    names = [name for name, _ in axes]
    w.writerow([f"{n} [{let_unit(study.dims[n])[0] or '-'}]" for n in names] + [f"{lab} [{u or '-'}]" for lab, u in zip(result.labels, result.units)] + ["checks_failed"])
    failed = _failed_checks(result)
    for k in range(result.n):
        w.writerow([_num(values[n][k] / let_unit(study.dims[n])[1]) for n in names] + [_num(x) for x in result.quantities[k]] + [int(failed[k])])
    return buf.getvalue()


def _checks_json(result) -> list[dict[str, Any]]:
    out = []
    for c in result.checks:
        k = c.worst()
        out.append(
            {
                "rule": c.rule,
                "subject": c.subject,
                "unit": c.unit,
                "source": c.source,
                "pass_share": c.pass_share,
                "failing_samples": [int(x) + 1 for x in np.flatnonzero(~c.ok)[:1000]],
                "worst": None if k is None else {"sample": k + 1, "value": float(c.value[k]), "limit": float(c.limit[k])},
            }
        )
    return out


def sweep_json(file: str, study, axes, values, result) -> dict[str, Any]:
    return {
        "file": file,
        "points": result.n,
        "vary": {n: {"unit": let_unit(study.dims[n])[0], "values": [v / let_unit(study.dims[n])[1] for v in values[n].tolist()]} for n, _ in axes},
        "quantities": {lab: {"unit": u, "values": [None if math.isnan(x) else x for x in result.quantities[:, j].tolist()]} for j, (lab, u) in enumerate(zip(result.labels, result.units))},
        "checks": _checks_json(result),
        "checks_covered": result.checks_covered,
        "solved": result.modes,
    }


# ----------------------------------------------------------------- spreads
def spread_table(file: str, study, result, stats, header: list[str]) -> str:
    lines = [f"Spread of {file}: " + header[0]] + header[1:] + [f"solved: {_modes(result)}", ""]
    if result.labels:
        pct = list(next(iter(stats.values()))["percentiles"]) if stats and next(iter(stats.values())).get("n") else []
        head = ["quantity", "nominal", "mean", "std dev"] + [f"p{p:g}" for p in pct] + ["min", "max", "worst"]
        rows = [head]
        for lab, unit in zip(result.labels, result.units):
            s = stats[lab]
            if not s.get("n"):
                rows.append([lab] + ["-"] * (len(head) - 1))
                continue
            rows.append([lab, si(s["nominal"], unit), si(s["mean"], unit), si(s["std"], unit)] + [si(s["percentiles"][p], unit) for p in pct] + [si(s["min"], unit), si(s["max"], unit), si(s["worst"], unit)])
        lines += columns(rows, right=set(range(1, len(head))))
        lines += ["  (worst: the sample furthest from the nominal value)", ""]
    lines += _ranked_checks(result)
    lines.append(f"  covered: {result.checks_covered}")
    lines += ["", wrapped_caution()]
    return "\n".join(lines) + "\n"


def _margin(c) -> float:
    k = c.worst()
    if k is None:
        return -math.inf
    v, lim = abs(c.value[k]), abs(c.limit[k])
    with np.errstate(divide="ignore", invalid="ignore"):
        m = v / lim if c.sense == "max" else lim / v
    return -math.inf if math.isnan(m) else float(m)


def _ranked_checks(result, shown: int = 12) -> list[str]:
    """Checks failing in some sample first (lowest share passing), then those nearest their limits."""
    ranked = sorted(result.checks, key=lambda c: (c.pass_share, -_margin(c)))
    failing = sum(1 for c in result.checks if (~c.ok).any())
    lines = [f"checks: share of samples passing each ({len(result.checks)} checks, {failing} failing in some sample), then the nearest to their limits"]
    rows = [["rule", "subject", "passing", "worst sample", "limit"]]
    for c in ranked[: max(shown, failing)]:
        k = c.worst()
        rows.append([c.rule, c.subject, f"{c.pass_share * 100:.2f} %", si(c.value[k], c.unit) if k is not None else "-", si(c.limit[k], c.unit) if k is not None else "-"])
    lines += columns(rows, right={2, 3, 4})
    rest = len(ranked) - (len(rows) - 1)
    if rest > 0:
        lines.append(f"  ... and {rest} more, passing in every sample (--format json lists them all)")
    return lines


def spread_csv(result, stats) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    pct = []
    for s in stats.values():
        if s.get("n"):
            pct = list(s["percentiles"])
            break
    w.writerow(["record", "name", "unit", "nominal", "mean", "std", *[f"p{p:g}" for p in pct], "min", "max", "worst", "pass_share", "worst_limit"])
    for lab, unit in zip(result.labels, result.units):
        s = stats[lab]
        if not s.get("n"):
            continue
        w.writerow(["quantity", lab, unit, _num(s["nominal"]), _num(s["mean"]), _num(s["std"]), *[_num(s["percentiles"][p]) for p in pct], _num(s["min"]), _num(s["max"]), _num(s["worst"]), "", ""])
    for c in result.checks:
        k = c.worst()
        w.writerow(["check", f"{c.rule}: {c.subject}", c.unit, "", "", "", *[""] * len(pct), "", "", _num(c.value[k]) if k is not None else "", _num(c.pass_share), _num(c.limit[k]) if k is not None else ""])
    return buf.getvalue()


def spread_json(file: str, result, stats, meta: dict[str, Any]) -> dict[str, Any]:
    return {
        "file": file,
        **meta,
        "quantities": {lab: {"unit": u, **{k: v for k, v in stats[lab].items() if k != "percentiles"}, "percentiles": {f"p{p:g}": x for p, x in stats[lab].get("percentiles", {}).items()}} for lab, u in zip(result.labels, result.units)},
        "checks": _checks_json(result),
        "checks_covered": result.checks_covered,
        "solved": result.modes,
    }


# ------------------------------------------------------------------- plots
def _pyplot():
    from ..errors import InputError

    try:
        import matplotlib
    except ImportError:
        raise InputError("--plot needs matplotlib", hint='install it with: pip install "dcnet[plot]"') from None
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _png(fig) -> bytes:
    """The figure as PNG bytes (the command writes them through dcnet's one output writer)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    return buf.getvalue()


def plot_sweep(file: str, study, axes, values, result, logs: dict[str, bool]) -> bytes:
    """The quantities against the first varied value, one line per combination of the others: PNG bytes."""
    plt = _pyplot()
    nq = max(1, len(result.labels))
    fig, ax = plt.subplots(nq, 1, figsize=(8, 2.6 * nq + 0.8), sharex=True, squeeze=False)
    first, xs = axes[0]
    unit, scale = let_unit(study.dims[first])
    rest = axes[1:]
    # one line per combination of the other varied names
    n_first = len(xs)
    n_lines = result.n // n_first if n_first else 0
    for j in range(len(result.labels)):
        a = ax[j][0]
        for line in range(n_lines):
            idx = np.arange(n_first) * n_lines + line
            label = ", ".join(f"{n} = {show_value(values[n][idx[0]], study.dims[n])}" for n, _ in rest) or None
            a.plot(values[first][idx] / scale, result.quantities[idx, j], marker="o", markersize=3, linewidth=1, label=label)
        a.set_ylabel(f"{result.labels[j]} ({result.units[j]})" if result.units[j] else result.labels[j])
        a.grid(True, alpha=0.3)
        if logs.get(first):
            a.set_xscale("log")
        if rest and n_lines <= 10:
            a.legend(fontsize=7)
    ax[-1][0].set_xlabel(f"{first} ({unit})" if unit else first)
    fig.suptitle(f"Sweep of {os.path.basename(file)}", fontsize=10)
    fig.tight_layout()
    try:
        return _png(fig)
    finally:
        plt.close(fig)


def plot_spread(file: str, result, stats, samples: int) -> bytes:
    """A histogram of each quantity with the nominal value and p5/p95 marked: PNG bytes."""
    plt = _pyplot()
    nq = max(1, len(result.labels))
    fig, ax = plt.subplots(nq, 1, figsize=(8, 2.6 * nq + 0.8), squeeze=False)
    for j, (lab, unit) in enumerate(zip(result.labels, result.units)):
        a = ax[j][0]
        v = result.quantities[:, j]
        v = v[~np.isnan(v)]
        a.hist(v, bins=min(60, max(10, int(math.sqrt(len(v))))), color="#4a7ab5", alpha=0.85)
        a.axvline(stats[lab]["nominal"], color="black", linewidth=1, label="nominal")
        marked = [(p, x) for p, x in stats[lab].get("percentiles", {}).items() if p in (5.0, 95.0)]
        for k, (p, x) in enumerate(marked):
            a.axvline(x, color="#c0392b", linewidth=0.8, linestyle="--", label="p5 and p95" if k == 0 else None)
        a.set_xlabel(f"{lab} ({unit})" if unit else lab)
        a.set_ylabel("samples")
        a.legend(fontsize=7)
    fig.suptitle(f"Spread of {os.path.basename(file)}: {samples:,} samples", fontsize=10)
    fig.tight_layout()
    try:
        return _png(fig)
    finally:
        plt.close(fig)
