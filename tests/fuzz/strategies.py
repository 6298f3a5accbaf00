"""Hypothesis strategies for fuzzing dcnet with hostile input.

Three families: random token soups, valid circuit files mutated at the token
and byte level, and random valid netlists. Shared by the fuzz tests and by
``bench/fuzz_run.py`` (the long hand-run campaign).
"""

from __future__ import annotations

from pathlib import Path

from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parents[2]
SEEDS = [p.read_text() for p in sorted((ROOT / "circuits").glob("*.dcn"))]

WORDS = [
    "title", "let", "part", "ground", "include", "limit", "block", "end", "use",
    "resistor", "cell", "source", "supply", "cable", "fuse", "switch", "link", "load", "diode", "bank", "power", "imax", "drop", "is", "vmin", "series", "parallel",
    "A1", "bus+", "bus-", "gnd", "n.1", "0", "x", "r", "emf", "current", "power", "length", "size", "gauge",
    "metal", "temp", "rating", "state", "part", "max", "among", "from", "to", "copper", "open", "closed",
    "lead-acid", "=", "==", "(", ")", ",", "+", "-", "*", "/", "^", "±", "+-", "%", "#", "\\", "\n", "\n\n",
    "12V", "4.5mOhm", "1e400", "-0", "0", "1e-320", "NaN", "inf", "1.8 m", "25mm2", "4/0", "2/0", "10%",
    "sqrt(", "min(", "max(", "abs(", '"', '"text"', "µ", "Ω", "°C", "degC", "\t", " ", "\r\n", "\x00", "ü",
]

SMALL_EXPR = st.recursive(
    st.sampled_from(["1", "2.5", "0", "1e3", "3V", "4.5mOhm", "10A", "2m", "x", "r_int", "1e308", "1e-308"]),
    lambda inner: st.one_of(
        st.tuples(inner, st.sampled_from(["+", "-", "*", "/", "^"]), inner).map(lambda t: f"({t[0]}{t[1]}{t[2]})"),
        st.tuples(st.sampled_from(["sqrt", "min", "max", "abs"]), inner).map(lambda t: f"{t[0]}({t[1]})"),
    ),
    max_leaves=12,
)

token_soup = st.lists(st.sampled_from(WORDS) | SMALL_EXPR, min_size=0, max_size=60).map(" ".join)


@st.composite
def mutated_file(draw):
    """A demo circuit with tokens deleted, duplicated, swapped or replaced, and bytes flipped."""
    text = draw(st.sampled_from(SEEDS))
    tokens = text.replace("\n", " \n ").split(" ")
    for _ in range(draw(st.integers(1, 8))):
        if not tokens:
            break
        i = draw(st.integers(0, len(tokens) - 1))
        op = draw(st.sampled_from(["delete", "duplicate", "swap", "replace", "number", "bytes"]))
        if op == "delete":
            del tokens[i]
        elif op == "duplicate":
            tokens.insert(i, tokens[i])
        elif op == "swap":
            j = draw(st.integers(0, len(tokens) - 1))
            tokens[i], tokens[j] = tokens[j], tokens[i]
        elif op == "replace":
            tokens[i] = draw(st.sampled_from(WORDS))
        elif op == "number":
            tokens[i] = draw(st.sampled_from(["1e999", "-1e999", "0", "-5", "1e-400", "99999999999999999999999", "0.0"])) + draw(
                st.sampled_from(["", "V", "Ohm", "A", "mOhm", "m"])
            )
        else:
            raw = bytearray(tokens[i].encode("utf-8", "replace"))
            if raw:
                k = draw(st.integers(0, len(raw) - 1))
                raw[k] = draw(st.integers(0, 255))
            tokens[i] = raw.decode("latin-1")
    return " ".join(tokens).replace(" \n ", "\n")


