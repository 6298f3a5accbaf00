"""The data tables in dcnet/data/ and their readers: every row read, every value as published,
every row with a source, and the conductor model checked against the published tables.

Reference values are written out here again from /work/shared/REFERENCES.md (not read from the
data files), so a mistyped row in a file fails here.
"""

from __future__ import annotations

import math
from importlib import resources

import pint
import pytest

from dcnet import data
from dcnet.errors import ValueRangeError
from dcnet.kinds.cable import awg_area, conductor_resistance
from dcnet.kinds.cell import CHEMISTRIES

ureg = pint.UnitRegistry()
Q_ = ureg.Quantity

MM2 = 1e-6  # m2 per mm2


def _data_lines(name: str) -> list[str]:
    """Non-comment, non-blank lines of a data file, read without dcnet's reader."""
    text = resources.files("dcnet.data").joinpath(name).read_text(encoding="utf-8")
    return [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]


def _per_km(ohm_per_m: float) -> float:
    return Q_(ohm_per_m, "ohm/m").to("ohm/km").magnitude


def _per_kft(ohm_per_m: float) -> float:
    return (Q_(ohm_per_m, "ohm/m") * Q_(1000, "ft")).to("ohm").magnitude


# --------------------------------------------------------------------------- reference values

# IEC 60228 maximum DC resistance at 20 degC, plain copper, Ohm/km (IEC 60228, secondary)
IEC_CLASS2 = {1.5: 12.1, 2.5: 7.41, 4: 4.61, 6: 3.08, 10: 1.83, 16: 1.15, 25: 0.727,
              35: 0.524, 50: 0.387, 70: 0.268, 95: 0.193, 120: 0.153}  # fmt: skip
IEC_CLASS5 = {1.5: 13.3, 2.5: 7.98, 4: 4.95, 6: 3.30, 10: 1.91, 16: 1.21, 25: 0.780,
              35: 0.554, 50: 0.386, 70: 0.272, 95: 0.206, 120: 0.161}  # fmt: skip

# NEC Chapter 9 Table 8, stranded uncoated copper at 75 degC, Ohm per 1000 ft (NFPA 70, secondary);
# AWG numbers as dcnet counts them: 1/0 = 0, 2/0 = -1, 4/0 = -3
NEC_TABLE8 = {14: 3.14, 12: 1.98, 10: 1.24, 8: 0.778, 6: 0.491, 4: 0.308, 2: 0.194,
              0: 0.122, -1: 0.0967, -3: 0.0608}  # fmt: skip

# Copper ampacity, NEC Table 310.16, 2011 and later (NFPA 70, secondary): AWG -> (75 degC, 90 degC) A
AMPACITY = {14: (20, 25), 12: (25, 30), 10: (35, 40), 8: (50, 55), 6: (65, 75), 4: (85, 95),
            3: (100, 115), 2: (115, 130), 1: (130, 145), 0: (150, 170), -1: (175, 195),
            -2: (200, 225), -3: (230, 260)}  # fmt: skip


# --------------------------------------------------------------------------- every row, every source


@pytest.mark.parametrize(
    "name, reader, rows",
    [
        ("iec60228.tsv", data.iec60228_table, 12),
        ("nec_ch9_table8.tsv", data.nec_table8, 10),
        ("ampacity.tsv", data.ampacity_table, 13),
    ],
)
def test_every_conductor_row_is_read(name, reader, rows):
    lines = _data_lines(name)
    # as many rows as REFERENCES.md lists for the table, each read into its own entry
    assert len(lines) == rows
    assert len(reader()) == rows
    for entry in reader().values():
        source = entry[-1]
        # every row names its source, and says it was read in a reproduction (REFERENCES.md marks
        # these tables "secondary")
        assert source.strip()
        assert "(secondary)" in source


