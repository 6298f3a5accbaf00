"""``dcnet layouts``: a bank solved with its main leads at the same end, opposite ends and the centre."""

from __future__ import annotations

import json

from ..errors import DcnetError
from .common import EXIT_BAD_INPUT, EXIT_OK, Output, add_input_options, options, say


def add_parser(sub) -> None:
    lay = sub.add_parser("layouts", help="solve a bank with its main leads tapped at the same end, opposite ends and the centre, side by side")
    lay.add_argument("file", metavar="FILE")
    lay.add_argument("--bank", metavar="NAME", help="which bank (default: every bank in the file)")
    lay.add_argument("--format", choices=("table", "json"), default="table")
    add_input_options(lay)
    lay.set_defaults(run=run)


def run(args) -> int:
    from ..analysis.layouts import compare_taps
    from ..report import text as rt

    opts = options(args)
    path = args.file
    try:
        tables = compare_taps(path, opts, only=args.bank)
    except DcnetError as err:
        say(err.render())
        return EXIT_BAD_INPUT
    out = Output()  # printed with control characters shown escaped, as every command's output
    if args.format == "json":
        out.write(json.dumps(tables, indent=2) + "\n")
        out.finish(args, [path])
        return EXIT_OK
    for t in tables:
        out.write(f"bank {t['bank']}: {t['series']}s{t['parallel']}p, string currents by tap position (A, discharge positive)\n")
        header = ["string"] + [lay["tap"] for lay in t["layouts"]]
        rows = [header]
        for j in range(t["parallel"]):
            rows.append([f"s{j + 1}"] + [f"{lay['string_currents_A'][j]:.4g}" for lay in t["layouts"]])
        rows.append(["imbalance"] + [("-" if lay["imbalance_pct"] is None else f"{lay['imbalance_pct']:.2f} %") for lay in t["layouts"]])
        rows.append(["bank voltage"] + [f"{lay['bank_voltage_V']:.4g} V" for lay in t["layouts"]])
        out.write("\n".join(rt.columns(rows, right=set(range(1, len(header))))) + "\n\n")
    out.write(rt.wrapped_caution() + "\n")
    out.finish(args, [path])
    return EXIT_OK


