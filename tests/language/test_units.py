"""Units: prefixes, dimensions and suggestions. Conversions are checked against pint."""

import pint
import pytest

from dcnet.units import AREA, CHARGE, ENERGY, LENGTH, RESISTANCE, TIME, VOLTAGE, lookup_unit, suggest_unit

ureg = pint.UnitRegistry()


@pytest.mark.parametrize(
    "ours, pint_expr, dim",
    [
        ("mOhm", "milliohm", RESISTANCE),
        ("kV", "kilovolt", VOLTAGE),
        ("Ah", "ampere * hour", CHARGE),
        ("mAh", "milliampere * hour", CHARGE),
        ("kWh", "kilowatt * hour", ENERGY),
        ("Wh", "watt * hour", ENERGY),
        ("ft", "foot", LENGTH),
        ("km", "kilometer", LENGTH),
        ("mm2", "millimeter ** 2", AREA),
        ("min", "minute", TIME),
        ("h", "hour", TIME),
    ],
)
def test_unit_scale_matches_pint(ours, pint_expr, dim):
    # reference: pint's unit definitions (general-purpose reference library)
    q = lookup_unit(ours)
    assert q.dim == dim
    assert q.value == pytest.approx(ureg(pint_expr).to_base_units().magnitude, rel=1e-12)


def test_metre_and_milli_prefixes_are_distinct():
    assert lookup_unit("m").dim == LENGTH and lookup_unit("m").value == 1.0
    assert lookup_unit("mm").value == pytest.approx(1e-3)
    assert lookup_unit("mV").dim == VOLTAGE and lookup_unit("mV").value == pytest.approx(1e-3)
    assert lookup_unit("ms").dim == TIME


@pytest.mark.parametrize("typo, expected", [("mohms", "mOhm"), ("ohms", "Ohm"), ("kw", "kW"), ("Vv", "V"), ("degc", "degC"), ("MM2", "mm2")])
def test_suggestions(typo, expected):
    assert suggest_unit(typo) == expected
