"""Headless Chromium for the memo tests: open a memo with a probe script, print it to PDF,
and read back what a reader would see (images loaded, overflow, console errors, page width).

Tests that need it skip with a stated reason where Chromium (Debian package ``chromium``) is
absent (:data:`NEEDS_BROWSER`).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

import pytest

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")
NEEDS_BROWSER = pytest.mark.skipif(
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

_MEDIA_BOX = rb"/MediaBox\s*\[\s*([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s*\]"


def chromium(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [BROWSER, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-extensions", *args], capture_output=True, text=True, timeout=60)


@dataclass
class Opened:
    """A memo as Chromium showed it (A4-wide window) and printed it."""

    page: str
    dom: str                  # the DOM after load, probe attributes included
    shown: subprocess.CompletedProcess
    printed: subprocess.CompletedProcess
    pdf: Path

    @property
    def images(self) -> tuple[int, int]:
        """(loaded, total) images."""
        found = re.search(r'data-images="(\d+)/(\d+)"', self.dom)
        assert found, "the probe did not run"
        return int(found.group(1)), int(found.group(2))

    @property
    def overflow(self) -> int:
        """Pixels the page is wider than an A4-wide window (<= 0: it fits)."""
        return int(re.search(r'data-overflow="(-?\d+)"', self.dom).group(1))

    def console_errors(self) -> list[str]:
        return [line for run in (self.shown, self.printed)
                for line in run.stderr.splitlines()
                if ("CONSOLE" in line or "console" in line)
                and ("Uncaught" in line or "rror" in line)]

    def pdf_widths(self) -> list[float]:
        data = self.pdf.read_bytes()
        assert data.startswith(b"%PDF")
        return [float(x1) - float(x0) for x0, _, x1, _ in re.findall(_MEDIA_BOX, data)]


def open_memo(page: str, folder: Path) -> Opened:
    """Write ``page`` (and a copy with the probe) into ``folder``, show and print it."""
    memo = folder / "memo.html"
    memo.write_text(page, encoding="utf-8")
    probe = folder / "probe.html"
    probe.write_text(page.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    shown = chromium("--enable-logging=stderr", "--v=0", "--virtual-time-budget=5000",
                     f"--window-size={A4_WIDTH_PX},1123", "--dump-dom", probe.as_uri())
    pdf = folder / "memo.pdf"
    printed = chromium("--enable-logging=stderr", "--v=0", "--no-pdf-header-footer",
                       f"--print-to-pdf={pdf}", memo.as_uri())
    return Opened(page, shown.stdout, shown, printed, pdf)


def check_reads_well(opened: Opened, images: int) -> None:
    """Both runs succeeded, every one of ``images`` images loaded, the page fits an A4-wide
    window, no console errors, and every printed page is A4 wide."""
    assert opened.shown.returncode == 0, opened.shown.stderr[-2000:]
    assert opened.printed.returncode == 0, opened.printed.stderr[-2000:]
    assert opened.images == (images, images) and opened.page.count("<img ") == images
    assert opened.overflow <= 0  # nothing wider than an A4-wide window
    assert opened.console_errors() == []
    widths = opened.pdf_widths()
    assert widths
    for width in widths:
        assert width == pytest.approx(A4_WIDTH_PT, abs=1.0)
