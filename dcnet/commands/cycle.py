"""``dcnet cycle``: run the file's charge/discharge phases; print the ledger and a summary."""

from __future__ import annotations

import json

from ..errors import DimensionError, InputError, Span
from .common import (
    EXIT_BAD_INPUT,
    EXIT_OK,
    Output,
    add_input_options,
    add_output_options,
    check_outputs,
    options,
    write_file,
)


def add_parser(sub) -> None:
    c = sub.add_parser("cycle", help="run the charge/discharge phases of a circuit file: energy ledger, states of charge")
    c.add_argument("file", metavar="FILE", help="circuit file (.dcn) with phase statements; - reads standard input")
    c.add_argument("--step", default="60s", metavar="TIME", help="longest time step, e.g. 1s, 30s, 5min (default 60s)")
    c.add_argument("--max-steps", type=int, default=500_000, metavar="N", help="most time steps of the whole schedule, judged before the work from each phase's length over its step (default 500,000)")
    c.add_argument("--series", metavar="CSV", help="write the time series (states of charge, cell currents, node potentials) to this CSV file (never over an input)")
    c.add_argument("--plot", metavar="PNG", help="draw state of charge, string currents and bank voltage to this PNG file")
    c.add_argument("--format", choices=("table", "json"), default="table")
    c.add_argument("--refactor", action="store_true", help="factorise the circuit matrix at every step (for comparison; slower)")
    c.add_argument("-o", "--output", metavar="OUT", help="write the printed output to this file")
    add_input_options(c)
    add_output_options(c)  # -o, --series and --plot: never over an input or a file it includes, never a .dcn name
    c.set_defaults(run=run)


def _seconds(text: str) -> float:
    from ..language.expressions import ExpressionProblem, evaluate
    from ..language.parser import parse_value
    from ..units import TIME

    tree = parse_value(text, Span("--step", 1, 1, len(text)), text)
    try:
        q = evaluate(tree[1], {})
    except ExpressionProblem as p:
        raise InputError(f"--step {text}: {p.message}", hint="e.g. --step 10s") from None
    if q.dim != TIME or q.value <= 0:
        raise DimensionError(f"--step {text} is not a positive time", hint="e.g. --step 1s, --step 5min")
    return q.value


def run(args) -> int:
    from ..analysis.cycle import run as run_cycle
    from ..language import load, parse, read_stdin

    opts = options(args)
    check_outputs(args, [args.file])
    step = _seconds(args.step)
    net = parse(read_stdin(opts), "<stdin>", opts) if args.file == "-" else load(args.file, opts)
    result = run_cycle(net, step=step, force_refactor=args.refactor, progress=True, max_steps=args.max_steps)
    inputs = net.files
    if args.series:
        write_file(args, args.series, series_csv(result), inputs)
    if args.plot:
        write_file(args, args.plot, plot_png(result), inputs)
    out = Output()
    if args.format == "json":
        out.write(json.dumps(result.to_dict(), indent=2) + "\n")
    else:
        out.write(summary_text(result, args.file) + "\n")
    out.finish(args, inputs)
    return EXIT_OK if result else EXIT_BAD_INPUT


def _hours(s: float) -> str:
    if s < 120:
        return f"{s:.1f} s"
    if s < 7200:
        return f"{s / 60:.1f} min"
    return f"{s / 3600:.2f} h"


