"""The network picture: every arrow agrees with the sign of the solved current (read from the SVG)."""

import math
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

import dcnet
from dcnet.report import picture

ROOT = Path(__file__).resolve().parents[2]
DEMOS = sorted((ROOT / "circuits").glob("*.dcn"))
SVG = "{http://www.w3.org/2000/svg}"


def _points(text):
    return [tuple(float(v) for v in p.split(",")) for p in text.split()]


def _wire_ends(el):
    if el.tag == SVG + "line":
        return (float(el.get("x1")), float(el.get("y1"))), (float(el.get("x2")), float(el.get("y2")))
    nums = [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?", el.get("d"))]
    return (nums[0], nums[1]), (nums[4], nums[5])


def _on_node(point, node, circles, bars, tol=1.5, stubs=None):
    """A wire end sits on its node: on the node's dot, on the node's bus bar, or at the end of
    a plain wire drawn from the node (round a bank)."""
    x, y = point
    cx, cy = circles[node]
    if math.hypot(x - cx, y - cy) <= tol:
        return True
    for x1, x2, by in bars.get(node, ()):
        if abs(y - by) <= tol and min(x1, x2) - tol <= x <= max(x1, x2) + tol:
            return True
    for (x1, y1), (x2, y2) in (stubs or {}).get(node, ()):
        if math.hypot(x - x1, y - y1) <= tol or math.hypot(x - x2, y - y2) <= tol:
            return True
    return False


def _stub_chain_ok(stubs, circles):
    """Every node's plain wires form a path that starts on the node's dot."""
    for node, segs in stubs.items():
        assert math.dist(segs[0][0], circles[node]) <= 1.5, node
        for (_, q), (p, _) in zip(segs, segs[1:]):
            assert math.dist(q, p) <= 1.5 or math.dist(p, circles[node]) <= 1.5, node


def read_svg(text):
    root = ET.fromstring(text)
    circles = {
        c.get("data-node"): (float(c.get("cx")), float(c.get("cy")))
        for c in root.iter(SVG + "circle")
        if c.get("class") == "node"
    }
    bars = {}
    for ln in root.iter(SVG + "line"):
        if ln.get("class") == "bar":
            bars.setdefault(ln.get("data-node"), []).append(
                (float(ln.get("x1")), float(ln.get("x2")), float(ln.get("y1")))
            )
    elements = {}
    for g in root.iter(SVG + "g"):
        if g.get("class") != "element":
            continue
        wire = next(c for c in g if c.get("class") == "wire")
        arrows = [c for c in g if c.get("class") == "arrow"]
        elements[g.get("data-name")] = {
            "from": g.get("data-from"),
            "to": g.get("data-to"),
            "current": float(g.get("data-current")),
            "status": g.get("data-status"),
            "ends": _wire_ends(wire),
            "arrows": [_points(a.get("points")) for a in arrows],
        }
    return circles, bars, elements


def read_stubs(text):
    """node -> the segments of the plain wires drawn from it (round a bank), in drawing order."""
    stubs = {}
    for ln in ET.fromstring(text).iter(SVG + "line"):
        if ln.get("class") == "stub":
            stubs.setdefault(ln.get("data-node"), []).append(
                ((float(ln.get("x1")), float(ln.get("y1"))), (float(ln.get("x2")), float(ln.get("y2"))))
            )
    return stubs


def check_arrows(sol, text):
    """Every element is drawn from its first node to its second, and its one arrow points the
    way its current flows; elements without current have no arrow."""
    circles, bars, elements = read_svg(text)
    stubs = read_stubs(text)
    _stub_chain_ok(stubs, circles)
    assert set(elements) == {el.name for el in sol.netlist.elements}
    assert set(circles) == set(sol.netlist.node_index)
    imax = max(abs(float(i)) for i in sol.i)
    for name, e in elements.items():
        i = sol.current(name)
        assert e["current"] == pytest.approx(i, rel=1e-12, abs=1e-300)
        start, end = e["ends"]
        assert _on_node(start, e["from"], circles, bars, stubs=stubs), name
        assert _on_node(end, e["to"], circles, bars, stubs=stubs), name
        if abs(i) <= 1e-9 * imax:
            assert e["arrows"] == [], f"{name} carries no current but has an arrow"
            continue
        assert len(e["arrows"]) == 1, name
        tip, b1, b2 = e["arrows"][0]
        pointing = (tip[0] - (b1[0] + b2[0]) / 2, tip[1] - (b1[1] + b2[1]) / 2)
        first_to_second = (end[0] - start[0], end[1] - start[1])
        dot = pointing[0] * first_to_second[0] + pointing[1] * first_to_second[1]
        assert dot != 0, name
        assert (dot > 0) == (i > 0), f"{name}: arrow against the current ({i:g} A from {e['from']} to {e['to']})"
    return elements


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_arrows_agree_with_solved_currents(path):
    sol = dcnet.load(path).solve()
    check_arrows(sol, picture.svg(sol))


def test_reversing_an_element_flips_its_sign_but_not_its_arrow(tmp_path):
    text = (ROOT / "circuits" / "cabin.dcn").read_text()
    flipped = text.replace("cable  PA     a+    bus+", "cable  PA     bus+  a+  ")
    assert flipped != text
    f = tmp_path / "flipped.dcn"
    f.write_text(flipped)
    a, b = dcnet.load(ROOT / "circuits" / "cabin.dcn").solve(), dcnet.load(f).solve()
    assert b.current("PA") == pytest.approx(-a.current("PA"))
    ea, eb = check_arrows(a, picture.svg(a))["PA"], check_arrows(b, picture.svg(b))["PA"]
    # the tip is nearer bus+ in both drawings: current leaves string A for the bus
    for e, bus_end in ((ea, 1), (eb, 0)):
        tip = e["arrows"][0][0]
        assert math.dist(tip, e["ends"][bus_end]) < math.dist(tip, e["ends"][1 - bus_end])


def test_colour_follows_the_worst_verdict():
    sol = dcnet.load(ROOT / "circuits" / "boat-house-bank.dcn").solve()
    status = picture.element_status(sol)
    assert status["MF"][0] == "fail"  # its interrupt rating is below the fault current
    # NAV's drop against 3 % for a critical load: "close" exactly when within 10 % of the limit
    (nav,) = [v for v in sol.verdicts if v.subject == "to load NAV"]
    assert status["NAV"][0] == ("close" if nav.value >= 0.9 * nav.limit else "pass")
    assert status["SW"][0] == "none"  # no check looks at a switch
    _, _, elements = read_svg(picture.svg(sol))
    assert elements["MF"]["status"] == "fail"
    assert picture.STATUS["fail"][0] in picture.svg(sol)


def test_bank_strings_are_columns():
    sol = dcnet.load(ROOT / "circuits" / "telecom-bank.dcn").solve()
    lay = picture.layout(sol)
    for j, string in enumerate(sol.netlist.banks["BAT"]["strings"]):
        xs = {round(lay.pos[n][0], 6) for c in string for n in sol.netlist.element(c).nodes}
        assert len(xs) == 1, f"string {j + 1} is not one column"
        # higher cells are drawn higher: the cell's positive node above its negative node
        for c in string:
            pos_node, neg_node = sol.netlist.element(c).nodes
            assert lay.pos[pos_node][1] > lay.pos[neg_node][1]


def test_too_large_a_circuit_is_not_drawn():
    lines = ["cell B n0 gnd emf=12V r=1mOhm"] + [
        f"resistor R{k} n{k} n{k + 1} r=1mOhm" for k in range(picture.MAX_NODES + 1)
    ]
    lines.append(f"load L n{picture.MAX_NODES + 1} gnd r=10Ohm")
    sol = dcnet.parse("\n".join(lines)).solve()
    with pytest.raises(picture.PictureTooLarge):
        picture.svg(sol)


def test_png_is_written(tmp_path):
    pytest.importorskip("matplotlib")
    sol = dcnet.load(ROOT / "circuits" / "cabin.dcn").solve()
    out = tmp_path / "cabin.png"
    picture.write_png(sol, out, dpi=60)
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_solve_and_report_do_not_import_matplotlib(tmp_path):
    code = (
        "import sys; from dcnet.cli import main; "
        f"main(['solve', {str(ROOT / 'circuits' / 'cabin.dcn')!r}]); "
        f"main(['report', {str(ROOT / 'circuits' / 'cabin.dcn')!r}, '-o', {str(tmp_path / 'r.html')!r}]); "
        "print('matplotlib' in sys.modules)"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"},
    )
    assert out.stdout.strip().splitlines()[-1] == "False", out.stderr


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_nothing_outside_a_bank_is_drawn_across_it(path):
    # A bank's leads tapped at opposite ends, or a load between its own terminals, once ran
    # straight across the strings; they go round the frame now (a readability rule of our own).
    sol = dcnet.load(path).solve()
    lay = picture.layout(sol)
    for el in sol.netlist.elements:
        if el.name in lay.bank_elements:
            continue
        (xa, ya), (xb, yb) = lay.ends[el.name]
        for blk in lay.banks:
            for t in np.linspace(0.05, 0.95, 19):
                x, y = xa + (xb - xa) * t, ya + (yb - ya) * t
                # between the outer strings, top and bottom rows included (along a row is on the bus)
                inside = blk["x0"] - 0.05 < x < blk["x1"] + 0.05 and blk["y0"] - 0.1 < y < blk["y1"] + 0.1
                assert not inside, f"{el.name} crosses bank {blk['name']}"
    for nd, lines in lay.wires.items():  # every wire starts at its node
        for line in lines:
            assert line[0] == pytest.approx(lay.pos[nd])


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_no_element_runs_along_another_nodes_bar(path):
    # An element drawn along a bus bar it does not belong to (a fuse between two buses on one
    # level, drawn over both bars) makes the branches hanging from that bar seem to join it.
    sol = dcnet.load(path).solve()
    lay = picture.layout(sol)
    for el in sol.netlist.elements:
        (xa, ya), (xb, yb) = lay.ends[el.name]
        if abs(ya - yb) > 1e-6:
            continue  # only runs along a level can lie on a bar
        lo, hi = sorted((xa, xb))
        for nd, (x0, x1, y) in lay.bars.items():
            if abs(y - ya) > 1e-6:
                continue
            overlap = min(hi, x1) - max(lo, x0)
            if nd in el.nodes:
                # its own bar: it may touch the bar's end, not run along it
                assert overlap <= 0.05, f"{el.name} runs along the bar of {nd}"
            else:
                assert overlap <= 0.05, f"{el.name} runs along the bar of {nd}, which it does not join"
