"""Small self-contained SVG plots for the HTML report: lines over a shared x axis, histograms.

Written here rather than with a plotting library so the report stays one small file that needs
nothing to view and nothing heavy to make. A plot is described by a plain dict (see
:func:`plot_svg`), which is also what cycle and spread results hand to the report.
"""

from __future__ import annotations

import math
from html import escape as _html_escape

from ..display import shown


def escape(text: str, quote: bool = True) -> str:
    """HTML/XML text: markup escaped, control characters and bidi controls shown as visible escapes
    (they are not allowed in XML and would make the page read differently from what it holds)."""
    return _html_escape(shown(text), quote)


__all__ = ["plot_svg", "nice_ticks", "PALETTE"]

#: line colours, chosen to stay apart in print and for common colour-vision deficiencies
PALETTE = ["#1f6f8b", "#d1495b", "#e09f1f", "#3d8b37", "#7a4fa3", "#8c5a3c", "#2a9d8f", "#5c6b7a"]

_FONT = "DejaVu Sans, Helvetica, Arial, sans-serif"


def nice_ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """Round tick values covering [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return [0.0]
    if hi == lo:
        hi, lo = hi + (abs(hi) or 1.0) * 0.5, lo - (abs(lo) or 1.0) * 0.5
    raw = (hi - lo) / max(count, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    start = math.floor(lo / step) * step
    ticks = []
    t = start
    while t <= hi + step * 0.5 and len(ticks) < 50:
        ticks.append(round(t, 12))
        t += step
    return ticks


def _fmt(v: float) -> str:
    if v == 0:
        return "0"
    a = abs(v)
    if a >= 1e5 or a < 1e-3:
        return f"{v:.2g}"
    return f"{v:.6g}"


def plot_svg(plot: dict, width: int = 640, height: int = 260) -> str:
    """An inline SVG of one plot.

    ``plot`` is ``{"title", "x_label", "y_label", "series": [{"name", "x": [...], "y": [...]}]}``
    for lines, or ``{"kind": "histogram", "title", "x_label", "values": [...], "bins": 30}``
    (optionally ``"marks": [{"name", "x"}]`` for limits drawn as vertical lines).
    """
    if plot.get("kind") == "histogram":
        return _histogram(plot, width, height)
    series = [s for s in plot.get("series", []) if len(s.get("x", [])) and len(s.get("y", []))]
    left, right, top, bottom = 62, 16, 30, 44
    legend_rows = (len(series) + 2) // 3 if len(series) > 1 else 0
    height = height + 18 * legend_rows
    pw, ph = width - left - right, height - top - bottom - 18 * legend_rows
    xs = [float(v) for s in series for v in s["x"]]
    ys = [float(v) for s in series for v in s["y"] if v is not None and math.isfinite(float(v))]
    out = [_open(width, height, plot.get("title", ""))]
    if not xs or not ys:
        out.append(
            f'<text x="{width / 2}" y="{height / 2}" text-anchor="middle" font-size="12" fill="#6b7682">no data</text></svg>'
        )
        return "\n".join(out)
    xt, yt = nice_ticks(min(xs), max(xs)), nice_ticks(min(ys), max(ys))
    x0, x1, y0, y1 = min(xt[0], min(xs)), max(xt[-1], max(xs)), min(yt[0], min(ys)), max(yt[-1], max(ys))

    def X(v):
        return left + (v - x0) / ((x1 - x0) or 1.0) * pw

    def Y(v):
        return top + ph - (v - y0) / ((y1 - y0) or 1.0) * ph

    out += _axes(left, top, pw, ph, xt, yt, X, Y, plot.get("x_label", ""), plot.get("y_label", ""), height)
    for k, s in enumerate(series):
        colour = s.get("colour") or PALETTE[k % len(PALETTE)]
        pts, parts = [], []
        for xv, yv in zip(s["x"], s["y"], strict=False):
            if yv is None or not math.isfinite(float(yv)):
                if pts:
                    parts.append(pts)
                pts = []
                continue
            pts.append(f"{X(float(xv)):.1f},{Y(float(yv)):.1f}")
        if pts:
            parts.append(pts)
        for p in parts:
            out.append(
                f'<polyline class="series" data-name="{escape(str(s.get("name", "")))}" points="{" ".join(p)}" fill="none" stroke="{colour}" stroke-width="1.8" stroke-linejoin="round"/>'
            )
    if legend_rows:
        for k, s in enumerate(series):
            colour = s.get("colour") or PALETTE[k % len(PALETTE)]
            lx = left + (k % 3) * (pw / 3)
            ly = height - 10 - 18 * (legend_rows - 1 - k // 3)
            out.append(
                f'<line x1="{lx:.1f}" y1="{ly - 4}" x2="{lx + 18:.1f}" y2="{ly - 4}" stroke="{colour}" stroke-width="3"/>'
            )
            out.append(
                f'<text x="{lx + 23:.1f}" y="{ly}" font-size="11" fill="#22303c">{escape(str(s.get("name", "")))}</text>'
            )
    out.append("</svg>")
    return "\n".join(out)


def _open(width, height, title):
    head = f'<svg xmlns="http://www.w3.org/2000/svg" class="plot" viewBox="0 0 {width} {height}" role="img" font-family="{_FONT}">'
    head += f"<title>{escape(title or 'plot')}</title>"
    head += f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>'
    if title:
        head += f'<text x="10" y="18" font-size="13" font-weight="bold" fill="#22303c">{escape(title)}</text>'
    return head


def _axes(left, top, pw, ph, xt, yt, X, Y, xl, yl, height):
    out = [f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="#fbfcfd" stroke="#c9d1d9" stroke-width="1"/>']
    for t in yt:
        y = Y(t)
        if top - 0.5 <= y <= top + ph + 0.5:
            out.append(
                f'<line x1="{left}" y1="{y:.1f}" x2="{left + pw}" y2="{y:.1f}" stroke="#e3e8ed" stroke-width="1"/>'
            )
            out.append(
                f'<text x="{left - 6}" y="{y + 4:.1f}" font-size="10.5" text-anchor="end" fill="#4a5560">{_fmt(t)}</text>'
            )
    for t in xt:
        x = X(t)
        if left - 0.5 <= x <= left + pw + 0.5:
            out.append(
                f'<line x1="{x:.1f}" y1="{top + ph}" x2="{x:.1f}" y2="{top + ph + 4}" stroke="#8a949e" stroke-width="1"/>'
            )
            out.append(
                f'<text x="{x:.1f}" y="{top + ph + 16}" font-size="10.5" text-anchor="middle" fill="#4a5560">{_fmt(t)}</text>'
            )
    if xl:
        out.append(
            f'<text x="{left + pw / 2:.1f}" y="{top + ph + 32}" font-size="11" text-anchor="middle" fill="#22303c">{escape(xl)}</text>'
        )
    if yl:
        out.append(
            f'<text x="14" y="{top + ph / 2:.1f}" font-size="11" text-anchor="middle" fill="#22303c" transform="rotate(-90 14 {top + ph / 2:.1f})">{escape(yl)}</text>'
        )
    return out


def _histogram(plot, width, height):
    values = [float(v) for v in plot.get("values", []) if v is not None and math.isfinite(float(v))]
    left, right, top, bottom = 62, 16, 30, 44
    pw, ph = width - left - right, height - top - bottom
    out = [_open(width, height, plot.get("title", ""))]
    if not values:
        out.append(
            f'<text x="{width / 2}" y="{height / 2}" text-anchor="middle" font-size="12" fill="#6b7682">no data</text></svg>'
        )
        return "\n".join(out)
    bins = max(1, int(plot.get("bins", 30)))
    lo, hi = min(values), max(values)
    marks = [m for m in plot.get("marks", []) if m.get("x") is not None and math.isfinite(float(m["x"]))]
    for m in marks:
        lo, hi = min(lo, float(m["x"])), max(hi, float(m["x"]))
    if hi == lo:
        hi, lo = hi + (abs(hi) or 1.0) * 0.01, lo - (abs(lo) or 1.0) * 0.01
    counts = [0] * bins
    for v in values:
        counts[min(int((v - lo) / (hi - lo) * bins), bins - 1)] += 1
    xt, yt = nice_ticks(lo, hi), nice_ticks(0, max(counts))
    x0, x1 = min(xt[0], lo), max(xt[-1], hi)
    y1 = max(yt[-1], max(counts))

    def X(v):
        return left + (v - x0) / ((x1 - x0) or 1.0) * pw

    def Y(v):
        return top + ph - v / (y1 or 1.0) * ph

    out += _axes(left, top, pw, ph, xt, yt, X, Y, plot.get("x_label", ""), plot.get("y_label", "samples"), height)
    colour = plot.get("colour", PALETTE[0])
    for k, c in enumerate(counts):
        if not c:
            continue
        xa, xb = X(lo + (hi - lo) * k / bins), X(lo + (hi - lo) * (k + 1) / bins)
        out.append(
            f'<rect class="bar" x="{xa:.1f}" y="{Y(c):.1f}" width="{max(xb - xa - 0.6, 0.6):.1f}" height="{Y(0) - Y(c):.1f}" fill="{colour}"/>'
        )
    for k, m in enumerate(marks):
        x = X(float(m["x"]))
        col = m.get("colour", PALETTE[1])
        out.append(
            f'<line x1="{x:.1f}" y1="{top}" x2="{x:.1f}" y2="{top + ph}" stroke="{col}" stroke-width="1.6" stroke-dasharray="5 3"/>'
        )
        out.append(
            f'<text x="{x + 4:.1f}" y="{top + 12 + 13 * k}" font-size="10.5" fill="{col}">{escape(str(m.get("name", "")))}</text>'
        )
    out.append("</svg>")
    return "\n".join(out)
