"""PortfolioPlan: the invented portfolio case study end to end, the portfolio file's
problems, Monte Carlo and simulated trials, the output folder, the memo, and the memo in a
real browser (headless Chromium; skipped, with the reason, where it is not installed).

References, each computed inside the test: the number of successes by brute-force
enumeration of every outcome (the definition of the Poisson-binomial); SHA-256 by hashlib;
each trial's probability of success by the package's single-trial evaluation of its own
design file at the size counted (the portfolio must report exactly that number).
"""

from __future__ import annotations

import csv
import hashlib
import itertools
import math
import os
import re
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from _browser import NEEDS_BROWSER, check_reads_well, open_memo
from scipy import stats

import assurance as asr
from assurance.design_file import read_design_file
from assurance.errors import AssuranceInputError, DesignFileError
from assurance.portfolio_plan import EXACT, PortfolioPlan, plan_portfolio
from assurance.program.portfolio import ValueInputs
from assurance.report.output_folder import claim_output_folder, write_outputs
from assurance.report.portfolio_memo import portfolio_memo_html

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "case_studies" / "programs" / "portfolio" / "portfolio.toml"
#: A4 width in PostScript points (ISO 216: 210 mm / 25.4 * 72) and in CSS px at 96 dpi

DESIGN = """title = "Quick trial"
[endpoint]
sd = 10.0
analysis = "z"
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[sizes]
list = [100, 200, 300]
[targets]
assurance = 0.6
"""


def _brute_force(p):
    out = np.zeros(len(p) + 1)
    for outcome in itertools.product((0, 1), repeat=len(p)):
        out[sum(outcome)] += math.prod(x if o else 1 - x for x, o in zip(p, outcome,
                                                                           strict=True))
    return out


@pytest.fixture(scope="module")
def case():
    return PortfolioPlan.from_file(CASE)


@pytest.fixture(scope="module")
def written(case, tmp_path_factory):
    out = tmp_path_factory.mktemp("portfolio") / "out"
    plan = replace(case, made_by="assurance portfolio portfolio.toml --out out")
    with claim_output_folder(out, keep=plan.input_paths) as claim:  # as the command line does
        write_outputs(out, plan, claim=claim, formats=("png", "svg"))
    return plan, out


def _portfolio(folder: Path, text: str, design: str = DESIGN) -> Path:
    (folder / "quick.toml").write_text(design, encoding="utf-8")
    path = folder / "portfolio.toml"
    path.write_text(text, encoding="utf-8")
    return path


# ------------------------------------------------------------------------------------------
# the case study
# ------------------------------------------------------------------------------------------
def test_case_study_reports_each_trials_own_probability_of_success(case):
    assert len(case.trials) == 5
    assert len({t.endpoint for t in case.trials}) == 4  # continuous, binary, time, counts
    for t in case.trials:
        spec = read_design_file(t.plan.source.path)
        # reference: the single-trial evaluation of the trial's design file at that size
        ds = asr.evaluate(spec.design, [t.n], draws=spec.draws, seed=spec.seed)
        assert t.pos == pytest.approx(float(ds.assurance[0]), abs=1e-12)
        assert t.exact and t.interval == (t.pos, t.pos)
    assert case.exact
    # the size given in the file for WB-3, the planned size for the others
    assert [t.n for t in case.trials][-1] == 1200
    assert case.trials[0].n == case.trials[0].plan.planned_n


def test_case_study_distribution_is_the_enumerated_one(case):
    p = [t.pos for t in case.trials]
    # reference: enumeration of all 32 outcomes; exact to rounding
    np.testing.assert_allclose(case.distribution, _brute_force(p), atol=1e-12)
    assert case.expected_successes == pytest.approx(sum(p), abs=1e-12)
    at_least = case.results["prob_at_least"].values
    assert at_least[0] == pytest.approx(1.0) and at_least[-1] == pytest.approx(p[0] * p[1] *
                                                                               p[2] * p[3] *
                                                                               p[4])


def test_case_study_best_sizes_lie_inside_their_curves(case):
    for t in case.trials:
        b = t.best
        assert b is not None and b.worth_paying
        assert t.curve_n[0] < b.n_best < t.curve_n[-1]  # the curve went far enough
        assert b.n_low <= b.n_best <= b.n_high < t.curve_n[-1]
        assert b.value_best == pytest.approx(float(t.net_values.max()))
        assert t.n in t.curve_n and (t.n_target is None or t.n_target in t.curve_n)


