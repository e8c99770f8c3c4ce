"""Figures and the HTML decision memo.

Everything here checks what a reader of the output relies on: files are written whole and
never replace an existing file unless asked; the memo is one self-contained file (no
scripts, nothing fetched from elsewhere); user text is escaped; the numbers the memo
promises (ceiling, Monte Carlo standard errors, unreachable targets) are printed with the
stated formatting, taken from the dataset the memo was given. Grids and Monte Carlo draws
are small so the file runs in a few seconds.
"""

from __future__ import annotations

import datetime
import html

import numpy as np
import pytest

import assurance as asr
from assurance.errors import AssuranceInputError
from assurance.report import (
    DEFAULT_CAUTIONS,
    figure_bytes,
    memo_html,
    memo_text_summary,
    passable_probability,
    plot_decomposition,
    plot_power_and_assurance,
    plot_prior,
    save_figure,
    write_memo,
)

SIZES = range(20, 401, 40)
DRAWS = 400
DATE = datetime.date(2026, 1, 5)
VERSIONS = "python 3.x\nassurance test-build"


@pytest.fixture(scope="module")
def exact():
    design = asr.TrialDesign(
        asr.ContinuousEndpoint(sigma=10.0),
        asr.Mixture([asr.PointMass(0.0), asr.Normal(4.0, 2.5)], [0.25, 0.75]),
        relevant_effect=3.0,
        title="Trial <b>& friends",
    )
    ds = asr.evaluate(design, SIZES)
    answers = [
        asr.solve_sample_size(design, 0.5),
        asr.solve_sample_size(design, 0.9, quantity="power"),
        asr.solve_sample_size(design, 0.99),  # above the ceiling
    ]
    return design, ds, answers


@pytest.fixture(scope="module")
def monte_carlo():
    # a Student t effect prior with a prior on the SD is simulated (normal effect priors
    # are integrated exactly over the SD)
    design = asr.TrialDesign(
        asr.ContinuousEndpoint(sigma=10.0, better="lower"),
        asr.StudentT(5, -4.0, 2.5),
        relevant_effect=-3.0,
        sigma_prior=asr.ScaledInvChiSquare(30, 10.0),
        title="Uncertain SD, lower is better",
    )
    ds = asr.evaluate(design, SIZES, draws=DRAWS, seed=7)
    answers = [asr.solve_sample_size(design, 0.5, draws=DRAWS, seed=7)]
    return design, ds, answers


# ------------------------------------------------------------------------------------------
# figures
# ------------------------------------------------------------------------------------------
def test_each_figure_writes_non_empty_png_and_svg(tmp_path, exact):
    design, ds, answers = exact
    axes = {
        "prior": plot_prior(design),
        "power": plot_power_and_assurance(ds, answers=answers),
        "split": plot_decomposition(ds),
    }
    for name, ax in axes.items():
        png, svg = save_figure(ax.figure, tmp_path / name)
        assert png == tmp_path / f"{name}.png" and svg == tmp_path / f"{name}.svg"
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert png.stat().st_size > 10_000
        text = svg.read_text(encoding="utf-8")
        assert "<svg" in text and "</svg>" in text
    # nothing but the six figures: no temporary file is left behind
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        f"{n}.{ext}" for n in axes for ext in ("png", "svg"))


def test_save_figure_drops_a_given_suffix(tmp_path, exact):
    png, svg = save_figure(plot_prior(exact[0]).figure, tmp_path / "prior.png")
    assert (png.name, svg.name) == ("prior.png", "prior.svg")


def test_save_figure_refuses_to_overwrite_and_leaves_the_file_alone(tmp_path, exact):
    fig = plot_prior(exact[0]).figure
    existing = tmp_path / "prior.svg"
    existing.write_text("keep me", encoding="utf-8")
    with pytest.raises(AssuranceInputError, match="prior.svg"):
        save_figure(fig, tmp_path / "prior")
    assert existing.read_text(encoding="utf-8") == "keep me"
    assert not (tmp_path / "prior.png").exists()  # refused before writing anything
    png, svg = save_figure(fig, tmp_path / "prior", overwrite=True)
    assert "<svg" in svg.read_text(encoding="utf-8") and png.exists()


