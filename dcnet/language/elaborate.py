"""Statements to the flat :class:`~dcnet.netlist.Netlist`.

Elaboration resolves every value to an SI float (checking its dimension against
the element kind's schema), applies parts, follows includes, picks the ground
and builds the elements. Every error it raises carries the file, line and
column of what is wrong and the source line itself.
"""

from __future__ import annotations

import gc
import os
import re
import stat
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import (
    DcnetError,
    DimensionError,
    IncludeError,
    InputError,
    LimitError,
    Span,
    UnknownNameError,
    ValueRangeError,
)
from ..kinds import KINDS
from ..kinds.base import Kind, check_finished
from ..netlist import Element, Limit, Netlist
from ..units import CURRENT, DIMENSIONLESS, VOLTAGE, Quantity, dim_name, lookup_unit
from .expressions import ExpressionProblem, evaluate, names_in
from .parser import KEYWORDS, Prop, Statement, lookalike_hint, parse_statements, parse_value, scan_lookalikes, suggest

__all__ = ["Options", "load", "parse", "read_stdin", "LIMIT_RULES"]

#: the `limit` rules the checks layer knows, with their properties
LIMIT_RULES: dict[str, dict[str, str]] = {
    "imbalance": {"max": "quantity", "among": "words"},
    "drop": {"max": "quantity", "from": "word", "to": "word"},
    "current": {"max": "quantity", "min": "quantity", "of": "words"},
    "circulating": {"max": "quantity", "among": "words"},
    "voltage": {"max": "quantity", "min": "quantity", "of": "words", "from": "word", "to": "word"},
}

_GROUND_NAMES = ("gnd", "GND", "ground", "0")


@dataclass
class Options:
    """Limits and permissions for reading circuit files (see the README)."""

    max_file_bytes: int = 20_000_000
    max_elements: int = 500_000
    max_include_depth: int = 16
    max_expression_depth: int = 256
    max_block_depth: int = 16  # nesting of block instances (a block that uses a block ...)
    #: include statements followed for one circuit, every inclusion counted (the same file twice counts twice)
    max_includes: int = 1_000
    #: bytes read for one circuit: every file, every inclusion counted
    max_total_bytes: int = 100_000_000
    allow_outside: bool = False  # includes outside the top file's folder tree
    #: solve every bank with its main leads at this tap position (same, opposite, centre), whatever the file says
    tap_override: str | None = None
    #: let values to use instead of the file's (SI floats by qualified name): one point of a study
    #: (dcnet sweep / spread) when it re-reads the file
    let_values: dict[str, float] | None = None


@dataclass
class _Scope:
    """Where statements are being elaborated: the top level, or inside a block instance.

    Inside an instance, element names get ``prefix``; ports map to the caller's nodes and
    every other node gets the prefix too; ``env`` holds the instance's own let values
    (with the caller's overrides) in front of the file's global ones.
    """

    prefix: str = ""
    ports: dict[str, str] = field(default_factory=dict)
    env: Any = None
    depth: int = 0
    chain: tuple[str, ...] = ()

    def name(self, local: str) -> str:
        return self.prefix + local

    def node(self, local: str) -> str:
        if local in self.ports:
            return self.ports[local]
        return self.prefix + local


@dataclass
class _Block:
    name: str
    ports: tuple[str, ...]
    body: list
    file: str
    span: Span


@dataclass
class _State:
    net: Netlist
    options: Options
    root: Path | None
    env: dict[str, Quantity] = field(default_factory=dict)
    parts: dict[str, tuple[str, dict[str, Any], Span]] = field(default_factory=dict)
    lines: dict[str, list[str]] = field(default_factory=dict)
    #: files outside the circuit's folder, included with permission: their lines are never echoed
    quiet: set[str] = field(default_factory=set)
    ground_span: Span | None = None
    const_cache: dict[str, Quantity] = field(default_factory=dict)
    include_stack: list[Path] = field(default_factory=list)
    includes: int = 0  # include statements counted so far (before any is followed)
    instances: int = 0  # block instances expanded so far
    block_sizes: dict[str, tuple[int, int]] = field(default_factory=dict)  # block -> (elements at least, instances)
    bytes_read: int = 0  # bytes of every file read so far, every inclusion counted
    blocks: dict[str, _Block] = field(default_factory=dict)
    scope: _Scope = field(default_factory=_Scope)
    #: expression trees of the properties just resolved that use let values (key -> tree)
    pending_deps: dict[str, Any] = field(default_factory=dict)
    part_deps: dict[str, dict[str, Any]] = field(default_factory=dict)
    last_tree: Any = None
    #: where each limit statement's properties were written (checked once every name is known)
    limit_spans: list[tuple[Limit, dict[str, Span]]] = field(default_factory=list)

    def __post_init__(self):
        self.scope.env = self.env


