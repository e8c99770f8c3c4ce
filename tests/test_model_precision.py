"""Precision criteria for general analysis models: average width (ALC), average coverage of
an interval of the target width (ACC) and the width in the most likely share of trials
(MWOC, simulated), from Python and from a design file.

The model is the built-in borrowed-control model with no borrowing and the SD known to the
analysis, whose posterior for the effect is normal with an SD fixed by the sizes and its
wide analysis priors (the conjugate normal update of two means with known SD; common
practice, computed in the test with numpy). Every trial then has the same width,
so the criteria have closed forms: width ``2 z sd`` and coverage ``2 Phi(l / (2 sd)) - 1``
(the best interval of width ``l`` of a normal posterior is centred on its mean).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

import assurance as asr
from assurance.cli import main
from assurance.errors import AssuranceInputError, DesignFileError
from assurance.general.fit import interval_width, length_coverage

DESIGN = """title = "Invented: model precision checks"
[endpoint]
type = "model"
model = "borrowed_control"
sd = 10.0
historical_mean = 0.0
historical_n = 40
method = "power_prior"
weight = 0.0
unit = "points"
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[effect]
assumed = 4.0
[success]
alpha = 0.025
sided = "one"
[sizes]
list = [40, 160, 640]
[precision]
length = 4.0
coverage = 0.9
[simulation]
trials = 60
nuts_check = 0
chunk = 30
[monte_carlo]
seed = 11
"""

SIGMA, LENGTH, COVERAGE = 10.0, 4.0, 0.9


def _posterior_sd(n_total: int) -> float:
    """The effect's posterior SD under the model's own analysis priors, by the conjugate
    update of (control mean, effect): prior precisions 1 / sd^2 (the control mean's vague
    prior, one patient's worth) and 1 / (VAGUE sd)^2, data precision n / sd^2 per arm."""
    from assurance.general.builtin import VAGUE

    n_t = n_c = n_total / 2
    precision = np.array([[1 + n_c + n_t, n_t], [n_t, n_t + 1 / VAGUE**2]]) / SIGMA**2
    return float(math.sqrt(np.linalg.inv(precision)[1, 1]))


@pytest.fixture(scope="module")
def design_file(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("model_precision") / "trial.toml"
    path.write_text(DESIGN, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def plan(design_file) -> asr.ModelPlan:
    return asr.ModelPlan.from_file(design_file)


def test_default_criteria_leave_out_the_worst_outcome(plan):
    assert plan.precision.criteria == ("ALC", "ACC", "MWOC")
    assert [a.quantity for a in plan.precision_answers] == ["ALC", "ACC", "MWOC"]
    assert plan.results.attrs["coverage"] == COVERAGE  # [precision] sets the widths' coverage


def test_widths_and_coverages_match_the_normal_posterior(plan):
    ds = plan.results
    z = stats.norm.isf((1 - COVERAGE) / 2)
    for n in (40, 160, 640):
        sd = _posterior_sd(n)
        at = ds.sel(n=n)
        # the Laplace fit of a normal model is exact: agreement to the fit's tolerance
        assert float(at.width_mean) == pytest.approx(2 * z * sd, rel=1e-6)
        assert float(at.width_worst_likely) == pytest.approx(2 * z * sd, rel=1e-6)
        assert float(at.coverage_mean) == pytest.approx(
            2 * stats.norm.cdf(LENGTH / (2 * sd)) - 1, rel=1e-6)


def test_each_criterion_picks_the_first_size_meeting_it(plan):
    z = stats.norm.isf((1 - COVERAGE) / 2)
    # width 2 z sd <= 4 first at n = 640 (sd 0.79); coverage >= 0.9 likewise
    needed = [n for n in (40, 160, 640) if 2 * z * _posterior_sd(n) <= LENGTH]
    for answer in plan.precision_answers:
        assert answer.n == needed[0], answer


def test_precision_reaches_the_memo_and_the_command_line(design_file, tmp_path):
    out = tmp_path / "out"
    assert main(["plan", str(design_file), "--out", str(out), "--quiet"]) == 0
    memo = (out / "memo.html").read_text(encoding="utf-8")
    assert 'data-key="precision-criteria"' in memo
    assert "Average coverage of an interval of the target width (ACC)" in memo
    assert (out / "figures" / "interval_width.png").is_file()
    assert "0.0000000" not in memo  # a Monte Carlo SE of zero is not printed as digits


@pytest.mark.parametrize("extra, words", [
    ('criteria = ["WOC"]', "simulated trials cannot bound"),
])
def test_the_worst_outcome_is_refused_in_a_file(tmp_path, extra, words):
    path = tmp_path / "bad.toml"
    path.write_text(DESIGN.replace("coverage = 0.9\n", f"coverage = 0.9\n{extra}\n"),
                    encoding="utf-8")
    with pytest.raises(DesignFileError, match=words):
        asr.read_design(path)


def test_two_coverages_are_refused(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(DESIGN.replace("nuts_check = 0", "nuts_check = 0\ncoverage = 0.95"),
                    encoding="utf-8")
    with pytest.raises(DesignFileError, match="differ"):
        asr.read_design(path)


def test_the_worst_outcome_is_refused_in_python():
    from assurance.general.builtin import borrowed_control

    model = borrowed_control(asr.Normal(4.0, 2.0), 4.0, sd=10.0, historical_mean=0.0,
                             historical_n=40, method="power_prior", weight=0.0)
    with pytest.raises(AssuranceInputError, match="WOC"):
        asr.plan_model(model, asr.Significance(alpha=0.025, sided="one"), [40],
                       trials=50, nuts_check=0, precision=asr.PrecisionPlan(length=4.0))


def test_draw_based_widths_and_coverage_against_scipy():
    # NUTS fits report widths and coverages from their draws: checked on normal draws
    # against scipy.stats.norm; 200,000 draws give quantile errors near 0.01 SD.
    draws = np.random.default_rng(3).normal(0.0, 1.0, 200_000)
    assert interval_width(draws, 0.9) == pytest.approx(2 * stats.norm.isf(0.05), abs=0.03)
    assert length_coverage(draws, 2.0) == pytest.approx(2 * stats.norm.cdf(1.0) - 1,
                                                        abs=0.005)
    # a window can hold no more than every draw, and at least one
    assert length_coverage(draws, 1e9) == 1.0
    assert length_coverage(draws, 0.0) >= 1 / draws.size
