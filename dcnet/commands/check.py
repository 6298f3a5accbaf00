"""``dcnet check``: a verdict table per circuit, worst first; exit 1 if any check fails."""

from __future__ import annotations

import json

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
)


def add_parser(sub) -> None:
    c = sub.add_parser("check", help="solve and check circuit files: a verdict table, worst first (exit 1 if any check fails)")
    c.add_argument("files", nargs="+", metavar="FILE", help="circuit files (.dcn), folders or patterns; - reads standard input")
    c.add_argument(
        "--format", choices=("table", "json", "csv", "markdown", "jsonl"), default="table",
        help="output format (default: table); several files: a summary row per file (jsonl: one JSON line per file)",
    )
    c.add_argument(
        "-o", "--output", metavar="OUT",
        help="write the output to this file (never over an input or a file an input includes; a terminal, /dev/null or a named pipe is written straight to)",
    )
    c.add_argument("--all", action="store_true", help="list passing checks too (default: all of them for one file)")
    add_input_options(c)
    add_output_options(c)
    from ..parallel import add_options

    add_options(c)  # several files: --jobs, --cluster
    c.set_defaults(run=run)


def run(args) -> int:
    from ..files import expand_inputs
    from ..report import text as rt

    opts = options(args)
    files = expand_inputs(args.files)
    check_outputs(args, files)
    out = Output()
    worst = EXIT_OK
    counts = {"passed": 0, "failed": 0, "refused": 0}
    if len(files) > 1 or args.format == "jsonl":
        from ..folders import run_files

        records = run_files(files, opts, mode="check", jobs=args.jobs, cluster=args.cluster, cluster_timeout=args.cluster_timeout)
    else:
        from ..folders import solve_record

        records = [solve_record(files[0], opts, mode="check")]
    for rec in records:
        counts[rec["status"]] += 1
        if rec["status"] == "refused":
            say(rec["message"])
            worst = EXIT_BAD_INPUT
            rec["checks"] = []
            continue
        worst = max(worst, 1 if rec["status"] == "failed" else EXIT_OK)
        for w in rec["warnings"]:
            say(f"dcnet: warning: {rec['file']}: {w}")
    read = [*files, *(f for r in records for f in r.get("read", ()))]  # never overwritten by the output
    if args.format == "jsonl":
        for rec in records:
            out.write(json.dumps(public(rec)) + "\n")
        say(f"{len(files)} files: {counts['passed']} passed every check, {counts['failed']} failed a check, {counts['refused']} refused")
        out.finish(args, read)
        return worst
    if len(files) > 1 and args.format in ("table", "csv") and not args.all:
        _summary(records, counts, args.format, out)
        out.finish(args, read)
        return worst
    if args.format == "json":
        records = [public(r) for r in records]
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
    out.finish(args, read)
    return worst


# ----------------------------------------------------------------- layouts


def _summary(records, counts, fmt, out) -> None:
    """Several files: one row per file (its verdict, how many checks failed, the worst check)."""
    from ..report import text as rt

    def worst_text(r):
        w = r.get("worst_check")
        if not w:
            return r.get("error", "")
        value = "unlimited" if w["value"] is None else rt.si(w["value"], w["unit"])
        limit = "-" if w["limit"] is None else rt.si(w["limit"], w["unit"])
        return f"{w['rule']} {w['subject']}: {value} (limit {limit})"

    if fmt == "csv":
        import csv
        import io

        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["file", "result", "checks", "failed", "worst_rule", "worst_subject", "worst_value", "worst_limit", "unit", "error"])
        for r in records:
            wc = r.get("worst_check") or {}
            w.writerow([r["file"], r["status"], r.get("checks_run", ""), r.get("checks_failed", ""), wc.get("rule", ""), wc.get("subject", ""),
                        wc.get("value", ""), wc.get("limit", ""), wc.get("unit", ""), r.get("error", "")])
        out.write(buf.getvalue())
        return
    rows = [["file", "result", "checks", "failed", "worst check, or why the file was refused"]]
    for r in records:
        rows.append([r["file"], r["status"].upper() if r["status"] == "failed" else r["status"], str(r.get("checks_run", "")), str(r.get("checks_failed", "")), worst_text(r)])
    out.write("\n".join(rt.columns(rows, right={2, 3}, indent="")) + "\n")
    out.write(f"{len(records)} files: {counts['passed']} passed every check, {counts['failed']} failed a check, {counts['refused']} refused\n")
    out.write(rt.wrapped_caution() + "\n")
