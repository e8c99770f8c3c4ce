"""Exactness of the prior quadrature, finite results at extreme scales, and evaluate's output.

References computed inside the tests:

* ``P(d > c, delta > a)`` for a continuous prior: ``scipy.integrate.quad`` on the
  probability scale of the prior, ``int_{F(a)}^1 Phi((F^{-1}(u) - c) / se) du`` with scipy's
  own ``ppf`` and breakpoints where each threshold's step sits (``u = F(c + k se)``), run
  at ``epsabs = 1e-14``. It is a different variable and an adaptive rule, independent of
  the package's fixed Gauss-Legendre rule over the estimate's noise. The package's rule is
  held to 1e-9 (observed worst 2e-11 over these and nine further families).
* A window ``c +- 8.5 se`` narrower than the spacing of doubles near ``c``: the limit
  ``S(max(a, c))`` (as ``se -> 0`` the estimate equals the effect; common practice).
* Normal priors at extreme scales: scale invariance (every effect, SD and margin times
  the same constant leaves every probability unchanged; common practice) and the closed
  form ``Phi((m - c) / sqrt(v + se^2))`` of O'Hagan, Stevens & Campbell (2005).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

from assurance import (
    ContinuousEndpoint,
    FromScipy,
    Mixture,
    Normal,
    PointMass,
    ScaledInvChiSquare,
    Significance,
    StudentT,
    SurvivalEndpoint,
    TrialDesign,
    TruncatedNormal,
    Uniform,
    evaluate,
    evaluate_joint,
    evaluate_zones,
    planning,
)
from assurance._validation import MAX_DRAWS
from assurance.compute import prior_predictive as pp
from assurance.compute.prior_predictive import prob_estimate_above
from assurance.errors import AssuranceInputError
from assurance.rules.zones import GoConsiderStop

RULE_TOL = 1e-9


def quad_reference(dist, c, se, cut=None):
    """``int_{F(cut)}^1 Phi((F^{-1}(u) - c) / se) du`` by adaptive quad on the u scale."""
    u_low = 0.0 if cut is None else float(dist.cdf(cut))
    if u_low >= 1.0:
        return 0.0
    steps = dist.cdf(c + np.arange(-8.0, 8.5, 0.5) * se)
    levels = (1e-9, 1e-6, 1e-3, 0.5, 1 - 1e-3, 1 - 1e-6)
    # breakpoints within 1e-12 of either end are dropped: a step there (a standard error
    # much wider than the prior puts most steps at u = 1 - 1e-16 or so) would make panels a
    # few doubles wide, where ppf is rounding noise and quad reports bad behaviour; the
    # integrand is in [0, 1], so such a panel holds under 1e-12, far below RULE_TOL
    gap = 1e-12
    inner = sorted({float(u) for u in (*steps, *levels) if u_low + gap < u < 1.0 - gap})
    edges = [u_low, *inner, 1.0]

    def f(u):
        return special.ndtr((dist.ppf(u) - c) / se)

    return sum(integrate.quad(f, a, b, epsabs=1e-14, epsrel=1e-12, limit=400)[0]
               for a, b in zip(edges[:-1], edges[1:], strict=True) if b > a)


# (package prior, the same law in scipy); singular densities and heavy tails included
FAMILIES = [
    pytest.param(StudentT(3, 0.3, 0.2), stats.t(3, 0.3, 0.2), id="student_t3"),
    pytest.param(StudentT(1, 0.3, 0.2), stats.t(1, 0.3, 0.2), id="cauchy"),
    pytest.param(FromScipy(stats.logistic(1.0, 0.1)), stats.logistic(1.0, 0.1), id="logistic"),
    pytest.param(Uniform(-0.001, 2.0), stats.uniform(-0.001, 2.001), id="uniform"),
    pytest.param(TruncatedNormal(1.0, 0.3, lower=-0.2), stats.truncnorm(-4.0, np.inf, 1.0, 0.3),
                 id="truncated_normal"),
    pytest.param(FromScipy(stats.laplace(0.5, 0.4)), stats.laplace(0.5, 0.4), id="laplace"),
    pytest.param(FromScipy(stats.gamma(0.7, loc=-0.2)), stats.gamma(0.7, loc=-0.2),
                 id="gamma_infinite_density"),
    pytest.param(FromScipy(stats.beta(0.5, 0.5, loc=-1, scale=3)),
                 stats.beta(0.5, 0.5, loc=-1, scale=3), id="beta_u_shaped"),
]
# total sizes 1:1, from a step wider than the prior to a narrow step at huge n
SIZES = np.array([4, 40, 400, 10**6, 10**10, 10**14])


@pytest.mark.parametrize(("prior", "dist"), FAMILIES)
@pytest.mark.parametrize("sigma", [0.3, 30.0])
def test_fixed_rule_matches_quad_for_many_sizes_at_once(prior, dist, sigma):
    se = sigma * np.sqrt(4.0 / SIZES)
    c = stats.norm.isf(0.025) * se
    for cut in (None, 0.0, 0.25):
        got = prob_estimate_above(prior, c, se, effect_above=cut)
        for j in range(SIZES.size):
            ref = quad_reference(dist, c[j], se[j], cut)
            assert got[j] == pytest.approx(ref, abs=RULE_TOL), (SIZES[j], cut)


def test_many_thresholds_per_size_match_one_at_a_time_and_quad():
    # A t analysis asks for one threshold per node of the sample-SD rule at each size:
    # thresholds sharing a standard error share their nodes. The same values must come
    # out as when each threshold is asked alone, and agree with quad.
    prior, dist = StudentT(4, 0.4, 0.3), stats.t(4, 0.4, 0.3)
    se = np.array([0.9, 0.2, 0.01])
    ratio = np.linspace(0.3, 2.5, 12)[:, None]
    c = -0.1 + 2.2 * se[None, :] * ratio
    for cut in (None, 0.3):
        together = prob_estimate_above(prior, c, se[None, :], effect_above=cut)
        alone = np.array([[prob_estimate_above(prior, np.array([c[i, j]]), np.array([se[j]]),
                                               effect_above=cut)[0]
                           for j in range(se.size)] for i in range(ratio.size)])
        # the two node sets differ (shared vs own panels): both within the rule's accuracy
        np.testing.assert_allclose(together, alone, rtol=0, atol=2 * RULE_TOL)
        for i, j in ((0, 0), (6, 1), (11, 2)):
            assert together[i, j] == pytest.approx(quad_reference(dist, c[i, j], se[j], cut),
                                                   abs=RULE_TOL)


def test_thresholds_far_apart_get_their_own_nodes():
    # Thresholds 10,000 standard errors apart at one standard error: one shared grid would
    # need thousands of panels, so each threshold gets its own (the _MAX_PANELS split).
    prior, dist = FromScipy(stats.logistic(0.0, 1.0)), stats.logistic(0.0, 1.0)
    se = 1e-3
    c = np.array([[-5.0], [0.0], [5.0]])
    got = prob_estimate_above(prior, c, np.array([[se]]))
    assert (c.max() - c.min()) / se > pp._MAX_PANELS * pp._STEP
    for i in range(3):
        assert got[i, 0] == pytest.approx(quad_reference(dist, c[i, 0], se), abs=RULE_TOL)


@pytest.mark.parametrize("se", [1e-15, 1e-17, 1e-30])
def test_standard_error_below_the_spacing_of_doubles(se):
    # Near c = 1 doubles are 2.2e-16 apart: the nodes collapse onto a few numbers (1e-15)
    # or one (1e-17, 1e-30). The result is the limit S(max(a, c)) to within f * 8.5 se.
    prior, dist = StudentT(5, 0.8, 0.5), stats.t(5, 0.8, 0.5)
    c = np.array([1.0, 0.7])
    for cut in (None, 0.9):
        got = prob_estimate_above(prior, c, np.full(2, se), effect_above=cut)
        limit = dist.sf(c if cut is None else np.maximum(c, cut))
        np.testing.assert_allclose(got, limit, rtol=0, atol=1e-12)


def test_mixture_with_an_atom_at_huge_n_against_quad():
    # Atoms are exact; the Student t part goes through the fixed rule; n = 1e12 makes the
    # step of the power curve 1e-6 wide.
    prior = Mixture([PointMass(0.0), StudentT(3, 0.5, 0.3)], [0.25, 0.75])
    design = TrialDesign(ContinuousEndpoint(1.0, analysis="z"), prior, relevant_effect=0.4)
    n = 10**12
    ds = evaluate(design, [40, n])
    se = math.sqrt(4 / n)
    c = stats.norm.isf(0.025) * se
    dist = stats.t(3, 0.5, 0.3)
    ref = 0.25 * stats.norm.sf(c / se) + 0.75 * quad_reference(dist, c, se)
    ref_rel = 0.75 * quad_reference(dist, c, se, 0.4)
    assert float(ds.assurance[1]) == pytest.approx(ref, abs=RULE_TOL)
    assert float(ds.prob_success_and_relevant[1]) == pytest.approx(ref_rel, abs=RULE_TOL)


# ------------------------------------------------------------------------------------------
# never a NaN or infinity without an error
# ------------------------------------------------------------------------------------------
def test_thresholds_that_are_not_numbers_give_nan_for_the_caller():
    c = np.array([0.1, np.inf, 0.2, 0.3])
    s = np.array([0.1, 0.1, np.nan, 0.0])
    for prior in (Normal(0.5, 1.0), PointMass(0.2), StudentT(4, 0.0, 1.0)):
        for cut in (None, 0.0):
            got = prob_estimate_above(prior, c, s, effect_above=cut)
            assert np.isfinite(got[0]) and np.isnan(got[1:]).all()


@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize("prior", [Normal(1.0, 1.0), StudentT(4, 1.0, 1.0),
                                   Mixture([PointMass(0.0), Normal(1.0, 1.0)], [0.3, 0.7])],
                         ids=["normal", "student_t", "mixture"])
def test_overflowing_sd_is_an_error_naming_sigma(analysis, prior):
    design = TrialDesign(ContinuousEndpoint(1e308, analysis=analysis), prior)
    with pytest.raises(AssuranceInputError,
                       match=r"The 'sigma' parameter of ContinuousEndpoint must be a number "
                             r"between 1e-150 and 1e\+150 in size.*Got 1e\+308 instead"):
        evaluate(design, [3, 10, 1000])


@pytest.mark.parametrize(("design", "words"), [
    (TrialDesign(ContinuousEndpoint(1.0), Normal(0.5, 1e-200)),
     r"'design_prior' parameter of TrialDesign must have every number at most 1e\+150 in "
     r"size and every scale at least 1e-150.*Got normal\(mean=0.5, sd=1e-200\) instead"),
    (TrialDesign(ContinuousEndpoint(1e-160), Normal(0.5, 1.0)), "'sigma' parameter"),
    (TrialDesign(ContinuousEndpoint(1.0), Normal(0.5, 1.0),
                 rule=Significance(0.025, margin=1e200)), "'margin' parameter of Significance"),
    (TrialDesign(ContinuousEndpoint(1.0), Normal(0.5, 1.0), relevant_effect=0.2,
                 power_effects=(1e200,)), "'power_effects' parameter of TrialDesign"),
    (TrialDesign(ContinuousEndpoint(1.0), StudentT(4, 0.5, 1e160)), "'design_prior' parameter"),
], ids=["tiny-prior-sd", "tiny-sigma", "huge-margin", "huge-power-effect",
        "huge-prior-scale"])
def test_numbers_out_of_range_are_named_before_computing(design, words):
    # Locations may be tiny (a mean of 1e-200 is a mean of 0); scales may not.
    for call in (lambda: evaluate(design, [10, 100]), lambda: planning.solve_sample_size(
            design, 0.5)):
        with pytest.raises(AssuranceInputError, match=words):
            call()
    tiny_mean = TrialDesign(ContinuousEndpoint(1.0, analysis="z"), Normal(1e-200, 1.0))
    ds = evaluate(tiny_mean, [100])  # P(d > c) with m = 0 (O'Hagan et al. 2005)
    se = math.sqrt(2 / 50)
    assert float(ds.assurance[0]) == pytest.approx(
        stats.norm.sf(stats.norm.isf(0.025) * se / math.hypot(1.0, se)), abs=1e-12)


def test_differences_that_overflow_are_still_computed():
    # Below evaluate's range check the arithmetic itself stays right: prior N(-1e308,
    # 1e308^2) and threshold 1e308 (c - m = 2e308 overflows) give, by scale invariance,
    # P(d > 1) for d ~ N(-1, 1 + (1e-308)^2) = Phi(-2) (O'Hagan et al. 2005 closed form).
    prior = Normal(-1e308, 1e308)
    c, se = np.array([1e308, 0.0]), np.array([1.0, 1.0])
    got = prob_estimate_above(prior, c, se)
    np.testing.assert_allclose(got, [stats.norm.sf(2.0), stats.norm.sf(1.0)], rtol=0,
                               atol=1e-12)
    # effect above 0: since c >= 0 is needed too, the joint equals P(delta > max(c, 0))
    joint = prob_estimate_above(prior, c, se, effect_above=0.0)
    np.testing.assert_allclose(joint, [stats.norm.sf(2.0), stats.norm.sf(1.0)], rtol=0,
                               atol=1e-12)
    # a point mass 2e308 below the threshold: the power is 0, not NaN
    assert prob_estimate_above(PointMass(-1e308), c[:1], np.array([1e308]))[0] == \
        pytest.approx(stats.norm.sf(2.0), abs=1e-12)
    # squares that underflow: N(0, (1e-300)^2), se 1e-300, c = 1.96e-300 -> Phi(-1.96/sqrt 2)
    tiny = prob_estimate_above(Normal(0.0, 1e-300), np.array([1.96e-300]), np.array([1e-300]))
    assert tiny[0] == pytest.approx(stats.norm.sf(1.96 / math.sqrt(2)), abs=1e-12)


@pytest.mark.parametrize("scale", [1e-140, 1e-70, 1e70, 1e140])
@pytest.mark.parametrize("analysis", ["z", "t"])
def test_normal_prior_at_extreme_scales_matches_the_unit_scale(scale, analysis):
    # Every effect, SD and margin times the same constant: the same probabilities.
    def design(k):
        return TrialDesign(ContinuousEndpoint(2.0 * k, analysis=analysis),
                           Normal(0.5 * k, 1.0 * k), rule=Significance(0.025, margin=0.1 * k),
                           relevant_effect=0.3 * k, power_effects=(0.2 * k,))

    sizes = [4, 40, 400, 10**8]
    ref, got = evaluate(design(1.0), sizes), evaluate(design(scale), sizes)
    for name in ("assurance", "power", "type_one_error", "prob_success_and_benefit",
                 "prob_success_and_relevant", "conditional_assurance", "prob_miss_relevant"):
        np.testing.assert_allclose(got[name].values, ref[name].values, rtol=0, atol=1e-9,
                                   err_msg=name)
    np.testing.assert_allclose(got.power_curve.values, ref.power_curve.values, rtol=0,
                               atol=1e-9)


# ------------------------------------------------------------------------------------------
# Monte Carlo draws have an upper bound
# ------------------------------------------------------------------------------------------
def test_more_than_max_draws_are_refused_everywhere():
    design = TrialDesign(ContinuousEndpoint(8.0), StudentT(8, 4.0, 2.0),
                         sigma_prior=ScaledInvChiSquare(12.0, 8.0))
    too_many = MAX_DRAWS + 1
    calls = {
        "evaluate": lambda: evaluate(design, [100], draws=too_many),
        "evaluate_zones": lambda: evaluate_zones(design, GoConsiderStop(2.0, 4.0), [100],
                                                 draws=too_many),
        "evaluate_joint": lambda: evaluate_joint(design, design, [100], correlation=0.3,
                                                 draws=too_many),
    }
    for owner, call in calls.items():
        with pytest.raises(AssuranceInputError,
                           match=rf"'draws' parameter of {owner} must be a whole number in "
                                 rf"\[100, 2e\+06\]. Got {too_many} instead"):
            call()


# ------------------------------------------------------------------------------------------
# evaluate's Dataset is the one the public xarray constructor builds
# ------------------------------------------------------------------------------------------
DATASET_DESIGNS = {
    "normal-relevant": (TrialDesign(ContinuousEndpoint(10.0, analysis="z"), Normal(4.0, 3.0),
                                    relevant_effect=3.0), [20, 40, 400]),
    "normal-plain-t": (TrialDesign(ContinuousEndpoint(10.0, allocation=2.0),
                                   Normal(4.0, 3.0)), [30, 90]),
    "monte-carlo": (TrialDesign(ContinuousEndpoint(8.0), StudentT(8, 4.0, 2.0),
                                relevant_effect=3.0, sigma_prior=ScaledInvChiSquare(12, 8.0)),
                    [100, 200]),
    "survival-extra-coords": (TrialDesign(SurvivalEndpoint(
        assumed_hazard_ratio=0.75, control_median=12.0, accrual_time=24.0,
        follow_up_time=12.0), Normal(math.log(0.8), 0.15)), [200, 400, 800]),
}


@pytest.mark.parametrize("name", list(DATASET_DESIGNS))
def test_dataset_equals_the_public_constructors(name, monkeypatch):
    design, sizes = DATASET_DESIGNS[name]
    seen = {}
    build = planning._dataset

    def spy(data_vars, coords, attrs):
        seen["args"] = (data_vars, coords, attrs)
        return build(data_vars, coords, attrs)

    monkeypatch.setattr(planning, "_dataset", spy)
    ds = evaluate(design, sizes, draws=500)
    public = planning._dataset_public(*seen["args"])
    assert ds.identical(public)
    assert repr(ds) == repr(public)  # same order of variables, coordinates and dimensions
    assert list(ds.variables) == list(public.variables)
    assert dict(ds.sizes) == dict(public.sizes) and list(ds.dims) == list(public.dims)
    assert set(ds.xindexes) == set(public.xindexes)
    for key in ds.xindexes:
        mine, theirs = ds.xindexes[key], public.xindexes[key]
        assert type(mine) is type(theirs) and mine.equals(theirs)
        assert mine.coord_dtype == theirs.coord_dtype
        assert mine.index.name == theirs.index.name
    for key, var in ds.variables.items():
        assert var.encoding == public.variables[key].encoding
        assert type(var) is type(public.variables[key])
    # a second evaluation on the same grid shares the immutable index, and stays correct
    again = evaluate(design, sizes, draws=500)
    assert again.identical(ds)


# ------------------------------------------------------------------------------------------
# the benefit-scale prior is built once per design
# ------------------------------------------------------------------------------------------
class CountingNormal(Normal):
    negations = 0

    def negated(self):
        CountingNormal.negations += 1
        return super().negated()


def test_lower_is_better_builds_the_benefit_prior_once():
    CountingNormal.negations = 0
    design = TrialDesign(ContinuousEndpoint(12.0, better="lower"), CountingNormal(-5.0, 2.5),
                         relevant_effect=-3.0)
    for _ in range(3):
        evaluate(design, [50, 100, 200])
    planning.solve_sample_size(design, 0.5)
    assert CountingNormal.negations == 1
    assert design.benefit_prior is design.benefit_prior
    assert design.benefit_rule is design.benefit_rule
    # the cache is not part of the design: equal designs compare equal, replace starts afresh
    import dataclasses

    other = dataclasses.replace(design, title="Same numbers")
    assert other.benefit_prior is not design.benefit_prior
    assert dataclasses.replace(design) == design
    assert CountingNormal.negations == 3  # one per new design (replace built two)