def test_input_paths_are_the_portfolio_and_every_design_file(case):
    names = [Path(p) for p in case.input_paths]
    folder = CASE.parent
    expected = [CASE] + [Path(os.path.normpath(folder / d)) for d in (
        "../../knee_pain/design.toml", "../../event_driven/design.toml",
        "../../response_rate/design.toml", "rb11_relapses.toml",
        "../../weekly_injection/design.toml")]
    assert [p.resolve() for p in names] == [p.resolve() for p in expected]


def test_summary_names_every_trial_and_the_independence(case):
    text = case.summary()
    assert text.splitlines()[0] == case.title
    for t in case.trials:
        assert t.name in text
    assert "independent" in text and EXACT in text
    assert f"{case.expected_successes:.2f} of 5" in text


# ------------------------------------------------------------------------------------------
# the output folder and the memo
# ------------------------------------------------------------------------------------------
def test_the_folder_holds_tables_results_figures_memo_and_input_copies(written):
    plan, out = written
    for name in ("trials.csv", "successes.csv", "curves.csv", "size_worth_paying.csv",
                 "value_sensitivity.csv", "results.nc", "memo.html", "portfolio_as_given.toml",
                 "figures/portfolio.png", "figures/portfolio.svg", "figures/net_value.png",
                 "figures/success_curves.png"):
        assert (out / name).is_file(), name
    assert (out / "portfolio_as_given.toml").read_bytes() == CASE.read_bytes()
    copies = sorted((out / "designs_as_given").iterdir())
    assert [c.read_bytes() for c in copies] == \
        [Path(t.plan.source.path).read_bytes() for t in plan.trials]
    with open(out / "trials.csv", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["trial"] for r in rows] == [t.name for t in plan.trials]
    assert all(r["interval"] == EXACT and r["mcse"] == "" for r in rows)
    assert [float(r["probability_of_success"]) for r in rows] == \
        pytest.approx([t.pos for t in plan.trials], rel=1e-5)
    import xarray as xr

    with xr.open_dataset(out / "results.nc", engine="scipy") as saved:
        np.testing.assert_allclose(saved["pos"].values, plan.pos)
        assert [str(v) for v in saved["trial"].values] == [t.name for t in plan.trials]
        assert not any(np.isnan(saved[v].values).any() for v in saved.data_vars
                       if saved[v].dtype.kind == "f")


def test_the_memo_carries_provenance_cautions_and_the_planning_aid_note(written):
    plan, out = written
    page = (out / "memo.html").read_text(encoding="utf-8")
    for path in plan.input_paths:  # every input file with its SHA-256 (hashlib)
        assert hashlib.sha256(Path(path).read_bytes()).hexdigest() in page
    assert "assurance portfolio portfolio.toml --out out" in page
    assert plan.created in page
    assert "ICH E9" in page and "qualified statistician" in page
    assert "planning aid" in page and "user&#39;s inputs" in page
    assert "independent given their design priors" in page
    assert "wider" in page  # the limitation of independence is said
    assert "<script" not in page.lower() and not re.search(r"\bnan\b", page, re.I)
    assert page.count("<img ") == 3


