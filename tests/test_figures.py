"""Figures read cleanly: no label covers a marker, a curve or another label, legends cover no
marker, and every axis names its unit.

The overlap test measures bounding boxes in display coordinates after layout (matplotlib's
own ``get_window_extent``), on every case study's figures and on the new figures drawn from
synthetic datasets. The checker itself is checked: a label drawn on purpose over a marker
and over another label must be reported.
"""

from __future__ import annotations

import multiprocessing
import os
from pathlib import Path

import numpy as np
import pytest

import assurance as asr
from assurance.report import figures as F
from assurance.report._label_placement import Label, around, overlaps, place_labels

CASES = sorted(p.parent.name for p in Path(__file__).parent.parent.glob(
    "case_studies/*/design.toml"))
ROOT = Path(__file__).parent.parent


def _plan(name):
    """The case study's plan (the design file's own sizes; sensitivity as the file says)."""
    return asr.Plan.from_file(ROOT / "case_studies" / name / "design.toml")


def _all_figures(plan):
    figs = dict(plan.figures())
    ds = plan.results
    figs["decomposition"] = F.plot_decomposition(ds).figure
    if "prob_go" in ds:
        planned = getattr(plan, "planned_n", int(ds.n[-1]))
        figs["zones"] = F.plot_zones(ds, planned_n=planned).figure
        figs["zone_characteristic"] = F.plot_zone_characteristic(ds, planned).figure
    if "sensitivity_map" in ds and ds["sensitivity_map"].size:
        figs["sensitivity_map"] = F.plot_sensitivity_map(
            ds, plan.design, target=plan.settings.targets.get("assurance")).figure
    return figs


def _data_axes(fig):
    return [ax for ax in fig.axes if ax.get_label() != "<colorbar>"
            and type(ax).__name__ != "SecondaryAxis"]


@pytest.fixture(scope="module", params=CASES)
def case_figures(request):
    return request.param, _all_figures(_plan(request.param))


def test_no_label_covers_a_marker_a_curve_or_another_label(case_figures):
    name, figs = case_figures
    for fig_name, fig in figs.items():
        for ax in _data_axes(fig):
            assert overlaps(ax) == [], (name, fig_name)


def test_every_axis_names_its_unit(case_figures):
    name, figs = case_figures
    for fig_name, fig in figs.items():
        for ax in _data_axes(fig):
            x, y = ax.get_xlabel(), ax.get_ylabel()
            assert x.strip() and y.strip(), (name, fig_name)
            assert "(" in y and ")" in y, (name, fig_name, y)  # "... (probability)" etc.
            if fig_name in ("prior", "zone_characteristic", "zones_by_effect", "sensitivity_map"):
                assert "(" in x and ")" in x or "ratio" in x, (name, fig_name, x)
            elif fig_name != "prior_fit":
                assert "patients" in x, (name, fig_name, x)


def test_time_to_event_figures_over_sizes_have_an_events_axis():
    plan = _plan("event_driven")
    ax = F.plot_power_and_assurance(plan.results, answers=list(plan.sample_sizes))
    tops = [a for a in ax.child_axes if type(a).__name__ == "SecondaryAxis"]
    assert len(tops) == 1 and "events" in tops[0].get_xlabel().lower()
    # the top axis maps sizes to the dataset's expected events (linear between sizes)
    n = plan.results.n.values
    events = plan.results.expected_events.values
    mid = (n[3] + n[4]) / 2
    forward = tops[0]._functions[0]
    assert float(forward(np.array([mid]))[0]) == pytest.approx((events[3] + events[4]) / 2)


def test_the_non_inferiority_margin_is_marked_on_the_prior():
    plan = _plan("weekly_injection")  # margin 3 mmHg, lower is better: marked at +3
    ax = F.plot_prior(plan.design)
    labels = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert any("non-inferiority margin (3" in t for t in labels)
    positions = [line.get_xdata()[0] for line in ax.get_lines()
                 if line.get_label().startswith("non-inferiority margin")]
    assert positions == [pytest.approx(3.0)]


