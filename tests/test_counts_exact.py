"""Exact conditional test for two Poisson rates (CountEndpoint(test="exact_conditional")).

References used below, each computed inside the test (never copied from the package):

* The conditional test of two Poisson means (Przyborowski & Wilenski 1940, Biometrika
  31:313-323; common practice): given the total ``S``, the treatment count is
  ``Binomial(S, p)``, ``p = n_t mu_t / (n_t mu_t + n_c mu_c)``. Its exact power is written
  out here with ``scipy.stats.poisson.pmf`` and ``scipy.stats.binom.cdf``, each critical
  count found from the full binomial cdf at that ``S`` (no shortcut shared with the
  package), summed over ``S`` up to ``L + 40 sqrt(L) + 60`` (the Poisson mass beyond is far
  below 1e-13). Tolerance 1e-10 (the package leaves out Poisson mass below 1e-13).
* The test's decision against ``statsmodels.stats.rates.test_poisson_2indep(...,
  method="exact-cond")`` (statsmodels 0.14): reject iff its one-sided p-value <= alpha.
* A simulation of the test written here with numpy (Poisson totals, decision by
  ``scipy.stats.binom.cdf``): 20,000 trials, within 4 Monte Carlo standard errors.
* Assurance = integral of power over the design prior (O'Hagan, Stevens & Campbell 2005,
  Pharmaceutical Statistics 4:187-201), by ``scipy.integrate.quad`` of the direct power
  above; tolerance 1e-7.
* No published table of this test's power could be checked here, so none is quoted.
"""

from __future__ import annotations

import functools
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats
from statsmodels.stats import rates as sm_rates

from assurance import Normal, PointMass, Significance, TrialDesign, evaluate
from assurance.compute.poisson_exact import critical_counts
from assurance.endpoints.counts import CountEndpoint, simulate_rejection_rate
from assurance.errors import AssuranceInputError
from assurance.rules.posterior import PosteriorProbability

ALPHA = 0.025


@functools.cache
def rejection_bounds(n_t, n_c, rr0, alpha, better, min_rr, s_max):
    """Per total s = 0..s_max: the rejection region {x_t <= b_s} (lower better) or
    {x_t >= b_s} (higher better), found from the full binomial tail at each s
    (scipy.stats.binom), with a check that the region is of that one-sided shape."""
    p0 = n_t * rr0 / (n_t * rr0 + n_c)
    bounds = np.empty(s_max + 1)
    for s in range(s_max + 1):
        x = np.arange(s + 1)
        if better == "lower":
            tail = stats.binom.cdf(x, s, p0)              # P(X_t <= x)
        else:
            tail = stats.binom.sf(x - 1, s, p0)           # P(X_t >= x)
        reject = tail <= alpha
        if min_rr is not None:
            # observed rate ratio (x / n_t) / ((s - x) / n_c) against min_rr = num / den,
            # in integers so that a tie (ratio exactly min_rr: not passed) is exact
            num, den = min_rr.numerator, min_rr.denominator
            lhs, rhs = x * n_c * den, num * (s - x) * n_t
            reject &= (lhs < rhs) if better == "lower" else (lhs > rhs)
        hits = np.nonzero(reject)[0]
        if better == "lower":
            bounds[s] = hits.max() if hits.size else -1
            assert np.array_equal(hits, np.arange(hits.size))
        else:
            bounds[s] = hits.min() if hits.size else s + 1
            assert np.array_equal(hits, np.arange(s + 1 - hits.size, s + 1))
    return bounds


def direct_power(rr, lam_c, t, n_t, n_c, *, rr0=1.0, alpha=ALPHA, better="lower",
                 min_rr=None):
    """Exact power by enumeration with scipy.stats (see the module notes).

    ``min_rr`` (a Fraction): the observed rate ratio must also be better than this.
    """
    mu_t, mu_c = n_t * lam_c * rr * t, n_c * lam_c * t
    total = mu_t + mu_c
    p = mu_t / total
    s_max = int(total + 40 * math.sqrt(total) + 60)
    s_max = 2 ** math.ceil(math.log2(s_max))       # fewer distinct cached tables
    b = rejection_bounds(int(n_t), int(n_c), rr0, alpha, better, min_rr, s_max)
    s = np.arange(s_max + 1)
    if better == "lower":
        cond = stats.binom.cdf(b, s, p)
    else:
        cond = stats.binom.sf(b - 1, s, p)
    return float(np.sum(stats.poisson.pmf(s, total) * cond))


