"""Interim look (assurance.program.interim): predictive probability, conditional power,
boundaries and their operating characteristics.

External checks, each named beside it:

* the bivariate normal probabilities (Owen's T) against scipy.stats.multivariate_normal
  (Genz's algorithm);
* conditional power and the flat-prior predictive probability against the z-statistic
  formulas of Lan & Wittes (1988, the B-value) and Spiegelhalter, Freedman & Blackburn
  (1986), written out here in their own notation (the formulas are written from memory of
  those papers, and each is also checked by simulation below);
* the predictive probability by simulation: for data drawn from the prior, the final
  success indicator minus the predictive probability has mean zero, overall and on any
  event of the interim estimate (the definition of a conditional probability);
* the operating characteristics against a seeded simulation of the two-stage trial.

No published worked example with numbers could be verified for this check (one example
found online came from a commercial program's page, which the project does not use), so
none is quoted.

Monte Carlo tolerances are 4.5 reported standard errors (a false alarm about 1 in 150,000
per check) with an absolute floor where the value can be near 0 or 1.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from assurance import (
    BinaryEndpoint,
    ContinuousEndpoint,
    CountEndpoint,
    Mixture,
    Normal,
    PointMass,
    PosteriorProbability,
    StudentT,
    SurvivalEndpoint,
    TrialDesign,
)
from assurance.errors import AssuranceInputError
from assurance.program.interim import (
    InterimData,
    bivariate_normal_upper,
    conditional_power,
    evaluate_interim,
    final_standard_error,
    predictive_probability,
)

Z975 = stats.norm.ppf(0.975)
K = 4.5  # Monte Carlo tolerance in standard errors


def _design(prior=None, **kw):
    return TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"),
                       Normal(4.0, 2.0) if prior is None else prior, **kw)


# ------------------------------------------------------------------------------------------
# arithmetic
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("rho", [-0.6, 0.0, 0.3, 0.7071, 0.95, 0.999])
def test_bivariate_upper_matches_scipy(rho):
    # scipy.stats.multivariate_normal.cdf (Genz) with a tight tolerance as the reference
    cov = [[1, rho], [rho, 1]]
    for h in (-2.0, -0.5, 0.0, 0.4, 1.7):
        for k in (-1.3, 0.0, 0.8, 2.2):
            # P(X > h, Y > k) = P(-X < -h, -Y < -k), and (-X, -Y) has the same law
            want = stats.multivariate_normal.cdf([-h, -k], mean=[0, 0], cov=cov,
                                                 abseps=1e-10, releps=1e-10)
            assert float(bivariate_normal_upper(h, k, rho)) == pytest.approx(want, abs=2e-7)


def test_bivariate_upper_tiny_arguments():
    # a product of tiny limits underflows to 0; independence gives the product of tails
    for h, k in ((5e-324, -0.5), (-5e-324, 0.5), (1e-300, 1e-300)):
        want = stats.norm.sf(h) * stats.norm.sf(k)
        assert float(bivariate_normal_upper(h, k, 0.0)) == pytest.approx(want, abs=1e-12)


def test_bivariate_upper_infinite_limits():
    assert float(bivariate_normal_upper(-np.inf, 0.3, 0.5)) == pytest.approx(
        stats.norm.sf(0.3), abs=1e-15)
    assert float(bivariate_normal_upper(0.3, np.inf, 0.5)) == 0.0
    assert float(bivariate_normal_upper(-np.inf, -np.inf, 0.5)) == pytest.approx(1.0)


@given(h=st.floats(-4, 4), k=st.floats(-4, 4), rho=st.floats(-0.99, 0.99))
@settings(max_examples=60, deadline=None)
def test_bivariate_upper_symmetric_and_bounded(h, k, rho):
    p = float(bivariate_normal_upper(h, k, rho))
    assert p == pytest.approx(float(bivariate_normal_upper(k, h, rho)), abs=1e-12)
    # Frechet bounds: max(0, P(X>h) + P(Y>k) - 1) <= p <= min(P(X>h), P(Y>k))
    a, b = stats.norm.sf(h), stats.norm.sf(k)
    assert max(0.0, a + b - 1) - 1e-12 <= p <= min(a, b) + 1e-12


@pytest.mark.parametrize("t", [0.1, 0.5, 0.8])
@pytest.mark.parametrize("z1", [-0.5, 1.0, 2.3])
def test_conditional_power_b_value_formula(t, z1):
    # Lan & Wittes (1988): B(t) = Z(t) sqrt(t), drift theta = E Z(1);
    # CP(theta) = 1 - Phi((z_a - B(t) - theta (1 - t)) / sqrt(1 - t))
    se_n = 0.7
    se_1 = se_n / math.sqrt(t)
    d1 = z1 * se_1
    for delta in (0.0, 1.1, d1):
        theta = delta / se_n
        want = 1 - stats.norm.cdf((Z975 - z1 * math.sqrt(t) - theta * (1 - t))
                                  / math.sqrt(1 - t))
        got = conditional_power(d1, delta, interim_se=se_1, final_se=se_n,
                                threshold=Z975 * se_n)
        assert float(got) == pytest.approx(want, abs=1e-12)


@pytest.mark.parametrize("t", [0.2, 0.5, 0.9])
@pytest.mark.parametrize("z1", [-1.0, 0.7, 2.0])
def test_flat_prior_predictive_formula(t, z1):
    # Spiegelhalter, Freedman & Blackburn (1986), flat prior, in z terms:
    # PP = Phi((Z(t) - z_a sqrt(t)) / sqrt(1 - t))
    se_n = 1.3
    se_1 = se_n / math.sqrt(t)
    want = stats.norm.cdf((z1 - Z975 * math.sqrt(t)) / math.sqrt(1 - t))
    got = predictive_probability(z1 * se_1, prior=None, interim_se=se_1, final_se=se_n,
                                 threshold=Z975 * se_n)
    assert float(got) == pytest.approx(want, abs=1e-12)


def test_point_mass_prior_gives_conditional_power():
    # a point-mass prior leaves nothing to average: PP equals CP at that effect
    se_1, se_n, c = 2.0, 1.2, 2.4
    d1 = np.linspace(-3, 6, 7)
    pp = predictive_probability(d1, prior=PointMass(1.5), interim_se=se_1, final_se=se_n,
                                threshold=c)
    cp = conditional_power(d1, 1.5, interim_se=se_1, final_se=se_n, threshold=c)
    np.testing.assert_allclose(pp, cp, atol=1e-14)


def test_grid_route_matches_the_normal_closed_form():
    # a Student t prior with enormous df is a normal: the grid route (quadrature over the
    # prior's density) must agree with the closed form for N(2, 1.5^2)
    kw = dict(interim_se=1.8, final_se=1.0, threshold=1.96)
    d1 = np.array([-2.0, 0.5, 1.9, 4.0])
    grid = predictive_probability(d1, prior=StudentT(1e7, 2.0, 1.5), **kw)
    closed = predictive_probability(d1, prior=Normal(2.0, 1.5), **kw)
    np.testing.assert_allclose(grid, closed, atol=2e-5)


@given(a=st.floats(-5, 5), b=st.floats(-5, 5), t=st.floats(0.05, 0.95))
@settings(max_examples=40, deadline=None)
def test_predictive_probability_rises_with_the_estimate(a, b, t):
    prior = Mixture([PointMass(0.0), Normal(2.0, 1.0)], [0.3, 0.7])
    lo, hi = sorted((a, b))
    se_n = 1.0
    kw = dict(prior=prior, interim_se=se_n / math.sqrt(t), final_se=se_n, threshold=1.96)
    assert float(predictive_probability(lo, **kw)) <= float(predictive_probability(hi, **kw)) \
        + 1e-12


# ------------------------------------------------------------------------------------------
# the predictive probability by simulation
# ------------------------------------------------------------------------------------------
PRIORS = {
    "normal": Normal(1.5, 1.0),
    "mixture_with_point_mass": Mixture([PointMass(0.0), Normal(2.0, 0.8)], [0.3, 0.7]),
    "student_t_grid": StudentT(4.0, 1.0, 1.2),
}


@pytest.mark.parametrize("name", list(PRIORS))
@pytest.mark.parametrize("seed", [11, 12])
def test_predictive_probability_is_calibrated(name, seed):
    # Draw delta from the prior, the interim and final estimates given delta (the final one
    # pooling the interim data with new data); then E[1{d_N > c} - PP(d_1) | d_1 in A] = 0
    # for every event A of the interim estimate, if and only if PP is the conditional
    # probability of success given d_1.
    prior = PRIORS[name]
    rng = np.random.default_rng(seed)
    m = 60_000
    se_n, t = 0.9, 0.4
    se_1 = se_n / math.sqrt(t)
    c = 1.96 * se_n
    delta = prior.sample(m, rng)
    d1 = delta + se_1 * rng.standard_normal(m)
    se_2 = se_n / math.sqrt(1 - t)
    d2 = delta + se_2 * rng.standard_normal(m)
    dn = t * d1 + (1 - t) * d2
    xs = np.linspace(d1.min(), d1.max(), 400)  # PP on a fine grid, interpolated
    pp = np.interp(d1, xs, predictive_probability(xs, prior=prior, interim_se=se_1,
                                                  final_se=se_n, threshold=c))
    resid = (dn > c) - pp
    for event in (np.ones(m, bool), d1 < np.quantile(d1, 0.3),
                  (d1 > np.quantile(d1, 0.3)) & (d1 < np.quantile(d1, 0.7)),
                  d1 > np.quantile(d1, 0.7)):
        r = resid[event]
        mcse = r.std(ddof=1) / math.sqrt(r.size)
        assert abs(r.mean()) < K * mcse + 1e-3, (name, r.mean(), mcse)


# ------------------------------------------------------------------------------------------
# the look, and its operating characteristics by simulation
# ------------------------------------------------------------------------------------------
def _simulate(look, delta, rng, m=200_000):
    """The two-stage trial: interim estimate, stop by the boundary cuts, else final."""
    se_1, se_n, t = look.interim_se, look.final_se, look.fraction
    d1 = delta + se_1 * rng.standard_normal(m)
    d2 = delta + se_n / math.sqrt(1 - t) * rng.standard_normal(m)
    dn = t * d1 + (1 - t) * d2
    f = -np.inf if look.futility_cut is None else look.futility_cut
    e = np.inf if look.efficacy_cut is None else look.efficacy_cut
    fut, eff = d1 < f, d1 > e
    success = eff | (~fut & ~eff & (dn > look.threshold))
    frac = np.where(fut | eff, t, 1.0)
    return {"p_futility": fut, "p_efficacy": eff, "p_success": success,
            "p_success_no_look": dn > look.threshold, "expected_fraction": frac}


def _close(got, draws, name):
    mean = float(np.mean(draws))
    mcse = float(np.std(draws, ddof=1)) / math.sqrt(len(draws))
    assert abs(got - mean) < K * mcse + 5e-4, (name, got, mean, mcse)


@pytest.mark.parametrize("prior_choice", ["analysis", "design"])
def test_operating_characteristics_match_simulation(prior_choice):
    design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z", better="lower"),
                         Mixture([PointMass(0.0), Normal(-4.0, 1.5)], [0.25, 0.75]),
                         assumed_effect=-4.0, relevant_effect=-2.5)
    look = evaluate_interim(design, InterimData(-2.0, standard_error=2.1), planned_total=200,
                            futility=0.15, efficacy=0.98, prediction_prior=prior_choice)
    rng = np.random.default_rng(2026)
    fixed = {row.name: row for row in look.operating}
    assert set(fixed) == {"design prior", "no effect", "assumed effect", "relevant effect"}
    for row in look.operating[1:]:
        sim = _simulate(look, -row.effect, rng)  # benefit scale: lower is better
        for key, draws in sim.items():
            _close(getattr(row, key), draws, (row.name, key))
    # under the design prior: the truth drawn from it, one trial per draw
    m = 200_000
    delta = design.benefit_prior.sample(m, rng)
    sim = _simulate(look, delta, rng, m)
    for key, draws in sim.items():
        _close(getattr(fixed["design prior"], key), draws, ("design prior", key))


def test_no_boundaries_leave_the_trial_as_it_was():
    look = evaluate_interim(_design(), InterimData(3.0, standard_error=2.0),
                            planned_total=200, futility=0.0, efficacy=1.0)
    assert look.futility_cut is None and look.efficacy_cut is None
    for row in look.operating:
        assert row.p_futility == 0 and row.p_efficacy == 0
        assert row.p_success == pytest.approx(row.p_success_no_look, abs=1e-12)
        assert row.expected_fraction == 1.0
    # and without a look, success under N(4, 2^2) is the assurance of O'Hagan, Stevens &
    # Campbell (2005): Phi((m - c) / sqrt(v + se^2)), se = 10 sqrt(2/100)
    se = 10 * math.sqrt(2 / 100)
    want = stats.norm.cdf((4.0 - Z975 * se) / math.sqrt(4.0 + se**2))
    assert look.operating[0].p_success_no_look == pytest.approx(want, abs=1e-12)


def test_boundary_cuts_sit_where_the_predictive_probability_meets_them():
    look = evaluate_interim(_design(), InterimData(3.0, standard_error=2.0),
                            planned_total=200, futility=0.2, efficacy=0.95,
                            prediction_prior="design")
    assert float(look.predictive_at(look.futility_cut)) == pytest.approx(0.2, abs=1e-9)
    assert float(look.predictive_at(look.efficacy_cut)) == pytest.approx(0.95, abs=1e-9)
    assert look.futility_cut < look.estimate < look.efficacy_cut
    assert look.decision == "continue"


def test_decisions_follow_the_predictive_probability():
    low = evaluate_interim(_design(), InterimData(-2.0, standard_error=2.0),
                           planned_total=200)
    high = evaluate_interim(_design(), InterimData(9.0, standard_error=2.0),
                            planned_total=200)
    assert low.predictive["analysis"] < 0.1 and low.decision == "stop for futility"
    assert high.predictive["analysis"] > 0.99 and high.decision == "stop for efficacy"


def test_lower_is_better_is_the_mirror_image():
    up = _design()
    down = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z", better="lower"),
                       Normal(-4.0, 2.0))
    a = evaluate_interim(up, InterimData(2.5, standard_error=2.0), planned_total=200)
    b = evaluate_interim(down, InterimData(-2.5, standard_error=2.0), planned_total=200)
    assert a.predictive == pytest.approx(b.predictive, abs=1e-12)
    assert a.conditional == pytest.approx(b.conditional, abs=1e-12)
    assert b.natural(b.futility_cut) == pytest.approx(-a.natural(a.futility_cut), abs=1e-9)


def test_posterior_probability_rule_with_a_normal_analysis_prior():
    # the final threshold comes from the rule itself (PosteriorProbability with a sceptical
    # prior): conditional power at the threshold's own effect is computed against it
    design = _design(rule=PosteriorProbability(0.95), analysis_prior=Normal(0.0, 3.0))
    look = evaluate_interim(design, InterimData(3.0, standard_error=2.0), planned_total=200)
    se_n = math.sqrt(2.0)
    v1 = 1 / (1 / 9 + 1 / se_n**2)  # posterior variance at the final analysis
    c = se_n**2 * (stats.norm.ppf(0.95) * math.sqrt(v1) / v1)  # from posterior mean >= z sd
    assert look.threshold == pytest.approx(c, rel=1e-10)
    # the analysis posterior after the interim: N(v (d/se^2), v), v = 1/(1/9 + 1/4)
    v = 1 / (1 / 9 + 1 / 4)
    assert look.posterior["analysis"]["mean"] == pytest.approx(v * 3.0 / 4, rel=1e-12)
    assert look.posterior["analysis"]["sd"] == pytest.approx(math.sqrt(v), rel=1e-12)


# ------------------------------------------------------------------------------------------
# edge cases
# ------------------------------------------------------------------------------------------
def test_tiny_information_fraction_returns_the_prior_predictive():
    # t -> 0: the interim says nothing; under the design prior the predictive probability
    # tends to the assurance Phi((m - c) / sqrt(v + se^2)) (O'Hagan et al. 2005)
    look = evaluate_interim(_design(), InterimData(3.0, information_fraction=1e-7),
                            planned_total=200)
    se = math.sqrt(2.0)
    want = stats.norm.cdf((4.0 - Z975 * se) / math.sqrt(4.0 + se**2))
    assert look.predictive["design"] == pytest.approx(want, abs=1e-4)
    assert any("only" in note for note in look.notes)


def test_information_fraction_near_one_is_nearly_decided():
    look = evaluate_interim(_design(), InterimData(3.5, information_fraction=0.999999),
                            planned_total=200)
    assert look.predictive["analysis"] > 0.99  # 3.5 > c = 2.77
    assert look.conditional["none"] > 0.99
    with pytest.raises(AssuranceInputError, match="information"):
        evaluate_interim(_design(), InterimData(3.0, standard_error=1.0), planned_total=200)


def test_point_mass_design_prior():
    design = _design(prior=PointMass(4.0))
    look = evaluate_interim(design, InterimData(3.0, standard_error=2.0), planned_total=200)
    assert look.predictive["design"] == pytest.approx(look.conditional["assumed"], abs=1e-14)
    assert look.posterior["design"]["sd"] == 0.0


@pytest.mark.parametrize("kwargs, match", [
    ({"futility": 0.5, "efficacy": 0.4}, "futility"),
    ({"futility": 1.0}, "futility"),
    ({"efficacy": 0.0}, "efficacy"),
    ({"prediction_prior": "mine"}, "prediction_prior"),
    ({"planned_total": None}, "planned_total"),
])
def test_bad_inputs_name_the_parameter(kwargs, match):
    args = {"planned_total": 200, **kwargs}
    with pytest.raises(AssuranceInputError, match=match):
        evaluate_interim(_design(), InterimData(3.0, standard_error=2.0), **args)


def test_interim_data_checks():
    with pytest.raises(AssuranceInputError, match="exactly one"):
        InterimData(1.0)
    with pytest.raises(AssuranceInputError, match="exactly one"):
        InterimData(1.0, standard_error=1.0, information_fraction=0.5)
    with pytest.raises(AssuranceInputError, match="information_fraction"):
        InterimData(1.0, information_fraction=1.0)
    with pytest.raises(AssuranceInputError, match="responders"):
        InterimData.from_responses(0, 50, 10, 50, scale="risk_ratio")


# ------------------------------------------------------------------------------------------
# interim data and the final standard error per endpoint
# ------------------------------------------------------------------------------------------
def test_interim_data_from_arms_match_textbook_formulas():
    # Wald standard errors (common practice), written out here
    d = InterimData.from_responses(30, 60, 20, 60, scale="odds_ratio")
    assert d.estimate == pytest.approx((30 / 30) / (20 / 40))
    assert d.standard_error == pytest.approx(math.sqrt(1 / 30 + 1 / 30 + 1 / 20 + 1 / 40))
    r = InterimData.from_responses(30, 60, 20, 60, scale="risk_ratio")
    assert r.standard_error == pytest.approx(math.sqrt(1 / 30 - 1 / 60 + 1 / 20 - 1 / 60))
    # Schoenfeld (1983): var(log HR) = 1 / (E p (1 - p)); 4 / E for 1:1
    assert InterimData.from_events(0.8, 64).standard_error == pytest.approx(0.25)
    assert InterimData.from_events(0.8, 90, allocation=2.0).standard_error == pytest.approx(
        1 / math.sqrt(90 * 2 / 9))
    # Poisson counts: var(log RR) = 1/x_t + 1/x_c
    c = InterimData.from_counts(40, 80.0, 50, 75.0)
    assert c.estimate == pytest.approx(0.5 / (50 / 75))
    assert c.standard_error == pytest.approx(math.sqrt(1 / 40 + 1 / 50))


def test_final_standard_error_per_endpoint():
    ep = BinaryEndpoint(0.3)
    d = TrialDesign(ep, Normal(0.15, 0.05))
    assert final_standard_error(d, 200) == pytest.approx(
        math.sqrt(0.45 * 0.55 / 100 + 0.3 * 0.7 / 100))
    s = SurvivalEndpoint(assumed_hazard_ratio=0.7, accrual_time=12.0, follow_up_time=12.0,
                         control_median=10.0)
    ds = TrialDesign(s, Normal(math.log(0.7), 0.1))
    events = float(s.expected_events(200, 200, 0.7)[0])
    assert final_standard_error(ds, 400) == pytest.approx(2 / math.sqrt(events))
    cnt = CountEndpoint(control_rate=1.0, follow_up=1.0)
    dc = TrialDesign(cnt, Normal(math.log(0.8), 0.1))
    # Poisson, one unit of follow-up: var = 1/(n_t 0.8) + 1/(n_c 1.0)
    assert final_standard_error(dc, 200) == pytest.approx(math.sqrt(1 / 80 + 1 / 100))


def test_ratio_endpoint_look_runs_on_the_log_scale():
    s = SurvivalEndpoint(assumed_hazard_ratio=0.7, accrual_time=12.0, follow_up_time=12.0,
                         control_median=10.0)
    design = TrialDesign(s, Normal(math.log(0.75), 0.15))
    look = evaluate_interim(design, InterimData.from_events(0.8, 120), planned_total=600)
    assert look.estimate == pytest.approx(-math.log(0.8))
    assert 0 < look.fraction < 1
    assert look.natural(look.futility_cut) > look.natural(look.efficacy_cut)  # lower better


@given(est=st.floats(-4, 8), se1=st.floats(1.5, 20), fut=st.floats(0, 0.5),
       eff=st.floats(0.6, 1.0), which=st.sampled_from(["analysis", "design"]))
@settings(max_examples=25, deadline=None)
def test_operating_characteristics_are_probabilities(est, se1, fut, eff, which):
    prior = Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.2, 0.8])
    look = evaluate_interim(_design(prior), InterimData(est, standard_error=se1),
                            planned_total=200, futility=fut, efficacy=eff,
                            prediction_prior=which)
    for row in look.operating:
        assert 0 <= row.p_futility and 0 <= row.p_efficacy
        assert row.p_futility + row.p_efficacy <= 1 + 1e-12
        assert row.p_efficacy - 1e-12 <= row.p_success <= 1
        assert look.fraction - 1e-12 <= row.expected_fraction <= 1 + 1e-12
    assert 0 <= look.predictive[which] <= 1
