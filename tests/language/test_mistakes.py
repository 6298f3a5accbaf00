"""The table of common mistakes: each row is a bad circuit and the message it must produce.

Every row checks the error class, the line and column, and a phrase of the message, so a
change that makes any message less precise fails here.
"""

import pytest

import dcnet
from dcnet import errors as E

OK_CELL = "cell A1 a b emf=12V r=1Ohm\n"

# (circuit text, error class, line, column, phrase in the message, phrase in the hint or None)
MISTAKES = [
    ("cel A1 a b emf=12V r=1Ohm\n", E.UnknownNameError, 1, 1, "unknown element kind 'cel'", "did you mean 'cell'"),
    ("cell A1 a emf=12V r=1Ohm\n", E.SyntaxError, 1, 11, "the second node name is missing", "for example"),
    ("cell A1 emf=12V\n", E.SyntaxError, 1, 9, "the first node name is missing", None),
    ("cell A1 a b c emf=12V\n", E.SyntaxError, 1, 13, "found 'c' with no '=' after it", "is an '=' missing"),
    ("cell A1 a b emf=12V r=1mohms\n", E.UnknownNameError, 1, 24, "unknown unit 'mohms'", "did you mean 'mOhm'"),
    ("cell A1 a b emf=12 r=1Ohm\n", E.DimensionError, 1, 17, "must be a voltage", "emf=12V"),
    ("cell A1 a b emf=12V rr=1Ohm\n", E.UnknownNameError, 1, 21, "has no property 'rr'", "did you mean 'r'"),
    ("cell A1 a b emf=12V r=\n", E.SyntaxError, 1, 21, "the value of 'r' is missing", "r=VALUE"),
    ("cell A1 a b emf= r=1Ohm\n", E.SyntaxError, 1, 13, "the value of 'emf' is missing", None),
    ("cell A1 a b emf==12V r=1Ohm\n", E.SyntaxError, 1, 13, "'==' after 'emf'", "single '='"),
    ("cell A1 a b emf=12,6V r=1Ohm\n", E.SyntaxError, 1, 19, "',' inside a number", "decimals with a point"),
    ("cell A1 a b emf=12V r 1Ohm\n", E.SyntaxError, 1, 21, "found 'r' after a complete value", "'=' missing"),
    (OK_CELL + "load L a b r=1Ohm\nground x\n", E.UnknownNameError, 3, 8, "ground node 'x'", None),
    (OK_CELL + "load A1 a b r=1Ohm\n", E.InputError, 2, 6, "'A1' is already used", "unique"),
    ("cell A1 a b emf=12V r=1Ohm part=foo\n", E.UnknownNameError, 1, 33, "unknown part 'foo'", None),
    ("let x = 5V + 2A\n" + OK_CELL, E.DimensionError, 1, 14, "cannot add a current (A) and a voltage (V)", None),
    ("cell A1 a b emf=12V r=y\n", E.UnknownNameError, 1, 23, "unknown name 'y'", "let NAME"),
    ("let r_cell = 3mOhm\ncell A1 a b emf=12V r=r_cel\n", E.UnknownNameError, 2, 23, "unknown name 'r_cel'", "did you mean 'r_cell'"),
    ("cell A1 a b emf=12V r=-1Ohm\n", E.ValueRangeError, 1, 23, "greater than zero", None),
    ("cell A1 a b emf=12V r=0Ohm\n", E.ValueRangeError, 1, 23, "greater than zero", None),
    (OK_CELL + "load L a b\n", E.InputError, 2, 6, "exactly one of r, current, power", None),
    (OK_CELL + "load L a b r=1Ohm current=2A\n", E.InputError, 2, 6, "found: r, current", None),
    ("title cabin\n" + OK_CELL, E.SyntaxError, 1, 7, 'quoted text', 'title "text"'),
    ("let strip 1.6 mOhm\n" + OK_CELL, E.SyntaxError, 1, 11, "expected '='", "let NAME = VALUE"),
    ("ground\n" + OK_CELL, E.SyntaxError, 1, 7, "expected a name", "ground NODE"),
    (OK_CELL + "cable C a b length=2m\n", E.InputError, 2, 7, "needs its cross-section", None),
    (OK_CELL + "cable C a b length=2m size=10mm2 metal=silver\n", E.UnknownNameError, 2, 40, "'silver' is not a known metal", "copper"),
    (OK_CELL + "cable C a b length=2m size=10mm2 gauge=10\n", E.InputError, 2, 7, "not both", None),
    (OK_CELL + "cable C a b length=2m size=10mm2 r=1mOhm\n", E.DimensionError, 2, 36, "resistance per length", None),
    (OK_CELL + "cable C a b length=2m gauge=5/0\n", E.ValueRangeError, 2, 7, "outside 1/0..4/0", None),
    (OK_CELL + "cable C a b length=2m gauge=ten\n", E.InputError, 2, 7, "not an AWG gauge", None),
    (OK_CELL + "cable C a b length=2m size=10mm2 model=tabel\n", E.UnknownNameError, 2, 40, "'tabel' is not a known model", "did you mean 'table'"),
    (OK_CELL + "cable C a b length=2m size=10mm2 class=3\n", E.UnknownNameError, 2, 40, "'3' is not a known class", "2, 5"),
    (OK_CELL + "cable C a b length=2m size=11mm2 model=table\n", E.InputError, 2, 7, "11 mm2 is not a size in the IEC 60228 table", "model=resistivity"),
    (OK_CELL + "cable C a b length=2m gauge=5 model=table\n", E.InputError, 2, 7, "AWG 5 is not in NEC Chapter 9 Table 8", "model=resistivity"),
    (OK_CELL + "cable C a b length=2m size=10mm2 metal=al model=table\n", E.InputError, 2, 7, "copper only", "model=resistivity"),
    (OK_CELL + "load L a b r=(1Ohm\n", E.SyntaxError, 2, 19, "expected ')'", None),
    ("let x = 1e400 V\n" + OK_CELL, E.ValueRangeError, 1, 9, "too large", None),
    ("let x = 1e90 V * 1e90\n" + OK_CELL, E.ValueRangeError, 1, 9, "overflows", None),
    ("let x = 1V / 0\n" + OK_CELL, E.ValueRangeError, 1, 14, "division by zero", None),
    ("cell A1 a b emf=12V r=1Ohm = 3\n", E.SyntaxError, 1, 28, "expected a property", None),
    ("let m = 3\n", E.InputError, 1, 5, "'m' is a unit", None),
    ("let cell = 3\n", E.InputError, 1, 5, "keyword", None),
    ("let r-int = 3mOhm\n", E.InputError, 1, 5, "letters, digits and '_' only", None),
    ("let x = 3V\nlet x = 4V\n", E.InputError, 2, 5, "already defined", None),
    (OK_CELL + "switch S a b state=shut\n", E.UnknownNameError, 2, 20, "'shut' is not a known state", "open, closed"),
    (OK_CELL + "load L a b r=1Ohm ± 5%\n", E.InputError, 2, 14, "tolerance", "let NAME"),
    (OK_CELL + "load L a b r=sqr(1Ohm)\n", E.UnknownNameError, 2, 14, "unknown function 'sqr'", "sqrt"),
    (OK_CELL + "load L a b r=sqrt(2Ohm)\n", E.DimensionError, 2, 14, "square root", None),
    ("let x = 2V ± 1A\n", E.DimensionError, 1, 9, "tolerance", None),
    ("part p cell emf=12V r=1Ohm\npart p cell emf=12V r=1Ohm\n", E.InputError, 2, 6, "already defined", None),
    ("part p cell emf=12V r=1Ohm\nload L a b part=p\n", E.InputError, 2, 17, "is a cell", None),
    (OK_CELL + "load L a b r=1Ohm r=2Ohm\n", E.InputError, 2, 19, "given twice", None),
    (OK_CELL + "limit imbalanse max=10%\n", E.UnknownNameError, 2, 7, "unknown limit rule", "imbalance"),
    (OK_CELL + "limit drop max=3% form=a\n", E.UnknownNameError, 2, 19, "no property 'form'", "from"),
    (OK_CELL + "cell A2 a b emf=12V r=1Ohm soc=140%\n", E.ValueRangeError, 2, 6, "soc", None),
    ("let x = " + "+".join(["1V"] * 300) + "\n" + OK_CELL, E.LimitError, 1, 9, "nests 300 levels deep", "--max-expression-depth"),
    (OK_CELL + "block pack (p, n)\n", E.InputError, 2, 7, "block 'pack' is not closed", "end"),
    (OK_CELL + "end\n", E.InputError, 2, 1, "'end' without a block", None),
    ("block b (p, n)\nresistor R p n r=1Ohm\nend\n" + OK_CELL + "use X bb (a, b)\n", E.UnknownNameError, 5, 7, "unknown block 'bb'", "did you mean 'b'"),
    ("block b (p, n)\nresistor R p n r=1Ohm\nend\n" + OK_CELL + "use X b (a)\n", E.InputError, 5, 7, "has 2 port(s) (p, n), but 1 node(s)", None),
    ("block b (p, n)\nlet k = 2Ohm\nresistor R p n r=k\nend\n" + OK_CELL + "use X b (a, b) kk=3Ohm\n", E.UnknownNameError, 6, 16, "no parameter 'kk'", "did you mean 'k'"),
    ("block b (p, n)\nresistor R p n r=1Ohm\nresistor R p n r=1Ohm\nend\n" + OK_CELL + "use X b (a, b)\n", E.InputError, 3, 10, "'X.R' is already used", "in X, placed at"),
    ("block b (p, n)\nuse Y b (p, n)\nend\n" + OK_CELL + "use X b (a, b)\n", E.InputError, 2, 7, "block 'b' uses itself", None),
    ("block b (p, n)\nground p\nend\n" + OK_CELL + "use X b (a, b)\n", E.InputError, 2, 8, "not allowed inside a block", None),
    ("part c1 cell emf=2V r=1mOhm\nbank B p n series=2 cell=c1\n", E.InputError, 2, 6, "needs parallel=", None),
    ("part c1 cell emf=2V r=1mOhm\nbank B p n series=2.5 parallel=2 cell=c1\n", E.ValueRangeError, 2, 19, "whole number", None),
    ("part c1 cell emf=2V r=1mOhm\nbank B p n series=2 parallel=2 cell=c2\n", E.UnknownNameError, 2, 37, "unknown part 'c2'", "part NAME cell"),
    ("part c1 cell emf=2V r=1mOhm\nbank B p n series=2 parallel=2 cell=c1 s3.c1.r=2mOhm\n", E.InputError, 2, 40, "strings s1..s2 and cells c1..c2", None),
    ("part c1 cell emf=2V r=1mOhm\nbank B p n series=2 parallel=2 cell=c1 s1.c1.rr=2mOhm\n", E.UnknownNameError, 2, 40, "no property 'rr'", None),
    ("part c1 cell emf=2V r=1mOhm\nbank B p n series=2 parallel=2 cell=c1 tap=middle\n", E.UnknownNameError, 2, 44, "'middle' is not a known tap", "centre"),
    ("source C a gnd emf=14V r=10mOhm imax=10A\nload L a gnd current=25A\nground gnd\n", E.NoOperatingPointError, None, None, "fed only through the current-limited source(s) C", "raise the current limit"),
    ("source S a gnd emf=2V\ndiode D a gnd drop=0.7V\nload L a gnd r=1Ohm\nground gnd\n", E.NoOperatingPointError, None, None, "would have to carry an unlimited current", "forward resistance"),
    ("source S a gnd emf=100V\ndiode D a gnd is=1pA\nload L a gnd r=1Ohm\nground gnd\n", E.NumericalError, None, None, "beyond any number the solver can hold", "series resistance"),
    ("", E.InputError, None, None, "no elements", None),
    ("# only a comment\n", E.InputError, None, None, "no elements", None),
    # issue 13: values of no physical sense and look-alike characters (more in test_refusals.py)
    (OK_CELL + "cable C a b length=2m size=10mm2 temp=-250degC\n", E.ValueRangeError, 2, 39, "reaches zero resistance", "r= per length"),
    (OK_CELL + "load L a b current=-3A\n", E.ValueRangeError, 2, 20, "must not be negative", "supply"),
    (OK_CELL + "resistor R a b r=1e-320Ohm\n", E.ValueRangeError, 2, 18, "too small to be a physical quantity", None),
    (OK_CELL + "resistor R a b r=1e-60*1e-60*1Ohm\n", E.ValueRangeError, 2, 18, "underflows", None),
    (OK_CELL + "resistor R a b r=\uff15Ohm\n", E.SyntaxError, 2, 18, "FULLWIDTH DIGIT FIVE", "ASCII digit 5"),
    (OK_CELL + "resistor R a b r=5\u2126\n", E.SyntaxError, 2, 19, "OHM SIGN", "GREEK CAPITAL LETTER OMEGA"),
    (OK_CELL + "limit imbalance max=10% among=,\n", E.InputError, 2, 31, "names nothing", None),
    (OK_CELL + "limit current max=5A of=A2\n", E.UnknownNameError, 2, 25, "'A2', which is not an element", "A1"),
    (OK_CELL + 'include "x\x00.dcn"\n', E.IncludeError, 2, 9, "control character", None),
]