# ------------------------------------------------------------------ entry
@contextmanager
def _gc_paused():
    """Parsing makes millions of small acyclic objects; the cycle collector only slows it down."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


def parse(text: str, file: str = "<text>", options: Options | None = None, *, base_dir: str | os.PathLike | None = None) -> Netlist:
    """Build a netlist from circuit text. Includes resolve against ``base_dir`` (default: the current folder)."""
    options = options or Options()
    root = Path(base_dir).resolve() if base_dir is not None else Path.cwd().resolve()
    st = _State(Netlist(), options, root)
    st.bytes_read = len(text)
    st.net.files.append(file)
    with _read_files_on_error(st):
        with _gc_paused():
            _run(st, text, file, root)
        _finish(st)
    return st.net


def load(path: str | os.PathLike, options: Options | None = None, *, text: str | None = None) -> Netlist:
    """Read and elaborate a circuit file (and the files it includes).

    ``text``, when given, is the file's content already read (a cluster worker gets it from
    the client); the file is then treated exactly as if it had been read from ``path``.
    """
    options = options or Options()
    p = Path(path)
    if text is None:
        text = _read(p, options, None)
    root = p.resolve().parent
    st = _State(Netlist(), options, root)
    st.bytes_read = len(text)
    st.net.files.append(str(path))
    st.include_stack.append(p.resolve())
    with _read_files_on_error(st):
        with _gc_paused():
            _run(st, text, str(path), root)
        _finish(st)
    return st.net


@contextmanager
def _read_files_on_error(st: _State):
    """An error leaving elaboration carries ``files``: every file read or tried so far (an
    output must never overwrite any of them), and no line of a quiet file."""
    try:
        yield
    except DcnetError as err:
        if err.file in st.quiet:
            err.source_line = None
        err.files = list(st.net.files)
        raise


_CHUNK = 1 << 20


def _read_bounded(fh, limit: int, name: str, span: Span | None) -> bytes:
    """At most ``limit`` bytes of an open binary stream, read in chunks; one byte more is an error.

    The size a file reports is not trusted: a device (``/dev/zero``), a pipe or standard input
    has none, and a file can grow while it is read."""
    parts: list[bytes] = []
    total = 0
    while True:
        chunk = fh.read(min(_CHUNK, limit + 1 - total))
        if not chunk:
            return (b"" if not parts or isinstance(parts[0], bytes) else "").join(parts)
        parts.append(chunk)
        total += len(chunk)
        if total > limit:
            raise LimitError(
                f"{name + ' is' if span else 'the input is'} longer than the limit of {limit:,} bytes (--max-file-bytes)",
                span=span,
                hint="raise it with --max-file-bytes if the input is trusted",
            )


def _decode(data: bytes, name: str) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        col = exc.start - (data.rfind(b"\n", 0, exc.start) + 1) + 1
        raise InputError(
            f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x})",
            span=Span(name, line, col),
            hint="save the file as UTF-8 text; circuit files are plain text",
        ) from None


def read_stdin(options: Options | None = None, stream=None) -> str:
    """Standard input as circuit text, within ``options.max_file_bytes`` (read in chunks, so an
    endless input stops at the limit)."""
    import sys

    options = options or Options()
    fh = stream if stream is not None else sys.stdin
    if fh is None:  # started with standard input closed
        raise InputError("standard input is closed", span=Span("<stdin>"), hint="give the circuit file's name, or pipe it in")
    fh = getattr(fh, "buffer", fh)
    try:
        data = _read_bounded(fh, options.max_file_bytes, "standard input", Span("<stdin>"))
    except OSError as exc:
        raise InputError(f"cannot read standard input: {exc.strerror or exc}", span=Span("<stdin>")) from None
    if isinstance(data, str):  # a text stream without a buffer (tests)
        data = data.encode("utf-8", "surrogatepass")  # a lone surrogate then fails as not UTF-8
    return _decode(data, "<stdin>")


def _read(p: Path, options: Options, span: Span | None) -> str:
    try:
        size = p.stat().st_size
        if size > options.max_file_bytes:
            raise LimitError(
                f"{p} is {size:,} bytes, above the limit of {options.max_file_bytes:,}",
                span=span,
                hint="raise it with --max-file-bytes if the file is trusted",
            )
        with open(p, "rb") as fh:
            data = _read_bounded(fh, options.max_file_bytes, str(p), span)
    except IsADirectoryError:
        raise InputError(f"{p} is a folder, not a circuit file", span=span) from None
    except (OSError, ValueError) as exc:
        raise _open_error(exc, p, span) from None
    return _decode(data, str(p))


def _open_error(exc: OSError | ValueError, p: Path, span: Span | None) -> InputError:
    """The error for a file that cannot be opened or read (an include's, with its span)."""
    if isinstance(exc, FileNotFoundError):
        return (IncludeError if span else InputError)(f"file not found: {p}", span=span)
    if isinstance(exc, PermissionError):
        return InputError(f"cannot read {p}: permission denied", span=span)
    if isinstance(exc, ValueError):  # a NUL byte in the name
        return InputError(f"cannot read {str(p)!r}: {exc}", span=span, hint="a file name cannot hold a NUL character")
    return InputError(f"cannot read {p}: {exc.strerror or exc}", span=span)


_NOT_REGULAR = {stat.S_IFIFO: "a named pipe", stat.S_IFCHR: "a character device", stat.S_IFBLK: "a block device", stat.S_IFSOCK: "a socket", stat.S_IFDIR: "a folder"}


def _read_include(st: _State, p: Path, rel: str, span: Span) -> str:
    """An included file's text: a regular file only (a named pipe or a device could block or never
    end), judged on the opened file itself (opened without waiting for a writer), within the
    size limit of one file and the budget of everything read for the circuit."""
    options = st.options
    try:
        fd = os.open(p, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except (OSError, ValueError) as exc:
        raise _open_error(exc, p, span) from None
    with os.fdopen(fd, "rb") as fh:
        info = os.fstat(fh.fileno())
        if not stat.S_ISREG(info.st_mode):
            what = _NOT_REGULAR.get(stat.S_IFMT(info.st_mode), "not a regular file")
            raise IncludeError(f"include '{rel}' is {what}, not a circuit file", span=span, hint="an include names a regular file (.dcn)")
        size = info.st_size
        if size > options.max_file_bytes:
            raise LimitError(f"{p} is {size:,} bytes, above the limit of {options.max_file_bytes:,}", span=span, hint="raise it with --max-file-bytes if the file is trusted")
        if st.bytes_read + size > options.max_total_bytes:
            raise LimitError(
                f"reading {p} ({size:,} bytes) would bring what this circuit reads to {st.bytes_read + size:,} bytes "
                f"(every file and every inclusion counted), above the limit of {options.max_total_bytes:,}",
                span=span,
                hint="raise it with --max-total-bytes if the files are trusted",
            )
        try:
            data = fh.read(options.max_file_bytes + 1)
        except OSError as exc:
            raise _open_error(exc, p, span) from None
    if len(data) > options.max_file_bytes:
        raise LimitError(f"{p} is more than {options.max_file_bytes:,} bytes", span=span, hint="raise it with --max-file-bytes if the file is trusted")
    st.bytes_read += len(data)
    return _decode(data, str(p))


# -------------------------------------------------------------- statements
def _run(st: _State, text: str, file: str, folder: Path, echo: bool = True) -> None:
    """Elaborate one file's statements. ``echo=False`` (a file outside the circuit's folder,
    included with permission) keeps its lines out of every message."""
    if not echo:
        st.quiet.add(file)
    try:
        _run_statements(st, text, file, folder)
    except DcnetError as err:
        if err.file in st.quiet:
            err.source_line = None
        raise


_HANDLERS: dict[str, Any] = {}


def _run_statements(st: _State, text: str, file: str, folder: Path) -> None:
    st.lines[file] = _Lines(text)  # numbered as the grammar counts lines, found when an error needs one
    statements = parse_statements(text, file)
    _count_includes(st, statements, file)
    collecting: _Block | None = None
    depth = 0
    for s in statements:
        try:
            if collecting is not None:
                if s.what == "block":
                    depth += 1
                elif s.what == "end":
                    if depth == 0:
                        st.blocks[collecting.name] = collecting
                        collecting = None
                        continue
                    depth -= 1
                collecting.body.append(s)
                continue
            if s.what == "block":
                collecting = _start_block(st, s, file)
                depth = 0
            elif s.what == "end":
                raise InputError("'end' without a block to close", span=Span(file, s.line, s.column, 3), hint="blocks are written: block NAME (PORT, ...) ... end")
            elif s.what == "include":
                _include(st, s, file, folder)
            else:
                _dispatch(st, s, file)
        except DcnetError as err:
            _locate(st, err, s, file)
            raise
    if collecting is not None:
        raise InputError(
            f"block '{collecting.name}' is not closed",
            span=collecting.span,
            source_line=_src(st, file, collecting.span.line),
            hint="add a line with: end",
        )


def _count_includes(st: _State, statements: list[Statement], file: str) -> None:
    """Count a file's include statements before following any: a fan-out of includes (each file
    including several others, level after level) is refused after reading a bounded number of
    files, not after following every inclusion."""
    inc = [s for s in statements if s.what == "include"]
    limit = st.options.max_includes
    if st.includes + len(inc) > limit:
        s = inc[max(limit - st.includes, 0)]
        raise LimitError(
            f"this include would be number {limit + 1:,} for the circuit ({st.includes:,} counted before this file, "
            f"{len(inc):,} in it; the same file included twice counts twice), above the limit of {limit:,}",
            span=Span(file, s.line, s.arg_pos[0][1], len(s.args[0]) + 2),
            hint="raise it with --max-includes if the files are trusted",
        )
    st.includes += len(inc)


class _Lines:
    """A file's lines as the grammar counts them (:func:`dcnet.display.source_lines`), found on
    demand: the text is kept as it is, and the line starts are indexed at the first lookup (an
    error), never for a file that has none: a file of millions of blank lines costs no list."""

    __slots__ = ("text", "_data", "_ends")

    def __init__(self, text: str):
        self.text = text
        self._data = None
        self._ends = None

    def get(self, line: int) -> str | None:
        if self._ends is None:
            import numpy as np

            self._data = self.text.encode("utf-8", "surrogatepass")
            ends = np.flatnonzero(np.frombuffer(self._data, dtype=np.uint8) == 10)
            if not self._data.endswith(b"\n") and self._data:
                ends = np.append(ends, len(self._data))
            self._ends = ends.astype(np.uint32 if len(self._data) < 2**32 else np.int64)
        if not 0 < line <= len(self._ends):
            return None
        start = 0 if line == 1 else int(self._ends[line - 2]) + 1
        text = self._data[start : int(self._ends[line - 1])].decode("utf-8", "surrogatepass")
        return text[:-1] if text.endswith("\r") else text


def _dispatch(st: _State, s: Statement, file: str) -> None:
    _HANDLERS[s.what](st, s, file)


def _locate(st: _State, err: DcnetError, s: Statement, file: str) -> None:
    if err.span is None:
        err.with_span(Span(file, s.line, s.column, len(s.args[0]) if s.args else 1), _src(st, file, s.line))
    elif err.source_line is None:
        err.source_line = _src(st, err.span.file, err.span.line)


def _src(st: _State, file: str, line: int) -> str | None:
    if file in st.quiet:
        return None
    lines = st.lines.get(file)
    return lines.get(line) if lines is not None else None


def _title(st, s, file):
    st.net.title = s.args[0]


def _start_block(st: _State, s: Statement, file: str) -> _Block:
    name, *ports = s.args
    span = Span(file, *s.arg_pos[0], len(name))
    if st.scope.depth:
        raise InputError("a block cannot be defined inside a block instance", span=span)
    if name in st.blocks:
        prev = st.blocks[name].span
        raise InputError(f"block '{name}' is already defined (at {prev})", span=span, hint="each block name is defined once")
    if name in KINDS or name == "bank":
        raise InputError(f"'{name}' is an element kind and cannot name a block", span=span, hint="pick another name")
    if len(set(ports)) != len(ports):
        raise InputError(f"block '{name}' lists a port twice", span=span)
    return _Block(name, tuple(ports), [], file, span)


_NOT_IN_BLOCKS = ("title", "ground", "include", "part")


def _use(st: _State, s: Statement, file: str) -> None:
    inst, block_name, *nodes = s.args
    scope = st.scope
    span = Span(file, *s.arg_pos[1], len(block_name))
    block = st.blocks.get(block_name)
    if block is None:
        near = suggest(block_name, st.blocks)
        raise UnknownNameError(
            f"unknown block '{block_name}'",
            span=span,
            hint=f"did you mean '{near}'?" if near else "define it first: block NAME (PORT, ...) ... end",
        )
    if len(nodes) != len(block.ports):
        raise InputError(
            f"block '{block_name}' has {len(block.ports)} port(s) ({', '.join(block.ports)}), but {len(nodes)} node(s) are given",
            span=span,
        )
    if block_name in scope.chain:
        raise InputError(f"block '{block_name}' uses itself: {' -> '.join(scope.chain + (block_name,))}", span=span)
    if scope.depth + 1 > st.options.max_block_depth:
        raise LimitError(
            f"blocks nest deeper than {st.options.max_block_depth}",
            span=span,
            hint="raise the limit with --max-block-depth if the file is trusted",
        )
    _check_block_size(st, inst, block, span)
    st.instances += 1
    # parameters: the block's own let names, overridden by key=value on the use line
    params = {b.args[0]: b for b in block.body if b.what == "let"}
    overrides: dict[str, Quantity] = {}
    for p in s.props:
        if p.key not in params:
            near = suggest(p.key, params)
            raise UnknownNameError(
                f"block '{block_name}' has no parameter '{p.key}'",
                span=Span(file, p.line, p.column, len(p.key)),
                hint=(f"did you mean '{near}'? " if near else "") + "parameters are the block's let values: " + (", ".join(params) or "none"),
            )
        overrides[p.key] = _quantity(st, p.raw, _value_span(file, p), file)
    from collections import ChainMap

    local: dict[str, Quantity] = {}
    inner = _Scope(
        prefix=scope.name(inst) + ".",
        ports={port: scope.node(node) for port, node in zip(block.ports, nodes)},
        env=ChainMap(local, st.env),
        depth=scope.depth + 1,
        chain=scope.chain + (block_name,),
    )
    inner.overrides = overrides  # type: ignore[attr-defined]
    inner.local = local  # type: ignore[attr-defined]
    st.scope = inner
    try:
        for b in block.body:
            try:
                if b.what in _NOT_IN_BLOCKS:
                    raise InputError(f"'{b.what}' is not allowed inside a block", span=Span(block.file, b.line, b.column, len(b.what)))
                if b.what == "block":
                    raise InputError("blocks are defined at the top level, not inside another block", span=Span(block.file, b.line, b.column, 5))
                _dispatch(st, b, block.file)
            except DcnetError as err:
                _locate(st, err, b, block.file)
                if err.hint is None or "(in " not in err.hint:
                    err.hint = ((err.hint + " ") if err.hint else "") + f"(in {inner.prefix[:-1]}, placed at {span})"
                raise
    finally:
        st.scope = scope


def _check_block_size(st: _State, inst: str, block: _Block, span: Span) -> None:
    """Refuse an instance before expanding it when the elements it adds at least (or the block
    instances it makes) would pass the element limit: a fan-out of blocks (A uses ten B, B ten
    C ...) is refused at its first use line, not after expanding millions of elements."""
    elements, instances = _block_size(st, block.name, ())
    limit = st.options.max_elements
    have = len(st.net.elements)
    where = f"use {inst} of block {block.name}"
    if have + elements > limit:
        raise LimitError(
            f"{where} expands to at least {elements:,} elements" + (f", with the {have:,} before it {have + elements:,}" if have else "")
            + f", above the limit of {limit:,} elements",
            span=span,
            hint="raise the limit with --max-elements if the file is trusted",
        )
    if st.instances + instances > limit:
        raise LimitError(
            f"{where} makes {instances:,} block instances" + (f", with the {st.instances:,} before it {st.instances + instances:,}" if st.instances else "")
            + f", above the limit of {limit:,} (block instances count against the element limit)",
            span=span,
            hint="raise the limit with --max-elements if the file is trusted",
        )


def _block_size(st: _State, name: str, chain: tuple[str, ...]) -> tuple[int, int]:
    """(elements at least, block instances) of one instance of block ``name``, counted from its
    body without expanding it, once per block. A bank whose counts are plain numbers counts
    exactly; one whose counts use let values counts as one element (at least)."""
    memo = st.block_sizes.get(name)
    if memo is not None:
        return memo
    block = st.blocks.get(name)
    if block is None or name in chain:
        return 0, 0  # an unknown block or a block that uses itself: its use line says so
    elements, instances, exact = 0, 1, True
    for b in block.body:
        if b.what == "element":
            elements += _bank_size(st, b) if b.args and b.args[0] == "bank" else 1
        elif b.what == "use" and len(b.args) > 1:
            if b.args[1] not in st.blocks or b.args[1] in chain + (name,):
                exact = False
            e, n = _block_size(st, b.args[1], chain + (name,))
            elements += e
            instances += n
    if exact:
        st.block_sizes[name] = (elements, instances)
    return elements, instances


def _bank_size(st: _State, s: Statement) -> int:
    """The elements a bank statement expands to, when its counts are plain numbers; else 1."""
    from .banks import element_count

    counts = {}
    for p in s.props:
        if p.key in ("series", "parallel"):
            try:
                tree = parse_value(p.raw, _value_span("", p))
                if names_in(tree[1]) - _unit_names(tree[1]) or tree[2] is not None:
                    return 1
                x = evaluate(tree[1], {}).value
            except (DcnetError, ExpressionProblem):
                return 1
            if not (x >= 1 and x == int(x) and x <= 100_000):
                return 1
            counts[p.key] = int(x)
    if len(counts) != 2:
        return 1
    return element_count(counts["series"], counts["parallel"], {p.key for p in s.props})


def _let(st: _State, s: Statement, file: str) -> None:
    name, raw = s.args
    (nl, nc), (vl, vc) = s.arg_pos
    if name in KEYWORDS or name in KINDS:
        raise InputError(f"'{name}' is a keyword and cannot name a value", span=Span(file, nl, nc, len(name)), hint="pick another name")
    if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", name):
        raise InputError(
            f"'{name}' cannot name a value: value names hold letters, digits and '_' only",
            span=Span(file, nl, nc, len(name)),
            hint="expressions read '-', '+' and '.' as arithmetic; e.g. let r_int = 4.5mOhm",
        )
    if lookup_unit(name) is not None:
        raise InputError(f"'{name}' is a unit and cannot name a value", span=Span(file, nl, nc, len(name)), hint=f"pick another name, e.g. {name}_1")
    scope = st.scope
    target = st.env if scope.depth == 0 else scope.local  # type: ignore[attr-defined]
    if name in target:
        raise InputError(f"value '{name}' is already defined", span=Span(file, nl, nc, len(name)), hint="each let name is defined once")
    span = Span(file, vl, vc, len(raw))
    tree = _parse_value(st, raw, span, file)
    if scope.depth and name in scope.overrides:  # type: ignore[attr-defined]
        q = scope.overrides[name]  # type: ignore[attr-defined]
        if q.dim != _eval(st, tree[1], span).dim:
            raise DimensionError(f"parameter '{name}' of this block is {dim_name(_eval(st, tree[1], span).dim)}, but the use line gives {dim_name(q.dim)}", span=span)
        target[name] = q
        return
    q = _eval(st, tree[1], span)
    tol = None
    if tree[2] is not None:
        t = _eval(st, tree[2], span)
        if t.dim == DIMENSIONLESS:
            tol = abs(t.value * q.value)
        elif t.dim == q.dim:
            tol = abs(t.value)
        else:
            raise DimensionError(
                f"the tolerance of '{name}' is {dim_name(t.dim)}, expected a percentage or {dim_name(q.dim)}",
                span=span,
            )
    qualified = scope.prefix + name
    if st.options.let_values and qualified in st.options.let_values:
        q = Quantity(float(st.options.let_values[qualified]), q.dim)  # a study's point
    target[name] = q
    st.net.values[qualified] = (q.value, q.dim, tol)
    st.net.exprs[("let", qualified)] = tree


def _depth(tree) -> int:
    """Nesting depth of an expression tree (iterative: deep trees must not blow the stack)."""
    deepest = 0
    stack = [(tree, 1)]
    while stack:
        node, d = stack.pop()
        if d > deepest:
            deepest = d
        if not isinstance(node, tuple) or node[0] in ("q", "name"):
            continue
        children = node[3] if node[0] == "call" else node[1:]
        stack.extend((c, d + 1) for c in children if isinstance(c, tuple))
    return deepest


def _eval(st: _State, tree, span: Span) -> Quantity:
    depth = _depth(tree)
    if depth > st.options.max_expression_depth:
        raise LimitError(
            f"the expression nests {depth} levels deep, above the limit of {st.options.max_expression_depth}",
            span=span,
            hint="simplify it with let values, or raise the limit with --max-expression-depth",
        )
    try:
        env = st.scope.env
        return evaluate(tree, env, lambda w: suggest(w, list(env)))
    except ExpressionProblem as p:
        raise p.error_class(
            p.message,
            span=Span(span.file, span.line, span.column + p.column - 1, p.length),
            hint=p.hint,
        ) from None


def _no_such_property(owner: str, takes: str, known, p: Prop, file: str, extra=()) -> UnknownNameError:
    """'OWNER has no property KEY', pointing at the key, with the nearest known one."""
    near = suggest(p.key, list(known) + list(extra))
    return UnknownNameError(
        f"{owner} has no property '{p.key}'",
        span=Span(file, p.line, p.column, len(p.key)),
        hint=(f"did you mean '{near}'? " if near else "") + f"{takes}: " + ", ".join(known),
    )


def _value_span(file: str, p: Prop) -> Span:
    return Span(file, p.line, p.value_column, len(p.raw))


def _resolve_prop(st: _State, kind: Kind, p: Prop, file: str, owner: str) -> Any:
    spec = kind.props.get(p.key)
    if spec is None:
        raise _no_such_property(f"a {kind.name}", f"a {kind.name} takes", kind.props, p, file, extra=("part",))
    span = _value_span(file, p)
    if spec.form == "word":
        word = p.raw.strip()
        if spec.words and word not in spec.words:
            low = word.lower()
            if low in spec.words:
                return low
            near = suggest(word, spec.words)
            raise UnknownNameError(
                f"'{word}' is not a known {p.key} for a {kind.name}",
                span=span,
                hint=(f"did you mean '{near}'? " if near else "") + "one of: " + ", ".join(spec.words),
            )
        return word
    if spec.form == "words":
        return tuple(w.strip() for w in p.raw.split(",") if w.strip())
    if spec.form == "gauge":
        scan_lookalikes(p.raw, span, _src(st, file, span.line))
        return p.raw.strip()
    q = _quantity(st, p.raw, span, file)
    if st.last_tree is not None:
        st.pending_deps[p.key] = st.last_tree
    if q.dim != spec.dim:
        hint = None
        if q.dim == DIMENSIONLESS:
            hint = f"add a unit, e.g. {p.key}={p.raw}{_example_unit(spec.dim)}"
        raise DimensionError(
            f"{p.key} of {owner} must be {dim_name(spec.dim)}, got {dim_name(q.dim)}",
            span=span,
            hint=hint,
        )
    if spec.check is not None:
        try:
            spec.check(p.key, q.value)
        except ValueRangeError as err:
            written = p.raw.strip()
            if not written.startswith(f"{q.value:g}") and written not in err.message:  # the check words SI numbers
                err.message += f" (written {written})"
            err.with_span(span)
            raise
    return q.value


def _example_unit(dim) -> str:
    from ..units import UNITS

    for sym in ("V", "A", "Ohm", "W", "Ah", "m", "mm2", "degC", "s", "J", "S"):
        if UNITS[sym].dim == dim:
            return sym
    return ""


def _quantity(st: _State, raw: str, span: Span, file: str) -> Quantity:
    st.last_tree = None
    q = st.const_cache.get(raw)
    if q is not None:
        return q
    tree = _parse_value(st, raw, span, file)
    if tree[2] is not None:
        raise InputError(
            "a tolerance (±) belongs on a let value",
            span=span,
            hint="write: let NAME = VALUE ± 5%, then use NAME here",
        )
    q = _eval(st, tree[1], span)
    if not names_in(tree[1]) - _unit_names(tree[1]):
        st.const_cache[raw] = q
    elif st.scope.depth == 0:
        st.last_tree = tree[1]  # depends on let values: studies re-evaluate it
    return q


def _parse_value(st: _State, raw: str, span: Span, file: str):
    """parse_value, with the source line looked up only when there is an error to show it in."""
    try:
        return parse_value(raw, span, None)
    except DcnetError as err:
        if err.source_line is None:
            err.source_line = _src(st, file, span.line)
        raise


def _unit_names(tree) -> set[str]:
    return {n for n in names_in(tree) if lookup_unit(n) is not None}


def _part(st: _State, s: Statement, file: str) -> None:
    name, kind_name = s.args
    kind = _kind(st, kind_name, file, s.arg_pos[1])
    if name in st.parts:
        raise InputError(f"part '{name}' is already defined", span=Span(file, *s.arg_pos[0], len(name)))
    values = {}
    st.pending_deps = {}
    for p in s.props:
        if p.key == "part":
            raise InputError("a part cannot use another part", span=Span(file, p.line, p.column, 4))
        values[p.key] = _resolve_prop(st, kind, p, file, f"part {name}")
    st.parts[name] = (kind.name, values, Span(file, s.line, s.column, len(name)))
    st.part_deps[name] = dict(st.pending_deps)
    st.pending_deps = {}


def _kind(st: _State, kind_name: str, file: str, pos) -> Kind:
    kind = KINDS.get(kind_name)
    if kind is None:
        near = suggest(kind_name, list(KINDS) + list(KEYWORDS))
        raise UnknownNameError(
            f"unknown element kind '{kind_name}'",
            span=Span(file, pos[0], pos[1], len(kind_name)),
            hint=(f"did you mean '{near}'? " if near else "") + "kinds: " + ", ".join(KINDS),
        )
    return kind


def _element(st: _State, s: Statement, file: str) -> None:
    kind_name, local_name, a, b = s.args
    if kind_name == "bank":
        from .banks import expand_bank

        expand_bank(st, s, file)
        return
    kind = _kind(st, kind_name, file, s.arg_pos[0])
    name = st.scope.name(local_name)
    name_span = Span(file, *s.arg_pos[1], len(local_name))
    _check_new_name(st, name, name_span)
    values = element_values(st, kind, s.props, file, name, name_span)
    add_element(st, Element(name, kind.name, (st.scope.node(a), st.scope.node(b)), values, Span(file, s.line, s.column, len(kind_name))))


def _check_new_name(st: _State, name: str, span: Span) -> None:
    if st.net.has_element(name):
        prev = st.net.element(name).span
        raise InputError(
            f"element name '{name}' is already used (at {prev})",
            span=span,
            hint="element names are unique in a circuit",
        )


def element_values(st: _State, kind: Kind, props, file: str, name: str, name_span: Span, extra: dict[str, Any] | None = None) -> dict[str, Any]:
    """Resolve an element's properties: its own, then its part's, then the kind's defaults;
    ``extra`` (already resolved) overrides the part. Runs the kind's ``finish``."""
    values: dict[str, Any] = {}
    part_prop = None
    st.pending_deps = {}
    for p in props:
        if p.key == "part":
            part_prop = p
            continue
        if p.key in values:
            raise InputError(f"property '{p.key}' is given twice", span=Span(file, p.line, p.column, len(p.key)))
        values[p.key] = _resolve_prop(st, kind, p, file, name)
    deps = dict(st.pending_deps)
    if part_prop is not None:
        pname = part_prop.raw.strip()
        merged = dict(_part_values(st, kind, pname, name, _value_span(file, part_prop)))
        merged.update(values)
        values = merged
        deps = {**{k: t for k, t in st.part_deps.get(pname, {}).items() if k not in deps}, **deps}
    if extra:
        values.update(extra)
        for k in extra:
            deps.pop(k, None)
    st.pending_deps = deps
    for spec in kind.props.values():
        if spec.name not in values:
            if spec.required:
                raise InputError(
                    f"{kind.name} {name} needs {spec.name}= ({spec.doc})",
                    span=name_span,
                    hint=f"add {spec.name}=... to the line",
                )
            if spec.default is not None:
                values[spec.name] = spec.default
    try:
        given = set(values)
        return check_finished(kind.finish(values), given)
    except DcnetError as err:
        at = next((p for p in props if p.key == getattr(err, "prop", None)), None)
        if at is not None:  # the kind says which property is wrong: point at its value
            err.with_span(_value_span(file, at), _src(st, file, at.line))
        err.with_span(name_span, _src(st, file, name_span.line))
        if err.element is None:
            err.element = name
        raise


def _part_values(st: _State, kind: Kind, pname: str, owner: str, span: Span) -> dict[str, Any]:
    part = st.parts.get(pname)
    if part is None:
        near = suggest(pname, st.parts)
        raise UnknownNameError(
            f"unknown part '{pname}'",
            span=span,
            hint=f"did you mean '{near}'?" if near else "define it first with: part NAME KIND key=value ...",
        )
    if part[0] != kind.name:
        raise InputError(f"part '{pname}' is a {part[0]}, but {owner} is a {kind.name}", span=span)
    return part[1]


def add_element(st: _State, element: Element) -> None:
    """Add a finished element to the netlist, within the element-count limit."""
    if len(st.net.elements) >= st.options.max_elements:
        raise LimitError(
            f"more than {st.options.max_elements:,} elements",
            hint="raise the limit with --max-elements if the file is trusted",
        )
    st.net.add(element)
    for key, tree in st.pending_deps.items():
        st.net.exprs[("element", element.name, key)] = tree
    st.pending_deps = {}


def _ground(st: _State, s: Statement, file: str) -> None:
    node = s.args[0]
    span = Span(file, *s.arg_pos[0], len(node))
    if st.net.ground is not None and st.net.ground != node:
        raise InputError(f"ground is already set to '{st.net.ground}'", span=span, hint="a circuit has one ground statement")
    st.net.ground = node
    st.net.ground_rule = "ground statement"
    st.ground_span = span


def _practice(st: _State, s: Statement, file: str) -> None:
    """The rule set the circuit is built to (data/practices.tsv): limits that depend on it."""
    from ..data import practice_names

    name = s.args[0]
    span = Span(file, *s.arg_pos[0], len(name))
    if st.scope.depth:
        raise InputError("practice belongs at the top level, not inside a block", span=span)
    known = practice_names()
    if name not in known:
        near = suggest(name, known)
        raise UnknownNameError(
            f"unknown practice '{name}'", span=span, hint=(f"did you mean '{near}'? " if near else "") + "practices: " + ", ".join(known)
        )
    if st.net.practice is not None and st.net.practice != name:
        raise InputError(f"practice is already set to '{st.net.practice}'", span=span, hint="a circuit is built to one practice")
    st.net.practice = name


def _include(st: _State, s: Statement, file: str, folder: Path) -> None:
    rel = s.args[0]
    span = Span(file, s.line, s.arg_pos[0][1], len(rel) + 2)
    if len(st.include_stack) > st.options.max_include_depth:
        raise LimitError(
            f"includes nest deeper than {st.options.max_include_depth}",
            span=span,
            hint="raise the limit with --max-include-depth if the files are trusted",
        )
    bad = next((ch for ch in rel if ord(ch) < 32 or ord(ch) == 127), None)
    if bad is not None:
        raise IncludeError(
            f"the include path holds the control character {bad!r}",
            span=span,
            hint="a file name cannot hold control characters (NUL, tab, escape ...); check how the file was written",
        )
    try:
        target = (folder / rel).resolve()  # resolves symlinks before the check
    except (OSError, RuntimeError, ValueError) as exc:  # a symlink loop, a name too long ...
        raise IncludeError(f"include '{rel}' cannot be followed: {getattr(exc, 'strerror', None) or exc}", span=span) from None
    inside = True
    if st.root is not None:
        try:
            target.relative_to(st.root)
        except ValueError:
            inside = False
    if not inside and not st.options.allow_outside:
        raise IncludeError(
            f"include '{rel}' points outside the circuit's folder",
            span=span,
            hint="pass --allow-outside-includes if you trust the file",
        )
    if target in st.include_stack:
        chain = " -> ".join(p.name for p in st.include_stack[st.include_stack.index(target):] + [target])
        raise IncludeError(f"include cycle: {chain}", span=span, hint="remove one of the includes")
    st.net.files.append(str(target))  # before reading: an output never overwrites it, even if it is refused
    text = _read_include(st, target, rel, span)
    st.include_stack.append(target)
    try:
        _run(st, text, str(target), target.parent, echo=inside)
    finally:
        st.include_stack.pop()


#: the unit kind of each limit's max/min
_LIMIT_DIMS = {"imbalance": DIMENSIONLESS, "drop": DIMENSIONLESS, "current": CURRENT, "circulating": CURRENT, "voltage": VOLTAGE}
#: properties a limit rule cannot do without ("|": one of them)
_LIMIT_NEEDS = {
    "imbalance": ("among",),
    "circulating": ("max", "among"),
    "drop": ("from", "to"),
    "current": ("of", "max|min"),
    "voltage": ("of|from", "max|min"),
}


def _limit(st: _State, s: Statement, file: str) -> None:
    rule = s.args[0]
    props = LIMIT_RULES.get(rule)
    rule_span = Span(file, *s.arg_pos[0], len(rule))
    if props is None:
        near = suggest(rule, LIMIT_RULES)
        raise UnknownNameError(
            f"unknown limit rule '{rule}'",
            span=rule_span,
            hint=(f"did you mean '{near}'? " if near else "") + "rules: " + ", ".join(LIMIT_RULES),
        )
    values: dict[str, Any] = {}
    spans: dict[str, Span] = {}
    for p in s.props:
        form = props.get(p.key)
        if form is None:
            raise _no_such_property(f"limit {rule}", "it takes", props, p, file)
        if p.key in values:
            raise InputError(f"property '{p.key}' is given twice", span=Span(file, p.line, p.column, len(p.key)))
        scope = st.scope
        span = spans[p.key] = _value_span(file, p)
        if form == "quantity":
            q = _quantity(st, p.raw, span, file)
            want = _LIMIT_DIMS[rule]
            if q.dim != want:
                raise DimensionError(
                    f"{p.key} of limit {rule} must be {dim_name(want)}, got {dim_name(q.dim)}",
                    span=span,
                    hint=f"e.g. {p.key}=5{_example_unit(want) or '%'}" if want != DIMENSIONLESS else "e.g. max=10%",
                )
            if not q.value > 0 and not (p.key == "min" and q.value == 0):
                raise ValueRangeError(
                    f"{p.key} of limit {rule} must be greater than zero, got {q.value:g}",
                    span=span,
                    hint="limits are on magnitudes (currents and voltages either way round)",
                )
            values[p.key] = q
        elif form == "words":
            words = tuple(scope.name(w.strip()) for w in p.raw.split(",") if w.strip())
            for m in re.finditer(r"[^,\s]+", p.raw):  # each name's own span, for messages
                spans[(p.key, scope.name(m.group(0)))] = Span(file, p.line, p.value_column + m.start(), len(m.group(0)))
            if not words:
                raise InputError(f"{p.key}= of limit {rule} names nothing", span=span, hint=f"write {p.key}=NAME,NAME ...")
            values[p.key] = words
        else:
            values[p.key] = scope.node(p.raw.strip())
    for need in _LIMIT_NEEDS[rule]:
        keys = need.split("|")
        if not any(k in values for k in keys):
            raise InputError(
                f"limit {rule} needs {' or '.join(k + '=' for k in keys)}",
                span=rule_span,
                hint=f"it is written: {_LIMIT_USAGE[rule]}",
            )
    if ("from" in values) != ("to" in values):
        raise InputError(f"limit {rule} needs both from= and to=", span=rule_span, hint=f"it is written: {_LIMIT_USAGE[rule]}")
    if "max" in values and "min" in values and values["min"].value > values["max"].value:
        raise ValueRangeError(f"min of limit {rule} is above its max", span=spans["min"])
    lim = Limit(rule, values, Span(file, s.line, s.column, len(rule)))
    st.net.limits.append(lim)
    st.limit_spans.append((lim, spans))


_LIMIT_USAGE = {
    "imbalance": "limit imbalance max=10% among=BANK (or among=A,B,...)",
    "circulating": "limit circulating max=2A among=BANK",
    "drop": "limit drop max=3% from=NODE to=NODE",
    "current": "limit current max=50A of=A,B",
    "voltage": "limit voltage max=14.4V min=11V of=A,B (or from=NODE to=NODE)",
}


def _check_limit_names(st: _State) -> None:
    """Every name a limit statement gives must be an element, bank or node of the circuit
    (a limit that names nothing would silently check nothing)."""
    net = st.net
    for lim, spans in st.limit_spans:
        for key, span in list(spans.items()):
            if not isinstance(key, str) or key in ("max", "min"):
                continue
            got = lim.values[key]
            words = {k[1]: sp for k, sp in spans.items() if isinstance(k, tuple) and k[0] == key}
            if key in ("from", "to"):
                _known(st, "node", [got], net.node_index, span)
            elif key == "of":
                _known(st, "element", got, net._by_name, span, words)
            elif lim.rule == "circulating":
                _known(st, "bank", got, net.banks, span, words)
            elif len(got) == 1 and got[0] not in net.banks:  # imbalance among: one bank, or two or more elements
                _known(st, "bank", got, net.banks, span, words, also=net._by_name)
                raise InputError(
                    f"limit imbalance among={got[0]} names one element; an imbalance is between two or more",
                    span=span,
                    source_line=_src(st, span.file, span.line),
                    hint="name a bank (among=BANK) or two or more elements (among=A1,A2)",
                )
            elif len(got) > 1:
                _known(st, "element", got, net._by_name, span, words)


def _known(st: _State, what: str, names, table, span: Span, spans=None, also=None) -> None:
    for name in names:
        if name in table or (also is not None and name in also):
            continue
        span = (spans or {}).get(name, span)
        pool = list(table) + (list(also) if also is not None else [])
        near = suggest(name, pool) if len(pool) <= 100_000 else None
        known = ", ".join(list(table)[:8]) + (" ..." if len(table) > 8 else "")
        odd = next((lookalike_hint(ch) for ch in name if not ch.isascii() and lookalike_hint(ch)), None)
        raise UnknownNameError(
            f"limit names '{name}', which is not {'an' if what[0] in 'ae' else 'a'} {what} of the circuit",
            span=span,
            source_line=_src(st, span.file, span.line),
            hint=(odd + "; " if odd else "") + (f"did you mean '{near}'?" if near else (f"{what}s: {known}" if table else f"the circuit has no {what}s")),
        )


def _phase(st: _State, s: Statement, file: str) -> None:
    """A phase of the charge/discharge schedule (see dcnet.analysis.cycle)."""
    from ..analysis.cycle import PHASE_PROPS, Phase

    label = s.args[0]
    if st.scope.depth:
        raise InputError("phases belong at the top level, not inside a block", span=Span(file, *s.arg_pos[0], len(label)))
    values: dict[str, Any] = {}
    for p in s.props:
        spec = PHASE_PROPS.get(p.key)
        if spec is None:
            raise _no_such_property("a phase", "a phase takes", PHASE_PROPS, p, file)
        if p.key in values:
            raise InputError(f"property '{p.key}' is given twice", span=Span(file, p.line, p.column, len(p.key)))
        span = _value_span(file, p)
        if spec == "words":
            values[p.key] = tuple(w.strip() for w in p.raw.split(",") if w.strip())
        elif spec == "word":
            values[p.key] = p.raw.strip()
        else:
            q = _quantity(st, p.raw, span, file)
            if q.dim != spec:
                raise DimensionError(f"{p.key} of phase {label} must be {dim_name(spec)}, got {dim_name(q.dim)}", span=span)
            if p.key in ("for", "max", "step") and q.value <= 0:
                raise ValueRangeError(f"{p.key} must be greater than zero, got {q.value:g} s", span=span)
            if p.key in ("soc_above", "soc_below") and not 0.0 <= q.value <= 1.0:
                raise ValueRangeError(
                    f"{p.key} must lie between 0% and 100%, got {q.value * 100:g}%",
                    span=span,
                    hint="a state of charge outside 0..100 % is never reached: the phase would end at once or never",
                )
            values[p.key] = q.value
    try:
        st.net.phases.append(Phase.from_values(label, values, Span(file, s.line, s.column, len(label))))
    except DcnetError as err:
        err.with_span(Span(file, *s.arg_pos[0], len(label)), _src(st, file, s.line))
        raise


_HANDLERS.update(
    {
        "phase": _phase,
        "element": _element,
        "let": _let,
        "part": _part,
        "ground": _ground,
        "title": _title,
        "limit": _limit,
        "practice": _practice,
        "use": _use,
    }
)


# ------------------------------------------------------------------ finish
def _finish(st: _State) -> None:
    net = st.net
    for ph in net.phases:
        try:
            ph.check_names(net)
        except DcnetError as err:
            if err.span is not None and err.source_line is None:
                err.source_line = _src(st, err.span.file, err.span.line)
            raise
    if not net.elements:
        raise InputError(
            "the circuit has no elements",
            span=Span(net.files[0] if net.files else "<text>"),
            hint="add at least a source or cell and a load",
        )
    _check_limit_names(st)
    if net.ground is not None:
        if net.ground not in net.node_index:
            near = suggest(net.ground, net.node_index)
            raise UnknownNameError(
                f"ground node '{net.ground}' is not a terminal of any element",
                span=st.ground_span,
                source_line=_src(st, st.ground_span.file, st.ground_span.line) if st.ground_span else None,
                hint=f"did you mean '{near}'?" if near else None,
            )
        return
    for cand in _GROUND_NAMES:
        if cand in net.node_index:
            net.ground, net.ground_rule = cand, f"no ground statement; picked the node named '{cand}'"
            return
    for el in net.elements:
        if KINDS[el.kind].is_source:
            net.ground = el.nodes[1]
            net.ground_rule = f"no ground statement; picked '{el.nodes[1]}', the negative terminal of {el.name}, the first source"
            return
    net.ground = net.elements[0].nodes[0]
    net.ground_rule = f"no ground statement; picked '{net.ground}', the first node in the file"
