"""Binary endpoint with a posterior-probability success rule (beta analysis priors), checked
against computations from outside the package.

Sources (named again beside each check):

* ``scipy.integrate.quad`` of the control posterior density times the treatment posterior
  survival (or distribution) function, both ``scipy.stats.beta``: the posterior probability
  of a benefit beyond the boundary for one table at a time, written out in this file with
  its own map from the boundary effect to the treatment rate (not the package's code);
* ``scipy.stats.beta.sf`` -- the single-arm posterior probability in closed form;
* ``scipy.stats.binom`` -- power, by summing over the independent success region;
* ``scipy.stats.betabinom`` -- assurance under beta design priors, by the same enumeration;
* the decomposition ``P(success and benefit > cut)``: ``betabinom`` times the design
  posterior's probability of ``benefit > cut`` by ``quad`` (O'Hagan, Stevens & Campbell
  2005, Pharmaceutical Statistics 4:187-201, in its exact binomial form).

Tolerances: ``quad`` runs with an absolute error target of 1e-13; the package's 64-node
Gauss-Legendre rule was observed within 1e-10 of it, so posterior probabilities agree to
1e-8, and regions are compared only at tables whose probability is more than 1e-7 from the
level (nearer than that the two quadratures may legitimately disagree). Sums of a few
hundred pmf products over the same region agree to 1e-12.
"""

from __future__ import annotations

import json
import math
from functools import lru_cache

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, special, stats

from assurance import (
    AllOf,
    Mixture,
    Normal,
    PointMass,
    PosteriorProbability,
    Significance,
    TrialDesign,
    evaluate,
    solve_sample_size,
)
from assurance.compute.binary_exact import (
    PosteriorSpec,
    RateArm,
    posterior_probabilities,
    posterior_region,
    posterior_runs,
)
from assurance.compute.normal_outcome import Cut
from assurance.design_file import parse_design
from assurance.endpoints.binary import BetaRates, BinaryEndpoint
from assurance.errors import AssuranceInputError

NT, NC = 12, 10  # allocation 1.2: a total of 22 splits into 12 on treatment, 10 on control
QUAD_TOL = 1e-8
NEAR_LEVEL = 1e-7
ENUM_TOL = 1e-12
UNIFORM = BetaRates((1.0, 1.0), (1.0, 1.0))


# ------------------------------------------------------------------------------------------
# independent references, one table at a time
# ------------------------------------------------------------------------------------------
def _treatment_rate_at(boundary: float, q: float, scale: str) -> float:
    """Treatment rate at which the natural effect equals ``boundary`` (control rate q)."""
    if scale == "difference":
        return q + boundary
    if scale == "risk_ratio":
        return q * math.exp(boundary)
    return 1.0 / (1.0 + math.exp(-(math.log(q / (1.0 - q)) + boundary)))


def _kinks(boundary: float, scale: str) -> list[float]:
    """Control rates where the boundary treatment rate reaches 0 or 1 (quad break points)."""
    if scale == "difference":
        pts = [-boundary, 1.0 - boundary]
    elif scale == "risk_ratio":
        pts = [math.exp(-boundary)]
    else:
        pts = []
    return [p for p in pts if 0.0 < p < 1.0]


def prob_by_quad(x_t, x_c, n_t, n_c, treatment, control, scale, boundary, higher):
    """P(natural effect > boundary | data) (< when lower is better) by scipy quad."""
    post_t = stats.beta(treatment[0] + x_t, treatment[1] + n_t - x_t)
    post_c = stats.beta(control[0] + x_c, control[1] + n_c - x_c)

    def f(q):
        h = min(max(_treatment_rate_at(boundary, q, scale), 0.0), 1.0)
        return post_c.pdf(q) * (post_t.sf(h) if higher else post_t.cdf(h))

    pts = _kinks(boundary, scale)
    return integrate.quad(f, 0.0, 1.0, points=pts or None, epsabs=1e-13, epsrel=1e-12,
                          limit=200)[0]