def test_every_chemistry_row_is_read_and_has_a_source():
    lines = _data_lines("chemistries.tsv")
    table = data.chemistry_table()
    assert sum(len(rows) for rows in table.values()) == len(lines)
    # the file covers exactly the chemistry words of the circuit language
    assert set(table) == set(CHEMISTRIES)
    for rows in table.values():
        for _value, source in rows.values():
            assert source.strip()


def test_every_chemistry_value_says_where_it_comes_from():
    # the project's rule: a value names its source, or says "from memory" or "common practice, no
    # source"; a missing value says why it is missing
    for name, rows in data.chemistry_table().items():
        for quantity, (value, source) in rows.items():
            if quantity == "alias":
                continue
            if value is None:
                assert "no " in source, (name, quantity, source)
            else:
                assert "datasheet" in source or "from memory" in source or "common practice, no source" in source, (
                    name,
                    quantity,
                    source,
                )


# --------------------------------------------------------------------------- values as published


@pytest.mark.parametrize("size", sorted(IEC_CLASS2))
def test_iec60228_values(size):
    for cls, ref in ((2, IEC_CLASS2), (5, IEC_CLASS5)):
        per_m, source = data.iec60228_max_resistance(size * MM2, cls)
        # IEC 60228 (secondary), Ohm/km at 20 degC
        assert _per_km(per_m) == pytest.approx(ref[size], rel=1e-12)
        assert source.startswith("IEC 60228 (secondary)")
        assert f"class {cls}" in source


def test_iec60228_size_matching():
    # nominal sizes are matched with a relative tolerance of 1e-6 ...
    assert data.iec60228_max_resistance(25 * MM2 * (1 + 5e-7), 5) is not None
    assert data.iec60228_max_resistance(25 * MM2 * (1 - 5e-7), 2) is not None
    # ... and nothing else is a tabulated size
    assert data.iec60228_max_resistance(25 * MM2 * (1 + 1e-5), 5) is None
    assert data.iec60228_max_resistance(26 * MM2, 5) is None
    assert data.iec60228_max_resistance(185 * MM2, 2) is None
    # classes other than 2 and 5 are not in the table
    assert data.iec60228_max_resistance(25 * MM2, 1) is None
    assert data.iec60228_max_resistance(25 * MM2, 6) is None


@pytest.mark.parametrize("awg", list(NEC_TABLE8))
def test_nec_table8_values(awg):
    per_m, source = data.nec_table8_resistance(awg)
    # NFPA 70 (NEC) Chapter 9 Table 8 (secondary), Ohm per 1000 ft at 75 degC (conversion by pint)
    assert _per_kft(per_m) == pytest.approx(NEC_TABLE8[awg], rel=1e-12)
    assert "Chapter 9 Table 8 (secondary)" in source


def test_nec_table8_untabulated_gauges():
    # REFERENCES.md lists no 3, 1 or 3/0 row for Table 8, nor anything thinner than 14 AWG
    for awg in (16, 3, 1, -2, -4):
        assert data.nec_table8_resistance(awg) is None


@pytest.mark.parametrize("awg", list(AMPACITY))
def test_ampacity_values_by_gauge(awg):
    a75, a90 = AMPACITY[awg]
    # NFPA 70 (NEC) 2011 and later, Table 310.16 (secondary): copper, 75 degC and 90 degC columns
    amps, source = data.ampacity(None, awg, "copper", 75.0)
    assert amps == a75
    assert "Table 310.16 (secondary)" in source and "75 degC column" in source
    amps, source = data.ampacity(None, awg, "copper", 90.0)
    assert amps == a90
    assert "90 degC column" in source


def test_ampacity_columns_between_and_beyond():
    # between the columns the lower one is used (our rule: never credit a rating the table lacks);
    # 4 AWG: 85 A at 75 degC, 95 A at 90 degC (NEC Table 310.16, secondary)
    assert data.ampacity(None, 4, "copper", 80.0)[0] == 85
    assert data.ampacity(None, 4, "copper", 89.9)[0] == 85
    assert data.ampacity(None, 4, "copper", 105.0)[0] == 95
    # below 75 degC the data has no column: no value, with a reason
    amps, reason = data.ampacity(None, 4, "copper", 60.0)
    assert amps is None and "below the lowest column" in reason


