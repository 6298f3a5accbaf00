"""``dcnet solve``: potentials, currents and powers of circuit files (and their checks)."""

from __future__ import annotations

import json
from pathlib import Path

from .common import (
    EXIT_BAD_INPUT,
    EXIT_OK,
    Output,
    add_input_options,
    add_output_options,
    check_outputs,
    options,
    public,
    say,
    solve_one,
    status,
)


def add_parser(sub) -> None:
    s = sub.add_parser("solve", help="solve circuit files and print potentials, currents and powers")
    s.add_argument("files", nargs="+", metavar="FILE", help="circuit files (.dcn), folders or patterns; - reads standard input")
    s.add_argument(
        "--format", choices=("table", "json", "csv", "markdown", "jsonl"), default="table",
        help="output format (default: table); jsonl: one JSON line per file (several files)",
    )
    s.add_argument(
        "-o", "--output", metavar="OUT",
        help="write the output to this file (never over an input or a file an input includes; written to a temporary name, then "
        "renamed; a terminal, /dev/null or a named pipe is written straight to)",
    )
    s.add_argument("-v", "--verbose", action="store_true", help="also print the nonlinear solver's iterations (to standard error)")
    s.add_argument(
        "--show",
        nargs="+",
        metavar="QUANTITY",
        help="print only these: ELEMENT.current, ELEMENT.voltage, ELEMENT.power, NODE.potential, "
        "ELEMENT.<extra> (e.g. P1.drop_pct), NODE,NODE for the voltage between two nodes, "
        "or BANK.imbalance_pct and BANK.circulating_A",
    )
    add_input_options(s)
    add_output_options(s)
    from ..parallel import add_options

    add_options(s)  # several files: --jobs, --cluster
    s.set_defaults(run=run)


def run(args) -> int:
    from ..files import expand_inputs
    from ..report import text as rt

    opts = options(args)
    files = expand_inputs(args.files)
    check_outputs(args, files)
    out = Output()
    if len(files) == 1 and not Path(args.files[0]).is_dir() and args.format != "jsonl":
        sol, err = solve_one(files[0], opts)
        if err is not None:
            say(err.render())
            return EXIT_BAD_INPUT
        if args.show:
            code = _show(sol, args.show, args.format, files[0], out)
        else:
            result = sol.to_dict()
            if args.format == "json":
                out.write(json.dumps({"file": files[0], **result}, indent=2) + "\n")
            elif args.format == "csv":
                out.write(rt.csv_text(result))
            elif args.format == "markdown":
                out.write(rt.markdown(result, files[0]) + "\n")
            else:
                out.write(rt.table(result, files[0]) + "\n")
            code = status(sol)
        for w in sol.warnings:
            say(f"dcnet: warning: {files[0]}: {w}")
        if args.verbose:
            _print_history(sol, files[0])
        out.finish(args, sol.netlist.files)
        return code
    code, read = _solve_many(files, opts, args, out)
    out.finish(args, [*files, *read])
    return code


def _print_history(sol, file: str) -> None:
    history = getattr(sol, "newton_history", None)
    if not history:
        say(f"dcnet: {file}: linear circuit, solved directly (no iterations)")
        return
    say(f"dcnet: {file}: nonlinear solve, {len(history)} iterations")
    for h in history:
        say(
            f"  {h['phase']:<16} scale {h.get('scale', 1.0):4.2f}  #{h['iteration']:<3} step {h.get('step_V', float('nan')):10.3e} V  "
            f"residual {h['residual_A']:10.3e} A  damping {h.get('alpha', 1.0):6.4f}  modes changed {h['modes_changed']}"
        )


def _show(sol, specs, fmt, file, out) -> int:
    from ..analysis.solution import QuantityError
    from ..report import text as rt

    values = []
    for spec in specs:
        try:
            values.append(sol.quantity(spec))
        except QuantityError as exc:
            say(f"dcnet: {file}: {exc}")
            return EXIT_BAD_INPUT
    if fmt == "json":
        out.write(json.dumps({"file": file, "values": {label: value for label, value, _ in values}}, indent=2) + "\n")
    elif fmt == "csv":
        out.write("quantity,value,unit\n")
        for label, value, unit in values:
            out.write(f"{label},{value!r},{unit}\n")
    else:
        out.write("\n".join(rt.show_lines(values)) + "\n")
    return status(sol)


def _solve_many(files, opts, args, out) -> int:
    """Several files: solved in parallel (local worker processes or a Dask cluster), one record each.
    Returns the exit code and every file the inputs read (which the output must not overwrite)."""
    from ..folders import run_files
    from ..report import text as rt

    records = run_files(
        files, opts, show=args.show or (), result=args.format == "json", jobs=args.jobs, cluster=args.cluster,
        cluster_timeout=args.cluster_timeout,
    )
    counts = {"ok": 0, "check failed": 0, "refused": 0}
    worst = EXIT_OK
    for rec in records:
        counts[rec["status"]] += 1
        if rec["status"] == "refused":
            worst = EXIT_BAD_INPUT
            say(rec["message"])
        else:
            worst = max(worst, EXIT_OK if rec["status"] == "ok" else 1)
            for w in rec["warnings"]:
                say(f"dcnet: warning: {rec['file']}: {w}")
    if args.format == "jsonl":
        for rec in records:
            out.write(json.dumps(public(rec)) + "\n")
    summary = f"{len(files)} files: {counts['ok']} ok, {counts['check failed']} failed a check, {counts['refused']} refused"
    if args.format == "jsonl":
        pass
    elif args.format == "json":
        out.write(json.dumps({"files": [public(r) for r in records], "summary": counts}, indent=2) + "\n")
    elif args.format == "csv":
        import csv
        import io

        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        keys = sorted({k for r in records for k in r.get("values", {})})
        w.writerow(["file", "status", "elements", "nodes", "kcl_max_residual_A", *keys, "error"])
        for r in records:
            vals = r.get("values", {})
            w.writerow([r["file"], r["status"], r.get("elements", ""), r.get("nodes", ""), r.get("kcl_max_residual_A", ""), *[vals.get(k, "") for k in keys], r.get("error", "")])
        out.write(buf.getvalue())
    else:
        rows = [["file", "status", "elements", "nodes", "detail"]]
        for r in records:
            detail = r.get("error", "")
            if "values" in r:
                detail = "; ".join(f"{k} = {v:.6g}" for k, v in r["values"].items())
            rows.append([r["file"], r["status"], str(r.get("elements", "")), str(r.get("nodes", "")), detail])
        lines = rt.columns(rows, right={2, 3}, indent="")
        if args.format == "markdown":
            out.write("| file | status | elements | nodes | detail |\n|---|---|---:|---:|---|\n")
            for r in rows[1:]:
                out.write("| " + " | ".join(r) + " |\n")
        else:
            out.write("\n".join(lines) + "\n")
        out.write(summary + "\n")
        if args.format == "table":
            out.write("\n" + rt.wrapped_caution() + "\n")
    if args.format in ("json", "csv", "jsonl") or args.output not in (None, "-"):
        say(summary)
    return worst, [f for r in records for f in r.get("read", ())]


