"""Exact predictive probability from responder counts (assurance.program.interim_exact).

External checks, each named beside it:

* the worked example of Lee & Liu (2008): a single arm, reference rate 0.6, Beta(0.6, 0.4)
  prior, 16 responders among the first 23 of 40 patients, success when P(p > 0.6) exceeds
  0.90 at the end: predictive probability 0.5656. The inputs and the value are from memory
  of the paper's example (its text could not be opened here); scipy reproduces 0.5656 from
  them to four digits below, independently of the package;
* every other value against a direct enumeration with scipy.stats: beta-binomial
  probabilities of the future responders (``stats.betabinom``) and the final rule decided
  table by table (``stats.binomtest``, ``stats.fisher_exact``, beta posteriors by
  ``stats.beta`` and ``scipy.integrate.quad``);
* the normal approximation of the interim module at large counts (both estimate the same
  probability; the tolerance is explained at the check).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

from assurance import (
    BetaRates,
    BinaryEndpoint,
    InterimData,
    Normal,
    PosteriorProbability,
    Significance,
    TrialDesign,
    exact_predictive_probability,
)
from assurance.errors import AssuranceInputError
from assurance.program.interim import evaluate_interim

# Sums of at most a few hundred beta-binomial terms: rounding only.
ENUM_TOL = 1e-12


def _single(p0: float, prior: tuple[float, float], level: float = 0.9,
            better: str = "higher") -> TrialDesign:
    ep = BinaryEndpoint(p0, layout="single_arm", better=better)
    return TrialDesign(ep, BetaRates(p0, prior), rule=PosteriorProbability(level),
                       analysis_prior=BetaRates(p0, prior))


def _future(prior, x, n, big_n):
    """Final responder counts X = x + Y and their beta-binomial probabilities (scipy)."""
    y = np.arange(big_n - n + 1)
    return x + y, stats.betabinom.pmf(y, big_n - n, prior[0] + x, prior[1] + n - x)


# ------------------------------------------------------------------------------------------
# published worked example
# ------------------------------------------------------------------------------------------
def test_lee_and_liu_worked_example():
    # Lee & Liu (2008), Clinical Trials 5:93-106, the worked example of their predictive
    # probability (from memory, see the module notes): p0 = 0.6, Beta(0.6, 0.4), x = 16 of
    # n = 23, Nmax = 40, theta_T = 0.90 -> PP = 0.5656.
    prior, p0, x, n, big_n = (0.6, 0.4), 0.6, 16, 23, 40
    final, weight = _future(prior, x, n, big_n)
    by_scipy = float(weight[stats.beta.sf(p0, prior[0] + final,
                                          prior[1] + big_n - final) > 0.9].sum())
    assert round(by_scipy, 4) == 0.5656  # the published value, reproduced by scipy
    got = exact_predictive_probability(_single(p0, prior), treatment_responders=x,
                                       treatment_n=n, planned_total=big_n)
    assert got.probability == pytest.approx(by_scipy, abs=ENUM_TOL)
    assert round(got.probability, 4) == 0.5656
    assert got.remaining == (17, 0) and got.treatment_prior == prior
    assert got.prior_source == "analysis prior"


# ------------------------------------------------------------------------------------------
# against direct enumeration with scipy
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("x", [2, 7, 11])
def test_single_arm_exact_binomial_test(x):
    # Final rule: scipy.stats.binomtest(X, N, p0, alternative="greater").pvalue <= alpha;
    # a test rule predicts with uniform Beta(1, 1) priors.
    p0, n, big_n, alpha = 0.2, 20, 45, 0.05
    ep = BinaryEndpoint(p0, layout="single_arm", test="exact_binomial")
    design = TrialDesign(ep, Normal(0.15, 0.1), rule=Significance(alpha, sided="one"))
    final, weight = _future((1.0, 1.0), x, n, big_n)
    wins = np.array([stats.binomtest(int(k), big_n, p0, alternative="greater").pvalue <= alpha
                     for k in final])
    got = exact_predictive_probability(design, treatment_responders=x, treatment_n=n,
                                       planned_total=big_n)
    assert got.prior_source == "uniform"
    assert got.probability == pytest.approx(float(weight[wins].sum()), abs=ENUM_TOL)


def test_single_arm_lower_is_better_and_given_prior():
    # An adverse-event rate: success when P(p < 0.3 | data) >= 0.8 (stats.beta.cdf); the
    # prediction uses a given Beta(2, 6) instead of the analysis prior.
    p0, n, big_n, x = 0.3, 15, 50, 3
    design = _single(p0, (1.0, 1.0), level=0.8, better="lower")
    final, weight = _future((2.0, 6.0), x, n, big_n)
    wins = stats.beta.cdf(p0, 1.0 + final, 1.0 + big_n - final) >= 0.8
    got = exact_predictive_probability(design, treatment_responders=x, treatment_n=n,
                                       planned_total=big_n, treatment_prior=(2, 6))
    assert got.prior_source == "given"
    assert got.probability == pytest.approx(float(weight[wins].sum()), abs=ENUM_TOL)


def _two_arm_by_scipy(decide, prior_t, prior_c, counts, big):
    x_t, n_t, x_c, n_c = counts
    ft, wt = _future(prior_t, x_t, n_t, big)
    fc, wc = _future(prior_c, x_c, n_c, big)
    return sum(wt[i] * wc[j] for i in range(ft.size) for j in range(fc.size)
               if decide(int(ft[i]), int(fc[j])))


def test_two_arm_fisher():
    # Final rule: one-sided Fisher test, scipy.stats.fisher_exact(alternative="greater").
    big, alpha, counts = 30, 0.025, (9, 14, 4, 13)
    ep = BinaryEndpoint(0.25, test="fisher_exact")
    design = TrialDesign(ep, Normal(0.2, 0.1), rule=Significance(alpha, sided="one"))

    def decide(xt, xc):
        table = [[xt, big - xt], [xc, big - xc]]
        return stats.fisher_exact(table, alternative="greater")[1] <= alpha

    want = _two_arm_by_scipy(decide, (1, 1), (1, 1), counts, big)
    got = exact_predictive_probability(design, treatment_responders=9, treatment_n=14,
                                       control_responders=4, control_n=13,
                                       planned_total=2 * big)
    assert got.final_sizes == (big, big) and got.remaining == (16, 17)
    assert got.probability == pytest.approx(want, abs=ENUM_TOL)


def test_two_arm_posterior_rule():
    # Final rule: P(p_t > p_c | data) >= 0.9 under Beta(1, 1) and Beta(3, 7) analysis
    # priors, by scipy.integrate.quad of beta.pdf(t) * beta.cdf(c) (tolerance 1e-10 there;
    # no final table has a posterior probability within 1e-6 of 0.9, checked below).
    big, counts = 24, (8, 11, 3, 10)
    prior_t, prior_c = (1.0, 1.0), (3.0, 7.0)
    ep = BinaryEndpoint(0.3)
    design = TrialDesign(ep, Normal(0.15, 0.1), rule=PosteriorProbability(0.9),
                         analysis_prior=BetaRates(prior_c, prior_t))
    gaps = []

    def decide(xt, xc):
        post_t = stats.beta(prior_t[0] + xt, prior_t[1] + big - xt)
        post_c = stats.beta(prior_c[0] + xc, prior_c[1] + big - xc)
        prob = integrate.quad(lambda p: post_t.pdf(p) * post_c.cdf(p), 0, 1,
                              epsabs=1e-12, epsrel=1e-10)[0]
        gaps.append(abs(prob - 0.9))
        return prob >= 0.9

    want = _two_arm_by_scipy(decide, prior_t, prior_c, counts, big)
    assert min(gaps) > 1e-6
    got = exact_predictive_probability(design, treatment_responders=8, treatment_n=11,
                                       control_responders=3, control_n=10,
                                       planned_total=2 * big)
    assert got.treatment_prior == prior_t and got.control_prior == prior_c
    assert got.probability == pytest.approx(want, abs=ENUM_TOL)


# ------------------------------------------------------------------------------------------
# the interim look
# ------------------------------------------------------------------------------------------
def test_interim_look_reports_the_exact_value_near_the_normal_approximation():
    # 400 patients planned per arm, 200 in: the normal approximation with a flat prior and
    # the exact value under uniform beta priors estimate the same probability. Their gap
    # comes from the discreteness of the counts and the Wald standard error and shrinks
    # like 1/sqrt(n): seen here 0.028 at 20 per arm in, 0.020 at 50, 0.012 at 200 (same
    # rates). 0.03 at 200 per arm leaves room for that order without allowing a wrong sum.
    ep = BinaryEndpoint(0.3)
    design = TrialDesign(ep, Normal(0.08, 0.05), rule=Significance(0.025, sided="one"))
    data = InterimData.from_responses(78, 200, 64, 200)
    look = evaluate_interim(design, data, planned_total=800)
    assert look.exact is not None
    assert look.exact.probability == pytest.approx(look.predictive["analysis"], abs=0.03)
    assert any("exact predictive probability" in note for note in look.notes)
    # without counts there is nothing exact to report
    plain = evaluate_interim(design, InterimData(data.estimate, data.standard_error),
                             planned_total=800)
    assert plain.exact is None


def test_interim_look_single_arm_and_layout_mismatch():
    design = _single(0.6, (0.6, 0.4))
    data = InterimData.from_single_arm_responses(16, 23, 0.6)
    look = evaluate_interim(design, data, planned_total=40)
    assert round(look.exact.probability, 4) == 0.5656  # Lee & Liu (2008), as above
    with pytest.raises(AssuranceInputError, match="single arm.*from_single_arm_responses"):
        evaluate_interim(design, InterimData.from_responses(16, 23, 10, 23), planned_total=40)


def test_from_single_arm_responses_standard_errors():
    # Wald standard errors (common practice): sqrt(p(1-p)/n); log risk ratio sqrt((1-p)/x);
    # log odds ratio sqrt(1/x + 1/(n-x)).
    d = InterimData.from_single_arm_responses(12, 40, 0.2)
    assert d.estimate == pytest.approx(0.1) and d.standard_error == pytest.approx(
        math.sqrt(0.3 * 0.7 / 40))
    r = InterimData.from_single_arm_responses(12, 40, 0.2, scale="risk_ratio")
    assert r.estimate == pytest.approx(1.5) and r.standard_error == pytest.approx(
        math.sqrt(0.7 / 12))
    o = InterimData.from_single_arm_responses(12, 40, 0.2, scale="odds_ratio")
    assert o.estimate == pytest.approx((0.3 / 0.7) / 0.25)
    assert o.standard_error == pytest.approx(math.sqrt(1 / 12 + 1 / 28))
    with pytest.raises(AssuranceInputError, match="'responders'.*above 0"):
        InterimData.from_single_arm_responses(0, 40, 0.2)


# ------------------------------------------------------------------------------------------
# properties and input checks
# ------------------------------------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 30), extra=st.integers(1, 30), level=st.floats(0.5, 0.99),
       data=st.data())
def test_probability_in_unit_interval_and_rises_with_responders(n, extra, level, data):
    # The future count given x responders rises stochastically with x and the success region
    # is closed upwards (higher rates better), so the probability cannot fall as x grows.
    design = _single(0.3, (1.0, 1.0), level=level)
    x = data.draw(st.integers(0, n - 1))
    low, high = (exact_predictive_probability(design, treatment_responders=k, treatment_n=n,
                                              planned_total=n + extra).probability
                 for k in (x, x + 1))
    assert 0.0 <= low <= high + 1e-12 <= 1.0 + 1e-12


def test_input_checks():
    single = _single(0.3, (1.0, 1.0))
    two = TrialDesign(BinaryEndpoint(0.3), Normal(0.1, 0.1))
    call = exact_predictive_probability
    with pytest.raises(AssuranceInputError, match="'planned_total'.*patients to come"):
        call(single, treatment_responders=3, treatment_n=20, planned_total=20)
    with pytest.raises(AssuranceInputError, match="'treatment_responders'"):
        call(single, treatment_responders=21, treatment_n=20, planned_total=40)
    with pytest.raises(AssuranceInputError, match="must be None for a single-arm"):
        call(single, treatment_responders=3, treatment_n=20, planned_total=40,
             control_responders=1, control_n=5)
    with pytest.raises(AssuranceInputError, match="needed for a two-arm"):
        call(two, treatment_responders=3, treatment_n=20, planned_total=80)
    with pytest.raises(AssuranceInputError, match="'treatment_prior'.*> 0"):
        call(single, treatment_responders=3, treatment_n=20, planned_total=40,
             treatment_prior=(0, 1))
    with pytest.raises(AssuranceInputError, match="BinaryEndpoint"):
        call(object(), treatment_responders=3, treatment_n=20, planned_total=40)
    with pytest.raises(AssuranceInputError, match="'responses'"):
        InterimData(0.1, standard_error=0.1, responses=(5, 4, 0, 0))
    # a huge planned size: refused with the bound, not a memory error or a long wait
    with pytest.raises(AssuranceInputError, match=r"'planned_total'.*\[1, 2e\+06\]"):
        call(single, treatment_responders=3, treatment_n=20, planned_total=10**12)


def test_interim_look_beyond_the_exact_bound_uses_the_approximation_with_a_note():
    design = _single(0.3, (1.0, 1.0))
    data = InterimData.from_single_arm_responses(300, 1000, 0.3)
    look = evaluate_interim(design, data, planned_total=10**9)
    assert look.exact is None
    assert any("beyond the exact sum" in note for note in look.notes)


# ------------------------------------------------------------------------------------------
# the interim file and the shipped case study
# ------------------------------------------------------------------------------------------
CASE = Path(__file__).resolve().parents[1] / "case_studies" / "programs" / "single_arm_look"


def test_single_arm_case_study_reports_the_exact_value(tmp_path):
    from assurance.interim_plan import InterimPlan

    plan = InterimPlan.from_file(CASE / "interim.toml")
    look = plan.look
    # the same sum by scipy: 6 of 20 in, 45 planned, success when P(p > 0.2) >= 0.95
    # under the Beta(0.5, 0.5) analysis prior, which also predicts
    final, weight = _future((0.5, 0.5), 6, 20, 45)
    wins = stats.beta.sf(0.2, 0.5 + final, 0.5 + 45 - final) >= 0.95
    assert look.exact.probability == pytest.approx(float(weight[wins].sum()), abs=ENUM_TOL)
    rows = {name: value for name, value, _ in plan.results_rows()}
    assert rows["predictive_probability_exact"] == look.exact.probability
    assert "Exact predictive probability from the responder counts" in plan.summary()
    out = tmp_path / "look"
    plan.write(out)
    assert 'data-key="predictive_exact"' in (out / "memo.html").read_text(encoding="utf-8")


def test_interim_file_forms_must_match_the_layout(tmp_path):
    from assurance.design_file.interim_file import read_interim_file
    from assurance.errors import DesignFileError

    design = (CASE / "design.toml").read_text(encoding="utf-8")
    (tmp_path / "single.toml").write_text(design, encoding="utf-8")
    two_arm = design.replace('layout = "single_arm"', 'layout = "two_arm"').replace(
        "control = 0.20", "control = [2.0, 8.0]")
    (tmp_path / "two.toml").write_text(two_arm, encoding="utf-8")
    single_look = "design = '{}'\n[interim]\ntreatment_responders = 6\ntreatment_n = 20\n"
    (tmp_path / "a.toml").write_text(single_look.format("two.toml"), encoding="utf-8")
    with pytest.raises(DesignFileError, match="single-arm responders form.*two arms"):
        read_interim_file(tmp_path / "a.toml")
    both = single_look.format("single.toml") + "control_responders = 3\ncontrol_n = 20\n"
    (tmp_path / "b.toml").write_text(both, encoding="utf-8")
    with pytest.raises(DesignFileError, match="compares two arms.*single arm"):
        read_interim_file(tmp_path / "b.toml")
    (tmp_path / "c.toml").write_text(single_look.format("single.toml").replace(
        "= 6", "= 21"), encoding="utf-8")
    with pytest.raises(DesignFileError, match="'interim.treatment_responders' .21. must not"):
        read_interim_file(tmp_path / "c.toml")


def test_note_when_the_exact_value_falls_on_the_other_side_of_a_boundary():
    # The case study's look: exact about 0.50, normal approximation about 0.43 (both checked
    # above or against scipy); a futility boundary between them must be pointed out.
    from assurance import read_design

    design = read_design(CASE / "design.toml").design
    data = InterimData.from_single_arm_responses(6, 20, 0.2)
    look = evaluate_interim(design, data, planned_total=45, futility=0.46)
    assert look.predictive["analysis"] < 0.46 < look.exact.probability
    assert look.decision == "stop for futility"
    assert any("would say 'continue' rather than 'stop for futility'" in note
               for note in look.notes)
    calm = evaluate_interim(design, data, planned_total=45, futility=0.1)
    assert not any("would say" in note for note in calm.notes)
