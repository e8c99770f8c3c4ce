"""The memo and figures of a plan made with a general analysis model.

Most checks use a stand-in plan with a synthetic results Dataset (invented numbers, shaped as
assurance.general.simulate_general returns them); one runs a tiny real simulation.
Percentages are re-derived here from the Dataset (the ``_shown`` rule of test_memo, written
out independently of report/wording.py).
"""

from __future__ import annotations

import math
import re
import shutil
import subprocess
import warnings
from types import SimpleNamespace

import numpy as np
import pytest
import xarray as xr
from _general_models import normal_model
from test_memo import _read

import assurance as asr
from assurance.errors import AssuranceInputError, AssuranceWarning
from assurance.general import GeneralSizeAnswer
from assurance.report._label_placement import overlaps
from assurance.report.model_figures import model_figure_makers, plot_model_success
from assurance.report.model_memo import model_memo_html, write_model_memo

SIZES = np.array([40, 80, 120, 160, 200])
TRIALS = 400


def _pct1(p: float) -> str:
    """A percentage with one decimal (the decision box's form), written out here."""
    return f"{100 * p:.1f}%"


def _dataset(warning: str | None = None, power: bool = True) -> xr.Dataset:
    a = np.array([0.35, 0.52, 0.61, 0.66, 0.69])  # invented
    p = np.array([0.45, 0.75, 0.90, 0.96, 0.99]) if power else np.full(5, np.nan)
    widths = 4.0 / np.sqrt(SIZES / 40)
    ds = xr.Dataset(
        {"assurance": ("n", a), "assurance_mcse": ("n", np.sqrt(a * (1 - a) / TRIALS)),
         "power": ("n", p), "power_mcse": ("n", np.sqrt(p * (1 - p) / TRIALS)),
         "width_mean": ("n", widths), "width_mean_mcse": ("n", 0.01 * widths),
         "width_median": ("n", 0.98 * widths), "width_q90": ("n", 1.2 * widths),
         "nuts_assurance_subset": ("n", a), "laplace_assurance_subset": ("n", a),
         "nuts_agreement": ("n", [0.0, 0.5, -1.2, 4.5 if warning else 0.3, 0.0]),
         "nuts_trials": ("n", np.full(5, 20)), "not_converged": ("n", np.zeros(5, int))},
        coords={"n": SIZES, "n_treatment": ("n", SIZES // 2), "n_control": ("n", SIZES // 2)},
        attrs={"model": "invented", "rule": "posterior", "trials": TRIALS, "seed": 7,
               "chunk": 50, "coverage": 0.95, "effect_scale": "difference",
               "method": "Laplace (normal) approximation at the posterior mode; NUTS on 20 "
                         "trials per size"})
    if warning:
        ds.attrs["warning"] = warning
    return ds


def _plan(ds: xr.Dataset | None = None, title: str = "Invented knee trial (model)",
          **extra) -> SimpleNamespace:
    ds = _dataset() if ds is None else ds
    answers = () if "sample_sizes" in extra else (
        GeneralSizeAnswer(120, float(ds.assurance[2]), float(ds.assurance_mcse[2]),
                          "assurance", 0.6, ""),)
    if answers and np.isfinite(ds.power.values).all():
        answers += (GeneralSizeAnswer(120, float(ds.power[2]), float(ds.power_mcse[2]),
                                      "power", 0.9, ""),)
    base = dict(model=normal_model(), rule=asr.PosteriorProbability(0.975), results=ds,
                sample_sizes=answers, planned_n=120,
                planned_reason="the smallest size reaching the assurance target of 60%",
                settings=SimpleNamespace(trials=TRIALS, chunk=50, seed=7, nuts_check=20,
                                         nuts_every=False, workers=None, scheduler=None),
                source=SimpleNamespace(path="design.toml", content=b"[endpoint]\n"),
                made_by="assurance plan design.toml", created="2026-01-05T10:00:00Z",
                title=title, unit="points", design_record=lambda: "[endpoint]\n")
    base.update(extra)
    return SimpleNamespace(**base)


def _page(plan: SimpleNamespace, **kw) -> str:
    return model_memo_html(plan, date="2026-01-05", versions="test versions", **kw)


def test_decision_box_comes_first_with_the_datasets_numbers():
    plan = _plan()
    page = _page(plan, figures=False)
    assert page.index('id="decision"') < min(page.index(f'id="{s}"') for s in (
        "assumed", "sizes", "method", "provenance", "cautions"))
    dom = _read(page)
    ds = plan.results
    assert dom.values["assurance"] == _pct1(float(ds.assurance[2]))
    assert dom.values["power"] == _pct1(float(ds.power[2]))
    # 2 MC SE in percentage points, with one decimal: 200 * sqrt(p (1 - p) / trials)
    two_se = 200 * math.sqrt(0.61 * 0.39 / TRIALS)
    assert f"\u00b1 {two_se:.1f} points" in dom.plain
    assert dom.values["gap"] == f"{round(100 * (0.90 - 0.61))} points"
    assert dom.values["check"] == "passes"
    assert "120 patients (60 on treatment, 60 on control)" in dom.plain


def test_no_nan_and_no_code_reprs():
    for ds in (_dataset(), _dataset(power=False)):
        page = _page(_plan(ds), figures=False)
        text = _read(page).plain
        assert not re.search(r"\bnan\b", page, re.IGNORECASE)
        assert not re.search(r"\b\w+\([a-z_]+=", text), "a code repr reached the page"
        assert "Traceback" not in page and "object at 0x" not in page
    assert "not simulated" in _read(_page(_plan(_dataset(power=False)), figures=False)).plain


def test_warning_is_shown_prominently():
    warning = ("NUTS and the Laplace approximation disagree by more than 3 Monte Carlo SE "
               "at n = 160; check the approximation (or fit every trial by NUTS).")
    page = _page(_plan(_dataset(warning=warning)), figures=False)
    dom = _read(page)
    assert warning in dom.values["warning"]
    assert page.index('data-key="warning"') < page.index('id="assumed"')
    assert dom.values["check"] == "fails"
    assert "Every trial can be fitted by NUTS" in dom.plain
    assert "No warning" not in page and 'data-key="warning"' not in _page(_plan(),
                                                                          figures=False)


def test_hostile_title_is_escaped(tmp_path):
    title = '<script>alert(1)</script> & "x"\x1b[31m'
    page = _page(_plan(title=title), figures=False)
    assert "<script" not in page.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp;" in page
    assert "\x1b" not in page and "\\x1b" in page


def test_targets_say_the_grid_bounds_the_answer():
    text = _read(_page(_plan(), figures=False)).plain
    assert "above 80 and at most 120 patients" in text
    # |0.61 - 0.60| <= 2 * sqrt(0.61 * 0.39 / 400) = 0.049: within 2 MC SE of the target
    assert "within 2 Monte Carlo standard errors of the target" in text
    # mean width at 80 patients: 4 / sqrt(2) = 2.828, MC SE 0.028 -> to its one figure
    assert f"{4 / math.sqrt(2):.2f} \u00b1 {0.04 / math.sqrt(2):.2f}" in text
    assert "Mean width of the 95% interval (points)" in text


def test_write_never_overwrites(tmp_path):
    path = tmp_path / "memo.html"
    write_model_memo(_plan(), path, figures=False, versions="-")
    with pytest.raises(AssuranceInputError, match="overwrite=True"):
        write_model_memo(_plan(), path, figures=False, versions="-")
    write_model_memo(_plan(), path, overwrite=True, figures=False, versions="-")
    with pytest.raises(AssuranceInputError, match="'plan' parameter of model_memo_html"):
        model_memo_html(SimpleNamespace(results=None))


@pytest.mark.parametrize("power", [True, False])
def test_figures_have_no_overlapping_labels_and_name_units(power):
    plan = _plan(_dataset(power=power))
    makers = model_figure_makers(plan)
    assert set(makers) == {"success_by_size", "interval_width"}
    for name, make in makers.items():
        ax = make().axes[0]
        assert overlaps(ax) == [], name
        assert "(patients)" in ax.get_xlabel()
        assert "(" in ax.get_ylabel() and ax.get_ylabel().endswith(")")
    assert makers["interval_width"]().axes[0].get_ylabel().endswith("(points)")


def test_success_figure_draws_the_datasets_values():
    ds = _dataset()
    ax = plot_model_success(ds, planned_n=120)
    curves = {tuple(np.round(line.get_ydata(), 6)) for line in ax.get_lines()
              if len(line.get_ydata()) == SIZES.size}
    assert tuple(np.round(ds.assurance.values, 6)) in curves
    assert tuple(np.round(ds.power.values, 6)) in curves


def test_real_tiny_run_renders():
    # a real simulation through the engine (normal outcome, known SD; invented scenario)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AssuranceWarning)  # 2 NUTS trials: a coarse check
        ds = asr.general.simulate_general(
            normal_model(), [20, 60], rule=asr.PosteriorProbability(0.975), trials=40,
            chunk=20, nuts_check=2, nuts_draws=150, nuts_tune=150, seed=3, progress=False)
    answer = asr.general.solve_general_n(ds, 0.3)
    plan = _plan(ds, sample_sizes=(answer,), planned_n=answer.n or 60)
    page = _page(plan)
    dom = _read(page)
    j = int(np.flatnonzero(ds.n.values == (answer.n or 60))[0])
    assert dom.values["assurance"] == _pct1(float(ds.assurance[j]))
    assert not re.search(r"\bnan\b", page, re.IGNORECASE)
    assert page.count("data:image/png;base64,") == 2


BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.mark.skipif(BROWSER is None,
                    reason="headless Chromium (Debian package chromium) is not installed")
def test_memo_renders_in_headless_chromium(tmp_path):
    plan = _plan(_dataset(warning="NUTS and the Laplace approximation disagree."))
    memo = tmp_path / "memo.html"
    memo.write_text(_page(plan), encoding="utf-8")
    shown = subprocess.run([BROWSER, "--headless", "--no-sandbox", "--disable-gpu",
                            "--no-first-run", "--dump-dom", memo.as_uri()],
                           capture_output=True, text=True, timeout=60)
    assert shown.returncode == 0, shown.stderr[-2000:]
    dom = _read(shown.stdout)
    assert dom.values["assurance"] == _pct1(0.61)
    assert dom.values["check"] == "fails"
