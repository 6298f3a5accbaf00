"""What every command shares: input options, solving one file, output that never overwrites."""

from __future__ import annotations

import argparse
import sys

from ..display import shown, shown_json
from ..errors import DcnetError

__all__ = [
    "EXIT_OK", "EXIT_CHECK_FAILED", "EXIT_BAD_INPUT", "options", "add_input_options", "add_output_options", "check_outputs",
    "write_file", "say", "safe_text", "Output", "solve_one", "status", "public",
]

EXIT_OK, EXIT_CHECK_FAILED, EXIT_BAD_INPUT = 0, 1, 2


def options(args):
    from ..language import Options

    return Options(
        max_file_bytes=args.max_file_bytes,
        max_elements=args.max_elements,
        max_include_depth=args.max_include_depth,
        max_expression_depth=args.max_expression_depth,
        max_block_depth=args.max_block_depth,
        max_includes=args.max_includes,
        max_total_bytes=args.max_total_bytes,
        allow_outside=args.allow_outside_includes,
    )


def whole_number(low: int, high: int | None = None, what: str = "a whole number"):
    """An argparse ``type`` for a whole number in ``low..high`` (ASCII digits only): a bad value is
    argparse's own error (the usage line, ``argument --x: ...``, exit 2), never a traceback."""

    def parse(text: str) -> int:
        t = text.strip().replace("_", "").replace(",", "")
        if not (t.isascii() and (t.isdigit() or (t[:1] in "+-" and t[1:].isdigit()))):
            raise argparse.ArgumentTypeError(f"'{text}' is not {what} (write ASCII digits, e.g. {max(low, 1)})")
        n = int(t)
        if n < low or (high is not None and n > high):
            span = f"from {low:,} to {high:,}" if high is not None else f"at least {low:,}"
            raise argparse.ArgumentTypeError(f"{text} is outside the range it takes: {span}")
        return n

    parse.__name__ = what
    return parse


def seconds_number(allow_zero: bool = True, high: float = 1e6):
    """An argparse ``type`` for a finite, non-negative number of seconds up to ``high`` (0 allowed
    when ``allow_zero``; a timer cannot be set much beyond the platform's time range)."""

    def parse(text: str) -> float:
        import math

        try:
            x = float(text) if text.strip().isascii() else math.nan
        except ValueError:
            x = math.nan
        if not math.isfinite(x) or x < 0 or (x == 0 and not allow_zero) or x > high:
            low = "0" if allow_zero else "above 0"
            raise argparse.ArgumentTypeError(f"'{text}' is not a number of seconds from {low} to {high:,.0f}")
        return x

    parse.__name__ = "a number of seconds"
    return parse


def add_fault_option(p: argparse.ArgumentParser) -> None:
    """``--fault`` of the studies (sweep, spread): the per-sample fault-current check."""
    p.add_argument(
        "--fault", action="store_true",
        help="also check the prospective fault current through each fuse with an interrupt rating, per sample (a second factorisation of each sample: about twice the time)",
    )


DEFAULT_MAX_SAMPLES = 1_000_000


def add_samples_limit(p: argparse.ArgumentParser) -> None:
    """``--max-samples`` of the studies (sweep points, spread samples), judged before any work."""
    p.add_argument("--max-samples", type=int, default=DEFAULT_MAX_SAMPLES, metavar="N", help=f"most points of a sweep or samples of a spread (default {DEFAULT_MAX_SAMPLES:,})")


def check_samples(args, n: int, what: str) -> None:
    """Refuse a study of more than ``--max-samples`` points before anything is drawn or solved."""
    from ..errors import LimitError

    if n > args.max_samples:
        raise LimitError(f"{what} make {n:,}, above the limit of {args.max_samples:,}", hint="raise it with --max-samples if you mean it")


