"""The HTML report: valid HTML (html5lib, strict), self-contained, every section, the command."""

import re
from pathlib import Path

import pytest

import dcnet
from dcnet.cli import main
from dcnet.report.html import power_ledger, render
from dcnet.report.text import CAUTION

ROOT = Path(__file__).resolve().parents[2]
DEMOS = sorted((ROOT / "circuits").glob("*.dcn"))
CABIN = ROOT / "circuits" / "cabin.dcn"


def strict_parse(text):
    """Parse with html5lib in strict mode: any parse error of the HTML standard raises."""
    html5lib = pytest.importorskip("html5lib")
    return html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(text)


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_every_demo_report_is_valid_self_contained_html(path):
    sol = dcnet.load(path).solve()
    page = render(sol, file=str(path))
    doc = strict_parse(page)
    # self-contained: no scripts, no fetched resources, no links out
    assert doc.findall(".//script") == [] and doc.findall(".//link") == [] and doc.findall(".//img") == []
    assert not [el for el in doc.iter() if el.get("src") or (el.get("href") or "").startswith(("http", "//"))]
    assert set(re.findall(r"https?://[^\s\"'<>]+", page)) <= {"http://www.w3.org/2000/svg"}
    # the picture and the tables
    assert doc.find(".//figure[@class='network']") is not None
    tables = {t.get("class"): t for t in doc.iter("table")}
    assert {"checks", "elements", "nodes", "ledger", "source"} <= set(tables)
    assert len(tables["elements"].findall("./tbody/tr")) == len(sol.netlist.elements)
    assert len(tables["nodes"].findall("./tbody/tr")) == len(sol.netlist.node_index)
    assert CAUTION in page
    # the circuit file, numbered line by line
    lines = path.read_text().splitlines()
    rows = tables["source"].findall("./tbody/tr")
    assert len(rows) == len(lines)
    assert [r[0].text for r in rows[:3]] == ["1", "2", "3"]


def test_strict_parser_does_catch_errors():
    html5lib = pytest.importorskip("html5lib")
    with pytest.raises(html5lib.html5parser.ParseError):
        strict_parse("<!DOCTYPE html><html><head><title>x</title></head><body><p>a</b></body></html>")


def test_checks_carry_their_sources_and_faults_their_figures():
    sol = dcnet.load(ROOT / "circuits" / "boat-house-bank.dcn").solve()
    page = render(sol)
    assert "FAIL" in page and "interrupt rating of MF (as given)" in page
    doc = strict_parse(page)
    faults = next(t for t in doc.iter("table") if t.get("class") == "faults")
    first = faults.find("./tbody/tr")
    (mf,) = [v for v in sol.verdicts if v.rule == "fault current" and v.subject == "MF"]
    from dcnet.report.text import si

    # the page shows the verdict's own figures (the figure itself is checked in tests/checks)
    assert first[0].text == "MF" and first[1].text == si(mf.value, "A") and first[2].text == "2.000 kA"


def test_power_ledger_closes():
    sol = dcnet.load(ROOT / "circuits" / "boat-isolator.dcn").solve()
    rows = power_ledger(sol)
    assert sum(w for _k, w, _d in rows) == pytest.approx(0.0, abs=1e-6)
    by = {k: w for k, w, _d in rows}
    # the charger's 40 A at its terminals, against storage, heat and the fridge
    assert -by["sources and chargers (at their terminals)"] == pytest.approx(
        40 * sol.voltage("CHARGER") - sol.power("SOLAR"), rel=1e-9
    )
    assert by["loads"] == pytest.approx(sol.power("FRIDGE"))