@lru_cache(maxsize=32)
def probs_by_quad(n_t, n_c, treatment, control, scale, boundary, higher):
    return np.array([[prob_by_quad(x_t, x_c, n_t, n_c, treatment, control, scale, boundary,
                                   higher) for x_c in range(n_c + 1)]
                     for x_t in range(n_t + 1)])


def power_by_enumeration(region, n_t, n_c, p_t, p_c):
    return float(stats.binom.pmf(np.arange(n_t + 1), n_t, p_t) @ region
                 @ stats.binom.pmf(np.arange(n_c + 1), n_c, p_c))


def assurance_by_enumeration(region, n_t, n_c, treatment, control):
    return float(stats.betabinom.pmf(np.arange(n_t + 1), n_t, *treatment) @ region
                 @ stats.betabinom.pmf(np.arange(n_c + 1), n_c, *control))


def _natural(value, scale):
    return value if scale == "difference" else math.log(value)


def calculator(ep, design_prior, rule, analysis_prior):
    """The calculator exactly as the planning code builds it (benefit scale)."""
    rule_b = ep.benefit_rule(rule, None if analysis_prior is None
                             else ep.check_analysis_prior(analysis_prior))
    return ep.calculator(ep.benefit_prior(design_prior), rule_b, draws=100, seed=None)


# ------------------------------------------------------------------------------------------
# posterior probabilities and success regions
# ------------------------------------------------------------------------------------------
PROB_CASES = [
    # scale, boundary (natural analysis scale), higher better, treatment prior, control prior
    ("difference", 0.0, True, (1.0, 1.0), (1.0, 1.0)),
    ("difference", 0.1, True, (2.0, 2.0), (6.0, 14.0)),
    ("difference", -0.1, True, (1.0, 1.0), (2.0, 2.0)),  # P(p_t > p_c - 0.1)
    ("difference", -0.05, False, (1.0, 1.0), (1.0, 1.0)),  # lower better: p_t < p_c - 0.05
    ("risk_ratio", math.log(1.2), True, (1.0, 1.0), (3.0, 7.0)),
    ("odds_ratio", math.log(0.8), False, (0.5, 0.5), (30.0, 70.0)),  # narrow control prior
]


@pytest.mark.parametrize(("scale", "boundary", "higher", "treatment", "control"), PROB_CASES)
def test_posterior_probabilities_and_region_match_quad(scale, boundary, higher, treatment,
                                                       control):
    # Every table's posterior probability against scipy quad (see module docstring), and
    # the bisection region against thresholding those probabilities at the level.
    sign = 1.0 if higher else -1.0
    spec = PosteriorSpec(0.9, sign * boundary, sign, scale, True, RateArm.beta(*treatment),
                         RateArm.beta(*control))
    ref = probs_by_quad(NT, NC, treatment, control, scale, boundary, higher)
    ours = posterior_probabilities(spec, NT, NC)
    np.testing.assert_allclose(ours, ref, rtol=0, atol=QUAD_TOL)
    region = posterior_region(spec, NT, NC)
    clear = np.abs(ref - 0.9) > NEAR_LEVEL
    assert np.array_equal(region[clear], (ref >= 0.9)[clear])
    assert 0 < region.sum() < region.size  # the case is not trivial


def test_bisection_region_equals_full_grid_for_larger_arms():
    # The staircase search evaluates about two tables per control count; thresholding the
    # probabilities of all (n_t + 1)(n_c + 1) tables must give the same region (unequal
    # arms, an informative prior, both directions).
    for sign in (1.0, -1.0):
        spec = PosteriorSpec(0.975, 0.02, sign, "difference", True, RateArm.beta(2.0, 3.0),
                             RateArm.beta(12.0, 28.0))
        full = posterior_probabilities(spec, 90, 60) >= 0.975 - 1e-12
        assert np.array_equal(posterior_region(spec, 90, 60), full)