@st.composite
def valid_netlist(draw):
    """A random circuit that the grammar accepts; it may still be ill-posed (floating, loops)."""
    n_nodes = draw(st.integers(2, 8))
    nodes = [f"n{k}" for k in range(n_nodes)]
    lines = []
    value = st.floats(min_value=1e-6, max_value=1e6, allow_nan=False)
    for k in range(draw(st.integers(1, 14))):
        a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes))
        kind = draw(st.sampled_from(["resistor", "cell", "source", "supply", "link", "load", "fuse", "switch", "cable", "diode", "cpload", "ccsource"]))
        props = {
            "resistor": f"r={draw(value)!r}Ohm",
            "cell": f"emf={draw(value)!r}V r={draw(value)!r}Ohm",
            "source": f"emf={draw(value)!r}V" + draw(st.sampled_from(["", f" r={draw(value)!r}Ohm"])),
            "supply": f"current={draw(value)!r}A",
            "link": draw(st.sampled_from(["", f"r={draw(value)!r}Ohm"])),
            "load": draw(st.sampled_from([f"r={draw(value)!r}Ohm", f"current={draw(value)!r}A"])),
            "fuse": f"rating={draw(value)!r}A" + draw(st.sampled_from(["", f" r={draw(value)!r}Ohm"])),
            "switch": draw(st.sampled_from(["state=open", "state=closed", f"state=closed r={draw(value)!r}Ohm"])),
            "cable": f"length={draw(value)!r}m size={draw(value)!r}mm2",
            "diode": draw(st.sampled_from([f"drop={draw(st.floats(0, 2))!r}V", f"drop={draw(st.floats(0, 2))!r}V r={draw(value)!r}Ohm", f"is={draw(st.floats(1e-15, 1e-6))!r}A n={draw(st.floats(0.5, 3))!r}"])),
            "cpload": f"power={draw(value)!r}W" + draw(st.sampled_from(["", f" vmin={draw(st.floats(0, 100))!r}V"])),
            "ccsource": f"emf={draw(value)!r}V r={draw(value)!r}Ohm imax={draw(value)!r}A",
        }[kind]
        kind = {"cpload": "load", "ccsource": "source"}.get(kind, kind)
        lines.append(f"{kind} E{k} {a} {b} {props}")
    if draw(st.booleans()):
        lines.append(f"ground {draw(st.sampled_from(nodes))}")
    return "\n".join(lines) + "\n"


any_input = st.one_of(token_soup, mutated_file(), valid_netlist())


# --------------------------------------------------------------------------------------------
# Hostile mutations: the operators that found the faults of issue 13, applied to the demos
# (circuits/) and to the fault seeds (bench/fuzz_seeds/faults/, our own scenarios, one per
# fault family). Each operator works on the text of one line, so a mutated file keeps most of
# its structure and gets past the parser to the solver, where the silent wrong answers were.

FAULT_SEED_DIR = ROOT / "bench" / "fuzz_seeds" / "faults"
#: seeds of this size or more (thousands of lines, seconds per solve) stay out of the test suite
BIG_SEED = 4000
_SEED_PATHS = sorted(FAULT_SEED_DIR.glob("*.dcn"))
#: the fault seeds small enough for the in-process loop
FAULT_SEEDS = [p.read_text(encoding="utf-8", errors="surrogateescape") for p in _SEED_PATHS if p.stat().st_size < BIG_SEED]
#: the big ones (many diode branches, many constant-power loads), for bench/fuzz_run.py only
BIG_SEEDS = [p.read_text(encoding="utf-8", errors="surrogateescape") for p in _SEED_PATHS if p.stat().st_size >= BIG_SEED]