def test_save_figure_needs_an_existing_folder(tmp_path, exact):
    with pytest.raises(AssuranceInputError, match="does not exist"):
        save_figure(plot_prior(exact[0]).figure, tmp_path / "missing" / "prior")


def test_figures_draw_into_given_axes(exact):
    from matplotlib.figure import Figure

    design, ds, _ = exact
    fig = Figure()
    grid = fig.subplots(1, 3)
    assert plot_prior(design, ax=grid[0]) is grid[0]
    assert plot_power_and_assurance(ds, ax=grid[1]) is grid[1]
    assert plot_decomposition(ds, ax=grid[2]) is grid[2]
    assert grid[1].get_ylim() == (0.0, 1.0)
    assert figure_bytes(fig, "svg").startswith(b"<?xml")


def test_power_figure_shows_the_ceiling_value(exact):
    _, ds, _ = exact
    ax = plot_power_and_assurance(ds)
    texts = [t.get_text() for t in ax.texts] + [t.get_text() for t in ax.get_legend().texts]
    assert any(f"{float(ds.ceiling):.3f}" in t for t in texts)


def test_prior_figure_for_lower_is_better_covers_the_negative_effects(monte_carlo):
    design = monte_carlo[0]
    ax = plot_prior(design)
    lo, hi = ax.get_xlim()
    assert lo < design.design_prior.ppf(0.01) and hi > 0.0
    assert "lower is better" in ax.get_xlabel()


def test_passable_probability_leaves_out_the_null_point_mass(exact):
    design = exact[0]
    assert passable_probability(design) == pytest.approx(0.75 * 0.945200708300442, abs=1e-9)
    assert design.ceiling() > passable_probability(design)


def test_plots_reject_something_that_is_not_a_dataset(exact):
    with pytest.raises(AssuranceInputError, match="assurance.evaluate"):
        plot_power_and_assurance({"power": [0.5]})
    with pytest.raises(AssuranceInputError, match="TrialDesign"):
        plot_prior("design")


# ------------------------------------------------------------------------------------------
# memo
# ------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def exact_page(exact, tmp_path_factory):
    design, ds, answers = exact
    folder = tmp_path_factory.mktemp("memo")
    path = write_memo(design, ds, answers, folder / "memo.html", date=DATE, versions=VERSIONS)
    assert [p.name for p in folder.iterdir()] == ["memo.html"]
    return path.read_text(encoding="utf-8")


def test_memo_is_one_self_contained_file(exact_page):
    page = exact_page.lower()
    assert page.startswith("<!doctype html>")
    for banned in ('src="http', "src='http", 'href="http', "href='http", "<script", "<link",
                   "@import", "url("):
        assert banned not in page
    assert page.count('src="data:image/png;base64,') == 2


def test_memo_carries_the_cautions(exact_page):
    for sentence in DEFAULT_CAUTIONS:
        assert html.escape(sentence) in exact_page
    for words in ("qualified statistician", "ICH E9", "ethics committee",
                  "how many patients receive an experimental treatment"):
        assert words in exact_page


def test_memo_escapes_the_title(exact_page):
    assert "Trial &lt;b&gt;&amp; friends" in exact_page
    assert "<b>&" not in exact_page


def _pct(p, decimals=1):
    """The memo's percentage (one decimal in tables), written out here."""
    return f"{100 * p:.{decimals}f}%"


def test_memo_shows_the_numbers_it_promises(exact, exact_page):
    _, ds, answers = exact
    assert _pct(float(ds.ceiling)) in exact_page
    assert f"{100 * float(ds.prob_relevant):.0f}%" in exact_page
    reached = answers[0]
    assert _pct(reached.achieved) in exact_page and f">{reached.n_total}<" in exact_page
    # a row of the candidate table, exactly as in ds (percentages, one decimal)
    j = int(np.flatnonzero(ds.n.values == 100)[0])
    assert f">{_pct(float(ds.assurance[j]))}<" in exact_page
    assert f">{_pct(float(ds.power[j]))}<" in exact_page
    assert "2026-01-05" in exact_page and "assurance test-build" in exact_page