@pytest.mark.parametrize("better", ["higher", "lower"])
def test_runs_and_their_sums_for_larger_arms(better):
    # The region is kept as one run of x_t per control count (from the top when higher is
    # better, from 0 when lower is better) and summed with prefix sums; against the region
    # thresholded on all 91 x 61 tables, power by scipy.stats.binom and assurance by
    # scipy.stats.betabinom summed over that dense region.
    sign = 1.0 if better == "higher" else -1.0
    spec = PosteriorSpec(0.95, 0.0, sign, "difference", True, RateArm.beta(1.0, 1.0),
                         RateArm.beta(1.0, 1.0))
    full = posterior_probabilities(spec, 90, 60) >= 0.95 - 1e-12
    runs = posterior_runs(spec, 90, 60)
    assert np.array_equal(runs.dense(), full)
    assert np.all((runs.hi == 90) if better == "higher" else (runs.lo == 0))
    ep = BinaryEndpoint(0.3, allocation=1.5, better=better)
    assert ep.arm_sizes(np.array([150])) == (90, 60)
    calc = calculator(ep, BetaRates((6.0, 14.0), (9.0, 11.0)), PosteriorProbability(0.95),
                      UNIFORM)
    effect = 0.15 if better == "higher" else -0.15
    power = calc.power(ep.to_benefit(effect), np.array([90]), np.array([60]))[0]
    assert power == pytest.approx(
        power_by_enumeration(full.astype(float), 90, 60, 0.3 + effect, 0.3), abs=ENUM_TOL)
    success = calc.success(np.array([90]), np.array([60]), []).success[0]
    assert success == pytest.approx(
        assurance_by_enumeration(full.astype(float), 90, 60, (9.0, 11.0), (6.0, 14.0)),
        abs=ENUM_TOL)


def test_quadrature_is_accurate_for_very_unequal_arms():
    # 1000 versus 12 patients: the narrower posterior (treatment) must be the outer
    # integral. Against scipy quad at tables near the decision boundary. Observed error
    # about 2e-12; integrating over the wider posterior instead is off by up to 1.4e-8
    # here, so the tolerance is 1e-9.
    spec = PosteriorSpec(0.975, 0.0, 1.0, "difference", True, RateArm.beta(1.0, 1.0),
                         RateArm.beta(1.0, 1.0))
    probs = posterior_probabilities(spec, 1000, 12)
    for x_t, x_c in [(500, 2), (600, 4), (700, 6), (300, 1), (900, 10), (100, 0)]:
        ref = prob_by_quad(x_t, x_c, 1000, 12, (1.0, 1.0), (1.0, 1.0), "difference", 0.0,
                           True)
        assert probs[x_t, x_c] == pytest.approx(ref, abs=1e-9)


# ------------------------------------------------------------------------------------------
# power, type I error and assurance through the endpoint and the design
# ------------------------------------------------------------------------------------------
DESIGN_CASES = [
    # scale, better, beyond (natural), assumed effect (natural), analysis treatment, control
    ("difference", "higher", None, 0.25, (1.0, 1.0), (1.0, 1.0)),
    ("difference", "higher", 0.05, 0.25, (1.0, 1.0), (9.0, 21.0)),
    ("difference", "lower", None, -0.2, (1.0, 1.0), (1.0, 1.0)),
    ("risk_ratio", "higher", 1.1, 1.8, (0.5, 0.5), (0.5, 0.5)),
    ("odds_ratio", "lower", None, 0.3, (2.0, 3.0), (3.0, 7.0)),
]


@pytest.mark.parametrize(("scale", "better", "beyond", "assumed", "treatment", "control"),
                         DESIGN_CASES)
