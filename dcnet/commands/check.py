"""``dcnet check``: a verdict table per circuit, worst first; exit 1 if any check fails."""

from __future__ import annotations

import json
import sys

from .common import EXIT_BAD_INPUT, EXIT_OK, Output, add_input_options, options, solve_one, status



def add_parser(sub) -> None:
    c = sub.add_parser("check", help="solve and check circuit files: a verdict table, worst first (exit 1 if any check fails)")
    c.add_argument("files", nargs="+", metavar="FILE", help="circuit files (.dcn), folders or patterns; - reads standard input")
    c.add_argument("--format", choices=("table", "json", "csv", "markdown"), default="table", help="output format (default: table)")
    c.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input)")
    c.add_argument("--all", action="store_true", help="list passing checks too (default: all of them for one file)")
    add_input_options(c)
    c.set_defaults(run=run)


def run(args) -> int:
    from ..files import expand_inputs
    from ..report import text as rt

    opts = options(args)
    files = expand_inputs(args.files)
    out = Output()
    worst = EXIT_OK
    records = []
    counts = {"passed": 0, "failed": 0, "refused": 0}
    for path in files:
        sol, err = solve_one(path, opts)
        if err is not None:
            print(err.render(), file=sys.stderr)
            worst = EXIT_BAD_INPUT
            counts["refused"] += 1
            records.append({"file": path, "status": "refused", "error": str(err), "checks": []})
            continue
        code = status(sol)
        worst = max(worst, code)
        counts["failed" if code else "passed"] += 1
        records.append({"file": path, "status": "failed" if code else "passed", "checks": sol.checks, "title": sol.netlist.title})
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