def test_memo_reports_an_unreachable_target(exact, exact_page):
    unreachable = exact[2][2]
    assert not unreachable.reached
    assert "not reachable" in exact_page
    assert unreachable.message in html.unescape(exact_page)
    assert (f"No size reaches 99% assurance: even a very large trial succeeds with "
            f"probability at most {100 * unreachable.ceiling:.0f}%.") in exact_page


def test_memo_with_monte_carlo_shows_standard_errors(monte_carlo):
    design, ds, answers = monte_carlo
    page = memo_html(design, ds, answers, date=DATE, versions=VERSIONS, figures=False)
    j = int(np.flatnonzero(ds.n.values == 100)[0])
    value, se = float(ds.assurance[j]), float(ds.assurance_mcse[j])
    assert f"{_pct(value)} \u00b1 {100 * se:.1f}" in page  # standard error in points
    assert f"{_pct(answers[0].achieved)} \u00b1 {100 * answers[0].achieved_mcse:.1f}" in page
    assert f"{DRAWS} draws, seed 7" in page
    assert "Monte Carlo standard error" in page


def test_memo_is_reproducible_with_a_fixed_date(exact):
    design, ds, answers = exact
    first = memo_html(design, ds, answers, date=DATE, versions=VERSIONS)
    assert memo_html(design, ds, answers, date=DATE, versions=VERSIONS) == first


def test_write_memo_refuses_to_overwrite(tmp_path, exact):
    design, ds, answers = exact
    path = tmp_path / "memo.html"
    path.write_text("earlier memo", encoding="utf-8")
    with pytest.raises(AssuranceInputError, match="memo.html"):
        write_memo(design, ds, answers, path, figures=False)
    assert path.read_text(encoding="utf-8") == "earlier memo"
    write_memo(design, ds, answers, path, overwrite=True, figures=False, date=DATE)
    assert "2026-01-05" in path.read_text(encoding="utf-8")


def test_memo_refuses_a_dataset_of_another_design(exact, monte_carlo):
    with pytest.raises(AssuranceInputError, match="same design"):
        memo_html(exact[0], monte_carlo[1], [], figures=False)


def test_memo_without_targets_reports_the_largest_size(exact):
    design, ds, _ = exact
    page = memo_html(design, ds, None, date=DATE, versions=VERSIONS, figures=False)
    assert "No target was set for this plan." in page
    assert (f"Planned size: {int(ds.n[-1])} patients (" in page
            and "the largest size evaluated (no target was set)." in page)


def test_custom_cautions_replace_the_default(exact):
    design, ds, _ = exact
    page = memo_html(design, ds, [], cautions=["Check <this>."], versions="-", date=DATE,
                     figures=False)
    assert "Check &lt;this&gt;." in page and DEFAULT_CAUTIONS[0] not in page


def test_text_summary_gives_the_headline_and_each_target(exact, monte_carlo):
    design, ds, answers = exact
    text = memo_text_summary(design, ds, answers)
    lines = text.splitlines()
    assert lines[0] == design.title
    assert f"{float(ds.ceiling):.3f}" in text
    assert f"assurance 0.5: {answers[0].n_total} patients" in text
    assert "assurance 0.99: not reachable" in text
    assert max(len(line) for line in lines) <= 88
    mc_text = memo_text_summary(*monte_carlo)
    assert "\u00b1" in mc_text


def test_save_figure_writes_only_the_formats_asked_for(tmp_path, exact):
    fig = plot_prior(exact[0]).figure
    (png,) = save_figure(fig, tmp_path / "prior", formats=["png"])
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["prior.png"]
    with pytest.raises(AssuranceInputError, match="'formats' parameter of save_figure"):
        save_figure(fig, tmp_path / "other", formats=["pdf"])


# ------------------------------------------------------------------------------------------
# titles are plain text in figures, and whatever they hold never breaks a figure or a page
# ------------------------------------------------------------------------------------------
def _titled(title):
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5),
                             relevant_effect=3.0, title=title)
    return design, asr.evaluate(design, SIZES)