def package_power(ep, rr, n_total, rule=None):
    kw = {} if rule is None else {"rule": rule}
    ds = evaluate(TrialDesign(ep, PointMass(math.log(rr)), **kw), n_total)
    return ds, ds.power.values


# ------------------------------------------------------------------------------------------
# exact power against direct enumeration
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("lam_c, t, rr, r, sizes", [
    (0.8, 1.0, 0.7, 1.0, [20, 100, 260]),
    (1.5, 0.5, 0.6, 2.0, [30, 93, 150]),
    (0.3, 2.0, 0.5, 0.5, [45, 120]),
])
def test_power_equals_direct_enumeration(lam_c, t, rr, r, sizes):
    ep = CountEndpoint(lam_c, t, allocation=r, test="exact_conditional")
    ds, power = package_power(ep, rr, sizes)
    for i, (n_t, n_c) in enumerate(zip(ds.n_treatment.values, ds.n_control.values,
                                       strict=True)):
        ref = direct_power(rr, lam_c, t, n_t, n_c)
        assert power[i] == pytest.approx(ref, abs=1e-10)


def test_higher_is_better_margin_and_minimum_estimate_equal_enumeration():
    # higher rates better: reject when P(X_t >= x | S, p0) <= alpha (mirror image)
    up = CountEndpoint(1.0, 1.0, test="exact_conditional", better="higher")
    ds, power = package_power(up, 1.5, [80, 160])
    for i, n in enumerate(ds.n_control.values):
        assert power[i] == pytest.approx(direct_power(1.5, 1.0, 1.0, n, n, better="higher"),
                                         abs=1e-10)
    # non-inferiority margin 1.25 (lower better): null rate ratio 1.25
    ep = CountEndpoint(1.2, 1.0, test="exact_conditional")
    ds, power = package_power(ep, 0.95, [300], rule=Significance(0.025, margin=1.25))
    assert power[0] == pytest.approx(direct_power(0.95, 1.2, 1.0, 150, 150, rr0=1.25),
                                     abs=1e-10)
    # significant and an observed rate ratio below 0.85
    rule = Significance(0.025, min_estimate=0.85)
    ds, power = package_power(ep, 0.8, [120, 2000], rule=rule)
    for i, n in enumerate(ds.n_control.values):
        ref = direct_power(0.8, 1.2, 1.0, n, n, min_rr=Fraction(85, 100))
        assert power[i] == pytest.approx(ref, abs=1e-10)
    # the minimum estimate binds at the larger size (else the test is no check)
    plain = package_power(ep, 0.8, [2000])[1][0]
    assert plain - power[1] > 0.01


@pytest.mark.filterwarnings("ignore:.*scalar divide:RuntimeWarning")  # statsmodels at S = 0
def test_decisions_equal_statsmodels_exact_conditional_test():
    # statsmodels test_poisson_2indep(method="exact-cond"), one-sided "smaller"
    n_t, n_c, t, rr0 = 40, 25, 1.0, 1.1
    q0 = n_t * rr0 / (n_t * rr0 + n_c)
    for s in (0, 1, 7, 23, 60):
        k = critical_counts(s, q0, ALPHA)
        for x in range(s + 1):
            p = sm_rates.test_poisson_2indep(x, n_t * t, s - x, n_c * t, value=rr0,
                                    method="exact-cond", alternative="smaller").pvalue
            assert (x <= k) == (p <= ALPHA), (s, x, p)


# ------------------------------------------------------------------------------------------
# simulation of the test
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("seed", [11, 12])
def test_power_matches_simulated_test(seed):
    lam_c, t, rr, n_t, n_c = 0.9, 1.0, 0.65, 70, 70
    ep = CountEndpoint(lam_c, t, test="exact_conditional")
    power = package_power(ep, rr, [n_t + n_c])[1][0]
    rng = np.random.default_rng(seed)
    trials = 20_000
    x_t = rng.poisson(n_t * lam_c * rr * t, trials)
    x_c = rng.poisson(n_c * lam_c * t, trials)
    reject = stats.binom.cdf(x_t, x_t + x_c, n_t / (n_t + n_c)) <= ALPHA
    rate = reject.mean()
    mcse = math.sqrt(rate * (1 - rate) / trials)
    assert abs(rate - power) < 4 * mcse
    # the package's patient-level simulation decides by the same test
    sim = simulate_rejection_rate(ep, rr, n_t, n_c, trials=20_000, seed=seed)
    assert sim.predicted_power == pytest.approx(power, abs=1e-12)
    assert abs(sim.rejection_rate - power) < 4 * sim.mcse


