"""``dcnet report``: one circuit as a self-contained HTML report, or its network picture (SVG, PNG)."""

from __future__ import annotations

from .common import (
    EXIT_BAD_INPUT,
    Output,
    add_input_options,
    add_output_options,
    check_outputs,
    options,
    say,
    status,
    write_file,
)

FORMATS = ("html", "svg", "png")


def add_parser(sub) -> None:
    c = sub.add_parser(
        "report",
        help="solve and check one circuit and write a self-contained HTML report (or its network picture as SVG or PNG)",
        description="Solve and check one circuit file and write a report people can read and print: a summary, the network "
        "picture, the checks with their sources, fault currents, the power ledger, node and element tables, the safety "
        "caution and the circuit file with line numbers. Exit 1 if a check fails, as 'dcnet check'.",
    )
    c.add_argument("file", metavar="FILE", help="circuit file (.dcn); - reads standard input")
    c.add_argument(
        "-o",
        "--output",
        metavar="OUT",
        help="write to this file (never over an input or a file an input includes); the format follows its suffix (.html, .svg, .png)",
    )
    c.add_argument(
        "--format", choices=FORMATS, help="html (the report, default), svg or png (the network picture alone)"
    )
    c.add_argument("--title", metavar="TEXT", help="title for the report or picture (default: the circuit's title)")
    c.add_argument("--cycle", action="store_true", help="also run the file's charge/discharge phases and add the cycle section")
    c.add_argument("--step", default="60s", metavar="TIME", help="longest time step of the cycle (default 60s)")
    add_input_options(c)
    add_output_options(c)
    c.set_defaults(run=run)


def _format(args) -> str:
    if args.format:
        return args.format
    if args.output:
        suffix = args.output.rsplit(".", 1)[-1].lower() if "." in args.output else ""
        if suffix in ("svg", "png"):
            return suffix
    return "html"


def run(args) -> int:
    from ..errors import InputError
    from ..language import load, parse, read_stdin

    fmt = _format(args)
    if fmt == "png" and not args.output:
        raise InputError("PNG output needs a file name", hint="add -o picture.png")
    opts = options(args)
    check_outputs(args, [args.file])
    if args.file == "-":
        text = read_stdin(opts)
        net = parse(text, "<stdin>", opts)
        sources = [("<stdin>", text)]
    else:
        net = load(args.file, opts)
        sources = None
    sol = net.solve()
    for w in sol.warnings:
        say(f"dcnet: warning: {args.file}: {w}")
    inputs = [args.file] + [f for f in net.files if f != args.file]
    if fmt == "html":
        from ..report.html import render

        cycle = None
        if args.cycle:
            from ..analysis.cycle import run as run_cycle
            from .cycle import _seconds

            cycle = run_cycle(net, step=_seconds(args.step), progress=True)
        out = Output()
        out.write(render(sol, file=args.file, sources=sources, title=args.title, cycle=cycle))
        out.finish(args, inputs)
    else:
        from ..report import picture

        try:
            sc = picture.scene(sol, args.title)
        except picture.PictureTooLarge as exc:
            say(f"dcnet: {exc}")
            return EXIT_BAD_INPUT
        if fmt == "svg":
            out = Output()
            out.write(picture.svg_of_scene(sc))
            out.finish(args, inputs)
        else:
            write_file(args, args.output, picture.png_bytes(sc), inputs)
    if args.output and args.output != "-":
        say(f"dcnet: wrote {args.output}" + (" (a check failed: see the report)" if sol.failed else ""))
    return status(sol)