#: numbers at the edges of the double range and of the physically sensible one
EXTREME_NUMBERS = [
    "1e-320", "4.9e-324", "2.2250738585072014e-308", "1e-308", "1e-30", "1e-18", "1e-12", "1e-9", "0", "-0", "0.0",
    "-1", "-5", "-1e-320", "1e12", "1e18", "1e30", "1e300", "1e308", "1.7976931348623157e308", "1e309", "-1e308",
    "123456789012345678901234567890", "0.000000000000000000000000001", "1_000", "1e", "e3", ".", "-.5", "+5", "--5",
    "nan", "NaN", "inf", "-inf", "Infinity", "0x10", "1,5", "1.5.2", "٫5",
]
#: unit look-alikes, non-ASCII digits and signs, invisible separators
UNICODE_LOOKALIKES = {
    "digits": ["１２", "０．５", "٣", "١٢", "۴", "४२", "¹²", "²", "₅", "½", "Ⅻ", "𝟙𝟚"],
    "units": ["Ω", "Ω", "mΩ", "µOhm", "μOhm", "uOhm", "kΩ", "°C", "℃", "K", "V̇", "Ａ", "Ｖ", "㎃", "㎷", "㎜2", "mm²", "ohm", "OHM", "Ohms"],
    "signs": ["−", "‐", "‒", "–", "—", "﹣", "－", "＋", "·", "×", "⁄"],
    "spaces": [" ", " ", " ", "​", "\u2060", "\ufeff", "\u00ad", "\u3000", "\u200e", "\u202e"],
}
CONTROL = ["\x00", "\x01", "\x07", "\x08", "\x0b", "\x0c", "\x1b[31m", "\x1b]0;x\x07", "\x7f", "\x85", "\u2028", "\u2029", "\r", "\ud800"]
NODE_WORDS = ["gnd", "0", "b+", "bus", "x", "n1", "house+", "inv+", "a"]

_NUMBER = __import__("re").compile(r"(?<![A-Za-z_.])([-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?)")
_VALUE = __import__("re").compile(r"(\b[a-z_]+)=([^\s#]+)")


def _lines(text: str) -> list[str]:
    return text.split("\n")


def _element_lines(lines: list[str]) -> list[int]:
    kinds = ("resistor", "cell", "source", "supply", "cable", "fuse", "switch", "link", "load", "diode")
    return [k for k, line in enumerate(lines) if line.split(" ", 1)[0] in kinds]


def _nodes_of(lines: list[str]) -> list[str]:
    nodes = []
    for k in _element_lines(lines):
        parts = lines[k].split()
        if len(parts) >= 4:
            nodes += parts[2:4]
    return nodes or NODE_WORDS


def _names_of(lines: list[str]) -> list[str]:
    return [lines[k].split()[1] for k in _element_lines(lines) if len(lines[k].split()) > 1] or ["BAT"]


@st.composite
def _op_number(draw, lines):
    """A number of a value replaced by an extreme magnitude, zero, a negative or nan-ish text."""
    cand = [k for k, line in enumerate(lines) if _NUMBER.search(line.split("#")[0])]
    if not cand:
        return lines
    k = draw(st.sampled_from(cand))
    matches = list(_NUMBER.finditer(lines[k].split("#")[0]))
    m = draw(st.sampled_from(matches))
    lines[k] = lines[k][: m.start()] + draw(st.sampled_from(EXTREME_NUMBERS)) + lines[k][m.end():]
    return lines


@st.composite
def _op_unicode(draw, lines):
    """Non-ASCII digits, unit look-alikes (OHM SIGN, MICRO SIGN ...), U+2212 minus, odd spaces."""
    cand = [k for k, line in enumerate(lines) if "=" in line]
    if not cand:
        return lines
    k = draw(st.sampled_from(cand))
    line = lines[k]
    group = draw(st.sampled_from(sorted(UNICODE_LOOKALIKES)))
    piece = draw(st.sampled_from(UNICODE_LOOKALIKES[group]))
    eq = [i for i, ch in enumerate(line) if ch == "="]
    at = draw(st.sampled_from(eq)) + 1
    how = draw(st.sampled_from(["insert", "replace-digit", "replace-unit", "append"]))
    if how == "insert":
        line = line[:at] + piece + line[at:]
    elif how == "replace-digit":
        m = _NUMBER.search(line, at)
        if m:
            line = line[: m.start()] + piece + line[m.end():]
    elif how == "replace-unit":
        m = __import__("re").compile(r"(?<=\d)([a-zA-Z°µ]+)").search(line, at)
        if m:
            line = line[: m.start()] + piece + line[m.end():]
    else:
        end = line.find(" ", at)
        end = len(line) if end < 0 else end
        line = line[:end] + piece + line[end:]
    lines[k] = line
    return lines