def test_ampacity_of_metric_sizes():
    # a size in mm2 takes the row of the largest tabulated AWG size whose area does not exceed it
    # (common practice, no source); AWG areas from the ASTM B258 diameter rule (secondary):
    # 25 mm2 lies between 4 AWG (21.15 mm2) and 3 AWG (26.67 mm2) -> the 4 AWG row, 85 A at 75 degC
    assert awg_area(4) < 25 * MM2 < awg_area(3)
    amps, source = data.ampacity(25 * MM2, None, "copper", 75.0)
    assert amps == 85  # NEC Table 310.16 (secondary)
    assert "taken as 4 AWG" in source and "common practice, no source" in source
    # 35 mm2: 2 AWG is 33.63 mm2 (ASTM B258) -> 115 A at 75 degC, 130 A at 90 degC (NEC Table 310.16)
    assert data.ampacity(35 * MM2, None, "copper", 75.0)[0] == 115
    assert data.ampacity(35 * MM2, None, "cu", 90.0)[0] == 130
    # 16 mm2 is above 6 AWG (13.30 mm2) and below 5 AWG, which has no row -> 6 AWG, 65 A
    assert data.ampacity(16 * MM2, None, "copper", 75.0)[0] == 65
    # 120 mm2 is above 4/0 (107.2 mm2), the largest row -> 230 A at 75 degC
    assert data.ampacity(120 * MM2, None, "copper", 75.0)[0] == 230
    # exactly an AWG area maps to that AWG size
    assert data.ampacity(awg_area(10), None, "copper", 75.0)[0] == 35
    # 1.5 mm2 is thinner than 14 AWG (2.08 mm2), the smallest row: no value, with a reason
    amps, reason = data.ampacity(1.5 * MM2, None, "copper", 75.0)
    assert amps is None and "thinner than 14 AWG" in reason
    # an AWG size without a row uses the same rule: 5 AWG -> the 6 AWG row
    amps, source = data.ampacity(None, 5, "copper", 75.0)
    assert amps == 65 and "taken as 6 AWG" in source


def test_ampacity_for_aluminium_is_not_invented():
    # REFERENCES.md has no aluminium ampacity; the lookup says so instead of giving a number
    for word in ("aluminium", "aluminum", "al"):
        amps, reason = data.ampacity(25 * MM2, None, word, 75.0)
        assert amps is None and "aluminium" in reason
    amps, reason = data.ampacity(25 * MM2, None, "silver", 75.0)
    assert amps is None and "silver" in reason


def test_ampacity_bad_numbers_are_dcnet_errors():
    with pytest.raises(ValueRangeError):
        data.ampacity(0.0, None, "copper", 75.0)
    with pytest.raises(ValueRangeError):
        data.ampacity(-1.0, None, "copper", 75.0)
    with pytest.raises(ValueRangeError):
        data.ampacity(25 * MM2, None, "copper", math.nan)


# --------------------------------------------------------------------------- chemistries


def test_lifepo4():
    c = data.chemistry("lifepo4")
    # nominal 3.2 V and charge limit 3.65 V: LiFePO4 cell datasheets (REFERENCES.md)
    assert c["nominal_V"] == 3.2
    assert c["vmax_V"] == 3.65
    assert "datasheet" in c["sources"]["nominal_V"] and "datasheet" in c["sources"]["vmax_V"]
    # discharge cut-off: 2.5 V is a common conservative practice (the datasheets seen give 2.0 V)
    assert c["vmin_V"] == 2.5
    assert "common practice, no source" in c["sources"]["vmin_V"]
    assert "2.0 V" in c["sources"]["vmin_V"]


