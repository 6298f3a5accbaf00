"""Values that make no physical sense, and characters that only look like the ones the language
reads, are refused where they are written (issue 13, point 2): exit 2, file:line:col, a hint, no
traceback, never a numpy warning on the terminal; every error pickles.

Numbers are checked against references written here: the linear resistance law of a conductor,
``R = rho20 * L / A * (1 + alpha * (T - 20 degC))``, with rho20 = 1/58 Ohm mm2/m for annealed copper
(IEC 60028: 100 % IACS is 1/58 Ohm mm2/m = 0.017241 Ohm mm2/m) and alpha = 0.00393 /K for copper,
0.00403 /K for aluminium (IEC 60287-1-1 Table 1, from memory; also the handbook value named in
dcnet/data/metals.tsv), and the aluminium resistivity 1/58 / 0.61 (61 % IACS, from memory).
"""

import math
import pickle
import warnings

import numpy as np
import pytest

import dcnet
from dcnet import errors as E
from dcnet.cli import main

CELL = "cell B1 a gnd emf=12.6V r=5mOhm\n"
RES = CELL + "resistor R1 a gnd r=1Ohm\n"

ALPHA_CU = 0.00393  # /K at 20 degC, IEC 60287-1-1 Table 1 (from memory)
ALPHA_AL = 0.00403  # /K at 20 degC, IEC 60287-1-1 Table 1 (from memory)
RHO_CU = 1 / 58 * 1e-6  # Ohm m, IEC 60028 annealed copper (100 % IACS)
RHO_AL = RHO_CU / 0.61  # Ohm m, 61 % IACS (from memory)


def linear_r(rho, alpha, length, area, temp):
    """The linear law written out here, independently of dcnet."""
    return rho * length / area * (1 + alpha * (temp - 20.0))