@st.composite
def _op_cold(draw, lines):
    """A conductor or junction far below zero (or far above): -250 degC, -273.15 degC, 0 K ..."""
    temp = draw(st.sampled_from(["-250degC", "-273.15degC", "-274degC", "-260degC", "-1e6degC", "0K", "-10K", "1e6degC", "-235degC", "-228degC"]))
    cand = [k for k, line in enumerate(lines) if line.startswith(("cable", "diode"))]
    if cand:
        k = draw(st.sampled_from(cand))
        if "temp=" in lines[k]:
            lines[k] = __import__("re").sub(r"temp=\S+", "temp=" + temp, lines[k])
        else:
            lines[k] += " temp=" + temp
    else:
        a, b = draw(st.sampled_from(_nodes_of(lines))), draw(st.sampled_from(_nodes_of(lines)))
        lines.append(f"cable COLD {a} {b} length={draw(st.sampled_from(['1m', '10m', '100m']))} size=6mm2 temp={temp}")
    return lines


@st.composite
def _op_control(draw, lines):
    """NUL and control characters in strings, names and include paths."""
    ch = draw(st.sampled_from(CONTROL))
    how = draw(st.sampled_from(["include", "title", "name", "anywhere"]))
    if how == "include":
        path = draw(st.sampled_from(["parts.dcn", "../x.dcn", "/etc/passwd", "", ".", "sub/a.dcn", "/dev/zero", "/proc/self/mem"]))
        k = draw(st.integers(0, len(path)))
        lines.insert(draw(st.integers(0, len(lines))), f'include "{path[:k]}{ch}{path[k:]}"')
    elif how == "title":
        lines.insert(0, f'title "dock{ch}shed"')
    elif how == "name":
        cand = _element_lines(lines)
        if cand:
            k = draw(st.sampled_from(cand))
            parts = lines[k].split(" ")
            if len(parts) > 1:
                parts[1] += ch
                lines[k] = " ".join(parts)
    else:
        k = draw(st.integers(0, max(0, len(lines) - 1)))
        line = lines[k] if lines else ""
        at = draw(st.integers(0, len(line)))
        if lines:
            lines[k] = line[:at] + ch + line[at:]
    return lines


@st.composite
def _op_decades(draw, lines):
    """A branch whose resistance is 1e-9 .. 1e-12 or 1e9 .. 1e12 ohm beside ordinary ones (over 18 decades)."""
    nodes = _nodes_of(lines)
    lo = draw(st.sampled_from(["1nOhm", "1e-12Ohm", "1e-10Ohm", "0.1nOhm", "1pOhm", "1e-15Ohm"]))
    hi = draw(st.sampled_from(["1GOhm", "1e12Ohm", "1TOhm", "1e10Ohm", "1e15Ohm"]))
    for k in range(draw(st.integers(1, 3))):
        a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes + ["fz_mid"]))
        lines.append(f"resistor FZLO{len(lines)} {a} {b} r={lo}")
        a, b = draw(st.sampled_from(nodes + ["fz_mid"])), draw(st.sampled_from(nodes))
        lines.append(f"resistor FZHI{len(lines)} {a} {b} r={hi}")
    return lines