def test_recalled_chemistries_say_from_memory():
    # lead-acid 2.0 V nominal per cell; NMC 3.6-3.7 V nominal, 3.0-4.2 V window (from memory)
    lead = data.chemistry("lead-acid")
    assert lead["nominal_V"] == 2.0 and "from memory" in lead["sources"]["nominal_V"]
    nmc = data.chemistry("nmc")
    assert 3.6 <= nmc["nominal_V"] <= 3.7
    assert (nmc["vmin_V"], nmc["vmax_V"]) == (3.0, 4.2)
    for key in ("nominal_V", "vmin_V", "vmax_V"):
        assert "from memory" in nmc["sources"][key]


def test_every_chemistry_is_consistent():
    for name in CHEMISTRIES:
        c = data.chemistry(name)
        assert set(c) == {"nominal_V", "vmin_V", "vmax_V", "max_c_rate", "sources"}
        assert set(c["sources"]) == {"nominal_V", "vmin_V", "vmax_V", "max_c_rate"}
        # a cell's nominal voltage lies inside its allowed window (by the meaning of the words)
        assert c["nominal_V"] is not None
        if c["vmin_V"] is not None:
            assert c["vmin_V"] < c["nominal_V"]
        if c["vmax_V"] is not None:
            assert c["nominal_V"] < c["vmax_V"]


def test_missing_values_are_none():
    # no chemistry-wide maximum discharge rate is defensible (it depends on the cell's design),
    # so none is given
    for name in CHEMISTRIES:
        assert data.chemistry(name)["max_c_rate"] is None
    # NiMH charging ends on a voltage dip or temperature rise, not a voltage limit (from memory)
    assert data.chemistry("nimh")["vmax_V"] is None


def test_agm_and_gel_use_the_lead_acid_rows():
    lead = data.chemistry("lead-acid")
    for name in ("agm", "gel"):
        c = data.chemistry(name)
        for key in ("nominal_V", "vmin_V", "vmax_V", "max_c_rate"):
            assert c[key] == lead[key]
            # the source says the value is borrowed
            assert "lead-acid value" in c["sources"][key]


def test_chemistry_names():
    assert data.chemistry("LiFePO4") == data.chemistry("lifepo4")
    assert data.chemistry(" nmc ") == data.chemistry("nmc")
    assert data.chemistry("unobtainium") is None


# --------------------------------------------------------------------------- the model against the tables


@pytest.mark.parametrize("size", sorted(IEC_CLASS2))
def test_resistivity_model_is_bounded_by_iec60228(size):
    model = conductor_resistance(1.0, size * MM2, "copper", 20.0)
    c2, _ = data.iec60228_max_resistance(size * MM2, 2)
    c5, _ = data.iec60228_max_resistance(size * MM2, 5)
    # IEC 60228 (secondary) gives MAXIMA. Resistivity (IEC 60028) x length / nominal area ignores
    # the lay of the strands and the allowed shortfall of the real cross-section, so it must be at
    # or below both maxima: a bound, not an equality.
    assert model <= c2
    assert model <= c5
    # Not far below them either: the class 2 maximum is at most 15 % above the model (a loose
    # tolerance of ours; the twelve sizes come out 5 % to 12 % above)
    assert c2 <= 1.15 * model


@pytest.mark.parametrize("awg", list(NEC_TABLE8))
def test_resistivity_model_against_nec_table8(awg):
    model = conductor_resistance(1.0, awg_area(awg), "copper", 75.0)
    table, _ = data.nec_table8_resistance(awg)
    # NEC Chapter 9 Table 8 (secondary) at 75 degC against resistivity (IEC 60028) corrected to
    # 75 degC with alpha = 0.00393 /K (handbook Table 30.1, secondary) over the ASTM B258 area.
    # Stranded conductors have the same nominal area as solid ones, but the strands are laid in
    # helices and so are longer than the cable, by about 2 % (from memory); the table's three
    # figures add at most 0.2 % of rounding. So the table must lie at or above the model (a bound)
    # and within 3 % of it (our tolerance: 2 % lay plus rounding plus margin). The ten sizes come
    # out 1.8 % to 2.5 % above.
    assert model <= table
    assert table <= 1.03 * model
