"""The HTML report: one self-contained page (inline CSS and SVG, no scripts, nothing fetched).

:func:`render` takes a solved circuit and, when they were run, a cycle result and a spread
result. Those results take part through one small protocol: an object with a
``report_section()`` method (or a plain dict) giving

.. code-block:: python

    {"title": "Charge and discharge cycle",          # the section heading
     "summary": [("round-trip efficiency", "86.2 %"), ...],   # label, text
     "tables": [{"caption": "Energy ledger", "columns": ["item", "Wh", "J"],
                 "rows": [["charger in", "1234", "4.44e6"], ...], "numeric": [1, 2]}],
     "plots": [{"title": ..., "x_label": ..., "y_label": ...,
                "series": [{"name": ..., "x": [...], "y": [...]}]},
               {"kind": "histogram", "title": ..., "x_label": ..., "values": [...],
                "bins": 30, "marks": [{"name": "limit", "x": 80.0}]}],
     "notes": ["free text paragraphs", ...]}

Sections without a result are left out. The page prints to A4 from a browser (print CSS).
"""

from __future__ import annotations

import math
from html import escape as _html_escape

from .. import __version__
from ..display import shown, source_lines
from .text import CAUTION, limit_text, si


def escape(text: str, quote: bool = True) -> str:
    """HTML/XML text: markup escaped, control characters and bidi controls shown as visible escapes
    (they are not allowed in XML and would make the page read differently from what it holds)."""
    return _html_escape(shown(text), quote)

__all__ = ["render", "section_data", "power_ledger"]

_CSS = """
:root { --ink: #22303c; --muted: #5d6873; --rule: #d5dbe1; --band: #f3f6f8;
        --fail: #d1495b; --close: #e09f1f; --pass: #1b8a84; --none: #7d8597; }
* { box-sizing: border-box; }
html { background: #e9edf1; }
body { font-family: "DejaVu Sans", Helvetica, Arial, sans-serif; color: var(--ink); font-size: 10.5pt;
       line-height: 1.4; margin: 0 auto; padding: 14mm 14mm 18mm; max-width: 210mm; background: #ffffff; }
h1 { font-size: 17pt; margin: 0 0 2mm; }
h2 { font-size: 13pt; margin: 7mm 0 2.5mm; padding-bottom: 1mm; border-bottom: 2px solid var(--ink); break-after: avoid; }
h3 { font-size: 11pt; margin: 4mm 0 1.5mm; break-after: avoid; }
p { margin: 1.5mm 0; }
.sub { color: var(--muted); margin: 0 0 4mm; }
code, .mono { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 9pt; }
table { border-collapse: collapse; width: 100%; margin: 1.5mm 0 3mm; font-size: 9pt; }
th, td { padding: 1.1mm 1.8mm; text-align: left; vertical-align: top; border-bottom: 1px solid var(--rule); }
th { background: var(--band); font-weight: bold; }
td.num, th.num { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
thead { display: table-header-group; }
tr { break-inside: avoid; }
.facts { display: grid; grid-template-columns: max-content 1fr; gap: 0.6mm 5mm; margin: 2mm 0; }
.facts dt { color: var(--muted); }
.facts dd { margin: 0; }
.verdict { display: inline-block; min-width: 11mm; padding: 0 1.5mm; border-radius: 2mm; color: #ffffff;
           font-weight: bold; font-size: 8pt; text-align: center; }
.v-fail { background: var(--fail); } .v-close { background: var(--close); }
.v-pass { background: var(--pass); } .v-info, .v-none { background: var(--none); }
.status { display: inline-block; padding: 0.8mm 3mm; border-radius: 2mm; color: #ffffff; font-weight: bold; }
.swatch { display: inline-block; width: 3mm; height: 3mm; border-radius: 0.6mm; vertical-align: middle; margin-right: 1mm; }
figure { margin: 2mm 0 4mm; break-inside: avoid; }
figure svg { display: block; width: 100%; height: auto; max-height: 245mm; border: 1px solid var(--rule); }
figure.network { overflow-x: auto; }
table.elements { font-size: 8.5pt; }
table.elements th, table.elements td { padding: 1mm 1.2mm; }
figcaption { color: var(--muted); font-size: 9pt; margin-top: 1mm; }
.caution { border-left: 4px solid var(--fail); background: #fbeff1; padding: 2.5mm 4mm; margin: 5mm 0; break-inside: avoid; }
.warnings li { margin: 0.5mm 0; }
.source { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 8.3pt; white-space: pre-wrap;
          word-break: break-all; border: 1px solid var(--rule); background: #fbfcfd; }
.source td { border: none; padding: 0 1.8mm; }
.source td.ln { color: var(--muted); text-align: right; user-select: none; width: 1%; white-space: nowrap; border-right: 1px solid var(--rule); }
.note { color: var(--muted); font-size: 9pt; }
footer { margin-top: 6mm; color: var(--muted); font-size: 8.5pt; border-top: 1px solid var(--rule); padding-top: 2mm; }
@page { size: A4; margin: 12mm 12mm 14mm; }
@page wide { size: A4 landscape; margin: 12mm 12mm 14mm; }
@media print {
  figure.network { overflow: visible; }
  figure.network svg { min-width: 0 !important; }
  .picture.wide { page: wide; }
  .picture.wide figure svg { max-height: 170mm; }
  html { background: #ffffff; }
  body { padding: 0; max-width: none; font-size: 9.5pt; }
  h2 { break-before: auto; }
  .inputs { break-before: page; }
  a { color: inherit; text-decoration: none; }
}
"""

