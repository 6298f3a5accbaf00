"""``dcnet formula``: closed-form expressions for result quantities in kept symbols."""

from __future__ import annotations

import json

from .common import EXIT_OK, Output, add_output_options, check_outputs, seconds_number

CHECK_NOTE = "every formula was checked against the numeric solve at the file's values before it was shown"


def add_parser(sub) -> None:
    f = sub.add_parser(
        "formula",
        help="closed-form formulas for currents, voltages, powers and potentials, in let values or element properties kept as symbols",
    )
    f.add_argument("file", metavar="FILE", help="a circuit file (.dcn); - reads standard input")
    f.add_argument(
        "--for",
        dest="quantities",
        nargs="+",
        required=True,
        metavar="QUANTITY",
        help="what to derive: ELEMENT.current, ELEMENT.voltage, ELEMENT.power, NODE.potential (or NODE), NODE,NODE",
    )
    add_keep_options(f)
    f.add_argument(
        "--format", choices=("text", "latex", "python", "json"), default="text", help="output format (default: text)"
    )
    f.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input or a file an input includes)")
    from .common import add_input_options

    add_input_options(f)
    add_output_options(f)
    f.set_defaults(run=run)


def add_keep_options(p) -> None:
    """``--keep``, ``--keep-all`` and ``--time-budget`` (shared with ``dcnet equivalent``)."""
    from ..analysis.symbolic import DEFAULT_TIME_BUDGET

    g = p.add_mutually_exclusive_group()
    g.add_argument(
        "--keep",
        action="append",
        default=[],
        metavar="NAME,...",
        help="let values and element properties (e.g. r_strap,PA.r,A1.emf) kept as symbols; everything else is a number",
    )
    g.add_argument("--keep-all", action="store_true", help="keep every let value the circuit's elements use")
    p.add_argument(
        "--time-budget",
        type=seconds_number(),
        default=DEFAULT_TIME_BUDGET,
        metavar="SECONDS",
        help=f"stop a symbolic solve that takes longer (default {DEFAULT_TIME_BUDGET:g}; 0 = no budget)",
    )


def load_netlist(args):
    """The circuit of ``args.file`` (errors carry the file name)."""
    from ..errors import DcnetError, LimitError, Span
    from ..language import load, parse, read_stdin
    from .common import options

    opts = options(args)
    path = args.file
    try:
        if path == "-":
            return parse(read_stdin(opts), "<stdin>", opts)
        return load(path, opts)
    except DcnetError as err:
        if err.span is None:
            err.span = Span("<stdin>" if path == "-" else path)
        raise
    except RecursionError:
        raise LimitError(
            "the file nests too deeply to read", span=Span(path), hint="simplify deeply nested expressions"
        ) from None


def run(args) -> int:
    from ..analysis.symbolic import formulas
    from ..errors import Span

    check_outputs(args, [args.file])
    net = load_netlist(args)
    try:
        found = formulas(net, args.quantities, args.keep, keep_all=args.keep_all, time_budget=args.time_budget)
    except Exception as err:
        from ..errors import DcnetError

        if isinstance(err, DcnetError) and err.span is None:
            err.span = Span(args.file)
        raise
    out = Output()
    out.write(render(found, args.format, args.file, net.title))
    out.finish(args, net.files or [args.file])
    return EXIT_OK


def _kept_line(kept) -> str:
    from ..report.text import si

    return ", ".join(f"{k.name} = {si(k.nominal, k.unit) if k.unit else f'{k.nominal:.6g}'}" for k in kept)


def render(found, fmt: str, file: str, title: str = "", heading: str | None = None, tool: str = "dcnet formula") -> str:
    """Formulas as text, LaTeX, Python or JSON (shared with ``dcnet equivalent``)."""
    from ..report.text import si

    kept = found[0].kept if found else ()
    worst = max((f.deviation for f in found), default=0.0)
    names = ", ".join(k.name for k in kept)
    if fmt == "json":
        return (
            json.dumps(
                {
                    "file": file,
                    "kept": {k.name: k.nominal for k in kept},
                    "formulas": [f.to_dict() for f in found],
                    "checked": CHECK_NOTE,
                },
                indent=2,
            )
            + "\n"
        )
    if fmt == "latex":
        lines = [
            f"% {tool}: {file}" + (f" ({title})" if title else ""),
            f"% kept symbols: {names}; every other value is the number in the file",
        ]
        lines.append(f"% {CHECK_NOTE} (largest difference {worst:.1e} of the quantity's scale)")
        lines.append(r"\begin{align}")
        rows = [rf"{f.latex_label()} &= {f.latex()}" for f in found]
        lines.append(" \\\\\n".join(rows))
        lines.append(r"\end{align}")
        return "\n".join(lines) + "\n"
    if fmt == "python":
        doc = [
            f'"""Formulas from {file}' + (f" ({title})" if title else "") + f" by {tool}.",
            "",
            "Arguments are SI values (ohm, volt, ampere) and default to their values in the file;",
            "every other value is the number in the file. Each formula was checked against the",
            "numeric solve at the file's values before it was written. Arrays broadcast.",
            '"""',
            "",
        ]
        body = []
        for f in found:
            body.append("")
            body.append(f.python())
        text = "\n".join(doc) + "\n".join(body)
        if "math." in text:
            text = text.replace('"""\n\n', '"""\n\nimport math\n\n', 1)
        return text
    lines = [heading or (f"formulas for {file}" + (f" ({title})" if title else ""))]
    lines.append(f"kept as symbols: {_kept_line(kept)}; every other value is the number in the file")
    lines.append("")
    for f in found:
        lines.append(f"{f.label} ({f.unit})")
        lines.append(f"  = {f.text()}")
        lines.append(f"  at the file's values: {si(f.value, f.unit, 6)}; numeric solve: {si(f.solved, f.unit, 6)}")
        lines.append("")
    lines.append(f"{CHECK_NOTE} (largest difference {worst:.1e} of the quantity's scale).")
    for note in dict.fromkeys(n for f in found for n in f.notes):
        lines.append(f"note: {note}")
    lines.append("Currents and powers follow the passive sign convention (a discharging cell's current is negative).")
    return "\n".join(lines) + "\n"
