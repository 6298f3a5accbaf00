"""Text to statement records, with the grammar in ``grammar/dcnet.lark``.

One LALR parser serves two start symbols: ``file`` (statements, whose property
values stay raw text) and ``value`` (one expression, parsed on demand by the
elaborator and cached). A small :class:`lark.Transformer` runs inline with the
parser, so no parse tree is built.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from lark import Lark, Token, Transformer
from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken, VisitError

from ..errors import DcnetError, InputError, Span, SyntaxError, UnknownNameError, ValueRangeError
from ..units import Quantity, lookup_unit, suggest_unit
from .expressions import MAX_MAGNITUDE, MIN_MAGNITUDE

__all__ = [
    "Prop",
    "Statement",
    "parse_statements",
    "parse_value",
    "grammar_path",
    "KEYWORDS",
]

KEYWORDS = ("title", "let", "part", "ground", "include", "limit", "block", "end", "use", "phase", "practice")


# ----------------------------------------------------------------- records
@dataclass(frozen=True, slots=True)
class Prop:
    """``key=value`` with the value kept as raw text and where each stands."""

    key: str
    raw: str
    line: int
    column: int  # column of the key
    value_column: int


@dataclass(frozen=True, slots=True)
class Statement:
    """One statement: ``what`` is a keyword or ``"element"``; ``args`` its words."""

    what: str
    args: tuple[str, ...]
    props: tuple[Prop, ...]
    line: int
    column: int
    # (line, column) of each arg, for messages about one word
    arg_pos: tuple[tuple[int, int], ...] = ()


# ------------------------------------------------------------------ grammar
def grammar_path() -> Path:
    """Where ``dcnet.lark`` is: packaged beside the code, or in the source tree."""
    here = Path(__file__).resolve().parent.parent
    for cand in (here / "grammar" / "dcnet.lark", here.parent / "grammar" / "dcnet.lark"):
        if cand.is_file():
            return cand
    raise FileNotFoundError("grammar/dcnet.lark not found beside the dcnet package")


def _pos(tok: Token) -> tuple[int, int]:
    return (tok.line, tok.column)


class _Builder(Transformer):
    """Builds statement records and expression trees while parsing."""

    # statements ----------------------------------------------------------
    def file(self, items):
        return [s for s in items if isinstance(s, Statement)]

    def _make(self, what, toks, props, first):
        return Statement(what, tuple(str(t) for t in toks), _props(props), first.line, first.column, tuple(_pos(t) for t in toks))

    def element(self, items):
        head = items[0]
        words = head.split()
        line, col = head.line, head.column
        return Statement("element", tuple(words), _props(items[1:]), line, col, _word_positions(head, line, col))

    def title(self, items):
        tok = items[0]
        return Statement("title", (str(tok)[1:-1],), (), tok.line, 1, (_pos(tok),))

    def let(self, items):
        name, raw = items
        return Statement("let", (str(name), str(raw).rstrip()), (), name.line, 1, (_pos(name), _pos(raw)))

    def part(self, items):
        return self._make("part", items[:2], items[2:], items[0])

    def ground(self, items):
        return self._make("ground", items[:1], (), items[0])

    def practice(self, items):
        return self._make("practice", items[:1], (), items[0])

    def include(self, items):
        tok = items[0]
        return Statement("include", (str(tok)[1:-1],), (), tok.line, 1, (_pos(tok),))

    def limit(self, items):
        return self._make("limit", items[:1], items[1:], items[0])

    def phase(self, items):
        return self._make("phase", items[:1], items[1:], items[0])

    def block(self, items):
        toks = [t for t in items if isinstance(t, Token)]
        return self._make("block", toks, (), toks[0])

    def end(self, items):
        tok = items[0]
        return Statement("end", (), (), tok.line, tok.column)

    def use(self, items):
        toks = [t for t in items if isinstance(t, Token) and t.type == "IDENT"]
        props = [t for t in items if isinstance(t, Token) and t.type == "PROPS"]
        return self._make("use", toks, props, toks[0])

    # values ---------------------------------------------------------------
    def value(self, items):
        return ("value", items[0], items[1] if len(items) > 1 else None)

    def quantity(self, items):
        tok = items[0]
        return ("q", _quantity(str(tok)), tok.column, len(tok))

    def name(self, items):
        tok = items[0]
        return ("name", str(tok), tok.column, len(tok))

    def call(self, items):
        fn = items[0]
        return ("call", str(fn), fn.column, items[1:])

    def add(self, items):
        return ("add", items[0], items[1])

    def sub(self, items):
        return ("sub", items[0], items[1])

    def mul(self, items):
        return ("mul", items[0], items[1])

    def div(self, items):
        return ("div", items[0], items[1])

    def pow(self, items):
        return ("pow", items[0], items[1])

    def neg(self, items):
        return ("neg", items[0])

    def unary(self, items):
        return items[0]


_WORD = re.compile(r"\S+")
_PROP: re.Pattern | None = None


def _prop_pattern() -> re.Pattern:
    """key=value splitter, built from the grammar's own VALUE terminal (one source of truth)."""
    global _PROP
    if _PROP is None:
        line = next(x for x in grammar_path().read_text(encoding="utf-8").splitlines() if x.startswith("VALUE:"))
        value = line[line.index("/") + 1 : line.rindex("/")]
        _PROP = re.compile(r"([A-Za-z_][A-Za-z0-9_.]*)[ \t]*=[ \t]*(" + value + ")")
    return _PROP


