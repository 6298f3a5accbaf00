"""Writes the committed corpus of malformed circuit files and the messages they must produce.

    python tests/corpus/make_corpus.py             # rewrites tests/corpus/malformed/ and expected.tsv
    python tests/corpus/make_corpus.py --refusals  # rewrites only the REFUSALS files (201 on)

Each file is a demo circuit with one deliberate mistake (or a hand-written ill-posed
circuit); ``expected.tsv`` holds the error class, line, column and exact message that
``tests/corpus/test_corpus.py`` checks. Review the diff of expected.tsv after running.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(ROOT))

HAND_WRITTEN = {
    "empty": "",
    "only-comments": "# nothing here\n# at all\n",
    "floating-island": "cell A a gnd emf=12V r=10mOhm\nload L a gnd r=1Ohm\nload M c d r=1Ohm\nground gnd\n",
    "ideal-loop-contradicting": "source S a gnd emf=12V\nsource T a gnd emf=13V\nload L a gnd r=1Ohm\nground gnd\n",
    "source-shorted-by-link": "source S a gnd emf=12V\nlink K a gnd\nload L a gnd r=1Ohm\nground gnd\n",
    "current-source-no-return": "supply I a b current=2A\nsupply J b c current=2A\nload L a c r=1Ohm\nground b\n",
    "source-on-itself": "source S a a emf=12V\nload L a gnd r=1Ohm\nground gnd\n",
    "misspelt-node": "cell A pos gnd emf=12V r=1Ohm\nload L1 pos gnd r=1Ohm\nresistor R pos middle r=1Ohm\nload L2 midle gnd2 r=1Ohm\nground gnd\n",
    "three-source-loop": "source S a b emf=12V\nsource T b c emf=1V\nsource U a c emf=12V\nload L a b r=1Ohm\nground b\n",
    "ground-not-a-node": "cell A a gnd emf=12V r=10mOhm\nload L a gnd r=1Ohm\nground gdn\n",
    "include-missing": 'include "no-such-file.dcn"\ncell A a gnd emf=12V r=10mOhm\n',
    "include-outside": 'include "../outside.dcn"\ncell A a gnd emf=12V r=10mOhm\n',
    "nested-too-deep": "let x = " + "+".join(["1V"] * 300) + "\ncell A a gnd emf=x r=10mOhm\n",
    "huge-number": "cell A a gnd emf=1e999V r=10mOhm\nload L a gnd r=1Ohm\n",
    "overflow": "let big = 1e60 V\nlet worse = big * big\n",
    "wrong-dimension": "cell A a gnd emf=12A r=10mOhm\n",
    "zero-rating": "cell A a gnd emf=12V r=10mOhm\nfuse F a b rating=0A\n",
    "negative-length": "cable C a b length=-2m size=10mm2\n",
    "ground-twice": "cell A a gnd emf=12V r=10mOhm\nload L a gnd r=1Ohm\nground gnd\nground a\n",
    "include-itself": 'include "{self}"\n',
    "value-missing": "cell A a gnd emf= r=10mOhm\n",
    "space-in-name": "cell Bank 1 a gnd emf=12V r=10mOhm\n",
    "comma-decimal": "cell A a gnd emf=12,6V r=10mOhm\n",
    "unit-before-number": "cell A a gnd emf=V12 r=10mOhm\n",
    "cell-zero-r": "cell A a gnd emf=12V r=0Ohm\nload L a gnd r=1Ohm\n",
    "let-undefined-later": "let a = b * 2\nlet b = 3V\n",
    "percent-emf": "cell A a gnd emf=50% r=10mOhm\n",
    "division-by-zero": "let x = 12V / (2 - 2)\n",
    "tolerance-on-element": "cell A a gnd emf=12V r=10mOhm ± 5%\n",
    "bad-tolerance-unit": "let r = 10mOhm ± 2V\n",
    "unit-as-name": "let V = 12\n",
    "keyword-as-name": "let cable = 3m\n",
    "title-unquoted": "title Hillside cabin\n",
    "limit-unknown-rule": "cell A a gnd emf=12V r=10mOhm\nlimit imbalanse max=10% among=A\n",
    "limit-bad-key": "cell A a gnd emf=12V r=10mOhm\nlimit drop max=3% form=a to=gnd\n",
    "block-not-closed": "block string (p, n)\n",
    "soc-above-full": "cell A a gnd emf=12V r=10mOhm soc=120%\n",
    "part-of-other-kind": "part p cell emf=12V r=10mOhm\nload L a gnd part=p\n",
    "part-uses-part": "part p cell emf=12V r=10mOhm\npart q cell part=p\n",
    "load-two-ways": "load L a gnd r=1Ohm current=3A\n",
    "load-no-way": "load L a gnd vmin=10V\n",
    "cable-size-and-gauge": "cable C a b length=2m size=10mm2 gauge=8\n",
    "cable-bad-gauge": "cable C a b length=2m gauge=6/0\n",
    "cable-no-section": "cable C a b length=2m metal=copper\n",
    "cable-r-not-per-length": "cable C a b length=2m r=5mOhm\n",
    "metal-unknown": "cable C a b length=2m size=10mm2 metal=gold\n",
    "chemistry-unknown": "cell A a gnd emf=12V r=10mOhm chemistry=lithium\n",
    "switch-state-unknown": "switch S a b state=on\n",
    "function-unknown": "cell A a gnd emf=sqr(144V^2) r=10mOhm\n",
    "sqrt-of-volts": "cell A a gnd emf=sqrt(144V) r=10mOhm\n",
    "power-with-units": "cell A a gnd emf=12V^0.5 r=10mOhm\n",
    "unclosed-paren": "cell A a gnd emf=(12V r=10mOhm\n",
    "stray-character": "cell A a gnd emf=12V r=10mOhm @\n",
    "bad-node-name": "cell A a@b gnd emf=12V r=10mOhm\n",
    "equals-twice": "cell A a gnd emf==12V r=10mOhm\n",
    "not-utf8": None,  # written as bytes below
}

# values that make no physical sense, look-alike characters, limits that name nothing (issue 13).
# Numbered from 201 and written by --refusals alone: the files before them were made from the
# demo circuits as they were then, and keep their numbers and messages.
REFUSALS_FIRST = 201
_CELL = "cell A a gnd emf=12.6V r=5mOhm\n"
REFUSALS = {
    "cable-below-zero-resistance": _CELL + "cable C a gnd length=2m size=10mm2 temp=-250degC\n",
    "aluminium-below-zero-resistance": _CELL + "cable C a gnd length=2m size=10mm2 metal=al temp=-230degC\n",
    "cable-molten": _CELL + "cable C a gnd length=2m size=10mm2 temp=1200degC\n",
    "cable-zero-r-per-length": _CELL + "cable C a gnd length=2m r=0Ohm/m\n",
    "cable-derived-r-underflows": _CELL + "cable C a gnd length=1e-99m size=1e99mm2\n",
    "load-negative-current": _CELL + "load L a gnd current=-3A\n",
    "load-negative-power": _CELL + "load L a gnd power=-30W\n",
    "subnormal-resistance": _CELL + "resistor R a gnd r=1e-320Ohm\n",
    "subnormal-after-unit": _CELL + "resistor R a gnd r=1e-95pOhm\n",
    "literal-reads-as-zero": _CELL + "resistor R a gnd r=1e-400Ohm\n",
    "product-underflows": _CELL + "resistor R a gnd r=1e-60*1e-60*1Ohm\n",
    "quotient-underflows": _CELL + "resistor R a gnd r=1Ohm/1e99/1e99\n",
    "product-overflows": _CELL + "resistor R a gnd r=1e99*1e99*1Ohm\n",
    "fullwidth-digit": _CELL + "resistor R a gnd r=\uff15Ohm\n",
    "arabic-indic-digit": _CELL + "resistor R a gnd r=\u0665Ohm\n",
    "superscript-digit": _CELL + "resistor R a gnd r=\u00b2Ohm\n",
    "ohm-sign": _CELL + "resistor R a gnd r=5\u2126\n",
    "greek-mu": _CELL + "resistor R a gnd r=5\u03bcOhm\n",
    "minus-sign": _CELL + "resistor R a gnd r=\u22125Ohm\n",
    "en-dash": _CELL + "resistor R a gnd r=1Ohm\u20135mOhm\n",
    "no-break-space-in-value": _CELL + "resistor R a gnd r=5\u00a0Ohm\n",
    "zero-width-space": _CELL + "resistor R a gnd r=5\u200bOhm\n",
    "fullwidth-digit-in-name": _CELL + "resistor R\uff11 a gnd r=5Ohm\n",
    "fullwidth-gauge": _CELL + "cable C a gnd length=2m gauge=\uff11\uff10\n",
    "fullwidth-let": "let x = \uff15 Ohm\n" + _CELL + "resistor R a gnd r=x\n",
    "limit-among-nothing": _CELL + "resistor R a gnd r=1Ohm\nlimit imbalance max=10% among=,\n",
    "limit-among-unknown": _CELL + "resistor R a gnd r=1Ohm\nlimit imbalance max=10% among=A,X\n",
    "limit-among-one-element": _CELL + "resistor R a gnd r=1Ohm\nlimit imbalance max=10% among=A\n",
    "limit-imbalance-without-among": _CELL + "resistor R a gnd r=1Ohm\nlimit imbalance max=10%\n",
    "limit-of-unknown": _CELL + "resistor R a gnd r=1Ohm\nlimit current max=5A of=RR\n",
    "limit-node-unknown": _CELL + "resistor R a gnd r=1Ohm\nlimit voltage max=5V from=a to=b\n",
    "limit-circulating-not-a-bank": _CELL + "resistor R a gnd r=1Ohm\nlimit circulating max=2A among=A\n",
    "limit-wrong-unit": _CELL + "resistor R a gnd r=1Ohm\nlimit current max=5V of=R\n",
    "limit-negative-max": _CELL + "resistor R a gnd r=1Ohm\nlimit current max=-5A of=R\n",
    "limit-min-above-max": _CELL + "resistor R a gnd r=1Ohm\nlimit voltage min=14V max=12V of=R\n",
    "limit-no-bound": _CELL + "resistor R a gnd r=1Ohm\nlimit current of=R\n",
    "include-nul": _CELL + 'include "a\x00b.dcn"\n',
    "diode-below-absolute-zero": _CELL + "diode D a gnd is=1pA temp=-300degC\n",
    "cell-vmin-above-vmax": "cell A a gnd emf=12.6V r=5mOhm vmin=14V vmax=10V\nload L a gnd r=1Ohm\n",
}

OPERATORS = [
    ("kind-misspelt", lambda words: [words[0][:-1]] + words[1:]),
    ("second-node-missing", lambda words: words[:3] + words[4:]),
    ("unit-missing", None),
    ("unit-misspelt", None),
    ("property-misspelt", None),
    ("r-negative", None),
    ("name-duplicated", None),
    ("unknown-let", None),
    ("property-twice", None),
    ("equals-missing", None),
]

_QTY = re.compile(r"^(\w+)=(\d+(?:\.\d+)?)([A-Za-z%]+)$")


def mutate(op: str, words: list[str]) -> list[str] | None:
    props = [k for k, w in enumerate(words) if "=" in w and k >= 4]
    qty = [k for k in props if _QTY.match(words[k]) and not words[k].startswith(("gauge", "length=run"))]
    if op == "kind-misspelt":
        return [words[0][:-1]] + words[1:]
    if op == "second-node-missing":
        return words[:3] + words[4:]
    if op == "unit-missing" and qty:
        k = qty[0]
        key, num, _ = _QTY.match(words[k]).groups()
        return words[:k] + [f"{key}={num}"] + words[k + 1 :]
    if op == "unit-misspelt" and qty:
        k = qty[0]
        key, num, unit = _QTY.match(words[k]).groups()
        return words[:k] + [f"{key}={num}{unit.lower()}x"] + words[k + 1 :]
    if op == "property-misspelt" and props:
        k = props[0]
        return words[:k] + [words[k][0] + words[k]] + words[k + 1 :]
    if op == "r-negative":
        for k in props:
            if words[k].startswith("r=") and _QTY.match(words[k]):
                return words[:k] + ["r=-" + words[k][2:]] + words[k + 1 :]
        return None
    if op == "unknown-let" and props:
        k = props[0]
        return words[:k] + [words[k].split("=")[0] + "=undefined_value"] + words[k + 1 :]
    if op == "property-twice" and props:
        return words + [words[props[0]]]
    if op == "equals-missing" and props:
        k = props[-1]
        return words[:k] + [words[k].replace("=", " ", 1)] + words[k + 1 :]
    return None


def cases():
    for name, text in HAND_WRITTEN.items():
        yield name, text
    for demo in sorted((ROOT / "circuits").glob("*.dcn")):
        lines = demo.read_text().splitlines()
        element_lines = [k for k, line in enumerate(lines) if line and not line.startswith(("#", "let", "part", "title", "ground", "limit", "include")) and len(line.split()) >= 4]
        chosen = element_lines[:: max(1, len(element_lines) // 4)][:4]
        for op, _ in OPERATORS:
            for k in chosen:
                words = lines[k].split("#")[0].split()
                if op == "name-duplicated":
                    new = lines[: k + 1] + [lines[k]] + lines[k + 1 :]
                else:
                    m = mutate(op, words)
                    if m is None:
                        continue
                    new = lines[:k] + [" ".join(m)] + lines[k + 1 :]
                yield f"{demo.stem}-{op}-line{k + 1}", "\n".join(new) + "\n"
                break  # one line per operator and demo keeps the corpus varied, not repetitive
        # a second line for each operator, further down the file
        for op, _ in OPERATORS:
            for k in reversed(chosen):
                words = lines[k].split("#")[0].split()
                if op == "name-duplicated":
                    continue
                m = mutate(op, words)
                if m is None:
                    continue
                new = lines[:k] + [" ".join(m)] + lines[k + 1 :]
                yield f"{demo.stem}-{op}-late-line{k + 1}", "\n".join(new) + "\n"
                break


def outcome(path: Path):
    import dcnet
    from dcnet.errors import DcnetError

    try:
        dcnet.load(path).solve()
    except DcnetError as err:
        return type(err).__name__, err.line or 0, err.column or 0, err.message
    return "solved", 0, 0, ""


def _row(path: Path, out: Path) -> str | None:
    cls, line, col, msg = outcome(path)
    if cls == "solved":
        return None
    return "\t".join([path.name, cls, str(line), str(col), msg.replace(str(out) + "/", "").replace("\t", " ")])


def refusals() -> int:
    """(Re)write the REFUSALS files and their rows, leaving every earlier file and row as it is."""
    out = HERE / "malformed"
    for old in out.glob("*.dcn"):
        if int(old.name[:3]) >= REFUSALS_FIRST:
            old.unlink()
    lines = (HERE / "expected.tsv").read_text().splitlines()
    rows = [r for r in lines[1:] if int(r[:3]) < REFUSALS_FIRST]
    for k, (name, text) in enumerate(REFUSALS.items()):
        path = out / f"{REFUSALS_FIRST + k:03d}-{name}.dcn"
        path.write_text(text, encoding="utf-8")
        row = _row(path, out)
        if row is None:
            raise SystemExit(f"{path.name} solved: it belongs in no corpus of malformed files")
        rows.append(row)
    (HERE / "expected.tsv").write_text(lines[0] + "\n" + "\n".join(rows) + "\n")
    print(f"{len(REFUSALS)} refusals, {len(rows)} malformed files")
    return 0


def main() -> int:
    out = HERE / "malformed"
    out.mkdir(exist_ok=True)
    for old in out.glob("*.dcn"):
        old.unlink()
    rows = []
    seen = set()
    n = 0
    for name, text in cases():
        if text in seen:
            continue
        seen.add(text)
        n += 1
        path = out / f"{n:03d}-{name}.dcn"
        if text is not None:
            text = text.replace("{self}", path.name)
        if text is None:
            path.write_bytes(b"cell A a gnd emf=12V r=10mOhm\n# caf\xe9 au lait\n")
        else:
            path.write_text(text)
        cls, line, col, msg = outcome(path)
        if cls == "solved":
            path.unlink()
            n -= 1
            continue
        rows.append("\t".join([path.name, cls, str(line), str(col), msg.replace(str(out) + "/", "").replace("\t", " ")]))
    (HERE / "expected.tsv").write_text("file\terror\tline\tcolumn\tmessage\n" + "\n".join(rows) + "\n")
    print(f"{len(rows)} malformed files")
    return 0


if __name__ == "__main__":
    sys.exit(refusals() if "--refusals" in sys.argv[1:] else main())