def test_design_power_and_assurance_match_enumeration(scale, better, beyond, assumed,
                                                      treatment, control):
    # A whole design through evaluate: 22 patients split 12:10. Power (binom), type I error
    # (binom at p_t = p_c) and assurance under a BetaRates design prior (betabinom), each
    # summed over the region from scipy quad (module docstring).
    ep = BinaryEndpoint(0.3, allocation=1.2, scale=scale, better=better)
    design_t, design_c = (6.0, 9.0), (9.0, 21.0)
    design = TrialDesign(ep, BetaRates(design_c, design_t, scale),
                         rule=PosteriorProbability(0.95, beyond=beyond),
                         analysis_prior=BetaRates(control, treatment), assumed_effect=assumed)
    assert ep.arm_sizes(np.array([22])) == (12, 10)
    ds = evaluate(design, [22])
    # success iff P(natural effect beyond the boundary | data) >= 0.95, "beyond" meaning
    # above it when higher is better and below it when lower is better
    no_effect = 0.0 if scale == "difference" else 1.0
    boundary = _natural(no_effect if beyond is None else beyond, scale)
    probs = probs_by_quad(NT, NC, treatment, control, scale, boundary, better == "higher")
    assert np.all(np.abs(probs - 0.95) > NEAR_LEVEL)  # no table too close to call
    region = (probs >= 0.95).astype(float)
    p_t, p_c = ep.rates(assumed)
    assert float(ds.power[0]) == pytest.approx(
        power_by_enumeration(region, NT, NC, p_t, p_c), abs=ENUM_TOL)
    p_null = ep.rates(no_effect if beyond is None else beyond)[0]  # type I error there
    assert float(ds.type_one_error[0]) == pytest.approx(
        power_by_enumeration(region, NT, NC, p_null, 0.3), abs=ENUM_TOL)
    assert float(ds.assurance[0]) == pytest.approx(
        assurance_by_enumeration(region, NT, NC, design_t, design_c), abs=ENUM_TOL)


def test_decomposition_matches_quad():
    # P(success and benefit > cut) = sum over the region of betabinom(x_t) betabinom(x_c)
    # times P(benefit > cut | x) under the *design* prior's posterior, by scipy quad
    # (O'Hagan, Stevens & Campbell 2005, exact binomial form).
    ep = BinaryEndpoint(0.3, allocation=1.2)
    design_t, design_c = (5.0, 5.0), (3.0, 7.0)
    calc = calculator(ep, BetaRates(design_c, design_t), PosteriorProbability(0.9), UNIFORM)
    cuts = [Cut(0.0), Cut(0.1, inclusive=True)]
    res = calc.success(np.array([NT]), np.array([NC]), cuts)
    region = probs_by_quad(NT, NC, (1.0, 1.0), (1.0, 1.0), "difference", 0.0, True) >= 0.9
    for cut, ours in zip(cuts, res.joint, strict=True):
        ref = sum(stats.betabinom.pmf(x_t, NT, *design_t)
                  * stats.betabinom.pmf(x_c, NC, *design_c)
                  * prob_by_quad(x_t, x_c, NT, NC, design_t, design_c, "difference",
                                 cut.value, True)
                  for x_t, x_c in zip(*np.nonzero(region), strict=True))
        assert float(ours[0]) == pytest.approx(ref, abs=QUAD_TOL)
    assert float(res.success[0]) == pytest.approx(
        assurance_by_enumeration(region.astype(float), NT, NC, design_t, design_c),
        abs=ENUM_TOL)