def test_an_output_folder_holding_an_input_file_is_refused(tmp_path):
    path = _portfolio(tmp_path, '[[trial]]\nname = "Q"\ndesign = "quick.toml"\n')
    plan = PortfolioPlan.from_file(path)
    before = sorted(p.name for p in tmp_path.iterdir())
    with pytest.raises(AssuranceInputError):
        plan.write(tmp_path, overwrite=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == before


# ------------------------------------------------------------------------------------------
# the portfolio file's problems
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(("text", "needles"), [
    ('[[trial]]\nname = "Q"\ndesign = "quick.toml"\nvaleu_of_success = 3.0\n',
     ["'valeu_of_success'", "Did you mean 'value_of_success'?"]),
    ('[[trial]]\nname = "Q"\ndesign = "nowhere.toml"\n',
     ["'trial[0].design'", "'nowhere.toml'", "trial 'Q'", "was not found"]),
    ('[[trial]]\nname = "Q"\ndesign = "quick.toml"\ncost_per_patient = 0.1\n',
     ["'trial[0].value_of_success' is required", "'trial[0].cost_per_patient'"]),
    ('[[trial]]\nname = "Q"\ndesign = "quick.toml"\n[[trial]]\nname = "Q"\ndesign = '
     '"quick.toml"\n', ["'trial[1].name' repeats the name 'Q'"]),
    ('[[trial]]\nname = "Q"\nprogram = "p2p3.toml"\n',
     ["'trial[0].program'", "'p2p3.toml'", "trial 'Q'", "not found"]),
    ('[[trial]]\nname = "Q"\n', ["'trial[0].design' is required"]),
    ('title = "Empty"\n', ["names no trial"]),
    ('[[trial]]\nname = "Q"\ndesign = "quick.toml"\nvalue_of_success = -5.0\n'
     'discount_rate = 1.5\n', ["'trial[0].value_of_success' must be a number > 0",
                                "'trial[0].discount_rate'", "2 problems"]),
])
def test_portfolio_file_problems_name_the_key_and_the_entry(tmp_path, text, needles):
    path = _portfolio(tmp_path, text)
    with pytest.raises(DesignFileError) as err:
        PortfolioPlan.from_file(path)
    for needle in needles:
        assert needle in str(err.value), (needle, str(err.value))


def test_a_bad_design_file_is_named_with_its_entry(tmp_path):
    path = _portfolio(tmp_path, '[[trial]]\nname = "Bad one"\ndesign = "quick.toml"\n',
                      DESIGN.replace("analysis", "analysys"))
    with pytest.raises(DesignFileError) as err:
        PortfolioPlan.from_file(path)
    text = str(err.value)
    assert "trial 'Bad one' (trial[0])" in text and "'quick.toml'" in text
    assert "'analysys'" in text and "Did you mean 'analysis'?" in text


def test_relative_paths_are_read_from_the_portfolio_files_folder(tmp_path, monkeypatch):
    folder = tmp_path / "sub"
    folder.mkdir()
    _portfolio(folder, '[[trial]]\nname = "Q"\ndesign = "quick.toml"\nn = 250\n')
    monkeypatch.chdir(tmp_path)  # somewhere else
    plan = PortfolioPlan.from_file(Path("sub") / "portfolio.toml")
    assert plan.trials[0].n == 250
    assert Path(plan.input_paths[1]).resolve() == (folder / "quick.toml").resolve()
    # reference: O'Hagan, Stevens & Campbell (2005) closed form with scipy (one-sided 2.5%
    # z test, equal arms of 125): exact, 1e-10 for rounding
    se = 10.0 * math.sqrt(4 / 250)
    want = stats.norm.cdf((4.0 - stats.norm.ppf(0.975) * se) / math.sqrt(4.0 + se ** 2))
    assert plan.trials[0].pos == pytest.approx(want, abs=1e-10)


# ------------------------------------------------------------------------------------------
# Monte Carlo trials and simulated (analysis model) trials
# ------------------------------------------------------------------------------------------
def _monte_carlo_plan():
    ep = asr.CountEndpoint(0.6, 2.0, control_rate_prior=asr.FromScipy(
        stats.gamma(36.0, scale=0.6 / 36)))
    design = asr.TrialDesign(ep, asr.Normal(math.log(0.7), 0.15), assumed_effect=0.65,
                             title="Invented counts trial, control rate uncertain")
    return asr.plan(design, targets={"assurance": 0.7}, sizes=[200, 400, 600],
                    sensitivity=False, draws=4000)


def test_monte_carlo_trials_report_two_mc_se_and_say_the_distribution_is_estimated():
    mc = _monte_carlo_plan()
    exact = asr.plan(asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                                     asr.Normal(4.0, 2.0), title="Exact trial"),
                     sizes=[100, 200], sensitivity=False)
    plan = plan_portfolio([mc, exact], sizes=[400, 200],
                          values=[ValueInputs(200.0, 0.05), None])
    t = plan.trials[0]
    se = float(mc.results.sel(n=400).assurance_mcse)
    assert t.pos == pytest.approx(float(mc.results.sel(n=400).assurance), abs=1e-15)
    assert t.pos_mcse == pytest.approx(se) and not plan.exact
    assert t.interval == pytest.approx((t.pos - 2 * se, t.pos + 2 * se))
    assert float(plan.results["expected_successes_mcse"]) == pytest.approx(se)
    page = portfolio_memo_html(plan, figures=False, versions="-", date="2026-01-05")
    assert "Monte Carlo estimates" in page and "2 MC SE" in page
    assert "estimated probabilities of success" in page
    assert "\u00b1" in plan.summary()