@st.composite
def _op_splice(draw, lines):
    """A diode (junction or piecewise-linear), an ideal source, a supply or a charger spliced in."""
    nodes = _nodes_of(lines)
    a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes + ["fz_new"]))
    what = draw(st.sampled_from([
        "diode FZD{k} {a} {b} is=1e-14A n=1",
        "diode FZD{k} {a} {b} is=1e-12A n=2 temp=-40degC",
        "diode FZD{k} {a} {b} drop=0.45V r=3mOhm",
        "diode FZD{k} {a} {b} drop=0.7V",
        "diode FZD{k} {a} {b} drop=0.45V r=1e-9Ohm roff=1e12Ohm",
        "source FZS{k} {a} {b} emf={v}V",
        "source FZS{k} {a} {b} emf={v}V r=1e-9Ohm",
        "source FZS{k} {a} {b} emf={v}V r=8mOhm imax=40A",
        "supply FZI{k} {a} {b} current={i}A",
        "load FZL{k} {a} {b} power={p}W",
        "load FZL{k} {a} {b} power={p}W vmin=10.5V",
        "load FZL{k} {a} {b} current={i}A",
        "link FZK{k} {a} {b}",
        "switch FZW{k} {a} {b} state=open",
    ]))
    v = draw(st.sampled_from(["12", "14.4", "30000", "1e6", "0.001", "-12", "48"]))
    i = draw(st.sampled_from(["8", "1e-9", "1e6", "-3", "0"]))
    p = draw(st.sampled_from(["600", "2000", "1e9", "1e-6", "36"]))
    lines.append(what.format(a=a, b=b, v=v, i=i, p=p, k=len(lines)))
    return lines


@st.composite
def _op_limit(draw, lines):
    """limit statements with duplicate, unknown, empty or odd names (among=, from=, to=, of=)."""
    names, nodes = _names_of(lines), _nodes_of(lines)
    pick = st.sampled_from(names + nodes + ["NOPE", "", ",", "B,B", "x\x00", "bus+", "B.s1", "B.s1.c1", "*"])
    who = draw(st.lists(pick, min_size=0, max_size=3))
    joined = ",".join(who)
    stmt = draw(st.sampled_from([
        "limit imbalance max=10% among={w}",
        "limit circulating max=2A among={w}",
        "limit drop max=3% from={n} to={m}",
        "limit current max=10A of={w}",
        "limit current min=-1e308A of={w}",
        "limit voltage max=15V of={w}",
        "limit voltage min=11V from={n} to={m}",
        "limit imbalance max=0% among={w},{w}",
        "limit drop max=-3% from={n} to={n}",
    ]))
    n = draw(pick)
    m = draw(pick)
    lines.append(stmt.format(w=joined, n=n, m=m))
    return lines


@st.composite
def _op_power_limit(draw, lines):
    """A constant-power load at, just above or just below the most its source can deliver, E^2/(4R)."""
    e = draw(st.sampled_from([12.0, 24.0, 48.0, 1.5, 1e3]))
    r = draw(st.sampled_from([1.0, 0.01, 1e-3, 10.0]))
    factor = draw(st.sampled_from([1.0, 1 - 1e-12, 1 + 1e-12, 1 - 1e-6, 1 + 1e-6, 0.999, 1.001, 0.5, 2.0]))
    node = draw(st.sampled_from(_nodes_of(lines) + ["fz_cp"])) + ""
    ref = draw(st.sampled_from(_nodes_of(lines)))
    k = len(lines)
    lines.append(f"source FZPS{k} fz_cp{k} {ref} emf={e!r}V r={r!r}Ohm")
    lines.append(f"load FZCP{k} {node if node != 'fz_cp' else f'fz_cp{k}'} {ref} power={e * e / (4 * r) * factor!r}W" + draw(st.sampled_from(["", " vmin=0.1V", f" vmin={e / 2!r}V"])))
    return lines


HOSTILE_OPS = [_op_number, _op_unicode, _op_cold, _op_control, _op_decades, _op_splice, _op_limit, _op_power_limit]


@st.composite
def hostile_file(draw, seeds=None):
    """A demo circuit or a fault seed with one to four hostile operators applied."""
    text = draw(st.sampled_from(seeds if seeds is not None else SEEDS + FAULT_SEEDS))
    lines = _lines(text)
    for _ in range(draw(st.integers(1, 4))):
        op = draw(st.sampled_from(HOSTILE_OPS))
        lines = draw(op(lines))
    return "\n".join(lines)


