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