@pytest.mark.parametrize("better", ["higher", "lower"])
def test_single_arm_matches_beta_survival_function(better):
    # Closed form: P(p > 0.25 | x) = scipy.stats.beta.sf(0.25, a + x, b + n - x) (cdf when
    # lower is better); power by binom, assurance by betabinom over that region.
    n, ref_rate, jeffreys = 25, 0.2, (0.5, 0.5)
    ep = BinaryEndpoint(ref_rate, layout="single_arm", better=better)
    beyond = 0.05 if better == "higher" else -0.05
    rule = PosteriorProbability(0.95, beyond=beyond)
    x = np.arange(n + 1)
    post = stats.beta(jeffreys[0] + x, jeffreys[1] + n - x)
    bound = ref_rate + beyond
    probs = post.sf(bound) if better == "higher" else post.cdf(bound)
    region = (probs >= 0.95).astype(float)
    spec = PosteriorSpec(0.95, 0.05, ep.sign, "difference", False, RateArm.beta(*jeffreys),
                         RateArm.fixed_at(ref_rate))
    np.testing.assert_allclose(posterior_probabilities(spec, n, 0)[:, 0], probs, rtol=0,
                               atol=1e-13)
    calc = calculator(ep, BetaRates(ref_rate, (4.0, 8.0)), rule,
                      BetaRates(ref_rate, jeffreys))
    true_rate = 0.45 if better == "higher" else 0.05
    power = calc.power(ep.to_benefit(true_rate - ref_rate), np.array([n]), np.array([0]))
    assert float(power[0]) == pytest.approx(
        float(stats.binom.pmf(x, n, true_rate) @ region), abs=ENUM_TOL)
    res = calc.success(np.array([n]), np.array([0]), [])
    assert float(res.success[0]) == pytest.approx(
        float(stats.betabinom.pmf(x, n, 4.0, 8.0) @ region), abs=ENUM_TOL)


def test_single_arm_ratio_and_difference_rules_coincide():
    # Against a fixed reference 0.2, "risk ratio beyond 1.25" and "difference beyond 0.05"
    # both ask P(p > 0.25 | x) >= level: the same region and the same power (common
    # practice: the event is the same).
    diff = BinaryEndpoint(0.2, layout="single_arm")
    ratio = BinaryEndpoint(0.2, layout="single_arm", scale="risk_ratio")
    c1 = calculator(diff, PointMass(0.2), PosteriorProbability(0.9, 0.05), None)
    c2 = calculator(ratio, PointMass(math.log(2.0)), PosteriorProbability(0.9, 1.25), None)
    n = np.array([10, 40, 90])
    np.testing.assert_allclose(c1.power(0.2, n, 0 * n), c2.power(math.log(2.0), n, 0 * n),
                               rtol=0, atol=1e-12)


def test_type_one_error_with_uniform_prior_is_near_alpha():
    # With uniform priors and level 1 - alpha the rule behaves like a one-sided test at
    # alpha (common practice), but not exactly: the error at p_t = p_c stays below 2 alpha.
    # Values printed for the report (pytest -s).
    n = np.array([30, 60, 100, 150])
    errors = {}
    for p in (0.1, 0.3, 0.5):
        ep_p = BinaryEndpoint(p)
        calc = calculator(ep_p, PointMass(0.0), PosteriorProbability(0.975), UNIFORM)
        errors[p] = calc.power(0.0, n, n)
        assert np.all((errors[p] > 0.0) & (errors[p] < 2 * 0.025))
    print("type I error at p_t = p_c, uniform priors, level 0.975, n per arm", n.tolist(),
          {p: np.round(v, 4).tolist() for p, v in errors.items()})
    assert any(abs(v - 0.025).max() > 1e-4 for v in errors.values())  # not exactly alpha


# ------------------------------------------------------------------------------------------
# properties
# ------------------------------------------------------------------------------------------
def test_success_rises_with_n_at_a_clear_benefit():
    # 0.55 versus 0.30: power and assurance (favourable beta design priors) climb with n.
    ep = BinaryEndpoint(0.3)
    calc = calculator(ep, BetaRates((30.0, 70.0), (55.0, 45.0)), PosteriorProbability(0.975),
                      UNIFORM)
    n = np.array([10, 20, 40, 80, 160])
    assert np.all(np.diff(calc.power(0.25, n, n)) > 0)
    assert np.all(np.diff(calc.success(n, n, []).success) > 0)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(p_c=st.floats(0.3, 0.7), effect=st.floats(-0.05, 0.25), n_t=st.integers(1, 40),
       n_c=st.integers(1, 40), level=st.floats(0.6, 0.99),
       a=st.floats(0.3, 5.0), b=st.floats(0.3, 5.0),
       better=st.sampled_from(["higher", "lower"]))