@st.composite
def extreme_netlist(draw):
    """A random valid netlist with values over 18 decades and the hostile operators on top."""
    text = draw(valid_netlist())
    lines = _lines(text.rstrip("\n"))
    for _ in range(draw(st.integers(0, 3))):
        op = draw(st.sampled_from([_op_number, _op_decades, _op_splice, _op_power_limit, _op_cold]))
        lines = draw(op(lines))
    return "\n".join(lines) + "\n"


hostile_demo = hostile_file(SEEDS)
hostile_seed = hostile_file(FAULT_SEEDS)
hostile_big_seed = hostile_file(BIG_SEEDS)


# --------------------------------------------------------------------------------------------
# Resource limits: inputs that must be refused up front (issue 13, point 9). These are slow or
# huge on code without the limits, so they never run in the in-process loop: bench/fuzz_run.py
# runs each in a fresh command-line process with a time limit and an address-space limit.

_CELL = "cell BAT b+ gnd emf=12.6V r=10mOhm\nload LMP b+ gnd r=2Ohm\nground gnd\n"


@st.composite
def limits_case(draw):
    """{"files": {name: text, or None for a named pipe}, "main": name, "args": [command, options]}."""
    what = draw(st.sampled_from(["include-fanout", "bank", "block-fanout", "blank-lines", "long-line", "nesting", "include-pipe"]))
    files: dict = {}
    if what == "include-fanout":
        width, depth = draw(st.integers(2, 12)), draw(st.integers(2, 9))
        for k in range(depth):
            files[f"l{k}.dcn"] = "".join(f'include "l{k + 1}.dcn"\n' for _ in range(width))
        files[f"l{depth}.dcn"] = "# leaf\n"
        files["main.dcn"] = 'include "l0.dcn"\n' + _CELL
    elif what == "bank":
        s, p = draw(st.sampled_from([1, 10, 100, 1000, 3000])), draw(st.sampled_from([1, 10, 100, 1000, 3000]))
        extra = draw(st.sampled_from(["", " strap=0.1mOhm bus=0.2mOhm", " fuse=80A fuse_r=0.4mOhm", " spread=5% seed=7"]))
        files["main.dcn"] = (
            "part c cell emf=2.1V r=1mOhm capacity=100Ah chemistry=lead-acid\n"
            f"bank B b+ gnd series={s} parallel={p} cell=c{extra}\nload R b+ gnd r=1Ohm\nground gnd\n"
        )
    elif what == "block-fanout":
        width, depth = draw(st.integers(2, 12)), draw(st.integers(2, 9))
        text = "block b%d (p, n)\n  resistor R p n r=1Ohm\nend\n" % depth
        for k in range(depth - 1, -1, -1):
            text += f"block b{k} (p, n)\n" + "".join(f"  use u{j} b{k + 1} (p, n)\n" for j in range(width)) + "end\n"
        files["main.dcn"] = text + "use top b0 (b+, gnd)\n" + _CELL
    elif what == "blank-lines":
        mb = draw(st.sampled_from([1, 5, 20]))
        files["main.dcn"] = draw(st.sampled_from(["\n", "\r\n", " \n", "#\n", "\\\n"])) * (mb * 1024 * 1024 // 2) + _CELL
    elif what == "long-line":
        mb = draw(st.sampled_from([1, 5, 20]))
        files["main.dcn"] = "title \"" + "x" * (mb * 1024 * 1024) + "\"\n" + _CELL
    elif what == "nesting":
        depth = draw(st.sampled_from([100, 1000, 10000, 100000]))
        op = draw(st.sampled_from(["(", "-", "sqrt(", "+"]))
        close = ")" if op.endswith("(") else ""
        files["main.dcn"] = f"let x = {op * depth}1{close * depth}\n" + _CELL
    else:
        files["main.dcn"] = 'include "pipe.dcn"\n' + _CELL
        files["pipe.dcn"] = None
    args = draw(st.sampled_from([["check"], ["solve"], ["solve", "--format", "json"]]))
    return {"files": files, "main": "main.dcn", "args": args, "what": what}
