"""The ``dcnet`` command line: a thin face over the Python API.

Exit codes: 0 done and every check passed; 1 done but a check failed; 2 bad
input or an unsolvable circuit (with ``file:line:col`` and a hint, never a
traceback).

Only light modules are imported here; commands that need heavy libraries
(sympy, plotting) import them inside their own functions.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from . import __version__
from .errors import DcnetError

__all__ = ["main"]

EXIT_OK, EXIT_CHECK_FAILED, EXIT_BAD_INPUT = 0, 1, 2


def _options(args):
    from .language import Options

    return Options(
        max_file_bytes=args.max_file_bytes,
        max_elements=args.max_elements,
        max_include_depth=args.max_include_depth,
        max_expression_depth=args.max_expression_depth,
        max_block_depth=args.max_block_depth,
        allow_outside=args.allow_outside_includes,
    )


def _add_input_options(p: argparse.ArgumentParser) -> None:
    from .language import Options

    d = Options()
    g = p.add_argument_group("limits on input (raise them only for files you trust)")
    g.add_argument("--max-file-bytes", type=int, default=d.max_file_bytes, metavar="N", help=f"largest circuit file read (default {d.max_file_bytes:,})")
    g.add_argument("--max-elements", type=int, default=d.max_elements, metavar="N", help=f"most elements in one circuit (default {d.max_elements:,})")
    g.add_argument("--max-include-depth", type=int, default=d.max_include_depth, metavar="N", help=f"deepest nesting of includes (default {d.max_include_depth})")
    g.add_argument("--max-expression-depth", type=int, default=d.max_expression_depth, metavar="N", help=f"deepest nesting of a value expression (default {d.max_expression_depth})")
    g.add_argument("--max-block-depth", type=int, default=d.max_block_depth, metavar="N", help=f"deepest nesting of block instances (default {d.max_block_depth})")
    g.add_argument("--allow-outside-includes", action="store_true", help="follow includes that leave the circuit file's folder")


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="dcnet",
        description="Solve DC battery networks exactly from dcnet circuit files (.dcn).",
        epilog="Exit codes: 0 ok, 1 a check failed, 2 bad input or unsolvable circuit.",
    )
    p.add_argument("--version", action="version", version=f"dcnet {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    s = sub.add_parser("solve", help="solve circuit files and print potentials, currents and powers")
    s.add_argument("files", nargs="+", metavar="FILE", help="circuit files (.dcn); - reads standard input")
    s.add_argument("--format", choices=("table", "json", "csv", "markdown"), default="table", help="output format (default: table)")
    s.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input; written to a temporary name, then renamed)")
    s.add_argument("-v", "--verbose", action="store_true", help="also print the nonlinear solver's iterations (to standard error)")
    s.add_argument(
        "--show",
        nargs="+",
        metavar="QUANTITY",
        help="print only these: ELEMENT.current, ELEMENT.voltage, ELEMENT.power, NODE.potential, "
        "ELEMENT.<extra> (e.g. P1.drop_pct), or NODE,NODE for the voltage between two nodes",
    )
    _add_input_options(s)

    c = sub.add_parser("check", help="solve and check circuit files: a verdict table, worst first (exit 1 if any check fails)")
    c.add_argument("files", nargs="+", metavar="FILE", help="circuit files (.dcn), folders or patterns; - reads standard input")
    c.add_argument("--format", choices=("table", "json", "csv", "markdown"), default="table", help="output format (default: table)")
    c.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input)")
    c.add_argument("--all", action="store_true", help="list passing checks too (default: all of them for one file)")
    _add_input_options(c)

    lay = sub.add_parser("layouts", help="solve a bank with its main leads tapped at the same end, opposite ends and the centre, side by side")
    lay.add_argument("file", metavar="FILE")
    lay.add_argument("--bank", metavar="NAME", help="which bank (default: every bank in the file)")
    lay.add_argument("--format", choices=("table", "json"), default="table")
    _add_input_options(lay)
    return p


class _Output:
    """Collects what a command prints; sends it to stdout or, atomically, to ``--output``."""

    def __init__(self):
        import io

        self.buf = io.StringIO()

    def write(self, text: str) -> None:
        self.buf.write(text)

    def finish(self, args, inputs) -> None:
        text = self.buf.getvalue()
        target = getattr(args, "output", None)
        if target:
            from .files import atomic_write_text

            atomic_write_text(target, text, protect=list(inputs))
        else:
            sys.stdout.write(text)
            sys.stdout.flush()


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        if args.command == "solve":
            return _cmd_solve(args)
        if args.command == "check":
            return _cmd_check(args)
        if args.command == "layouts":
            return _cmd_layouts(args)
    except DcnetError as err:
        print(f"dcnet: {err.render()}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("dcnet: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return EXIT_OK
    return EXIT_BAD_INPUT  # pragma: no cover


# ------------------------------------------------------------------- solve
def _solve_one(path: str, options):
    """Load and solve one file; returns (solution, error)."""
    from .language import load, parse

    try:
        if path == "-":
            net = parse(sys.stdin.read(), "<stdin>", options)
        else:
            net = load(path, options)
        return net.solve(), None
    except DcnetError as err:
        if err.span is None:
            from .errors import Span

            err.span = Span("<stdin>" if path == "-" else path)
        return None, err
    except RecursionError:
        from .errors import LimitError, Span

        return None, LimitError("the file nests too deeply to read", span=Span(path), hint="simplify deeply nested expressions")


def _status(sol) -> int:
    return EXIT_CHECK_FAILED if sol.failed else EXIT_OK


# ------------------------------------------------------------------- check
def _cmd_check(args) -> int:
    from .files import expand_inputs
    from .report import text as rt

    options = _options(args)
    files = expand_inputs(args.files)
    out = _Output()
    worst = EXIT_OK
    records = []
    counts = {"passed": 0, "failed": 0, "refused": 0}
    for path in files:
        sol, err = _solve_one(path, options)
        if err is not None:
            print(err.render(), file=sys.stderr)
            worst = EXIT_BAD_INPUT
            counts["refused"] += 1
            records.append({"file": path, "status": "refused", "error": str(err), "checks": []})
            continue
        status = _status(sol)
        worst = max(worst, status)
        counts["failed" if status else "passed"] += 1
        records.append({"file": path, "status": "failed" if status else "passed", "checks": sol.checks, "title": sol.netlist.title})
        for w in sol.warnings:
            print(f"dcnet: warning: {path}: {w}", file=sys.stderr)
    if args.format == "json":
        out.write(json.dumps(records[0] if len(records) == 1 else {"files": records, "summary": counts}, indent=2) + "\n")
    elif args.format == "csv":
        import csv
        import io

        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["file", "verdict", "rule", "subject", "value", "limit", "unit", "source", "detail"])
        for r in records:
            for c in r["checks"]:
                word = "info" if c["sense"] == "info" else ("pass" if c["ok"] else "fail")
                w.writerow([r["file"], word, c["rule"], c["subject"], c["value"], c["limit"], c["unit"], c["source"], c["detail"]])
        out.write(buf.getvalue())
    else:
        for r in records:
            if r["status"] == "refused":
                continue
            if args.format == "markdown":
                out.write(f"## {r.get('title') or r['file']}\n\n`{r['file']}`: checks {r['status']}\n\n")
                out.write(rt.verdict_markdown(r["checks"]) + "\n\n")
            else:
                out.write(f"{r['file']}" + (f"  {r['title']}" if r.get("title") else "") + f": checks {r['status'].upper()}\n")
                brief = len(files) > 1 and not args.all
                out.write("\n".join(rt.verdict_lines(r["checks"], brief=brief)) + "\n\n")
        if len(files) > 1:
            out.write(f"{len(files)} files: {counts['passed']} passed every check, {counts['failed']} failed a check, {counts['refused']} refused\n")
        out.write(("> " if args.format == "markdown" else "") + rt.wrapped_caution() + "\n")
    out.finish(args, files)
    return worst


# ----------------------------------------------------------------- layouts
def _cmd_layouts(args) -> int:
    from .analysis.layouts import compare_taps
    from .report import text as rt

    options = _options(args)
    path = args.file
    try:
        tables = compare_taps(path, options, only=args.bank)
    except DcnetError as err:
        print(err.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    if args.format == "json":
        print(json.dumps(tables, indent=2))
        return EXIT_OK
    for t in tables:
        print(f"bank {t['bank']}: {t['series']}s{t['parallel']}p, string currents by tap position (A, discharge positive)")
        header = ["string"] + [lay["tap"] for lay in t["layouts"]]
        rows = [header]
        for j in range(t["parallel"]):
            rows.append([f"s{j + 1}"] + [f"{lay['string_currents_A'][j]:.4g}" for lay in t["layouts"]])
        rows.append(["imbalance"] + [("-" if lay["imbalance_pct"] is None else f"{lay['imbalance_pct']:.2f} %") for lay in t["layouts"]])
        rows.append(["bank voltage"] + [f"{lay['bank_voltage_V']:.4g} V" for lay in t["layouts"]])
        print("\n".join(rt.columns(rows, right=set(range(1, len(header))))))
        print()
    print(rt.wrapped_caution())
    return EXIT_OK


def _cmd_solve(args) -> int:
    from .files import expand_inputs
    from .report import text as rt

    options = _options(args)
    files = expand_inputs(args.files)
    out = _Output()
    if len(files) == 1 and not Path(args.files[0]).is_dir():
        sol, err = _solve_one(files[0], options)
        if err is not None:
            print(err.render(), file=sys.stderr)
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
            code = _status(sol)
        for w in sol.warnings:
            print(f"dcnet: warning: {files[0]}: {w}", file=sys.stderr)
        if args.verbose:
            _print_history(sol, files[0])
        out.finish(args, sol.netlist.files)
        return code
    code = _solve_many(files, options, args, out)
    out.finish(args, files)
    return code


def _print_history(sol, file: str) -> None:
    history = getattr(sol, "newton_history", None)
    if not history:
        print(f"dcnet: {file}: linear circuit, solved directly (no iterations)", file=sys.stderr)
        return
    print(f"dcnet: {file}: nonlinear solve, {len(history)} iterations", file=sys.stderr)
    for h in history:
        print(
            f"  {h['phase']:<16} scale {h.get('scale', 1.0):4.2f}  #{h['iteration']:<3} step {h.get('step_V', float('nan')):10.3e} V  "
            f"residual {h['residual_A']:10.3e} A  damping {h.get('alpha', 1.0):6.4f}  modes changed {h['modes_changed']}",
            file=sys.stderr,
        )


def _show(sol, specs, fmt, file, out) -> int:
    from .analysis.solution import QuantityError
    from .report import text as rt

    values = []
    for spec in specs:
        try:
            values.append(sol.quantity(spec))
        except QuantityError as exc:
            print(f"dcnet: {file}: {exc}", file=sys.stderr)
            return EXIT_BAD_INPUT
    if fmt == "json":
        out.write(json.dumps({"file": file, "values": {label: value for label, value, _ in values}}, indent=2) + "\n")
    elif fmt == "csv":
        out.write("quantity,value,unit\n")
        for label, value, unit in values:
            out.write(f"{label},{value!r},{unit}\n")
    else:
        out.write("\n".join(rt.show_lines(values)) + "\n")
    return _status(sol)


def _solve_many(files, options, args, out) -> int:
    from .report import text as rt

    counts = {"ok": 0, "check failed": 0, "refused": 0}
    records = []
    worst = EXIT_OK
    for path in files:
        sol, err = _solve_one(path, options)
        if err is not None:
            counts["refused"] += 1
            worst = EXIT_BAD_INPUT
            print(err.render(), file=sys.stderr)
            records.append({"file": path, "status": "refused", "error": str(err)})
            continue
        status = _status(sol)
        worst = max(worst, status)
        word = "ok" if status == EXIT_OK else "check failed"
        counts[word] += 1
        rec = {"file": path, "status": word, "elements": len(sol.netlist.elements), "nodes": len(sol.netlist.node_index)}
        rec["kcl_max_residual_A"] = sol.balance["kcl_max_residual_A"]
        if args.show:
            from .analysis.solution import QuantityError

            try:
                rec["values"] = {label: value for label, value, _ in (sol.quantity(q) for q in args.show)}
            except QuantityError as exc:
                rec["values"] = {}
                rec["error"] = str(exc)
        if args.format == "json":
            rec["result"] = sol.to_dict()
        records.append(rec)
    summary = f"{len(files)} files: {counts['ok']} ok, {counts['check failed']} failed a check, {counts['refused']} refused"
    if args.format == "json":
        out.write(json.dumps({"files": records, "summary": counts}, indent=2) + "\n")
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
    if args.format in ("json", "csv") or args.output:
        print(summary, file=sys.stderr)
    return worst


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