def test_point_mass_assurance_is_power(p_c, effect, n_t, n_c, level, a, b, better):
    # A point-mass design prior makes assurance the classical power (common practice).
    ep = BinaryEndpoint(p_c, better=better)
    effect = effect if better == "higher" else -effect
    calc = calculator(ep, PointMass(effect), PosteriorProbability(level),
                      BetaRates((a, b), (b, a)))
    sizes_t, sizes_c = np.array([n_t]), np.array([n_c])
    res = calc.success(sizes_t, sizes_c, [Cut(-1.0)])
    power = calc.power(ep.to_benefit(effect), sizes_t, sizes_c)
    assert float(res.success[0]) == pytest.approx(float(power[0]), abs=1e-12)
    assert float(res.joint[0][0]) == pytest.approx(float(power[0]), abs=1e-12)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ct=st.tuples(st.floats(0.5, 20.0), st.floats(0.5, 20.0)),
       tr=st.tuples(st.floats(0.5, 20.0), st.floats(0.5, 20.0)),
       n_t=st.integers(1, 60), n_c=st.integers(1, 60), level=st.floats(0.5, 0.995),
       scale=st.sampled_from(["difference", "risk_ratio", "odds_ratio"]),
       better=st.sampled_from(["higher", "lower"]))
def test_probabilities_are_coherent(ct, tr, n_t, n_c, level, scale, better):
    # Assurance in [0, 1]; P(success and relevant) <= P(success and benefit) <= assurance.
    ep = BinaryEndpoint(0.3, scale=scale, better=better)
    calc = calculator(ep, BetaRates(ct, tr, scale), PosteriorProbability(level),
                      BetaRates((1.0, 1.0), (0.5, 0.5)))
    res = calc.success(np.array([n_t]), np.array([n_c]), [Cut(0.0), Cut(0.1, inclusive=True)])
    s, j0, j1 = float(res.success[0]), float(res.joint[0][0]), float(res.joint[1][0])
    assert 0.0 <= j1 <= j0 + 1e-12 and j0 <= s + 1e-12 and s <= 1.0


# ------------------------------------------------------------------------------------------
# beyond the exact range
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("scale", "effect", "beyond", "analysis", "tol"),
    [("difference", 0.06, None, UNIFORM, 0.005),
     ("difference", 0.08, 0.02, BetaRates((30.0, 70.0), (20.0, 30.0)), 0.01),
     ("odds_ratio", math.log(1.3), None, BetaRates((0.5, 0.5), (0.5, 0.5)), 0.01),
     ("risk_ratio", math.log(1.25), 1.05, UNIFORM, 0.01)],
)
def test_normal_approximation_agrees_with_enumeration_for_large_arms(scale, effect, beyond,
                                                                     analysis, tol):
    # At 700 per arm the beta posteriors are close to normal (common practice: large-sample
    # normality of the posterior), and the counts to normal: the approximation used beyond
    # exact_up_to must be within about 0.01 of the exact power (discreteness of the exact
    # region alone moves power by a few thousandths at this size).
    n = np.array([700])
    rule = PosteriorProbability(0.975, beyond=beyond)
    exact = calculator(BinaryEndpoint(0.3, scale=scale, exact_up_to=1000), PointMass(effect),
                       rule, analysis)
    approx = calculator(BinaryEndpoint(0.3, scale=scale, exact_up_to=0), PointMass(effect),
                        rule, analysis)
    p_exact, p_approx = float(exact.power(effect, n, n)[0]), float(approx.power(effect, n, n)[0])
    assert 0.2 < p_exact < 0.95
    assert p_approx == pytest.approx(p_exact, abs=tol)


