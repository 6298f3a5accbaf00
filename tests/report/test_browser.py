"""The report in a real headless browser (Chromium): loads without console errors, shows the
picture and the tables, and prints to PDF. Skipped when no Chromium is installed; CI installs
Debian's ``chromium`` package (see .ci/run)."""

import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pytest

import dcnet
from dcnet.report.html import render

ROOT = Path(__file__).resolve().parents[2]
DEMOS = sorted((ROOT / "circuits").glob("*.dcn"))
BROWSER = next((shutil.which(b) for b in ("chromium", "chromium-browser", "google-chrome") if shutil.which(b)), None)

pytestmark = pytest.mark.skipif(
    BROWSER is None, reason="no Chromium on this machine (apt-get install chromium; CI installs it)"
)

A4_WIDTH_PX = 794  # 210 mm at 96 px per inch


def browse(tmp_path, page: Path, *extra: str) -> subprocess.CompletedProcess:
    """Run headless Chromium on a file with console messages logged to stderr."""
    args = [
        BROWSER,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-dev-shm-usage",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--hide-scrollbars",
        f"--user-data-dir={tmp_path / 'profile'}",
        "--enable-logging=stderr",
        "--v=0",
        *extra,
        page.as_uri(),
    ]
    return subprocess.run(args, capture_output=True, text=True, timeout=180, cwd=tmp_path)


def console_messages(stderr: str) -> list[str]:
    """Messages the page wrote to the console (errors, warnings, logs): Chromium logs them as CONSOLE."""
    return [line for line in stderr.splitlines() if "CONSOLE" in line]


class _Census(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: dict[str, int] = {}
        self.classes: dict[str, int] = {}

    def handle_starttag(self, tag, attrs):
        self.tags[tag] = self.tags.get(tag, 0) + 1
        for k, v in attrs:
            if k == "class" and v:
                for c in v.split():
                    self.classes[c] = self.classes.get(c, 0) + 1


def test_console_errors_are_seen(tmp_path):
    """The harness itself: a page that logs an error is caught, so a clean run means something."""
    page = tmp_path / "noisy.html"
    page.write_text(
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>t</title></head><body><script>console.error("dcnet-probe")</script></body></html>'
    )
    res = browse(tmp_path, page, "--dump-dom")
    assert any("dcnet-probe" in m for m in console_messages(res.stderr)), res.stderr[-2000:]


# Added to a copy of the page by the test only (the report itself has no scripts): measures,
# once laid out at A4 width, whether the page scrolls sideways and how large the picture's
# labels come out.
PROBE = """<script>window.addEventListener("load", () => {
  const d = document.documentElement, svg = document.querySelector("svg.dcnet-picture");
  const scale = svg ? svg.getBoundingClientRect().width / svg.viewBox.baseVal.width : 1;
  const p = document.createElement("pre"); p.id = "probe";
  p.textContent = d.clientWidth + " " + d.scrollWidth + " " + scale; document.body.appendChild(p);
});</script>"""


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_demo_report_renders_without_console_errors(tmp_path, path):
    sol = dcnet.load(path).solve()
    page = tmp_path / f"{path.stem}.html"
    page.write_text(render(sol, file=str(path)).replace("</body>", PROBE + "</body>"), encoding="utf-8")
    res = browse(tmp_path, page, f"--window-size={A4_WIDTH_PX},1400", "--virtual-time-budget=3000", "--dump-dom")
    assert res.returncode == 0, res.stderr[-2000:]
    assert console_messages(res.stderr) == []
    # readable at A4 width: the page does not scroll sideways, and the picture's 10.5 px labels
    # are drawn at 8 px or more (about 6 pt; the picture scrolls inside its frame if need be)
    m = re.search(r'<pre id="probe">(\d+) (\d+) ([\d.]+)</pre>', res.stdout)
    assert m, res.stdout[-500:]
    client, scroll, scale = int(m.group(1)), int(m.group(2)), float(m.group(3))
    assert scroll <= client, f"the page is {scroll} px wide in a {client} px window"
    assert 10.5 * scale >= 7.9, f"picture labels drawn at {10.5 * scale:.1f} px"
    census = _Census()
    census.feed(res.stdout)
    # the browser built the picture and the tables
    assert census.classes.get("dcnet-picture") == 1
    assert census.classes.get("element") == len(sol.netlist.elements)
    assert census.classes.get("arrow", 0) >= 1
    for table in ("checks", "elements", "nodes", "ledger", "source"):
        assert census.classes.get(table, 0) >= 1, table
    assert census.tags.get("tr", 0) > len(sol.netlist.elements) + len(sol.netlist.node_index)


def test_screenshot_at_a4_width_and_pdf(tmp_path):
    sol = dcnet.load(ROOT / "circuits" / "telecom-bank.dcn").solve()
    page = tmp_path / "bank.html"
    page.write_text(render(sol), encoding="utf-8")
    shot = tmp_path / "bank.png"
    res = browse(tmp_path, page, f"--window-size={A4_WIDTH_PX},1400", f"--screenshot={shot}")
    assert res.returncode == 0 and console_messages(res.stderr) == []
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert int.from_bytes(data[16:20], "big") == A4_WIDTH_PX  # IHDR width
    pdf = tmp_path / "bank.pdf"
    res = browse(tmp_path, page, f"--print-to-pdf={pdf}", "--no-pdf-header-footer")
    assert res.returncode == 0
    body = pdf.read_bytes()
    assert body.startswith(b"%PDF")
    pages = len(re.findall(rb"/Type\s*/Page(?!s)", body))
    assert pages >= 2  # the picture and tables, then the inputs on their own page
    # A4 portrait media box (595 x 842 points)
    box = re.search(rb"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)", body)
    assert box and abs(float(box.group(1)) - 595.3) < 2 and abs(float(box.group(2)) - 841.9) < 2


def test_a_wide_picture_prints_on_a_page_of_its_own_on_its_side(tmp_path):
    # the cabin rack's eight strings side by side: upright its labels would print at about
    # 6 px, so the picture takes an A4 page on its side (842 x 595 points) and the rest stays upright
    sol = dcnet.load(ROOT / "circuits" / "cabin-rack-taps.dcn").solve()
    page = tmp_path / "rack.html"
    page.write_text(render(sol), encoding="utf-8")
    pdf = tmp_path / "rack.pdf"
    res = browse(tmp_path, page, f"--print-to-pdf={pdf}", "--no-pdf-header-footer")
    assert res.returncode == 0
    boxes = [
        (float(w), float(h)) for w, h in re.findall(rb"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)", pdf.read_bytes())
    ]
    landscape = [b for b in boxes if b[0] > b[1]]
    assert len(landscape) == 1 and abs(landscape[0][0] - 841.9) < 2 and abs(landscape[0][1] - 595.3) < 2
    assert len(boxes) - len(landscape) >= 2