def add_input_options(p: argparse.ArgumentParser) -> None:
    from ..language import Options

    d = Options()
    g = p.add_argument_group("limits on input (raise them only for files you trust)")
    g.add_argument("--max-file-bytes", type=whole_number(1), default=d.max_file_bytes, metavar="N", help=f"largest circuit file read, standard input and devices included (default {d.max_file_bytes:,})")
    g.add_argument("--max-elements", type=whole_number(1), default=d.max_elements, metavar="N", help=f"most elements in one circuit (default {d.max_elements:,})")
    g.add_argument("--max-include-depth", type=whole_number(0), default=d.max_include_depth, metavar="N", help=f"deepest nesting of includes (default {d.max_include_depth})")
    g.add_argument("--max-expression-depth", type=whole_number(1), default=d.max_expression_depth, metavar="N", help=f"deepest nesting of a value expression (default {d.max_expression_depth})")
    g.add_argument("--max-block-depth", type=whole_number(0), default=d.max_block_depth, metavar="N", help=f"deepest nesting of block instances (default {d.max_block_depth})")
    g.add_argument("--max-includes", type=whole_number(0), default=d.max_includes, metavar="N", help=f"most includes followed for one circuit, each inclusion counted (default {d.max_includes:,})")
    g.add_argument("--max-total-bytes", type=whole_number(1), default=d.max_total_bytes, metavar="N", help=f"most bytes read for one circuit, every file and inclusion counted (default {d.max_total_bytes:,})")
    g.add_argument("--allow-outside-includes", action="store_true", help="follow includes that leave the circuit file's folder")


def add_output_options(p: argparse.ArgumentParser) -> None:
    """``--allow-dcn-output``, for every command that writes files."""
    p.add_argument(
        "--allow-dcn-output", action="store_true",
        help="allow an output file whose name ends in .dcn (refused otherwise; an input, or a file an input includes, is never written over)",
    )


def output_names(args) -> list[str]:
    """The files a command was asked to write (``-o``, ``--series``, ``--plot``)."""
    import os

    names = [os.fspath(v) for k in ("output", "series", "plot") if (v := getattr(args, k, None))]
    return names[1:] if getattr(args, "output", None) == "-" else names


def check_outputs(args, inputs=()) -> None:
    """Judge the outputs before any work: allowed names, none an input, no two the same file."""
    from ..files import check_outputs as check

    check(output_names(args), inputs, getattr(args, "allow_dcn_output", False))


def write_file(args, path, data: bytes | str, inputs) -> None:
    """Write one output file through the one writer (:func:`dcnet.files.write_output`)."""
    from ..files import write_output

    write_output(path, data, protect=list(inputs), allow_circuit=getattr(args, "allow_dcn_output", False))


def say(text: str) -> None:
    """A line for people on standard error, control characters shown escaped."""
    print(shown(text), file=sys.stderr)


def safe_text(text: str, fmt: str | None) -> str:
    """What a command prints or writes: control characters escaped (exact strings in JSON)."""
    return shown_json(text) if fmt in ("json", "jsonl") else shown(text)


class Output:
    """Collects what a command prints; sends it to stdout or to ``--output`` (through the one
    writer: a temporary name and a rename, never over an input). Control characters are shown
    escaped in every format; JSON keeps the exact strings."""

    def __init__(self):
        import io

        self.buf = io.StringIO()

    def write(self, text: str) -> None:
        self.buf.write(text)

    def finish(self, args, inputs) -> None:
        text = safe_text(self.buf.getvalue(), getattr(args, "format", None))
        target = getattr(args, "output", None)
        if target and target != "-":  # -o - is standard output
            write_file(args, target, text, inputs)
        else:
            sys.stdout.write(text)
            sys.stdout.flush()


def solve_one(path: str, options, text: str | None = None):
    """Load and solve one file (``text``: its content, when already read); returns (solution, error)."""
    from ..language import load, parse, read_stdin

    from ..floating import as_error, is_floating_point_warning, refused

    try:
        try:
            with refused():  # also in folder-run workers: numpy's warnings become an error of this file
                if path == "-":
                    net = parse(read_stdin(options) if text is None else text, "<stdin>", options)
                else:
                    net = load(path, options, text=text)
                return net.solve(), None
        except RuntimeWarning as exc:
            if not is_floating_point_warning(exc):
                raise
            raise as_error(exc, "<stdin>" if path == "-" else path) from None
    except DcnetError as err:
        if err.span is None:
            from ..errors import Span

            err.span = Span("<stdin>" if path == "-" else path)
        return None, err
    except RecursionError:
        from ..errors import LimitError, Span

        return None, LimitError("the file nests too deeply to read", span=Span(path), hint="simplify deeply nested expressions")


def public(rec: dict) -> dict:
    """A folder run's record as it is printed: without the rendered message and the list of files read."""
    return {k: v for k, v in rec.items() if k not in ("message", "read")}


def status(sol) -> int:
    return EXIT_CHECK_FAILED if sol.failed else EXIT_OK


# ------------------------------------------------------------------- check