def test_ceiling_and_target_at_the_same_height_stay_apart():
    # ceiling exactly at the target: different line styles, labels from opposite ends
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 4.0))
    ceiling = round(design.ceiling(), 3)
    p = asr.plan(design, targets={"power": ceiling}, sizes=list(range(20, 801, 20)))
    ax = F.plot_power_and_assurance(p.results, answers=list(p.sample_sizes))
    lines = {line.get_label(): line for line in ax.get_lines()}
    ceiling_line = next(v for k, v in lines.items() if k.startswith("ceiling"))
    target_line = next(v for k, v in lines.items() if k.startswith("target"))
    # dashed black against dotted grey, of different widths (dash patterns are private)
    assert ceiling_line.get_color() != target_line.get_color()
    assert ceiling_line.get_linewidth() != target_line.get_linewidth()
    assert overlaps(ax) == []
    texts = {t.get_text().split(" ")[0]: t for t in ax.texts if t.get_visible()}
    if "ceiling" in texts and "target" in texts:
        assert texts["ceiling"].get_horizontalalignment() == "right"
        assert texts["target"].get_horizontalalignment() == "left"


# ------------------------------------------------------------------------------------------
# the checker can fail
# ------------------------------------------------------------------------------------------
def _simple_axes():
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5))
    ds = asr.evaluate(design, range(20, 401, 20))
    return F.plot_power_and_assurance(ds)


def test_the_checker_reports_a_label_drawn_over_a_marker_and_another_label():
    ax = _simple_axes()
    ax.plot([200], [0.5], marker="o", markersize=8, linestyle="none")
    ax.annotate("deliberately on the marker", (200, 0.5), ha="center", va="center")
    ax.annotate("deliberately on the other label", (200, 0.5), xytext=(5, 0),
                textcoords="offset points", va="center")
    found = overlaps(ax)
    assert any("covers a marker" in f for f in found)
    assert any("overlaps label" in f for f in found)


def test_the_checker_reports_a_label_on_a_curve():
    ax = _simple_axes()
    x, y = ax.get_lines()[0].get_data()
    ax.annotate("on the curve", (x[5], y[5]), ha="center", va="center")
    assert any("covers a line" in f for f in overlaps(ax))


def test_the_placer_moves_a_label_off_the_marker_it_names():
    ax = _simple_axes()
    ax.plot([200], [0.5], marker="o", markersize=8, linestyle="none")
    (label,) = place_labels(ax, [Label("n = 200\n(a marked size)", (200, 0.5), around())])
    assert label.placed and overlaps(ax) == []


def test_a_label_that_fits_nowhere_becomes_a_footnote():
    ax = _simple_axes()
    xs = np.linspace(*ax.get_xlim(), 60)
    for y in np.linspace(0.02, 0.98, 60):  # a dense field of markers: no room anywhere
        ax.plot(xs, np.full_like(xs, y), marker="s", markersize=9, linestyle="none")
    (label,) = place_labels(ax, [Label("crowded out", (200, 0.5), around())])
    assert not label.placed and not label.artist.get_visible()
    assert any("[1] crowded out" in t.get_text() for t in ax.texts)


def test_a_footnoted_label_of_several_sizes_keeps_them_apart():
    # a label naming two sizes, footnoted, reads "n = 280 (...); n = 288 (...)", not one
    # run-on line
    ax = _simple_axes()
    xs = np.linspace(*ax.get_xlim(), 60)
    for y in np.linspace(0.02, 0.98, 60):
        ax.plot(xs, np.full_like(xs, y), marker="s", markersize=9, linestyle="none")
    text = "n = 280 (classical power 0.9)\nn = 288 (conditional assurance 0.9)"
    place_labels(ax, [Label(text, (200, 0.5), around(), note=text.replace("\n", "; "))])
    assert any("[1] n = 280 (classical power 0.9); n = 288 (conditional assurance 0.9)"
               in t.get_text() for t in ax.texts)