@pytest.mark.parametrize("text, cls, line, col, phrase, hint", MISTAKES, ids=[m[4][:40] for m in MISTAKES])
def test_mistake_table(text, cls, line, col, phrase, hint):
    with pytest.raises(cls) as info:
        dcnet.parse(text, "site.dcn").solve()
    err = info.value
    assert phrase in err.message
    if line is not None:
        assert (err.line, err.column) == (line, col), err.render()
        assert err.file == "site.dcn"
        assert err.source_line is not None
    if hint is not None:
        assert hint in (err.hint or "")
    rendered = err.render()
    assert "Traceback" not in rendered


TOPOLOGY = [
    (OK_CELL + "load L a b r=1Ohm\nload M c d r=1Ohm\n", "floating", ("M",)),
    ("source S a b emf=12V\nsource T a b emf=13V\nload L a b r=1Ohm\n", "loop made only of ideal", ("S", "T")),
    ("source S a b emf=12V\nlink K a b\nload L a b r=1Ohm\n", "ideal source S is shorted by K", ("S", "K")),
    ("source S a b emf=12V\nlink K a c\nlink J c b\nload L a b r=1Ohm\n", "ideal source S is shorted by K, J", ("S", "K", "J")),
    ("source S a b emf=12V\nsource T b c emf=1V\nsource U a c emf=12V\nload L a b r=1Ohm\n", "contradict", ("S", "T", "U")),
    ("supply I a b current=1A\nsupply J b c current=1A\nload L a c r=1Ohm\n", "no return path", ("I", "J")),
    ("source S a a emf=12V\nload L a b r=1Ohm\n", "shorted on itself", ("S",)),
]


