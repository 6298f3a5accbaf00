"""``dcnet spread``: Monte Carlo over the tolerances written in a circuit file."""

from __future__ import annotations

import json

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
    whole_number,
    write_file,
)


def add_parser(sub) -> None:
    s = sub.add_parser(
        "spread",
        help="Monte Carlo over the tolerances in a file (let x = ... ± 5%%): statistics of quantities, share of samples passing each check",
        description="Draw every toleranced let value of FILE at random, solve all samples together, and report statistics and checks.",
    )
    s.add_argument("file", metavar="FILE", help="circuit file (.dcn)")
    s.add_argument("--samples", type=whole_number(1, 100_000_000), default=10_000, metavar="N", help="number of samples (default 10,000)")
    s.add_argument("--seed", type=whole_number(0), default=1, metavar="S", help="seed of the random draws, 0 or more (default 1; the same seed gives the same result)")
    s.add_argument(
        "--dist", choices=("normal", "uniform"), default="normal",
        help="normal (default): the tolerance is three standard deviations, draws beyond it are drawn again; uniform: every value in the band equally likely",
    )
    s.add_argument("--only", nargs="+", metavar="NAME", help="draw only these toleranced values (the others stay nominal)")
    s.add_argument(
        "--independent", nargs="+", metavar="NAME",
        help="draw these values separately for every element that uses them (each cell its own resistance); 'all' for every drawn value. "
        "Without it a let value is one draw per sample, shared by everything that uses it",
    )
    s.add_argument("--show", nargs="+", metavar="QUANTITY", default=[], help="quantities to describe, as in dcnet solve --show")
    s.add_argument("--percentiles", default="1,5,50,95,99", metavar="P,P,...", help="percentiles to report (default 1,5,50,95,99)")
    add_fault_option(s)
    from .common import add_samples_limit

    add_samples_limit(s)
    s.add_argument("--format", choices=("table", "csv", "json"), default="table", help="output format (default: table)")
    s.add_argument("--plot", metavar="PNG", help="also draw a histogram of each quantity (needs matplotlib)")
    s.add_argument("-o", "--output", metavar="OUT", help="write the output to this file (never over an input or a file an input includes)")
    add_input_options(s)
    add_output_options(s)
    from ..parallel import add_options

    add_options(s)
    s.set_defaults(run=run)


def _percentiles(text: str) -> tuple[float, ...]:
    try:
        out = tuple(float(p) for p in text.split(",") if p.strip())
    except ValueError:
        raise InputError(f"--percentiles {text}: write numbers between 0 and 100, e.g. 5,50,95") from None
    if not out or any(not 0 <= p <= 100 for p in out):
        raise InputError(f"--percentiles {text}: write numbers between 0 and 100, e.g. 5,50,95")
    return out


def run(args) -> int:
    from ..analysis.solution import QuantityError
    from ..analysis.studies import DISTRIBUTIONS, Study, spread_values, statistics
    from ..language import load
    from ..parallel import Progress, make_runner
    from ..report import studies as rs
    from ..report.studies import show_value

    if args.samples < 1 or args.samples > 100_000_000:
        raise InputError(f"--samples {args.samples}: give between 1 and 100,000,000 samples")
    from .common import check_samples

    check_samples(args, args.samples, "--samples")
    pct = _percentiles(args.percentiles)
    opts = options(args)
    check_outputs(args, [args.file])
    net = load(args.file, opts)
    toleranced = [n for n, key in ((k[1], k) for k in net.exprs if k[0] == "let") if "." not in n and net.values[n][2] is not None]
    names = toleranced
    if args.only:
        for n in args.only:
            if n not in net.values or "." in n:
                Study(net, [n], path=args.file)  # words the unknown name
            if net.values[n][2] is None:
                raise InputError(f"--only {n}: '{n}' has no tolerance in {args.file}", hint=f"write it as: let {n} = VALUE ± 5%")
        names = [n for n in toleranced if n in args.only]
    if not names:
        raise InputError(f"{args.file} has no let value with a tolerance", hint="write one as: let r_cell = 6mOhm ± 10%")
    independent = []
    if args.independent:
        independent = names if "all" in args.independent else args.independent
    study = Study(net, names, path=args.file, options=opts, independent=independent, quantities=args.show, fault=args.fault)
    values = spread_values(study, args.samples, args.seed, args.dist)
    probe = {n: float(v.flat[0]) for n, v in values.items()}
    try:
        study.prepare(probe)
    except QuantityError as exc:
        raise InputError(f"--show: {exc}") from None
    for w in study.nominal_solution.warnings:
        say(f"dcnet: warning: {args.file}: {w}")
    bar = Progress(args.samples, "samples")
    runner = make_runner(args.jobs, args.cluster, -(-args.samples // study.chunk_size()), args.cluster_timeout)
    try:
        result = study.run(values, runner, bar)
    finally:
        runner.close()
        bar.close()
    stats = {lab: statistics(result.quantities[:, j], result.nominal[j], pct) for j, lab in enumerate(result.labels)}
    drawn = []
    for n in names:
        tol = study.tolerance[n]
        rel = f" ({tol / abs(study.nominal[n]) * 100:.3g} %)" if study.nominal[n] else ""
        how = f", each of {len(study.users[n])} elements its own draw" if n in study.independent else ", one draw per sample"
        drawn.append(f"  {n} = {show_value(study.nominal[n], study.dims[n])} ± {show_value(tol, study.dims[n])}{rel}{how}")
    header = [
        f"{args.samples:,} samples, seed {args.seed}, {args.dist} distribution ({DISTRIBUTIONS[args.dist]})",
        "drawn:",
        *drawn,
    ]
    if study.reason:
        header.append(f"how: {study.reason}")
    out = Output()
    if args.format == "json":
        meta = {
            "samples": args.samples, "seed": args.seed, "distribution": args.dist, "distribution_text": DISTRIBUTIONS[args.dist],
            "drawn": {n: {"nominal": study.nominal[n], "tolerance": study.tolerance[n], "independent": n in study.independent} for n in names},
        }
        out.write(json.dumps(rs.spread_json(args.file, result, stats, meta), indent=2) + "\n")
    elif args.format == "csv":
        out.write(rs.spread_csv(result, stats))
    else:
        out.write(rs.spread_table(args.file, study, result, stats, header))
    inputs = list(net.files)
    if args.plot:
        if not result.labels:
            raise InputError("--plot draws the quantities of --show: name at least one")
        write_file(args, args.plot, rs.plot_spread(args.file, result, stats, args.samples), inputs)
    out.finish(args, inputs)
    return EXIT_CHECK_FAILED if result.failed.any() else EXIT_OK
