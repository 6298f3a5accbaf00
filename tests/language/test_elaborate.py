"""Elaboration: lets with units, parts and overrides, includes, the ground rule, spans."""

import os

import pytest

import dcnet
from dcnet import errors as E


def test_let_arithmetic_with_units_and_tolerance():
    net = dcnet.parse(
        "let r_int = 4.5 mOhm\n"
        "let aged = 1.3 * r_int ± 5%\n"
        "let run = 2 * 1.8 m + 30 cm\n"
        "let e = sqrt(4 V^2) + max(1V, 2V) - abs(-0.5V)\n"
        "cell A a gnd emf=e r=aged\n"
        "cable P a b length=run r=3.3 Ohm/km\n"
        "load L b gnd r=2Ohm\n"
    )
    a = net.element("A")
    # a number and its unit are one value: 4 V^2 is (4 V)^2, so sqrt gives 4 V
    assert a.values["emf"] == pytest.approx(5.5)
    assert a.values["r"] == pytest.approx(1.3 * 4.5e-3)
    value, dim, tol = net.values["aged"]
    assert tol == pytest.approx(0.05 * 1.3 * 4.5e-3)
    p = net.element("P")
    assert p.values["length"] == pytest.approx(3.9)
    assert p.values["r"] == pytest.approx(3.3e-3 * 3.9)


def test_part_defaults_and_override():
    net = dcnet.parse(
        "part agm cell emf=12.8V r=5mOhm capacity=100Ah chemistry=agm\n"
        "cell A a gnd part=agm\n"
        "cell B a gnd part=agm r=7mOhm\n"
        "load L a gnd r=1Ohm\n"
    )
    assert net.element("A").values["r"] == pytest.approx(5e-3)
    assert net.element("B").values["r"] == pytest.approx(7e-3)
    assert net.element("B").values["capacity"] == pytest.approx(100 * 3600)


def test_continuation_lines_and_comments():
    net = dcnet.parse("cell A a gnd emf=12V \\\n   r=5mOhm   # trailing comment\n# whole line\nload L a gnd \\\n r=1Ohm\n")
    assert net.element("A").values["r"] == pytest.approx(5e-3)
    assert net.element("L").values["r"] == 1.0


@pytest.mark.parametrize(
    "text, ground, says",
    [
        ("cell A a gnd emf=12V r=1Ohm\nload L a gnd r=1Ohm\n", "gnd", "named 'gnd'"),
        ("cell A a b emf=12V r=1Ohm\nload L a b r=1Ohm\n", "b", "negative terminal of A"),
        ("load L a b r=1Ohm\nsupply I b a current=1A\n", "a", "negative terminal of I"),
        ("resistor R x y r=1Ohm\n", "x", "first node"),
        ("cell A a b emf=12V r=1Ohm\nload L a b r=1Ohm\nground a\n", "a", "ground statement"),
    ],
)
def test_ground_rule(text, ground, says):
    net = dcnet.parse(text)
    assert net.ground == ground
    assert says in net.ground_rule


def test_solution_warns_when_ground_was_picked():
    sol = dcnet.parse("cell A a b emf=12V r=1Ohm\nload L a b r=1Ohm\n").solve()
    assert any("picked" in w for w in sol.warnings)


def test_include_relative_and_spans(tmp_path):
    (tmp_path / "parts").mkdir()
    (tmp_path / "parts" / "lib.dcn").write_text("part li cell emf=3.3V r=2mOhm chemistry=lifepo4\nlet lead = 0.5m\n")
    (tmp_path / "main.dcn").write_text('include "parts/lib.dcn"\ncell C1 p gnd part=li\ncable W p q length=lead size=6mm2\nload L q gnd r=1Ohm\nground gnd\n')
    net = dcnet.load(tmp_path / "main.dcn")
    assert net.element("C1").values["emf"] == pytest.approx(3.3)
    assert net.element("C1").span.line == 2
    sol = net.solve()
    assert sol.balance["ok"]


