"""Presentation: SI prefixes, column alignment, the caution on every human-readable report."""

import pytest

import dcnet
from dcnet.report import text as rt


@pytest.mark.parametrize(
    "value, unit, shown",
    [
        (25.357, "V", "25.36 V"),
        (0.01164, "V", "11.64 mV"),
        (0.0012413, "Ohm", "1.241 mOhm"),
        (-9.3776, "A", "-9.378 A"),
        (8306.0, "W", "8.306 kW"),
        (0.0, "A", "0 A"),
        (3.2e-5, "W", "32.00 µW"),
        (1e12, "Ohm", "1000 GOhm"),
    ],
)
def test_si_prefixes(value, unit, shown):
    assert rt.si(value, unit) == shown


def test_columns_align_right_and_left():
    lines = rt.columns([["name", "current"], ["A1", "9.378 A"], ["BUS_LINK", "12.00 A"]], right={1})
    assert lines[1].endswith("9.378 A") and lines[2].endswith("12.00 A")
    assert len(lines[1]) == len(lines[2])


def test_every_format_carries_the_caution():
    sol = dcnet.parse("cell A a gnd emf=12V r=10mOhm\nload L a gnd r=1Ohm\nground gnd\n").solve()
    res = sol.to_dict()
    assert "licensed practitioners" in rt.table(res)
    assert "licensed practitioners" in rt.markdown(res)
    csv = rt.csv_text(res)
    assert csv.count("\n") == 1 + len(res["nodes"]) + len(res["elements"])