def _word_positions(tok: Token, line: int, col: int) -> tuple[tuple[int, int], ...]:
    return tuple((line, col + m.start()) for m in _WORD.finditer(tok))


def _props(tokens) -> tuple[Prop, ...]:
    """Split PROPS tokens into key=value records with their columns."""
    out = []
    for tok in tokens:
        line, col = tok.line, tok.column
        for m in _prop_pattern().finditer(tok):
            out.append(Prop(m.group(1), m.group(2), line, col + m.start(1), col + m.start(2)))
    return tuple(out)


_NONZERO_DIGIT = re.compile(r"[1-9]")
_NUM = re.compile(r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+\-]?[0-9]+)?")


class _NumberError(Exception):
    def __init__(self, text: str, small: bool = False):
        self.text, self.small = text, small


class _UnitError(Exception):
    def __init__(self, unit: str, offset: int):
        self.unit, self.offset = unit, offset


def _quantity(text: str) -> Quantity:
    m = _NUM.match(text)
    number = float(m.group(0))
    if not math.isfinite(number) or number > MAX_MAGNITUDE:
        raise _NumberError(m.group(0))
    nonzero = number != 0 or bool(_NONZERO_DIGIT.search(m.group(0).partition("e")[0].partition("E")[0]))
    if nonzero and number < MIN_MAGNITUDE:  # also 1e-400, which reads as zero
        raise _NumberError(m.group(0), small=True)
    rest = text[m.end():]
    unit = rest.strip()
    if not unit:
        return Quantity(number)
    q = lookup_unit(unit)
    if q is None:
        raise _UnitError(unit, len(text) - len(unit))
    value = number * q.value
    if not math.isfinite(value) or value > MAX_MAGNITUDE:
        raise _NumberError(text)
    if nonzero and value < MIN_MAGNITUDE:
        raise _NumberError(text, small=True)
    return Quantity(value, q.dim)


@lru_cache(maxsize=1)
def _parser() -> Lark:
    """The LALR parser; its tables are cached on disk (per user) to speed up start-up.

    A new cache is written under a temporary name and renamed into place, so
    parallel workers never read a half-written file.
    """
    import os

    grammar = grammar_path().read_text(encoding="utf-8")
    final = _cache_file()

    def build(cache):
        return Lark(
            grammar,
            parser="lalr",
            start=["file", "value"],
            transformer=_Builder(),
            propagate_positions=False,
            maybe_placeholders=False,
            cache=cache,
        )

    if not final:
        return build(False)
    if os.path.exists(final):
        return build(final)
    tmp = f"{final}.{os.getpid()}.tmp"
    try:
        parser = build(tmp)
        os.replace(tmp, final)
        return parser
    except OSError:
        return build(False)
    finally:
        if os.path.exists(tmp):
            try:
                os.remove(tmp)
            except OSError:
                pass