# ------------------------------------------------------------------------------------------
# the new figures on synthetic datasets (names as the sensitivity and zone results use)
# ------------------------------------------------------------------------------------------
def _sensitivity_ds(ratio=False):
    import json

    import xarray as xr

    centre = np.log(0.8) if ratio else 4.0
    spread = 0.15 if ratio else 2.0
    c = centre + spread * np.linspace(-2, 2, 21)
    s = spread * np.geomspace(0.25, 4.0, 15)
    # an assurance-like surface: rises with the centre's benefit, flattens with the spread
    z = (-c[:, None] if ratio else c[:, None]) / np.sqrt(s[None, :] ** 2 + spread ** 2)
    grid = 0.5 * (1 + np.tanh(z))
    endpoint = {"kind": "time_to_event", "better": "lower"} if ratio else \
        {"kind": "continuous", "layout": "two_arm", "unit": "metres", "better": "higher"}
    return xr.Dataset(
        {"sensitivity_map": (("map_centre", "map_spread"), grid),
         "sensitivity_planned_n": ((), 400)},
        coords={"map_centre": c, "map_spread": s},
        attrs={"sensitivity_elicited_centre": centre, "sensitivity_elicited_spread": spread,
               "title": "Synthetic", "design": json.dumps({"endpoint": endpoint})})


@pytest.mark.parametrize("ratio", [False, True])
def test_sensitivity_map_labels_marks_and_contour(ratio):
    ds = _sensitivity_ds(ratio)
    ax = F.plot_sensitivity_map(ds, target=0.6)
    bar = [a for a in ax.figure.axes if a.get_label() == "<colorbar>"][0]
    assert bar.get_ylabel() == "Probability of success at n = 400"
    assert any(t.get_text() == "target 0.6" and t.get_visible() for t in ax.texts)
    assert any(line.get_marker() == "*" for line in ax.get_lines())
    if ratio:
        assert ax.get_xlabel().startswith("Prior centre: hazard ratio (median")
        ticks = [t.get_text() for t in ax.get_xticklabels()]
        assert "0.8" in ticks  # natural ratios on the log axis
    else:
        assert "metres" in ax.get_xlabel() and "metres" in ax.get_ylabel()
    assert overlaps(ax) == []


def test_zone_figures_on_a_computed_zone_dataset():
    from assurance.rules.zones import GoConsiderStop, evaluate_zones

    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, unit="metres"),
                             asr.Normal(4.0, 2.0))
    ds = evaluate_zones(design, GoConsiderStop(2.0, 4.0), range(50, 401, 25),
                        effects=np.linspace(-1, 8, 19))
    ax = F.plot_zones(ds, planned_n=210)
    # the label at the planned size reads the three probabilities at the nearest size (200)
    at = ds.sel(n=200)
    text = next(t.get_text() for t in ax.texts if t.get_text().startswith("planned"))
    assert f"go {float(at.prob_go):.0%}" in text and "n = 200" in text
    assert overlaps(ax) == []
    ax2 = F.plot_zone_characteristic(ds, 200)
    assert [line.get_label() for line in ax2.get_lines()] == ["P(go)", "P(consider)",
                                                               "P(stop)"]
    np.testing.assert_allclose(ax2.get_lines()[0].get_ydata(), ds.oc_go.sel(n=200).values)
    assert overlaps(ax2) == []
    with pytest.raises(asr.AssuranceInputError, match="'ds' parameter of plot_zones"):
        F.plot_zones(design)


def test_new_figures_are_public():
    for name in ("plot_zones", "plot_zone_characteristic", "plot_sensitivity_map"):
        assert name in F.__all__


def test_figures_drawn_in_worker_processes_are_the_same_bytes():
    # render_figures forks workers where it can; the images must not depend on it
    from assurance.report.plan_figures import figure_makers, render_figures

    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z", unit="mmHg"),
                             asr.Normal(4.0, 2.0), title="Invented: forked figures")
    p = asr.plan(design, targets={"assurance": 0.6}, sizes=[50, 100, 200],
                 sensitivity=asr.SensitivitySettings(map_centres=5, map_spreads=4))
    serial = render_figures(p, ("png", "svg"), workers=1)
    forked = render_figures(p, ("png", "svg"), workers=2)
    assert list(serial) == list(figure_makers(p)) == list(forked)
    for name in serial:
        assert serial[name]["png"] == forked[name]["png"], name
        assert serial[name]["svg"] == forked[name]["svg"], name


