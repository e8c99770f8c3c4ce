"""Invariants of power and assurance, checked with hypothesis over random designs.

Every bound here is a fact of probability, not a value from this package:

* probabilities lie in [0, 1]; P(A and B) <= P(A); P(success and relevant) =
  P(relevant) * P(success | relevant);
* with a point-mass prior assurance is classical power (O'Hagan, Stevens & Campbell 2005);
* the test has size alpha: P(success | delta <= -margin) <= alpha (common practice), hence
  assurance <= ceiling + alpha (1 - ceiling); with a minimum observed effect e above the
  null, P(success | delta <= e) <= P(d > e | delta <= e) <= 1/2;
* for a normal prior whose mean is at or above the lowest passable effect L, each
  threshold c(n) >= L gives Phi((m - c)/tau) <= Phi((m - L)/sd), so assurance <= ceiling;
* as n grows the threshold tends to L, so assurance tends to the ceiling.

Tolerance 1e-6 on comparisons that go through the package's quadratures (the fixed rule over
the prior, about 1e-11, and the sample-SD rule, observed error <= 4e-7).

At extreme scales two further facts hold: multiplying every effect, SD and margin by the
same constant leaves every probability unchanged (scale invariance, common practice), and
whatever the numbers, evaluate returns finite probabilities in [0, 1] or raises
AssuranceInputError naming a parameter.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from assurance import (
    ContinuousEndpoint,
    Mixture,
    Normal,
    PointMass,
    Significance,
    StudentT,
    TrialDesign,
    TruncatedNormal,
    Uniform,
    evaluate,
)
from assurance.errors import AssuranceInputError

TOL = 1e-6
SETTINGS = settings(max_examples=50, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])
FEW = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])

finite = dict(allow_nan=False, allow_infinity=False)


@st.composite
def priors(draw, continuous_only=False, cheap=False, closed_form=False):
    """Design priors on the natural scale (effects of order 0-10)."""
    kinds = ["normal", "uniform", "mixture_atom", "point_mass", "student_t", "truncnorm"]
    if continuous_only:
        kinds = ["normal", "uniform", "student_t", "truncnorm"]
    if cheap:
        kinds = [k for k in kinds if k not in ("student_t", "truncnorm")]
    if closed_form:  # no adaptive quadrature: normal parts and point masses only
        kinds = ["normal", "mixture_atom", "point_mass"]
    kind = draw(st.sampled_from(kinds))
    # exact values such as 0 (prior mean = cut = threshold) are deliberately reachable: they
    # once hit a branch-point bug of the bivariate normal helper
    mean = draw(st.one_of(st.sampled_from([0.0, 1.0, -0.5]), st.floats(-3.0, 8.0, **finite)))
    sd = draw(st.floats(0.1, 4.0, **finite))
    if kind == "normal":
        return Normal(mean, sd)
    if kind == "uniform":
        return Uniform(mean - sd, mean + sd)
    if kind == "student_t":
        return StudentT(draw(st.floats(3.0, 30.0, **finite)), mean, sd)
    if kind == "truncnorm":
        return TruncatedNormal(mean, sd, lower=mean - draw(st.floats(0.0, 2.0, **finite)) * sd)
    atom = draw(st.sampled_from([0.0, 0.0, -1.0, 2.0]))
    if kind == "point_mass":
        return PointMass(draw(st.sampled_from([atom, mean])))
    w = draw(st.floats(0.05, 0.95, **finite))
    return Mixture([PointMass(atom), Normal(mean, sd)], [w, 1.0 - w])


@st.composite
def designs(draw, continuous_only=False, cheap=False, with_relevant=True, closed_form=False):
    layout = draw(st.sampled_from(["two_arm", "two_arm", "single_arm"]))
    analysis = draw(st.sampled_from(["z", "t"]))
    endpoint = ContinuousEndpoint(
        sigma=draw(st.floats(0.5, 20.0, **finite)),
        layout=layout,
        allocation=draw(st.floats(0.3, 3.0, **finite)),
        analysis=analysis,
        better=draw(st.sampled_from(["higher", "lower"])),
    )
    margin = draw(st.sampled_from([0.0, 0.0, 0.5, 2.0]))
    min_est = draw(st.sampled_from([None, None, 0.0, 1.0, -0.5]))
    rule = Significance(alpha=draw(st.sampled_from([0.01, 0.025, 0.05, 0.1])),
                        sided=draw(st.sampled_from(["one", "two"])), margin=margin,
                        min_estimate=min_est)
    prior = draw(priors(continuous_only=continuous_only, cheap=cheap, closed_form=closed_form))
    relevant = None
    if with_relevant:
        q = draw(st.floats(0.05, 0.9, **finite))
        relevant = prior.ppf(q)  # leaves at least 1 - q of the prior at or above it
    if endpoint.better == "lower":  # same beliefs, read on a scale where lower is better
        prior = prior.negated()
        relevant = None if relevant is None else -relevant
        rule = rule.flipped()
    return TrialDesign(endpoint, prior, rule=rule, relevant_effect=relevant)


SIZES = [4, 10, 31, 100, 316, 1000, 10_000]


def _benefit_lowest(design):
    return design.benefit_rule.lowest_passable_effect()


@SETTINGS
@given(designs())
def test_probabilities_and_decomposition_are_consistent(design):
    ds = evaluate(design, SIZES)
    a = ds.assurance.values
    for name in ("assurance", "power", "prob_success_and_benefit", "prob_success_and_relevant",
                 "conditional_assurance", "prob_miss_relevant"):
        v = ds[name].values
        assert np.all(np.isfinite(v)), name
        assert np.all((v >= 0.0) & (v <= 1.0)), name
    ceiling = float(ds.ceiling)
    p_rel, p_ben = float(ds.prob_relevant), float(ds.prob_benefit)
    assert 0.0 <= ceiling <= 1.0 and 0.0 < p_rel <= 1.0
    joint_b = ds.prob_success_and_benefit.values
    joint_r = ds.prob_success_and_relevant.values
    # P(A and B) <= P(A), P(A and B) <= P(B)
    assert np.all(joint_b <= a + TOL) and np.all(joint_b <= p_ben + TOL)
    assert np.all(joint_r <= a + TOL) and np.all(joint_r <= p_rel + TOL)
    # conditional = joint / P(relevant); miss = P(relevant) - joint
    np.testing.assert_allclose(ds.conditional_assurance.values * p_rel, joint_r, rtol=0,
                               atol=TOL)
    np.testing.assert_allclose(ds.prob_miss_relevant.values + joint_r, p_rel, rtol=0, atol=TOL)
    # {effect >= relevant} lies inside {effect > 0} when relevant > 0 (benefit scale)
    rel_b = float(design.endpoint.to_benefit(design.relevant_effect))
    if rel_b > 0:
        assert np.all(joint_r <= joint_b + TOL)
    rule = design.benefit_rule
    alpha1 = rule.one_sided_alpha
    # size of the test: P(success and no benefit) <= alpha P(no benefit) when margin = 0
    if rule.margin == 0:
        assert np.all(a - joint_b <= alpha1 * (1 - p_ben) + TOL)
    # assurance above the ceiling only by false positives at effects <= L
    extra = alpha1 if rule.min_estimate is None or rule.min_estimate <= -rule.margin else 0.5
    assert np.all(a <= ceiling + extra * (1 - ceiling) + TOL)


@SETTINGS
@given(designs(cheap=True, with_relevant=False), st.data())
def test_normal_prior_centred_in_passable_region_never_passes_ceiling(design, data):
    lowest = _benefit_lowest(design)
    m = lowest + data.draw(st.floats(0.0, 6.0, **finite))
    sd = data.draw(st.floats(0.05, 5.0, **finite))
    prior = Normal(m, sd) if design.endpoint.better == "higher" else Normal(-m, sd)
    d = TrialDesign(design.endpoint, prior, rule=design.rule)
    ds = evaluate(d, SIZES)
    assert np.all(ds.assurance.values <= float(ds.ceiling) + 1e-12)


@FEW
@given(designs(closed_form=True, with_relevant=False))
def test_assurance_tends_to_ceiling(design):
    # se at n = 1e14 is below 1e-5: the threshold sits within ~1e-4 of L and the estimate's
    # noise is negligible, so with prior densities <= 4 the gap is below 1e-3. A point mass
    # within 1e-4 of L (but not at it) is still short of its limit at any finite n: skip.
    lowest = _benefit_lowest(design)
    assume(all(loc == lowest or abs(loc - lowest) > 1e-4
               for loc, _ in design.benefit_prior.atoms()))
    ds = evaluate(design, [10**14])
    assert float(ds.assurance[0]) == pytest.approx(float(ds.ceiling), abs=1e-3)


@FEW
@given(designs(continuous_only=True, with_relevant=False))
def test_assurance_tends_to_ceiling_through_the_fixed_rule(design):
    # The same limit for the families integrated by the fixed rule (uniform, Student t,
    # truncated normal; z analysis: a t analysis of these goes through the sample-SD
    # quadrature first). The step of the power curve at n = 1e14 is 1e-5 wide; the rule's
    # panels follow it at every size, so it is never missed.
    ep = design.endpoint
    z = ContinuousEndpoint(ep.sigma, layout=ep.layout, allocation=ep.allocation, analysis="z",
                           better=ep.better)
    d = TrialDesign(z, design.design_prior, rule=design.rule)
    ds = evaluate(d, [10**14])
    assert float(ds.assurance[0]) == pytest.approx(float(ds.ceiling), abs=1e-3)


SCALED_PRIORS = ["normal", "mixture_atom", "point_mass", "uniform", "student_t"]


@st.composite
def scaled_pairs(draw):
    """A design at unit scale and the same design with every effect-scale number times
    10^k, |k| <= 140 (the whole allowed range of sizes of numbers, 1e-150 to 1e150)."""
    k = 10.0 ** draw(st.integers(-140, 140))
    analysis = draw(st.sampled_from(["z", "t"]))
    kind = draw(st.sampled_from(SCALED_PRIORS if analysis == "z" else SCALED_PRIORS[:3]))
    sigma = draw(st.floats(0.5, 20.0, **finite))
    # no tiny nonzero mean: times 1e-140 it would underflow to 0, a different design for
    # "effect > 0" (an atom at 0 is not a benefit, one at 1e-309 is)
    mean = draw(st.one_of(st.just(0.0), st.floats(1e-3, 8.0), st.floats(-3.0, -1e-3)))
    sd = draw(st.floats(0.1, 4.0, **finite))
    margin = draw(st.sampled_from([0.0, 0.5, 2.0]))
    min_est = draw(st.sampled_from([None, 0.0, 1.0]))
    alpha = draw(st.sampled_from([0.01, 0.025, 0.1]))
    w = draw(st.floats(0.05, 0.95, **finite))

    def build(c):
        prior = {"normal": lambda: Normal(mean * c, sd * c),
                 "mixture_atom": lambda: Mixture([PointMass(0.0), Normal(mean * c, sd * c)],
                                                 [w, 1.0 - w]),
                 "point_mass": lambda: PointMass(mean * c),
                 "uniform": lambda: Uniform((mean - sd) * c, (mean + sd) * c),
                 "student_t": lambda: StudentT(5.0, mean * c, sd * c)}[kind]()
        rule = Significance(alpha, margin=margin * c,
                            min_estimate=None if min_est is None else min_est * c)
        return TrialDesign(ContinuousEndpoint(sigma * c, analysis=analysis), prior, rule=rule,
                           assumed_effect=(mean + 0.5) * c)

    return build(1.0), build(k)


@SETTINGS
@given(scaled_pairs())
def test_probabilities_do_not_depend_on_the_unit(pair):
    unit, scaled = pair
    a, b = evaluate(unit, SIZES), evaluate(scaled, SIZES)
    for name in ("assurance", "power", "type_one_error", "prob_success_and_benefit"):
        np.testing.assert_allclose(b[name].values, a[name].values, rtol=0, atol=1e-9,
                                   err_msg=name)
    assert float(b.ceiling) == pytest.approx(float(a.ceiling), abs=1e-12)


EXPONENTS = st.one_of(st.integers(-170, 170), st.sampled_from([-330, -320, -308, 308, 310]))


@SETTINGS
@given(EXPONENTS, EXPONENTS, EXPONENTS,
       st.sampled_from(["z", "t"]), st.sampled_from(["normal", "mixture_atom", "point_mass"]),
       st.sampled_from([3, 1000, 10**15]))
def test_any_numbers_give_finite_probabilities_or_a_named_error(a, b, c, analysis, kind, n):
    # SD, prior SD and prior mean each anywhere from 1e-320 to 1e320 (beyond the largest
    # double they are refused when built): evaluate either refuses, naming a parameter, or
    # returns probabilities that are finite and in [0, 1].
    sigma, sd, mean = (float(f"1e{e}") for e in (a, b, c))  # 1e309 reads as inf
    mean = -mean
    try:
        endpoint = ContinuousEndpoint(sigma, analysis=analysis)
        prior = {"normal": lambda: Normal(mean, sd),
                 "mixture_atom": lambda: Mixture([PointMass(0.0), Normal(mean, sd)], [0.3, 0.7]),
                 "point_mass": lambda: PointMass(mean)}[kind]()
        design = TrialDesign(endpoint, prior)
    except AssuranceInputError:
        return  # refused when built (zero, subnormal or infinite numbers)
    try:
        ds = evaluate(design, [n])
    except AssuranceInputError as exc:
        assert "parameter of" in str(exc) and "Got" in str(exc)
        return
    for name in ("assurance", "power", "type_one_error", "prob_success_and_benefit", "ceiling",
                 "prob_benefit"):
        v = ds[name].values
        assert np.all(np.isfinite(v)) and np.all((v >= 0) & (v <= 1)), name


@pytest.mark.parametrize(("sigma", "sd", "mean"),
                         [(1e10, 1e-100, -1e100), (1e100, 1e-100, -1e-300)])
def test_extreme_scales_raise_no_numpy_warning(sigma, sd, mean):
    # a prior 1e110 times narrower than the data's SD once overflowed a square with a
    # RuntimeWarning (the user saw it); the answer must come without one, finite
    design = TrialDesign(ContinuousEndpoint(sigma, analysis="t"), Normal(mean, sd))
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        ds = evaluate(design, [3, 1000])
    for name in ("assurance", "power", "prob_success_and_benefit"):
        v = ds[name].values
        assert np.all(np.isfinite(v)) and np.all((v >= 0) & (v <= 1)), name


@SETTINGS
@given(designs(cheap=True, with_relevant=False), st.floats(-3.0, 8.0, **finite))
def test_point_mass_prior_gives_power(design, value):
    # assurance under a point mass at x is classical power at x (O'Hagan et al. 2005)
    d = TrialDesign(design.endpoint, PointMass(value), rule=design.rule)
    ds = evaluate(d, SIZES)
    np.testing.assert_allclose(ds.assurance.values, ds.power.values, rtol=0, atol=1e-12)
    # and equals the power curve of any design at that effect
    other = TrialDesign(design.endpoint, Normal(value + 1.0, 2.0), rule=design.rule,
                        power_effects=(value,))
    curve = evaluate(other, SIZES).power_curve.sel(effect=value).values
    np.testing.assert_allclose(ds.assurance.values, curve, rtol=0, atol=1e-12)


@SETTINGS
@given(designs(cheap=True, with_relevant=False), st.floats(-3.0, 8.0, **finite))
def test_prior_sd_to_zero_gives_power(design, value):
    # N(x, sd^2) with sd = 1e-9 sigma: the closed form moves by O(sd / se) ~ 1e-9.
    sd = 1e-9 * design.endpoint.sigma
    d = TrialDesign(design.endpoint, Normal(value, sd), rule=design.rule)
    ds = evaluate(d, SIZES)
    np.testing.assert_allclose(ds.assurance.values, ds.power.values, rtol=0, atol=1e-7)


@SETTINGS
@given(designs(cheap=True))
def test_lower_is_better_mirrors_higher_is_better(design):
    # Pure bookkeeping of signs, so the cheap prior families suffice.
    ep = design.endpoint
    flip = "lower" if ep.better == "higher" else "higher"
    mirror_ep = ContinuousEndpoint(ep.sigma, layout=ep.layout, allocation=ep.allocation,
                                   analysis=ep.analysis, better=flip)
    mirror = TrialDesign(mirror_ep, design.design_prior.negated(), rule=design.rule.flipped(),
                         assumed_effect=-design.assumed_effect,
                         relevant_effect=-design.relevant_effect)
    a, b = evaluate(design, SIZES), evaluate(mirror, SIZES)
    for name in ("power", "assurance", "prob_success_and_benefit", "prob_success_and_relevant",
                 "conditional_assurance", "prob_miss_relevant"):
        np.testing.assert_allclose(a[name].values, b[name].values, rtol=0, atol=1e-12)
    for name in ("ceiling", "prob_benefit", "prob_relevant"):
        assert float(a[name]) == pytest.approx(float(b[name]), abs=1e-12)
    np.testing.assert_allclose(a.power_curve.values, b.power_curve.values[::-1], rtol=0,
                               atol=1e-12)


@FEW
@given(designs(cheap=True, with_relevant=False), st.integers(2, 5000))
def test_power_increases_with_n_above_the_passable_region(design, n):
    # Power at an effect beyond L rises with n (the threshold falls towards L and the noise
    # shrinks; common practice) -- compare n and 4n on the same allocation.
    lowest = _benefit_lowest(design)
    effect_b = lowest + 0.5 * design.endpoint.sigma
    effect = float(design.endpoint.to_benefit(effect_b))  # benefit -> natural (sign flip)
    d = TrialDesign(design.endpoint, PointMass(effect), rule=design.rule)
    smallest = design.endpoint.smallest_total
    ds = evaluate(d, [max(n, smallest), 4 * max(n, smallest)])
    assert float(ds.power[1]) >= float(ds.power[0]) - 1e-12


@FEW
@given(st.floats(-2.0, 4.0, **finite), st.floats(0.1, 3.0, **finite),
       st.floats(0.05, 0.95, **finite))
def test_mixture_assurance_is_weighted_average(mean, sd, w):
    # assurance is linear in the prior (it is an expectation over the prior)
    ep = ContinuousEndpoint(2.0, analysis="t")
    parts = [Normal(mean, sd), Uniform(mean - 1.0, mean + 2.0)]
    mix = TrialDesign(ep, Mixture(parts, [w, 1 - w]))
    a0 = evaluate(TrialDesign(ep, parts[0]), SIZES).assurance.values
    a1 = evaluate(TrialDesign(ep, parts[1]), SIZES).assurance.values
    np.testing.assert_allclose(evaluate(mix, SIZES).assurance.values, w * a0 + (1 - w) * a1,
                               rtol=0, atol=TOL)


def test_strategies_cover_both_directions_and_atoms():
    # guard against a strategy that silently stops producing the interesting cases
    seen = set()

    @settings(max_examples=60, deadline=None, database=None)
    @given(designs(cheap=True))
    def collect(design):
        seen.add(design.endpoint.better)
        seen.add("atom" if design.design_prior.atoms() else "continuous")
        seen.add(design.endpoint.analysis)

    collect()
    assert {"higher", "lower", "atom", "continuous", "z", "t"} <= seen