def test_a_development_program_counts_as_one_entry(tmp_path):
    program = ROOT / "case_studies" / "programs" / "phase2_then_phase3" / "program.toml"
    path = _portfolio(tmp_path, f'[[trial]]\nname = "Program"\nprogram = "{program}"\n'
                      '[[trial]]\nname = "Q"\ndesign = "quick.toml"\n')
    plan = PortfolioPlan.from_file(path)
    from assurance.program_plan import ProgramPlan

    alone = ProgramPlan.from_file(program)
    t = plan.trials[0]
    # the program's own probability of success (phase 3 succeeds after a go)
    assert t.pos == pytest.approx(alone.headline.pos, abs=1e-12) and t.exact
    assert t.n == round(alone.headline.expected_patients)
    assert set(alone.input_paths) <= set(plan.input_paths)
    np.testing.assert_allclose(plan.distribution, _brute_force(list(plan.pos)), atol=1e-12)
    assert "expected patients (a program)" in plan.summary()
    bad = _portfolio(tmp_path, f'[[trial]]\nname = "Program"\nprogram = "{program}"\n'
                     'value_of_success = 10.0\n')
    with pytest.raises(DesignFileError, match="not yet supported for a development program"):
        PortfolioPlan.from_file(bad)


def test_an_analysis_model_planned_by_simulation_uses_its_simulated_sizes():
    from assurance.general.builtin import borrowed_control
    from assurance.model_plan import plan_model

    model = borrowed_control(asr.Normal(3.0, 1.0), 3.0, sd=10.0, historical_mean=0.0,
                             historical_n=50, weight=0.0)
    sim = plan_model(model, asr.Significance(alpha=0.025, sided="one"), [100, 200, 400],
                     targets={"assurance": 0.5}, trials=100, nuts_check=0, progress=False)
    plan = plan_portfolio([sim], values=ValueInputs(100.0, 0.05))
    t = plan.trials[0]
    ds = sim.results
    assert t.endpoint == "analysis model (simulated)"
    # the model plan's own simulated numbers at its planned size, with their MC SE
    assert t.n == sim.planned_n
    assert t.pos == float(ds.assurance.sel(n=t.n))
    assert t.pos_mcse == float(ds.assurance_mcse.sel(n=t.n)) and not t.exact
    np.testing.assert_array_equal(t.curve_n, ds.n.values)
    assert t.best.n_best in (100, 200, 400)
    page = portfolio_memo_html(plan, figures=False, versions="-", date="2026-01-05")
    assert "Monte Carlo estimates" in page
    with pytest.raises(AssuranceInputError, match="one of its simulated sizes"):
        plan_portfolio([sim], sizes=[250])


def test_plan_portfolio_checks_its_inputs():
    d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"), asr.Normal(4.0, 2.0))
    with pytest.raises(AssuranceInputError, match="'plans_or_designs' parameter"):
        plan_portfolio([])
    with pytest.raises(AssuranceInputError, match="'plans_or_designs' parameter"):
        plan_portfolio([d, "trial.toml"])
    with pytest.raises(AssuranceInputError, match="'values' parameter"):
        plan_portfolio([d], values=[1.0])
    with pytest.raises(AssuranceInputError, match="'flat_share' parameter"):
        plan_portfolio([d], flat_share=0.0)
    with pytest.raises(AssuranceInputError, match="'sizes' parameter"):
        plan_portfolio([d], sizes=[1, 2])


# ------------------------------------------------------------------------------------------
# the memo in a real browser
# ------------------------------------------------------------------------------------------
@NEEDS_BROWSER
def test_the_memo_in_a_browser(written, tmp_path):
    plan, out = written
    opened = open_memo((out / "memo.html").read_text(encoding="utf-8"), tmp_path)
    check_reads_well(opened, images=3)
    # the decision box shows the plan's numbers
    expected = re.search(r'data-key="expected">([^<]+)<', opened.dom).group(1)
    assert expected == f"{plan.expected_successes:.1f} of 5"
    shown_pos = re.findall(r'data-key="pos">([^<]+)<', opened.dom)
    assert shown_pos == [f"{100 * t.pos:.1f}%" for t in plan.trials]