def summary_text(result, file: str) -> str:
    from ..report import text as rt

    net = result.netlist
    out = [f"dcnet cycle  {net.title}  ({file})" if net.title else f"dcnet cycle  ({file})", ""]
    rows = [["phase", "start", "end", "lasted", "ended by", "mean soc at end"]]
    for ph in result.phases:
        rows.append([ph["phase"], _hours(ph["start_s"]), _hours(ph["end_s"]), _hours(ph["duration_s"]), ph["ended_by"], f"{ph['mean_soc_end'] * 100:.1f} %"])
    out += ["Phases"] + rt.columns(rows) + [""]
    led = result.ledger
    rows = [["energy", "Wh", "kJ"]]
    for k, j in led["categories_J"].items():
        rows.append([k, f"{j / 3600:.4g}", f"{j / 1000:.4g}"])
    out += ["Energy ledger (the cells' net store is negative when they gave energy up)"] + rt.columns(rows, right={1, 2})
    out.append(f"  balance closes to {abs(led['closure_relative']) * 100:.2g} % of the energy moved")
    rt_ = led["round_trip"]
    if rt_["cells_round_trip"] is not None:
        closed = rt_.get("closed_cycle", abs(rt_["mean_soc_change"]) < 0.01)
        out.append(
            f"  cells: {rt_['cells_terminal_in_Wh']:.4g} Wh in at their terminals while charging, "
            f"{rt_['cells_terminal_out_Wh']:.4g} Wh out while discharging"
            + (f": round trip {rt_['cells_round_trip'] * 100:.1f} %" if closed else
               f"; not a closed cycle (a cell's state of charge moved up to {rt_.get('max_abs_soc_change', abs(rt_['mean_soc_change'])) * 100:.1f} points), so no round-trip figure")
        )
    if rt_["loads_over_supplied"] is not None:
        out.append(f"  loads received {rt_['loads_over_supplied'] * 100:.1f} % of what the chargers and sources put in")
    out.append("")
    names = result.cell_names
    soc_end = result.soc[-1]
    out.append(f"States of charge at the end: {soc_end.min() * 100:.1f} % to {soc_end.max() * 100:.1f} % over {len(names)} cell(s)")
    if len(names) <= 16:
        rows = [["cell", "soc start", "soc end", "charged", "discharged"]]
        for k, n in enumerate(names):
            tp = result.throughput[n]
            rows.append([n, f"{result.soc[0][k] * 100:.1f} %", f"{soc_end[k] * 100:.1f} %", f"{tp['charged_Ah']:.4g} Ah", f"{tp['discharged_Ah']:.4g} Ah"])
        out += rt.columns(rows, right={1, 2, 3, 4})
    else:
        ch = [result.throughput[n]["charged_Ah"] for n in names]
        dis = [result.throughput[n]["discharged_Ah"] for n in names]
        out.append(f"  charge throughput per cell: {min(ch):.4g} to {max(ch):.4g} Ah in, {min(dis):.4g} to {max(dis):.4g} Ah out")
    circ = result.circulating
    if circ["bank"]:
        out.append(f"Largest circulating current between strings: {circ['max_A']:.4g} A in bank {circ['bank']}, at {_hours(circ['time_s'])} (phase {circ['phase']})")
    out.append(f"{len(result.times)} samples, {result.solves} solves, {result.factorisations} factorisations, {result.wall_s:.2f} s")
    for n in result.notes:
        out.append(f"note: {n}")
    chems = {el.values.get("chemistry") for el in net.elements if el.kind == "cell"}
    out.append("")
    if chems & {"lead-acid", "agm", "gel"}:
        out.append("Lead-acid batteries vent hydrogen while charging: ventilate the battery space.")
    out.append(rt.wrapped_caution())
    return "\n".join(out)


def series_csv(result) -> str:
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    nodes = result.node_names if len(result.node_names) <= 200 else []
    w.writerow(["time_s", "phase"] + [f"soc:{n}" for n in result.cell_names] + [f"current_A:{n}" for n in result.cell_names] + [f"potential_V:{n}" for n in nodes])
    labels = [p["phase"] for p in result.phases]
    node_idx = list(range(len(nodes)))
    for k, t in enumerate(result.times):
        row = [repr(float(t)), labels[int(result.phase_of_sample[k])]]
        row += [repr(float(x)) for x in result.soc[k]]
        row += [repr(float(x)) for x in result.cell_current[k]]
        row += [repr(float(result.potentials[k][j])) for j in node_idx]
        w.writerow(row)
    return buf.getvalue()


def plot_png(result) -> bytes:
    """State of charge, string currents and bank voltage over time, as PNG bytes."""
    import io

    try:
        import matplotlib
    except ImportError:
        raise InputError("--plot needs matplotlib", hint='install it with: pip install "dcnet[plot]"') from None

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    net = result.netlist
    hours = result.times / 3600.0
    fig, axes = plt.subplots(3, 1, figsize=(8.3, 9), sharex=True)
    axes[0].plot(hours, result.soc * 100, linewidth=0.8)
    axes[0].set_ylabel("state of charge (%)")
    strings = []
    for bank in net.banks.values():
        for cells in bank["strings"]:
            strings.append((f"{cells[-1].rsplit('.', 1)[0]}", result.cell_names.index(cells[-1])))
    if not strings:
        strings = [(n, k) for k, n in enumerate(result.cell_names)]
    for label, k in strings[:24]:
        axes[1].plot(hours, -result.cell_current[:, k], linewidth=0.8, label=label)
    axes[1].set_ylabel("string current, discharge + (A)")
    if len(strings) <= 8:
        axes[1].legend(fontsize=7)
    if net.banks:
        bank = next(iter(net.banks.values()))
        ia, ib = net.node_index[bank["pos"]], net.node_index[bank["neg"]]
        axes[2].plot(hours, result.potentials[:, ia] - result.potentials[:, ib], color="black", linewidth=1)
        axes[2].set_ylabel("bank voltage (V)")
    else:
        axes[2].plot(hours, result.potentials.max(axis=1) - result.potentials.min(axis=1), color="black", linewidth=1)
        axes[2].set_ylabel("highest potential difference (V)")
    axes[2].set_xlabel("time (h)")
    for ph in result.phases:
        for ax in axes:
            ax.axvline(ph["start_s"] / 3600.0, color="0.8", linewidth=0.6)
        axes[0].text(ph["start_s"] / 3600.0, 0.98, " " + ph["phase"], fontsize=7, va="top", transform=axes[0].get_xaxis_transform())
    fig.suptitle(net.title or "dcnet cycle", fontsize=10)
    fig.tight_layout()
    buf = io.BytesIO()
    try:
        fig.savefig(buf, format="png", dpi=110)
    finally:
        plt.close(fig)
    return buf.getvalue()