# (circuit text, error class, line, column, phrase in the message, phrase in the hint or None)
REFUSALS = [
    # --- below the conductor's zero-resistance temperature (20 - 1/alpha), or molten
    (CELL + "cable C a gnd length=2m size=10mm2 temp=-250degC\n", E.ValueRangeError, 2, 41, "-234.5 degC", "r= per length"),
    (CELL + "cable C a gnd length=2m size=10mm2 temp=-234.5degC\n", E.ValueRangeError, 2, 41, "reaches zero resistance", None),
    (CELL + "cable C a gnd length=2m size=10mm2 metal=aluminium temp=-229degC\n", E.ValueRangeError, 2, 57, "-228.1 degC", None),
    (CELL + "cable C a gnd length=2m size=16mm2 model=table temp=-240degC\n", E.ValueRangeError, 2, 53, "zero resistance", None),
    (CELL + "cable C a gnd length=2m size=10mm2 temp=1100degC\n", E.ValueRangeError, 2, 41, "melting point of copper", None),
    (CELL + "cable C a gnd length=2m size=10mm2 temp=-300degC\n", E.ValueRangeError, 2, 41, "absolute zero", None),
    (CELL + "cable C a gnd length=2m size=10mm2 insulation=-280degC\n", E.ValueRangeError, 2, 47, "absolute zero", None),
    (CELL + "diode D a gnd is=1pA temp=-274degC\n", E.ValueRangeError, 2, 27, "absolute zero", None),
    # --- resistances that would be zero, negative or not finite
    (CELL + "resistor R a gnd r=-1Ohm\n", E.ValueRangeError, 2, 20, "greater than zero", None),
    (CELL + "cable C a gnd length=-2m size=10mm2\n", E.ValueRangeError, 2, 22, "greater than zero", None),
    (CELL + "cable C a gnd length=2m size=0mm2\n", E.ValueRangeError, 2, 30, "greater than zero", None),
    (CELL + "cable C a gnd length=2m r=0Ohm/m\n", E.ValueRangeError, 2, 27, "greater than zero", None),
    (CELL + "cable C a gnd length=1e-99m size=1e99mm2\n", E.ValueRangeError, 2, 7, "derived from the element's other values", None),
    (CELL + "cell B2 a gnd emf=12V r=1mOhm capacity=-5Ah\n", E.ValueRangeError, 2, 40, "(written -5Ah)", None),
    (CELL + "cell B2 a gnd emf=12V r=1mOhm soc=101%\n", E.ValueRangeError, 2, 6, "between 0% and 100%", None),
    (CELL + "cell B2 a gnd emf=12V r=1mOhm soc=-1%\n", E.ValueRangeError, 2, 6, "between 0% and 100%", None),
    (CELL + "cell B2 a gnd emf=12V r=1mOhm vmin=14V vmax=10V\n", E.ValueRangeError, 2, 6, "must lie below vmax", None),
    # --- a load only draws
    (CELL + "load L a gnd current=-3A\n", E.ValueRangeError, 2, 22, "must not be negative", "supply"),
    (CELL + "load L a gnd power=-30W\n", E.ValueRangeError, 2, 20, "greater than zero", "source"),
    (CELL + "let i = 2A - 5A\nload L a gnd current=i\n", E.ValueRangeError, 3, 22, "must not be negative", "supply"),
    (CELL + "load L a gnd power=30W vmin=-10V\n", E.ValueRangeError, 2, 29, "must not be negative", None),
    # --- subnormal, underflowing and overflowing numbers, literal or computed
    (CELL + "resistor R a gnd r=1e-320Ohm\n", E.ValueRangeError, 2, 20, "1e-320 is too small", None),
    (CELL + "resistor R a gnd r=1e-310 Ohm\n", E.ValueRangeError, 2, 20, "too small", None),
    (CELL + "resistor R a gnd r=5e-324Ohm\n", E.ValueRangeError, 2, 20, "too small", None),
    (CELL + "resistor R a gnd r=1e-400Ohm\n", E.ValueRangeError, 2, 20, "1e-400 is too small", None),
    (CELL + "resistor R a gnd r=1e-95pOhm\n", E.ValueRangeError, 2, 20, "too small", None),
    (CELL + "resistor R a gnd r=1e-60*1e-60*1Ohm\n", E.ValueRangeError, 2, 20, "underflows", None),
    (CELL + "resistor R a gnd r=1Ohm/1e99/1e99\n", E.ValueRangeError, 2, 20, "underflows", None),
    (CELL + "resistor R a gnd r=(1e-10)^40*1Ohm\n", E.ValueRangeError, 2, 21, "underflows", None),
    (CELL + "let tiny = 1e-60Ohm * 1e-60\nresistor R a gnd r=tiny\n", E.ValueRangeError, 2, 12, "underflows", None),
    (CELL + "resistor R a gnd r=1e99*1e99*1Ohm\n", E.ValueRangeError, 2, 20, "overflows", None),
    (CELL + "resistor R a gnd r=1e308*10Ohm\n", E.ValueRangeError, 2, 20, "too large", None),
    # --- digits and signs that only look like the ones the language reads
    (CELL + "resistor R a gnd r=\uff15Ohm\n", E.SyntaxError, 2, 20, "FULLWIDTH DIGIT FIVE", "ASCII digit 5"),
    (CELL + "resistor R a gnd r=\u0665Ohm\n", E.SyntaxError, 2, 20, "ARABIC-INDIC DIGIT FIVE", "ASCII digit 5"),
    (CELL + "resistor R a gnd r=\u06f5Ohm\n", E.SyntaxError, 2, 20, "EXTENDED ARABIC-INDIC DIGIT FIVE", "ASCII digit 5"),
    (CELL + "resistor R a gnd r=\u0967\u0966Ohm\n", E.SyntaxError, 2, 20, "DEVANAGARI DIGIT ONE", "ASCII digit 1"),
    (CELL + "resistor R a gnd r=\u00b2Ohm\n", E.SyntaxError, 2, 20, "SUPERSCRIPT TWO", "ASCII digits"),
    (CELL + "resistor R a gnd r=\u00bdOhm\n", E.SyntaxError, 2, 20, "VULGAR FRACTION ONE HALF", "0.5"),
    (CELL + "resistor R a gnd r=5\u2126\n", E.SyntaxError, 2, 21, "OHM SIGN", "GREEK CAPITAL LETTER OMEGA"),
    (CELL + "resistor R a gnd r=5\u03bcOhm\n", E.SyntaxError, 2, 21, "GREEK SMALL LETTER MU", "MICRO SIGN"),
    (CELL + "resistor R a gnd r=\u22125Ohm\n", E.SyntaxError, 2, 20, "MINUS SIGN", "ASCII '-'"),
    (CELL + "resistor R a gnd r=1Ohm\u20135mOhm\n", E.SyntaxError, 2, 24, "EN DASH", "ASCII '-'"),
    (CELL + "resistor R a gnd r=2\u00d73Ohm\n", E.SyntaxError, 2, 21, "MULTIPLICATION SIGN", "*"),
    (CELL + "resistor R a gnd r=5\u00a0Ohm\n", E.SyntaxError, 2, 21, "U+00A0", "ordinary space"),
    (CELL + "resistor R a gnd\u00a0r=5Ohm\n", E.SyntaxError, 2, 17, "U+00A0", "ordinary space"),
    (CELL + "resistor R a gnd r=5\u200bOhm\n", E.SyntaxError, 2, 21, "ZERO WIDTH SPACE", "ordinary space"),
    (CELL + "resistor R a gnd r=5\uff2fhm\n", E.SyntaxError, 2, 21, "FULLWIDTH LATIN CAPITAL LETTER O", "write 'O'"),
    (CELL + "resistor R\uff11 a gnd r=5Ohm\n", E.SyntaxError, 2, 10, "is not a valid name", "ASCII digit 1"),
    (CELL + "cable C a gnd length=2m gauge=\uff11\uff10\n", E.SyntaxError, 2, 31, "FULLWIDTH DIGIT ONE", "ASCII digit 1"),
    ("let x = \uff15 Ohm\n" + RES, E.SyntaxError, 1, 9, "FULLWIDTH DIGIT FIVE", "ASCII digit 5"),
    (CELL + "cable C a gnd length=2m size=10mm2 temp=30\u00baC\n", E.SyntaxError, 2, 43, "MASCULINE ORDINAL INDICATOR", "DEGREE SIGN"),
    (CELL + "resistor R a gnd r\uff1d5Ohm\n", E.SyntaxError, 2, 18, "U+FF1D", "write '='"),
    (CELL + "resistor R a gnd r=1\u2009000Ohm\n", E.SyntaxError, 2, 21, "U+2009", "ordinary space"),
    # --- limits that name nothing, or something that is not there
    (RES + "limit imbalance max=10% among=,\n", E.InputError, 3, 31, "names nothing", None),
    (RES + "limit imbalance max=10% among=B1,X\n", E.UnknownNameError, 3, 34, "'X', which is not an element", None),
    (RES + "limit imbalance max=10% among=B1\n", E.InputError, 3, 31, "names one element", "among=BANK"),
    (RES + "limit imbalance max=10%\n", E.InputError, 3, 7, "needs among=", None),
    (RES + "limit current max=5A of=R2\n", E.UnknownNameError, 3, 25, "'R2', which is not an element", "elements: B1, R1"),
    (RES + "limit voltage max=5V from=a to=b\n", E.UnknownNameError, 3, 32, "'b', which is not a node", None),
    (RES + "limit voltage max=5V from=a\n", E.InputError, 3, 7, "both from= and to=", None),
    (RES + "limit drop max=3% from=a to=nowhere\n", E.UnknownNameError, 3, 29, "not a node", None),
    (RES + "limit circulating max=2A among=B1\n", E.UnknownNameError, 3, 32, "not a bank", None),
    (RES + "limit current max=5V of=R1\n", E.DimensionError, 3, 19, "must be a current", None),
    (RES + "limit current max=-5A of=R1\n", E.ValueRangeError, 3, 19, "greater than zero", None),
    (RES + "limit voltage min=14V max=12V of=R1\n", E.ValueRangeError, 3, 19, "above its max", None),
    (RES + "limit current of=R1\n", E.InputError, 3, 7, "needs max= or min=", None),
    ("limit current max=5A of=R9\n" + RES, E.UnknownNameError, 1, 25, "not an element", "elements: B1, R1"),
    # --- phase conditions that can never be met, or met at once
    (CELL + "load L a gnd r=1Ohm\nphase p on=L soc_below=150% max=1h\n", E.ValueRangeError, 3, 24, "between 0% and 100%", "never reached"),
    (CELL + "load L a gnd r=1Ohm\nphase p on=L soc_above=-5% max=1h\n", E.ValueRangeError, 3, 24, "between 0% and 100%", None),
    # --- an include path that no file can have
    (RES + 'include "a\x00b.dcn"\n', E.IncludeError, 3, 9, "control character '\\x00'", None),
]