# ------------------------------------------------------------------------------------------
# type I error
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("rr0, rule, r", [
    (1.0, Significance(0.025), 1.0),
    (1.2, Significance(0.025, margin=1.2), 1.0),
    (1.0, Significance(0.05, sided="two"), 2.0),
])
def test_type_one_error_at_most_alpha_conditionally_saw_toothed(rr0, rule, r):
    alpha = rule.one_sided_alpha
    ep = CountEndpoint(0.4, 1.0, test="exact_conditional", allocation=r)
    sizes = np.arange(1, 201) * (3 if r == 2 else 2)
    ds, size = package_power(ep, rr0, sizes, rule=rule)
    assert np.all(size <= alpha + 1e-12)
    assert size[-1] > 0.5 * alpha          # not uselessly conservative with ~160 events
    # spot check against the direct enumeration
    n_t, n_c = ds.n_treatment.values[50], ds.n_control.values[50]
    assert size[50] == pytest.approx(direct_power(rr0, 0.4, 1.0, n_t, n_c, rr0=rr0,
                                                  alpha=alpha), abs=1e-10)
    # Given the total S the size P(Binomial(S, p0) <= k(S)) is discrete: saw-toothed in S,
    # never above alpha (scipy.stats.binom.cdf of the package's critical counts). The
    # unconditional size above averages it over Poisson(S), which smooths the teeth away.
    p0 = n_t * rr0 / (n_t * rr0 + n_c)
    s = np.arange(1, 301)
    cond = stats.binom.cdf(critical_counts(s, p0, alpha), s, p0)
    assert np.all(cond <= alpha + 1e-12)
    steps = np.sign(np.diff(cond))
    assert np.count_nonzero(np.diff(steps[steps != 0])) > 10


# ------------------------------------------------------------------------------------------
# assurance
# ------------------------------------------------------------------------------------------
def test_assurance_equals_quadrature_of_direct_power():
    lam_c, t, m, sd = 1.0, 1.0, math.log(0.7), 0.15
    ep = CountEndpoint(lam_c, t, test="exact_conditional")
    ds = evaluate(TrialDesign(ep, Normal(m, sd), relevant_effect=0.85), [60, 200])
    pdf = stats.norm(m, sd).pdf
    for i, n in enumerate(ds.n_control.values):
        def integrand(x, n=n):
            return pdf(x) * direct_power(math.exp(x), lam_c, t, n, n)
        lo, hi = m - 8 * sd, m + 8 * sd
        ref = integrate.quad(integrand, lo, hi, epsabs=1e-10, epsrel=1e-9, limit=200)[0]
        ref_r = integrate.quad(integrand, lo, math.log(0.85), epsabs=1e-10, epsrel=1e-9,
                               limit=200)[0]
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=1e-7)
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(ref_r, abs=1e-7)


def test_point_mass_assurance_equals_power_and_bounds():
    ep = CountEndpoint(0.6, 2.0, test="exact_conditional")
    ds = evaluate(TrialDesign(ep, PointMass(math.log(0.75))), [50, 300, 1000])
    np.testing.assert_array_equal(ds.assurance.values, ds.power.values)
    assert np.all((ds.power.values >= 0) & (ds.power.values <= 1))
    assert np.all(np.diff(ds.power.values) > 0)


# ------------------------------------------------------------------------------------------
# options, description, validation
# ------------------------------------------------------------------------------------------
def test_wald_is_the_default_and_unchanged():
    ep = CountEndpoint(0.8, 1.0)
    assert ep.test == "wald" and ep.to_dict()["test"] == "wald"
    same = CountEndpoint(0.8, 1.0, test="wald")
    a = evaluate(TrialDesign(ep, PointMass(math.log(0.7))), [100, 300]).power.values
    b = evaluate(TrialDesign(same, PointMass(math.log(0.7))), [100, 300]).power.values
    np.testing.assert_array_equal(a, b)
    # Wald power on the log scale (common practice), scipy.stats.norm
    se = np.sqrt((1 / (0.8 * 0.7) + 1 / 0.8) / np.array([50, 150]))
    ref = stats.norm.cdf(-math.log(0.7) / se - stats.norm.isf(0.025))
    np.testing.assert_allclose(a, ref, atol=1e-10)
    assert "Wald test" in ep.describe()