def _cache_file() -> str | None:
    """Where the parse tables are cached, keyed by grammar and lark version; None if nowhere writable."""
    import hashlib
    import os
    import sys
    import tempfile

    import lark

    text = grammar_path().read_bytes()
    digest = hashlib.sha256(text + lark.__version__.encode() + str(sys.version_info[:2]).encode()).hexdigest()[:16]
    bases = [os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache"), tempfile.gettempdir()]
    for base in bases:
        folder = os.path.join(base, "dcnet")
        try:
            os.makedirs(folder, exist_ok=True)
        except OSError:
            continue
        if os.access(folder, os.W_OK):
            return os.path.join(folder, f"grammar-{digest}.lark-cache")
    return None


# ----------------------------------------------------------- error mapping
_TERMINAL_WORDS = {
    "IDENT": "a name",
    "ELEMHEAD": "an element line (KIND NAME NODE NODE)",
    "PROPS": "a property written key=value",
    "VALUE": "a value",
    "LETVALUE": "a value",
    "STRING": 'a quoted text ("...")',
    "EQUAL": "'='",
    "_NL": "the end of the line",
    "$END": "the end of the file",
    "LPAR": "'('",
    "RPAR": "')'",
    "COMMA": "','",
    "QUANTITY": "a number",
    "NAME": "a name",
    "PLUS": "'+'",
    "MINUS": "'-'",
    "STAR": "'*'",
    "SLASH": "'/'",
    "CIRCUMFLEX": "'^'",
}


def _describe_expected(expected: set[str]) -> str:
    words = []
    for t in sorted(expected):
        if t.startswith("__ANON") or t in ("CONTINUATION", "COMMENT", "_TOL", "_BLANKS"):
            continue
        w = _TERMINAL_WORDS.get(t, f"'{t.lower()}'" if t.isupper() and len(t) < 10 else t)
        if w not in words:
            words.append(w)
    if not words:
        return "something else"
    if len(words) == 1:
        return words[0]
    return ", ".join(words[:-1]) + " or " + words[-1]


def _statement_context(line_text: str, column: int) -> str | None:
    """A friendlier reading of where in a statement the parser stopped."""
    head = line_text[: column - 1].split()
    if not head:
        return None
    first = head[0]
    if first in KEYWORDS:
        return None
    if len(head) == 1:
        return "an element name after the kind"
    if len(head) == 2:
        return "the first node name after the element name"
    if len(head) == 3:
        return "the second node name"
    return "a property written key=value"


_KEYVAL = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*[ \t]*=")


def _diagnose_line(src: str, column: int):
    """Common mistakes on an element line, in words: (message, column, length, hint) or None."""
    stripped = src.lstrip()
    indent = len(src) - len(stripped)
    if column - 1 > indent or not stripped or stripped.startswith("#"):
        return None
    words = stripped.split()
    if words[0] in KEYWORDS:
        return None
    head = []
    for w in words:
        if "=" in w:
            break
        head.append(w)
    if len(head) < 4:
        what = ["the element kind", "an element name", "the first node name", "the second node name"][len(head)]
        col = indent + 1 + (len(" ".join(head)) if head else 0) + (1 if head else 0)
        return (
            f"an element line needs KIND NAME NODE NODE before its properties; {what} is missing",
            min(col, len(src) + 1),
            1,
            "for example: cell A1 bat+ gnd emf=12.7V r=5mOhm",
        )
    if len(head) > 4:
        col = src.find(head[4], indent + len(" ".join(head[:4])))
        return (
            f"found '{head[4]}' where a property (key=value) was expected",
            col + 1,
            len(head[4]),
            "an element line is KIND NAME NODE NODE key=value ...; a value with blanks must follow '=' directly",
        )
    bad = [w for w in head if not re.fullmatch(r"[A-Za-z0-9_][A-Za-z0-9_.+\-]*", w)]
    if bad:
        col = src.find(bad[0], indent)
        odd = next((ch for ch in bad[0] if not ch.isascii() and lookalike_hint(ch)), None)
        return (
            f"'{bad[0]}' is not a valid name",
            col + 1,
            len(bad[0]),
            (lookalike_hint(odd) + "; " if odd else "") + "names start with a letter, digit or '_' and hold ASCII letters, digits, '_', '.', '+' and '-'",
        )
    return None


def _syntax_error(exc: UnexpectedInput, text: str, file: str, line_offset: int = 0, col_offset: int = 0) -> DcnetError:
    from ..display import source_lines

    lines = source_lines(text)  # numbered as the grammar counts lines
    line = getattr(exc, "line", 0) or 0
    column = getattr(exc, "column", 0) or 0
    at_end = isinstance(exc, UnexpectedEOF) or (isinstance(exc, UnexpectedToken) and exc.token.type == "$END")
    if at_end or line <= 0:
        line = max(len(lines), 1)
        column = len(lines[-1]) + 1 if lines else 1
    src = lines[line - 1] if 0 < line <= len(lines) else ""
    if isinstance(exc, UnexpectedCharacters):
        ch = src[column - 1] if column - 1 < len(src) else ""
        found = f"the character {ch!r}"
        if ch and not ch.isascii() and lookalike_hint(ch):
            return SyntaxError(
                f"found the character {ch!r} (U+{ord(ch):04X})",
                span=Span(file, line + line_offset, column + col_offset, 1),
                hint=lookalike_hint(ch),
                source_line=src,
            )
        expected = _describe_expected(set(exc.allowed or ()))
    elif isinstance(exc, UnexpectedToken):
        tok = exc.token
        if tok.type == "$END":
            found = "the end of the file"
        elif tok.type == "_NL":
            found = "the end of the line"
        else:
            found = repr(str(tok))
        expected = _describe_expected(set(exc.accepts or exc.expected or ()))
    else:
        found = "the end of the text"
        expected = _describe_expected(set(getattr(exc, "expected", ()) or ()))
    hint = None
    if line_offset == 0 and col_offset == 0:
        diagnosis = _diagnose_line(src, column)
        if diagnosis is not None:
            message, column, length, hint = diagnosis
            return SyntaxError(message, span=Span(file, line, column, length), hint=hint, source_line=src)
        ctx = _statement_context(src, column)
        if ctx:
            expected = ctx
    first = src.split()[0] if src.split() else ""
    if line_offset == 0 and col_offset == 0 and first in _USAGE:
        hint = f"a {first} statement is written: {_USAGE[first]}"
    elif "'='" in expected and "a value" not in expected:
        hint = "properties are written key=value, e.g. r=4.5mOhm"
    message = f"found {found}, expected {expected}"
    if line_offset == 0 and col_offset == 0 and "key=value" in expected:
        better = _property_hint(src, column)
        if better:
            message, hint = better
    elif col_offset and src[column - 1 : column] == "," and src[column : column + 1].isdigit():
        message = "found ',' inside a number"
        hint = "write decimals with a point, e.g. 12.6V"
    elif col_offset and isinstance(exc, UnexpectedToken) and exc.token.type in ("NAME", "QUANTITY", "IDENT", "ELEMHEAD"):
        message = f"found {found} after a complete value"
        hint = f"is an '=' missing ({exc.token}=...)? or an operator (* + - /) between two values?"
    word = src[column - 1 :].split()[0] if src[column - 1 :].split() else ""
    odd = next((ch for ch in word if not ch.isascii() and lookalike_hint(ch)), None)
    if odd is not None:  # e.g. a full-width '=' makes the property unreadable: say which character
        hint = lookalike_hint(odd)
        message += f" (it holds the character {odd!r}, U+{ord(odd):04X})"
    span = Span(file, line + line_offset, column + col_offset, 1)
    return SyntaxError(message, span=span, hint=hint, source_line=src)


_USAGE = {
    "title": 'title "text"',
    "let": "let NAME = VALUE (optionally ± TOLERANCE)",
    "part": "part NAME KIND key=value ...",
    "ground": "ground NODE",
    "practice": "practice NAME (general, marine, premises)",
    "include": 'include "relative/path.dcn"',
    "limit": "limit RULE key=value ...",
    "block": "block NAME (PORT, PORT, ...)",
    "end": "end (closing a block)",
    "use": "use NAME BLOCK (NODE, NODE, ...) key=value ...",
    "phase": "phase LABEL on=ELEMENT,... for=DURATION | until-condition max=DURATION",
}


def _property_hint(src: str, column: int):
    """(message, hint) for a malformed key=value, or None."""
    rest = src[column - 1 :]
    m = re.match(r"([A-Za-z_][\w.]*)\s*==", rest)
    if m:
        return f"'==' after '{m.group(1)}'", "write a single '=' between a property and its value"
    m = re.match(r"([A-Za-z_][\w.]*)\s*=\s*(#|\\|$|[A-Za-z_][\w.]*\s*=)", rest)
    if m:
        return f"the value of '{m.group(1)}' is missing", f"write {m.group(1)}=VALUE, e.g. {m.group(1)}=4.5mOhm"
    m = re.match(r"([A-Za-z_][\w.]*)\s+([^\s=#]+)", rest)
    if m:
        return f"found '{m.group(1)}' with no '=' after it", f"is an '=' missing? write {m.group(1)}={m.group(2)}"
    return None


# ------------------------------------------------------ look-alike characters
#: non-ASCII characters the language reads: MICRO SIGN (µ, U+00B5), GREEK CAPITAL LETTER OMEGA
#: (Ω, U+03A9), DEGREE SIGN (°, U+00B0), PLUS-MINUS SIGN (±, U+00B1) and SUPERSCRIPT TWO (²,
#: U+00B2) at the end of a unit (mm²)
ACCEPTED = "\u00b5\u03a9\u00b0\u00b1\u00b2"

_LOOKALIKE_HINTS = {
    "\u2126": "the OHM SIGN (U+2126) looks like Ω but is another character; write Ohm, or Ω (GREEK CAPITAL LETTER OMEGA, U+03A9)",
    "\u03bc": "the GREEK SMALL LETTER MU (U+03BC) looks like µ but is another character; write u, or µ (MICRO SIGN, U+00B5), for micro",
    "\u212a": "the KELVIN SIGN (U+212A) looks like K; temperatures are written in degC",
    "\u2103": "write degC or °C (two characters) for degrees Celsius",
    "\u00ba": "the MASCULINE ORDINAL INDICATOR (º) looks like the degree sign; write degC, or °C with the DEGREE SIGN (U+00B0)",
    "\u02da": "the RING ABOVE (˚) looks like the degree sign; write degC, or °C with the DEGREE SIGN (U+00B0)",
    "\u00d7": "write * for a product",
    "\u22c5": "write * for a product",
    "\u00b7": "write * for a product",
    "\u2219": "write * for a product",
    "\u00f7": "write / for a quotient",
    "\u2215": "write / for a quotient",
    "\u2044": "write / for a quotient",
    "\u2212": "the MINUS SIGN (U+2212) looks like '-' but is another character; write the ASCII '-'",
    "\u2010": "write the ASCII '-' for a minus",
    "\u2011": "write the ASCII '-' for a minus",
    "\u2012": "write the ASCII '-' for a minus",
    "\u2013": "the EN DASH (U+2013) looks like '-' but is another character; write the ASCII '-'",
    "\u2014": "the EM DASH (U+2014) looks like '-' but is another character; write the ASCII '-'",
    "\ufe63": "write the ASCII '-' for a minus",
    "\u2032": "write ft for feet",
    "\u2019": "quotes do not belong in a value",
}


def lookalike_hint(ch: str) -> str | None:
    """A hint for a non-ASCII character that looks like one the language reads, or None."""
    import unicodedata

    if ch in _LOOKALIKE_HINTS:
        return _LOOKALIKE_HINTS[ch]
    name = unicodedata.name(ch, f"U+{ord(ch):04X}")
    cat = unicodedata.category(ch)
    if cat == "Nd":
        return f"'{ch}' ({name}) is not read as a digit; write the ASCII digit {unicodedata.digit(ch)}"
    if cat in ("Zs", "Cf") or ch in "\u00a0\u2060\ufeff":
        return f"{name} (U+{ord(ch):04X}) is an unusual or invisible space; write an ordinary space, or nothing"
    folded = unicodedata.normalize("NFKC", ch)
    if cat == "No":
        return f"'{ch}' ({name}) is not read as a number; write ASCII digits (0-9), e.g. 0.5; powers are written with ^, e.g. 10^2"
    if folded != ch and folded.isascii():
        return f"'{ch}' ({name}) looks like '{folded}' but is another character; write '{folded}'"
    return None


def scan_lookalikes(raw: str, span: Span, source_line: str | None) -> None:
    """Refuse a value holding a character that only looks like one the language reads (a
    full-width or other script's digit, the OHM SIGN, a minus sign, a no-break space ...)."""
    if raw.isascii():
        return
    for k, ch in enumerate(raw):
        if ch.isascii() and not ch.isprintable() and ch != "\t":
            return  # a control character comes first: the value's own error names the whole word
        if ch.isascii() or (ch in ACCEPTED and (ch != "\u00b2" or (k and raw[k - 1].isalpha()))):
            continue
        import unicodedata

        name = unicodedata.name(ch, "unnamed")
        raise SyntaxError(
            f"found the character {ch!r} (U+{ord(ch):04X} {name}) in a value",
            span=Span(span.file, span.line, span.column + k, 1),
            hint=lookalike_hint(ch) or "values are written with ASCII digits, letters and + - * / ^ ( ); units may use µ, Ω, ° and ²",
            source_line=source_line,
        )


# ------------------------------------------------------------------ entry
#: runs of lines holding only blanks and/or a comment: emptied before lexing, so that such lines
#: cost one character of a newline run each (their line numbers stay; the grammar's newline run
#: is possessive, so matching it takes no memory per line)
_EMPTY_LINES = re.compile(r"^(?:[ \t]*(?:#[^\n]*)?\r?\n)++", re.M)


def _emptied(text: str) -> str:
    """The text with every run of blank and comment-only lines replaced by its newlines alone."""
    return _EMPTY_LINES.sub(lambda m: "\n" * m.group().count("\n"), text)


def parse_statements(text: str, file: str = "<text>") -> list[Statement]:
    """Parse a whole circuit text into statements (values kept raw)."""
    if not text.endswith("\n"):
        text += "\n"
    try:
        return _parser().parse(_emptied(text), start="file")
    except UnexpectedInput as exc:
        err = _syntax_error(exc, text, file)
    except VisitError as exc:  # pragma: no cover - transformer bugs surface as ours
        err = InputError(f"could not read the file: {exc.orig_exc}", span=Span(file))
    # raised outside the except block: the parser's own exception (which holds the parser)
    # must not ride along as context, so the error stays small and pickles anywhere
    raise err


@lru_cache(maxsize=65536)
def _parse_value_cached(raw: str):
    return _parser().parse(raw, start="value")


def parse_value(raw: str, span: Span, source_line: str | None = None):
    """Parse one raw value into an expression tree ``("value", expr, tolerance_or_None)``.

    ``span`` is where the value starts in its file; error columns are mapped into it.
    """
    scan_lookalikes(raw, span, source_line)
    try:
        return _parse_value_cached(raw)
    except UnexpectedInput as exc:
        err = _syntax_error(exc, raw, span.file, span.line - 1, span.column - 1)
        err.source_line = source_line
        err.message = err.message.replace("the end of the file", "the end of the value")
    except (VisitError, _UnitError, _NumberError) as exc:
        err = _value_error(getattr(exc, "orig_exc", exc), raw, span, source_line)
        if err is None:
            raise
    raise err  # outside the except block, for the same reason as above


def _value_error(orig, raw: str, span: Span, source_line: str | None) -> DcnetError | None:
    if isinstance(orig, _NumberError):
        col = raw.find(orig.text)
        return ValueRangeError(
            f"the number {orig.text} is too {'small' if orig.small else 'large'} to be a physical quantity",
            span=Span(span.file, span.line, span.column + max(col, 0), len(orig.text)),
            source_line=source_line,
        )
    if isinstance(orig, _UnitError):
        suggestion = suggest_unit(orig.unit)
        col = raw.find(orig.unit)  # locate the unit inside the raw value
        err_span = Span(span.file, span.line, span.column + max(col, 0), len(orig.unit))
        hint = f"did you mean '{suggestion}'?" if suggestion else "known units include V, A, Ohm, mOhm, W, Ah, m, mm2, degC, %"
        return UnknownNameError(f"unknown unit '{orig.unit}'", span=err_span, hint=hint, source_line=source_line)
    return None


def suggest(word: str, choices) -> str | None:
    """The nearest of ``choices`` to a misspelt ``word``, or None."""
    choices = list(choices)
    low = {c.lower(): c for c in choices}
    if word.lower() in low:
        return low[word.lower()]
    close = difflib.get_close_matches(word.lower(), list(low), n=1, cutoff=0.6)
    return low[close[0]] if close else None