@pytest.mark.parametrize("text, cls, line, col, phrase, hint", REFUSALS, ids=[f"{i:02d}" for i in range(len(REFUSALS))])
def test_refused_where_written(text, cls, line, col, phrase, hint, tmp_path):
    with pytest.raises(E.DcnetError) as info:
        dcnet.parse(text, "c.dcn", base_dir=tmp_path).solve()
    err = info.value
    assert type(err) is cls, err.render()
    assert (err.line, err.column) == (line, col), err.render()
    assert phrase in err.message, err.render()
    if hint:
        assert err.hint and hint in err.hint, err.render()
    again = pickle.loads(pickle.dumps(err))
    assert type(again) is cls and again.render() == err.render()


@pytest.mark.parametrize("k", [0, 7, 18, 20, 31, 37, 51, 63])
def test_command_line_exit_2_with_location_and_no_traceback(k, tmp_path, capsys):
    text, _, line, col, _, _ = REFUSALS[k]
    path = tmp_path / "c.dcn"
    path.write_text(text, encoding="utf-8")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code = main(["solve", str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert f"c.dcn:{line}:{col}: " in err
    assert "Traceback" not in err and "RuntimeWarning" not in err
    assert not [w for w in caught if issubclass(w.category, RuntimeWarning)]


def test_a_phase_naming_nothing_echoes_its_line():
    with pytest.raises(E.UnknownNameError) as info:
        dcnet.parse(CELL + "load L a gnd r=1Ohm\nphase p on=L,NOPE for=1h\n")
    assert info.value.source_line == "phase p on=L,NOPE for=1h"


def test_subnormal_values_never_reach_numpy(tmp_path, capfd):
    """A value of 1e-320 Ohm used to reach the solve, where numpy printed 'overflow encountered
    in divide' with dcnet's own source line; now it stops at the value."""
    path = tmp_path / "c.dcn"
    for value in ("1e-320Ohm", "1e-310Ohm", "1e-200*1e-200*1Ohm", "1e-323Ohm"):
        path.write_text(CELL + f"resistor R a gnd r={value}\n")
        assert main(["solve", str(path)]) == 2
        out, err = capfd.readouterr()  # the real file descriptors: warnings print there
        assert "encountered" not in err and "RuntimeWarning" not in err
        assert "c.dcn:2:20:" in err


# ------------------------------------------------------------ references at sound values


@pytest.mark.parametrize("metal, rho, alpha", [("copper", RHO_CU, ALPHA_CU), ("aluminium", RHO_AL, ALPHA_AL)])
@pytest.mark.parametrize("temp", [-60.0, 20.0, 90.0])
def test_conductor_resistance_follows_the_linear_law(metal, rho, alpha, temp):
    net = dcnet.parse(CELL + f"cable C a gnd length=3m size=16mm2 metal={metal} temp={temp}degC\n")
    want = linear_r(rho, alpha, 3.0, 16e-6, temp)
    assert math.isclose(net.element("C").values["r"], want, rel_tol=2e-4)  # rho20 rounded to 5 digits in the table


@pytest.mark.parametrize("metal, alpha", [("copper", ALPHA_CU), ("aluminium", ALPHA_AL)])
def test_the_refusal_bound_is_where_the_linear_law_reaches_zero(metal, alpha):
    """Closed form: 1 + alpha (T - 20) = 0 at T0 = 20 - 1/alpha (copper -234.45, aluminium -228.14 degC)."""
    t0 = 20.0 - 1.0 / alpha
    just_above = t0 + 0.05
    net = dcnet.parse(CELL + f"cable C a gnd length=1m size=10mm2 metal={metal} temp={just_above!r}degC\n")
    r = net.element("C").values["r"]
    rho = RHO_CU if metal == "copper" else RHO_AL
    assert r > 0
    assert math.isclose(r, linear_r(rho, alpha, 1.0, 10e-6, just_above), rel_tol=1e-3)
    for below in (t0 - 0.05, t0 - 20.0):
        with pytest.raises(E.ValueRangeError, match="zero resistance"):
            dcnet.parse(CELL + f"cable C a gnd length=1m size=10mm2 metal={metal} temp={below!r}degC\n")


def test_table_model_at_a_cold_but_valid_temperature():
    """IEC 60228 class 5, 16 mm2: at most 1.21 Ohm/km at 20 degC (the standard's table), corrected
    by the linear law to -40 degC."""
    net = dcnet.parse(CELL + "cable C a gnd length=10m size=16mm2 model=table temp=-40degC\n")
    want = 1.21e-3 * 10 * (1 + ALPHA_CU * (-40 - 20))
    assert math.isclose(net.element("C").values["r"], want, rel_tol=1e-9)


def test_sound_look_alikes_are_read():
    """MICRO SIGN (U+00B5), GREEK CAPITAL LETTER OMEGA (U+03A9), DEGREE SIGN and mm² are the
    language's own spellings: the same values as uOhm, Ohm, degC and mm2."""
    a = dcnet.parse(CELL + "cable C a b length=2m size=10mm\u00b2 temp=30\u00b0C\nresistor R b gnd r=5\u00b5\u03a9\n")
    b = dcnet.parse(CELL + "cable C a b length=2m size=10mm2 temp=30degC\nresistor R b gnd r=5uOhm\n")
    assert a.element("C").values["r"] == b.element("C").values["r"]
    assert a.element("R").values["r"] == b.element("R").values["r"]
    assert math.isclose(a.element("R").values["r"], 5e-6, rel_tol=1e-15)


def test_a_load_of_zero_current_is_idle_not_refused():
    sol = dcnet.parse(CELL + "resistor R a gnd r=1Ohm\nload L a gnd current=0A\n").solve()
    assert sol.current("L") == 0.0


def test_limits_that_name_real_things_are_kept():
    net = dcnet.parse(RES + "resistor R2 a gnd r=2Ohm\nlimit imbalance max=10% among=R1,R2\nlimit voltage max=14V from=a to=gnd\n")
    assert [lim.rule for lim in net.limits] == ["imbalance", "voltage"]


def test_limit_names_inside_a_block_are_the_instance_names():
    text = CELL + "block pair (p, n)\nresistor X p n r=1Ohm\nlimit current max=20A of=X\nend\nuse P1 pair (a, gnd)\n"
    net = dcnet.parse(text)
    assert net.limits[0].values["of"] == ("P1.X",)
    with pytest.raises(E.UnknownNameError) as info:
        dcnet.parse(text.replace("of=X", "of=Y"))
    assert "'P1.Y'" in info.value.message


def test_study_samples_below_the_zero_resistance_temperature_are_refused():
    """A sweep that takes a cable below -234.45 degC is refused for the sample that does."""
    from dcnet.analysis.studies import Study

    net = dcnet.parse(CELL + "let t = 20degC\ncable C a gnd length=2m size=10mm2 temp=t\n")
    study = Study(net, ["t"])
    with pytest.raises(E.ValueRangeError, match=r"zero resistance \(sample 2\)"):
        study.element_samples({"t": np.array([20.0, -250.0, 0.0])}, 3)


# ------------------------------------------------------- numpy warnings as dcnet's error


def test_a_floating_point_warning_in_a_solve_becomes_a_numerical_error(tmp_path, monkeypatch, capfd):
    """The guard itself (dcnet/floating.py): should any path still meet an overflow, the user gets
    dcnet's message and exit 2, not numpy's warning text and an answer built on an infinity."""
    from dcnet.netlist import Netlist

    def overflowing(self, *args, **kwargs):
        return np.float64(1e308) * np.float64(10.0)

    monkeypatch.setattr(Netlist, "solve", overflowing)
    path = tmp_path / "c.dcn"
    path.write_text(RES)
    assert main(["solve", str(path)]) == 2
    out, err = capfd.readouterr()
    assert "floating-point overflow" in err and "c.dcn" in err
    assert "RuntimeWarning" not in err and "Traceback" not in err


def test_floating_point_error_pickles():
    from dcnet.floating import as_error, refused

    with pytest.raises(RuntimeWarning) as info, refused():
        np.divide(np.ones(1), np.zeros(1))
    err = as_error(info.value, "c.dcn")
    assert isinstance(err, E.NumericalError)
    assert pickle.loads(pickle.dumps(err)).render() == err.render()