def test_describe_method_and_record_name_the_test():
    ep = CountEndpoint(0.8, 1.0, test="exact_conditional")
    assert "exact conditional test" in ep.describe()
    assert ep.to_dict()["test"] == "exact_conditional"
    ds = evaluate(TrialDesign(ep, PointMass(math.log(0.7))), [100])
    assert "exact conditional test" in ds.attrs["method"]


@pytest.mark.parametrize("kwargs, word", [
    ({"overdispersion": 0.3}, "overdispersion"),
    ({"dropout_rate": 0.1}, "dropout_rate"),
    ({"layout": "single_arm"}, "layout"),
    ({"variance_at": "planning_ratio"}, "variance_at"),
    ({"test_variance": "pooled_null"}, "test_variance"),
    ({"planning_rate_ratio": 0.8}, "planning_rate_ratio"),
    ({"control_rate_prior": Normal(1.0, 0.01)}, "control_rate_prior"),
])
def test_exact_test_refuses_settings_it_cannot_honour(kwargs, word):
    with pytest.raises(AssuranceInputError, match="'test' parameter of CountEndpoint") as err:
        CountEndpoint(1.0, 1.0, test="exact_conditional", **kwargs)
    assert word in str(err.value)


def test_bad_test_name_and_posterior_rule_are_refused():
    with pytest.raises(AssuranceInputError, match="'test' parameter of CountEndpoint"):
        CountEndpoint(1.0, 1.0, test="score")
    ep = CountEndpoint(1.0, 1.0, test="exact_conditional")
    with pytest.raises(AssuranceInputError, match="not a Significance rule"):
        evaluate(TrialDesign(ep, PointMass(math.log(0.7)),
                             rule=PosteriorProbability(0.975)), [100])


def test_design_file_key_test():
    from assurance.design_file import endpoint_from_table
    from assurance.errors import DesignFileError

    table = {"type": "counts", "control_rate": 0.6, "follow_up": 2.0,
             "test": "exact_conditional"}
    ep = endpoint_from_table(table, "trial.toml")
    assert ep.test == "exact_conditional"
    assert endpoint_from_table(table | {"test": "wald"}, "trial.toml").test == "wald"
    assert endpoint_from_table({k: v for k, v in table.items() if k != "test"},
                               "trial.toml").test == "wald"
    with pytest.raises(DesignFileError, match="'endpoint.test'"):
        endpoint_from_table(table | {"test": "score"}, "trial.toml")
    with pytest.raises(DesignFileError, match="'endpoint.test'.*overdispersion"):
        endpoint_from_table(table | {"overdispersion": 0.5}, "trial.toml")


@settings(max_examples=60, deadline=None)
@given(s=st.integers(0, 3000), q0=st.floats(0.02, 0.98), alpha=st.floats(0.001, 0.2))
def test_critical_count_is_the_largest_passing_count(s, q0, alpha):
    # definition, checked with scipy.stats.binom.cdf: P(<= k) <= alpha < P(<= k + 1)
    k = int(critical_counts(s, q0, alpha))
    assert -1 <= k <= s
    if k >= 0:
        assert stats.binom.cdf(k, s, q0) <= alpha
    if k < s:
        assert stats.binom.cdf(k + 1, s, q0) > alpha


def test_normal_limit_beyond_enumeration_is_close_to_it():
    # above ENUMERATION_LIMIT expected events the normal limit of the test is used; just
    # either side of the switch the two agree within 0.002 (and the limit has level alpha)
    from assurance.compute.poisson_exact import ENUMERATION_LIMIT, conditional_power

    for ratio in (0.985, 0.99, 1.0):
        total = ENUMERATION_LIMIT * np.array([1 - 1e-6, 1 + 1e-6])
        p = conditional_power(total * ratio / (1 + ratio), total / (1 + ratio), 0.5, ALPHA)
        assert abs(p[1] - p[0]) < 0.002
    assert p[1] == pytest.approx(ALPHA, abs=1e-12)