def test_cycle_and_spread_sections_appear_only_when_given():
    sol = dcnet.load(CABIN).solve()
    plain = render(sol)
    assert 'class="cycle"' not in plain and 'class="spread"' not in plain
    cycle = {
        "title": "Charge and discharge cycle",
        "summary": [("round-trip efficiency", "84.0 %")],
        "tables": [
            {
                "caption": "Energy ledger",
                "columns": ["item", "Wh"],
                "rows": [["charger in", "1200"], ["loads", "1008"]],
                "numeric": [1],
            }
        ],
        "plots": [
            {
                "title": "State of charge",
                "x_label": "time (h)",
                "y_label": "%",
                "series": [
                    {"name": "A", "x": [0, 1, 2], "y": [50, 70, 90]},
                    {"name": "B", "x": [0, 1, 2], "y": [50, 68, 86]},
                ],
            }
        ],
    }

    class Spread:
        def report_section(self):
            return {
                "title": "Tolerance spread",
                "plots": [
                    {
                        "kind": "histogram",
                        "title": "String A current",
                        "x_label": "A",
                        "values": [11.8, 12.0, 12.1, 12.4],
                        "marks": [{"name": "limit", "x": 12.5}],
                    }
                ],
            }

    page = render(sol, cycle=cycle, spread=Spread())
    doc = strict_parse(page)
    cyc = doc.find(".//section[@class='cycle']")
    assert cyc.find("h2").text == "Charge and discharge cycle"
    assert "Energy ledger" in page and "84.0 %" in page
    assert page.count('class="series"') == 2  # one line per series
    spr = doc.find(".//section[@class='spread']")
    assert spr is not None and "Tolerance spread" in page
    with pytest.raises(TypeError):
        render(sol, cycle=object())


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_command_writes_html_svg_and_png(capsys, tmp_path):
    code, out, err = run(capsys, "report", CABIN, "-o", tmp_path / "r.html")
    assert code == 0 and out == ""
    assert (tmp_path / "r.html").read_text().startswith("<!DOCTYPE html>")
    code, _, _ = run(capsys, "report", CABIN, "-o", tmp_path / "p.svg")
    assert code == 0 and (tmp_path / "p.svg").read_text().startswith("<?xml")
    code, out, _ = run(capsys, "report", CABIN, "--format", "svg")
    assert code == 0 and "<svg" in out
    code, out, _ = run(capsys, "report", CABIN, "--title", "Cellar <box>")
    assert code == 0 and "<h1>Cellar &lt;box&gt;</h1>" in out
    pytest.importorskip("matplotlib")
    code, _, _ = run(capsys, "report", CABIN, "-o", tmp_path / "p.png")
    assert code == 0 and (tmp_path / "p.png").read_bytes()[:4] == b"\x89PNG"


def test_command_exit_codes_and_errors(capsys, tmp_path):
    code, _, _ = run(capsys, "report", ROOT / "circuits" / "boat-house-bank.dcn", "-o", tmp_path / "b.html")
    assert code == 1  # a check failed; the report is still written
    assert (tmp_path / "b.html").exists()
    copy = tmp_path / "c.dcn"
    copy.write_text(CABIN.read_text())
    code, _, err = run(capsys, "report", copy, "-o", copy)
    assert code == 2 and "refusing to write over the input" in err
    assert copy.read_text() == CABIN.read_text()
    bad = tmp_path / "bad.dcn"
    bad.write_text("cell A a gnd emf=12V r=1mohms\nload L a gnd r=1Ohm\n")
    code, _, err = run(capsys, "report", bad, "-o", tmp_path / "x.html")
    assert code == 2 and "bad.dcn:1:" in err and "Traceback" not in err
    assert not (tmp_path / "x.html").exists()
    code, _, err = run(capsys, "report", CABIN, "--format", "png")
    assert code == 2 and "-o" in err


def test_report_from_standard_input(capsys, monkeypatch):
    import io

    monkeypatch.setattr("sys.stdin", io.StringIO(CABIN.read_text()))
    code, out, _ = run(capsys, "report", "-")
    assert code == 0 and "&lt;stdin&gt;" in out and "Hillside cabin" in out


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_every_demo_picture_prints_with_legible_labels(path):
    # on an upright A4 page, or on its side when that prints the labels larger; 8 px at 96 px
    # per inch is 6 pt, about the smallest print people read without effort (common practice,
    # no source)
    from dcnet.report import picture
    from dcnet.report.html import MIN_LABEL_PX, picture_fit

    sc = picture.scene(dcnet.load(path).solve(), title="")
    orientation, label = picture_fit(sc.width, sc.height)
    assert label >= MIN_LABEL_PX, f"{orientation}: labels print at {label:.1f} px"
