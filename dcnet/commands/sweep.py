"""``dcnet sweep``: a circuit solved over a range (or a grid) of its ``let`` values."""

from __future__ import annotations

import json
import re

from ..errors import InputError
from .common import (
    EXIT_CHECK_FAILED,
    EXIT_OK,
    Output,
    add_fault_option,
    add_input_options,
    add_output_options,
    check_outputs,
    options,
    say,
    write_file,
)

_VARY = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=(.+)$")
DEFAULT_COUNT = 11


def add_parser(sub) -> None:
    s = sub.add_parser(
        "sweep",
        help="solve a circuit over a range of its let values (several --vary make a grid)",
        description="Solve FILE for every value of one or more of its let values; points that keep the topology are solved together.",
    )
    s.add_argument("file", metavar="FILE", help="circuit file (.dcn)")
    s.add_argument(
        "--vary", action="append", required=True, metavar="NAME=START..STOP[:COUNT|:log]",
        help=f"a let value of the file and its range, e.g. run=1m..10m:10 or r_int=2mOhm..20mOhm:log (default {DEFAULT_COUNT} points; "
        ":log spaces them geometrically; both may be given: :7:log). Repeat for a grid",
    )
    s.add_argument("--show", nargs="+", required=True, metavar="QUANTITY", help="as in dcnet solve --show: A1.current, bus+, a+,bus+, P1.drop_pct ...")
    add_fault_option(s)
    from .common import add_samples_limit

    add_samples_limit(s)
    s.add_argument("--format", choices=("table", "csv", "json"), default="table", help="output format (default: table)")
    s.add_argument("--plot", metavar="PNG", help="also draw the quantities against the first varied value (needs matplotlib)")
    s.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input or a file an input includes)")
    add_input_options(s)
    add_output_options(s)
    from ..parallel import add_options

    add_options(s)
    s.set_defaults(run=run)


def parse_vary(text: str, study) -> tuple[str, float, float, int, bool]:
    """``NAME=START..STOP[:COUNT|:log]`` -> (name, start, stop, count, log), values in SI."""
    m = _VARY.match(text)
    if not m or ".." not in m.group(2):
        raise InputError(f"--vary {text}: write NAME=START..STOP, e.g. run=1m..10m:10", hint="options after the range: :COUNT, :log, or both (:7:log)")
    name, rest = m.group(1), m.group(2)
    start_raw, _, stop_part = rest.partition("..")
    stop_raw, *opts = stop_part.split(":")
    count, log = DEFAULT_COUNT, False
    for opt in opts:
        opt = opt.strip()
        if opt == "log":
            log = True
        elif opt.isascii() and opt.isdigit() and int(opt) >= 1:
            count = int(opt)
        else:
            raise InputError(f"--vary {text}: '{opt}' is neither a number of points nor 'log'", hint="e.g. run=1m..10m:10 or r=1mOhm..10mOhm:log")
    if count > 1_000_000:
        raise InputError(f"--vary {text}: {count:,} points is more than a sweep needs", hint="at most 1,000,000 points per --vary")
    if name not in study.dims:
        study_names = ", ".join(study.lets) or "none"
        from ..language.parser import suggest

        near = suggest(name, study.lets)
        raise InputError(f"--vary {text}: the file has no let value '{name}'", hint=(f"did you mean '{near}'? " if near else "") + f"its let values: {study_names}")
    dim = study.dims[name]
    start, stop = (_quantity(raw, text, dim) for raw in (start_raw, stop_raw))
    if log and (start <= 0 or stop <= 0):
        raise InputError(f"--vary {text}: a :log range needs positive ends", hint="use an even range, or positive values")
    return name, start, stop, count, log


def _quantity(raw: str, text: str, dim) -> float:
    from ..errors import DcnetError, Span
    from ..language.expressions import ExpressionProblem, evaluate
    from ..language.parser import parse_value
    from ..report.studies import let_unit
    from ..units import DIMENSIONLESS, dim_name

    raw = raw.strip()
    try:
        tree = parse_value(raw, Span("--vary", 1, 1))
        q = evaluate(tree[1], {})
    except (DcnetError, ExpressionProblem) as exc:
        raise InputError(f"--vary {text}: '{raw}' is not a value ({getattr(exc, 'message', exc)})", hint="write a number with its unit, e.g. 2.5m or 4mOhm") from None
    if q.dim != dim:
        unit = let_unit(dim)[0]
        hint = f"write it with its unit, e.g. {raw}{unit}" if q.dim == DIMENSIONLESS and unit else None
        raise InputError(f"--vary {text}: '{raw}' is {dim_name(q.dim)}, but the let value is {dim_name(dim)}", hint=hint)
    return float(q.value)


def run(args) -> int:
    from ..analysis.solution import QuantityError
    from ..analysis.studies import Study, axis_values, sweep_values
    from ..language import load
    from ..parallel import Progress, make_runner
    from ..report import studies as rs
    from ..report.studies import show_value

    opts = options(args)
    check_outputs(args, [args.file])
    net = load(args.file, opts)
    names = []
    specs = []
    for text in args.vary:
        probe = Study(net, [], path=args.file, options=opts)
        spec = parse_vary(text, probe)
        if spec[0] in names:
            raise InputError(f"--vary {text}: '{spec[0]}' is varied twice")
        names.append(spec[0])
        specs.append(spec)
    from math import prod

    from .common import check_samples

    check_samples(args, prod(spec[3] for spec in specs), "the points of " + " x ".join(f"{spec[3]:,}" for spec in specs))
    study = Study(net, names, path=args.file, options=opts, quantities=args.show, fault=args.fault)
    axes = [(name, axis_values(start, stop, count, log)) for name, start, stop, count, log in specs]
    values = sweep_values(study, axes)
    far = {name: float(vals[int(abs(vals - study.nominal[name]).argmax())]) for name, vals in axes}
    try:
        study.prepare(far)
    except QuantityError as exc:
        raise InputError(f"--show: {exc}") from None
    for w in study.nominal_solution.warnings:
        say(f"dcnet: warning: {args.file}: {w}")
    n = len(next(iter(values.values())))
    bar = Progress(n, "points")
    runner = make_runner(args.jobs, args.cluster, -(-n // study.chunk_size()), args.cluster_timeout)
    try:
        result = study.run(values, runner, bar)
    finally:
        runner.close()
        bar.close()
    describe = ", ".join(
        f"{name} from {show_value(start, study.dims[name])} to {show_value(stop, study.dims[name])} ({count} points{', log' if log else ''})" for name, start, stop, count, log in specs
    ) + (f": {n:,} points" if len(specs) > 1 else "")
    out = Output()
    if args.format == "json":
        out.write(json.dumps(rs.sweep_json(args.file, study, axes, values, result), indent=2) + "\n")
    elif args.format == "csv":
        out.write(rs.sweep_csv(study, axes, values, result))
    else:
        out.write(rs.sweep_table(args.file, study, axes, values, result, describe + f"; {study.reason}"))
    inputs = list(net.files)
    if args.plot:
        logs = {name: log for name, _, _, _, log in specs}
        write_file(args, args.plot, rs.plot_sweep(args.file, study, axes, values, result, logs), inputs)
    out.finish(args, inputs)
    return EXIT_CHECK_FAILED if result.failed.any() else EXIT_OK
