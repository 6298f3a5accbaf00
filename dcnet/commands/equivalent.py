"""``dcnet equivalent``: the Thevenin and Norton equivalents seen from two nodes."""

from __future__ import annotations

import json

from .common import EXIT_OK, Output, add_input_options, add_output_options, check_outputs
from .formula import add_keep_options, load_netlist, render


def add_parser(sub) -> None:
    e = sub.add_parser(
        "equivalent",
        help="Thevenin and Norton equivalents seen from two nodes (numbers, or formulas with --keep)",
    )
    e.add_argument("file", metavar="FILE", help="a circuit file (.dcn); - reads standard input")
    e.add_argument(
        "--between", nargs=2, required=True, metavar=("NODE", "NODE"), help="the two nodes, the first one positive"
    )
    add_keep_options(e)
    e.add_argument(
        "--format", choices=("text", "latex", "python", "json"), default="text", help="output format (default: text)"
    )
    e.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input or a file an input includes)")
    add_input_options(e)
    add_output_options(e)
    e.set_defaults(run=run)


def run(args) -> int:
    from ..analysis.equivalent import equivalent
    from ..errors import DcnetError, Span

    check_outputs(args, [args.file])
    net = load_netlist(args)
    x, y = args.between
    try:
        eq = equivalent(net, x, y, args.keep, keep_all=args.keep_all, time_budget=args.time_budget)
    except DcnetError as err:
        if err.span is None:
            err.span = Span(args.file)
        raise
    out = Output()
    out.write(_render(eq, args.format, args.file, net.title))
    out.finish(args, net.files or [args.file])
    return EXIT_OK


_MEANING = [
    ("V_th", "open-circuit voltage from {x} to {y}"),
    ("R_th", "resistance between {x} and {y} with every source zeroed"),
    ("I_N", "current a zero-ohm link from {x} to {y} would carry (V_th / R_th)"),
    ("G_N", "conductance beside the Norton source (1 / R_th)"),
]


def _render(eq, fmt: str, file: str, title: str) -> str:
    from ..report.text import columns, si

    x, y = eq.x, eq.y
    if eq.symbolic:
        found = [eq.formulas[k] for k in ("v_th", "r_th", "i_n", "g_n") if k in eq.formulas]
        if fmt == "json":
            data = {"file": file, **eq.to_dict()}
            data["checked"] = "every formula was checked against the numeric figures at the file's values"
            return json.dumps(data, indent=2) + "\n"
        heading = (
            f"Thevenin and Norton equivalents of {file}" + (f" ({title})" if title else "") + f" seen from {x} to {y}"
        )
        text = render(found, fmt, file, title, heading=heading, tool=f"dcnet equivalent (seen from {x} to {y})")
        if fmt == "text":
            text += "".join(f"note: {n}\n" for n in eq.notes)
        return text
    if fmt == "json":
        return json.dumps({"file": file, **eq.to_dict()}, indent=2) + "\n"
    values = [("V_th", eq.v_th, "V"), ("R_th", eq.r_th, "Ohm"), ("I_N", eq.i_n, "A"), ("G_N", eq.g_n, "S")]
    if fmt == "latex":
        lines = [f"% dcnet equivalent: {file}, seen from {x} to {y}", r"\begin{align}"]
        tex = {
            "V_th": r"V_{\mathrm{th}}",
            "R_th": r"R_{\mathrm{th}}",
            "I_N": r"I_{\mathrm{N}}",
            "G_N": r"G_{\mathrm{N}}",
        }
        units = {"V": r"\,\mathrm{V}", "Ohm": r"\,\Omega", "A": r"\,\mathrm{A}", "S": r"\,\mathrm{S}"}
        rows = [rf"{tex[k]} &= {v:.10g}{units[u]}" for k, v, u in values if v == v and abs(v) != float("inf")]
        lines.append(" \\\\\n".join(rows))
        lines.append(r"\end{align}")
        return "\n".join(lines) + "\n"
    if fmt == "python":
        lines = [
            f'"""Thevenin and Norton equivalents of {file} seen from {x} to {y} (SI units), by dcnet equivalent."""',
            "",
        ]
        for k, v, _ in values:
            lines.append(f"{k} = {v!r}" if abs(v) != float("inf") else f"{k} = float('inf')")
        return "\n".join(lines) + "\n"
    lines = [f"Thevenin and Norton equivalents of {file}" + (f" ({title})" if title else "") + f" seen from {x} to {y}"]
    rows = []
    meaning = dict(_MEANING)
    for k, v, u in values:
        shown = "unlimited" if abs(v) == float("inf") else si(v, u, 5)
        rows.append([k, "=", shown, meaning[k].format(x=x, y=y)])
    lines += columns(rows, right={2})
    lines += [f"note: {n}" for n in eq.notes]
    lines.append(
        "R_th comes from the solve's own factorisation (one extra right-hand side); keep symbols with --keep for formulas."
    )
    return "\n".join(lines) + "\n"
