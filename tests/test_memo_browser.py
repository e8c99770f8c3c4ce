"""Every case study's memo opened in a real browser (headless Chromium).

Checks: the page renders and its decision box shows the plan's numbers (the DOM after
loading, ``--dump-dom``), every image loads (a test-only copy of the memo with a small
probe script marks images whose ``naturalWidth`` is above zero; the memo itself holds no
script), the page is no wider than an A4 sheet at 96 dpi (794 px), there are no console
errors (``--enable-logging=stderr``), and the printed PDF is A4 wide (595 pt, read from the
PDF's MediaBox). Skipped, with the reason, where Chromium is not installed.
"""

from __future__ import annotations

import re
import shutil
import subprocess

import pytest
from _memo_plans import CASE_STUDIES, case_plan
from test_memo import _read, _shown

from assurance.report.memo import plan_memo_html

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(
    BROWSER is None, reason="headless Chromium (Debian package chromium) is not installed")

#: A4 paper width in PostScript points (210 mm / 25.4 * 72 = 595.3; ISO 216)
A4_WIDTH_PT = 595.3
#: A4 width in CSS pixels at 96 per inch (210 mm / 25.4 * 96 = 793.7)
A4_WIDTH_PX = 794

PROBE = """<script>
window.addEventListener("load", function () {
  var images = document.images, loaded = 0;
  for (var k = 0; k < images.length; k++) {
    if (images[k].complete && images[k].naturalWidth > 0) loaded++;
  }
  document.body.setAttribute("data-images", loaded + "/" + images.length);
  document.body.setAttribute("data-overflow",
    String(document.documentElement.scrollWidth - document.documentElement.clientWidth));
});
</script>"""


def _chromium(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [BROWSER, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-extensions", *args], capture_output=True, text=True, timeout=60)


@pytest.fixture(scope="module", params=CASE_STUDIES)
def opened(request, tmp_path_factory):
    plan = case_plan(request.param)
    page = plan_memo_html(plan, date="2026-01-05", versions="test")
    folder = tmp_path_factory.mktemp(request.param)
    memo = folder / "memo.html"
    memo.write_text(page, encoding="utf-8")
    probe = folder / "probe.html"
    probe.write_text(page.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    shown = _chromium("--enable-logging=stderr", "--v=0", "--virtual-time-budget=5000",
                      f"--window-size={A4_WIDTH_PX},1123", "--dump-dom", probe.as_uri())
    pdf = folder / "memo.pdf"
    printed = _chromium("--enable-logging=stderr", "--v=0", "--no-pdf-header-footer",
                        f"--print-to-pdf={pdf}", memo.as_uri())
    return plan, page, shown, printed, pdf


def test_the_memo_holds_no_script_of_its_own(opened):
    _, page, _, _, _ = opened
    assert "<script" not in page.lower()


def test_the_page_renders_with_the_plans_numbers(opened):
    plan, _, shown, _, _ = opened
    assert shown.returncode == 0, shown.stderr[-2000:]
    dom = _read(shown.stdout)
    at = plan.results.sel(n=plan.planned_n)
    assert dom.values["assurance"] == _shown(float(at.assurance))
    assert dom.values["power"] == _shown(float(at.power))
    assert dom.values["ceiling"] == _shown(float(plan.results.ceiling))
    assert dom.order[:2] == ["h1", "decision"]


def test_every_image_loads_and_the_page_fits_a4_width(opened):
    _, page, shown, _, _ = opened
    images = re.search(r'data-images="(\d+)/(\d+)"', shown.stdout)
    assert images, "the probe did not run"
    loaded, total = int(images.group(1)), int(images.group(2))
    assert total == page.count("<img ") and total >= 2
    assert loaded == total
    overflow = re.search(r'data-overflow="(-?\d+)"', shown.stdout)
    assert int(overflow.group(1)) <= 0  # nothing wider than the A4-wide window


def test_no_console_errors(opened):
    _, _, shown, printed, _ = opened
    for run in (shown, printed):
        for line in run.stderr.splitlines():
            if "CONSOLE" in line or "console" in line:
                assert "Uncaught" not in line and "rror" not in line, line


def test_the_printed_pdf_is_a4_wide(opened):
    _, _, _, printed, pdf = opened
    assert printed.returncode == 0, printed.stderr[-2000:]
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF")
    boxes = re.findall(rb"/MediaBox\s*\[\s*([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s*\]",
                       data)
    assert boxes
    for x0, _, x1, _ in boxes:
        assert float(x1) - float(x0) == pytest.approx(A4_WIDTH_PT, abs=1.0)