@pytest.mark.skipif("fork" not in multiprocessing.get_all_start_methods()
                    or len(os.sched_getaffinity(0)) < 2,
                    reason="early figure workers need fork and two cores")
def test_figures_sent_to_early_workers_are_the_same_bytes():
    # the command line starts the workers before computing and sends them the pickled plan
    from assurance.report import plan_figures as pf

    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z", unit="mmHg"),
                             asr.Normal(4.0, 2.0), title="Invented: figures sent")
    p = asr.plan(design, targets={"assurance": 0.6}, sizes=[50, 100, 200],
                 sensitivity=asr.SensitivitySettings(map_centres=5, map_spreads=4))
    serial = pf.render_figures(p, ("png",), workers=1)
    with pf.figure_workers_started_early():
        pool = pf._EARLY_POOL
        assert pool is not None
        sent = pf.render_figures(p, ("png",))
        again = pf.render_figures(p, ("png",))  # a second plan on the same workers
    assert pf._EARLY_POOL is None
    assert list(sent) == list(serial) == list(again)
    for name in serial:
        assert sent[name]["png"] == serial[name]["png"] == again[name]["png"], name


@pytest.mark.skipif("fork" not in multiprocessing.get_all_start_methods()
                    or len(os.sched_getaffinity(0)) < 2,
                    reason="early figure workers need fork and two cores")
def test_a_plan_the_early_workers_cannot_take_is_drawn_as_before(monkeypatch):
    # a worker failing on the sent plan must not fail the command: the figures are drawn
    # as without early workers, with the same bytes
    from assurance.report import plan_figures as pf

    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0), title="Invented: a refused plan")
    p = asr.plan(design, sizes=[50, 100, 200], sensitivity=False)
    serial = pf.render_figures(p, ("png",), workers=1)
    with pf.figure_workers_started_early():
        # the plan reaches the workers as bytes they cannot unpickle
        monkeypatch.setattr(pf.pickle, "dumps", lambda *a, **k: b"not a pickle")
        drawn = pf.render_figures(p, ("png",))
    assert {k: v["png"] for k, v in drawn.items()} == {k: v["png"] for k, v in serial.items()}


@pytest.mark.skipif("fork" not in multiprocessing.get_all_start_methods(),
                    reason="the drawers are forked processes")
def test_forked_drawers_return_every_figure_in_order_and_pass_on_a_failure(monkeypatch):
    # an early worker forks further drawers that share the list of figures: each figure is
    # drawn once, the bytes come back in the list's order, equal to drawing them here, and
    # an error in any drawer reaches the caller (who then draws without the early worker)
    from matplotlib.figure import Figure

    from assurance.report import plan_figures as pf

    def figure(k: int) -> Figure:
        fig = Figure(figsize=(2, 1.5))
        fig.add_subplot().plot([0, 1, 2], [k, 0, k])
        return fig

    names = [f"f{k}" for k in range(5)]
    makers = {name: (lambda k=k: figure(k)) for k, name in enumerate(names)}
    monkeypatch.setattr(pf, "_PLAN", None)
    monkeypatch.setattr(pf, "_MAKERS", lambda plan: makers)
    jobs = [(name, ("png",)) for name in names]
    here = [pf._draw(job) for job in jobs]
    assert pf._draw_in_forks(jobs, 3) == here

    def broken() -> Figure:
        raise ValueError("drawing failed on purpose")

    for k in (0, 3):  # the first is drawn here, the fourth (likely) in a forked drawer
        makers[names[k]] = broken
        with pytest.raises(ValueError, match="on purpose"):
            pf._draw_in_forks(jobs, 3)
        makers[names[k]] = lambda k=k: figure(k)