# ------------------------------------------------------------------------------------------
# designs end to end
# ------------------------------------------------------------------------------------------
def test_design_end_to_end_with_posterior_rule():
    ep = BinaryEndpoint(0.3)
    prior = BetaRates((30.0, 70.0), (45.0, 55.0))
    design = TrialDesign(ep, prior, rule=PosteriorProbability(0.975),
                         analysis_prior=BetaRates((1, 1), (1, 1)), relevant_effect=0.1)
    ds = evaluate(design, [20, 60, 200, 600])
    # ceiling = P(p_t > p_c) under the design prior, by quad
    ceiling = integrate.quad(lambda p: stats.beta(30, 70).pdf(p) * stats.beta(45, 55).sf(p),
                             0, 1, epsabs=1e-13)[0]
    assert float(ds.ceiling) == pytest.approx(ceiling, abs=QUAD_TOL)
    # below the ceiling up to false positives near no effect (at most about 1 - level)
    assert np.all(ds.assurance.values <= ceiling + 0.025 * (1 - ceiling))
    assert np.all(np.diff(ds.assurance.values) > 0)
    assert np.all(ds.prob_success_and_relevant <= ds.prob_success_and_benefit + 1e-15)
    assert np.all(ds.prob_success_and_benefit <= ds.assurance + 1e-15)
    assert "posterior probability rule" in ds.attrs["method"]
    json.dumps(design.to_dict())  # the analysis prior describes itself in plain values
    # None means uniform beta(1, 1) priors on both rates: the same numbers
    flat = TrialDesign(ep, prior, rule=PosteriorProbability(0.975), relevant_effect=0.1)
    np.testing.assert_array_equal(evaluate(flat, [20, 60, 200, 600]).assurance.values,
                                  ds.assurance.values)
    answer = solve_sample_size(design, 0.6)
    assert answer.reached and answer.achieved >= 0.6
    # one control patient fewer falls short
    n_t, n_c = ep.sizes_from_control(np.array([answer.n_control - 1]))
    calc = calculator(ep, prior, PosteriorProbability(0.975), UNIFORM)
    assert float(calc.success(n_t, n_c, []).success[0]) < 0.6


def test_solving_beyond_the_exact_range():
    # A small difference (0.35 versus 0.30) needs more than exact_up_to = 300 per arm: the
    # solver crosses into the normal approximation and still answers.
    ep = BinaryEndpoint(0.3, exact_up_to=300)
    design = TrialDesign(ep, PointMass(0.05), rule=PosteriorProbability(0.975))
    answer = solve_sample_size(design, 0.8, quantity="power")
    assert answer.reached and answer.n_control > 300
    # the unpooled normal formula for a one-sided 0.025 test at 80% (Fleiss, Tytun & Ury
    # 1980 without correction, common practice) gives about 1374 per arm; the flat-prior
    # posterior rule needs about the same
    z = stats.norm.isf(0.025) + stats.norm.isf(0.2)
    classical = z**2 * (0.35 * 0.65 + 0.3 * 0.7) / 0.05**2
    assert answer.n_control == pytest.approx(classical, rel=0.02)


def test_lower_is_better_design_uses_negated_analysis_prior():
    # Lower rates better: the analysis prior arrives negated on the benefit scale; the
    # result equals the mirror-image higher-is-better trial (swap responders and
    # non-responders: rates 1 - p and beta parameters (b, a)), a symmetry of the model.
    low = BinaryEndpoint(0.3, better="lower")
    high = BinaryEndpoint(0.7)
    d_low = TrialDesign(low, BetaRates((30.0, 70.0), (20.0, 80.0)),
                        rule=PosteriorProbability(0.95, beyond=-0.02),
                        analysis_prior=BetaRates((2.0, 3.0), (1.0, 4.0)))
    d_high = TrialDesign(high, BetaRates((70.0, 30.0), (80.0, 20.0)),
                         rule=PosteriorProbability(0.95, beyond=0.02),
                         analysis_prior=BetaRates((3.0, 2.0), (4.0, 1.0)))
    a = evaluate(d_low, [30, 90])
    b = evaluate(d_high, [30, 90])
    np.testing.assert_allclose(a.assurance.values, b.assurance.values, rtol=0, atol=1e-9)
    np.testing.assert_allclose(a.power.values, b.power.values, rtol=0, atol=1e-9)


