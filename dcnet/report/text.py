"""Results for people and for spreadsheets: aligned tables, Markdown, CSV.

Only presentation lives here: every number comes from
:meth:`dcnet.analysis.solution.Solution.to_dict` or the Solution accessors.
"""

from __future__ import annotations

import csv
import io
import math
from typing import Any

__all__ = ["si", "CAUTION", "wrapped_caution", "verdict_lines", "verdict_markdown", "table", "markdown", "csv_text", "show_lines", "columns"]

CAUTION = (
    "Caution: these figures come from a model and are no substitute for measurement. A battery bank "
    "can drive thousands of amperes into a fault; lead-acid banks vent hydrogen while charging; "
    "lithium cells can go into thermal runaway. Follow your local electrical codes and have "
    "installations designed, built and checked by licensed practitioners."
)

_PREFIXES = [(1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"), (1e-12, "p")]


def si(value: float, unit: str, digits: int = 4) -> str:
    """``0.004521, "Ohm"`` -> ``"4.521 mOhm"``; magnitudes get a prefix, ``digits`` significant."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    if unit in ("%", ""):
        return f"{value:.{max(digits - 2, 1)}f}{' %' if unit == '%' else ''}"
    mag = abs(value)
    if mag == 0:
        return f"0 {unit}"
    for factor, prefix in _PREFIXES:
        if mag >= factor * 0.9995:
            break
    else:
        return f"{value:.{max(digits - 1, 0)}e} {unit}"
    scaled = value / factor
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(scaled)))), 0) if scaled else 0
    return f"{scaled:.{decimals}f} {prefix}{unit}"


def columns(rows: list[list[str]], right: set[int] = frozenset(), indent: str = "  ") -> list[str]:
    """Align rows of strings into columns; ``right`` holds right-aligned column numbers."""
    if not rows:
        return []
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]))]
    out = []
    for r in rows:
        cells = [c.rjust(w) if k in right else c.ljust(w) for k, (c, w) in enumerate(zip(r, widths))]
        out.append((indent + "  ".join(cells)).rstrip())
    return out


_EXTRA_LABELS = {
    "loss_W": ("loss", "W"),
    "emf_power_W": ("emf power", "W"),
    "resistance_ohm": ("R", "Ohm"),
    "drop_pct": ("drop", "%"),
    "loading_pct": ("load", "%"),
    "reverse_V": ("reverse", "V"),
}


def _notes(res: dict[str, Any]) -> str:
    parts = []
    for key, (label, unit) in _EXTRA_LABELS.items():
        if key in res and res[key] is not None and not (isinstance(res[key], float) and math.isnan(res[key])):
            if key == "emf_power_W" or (key == "reverse_V" and not res[key]):
                continue
            parts.append(f"{label} {si(res[key], unit)}")
    return ", ".join(parts)


def _flow(res: dict[str, Any]) -> str:
    i = res["current_A"]
    a, b = res["nodes"]
    if i == 0:
        return ""
    return f"{a} -> {b}" if i > 0 else f"{b} -> {a}"


def table(result: dict[str, Any], file: str | None = None) -> str:
    """The human-readable report of one solve."""
    out = []
    head = "dcnet"
    if result.get("title"):
        head += f"  {result['title']}"
    if file:
        head += f"  ({file})"
    out.append(head)
    out.append(f"ground: {result['ground']}")
    out.append("")
    out.append("Nodes")
    rows = [["node", "potential"]]
    for name, nd in result["nodes"].items():
        rows.append([name, si(nd["potential_V"], "V")])
    out += columns(rows, right={1})
    out.append("")
    out.append("Elements (magnitudes; 'flow' is the direction the current actually takes)")
    rows = [["name", "kind", "state", "current", "flow", "voltage", "power", "notes"]]
    for name, res in result["elements"].items():
        rows.append(
            [
                name,
                res["kind"],
                res["state"],
                si(abs(res["current_A"]), "A"),
                _flow(res),
                si(abs(res["voltage_V"]), "V"),
                si(abs(res["power_W"]), "W"),
                _notes(res),
            ]
        )
    out += columns(rows, right={3, 5, 6})
    out.append("")
    out += _balance_lines(result["balance"])
    if result.get("checks"):
        out.append("")
        out += verdict_lines(result["checks"], brief=True)
    if result.get("warnings"):
        out.append("")
        out.append("Warnings")
        out += [f"  - {w}" for w in result["warnings"]]
    out.append("")
    out.append(wrapped_caution())
    return "\n".join(out)


def wrapped_caution(width: int = 100) -> str:
    import textwrap

    return textwrap.fill(CAUTION, width)


def _word(c: dict, md: bool = False) -> str:
    if c.get("sense") == "info":
        return "info"
    if c["ok"]:
        return "pass"
    return "**FAIL**" if md else "FAIL"


def _fmt(value, unit: str) -> str:
    if value is None:
        return "-"
    if isinstance(value, float) and not math.isfinite(value):
        return "unlimited"
    return si(value, unit)


def limit_text(c: dict, signs: tuple[str, str] = ("<= ", ">= ")) -> str:
    """A verdict's limit with its sense: ``<= 10.00 A`` (``signs`` for at-most and at-least)."""
    if c.get("limit") is None:
        return "-"
    sign = {"max": signs[0], "min": signs[1]}.get(c.get("sense", "max"), "")
    return sign + _fmt(c["limit"], c["unit"])


def verdict_lines(checks: list[dict], brief: bool = False, shown: int = 12) -> list[str]:
    """The verdict table, worst first. ``brief`` shows the failures and the closest passes only."""
    failed = [c for c in checks if not c["ok"]]
    rows = [["verdict", "rule", "subject", "value", "limit", "source"]]
    listed = checks if not brief else failed + [c for c in checks if c["ok"]][: max(0, shown - len(failed))]
    for c in listed:
        rows.append([_word(c), c["rule"], c["subject"], _fmt(c["value"], c["unit"]), limit_text(c), _short(c["source"])])
    head = f"Checks: {len(checks)} run, {len(failed)} failed" + (" (worst first)" if checks else "")
    out = [head] + columns(rows, right={3, 4})
    details = [c for c in listed if c.get("detail") and (not c["ok"] or c["rule"] in ("fault current", "imbalance"))]
    for c in details:
        out.append(f"  {c['subject']}: {c['detail']}")
    if brief and len(listed) < len(checks):
        out.append(f"  ... {len(checks) - len(listed)} more passed; 'dcnet check' lists every check")
    return out


def verdict_markdown(checks: list[dict]) -> str:
    """The verdict table as Markdown, worst first."""
    out = ["| verdict | rule | subject | value | limit | source |", "|---|---|---|---:|---:|---|"]
    for c in checks:
        out.append(f"| {_word(c, md=True)} | {c['rule']} | `{c['subject']}` | {_fmt(c['value'], c['unit'])} | {limit_text(c)} | {c['source']} |")
    return "\n".join(out)


def _short(text: str, width: int = 70) -> str:
    return text if len(text) <= width else text[: width - 3] + "..."


def _balance_lines(bal: dict[str, Any]) -> list[str]:
    verdict = "ok" if bal.get("ok", True) else "LARGER THAN USUAL"
    return [
        f"Self-check: largest Kirchhoff current residual {bal['kcl_max_residual_A']:.2g} A; "
        f"power sum over all elements {bal['power_sum_W']:.2g} W ({verdict})"
    ]


def markdown(result: dict[str, Any], file: str | None = None) -> str:
    """The report as a Markdown document."""
    out = [f"# {result.get('title') or file or 'dcnet result'}", ""]
    if file:
        out += [f"Circuit file: `{file}`; ground: `{result['ground']}`", ""]
    out += ["## Nodes", "", "| node | potential |", "|---|---:|"]
    for name, nd in result["nodes"].items():
        out.append(f"| `{name}` | {si(nd['potential_V'], 'V')} |")
    out += ["", "## Elements", "", "Signed values follow the passive sign convention (negative power = delivering).", ""]
    out += ["| name | kind | state | current | voltage | power | notes |", "|---|---|---|---:|---:|---:|---|"]
    for name, res in result["elements"].items():
        out.append(
            f"| `{name}` | {res['kind']} | {res['state']} | {si(res['current_A'], 'A')} | "
            f"{si(res['voltage_V'], 'V')} | {si(res['power_W'], 'W')} | {_notes(res)} |"
        )
    out += [""] + _balance_lines(result["balance"])
    if result.get("checks"):
        out += ["", "## Checks", "", verdict_markdown(result["checks"])]
    if result.get("warnings"):
        out += ["", "## Warnings", ""] + [f"- {w}" for w in result["warnings"]]
    out += ["", f"> {CAUTION}", ""]
    return "\n".join(out)


def csv_text(result: dict[str, Any]) -> str:
    """One row per node and per element, SI units in the column names."""
    extra_keys: list[str] = []
    for res in result["elements"].values():
        for k in res:
            if k not in ("kind", "nodes", "current_A", "voltage_V", "power_W", "state") and k not in extra_keys:
                extra_keys.append(k)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["record", "name", "kind", "node1", "node2", "potential_V", "current_A", "voltage_V", "power_W", "state", *extra_keys])
    for name, nd in result["nodes"].items():
        w.writerow(["node", name, "", "", "", repr(nd["potential_V"]), "", "", "", "", *[""] * len(extra_keys)])
    for name, res in result["elements"].items():
        w.writerow(
            [
                "element",
                name,
                res["kind"],
                res["nodes"][0],
                res["nodes"][1],
                "",
                repr(res["current_A"]),
                repr(res["voltage_V"]),
                repr(res["power_W"]),
                res["state"],
                *[_csv_num(res.get(k)) for k in extra_keys],
            ]
        )
    return buf.getvalue()


def _csv_num(x) -> str:
    if x is None:
        return ""
    if isinstance(x, float):
        return "" if math.isnan(x) else repr(x)
    return str(x)


def show_lines(values: list[tuple[str, float, str]]) -> list[str]:
    """``--show`` answers for people: ``A1.current = -9.378 A``."""
    rows = [[label, "=", si(value, unit) if unit else f"{value:.6g}"] for label, value, unit in values]
    return columns(rows, indent="")