def _svg_texts(fig):
    """The text elements of the figure's SVG, with text kept as text (not glyph paths)."""
    import re

    import matplotlib

    with matplotlib.rc_context({"svg.fonttype": "none"}):
        svg = figure_bytes(fig, "svg").decode("utf-8")
    return [html.unescape(t) for t in re.findall(r"<text[^>]*>([^<]*)</text>", svg)]


@pytest.mark.parametrize("title", ["Costs $\\frac{$", "Budget $1.2M vs $0.8M"])
def test_dollar_signs_in_a_title_are_drawn_as_plain_text(title):
    # matplotlib reads text between dollar signs as mathematics: the first title used to
    # crash the drawing, the second was drawn as italic maths
    design, ds = _titled(title)
    axes = {"design prior for the true effect": plot_prior(design),
            "chance of success by sample size": plot_power_and_assurance(ds),
            "what a success or a failure would mean": plot_decomposition(ds)}
    for what, ax in axes.items():
        expected = f"{title}: {what}"
        assert ax.get_title(loc="left") == expected
        assert figure_bytes(ax.figure, "png")[:4] == b"\x89PNG"
        assert expected in _svg_texts(ax.figure), what


def test_a_title_with_dollar_signs_goes_through_the_whole_output_folder(tmp_path):
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0), title="Costs $\\frac{$ and $1.2M")
    out = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200]).write(tmp_path / "o")
    assert (out / "figures" / "prior.png").stat().st_size > 10_000
    assert "Costs $\\frac{$ and $1.2M" in (out / "memo.html").read_text(encoding="utf-8")


def test_characters_the_font_lacks_are_replaced_without_a_warning():
    import io
    import warnings

    design, ds = _titled("Trial \u4e2d\u6587 \u2713 caf\u00e9")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a missing glyph would warn while drawing
        for ax in (plot_prior(design), plot_power_and_assurance(ds)):
            ax.figure.savefig(io.BytesIO(), format="png")
            title = ax.get_title(loc="left")
            assert title.startswith("Trial ?? \u2713 caf\u00e9: ")


def test_a_very_long_title_is_cut_to_three_lines_without_a_warning():
    import io
    import warnings

    design, ds = _titled(("word " * 40).strip())  # 199 characters: TrialDesign allows 200
    long = ds.copy()
    long.attrs["title"] = "word " * 600  # a dataset's title is not bounded
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # e.g. constrained layout giving up
        for ax in (plot_prior(design), plot_power_and_assurance(long)):
            ax.figure.savefig(io.BytesIO(), format="png")
            lines = ax.get_title(loc="left").splitlines()
            assert len(lines) == 3 and lines[-1].endswith("\u2026")


# characters that reorder or hide text; TrialDesign refuses C0/C1 controls in titles, but
# not these, and a dataset's title can hold anything
RAW = ("\x1b", "\x07", "\r", "\u202e", "\u2028", "\ufeff")


def test_hidden_characters_in_a_title_are_escaped_everywhere():
    from assurance.report import overview_html

    title = "A\tB \u202eC\u2028D\ufeffE"
    design, ds = _titled(title)
    page = memo_html(design, ds, [], date=DATE, versions=VERSIONS, figures=False)
    summary = memo_text_summary(design, ds, [])
    overview = overview_html(design, ds, [], figure=False)
    figure_title = plot_prior(design).get_title(loc="left")
    for text in (page, summary, overview, figure_title):
        assert not any(raw in text for raw in RAW), text[:200]
    shown = "A\\tB \\u202eC\\u2028D\\ufeffE"
    assert summary.splitlines()[0] == shown
    assert f"<h1>{shown}</h1>" in page and f"<h3>{shown}</h3>" in overview
    assert figure_title.startswith(f"{shown}: ")


def test_control_characters_in_a_datasets_title_are_escaped_in_figures(exact):
    ds = exact[1].copy()
    ds.attrs["title"] = "A\x1b[31mB\x07 C\r\nD"
    for ax in (plot_power_and_assurance(ds), plot_decomposition(ds)):
        title = ax.get_title(loc="left")
        assert not any(raw in title for raw in RAW)
        assert title.startswith("A\\x1b[31mB\\x07 C\\r\\nD: ")