def test_design_file_with_beta_analysis_prior():
    raw = {
        "title": "Invented posterior-rule trial",
        "endpoint": {"type": "binary", "control_rate": 0.3, "scale": "odds_ratio"},
        "design_prior": {"family": "beta_rates", "control": [30, 70], "treatment": [45, 55]},
        "success": {"rule": "posterior_probability", "level": 0.95},
        "analysis_prior": {"family": "beta_rates", "control": [1, 1], "treatment": [1, 1]},
    }
    design = parse_design(raw).design
    assert isinstance(design.analysis_prior, BetaRates)
    assert design.analysis_prior.scale == "odds_ratio"  # taken from the endpoint
    ds = evaluate(design, [40])
    direct = TrialDesign(BinaryEndpoint(0.3, scale="odds_ratio"),
                         BetaRates((30, 70), (45, 55), "odds_ratio"),
                         rule=PosteriorProbability(0.95))
    assert float(ds.assurance[0]) == pytest.approx(float(evaluate(direct, [40]).assurance[0]),
                                                   abs=1e-15)


# ------------------------------------------------------------------------------------------
# input checks
# ------------------------------------------------------------------------------------------
def test_analysis_prior_checks():
    ep = BinaryEndpoint(0.3)
    single = BinaryEndpoint(0.3, layout="single_arm")
    prior = BetaRates((30, 70), (45, 55))
    rule = PosteriorProbability(0.975)
    with pytest.raises(AssuranceInputError, match="'analysis_prior'.*BetaRates"):
        evaluate(TrialDesign(ep, prior, rule=rule, analysis_prior=Normal(0.0, 0.5)), [20])
    # a normal analysis prior is harmless with a significance test, which does not use it
    evaluate(TrialDesign(ep, prior, rule=Significance(), analysis_prior=Normal(0.0, 0.5)),
             [20])
    with pytest.raises(AssuranceInputError, match="single BetaRates"):
        TrialDesign(ep, prior, rule=rule,
                    analysis_prior=Mixture([UNIFORM, BetaRates((2, 2), (2, 2))], [0.5, 0.5]))
    with pytest.raises(AssuranceInputError, match="reference rate 0.3"):
        TrialDesign(single, BetaRates(0.3, (4, 6)), rule=rule, analysis_prior=UNIFORM)
    with pytest.raises(AssuranceInputError, match="treatment rate a beta prior"):
        TrialDesign(single, BetaRates(0.3, (4, 6)), rule=rule,
                    analysis_prior=BetaRates(0.3, 0.4))
    with pytest.raises(AssuranceInputError, match="at least one arm"):
        TrialDesign(ep, prior, rule=rule, analysis_prior=BetaRates(0.3, 0.4))
    with pytest.raises(AssuranceInputError, match="'beyond'.*between -1 and 1"):
        evaluate(TrialDesign(ep, prior, rule=PosteriorProbability(0.9, beyond=1.2)), [20])
    with pytest.raises(AssuranceInputError, match="'beyond'.*outside"):
        evaluate(TrialDesign(single, BetaRates(0.3, (4, 6)),
                             rule=PosteriorProbability(0.9, beyond=0.75)), [20])
    with pytest.raises(AssuranceInputError, match="'continuity_correction'"):
        evaluate(TrialDesign(BinaryEndpoint(0.3, continuity_correction=True), prior,
                             rule=rule), [20])
    with pytest.raises(AssuranceInputError, match="'rule'.*PosteriorProbability"):
        evaluate(TrialDesign(ep, prior, rule=AllOf((rule, PosteriorProbability(0.5, 0.1)))),
                 [20])
    # the single-arm default is a uniform prior on the treatment rate against the reference
    calc = calculator(single, BetaRates(0.3, (4, 6)), rule, None)
    x = np.arange(21)
    region = special.betaincc(1 + x, 21 - x, 0.3) >= 0.975
    assert float(calc.power(0.2, np.array([20]), np.array([0]))[0]) == pytest.approx(
        float(stats.binom.pmf(x, 20, 0.5) @ region), abs=ENUM_TOL)