@pytest.mark.parametrize("text, phrase, culprits", TOPOLOGY, ids=[t[1] for t in TOPOLOGY])
def test_topology_names_culprits(text, phrase, culprits):
    with pytest.raises(E.TopologyError) as info:
        dcnet.parse(text, "site.dcn").solve()
    err = info.value
    assert phrase in err.message
    for c in culprits:
        assert c in err.culprits
    assert err.line is not None  # points at the first culprit's line


def test_floating_node_suggests_a_misspelt_name():
    text = "cell A pos gnd emf=12V r=1Ohm\nload L1 pos gnd r=1Ohm\nresistor R pos middle r=1Ohm\nload L2 midle gnd2 r=1Ohm\n"
    with pytest.raises(E.TopologyError) as info:
        dcnet.parse(text).solve()
    assert "did you mean 'middle' where you wrote 'midle'" in info.value.hint


def test_errors_pickle_with_their_fields():
    import pickle

    with pytest.raises(E.DcnetError) as info:
        dcnet.parse("cell A1 a b emf=12V r=1mohms\n", "x.dcn")
    err = pickle.loads(pickle.dumps(info.value))
    assert type(err) is E.UnknownNameError
    assert (err.file, err.line, err.column) == ("x.dcn", 1, 24)
    assert err.hint and "mOhm" in err.hint
    assert str(err) == str(info.value)