_STATUS_WORDS = {"fail": "over a limit", "close": "within 10 % of a limit", "pass": "within limits", "none": "no check"}


def _e(x) -> str:
    return escape(str(x), quote=True)


def section_data(result) -> dict | None:
    """The report section of a cycle or spread result (see the module docstring), or None."""
    if result is None:
        return None
    if isinstance(result, dict):
        return result
    make = getattr(result, "report_section", None)
    if make is None:
        raise TypeError(f"{type(result).__name__} has no report_section(); see dcnet.report.html")
    return make()


def _table(columns, rows, numeric=(), cls="", caption=None) -> str:
    numeric = set(numeric)
    out = [f'<table class="{cls}">' if cls else "<table>"]
    if caption:
        out.append(f"<caption>{_e(caption)}</caption>")
    out.append(
        "<thead><tr>"
        + "".join(
            f'<th class="num">{_e(c)}</th>' if k in numeric else f"<th>{_e(c)}</th>" for k, c in enumerate(columns)
        )
        + "</tr></thead>"
    )
    out.append("<tbody>")
    for r in rows:
        cells = []
        for k, c in enumerate(r):
            html_cell = c.html if isinstance(c, _Raw) else _e(c)
            cells.append(f'<td class="num">{html_cell}</td>' if k in numeric else f"<td>{html_cell}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


class _Raw:
    """Cell content that is already HTML."""

    def __init__(self, html: str):
        self.html = html


def _verdict_badge(c: dict) -> _Raw:
    if c.get("sense") == "info":
        return _Raw('<span class="verdict v-info">info</span>')
    if not c["ok"]:
        return _Raw('<span class="verdict v-fail">FAIL</span>')
    from .picture import CLOSE

    if c.get("margin") is not None and c["margin"] >= CLOSE:
        return _Raw('<span class="verdict v-close">close</span>')
    return _Raw('<span class="verdict v-pass">pass</span>')


def _value(v, unit) -> str:
    if v is None:
        return "unlimited" if unit else "-"
    if isinstance(v, float) and not math.isfinite(v):
        return "unlimited"
    return si(v, unit)


def _limit(c: dict) -> str:
    return limit_text(c, ("≤ ", "≥ "))


def power_ledger(sol) -> list[tuple[str, float, str]]:
    """Where the power goes in this operating point: (item, watts, direction) rows.

    Cells are split into their EMF part (drawn from or put into storage) and the heat in their
    internal resistance; every other kind is summed by kind. Positive watts are taken by the
    item, negative supplied. The rows sum to the solve's power balance (zero by Tellegen)."""
    sums: dict[str, float] = {}
    order = []

    def add(key, w):
        if key not in sums:
            sums[key] = 0.0
            order.append(key)
        sums[key] += w

    for el in sol.netlist.elements:
        p = sol.power(el.name)
        if el.kind == "cell":
            ex = sol.extras(el.name)
            emf_p = ex.get("emf_power_W", p)
            add("cells: drawn from storage" if emf_p < 0 else "cells: put into storage", emf_p)
            add("cells: heat in internal resistance", ex.get("loss_W", 0.0))
        elif el.kind in ("source", "supply"):
            add("sources and chargers (at their terminals)" if p <= 0 else "sources taking power", p)
        elif el.kind == "load":
            add("loads", p)
        else:
            add(
                {
                    "cable": "cables: heat",
                    "fuse": "fuses: heat",
                    "link": "links and straps: heat",
                    "switch": "switches: heat",
                    "resistor": "resistors: heat",
                    "diode": "diodes: heat",
                }.get(el.kind, f"{el.kind}: heat"),
                p,
            )
    return [(k, sums[k], "supplies" if sums[k] < 0 else "takes") for k in order if abs(sums[k]) > 0 or k == "loads"]


def _summary(sol, file: str | None) -> str:
    net = sol.netlist
    checks = sol.checks
    failed = [c for c in checks if not c["ok"]]
    counts: dict[str, int] = {}
    for el in net.elements:
        counts[el.kind] = counts.get(el.kind, 0) + 1
    kinds = ", ".join(f"{n} {k}{'s' if n != 1 else ''}" for k, n in counts.items())
    status_colour = "var(--fail)" if failed else "var(--pass)"
    status_text = f"{len(failed)} of {len(checks)} checks FAILED" if failed else f"all {len(checks)} checks passed"
    bal = sol.balance
    facts = [
        ("circuit file", _e(file or (net.files[0] if net.files else "-"))),
        ("verdict", f'<span class="status" style="background:{status_colour}">{_e(status_text)}</span>'),
        ("network", _e(f"{len(net.node_index)} nodes; {len(net.elements)} elements ({kinds})")),
        ("reference node", _e(f"{net.ground} ({net.ground_rule})" if net.ground_rule else str(net.ground))),
        (
            "self-check",
            _e(
                f"largest Kirchhoff current residual {bal['kcl_max_residual_A']:.2g} A; power sum over all elements {bal['power_sum_W']:.2g} W ({'ok' if bal.get('ok', True) else 'larger than usual'})"
            ),
        ),
    ]
    if net.banks:
        facts.append(
            (
                "banks",
                _e(
                    "; ".join(
                        f"{b}: {i['series']}s{i['parallel']}p between {i['pos']} and {i['neg']}, tap {i['tap']}"
                        for b, i in net.banks.items()
                    )
                ),
            )
        )
    if getattr(sol, "newton_history", None):
        facts.append(("nonlinear solve", _e(f"Newton, {len(sol.newton_history)} iterations")))
    out = ['<dl class="facts">'] + [f"<dt>{k}</dt><dd>{v}</dd>" for k, v in facts] + ["</dl>"]
    if failed:
        out.append(
            "<p><b>Failed checks:</b> "
            + _e(
                "; ".join(
                    f"{c['rule']} of {c['subject']}: {_value(c['value'], c['unit'])} against {_limit(c)}"
                    for c in failed
                )
            )
            + ".</p>"
        )
    if sol.warnings:
        out.append(
            '<h3>Warnings</h3><ul class="warnings">' + "".join(f"<li>{_e(w)}</li>" for w in sol.warnings) + "</ul>"
        )
    return "\n".join(out)


#: the printable area of an A4 page with this page's margins, in CSS pixels (96 per inch):
#: upright 186 x 245 mm, on its side 273 x 175 mm
A4_PORTRAIT_PX = (703.0, 926.0)
A4_LANDSCAPE_PX = (1032.0, 661.0)
#: the picture's label size (px) and the smallest it may print at (about 6 pt)
LABEL_PX, MIN_LABEL_PX = 10.5, 8.0


def picture_fit(width: float, height: float) -> tuple[str, float]:
    """The page a picture of this size prints on, 'portrait' or 'landscape' (a page of its own,
    on its side, when upright would print its labels smaller than MIN_LABEL_PX and on its
    side does better), and the size its labels print at (px)."""

    def scale(box):
        return min(box[0] / width, box[1] / height, 1.0)

    up, side = scale(A4_PORTRAIT_PX), scale(A4_LANDSCAPE_PX)
    if up * LABEL_PX >= MIN_LABEL_PX or up >= side:
        return "portrait", up * LABEL_PX
    return "landscape", side * LABEL_PX


def _picture(sol) -> tuple[str, bool]:
    """The picture's figure, and whether it prints on a page of its own on its side."""
    from .picture import STATUS, PictureTooLarge, scene, svg_of_scene

    try:
        sc = scene(sol, title="")
    except PictureTooLarge as exc:
        return f'<p class="note">No picture: {_e(exc)}. The tables below hold every result.</p>', False
    orientation, _ = picture_fit(sc.width, sc.height)
    # on a narrow screen the picture keeps its labels legible and scrolls sideways instead
    least = sc.width * MIN_LABEL_PX / LABEL_PX
    drawing = svg_of_scene(sc, standalone=False, style=f"min-width:{least:.0f}px" if least > A4_PORTRAIT_PX[0] else "")
    legend = " ".join(f'<span class="swatch" style="background:{c}"></span>{_e(w)}' for c, w in STATUS.values())
    return (
        f'<figure class="network">{drawing}<figcaption>Higher on the page is higher potential. Arrows show the way each '
        f"current actually flows; line width grows with the current; colour is the element's worst check: {legend}.</figcaption></figure>",
        orientation == "landscape",
    )


def _checks(sol) -> str:
    checks = sol.checks
    if not checks:
        return '<p class="note">No checks apply to this circuit.</p>'
    rows = [
        [
            _verdict_badge(c),
            c["rule"],
            c["subject"],
            _value(c["value"], c["unit"]),
            _limit(c),
            c["source"],
            c.get("detail") or "",
        ]
        for c in checks
    ]
    return _table(
        ["verdict", "rule", "subject", "value", "limit", "source of the limit", "detail"],
        rows,
        numeric={3, 4},
        cls="checks",
    )


def _faults(sol) -> str:
    rows = [c for c in sol.checks if c["rule"] == "fault current"]
    if not rows:
        return '<p class="note">No fault points (no fuses or banks) in this circuit.</p>'
    body = [
        [
            c["subject"],
            _value(c["value"], "A"),
            _value(c["limit"], "A") if c.get("limit") is not None else "not given",
            _verdict_badge(c),
            c.get("detail") or "",
        ]
        for c in rows
    ]
    intro = (
        "<p>Prospective current of a bolted (zero-ohm) fault at each fuse and at each bank's terminals, every source "
        "contributing (Thevenin's theorem on the solve's own factorisation); the current through the fuse follows by "
        "superposition. A fuse must be able to interrupt it.</p>"
    )
    return intro + _table(
        ["fault point", "through the fuse", "interrupt rating", "verdict", "detail"], body, numeric={1, 2}, cls="faults"
    )


def _ledger(sol) -> str:
    rows = power_ledger(sol)
    supplied = -sum(w for _k, w, _d in rows if w < 0)
    body = []
    for k, w, d in rows:
        share = f"{abs(w) / supplied * 100:.1f} %" if supplied > 0 else "-"
        body.append([k, d, si(abs(w), "W"), share])
    closure = sum(w for _k, w, _d in rows)
    note = f'<p class="note">Supplied and taken power agree to {abs(closure):.2g} W (the power balance of the self-check). Shares are of the power supplied.</p>'
    return _table(["where", "", "power", "share"], body, numeric={2, 3}, cls="ledger") + note


def _nodes(sol) -> str:
    net = sol.netlist
    rows = [[n, si(sol.potential(n), "V")] for n in net.node_index]
    return _table(["node", f"potential (to {net.ground})"], rows, numeric={1}, cls="nodes")


def _elements(sol) -> str:
    from .picture import element_status
    from .text import _notes

    status = element_status(sol)
    rows = []
    for el in sol.netlist.elements:
        r = sol.element_result(el.name)
        i = r["current_A"]
        a, b = r["nodes"]
        flow = "" if abs(i) < 1e-12 else (f"{a} → {b}" if i > 0 else f"{b} → {a}")
        cat = status[el.name][0]
        badge = _Raw(
            f'<span class="verdict v-{cat}" title="{_e(_STATUS_WORDS[cat])}">{_e({"fail": "FAIL", "close": "close", "pass": "pass", "none": "-"}[cat])}</span>'
        )
        rows.append(
            [
                el.name,
                el.kind,
                f"{a}, {b}",
                r["state"],
                si(abs(i), "A"),
                flow,
                si(r["voltage_V"], "V"),
                si(r["power_W"], "W"),
                _notes(r),
                badge,
            ]
        )
    head = '<p class="note">Current and flow: magnitude and the direction the current actually takes. Voltage is the first node minus the second; power is absorbed power (negative: the element delivers).</p>'
    return head + _table(
        ["element", "kind", "nodes", "state", "current", "flow", "voltage", "power", "notes", "checks"],
        rows,
        numeric={4, 6, 7},
        cls="elements",
    )


def _extra(kind: str, data: dict) -> str:
    from .plots import plot_svg

    out = [f'<section class="{_e(kind)}"><h2>{_e(data.get("title") or kind.capitalize())}</h2>']
    if data.get("summary"):
        out.append(
            '<dl class="facts">' + "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in data["summary"]) + "</dl>"
        )
    for note in data.get("notes", []):
        out.append(f"<p>{_e(note)}</p>")
    for t in data.get("tables", []):
        if t.get("caption"):
            out.append(f"<h3>{_e(t['caption'])}</h3>")
        out.append(_table(t["columns"], t["rows"], numeric=t.get("numeric", ()), cls=f"{kind}-table"))
    for p in data.get("plots", []):
        out.append(f'<figure class="plot">{plot_svg(p)}</figure>')
    out.append("</section>")
    return "\n".join(out)


def _inputs(sources: list[tuple[str, str]]) -> str:
    out = ['<section class="inputs"><h2>Inputs</h2>']
    for name, text in sources:
        out.append(f"<h3>{_e(name)}</h3>")
        lines = source_lines(text) or [""]  # numbered as in error messages
        out.append(
            '<table class="source">'
            + "".join(f'<tr><td class="ln">{k}</td><td>{_e(line)}</td></tr>' for k, line in enumerate(lines, 1))
            + "</table>"
        )
    out.append("</section>")
    return "\n".join(out)


def render(
    sol,
    file: str | None = None,
    sources: list[tuple[str, str]] | None = None,
    cycle=None,
    spread=None,
    title: str | None = None,
) -> str:
    """The whole report as one HTML document.

    Parameters
    ----------
    sol : Solution
        A solved circuit (with its checks run).
    file : str, optional
        The circuit file's name as the user gave it.
    sources : list of (name, text), optional
        The input files to list with line numbers; by default the netlist's files are read.
    cycle, spread : optional
        Results of a cycle or spread run (see the module docstring); their sections appear only
        when given.
    title : str, optional
        The report's heading (default: the circuit's title, else the file name).
    """
    net = sol.netlist
    title = title or net.title or (file or "dcnet report")
    figure, wide = _picture(sol)
    if sources is None:
        sources = []
        for f in net.files:
            try:
                with open(f, encoding="utf-8") as fh:
                    sources.append((f, fh.read()))
            except (OSError, UnicodeDecodeError):
                continue
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f'<meta name="generator" content="dcnet {_e(__version__)}">',
        f"<title>{_e(title)} — dcnet report</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
        "<header>",
        f"<h1>{_e(title)}</h1>",
        f'<p class="sub">DC network report by dcnet {_e(__version__)}: the circuit solved exactly, checked against its limits, and drawn.</p>',
        "</header>",
        '<section class="summary"><h2>Summary</h2>',
        _summary(sol, file),
        f'<div class="caution"><b>Safety.</b> {_e(CAUTION)}</div>',
        "</section>",
        f'<section class="picture{" wide" if wide else ""}"><h2>The network</h2>',
        figure,
        "</section>",
        '<section class="checks"><h2>Checks</h2>',
        '<p class="note">Worst first. Each limit names its source: a standard (marked secondary where a reproduction was read), a data table, a limit statement in the file, or common practice.</p>',
        _checks(sol),
        "</section>",
        '<section class="faults"><h2>Fault currents</h2>',
        _faults(sol),
        "</section>",
        '<section class="ledger"><h2>Power ledger</h2>',
        _ledger(sol),
        "</section>",
    ]
    for kind, result in (("cycle", cycle), ("spread", spread)):
        data = section_data(result)
        if data is not None:
            parts.append(_extra(kind, data))
    parts += [
        '<section class="elements"><h2>Elements</h2>',
        _elements(sol),
        "</section>",
        '<section class="nodes"><h2>Nodes</h2>',
        _nodes(sol),
        "</section>",
    ]
    if sources:
        parts.append(_inputs(sources))
    parts += [
        f"<footer>Made by dcnet {_e(__version__)} from {_e(file or 'the circuit')}. Figures from a model: read the safety note at the top; "
        "local electrical codes and licensed practitioners have the last word.</footer>",
        "</body>",
        "</html>",
    ]
    return "\n".join(parts) + "\n"
