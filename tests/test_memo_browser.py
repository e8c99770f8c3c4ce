"""Every case study's memo opened in a real browser (headless Chromium).

Checks: the page renders and its decision box shows the plan's numbers (the DOM after
loading, ``--dump-dom``), every image loads (a test-only copy of the memo with a small
probe script marks images whose ``naturalWidth`` is above zero; the memo itself holds no
script), the page is no wider than an A4 sheet at 96 dpi (794 px), there are no console
errors (``--enable-logging=stderr``), and the printed PDF is A4 wide (595 pt, read from the
PDF's MediaBox). Skipped, with the reason, where Chromium is not installed.
"""

from __future__ import annotations

import pytest
from _browser import NEEDS_BROWSER, check_reads_well, open_memo
from _memo_plans import CASE_STUDIES, case_plan
from test_memo import _read, _shown

from assurance.report.memo import plan_memo_html

pytestmark = NEEDS_BROWSER


@pytest.fixture(scope="module", params=CASE_STUDIES)
def opened(request, tmp_path_factory):
    plan = case_plan(request.param)
    page = plan_memo_html(plan, date="2026-01-05", versions="test")
    opened = open_memo(page, tmp_path_factory.mktemp(request.param))
    return plan, opened


def test_the_memo_holds_no_script_of_its_own(opened):
    assert "<script" not in opened[1].page.lower()


def test_the_page_renders_with_the_plans_numbers(opened):
    plan, shown = opened
    assert shown.shown.returncode == 0, shown.shown.stderr[-2000:]
    dom = _read(shown.dom)
    at = plan.results.sel(n=plan.planned_n)
    assert dom.values["assurance"] == _shown(float(at.assurance))
    assert dom.values["power"] == _shown(float(at.power))
    assert dom.values["ceiling"] == _shown(float(plan.results.ceiling))
    assert dom.order[:2] == ["h1", "decision"]


def test_every_image_loads_the_page_fits_a4_and_prints_a4(opened):
    _, shown = opened
    assert shown.images[1] >= 2
    check_reads_well(shown, images=shown.images[1])