def test_include_errors_point_at_the_right_file(tmp_path):
    (tmp_path / "lib.dcn").write_text("cell A a b emf=12V r=1mohms\n")
    (tmp_path / "main.dcn").write_text('include "lib.dcn"\n')
    with pytest.raises(E.UnknownNameError) as info:
        dcnet.load(tmp_path / "main.dcn")
    assert info.value.file.endswith("lib.dcn") and info.value.line == 1


def test_include_cycle_is_named(tmp_path):
    (tmp_path / "a.dcn").write_text('include "b.dcn"\n')
    (tmp_path / "b.dcn").write_text('include "a.dcn"\n')
    with pytest.raises(E.IncludeError) as info:
        dcnet.load(tmp_path / "a.dcn")
    assert "include cycle: a.dcn -> b.dcn -> a.dcn" in info.value.message


def test_include_outside_the_folder_is_refused_unless_allowed(tmp_path):
    (tmp_path / "shared.dcn").write_text("load L a gnd r=1Ohm\n")
    site = tmp_path / "site"
    site.mkdir()
    (site / "main.dcn").write_text('include "../shared.dcn"\ncell A a gnd emf=12V r=1Ohm\n')
    with pytest.raises(E.IncludeError) as info:
        dcnet.load(site / "main.dcn")
    assert "outside" in info.value.message
    assert "hello" not in str(info.value)
    net = dcnet.load(site / "main.dcn", dcnet.Options(allow_outside=True))
    assert net.has_element("L")


@pytest.mark.skipif(os.name != "posix", reason="symlinks")
def test_symlink_out_of_the_folder_is_resolved_before_the_check(tmp_path):
    secret = tmp_path / "elsewhere.dcn"
    secret.write_text("hello this is not a circuit\n")
    site = tmp_path / "site"
    site.mkdir()
    (site / "link.dcn").symlink_to(secret)
    (site / "main.dcn").write_text('include "link.dcn"\n')
    with pytest.raises(E.IncludeError) as info:
        dcnet.load(site / "main.dcn")
    assert "outside" in info.value.message
    assert "hello" not in info.value.render()  # never echo another file's contents


def test_include_depth_limit(tmp_path):
    for k in range(5):
        (tmp_path / f"f{k}.dcn").write_text(f'include "f{k + 1}.dcn"\n')
    (tmp_path / "f5.dcn").write_text("cell A a gnd emf=12V r=1Ohm\nload L a gnd r=1Ohm\n")
    assert dcnet.load(tmp_path / "f0.dcn").has_element("A")
    with pytest.raises(E.LimitError):
        dcnet.load(tmp_path / "f0.dcn", dcnet.Options(max_include_depth=3))


def test_limits_are_kept_for_the_checks():
    net = dcnet.parse("cell A1 a gnd emf=12V r=1Ohm\ncell A2 a gnd emf=12V r=1Ohm\nload L a gnd r=1Ohm\nlimit imbalance max=10% among=A1,A2\nlimit drop max=3% from=a to=gnd\n")
    assert [lim.rule for lim in net.limits] == ["imbalance", "drop"]
    assert net.limits[0].values["among"] == ("A1", "A2")
    assert net.limits[0].values["max"].value == pytest.approx(0.1)


def test_word_properties_keep_their_spelling():
    net = dcnet.parse("cell A a gnd emf=12V r=1Ohm chemistry=lead-acid\nload L a gnd r=1Ohm\n")
    assert net.element("A").values["chemistry"] == "lead-acid"


def test_file_not_utf8(tmp_path):
    p = tmp_path / "latin.dcn"
    p.write_bytes(b"cell A a gnd emf=12V r=1Ohm\n# caf\xe9\n")
    with pytest.raises(E.InputError) as info:
        dcnet.load(p)
    assert info.value.line == 2 and "UTF-8" in info.value.message
