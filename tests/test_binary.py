"""Binary endpoint: classical sample sizes, exact power and exact assurance, checked against
computations from outside the package.

Sources (named again beside each check):

* Fleiss, Tytun & Ury 1980, Biometrics 36:343-346 -- n per group for two proportions, with
  and without continuity correction (values in /work/shared/references.md, "computed from the
  formulas (from memory of the formulas)");
* statsmodels ``power_proportions_2indep`` -- normal-approximation power of the pooled z test
  (null variance from the pooled rate, alternative variance unpooled): the same definition as
  the package's normal approximation, so agreement is to rounding;
* statsmodels ``NormalIndPower`` with ``proportion_effectsize`` (Cohen's h, arcsine
  transform) -- a *different* approximation to the same power, so only close agreement;
* scipy.stats ``binom``, ``betabinom``, ``fisher_exact``, ``binomtest``,
  ``chi2_contingency``, ``chisquare``, ``beta`` and ``scipy.integrate.quad`` / ``dblquad``:
  independent enumerations and integrals written in this file (one table at a time, scalar
  loops), not the package's vectorised code;
* Farrington & Manning 1990, Statistics in Medicine 9:1447-1454 -- the restricted maximum
  likelihood rates, checked against a numerical maximisation of the likelihood.

Tolerances: enumeration against enumeration 1e-12 (sums of a few hundred products); against
``quad`` 1e-8 and ``dblquad`` 1e-7 (their error targets plus the package's Gauss-Legendre
quadrature, observed below 1e-10 against a 512-node rule).
"""

from __future__ import annotations

import math
import tomllib
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, special, stats

from assurance import (
    Mixture,
    Normal,
    PointMass,
    Significance,
    TrialDesign,
    evaluate,
    solve_sample_size,
)
from assurance.compute.binary_exact import (
    SuccessRegion,
    TestSpec,
    fisher_critical_counts,
    posterior_below,
    restricted_rates,
    success_region,
    success_runs,
    two_arm_z,
)
from assurance.compute.normal_outcome import Cut
from assurance.design_file import endpoint_from_table, prior_from_table
from assurance.endpoints.binary import BetaRates, BinaryEndpoint
from assurance.errors import AssuranceInputError, AssuranceWarning, DesignFileError

ROOT = Path(__file__).resolve().parents[1]
ENUM_TOL = 1e-12
QUAD_TOL = 1e-8
DBLQUAD_TOL = 1e-7
NT, NC = 12, 15  # small unequal arms for the table-by-table enumerations


# ------------------------------------------------------------------------------------------
# independent references, one table at a time
# ------------------------------------------------------------------------------------------
def region_by_loop(test, n_t, n_c, alpha, *, sign=1.0, continuity=False):
    """Success region computed table by table with scipy (two arms)."""
    out = np.zeros((n_t + 1, n_c + 1), dtype=bool)
    alt = "greater" if sign > 0 else "less"
    for x_t in range(n_t + 1):
        for x_c in range(n_c + 1):
            table = [[x_t, n_t - x_t], [x_c, n_c - x_c]]
            favourable = sign * (x_t / n_t - x_c / n_c) > 0
            if test == "fisher_exact":
                p = stats.fisher_exact(table, alternative=alt).pvalue
                out[x_t, x_c] = p <= alpha * (1 + 1e-7)
            elif test == "chi_square":
                if 0 in (x_t + x_c, n_t + n_c - x_t - x_c):
                    continue  # a zero margin: no test (chi2_contingency refuses it)
                res = stats.chi2_contingency(table, correction=continuity)
                out[x_t, x_c] = favourable and res.pvalue <= 2 * alpha
            elif test == "unpooled_z":  # Wald statistic written out by hand
                pt, pc = x_t / n_t, x_c / n_c
                cc = 0.5 * (1 / n_t + 1 / n_c) if continuity else 0.0
                num = sign * (pt - pc) - cc
                var = pt * (1 - pt) / n_t + pc * (1 - pc) / n_c
                if var == 0:  # each arm all or none: z = +-inf by the numerator's sign
                    out[x_t, x_c] = num > 0
                else:
                    out[x_t, x_c] = num / math.sqrt(var) >= stats.norm.isf(alpha)
            else:  # pooled z written out by hand
                pooled = (x_t + x_c) / (n_t + n_c)
                var = pooled * (1 - pooled) * (1 / n_t + 1 / n_c)
                if var == 0:
                    continue
                cc = 0.5 * (1 / n_t + 1 / n_c) if continuity else 0.0
                z = (sign * (x_t / n_t - x_c / n_c) - cc) / math.sqrt(var)
                out[x_t, x_c] = z >= stats.norm.isf(alpha)
    return out


def _binom(n, p):
    """Binomial pmf by math.comb (fast enough for quad integrands)."""
    x = np.arange(n + 1)
    comb = np.array([math.comb(n, k) for k in x], dtype=float)
    return comb * p**x * (1 - p) ** (n - x)


def power_by_enumeration(region, n_t, n_c, p_t, p_c):
    return float(stats.binom.pmf(np.arange(n_t + 1), n_t, p_t) @ region
                 @ stats.binom.pmf(np.arange(n_c + 1), n_c, p_c))


def assurance_by_enumeration(region, n_t, n_c, treatment, control):
    total = 0.0
    for x_t in range(n_t + 1):
        for x_c in range(n_c + 1):
            if region[x_t, x_c]:
                total += (stats.betabinom.pmf(x_t, n_t, *treatment)
                          * stats.betabinom.pmf(x_c, n_c, *control))
    return total


def calculator(ep, prior, rule):
    return ep.calculator(ep.benefit_prior(prior), ep.benefit_rule(rule), draws=100, seed=None)


def exact_figures(ep, prior, rule, n_t, n_c, cuts=()):
    res = calculator(ep, prior, rule).success(np.array([n_t]), np.array([n_c]), list(cuts))
    return float(res.success[0]), [float(j[0]) for j in res.joint]


RULE = Significance(0.05, sided="two")  # one-sided 0.025 in the favourable direction


# ------------------------------------------------------------------------------------------
# classical sample sizes and normal-approximation power
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("p_c", "p_t", "n_plain", "n_cc", "raw_plain", "raw_cc"),
    [(0.20, 0.40, 82, 91, 81.2, 90.9), (0.60, 0.75, 152, 165, 151.9, 164.9)],
)
def test_fleiss_sample_sizes(p_c, p_t, n_plain, n_cc, raw_plain, raw_cc):
    # Fleiss, Tytun & Ury 1980, Biometrics 36:343-346 (values from /work/shared/references.md,
    # "computed from the formulas (from memory of the formulas)"): two-sided 0.05, power 0.80.
    za, zb = stats.norm.isf(0.025), stats.norm.isf(0.20)
    pbar = (p_c + p_t) / 2
    d = p_t - p_c
    n0 = (za * math.sqrt(2 * pbar * (1 - pbar))
          + zb * math.sqrt(p_c * (1 - p_c) + p_t * (1 - p_t))) ** 2 / d**2
    n1 = n0 / 4 * (1 + math.sqrt(1 + 4 / (n0 * d))) ** 2
    assert n0 == pytest.approx(raw_plain, abs=0.05)  # the reference prints one decimal
    assert n1 == pytest.approx(raw_cc, abs=0.05)
    for cc, expected in ((False, n_plain), (True, n_cc)):
        ep = BinaryEndpoint(p_c, continuity_correction=cc, exact_up_to=0)
        design = TrialDesign(ep, PointMass(d), rule=RULE)
        answer = solve_sample_size(design, 0.8, quantity="power")
        assert answer.n_control == expected and answer.n_treatment == expected


@pytest.mark.parametrize(
    ("p_c", "p_t", "n_t", "n_c", "alpha", "better"),
    [(0.2, 0.4, 82, 82, 0.025, "higher"), (0.3, 0.45, 120, 60, 0.05, "higher"),
     (0.6, 0.75, 40, 100, 0.01, "higher"), (0.3, 0.18, 150, 150, 0.025, "lower"),
     (0.5, 0.35, 70, 140, 0.05, "lower")],
)
def test_normal_power_matches_statsmodels(p_c, p_t, n_t, n_c, alpha, better):
    # statsmodels power_proportions_2indep: pooled variance under the null, unpooled under
    # the alternative -- the package's normal approximation, so agreement to rounding.
    from statsmodels.stats.proportion import power_proportions_2indep

    ep = BinaryEndpoint(p_c, better=better, exact_up_to=0)
    calc = calculator(ep, PointMass(0.0), Significance(alpha))
    ours = calc.power(ep.to_benefit(p_t - p_c), np.array([n_t]), np.array([n_c]))[0]
    ref = power_proportions_2indep(p_t - p_c, p_c, n_t, ratio=n_c / n_t, alpha=alpha,
                                   alternative="larger" if better == "higher" else "smaller")
    assert ours == pytest.approx(ref.power, abs=1e-10)


@pytest.mark.parametrize(("p_c", "p_t"), [(0.2, 0.4), (0.6, 0.75), (0.3, 0.45)])
@pytest.mark.parametrize("n", [100, 200, 400])
def test_normal_power_close_to_arcsine_approximation(p_c, p_t, n):
    # statsmodels NormalIndPower with proportion_effectsize (Cohen's h, arcsine transform):
    # another normal approximation to the power of comparing two proportions. The two differ
    # by terms of order 1/sqrt(n); observed differences here are below 0.004, the check
    # allows 0.01 (common practice: the approximations are interchangeable at these n).
    from statsmodels.stats.power import NormalIndPower
    from statsmodels.stats.proportion import proportion_effectsize

    arcsine = NormalIndPower().power(proportion_effectsize(p_t, p_c), nobs1=n, alpha=0.025,
                                     ratio=1.0, alternative="larger")
    ep = BinaryEndpoint(p_c, exact_up_to=0)
    ours = calculator(ep, PointMass(0.0), RULE).power(p_t - p_c, np.array([n]), np.array([n]))
    assert float(ours[0]) == pytest.approx(arcsine, abs=0.01)


def test_normal_approximation_beyond_the_switch_point():
    # The exact power of the z test and its normal approximation agree closely at 300 per
    # arm (common practice; observed 0.003); the switch uses the approximation only when
    # both arms exceed exact_up_to.
    ep_exact = BinaryEndpoint(0.3, exact_up_to=500)
    ep_normal = BinaryEndpoint(0.3, exact_up_to=0)
    size = (np.array([300]), np.array([300]))
    a = calculator(ep_exact, PointMass(0.0), RULE).power(0.1, *size)[0]
    b = calculator(ep_normal, PointMass(0.0), RULE).power(0.1, *size)[0]
    assert abs(a - b) < 0.01 and a != b
    assert ep_exact.exact_at(500, 500) and ep_exact.exact_at(900, 500)
    assert not ep_exact.exact_at(501, 501)


# ------------------------------------------------------------------------------------------
# exact power at fixed rates: the success region against scipy, table by table
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("test", "continuity", "better"),
    [("z", False, "higher"), ("z", True, "higher"), ("z", False, "lower"),
     ("unpooled_z", False, "higher"), ("unpooled_z", True, "lower"),
     ("chi_square", False, "higher"), ("chi_square", True, "lower"),
     ("fisher_exact", False, "higher"), ("fisher_exact", False, "lower")],
)
def test_exact_power_matches_enumeration(test, continuity, better):
    # Region: scipy.stats.fisher_exact (one-sided), scipy.stats.chi2_contingency (Pearson,
    # with and without Yates' correction; two-sided at 2 alpha and favourable direction),
    # or the pooled / unpooled z statistic written out per table. Power: scipy.stats.binom
    # sums.
    ep = BinaryEndpoint(0.35, test=test, continuity_correction=continuity, better=better)
    sign = ep.sign
    spec = TestSpec(test, 0.025, sign, "difference", True, continuity=continuity)
    region = region_by_loop(test, NT, NC, 0.025, sign=sign, continuity=continuity)
    assert np.array_equal(success_region(spec, NT, NC), region)
    calc = calculator(ep, PointMass(0.0), RULE)
    for delta in (0.0, 0.2, -0.2, 0.45):
        p_t = 0.35 + delta
        ours = calc.power(ep.to_benefit(delta), np.array([NT]), np.array([NC]))[0]
        assert ours == pytest.approx(power_by_enumeration(region, NT, NC, p_t, 0.35),
                                     abs=ENUM_TOL)


def test_fisher_has_size_at_most_alpha():
    # Fisher's exact test is conservative: P(reject | p_t = p_c) <= alpha for every common
    # rate (common practice); checked over a grid of rates with scipy.stats.binom.
    region = region_by_loop("fisher_exact", NT, NC, 0.025)
    sizes = [power_by_enumeration(region, NT, NC, p, p) for p in np.linspace(0.01, 0.99, 25)]
    assert max(sizes) <= 0.025
    ep = BinaryEndpoint(0.4, test="fisher_exact")
    ours = calculator(ep, PointMass(0.0), RULE).power(0.0, np.array([NT]), np.array([NC]))[0]
    assert ours == pytest.approx(power_by_enumeration(region, NT, NC, 0.4, 0.4), abs=ENUM_TOL)


def test_minimum_observed_effect_joins_the_region():
    # success iff the z test rejects and the observed difference reaches 0.25 (by hand)
    ep = BinaryEndpoint(0.3)
    rule = Significance(0.05, sided="two", min_estimate=0.25)
    region = region_by_loop("z", NT, NC, 0.025)
    observed = np.arange(NT + 1)[:, None] / NT - np.arange(NC + 1)[None, :] / NC
    region &= observed >= 0.25
    ours = calculator(ep, PointMass(0.0), rule).power(0.2, np.array([NT]), np.array([NC]))[0]
    assert ours == pytest.approx(power_by_enumeration(region, NT, NC, 0.5, 0.3), abs=ENUM_TOL)


# ------------------------------------------------------------------------------------------
# the unpooled (Wald) z test
# ------------------------------------------------------------------------------------------
def test_unpooled_z_matches_textbook_examples():
    # Agresti (2007), An Introduction to Categorical Data Analysis, 2nd ed., Section 2.2.2,
    # Table 2.2 (Physicians' Health Study): heart attacks in 189 of 11,034 physicians on
    # placebo and 104 of 11,037 on aspirin; difference 0.0171 - 0.0094 = 0.0077 (text seen);
    # its standard error 0.0015 and the Wald 95% interval (0.005, 0.011) from memory.
    # Heart attacks are adverse: lower rates are better, aspirin is the treatment.
    spec = TestSpec("unpooled_z", 0.025, -1.0, "difference", True)
    diff = 189 / 11034 - 104 / 11037
    se = diff / float(two_arm_z(spec, 104, 189, 11037, 11034))
    assert round(diff, 4) == 0.0077
    assert round(se, 4) == 0.0015
    assert (round(diff - 1.96 * se, 3), round(diff + 1.96 * se, 3)) == (0.005, 0.011)
    # The region at these sizes (11,035 control counts, bisection per count): for 189 on
    # placebo, success up to the largest aspirin count whose hand-written Wald z reaches
    # z_0.975, computed here over every count.
    runs = {c: (lo, hi) for c, lo, hi in success_runs(spec, 11037, 11034).runs()}
    x = np.arange(11038)
    pt, pc = x / 11037, 189 / 11034
    z = (pc - pt) / np.sqrt(pt * (1 - pt) / 11037 + pc * (1 - pc) / 11034)
    assert runs[189] == (0, int(x[z >= stats.norm.isf(0.025)].max()))
    assert runs[189][1] >= 104
    # Moore, McCabe & Craig, Introduction to the Practice of Statistics, 7th ed., Exercise
    # 8.62 (aspirin after stroke: favourable in 63 of 78 treated, 43 of 77 controls): the
    # difference 0.249 has standard error 0.0721 (the worked solution published by a course
    # using the book, sewkzh17.mywhc.ca/vhm801/2018w/ex/08_062.txt; the book's own answer
    # not seen).
    spec = TestSpec("unpooled_z", 0.025, 1.0, "difference", True)
    diff = 63 / 78 - 43 / 77
    assert round(diff, 3) == 0.249
    assert round(diff / float(two_arm_z(spec, 63, 43, 78, 77)), 4) == 0.0721
    region = region_by_loop("unpooled_z", 78, 77, 0.025)
    assert region[63, 43]
    assert np.array_equal(success_region(spec, 78, 77), region)


def test_unpooled_z_type_one_error_is_reported_and_can_exceed_alpha():
    # The results carry P(success) at the null (both arms at the control rate) per size;
    # for the Wald test it is the enumeration over its own region (scipy.stats.binom here).
    # The Wald test is liberal in small trials (common practice): at 5 and 10 per arm and
    # rate 0.3 its size is 0.039 and 0.047 against 0.025 one-sided.
    sizes = [10, 20, 30, 40]
    ds = evaluate(TrialDesign(BinaryEndpoint(0.3, test="unpooled_z"), Normal(0.1, 0.05),
                              rule=RULE), sizes)
    for total, value in zip(sizes, ds.type_one_error.values, strict=True):
        n = total // 2
        ref = power_by_enumeration(region_by_loop("unpooled_z", n, n, 0.025), n, n, 0.3, 0.3)
        assert value == pytest.approx(ref, abs=ENUM_TOL)
    assert float(ds.type_one_error.max()) > 0.025
    assert float(ds.type_one_error[1]) == pytest.approx(0.0474, abs=5e-5)  # computed above


def test_unpooled_z_non_inferiority_counts_empty_arms_as_success():
    # Wald non-inferiority test, margin 0.1 (higher better): z = (p_t - p_c + 0.1) / se with
    # the unpooled se. Both arms without responders: se 0 and numerator 0.1, z = +inf, so
    # the test declares non-inferiority (its known blind spot). Region by hand; type I error
    # at p_t = p_c - 0.1 by scipy.stats.binom, through the results of evaluate.
    n = 12
    region = np.zeros((n + 1, n + 1), dtype=bool)
    for x_t in range(n + 1):
        for x_c in range(n + 1):
            pt, pc = x_t / n, x_c / n
            num = pt - pc + 0.1
            var = pt * (1 - pt) / n + pc * (1 - pc) / n
            region[x_t, x_c] = num > 0 if var == 0 else num / math.sqrt(var) >= 1.959963984540054
    assert region[0, 0] and region[n, n]
    ep = BinaryEndpoint(0.2, test="unpooled_z")
    rule = Significance(0.025, margin=0.1)
    spec = TestSpec("unpooled_z", 0.025, 1.0, "difference", True, null_shift=-0.1)
    assert np.array_equal(success_region(spec, n, n), region)
    ds = evaluate(TrialDesign(ep, Normal(0.0, 0.05), rule=rule), [2 * n])
    assert float(ds.type_one_error[0]) == pytest.approx(
        power_by_enumeration(region, n, n, 0.1, 0.2), abs=ENUM_TOL)


@pytest.mark.parametrize(("p_c", "p_t", "n"), [(0.2, 0.4, 82), (0.6, 0.75, 150), (0.3, 0.4, 300)])
def test_unpooled_normal_power_matches_statsmodels(p_c, p_t, n):
    # Beyond the exact range the Wald test's power is Phi(d / se1 - z) with se1 the unpooled
    # standard error at the true rates (null and alternative alike): statsmodels
    # NormalIndPower with effect size d / s, s^2 = (p_t q_t + p_c q_c) / 2 (equal arms).
    from statsmodels.stats.power import NormalIndPower

    ep = BinaryEndpoint(p_c, test="unpooled_z", exact_up_to=0)
    ours = calculator(ep, PointMass(0.0), RULE).power(p_t - p_c, np.array([n]), np.array([n]))
    s = math.sqrt((p_t * (1 - p_t) + p_c * (1 - p_c)) / 2)
    ref = NormalIndPower().power(effect_size=(p_t - p_c) / s, nobs1=n, alpha=0.025, ratio=1.0,
                                 alternative="larger")
    assert float(ours[0]) == pytest.approx(ref, abs=1e-10)


# ------------------------------------------------------------------------------------------
# success regions as runs: staircases and sums
# ------------------------------------------------------------------------------------------
def _natural_by_hand(pt, pc, scale):
    with np.errstate(divide="ignore", invalid="ignore"):
        if scale == "difference":
            out = pt - pc
        elif scale == "risk_ratio":
            out = np.log(pt) - np.log(pc)
        else:
            out = np.log(pt / (1 - pt)) - np.log(pc / (1 - pc))
    return np.where(np.isnan(out), 0.0, out)  # 0/0: no effect


def _grid_by_hand(test, n_t, n_c, alpha, sign, continuity, scale, min_estimate):
    """Decisions on the whole (x_t, x_c) grid, vectorised numpy and scipy.stats.hypergeom."""
    x_t = np.arange(n_t + 1)[:, None]
    x_c = np.arange(n_c + 1)[None, :]
    pt, pc = x_t / n_t, x_c / n_c
    if test == "fisher_exact":
        s, big = x_t + x_c, n_t + n_c
        p = (stats.hypergeom.sf(x_t - 1, big, n_t, s) if sign > 0
             else stats.hypergeom.cdf(x_t, big, n_t, s))
        out = p <= alpha * (1 + 1e-7)
    else:
        cc = 0.5 * (1 / n_t + 1 / n_c) if continuity else 0.0
        num = sign * (pt - pc) - cc
        if test == "unpooled_z":
            var = pt * (1 - pt) / n_t + pc * (1 - pc) / n_c
        else:
            pooled = (x_t + x_c) / (n_t + n_c)
            var = pooled * (1 - pooled) * (1 / n_t + 1 / n_c)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = num / np.sqrt(var)
        out = z >= stats.norm.isf(alpha)
        if test == "unpooled_z":
            out = np.where(var == 0, num > 0, out)
        else:
            out &= var > 0
    if min_estimate is not None:
        out &= sign * _natural_by_hand(pt, pc, scale) >= min_estimate
    return out


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(n_t=st.integers(1, 200), n_c=st.integers(1, 200),
       test=st.sampled_from(["z", "unpooled_z", "chi_square", "fisher_exact"]),
       better=st.sampled_from(["higher", "lower"]),
       alpha=st.sampled_from([0.001, 0.01, 0.025, 0.05, 0.2, 0.45]), continuity=st.booleans(),
       scale=st.sampled_from(["difference", "risk_ratio", "odds_ratio"]),
       min_estimate=st.one_of(st.none(), st.floats(-0.3, 0.6)))
def test_staircase_regions_equal_table_by_table_decisions(n_t, n_c, test, better, alpha,
                                                          continuity, scale, min_estimate):
    # The regions are found by bisection per control count (and, for Fisher's test, from
    # critical counts per total summed over a band); every table decided independently
    # (numpy by hand, scipy.stats.hypergeom for Fisher) must give the same region.
    continuity = continuity and test != "fisher_exact"
    sign = 1.0 if better == "higher" else -1.0
    spec = TestSpec(test, alpha, sign, scale, True, continuity=continuity,
                    min_estimate=min_estimate)
    runs = success_runs(spec, n_t, n_c)
    assert np.unique(runs.col).size == runs.col.size  # one run per control count
    assert np.array_equal(runs.dense(), _grid_by_hand(test, n_t, n_c, alpha, sign,
                                                      continuity, scale, min_estimate))


@pytest.mark.parametrize(("n_t", "n_c", "alpha"),
                         [(300, 200, 0.025), (150, 400, 0.001), (250, 250, 0.2)])
def test_fisher_critical_counts_match_scipy_hypergeom(n_t, n_c, alpha):
    # For every total s, the smallest x_t with P(X_t >= x_t | s) <= alpha: from
    # scipy.stats.hypergeom.sf over every x_t (the package sums a band of the tail only).
    big = n_t + n_c
    s = np.arange(big + 1)[None, :]
    x = np.arange(n_t + 2)[:, None]
    ref = np.sum(stats.hypergeom.sf(x - 1, big, n_t, s) > alpha * (1 + 1e-7), axis=0)
    assert np.array_equal(fisher_critical_counts(n_t, n_c, alpha * (1 + 1e-7)), ref)


def test_staircase_steps_do_not_depend_on_the_guess():
    # The first passing rank per column comes from a guess checked by exact decisions and
    # bisection where it misses: any guess (right, off by a few, absurd) gives the true
    # steps of a random monotone staircase, counted here with numpy.
    from assurance.compute.binary_exact import _first_passing

    rng = np.random.default_rng(5)
    for _ in range(40):
        n_t, n_c = int(rng.integers(1, 60)), int(rng.integers(0, 60))
        steps = np.sort(rng.integers(0, n_t + 2, n_c + 1))  # n_t + 1: nothing passes

        def passes(rank, x_c, steps=steps):
            return rank >= steps[x_c]

        for guess in (None, steps, steps + rng.integers(-3, 4, n_c + 1),
                      rng.integers(-10, n_t + 10, n_c + 1)):
            assert np.array_equal(_first_passing(passes, n_t, n_c, guess), steps)


def test_sums_over_runs_equal_dense_matrix_products():
    # Random regions with several runs per control count, empty columns and single arms:
    # the sums over runs against numpy matrix products with the dense 0/1 region.
    rng = np.random.default_rng(11)
    for _ in range(60):
        n_t, n_c = int(rng.integers(1, 30)), int(rng.integers(0, 30))
        mask = rng.random((n_t + 1, n_c + 1)) < rng.random()
        region = SuccessRegion.from_dense(mask)
        assert np.array_equal(region.dense(), mask) and region.tables() == mask.sum()
        dense = mask.astype(float)
        pmf_t, pmf_c = rng.dirichlet(np.ones(n_t + 1)), rng.dirichlet(np.ones(n_c + 1))
        w_c, w_t = rng.random((4, n_c + 1)), rng.random((4, n_t + 1))
        assert region.probability(pmf_t, pmf_c) == pytest.approx(pmf_t @ dense @ pmf_c,
                                                                 abs=1e-15)
        np.testing.assert_allclose(region.by_treatment(w_c), w_c @ dense.T, rtol=0, atol=1e-13)
        np.testing.assert_allclose(region.by_control(w_t), w_t @ dense, rtol=0, atol=1e-13)


# ------------------------------------------------------------------------------------------
# exact assurance under beta priors on the rates
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("test", "better", "control", "treatment"),
    [("fisher_exact", "higher", (3.0, 7.0), (5.0, 5.0)),
     ("z", "higher", (30.0, 70.0), (1.5, 1.5)),
     ("chi_square", "lower", (4.0, 6.0), (2.0, 6.0))],
)
def test_beta_rates_assurance_matches_enumeration(test, better, control, treatment):
    # Independent: sum over every table of scipy.stats.betabinom probabilities per arm, the
    # region from scipy's tests (see region_by_loop).
    ep = BinaryEndpoint(0.3, test=test, better=better)
    region = region_by_loop(test, NT, NC, 0.025, sign=ep.sign)
    ours, _ = exact_figures(ep, BetaRates(control, treatment), RULE, NT, NC)
    assert ours == pytest.approx(
        assurance_by_enumeration(region, NT, NC, treatment, control), abs=ENUM_TOL)


def _posterior_prob_benefit(x_t, x_c, treatment, control, cut, sign):
    """P(sign * (p_t - p_c) > cut | data) by quad over the control posterior."""
    post_t = stats.beta(treatment[0] + x_t, treatment[1] + NT - x_t)
    post_c = stats.beta(control[0] + x_c, control[1] + NC - x_c)
    if sign > 0:
        def f(p):
            return post_c.pdf(p) * post_t.sf(p + cut)
    else:
        def f(p):
            return post_c.pdf(p) * post_t.cdf(p - cut)
    return integrate.quad(f, 0.0, 1.0, epsabs=1e-13, epsrel=1e-12, limit=200)[0]


@pytest.mark.parametrize(
    ("better", "control", "treatment"),
    [("higher", (3.0, 7.0), (5.0, 5.0)),   # control prior narrower: quadrature over p_c
     ("higher", (1.0, 1.0), (40.0, 60.0)),  # treatment prior narrower: over p_t
     ("lower", (4.0, 6.0), (2.0, 6.0))],
)
def test_beta_rates_decomposition_matches_quad(better, control, treatment):
    # P(success and true benefit > cut) = sum over the success region of
    # P(x_t) P(x_c) P(benefit > cut | x_t, x_c), the last by scipy quad over the posterior.
    ep = BinaryEndpoint(0.3, better=better)
    region = region_by_loop("z", NT, NC, 0.025, sign=ep.sign)
    cuts = [Cut(0.0), Cut(0.1, inclusive=True)]
    _, joint = exact_figures(ep, BetaRates(control, treatment), RULE, NT, NC, cuts)
    for cut, ours in zip(cuts, joint, strict=True):
        ref = 0.0
        for x_t, x_c in zip(*np.nonzero(region), strict=True):
            ref += (stats.betabinom.pmf(x_t, NT, *treatment)
                    * stats.betabinom.pmf(x_c, NC, *control)
                    * _posterior_prob_benefit(x_t, x_c, treatment, control, cut.value,
                                              ep.sign))
        assert ours == pytest.approx(ref, abs=QUAD_TOL)


def test_single_arm_exact_binomial():
    # Region: scipy.stats.binomtest one-sided p-value <= alpha; power: scipy.stats.binom;
    # assurance: scipy.stats.betabinom; joint: betabinom times the beta posterior tail.
    n, p0, treatment = 25, 0.2, (4.0, 8.0)
    ep = BinaryEndpoint(p0, layout="single_arm", test="exact_binomial")
    rule = Significance(0.05)
    region = np.array([stats.binomtest(x, n, p0, alternative="greater").pvalue <= 0.05
                       for x in range(n + 1)])
    spec = TestSpec("exact_binomial", 0.05, 1.0, "difference", False, reference=p0)
    assert np.array_equal(success_region(spec, n, 0)[:, 0], region)
    calc = calculator(ep, PointMass(0.0), rule)
    power = calc.power(0.2, np.array([n]), np.array([0]))[0]
    assert power == pytest.approx(stats.binom.pmf(np.arange(n + 1), n, 0.4) @ region,
                                  abs=ENUM_TOL)
    prior = BetaRates(p0, treatment)
    success, joint = exact_figures(ep, prior, rule, n, 0, [Cut(0.1)])
    bb = stats.betabinom.pmf(np.arange(n + 1), n, *treatment)
    assert success == pytest.approx(bb @ region, abs=ENUM_TOL)
    tail = np.array([stats.beta.sf(p0 + 0.1, treatment[0] + x, treatment[1] + n - x)
                     for x in range(n + 1)])
    assert joint[0] == pytest.approx(np.sum(bb * tail * region), abs=1e-12)


def test_single_arm_score_test_is_the_chi_square_goodness_of_fit():
    # scipy.stats.chisquare against the reference: statistic = z^2 (common practice), so the
    # one-sided z test at alpha rejects where chi-square p <= 2 alpha, favourable direction.
    n, p0 = 30, 0.4
    ref = []
    for x in range(n + 1):
        res = stats.chisquare([x, n - x], f_exp=[n * p0, n * (1 - p0)])
        ref.append(x / n > p0 and res.pvalue <= 0.05)
    spec = TestSpec("chi_square", 0.025, 1.0, "difference", False, reference=p0)
    assert np.array_equal(success_region(spec, n, 0)[:, 0], np.array(ref))


def test_point_masses_and_degenerate_beta_priors_give_power():
    # Assurance under a point mass is classical power (O'Hagan, Stevens & Campbell 2005).
    ep = BinaryEndpoint(0.3, test="fisher_exact")
    calc = calculator(ep, PointMass(0.0), RULE)
    power = calc.power(0.15, np.array([NT]), np.array([NC]))[0]
    fixed, _ = exact_figures(ep, BetaRates(0.3, 0.45), RULE, NT, NC)
    generic, _ = exact_figures(ep, PointMass(0.15), RULE, NT, NC)
    assert fixed == pytest.approx(power, abs=ENUM_TOL)
    assert generic == pytest.approx(power, abs=ENUM_TOL)
    # beta priors worth ten million patients: rate SD 1.5e-4, power moves by < 1e-3
    tight = BetaRates((3e6, 7e6), (4.5e6, 5.5e6))
    assert exact_figures(ep, tight, RULE, NT, NC)[0] == pytest.approx(power, abs=1e-3)


# ------------------------------------------------------------------------------------------
# any prior on the effect, with a fixed or uncertain control rate
# ------------------------------------------------------------------------------------------
def _power_fn(region, n_t, n_c):
    def power(p_t, p_c):
        return float(_binom(n_t, min(max(p_t, 0.0), 1.0)) @ region @ _binom(n_c, p_c))
    return power


def test_effect_prior_with_fixed_control_matches_quad():
    # quad of exact power (scipy enumeration) times the normal density over the effects that
    # keep p_t in [0, 1], renormalised (dropped mass here 3e-6, below the warning level).
    p_c, prior = 0.3, Normal(0.15, 0.1)
    ep = BinaryEndpoint(p_c)
    power = _power_fn(region_by_loop("z", NT, NC, 0.025), NT, NC)
    dens = stats.norm(0.15, 0.1).pdf
    mass = stats.norm(0.15, 0.1).cdf(1 - p_c) - stats.norm(0.15, 0.1).cdf(-p_c)

    def integral(lo):
        return integrate.quad(lambda d: power(p_c + d, p_c) * dens(d), lo, 1 - p_c,
                              epsabs=1e-12, limit=200)[0] / mass

    success, joint = exact_figures(ep, prior, RULE, NT, NC, [Cut(0.0), Cut(0.1, True)])
    assert success == pytest.approx(integral(-p_c), abs=QUAD_TOL)
    assert joint[0] == pytest.approx(integral(0.0), abs=QUAD_TOL)
    assert joint[1] == pytest.approx(integral(0.1), abs=QUAD_TOL)


def test_control_prior_and_effect_prior_match_dblquad():
    # Odds-ratio scale: every (control rate, effect) pair is valid, nothing is dropped.
    # dblquad over the control beta density and the normal density of the log odds ratio.
    ep = BinaryEndpoint(0.3, scale="odds_ratio", control_prior=(3.0, 7.0))
    prior = Mixture([PointMass(0.0), Normal(0.4, 0.5)], [0.25, 0.75])
    power = _power_fn(region_by_loop("z", NT, NC, 0.025), NT, NC)
    beta_c = stats.beta(3.0, 7.0).pdf

    def p_t(e, p):
        return special.expit(special.logit(p) + e)

    def continuous(lo):
        return integrate.dblquad(
            lambda e, p: beta_c(p) * stats.norm.pdf(e, 0.4, 0.5) * power(p_t(e, p), p),
            0.0, 1.0, lo, 0.4 + 8 * 0.5, epsabs=1e-10)[0]

    at_zero = integrate.quad(lambda p: beta_c(p) * power(p, p), 0.0, 1.0, epsabs=1e-12)[0]
    success, joint = exact_figures(ep, prior, RULE, NT, NC, [Cut(0.0)])
    assert success == pytest.approx(0.25 * at_zero + 0.75 * continuous(0.4 - 8 * 0.5),
                                    abs=DBLQUAD_TOL)
    assert joint[0] == pytest.approx(0.75 * continuous(0.0), abs=DBLQUAD_TOL)


def test_impossible_pairs_are_dropped_and_renormalised():
    # Difference scale with an uncertain control rate: pairs with p_c + delta outside [0, 1]
    # are dropped and the rest renormalised (the joint prior conditioned on valid rates).
    ep = BinaryEndpoint(0.2, control_prior=(2.0, 8.0))
    prior = Normal(0.1, 0.15)
    power = _power_fn(region_by_loop("z", NT, NC, 0.025), NT, NC)
    beta_c, norm = stats.beta(2.0, 8.0).pdf, stats.norm(0.1, 0.15).pdf
    mass = integrate.dblquad(lambda d, p: beta_c(p) * norm(d), 0, 1, lambda p: -p,
                             lambda p: 1 - p, epsabs=1e-11)[0]
    num = integrate.dblquad(lambda d, p: beta_c(p) * norm(d) * power(p + d, p), 0, 1,
                            lambda p: -p, lambda p: 1 - p, epsabs=1e-11)[0]
    with pytest.warns(AssuranceWarning, match="outside"):
        success, _ = exact_figures(ep, prior, RULE, NT, NC)
    assert success == pytest.approx(num / mass, abs=DBLQUAD_TOL)
    assert 0.01 < 1 - mass < 0.1  # the case really drops something


# ------------------------------------------------------------------------------------------
# the BetaRates prior itself
# ------------------------------------------------------------------------------------------
def _rate_map(scale, x, p):
    if scale == "difference":
        return p + x
    if scale == "risk_ratio":
        return p * math.exp(x)
    return special.expit(special.logit(p) + x)


@pytest.mark.parametrize(
    ("control", "treatment", "scale"),
    [((6.0, 14.0), (9.0, 11.0), "difference"), ((2.0, 2.0), (50.0, 30.0), "difference"),
     ((0.7, 3.0), (2.0, 2.0), "risk_ratio"), ((30.0, 70.0), (3.0, 4.0), "odds_ratio"),
     (0.3, (4.0, 6.0), "risk_ratio"), ((4.0, 6.0), 0.45, "difference")],
)
def test_beta_rates_distribution_matches_quad(control, treatment, scale):
    # P(effect <= x) = int f_c(p) F_t(h(x, p)) dp with scipy.stats.beta and quad (a fixed arm:
    # the beta distribution function directly); moments by scipy's beta.expect.
    prior = BetaRates(control, treatment, scale)
    tr = stats.beta(*treatment) if isinstance(treatment, tuple) else None
    co = stats.beta(*control) if isinstance(control, tuple) else None
    xs = [prior.ppf(q) for q in (0.05, 0.3, 0.5, 0.8, 0.97)]
    for x in xs:
        if co is None:
            ref = tr.cdf(_rate_map(scale, x, control))
        elif tr is None:  # effect <= x iff p_c >= the control rate matching x
            ref = co.sf(treatment - x)
        else:
            ref = integrate.quad(lambda p, x=x: co.pdf(p) * tr.cdf(_rate_map(scale, x, p)),
                                 0, 1, epsabs=1e-13, limit=200)[0]
        assert float(prior.cdf(x)) == pytest.approx(ref, abs=QUAD_TOL)
        # the density integrates back to the distribution function
        lo = prior.ppf(1e-6)
        area = integrate.quad(lambda t: float(prior.pdf(t)), lo, x, epsabs=1e-11,
                              limit=200)[0]
        assert area == pytest.approx(ref - 1e-6, abs=1e-6)

    def log_or_id(p):
        return {"difference": p, "risk_ratio": np.log(p),
                "odds_ratio": special.logit(p)}[scale]

    def moments(arm):
        if not isinstance(arm, tuple):
            return float(log_or_id(arm)), 0.0
        d = stats.beta(*arm)
        m = d.expect(log_or_id)
        return m, d.expect(lambda p: (log_or_id(p) - m) ** 2)

    (mt, vt), (mc, vc) = moments(treatment), moments(control)
    assert prior.mean() == pytest.approx(mt - mc, abs=1e-7)
    assert prior.var() == pytest.approx(vt + vc, rel=1e-6)
    neg = prior.negated()
    for x in xs:
        assert float(neg.cdf(-x)) == pytest.approx(1 - float(prior.cdf(x)), abs=1e-12)
        assert float(neg.pdf(-x)) == pytest.approx(float(prior.pdf(x)), rel=1e-12)
    assert neg.to_dict()["negated"] is True and neg.negated().to_dict() == prior.to_dict()
    assert neg.mean() == pytest.approx(-prior.mean())


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_beta_rates_sample_matches_mean(seed):
    prior = BetaRates((6.0, 14.0), (9.0, 11.0), "odds_ratio")
    draws = prior.sample(20_000, seed)
    mcse = draws.std(ddof=1) / math.sqrt(draws.size)
    assert abs(draws.mean() - prior.mean()) < 4 * mcse  # within 4 Monte Carlo SEs
    assert np.array_equal(draws, prior.sample(20_000, seed))  # same seed, same draws
    emp = float(np.mean(draws <= 0.5))
    assert abs(emp - float(prior.cdf(0.5))) < 4 * math.sqrt(emp * (1 - emp) / draws.size)


def test_beta_rates_describes_itself_and_fixed_rates_are_atoms():
    prior = BetaRates(0.3, 0.45)
    [(value, mass)] = prior.atoms()
    assert value == pytest.approx(0.15) and mass == 1.0
    assert prior.prob_above(value, inclusive=True) == 1.0
    assert prior.prob_above(value) == 0.0 and prior.prob_above(0.1) == 1.0
    assert prior.to_dict() == {"family": "beta_rates", "control": 0.3, "treatment": 0.45,
                               "scale": "difference"}
    assert prior.parts() == [(1.0, prior)]


# ------------------------------------------------------------------------------------------
# designs end to end
# ------------------------------------------------------------------------------------------
def test_design_end_to_end_with_beta_rates():
    ep = BinaryEndpoint(0.3, test="fisher_exact")
    prior = BetaRates((36.0, 84.0), (9.0, 11.0))
    design = TrialDesign(ep, prior, rule=RULE, relevant_effect=0.1)
    ds = evaluate(design, [20, 60, 200, 600])
    # ceiling = P(p_t > p_c) by quad (Fisher is conservative: no false-positive excess)
    ceiling = integrate.quad(lambda p: stats.beta(36, 84).pdf(p) * stats.beta(9, 11).sf(p),
                             0, 1, epsabs=1e-13)[0]
    assert float(ds.ceiling) == pytest.approx(ceiling, abs=QUAD_TOL)
    assert np.all(ds.assurance.values <= ceiling + 0.025 * (1 - ceiling))
    assert np.all(np.diff(ds.assurance.values) > 0)
    np.testing.assert_allclose(ds.prob_success_and_relevant + ds.prob_miss_relevant,
                               float(ds.prob_relevant), atol=1e-12)
    assert np.all(ds.prob_success_and_relevant <= ds.prob_success_and_benefit + 1e-15)
    assert np.all(ds.prob_success_and_benefit <= ds.assurance + 1e-15)
    # as n grows (normal approximation) assurance climbs to the ceiling from below
    far = evaluate(design, [2_000_000, 200_000_000]).assurance.values
    assert far[0] < far[1] <= ceiling and ceiling - far[1] < 1e-3
    answer = solve_sample_size(design, 0.6)
    assert answer.reached and answer.achieved >= 0.6
    assert "enumeration" in ds.attrs["method"]


def test_ratio_scale_design_uses_ratios():
    # Risk ratio 1.5 at control 0.2 is 0.30 versus 0.20; the design prior is on log RR.
    ep = BinaryEndpoint(0.2, scale="risk_ratio")
    design = TrialDesign(ep, Normal(math.log(1.5), 0.2), rule=RULE, assumed_effect=1.5,
                         relevant_effect=1.2)
    ds = evaluate(design, [24, 60])
    region = region_by_loop("z", 12, 12, 0.025)
    assert float(ds.power[0]) == pytest.approx(
        power_by_enumeration(region, 12, 12, 0.3, 0.2), abs=ENUM_TOL)
    assert ep.rates(1.5) == (pytest.approx(0.3), 0.2)
    assert float(ds.prob_relevant) == pytest.approx(stats.norm.sf(math.log(1.2), math.log(1.5),
                                                                  0.2))
    lower = BinaryEndpoint(0.4, scale="odds_ratio", better="lower")
    d2 = TrialDesign(lower, BetaRates((40, 60), (25, 75), "odds_ratio"), rule=RULE)
    assert d2.assumed_effect < 1  # the odds ratio at the prior mean of the log odds ratio
    ds2 = evaluate(d2, [40, 200])
    assert np.all(ds2.assurance.values <= float(ds2.ceiling) + 0.025)


def test_case_study_design_file_runs():
    raw = tomllib.loads((ROOT / "case_studies/response_rate/design.toml").read_text())
    assert "nvented" in raw["title"]
    ep = endpoint_from_table(raw["endpoint"], "case study")
    prior = BetaRates(tuple(raw["design_prior"]["control"]),
                      tuple(raw["design_prior"]["treatment"]), ep.scale)
    design = TrialDesign(ep, prior, rule=Significance(**raw["success"]),
                         assumed_effect=raw["effect"]["assumed"],
                         relevant_effect=raw["effect"]["relevant"])
    ds = evaluate(design, [40, 400, 800])
    assert np.all(ds.assurance <= ds.ceiling)
    assert float(ds.power[-1]) > float(ds.assurance[-1])


# ------------------------------------------------------------------------------------------
# non-inferiority
# ------------------------------------------------------------------------------------------
def _restricted_by_optimiser(x_t, n_t, x_c, n_c, d0):
    def nll(p):
        q = p + d0
        return -(special.xlogy(x_t, q) + special.xlog1py(n_t - x_t, -q)
                 + special.xlogy(x_c, p) + special.xlog1py(n_c - x_c, -p))
    lo, hi = max(0.0, -d0), min(1.0, 1.0 - d0)
    p = optimize.minimize_scalar(nll, bounds=(lo, hi), method="bounded",
                                 options={"xatol": 1e-12}).x
    return p + d0, p


def test_farrington_manning_rates_maximise_the_restricted_likelihood():
    # Farrington & Manning 1990: closed-form root; here against a numerical maximisation.
    rng = np.random.default_rng(7)
    for _ in range(200):
        n_t, n_c = (int(v) for v in rng.integers(1, 40, 2))
        x_t, x_c = int(rng.integers(0, n_t + 1)), int(rng.integers(0, n_c + 1))
        d0 = float(rng.uniform(-0.3, 0.3))
        rt, rc = restricted_rates(x_t / n_t, x_c / n_c, n_t, n_c, d0)
        ot, oc = _restricted_by_optimiser(x_t, n_t, x_c, n_c, d0)
        assert float(rt) == pytest.approx(ot, abs=1e-6)  # the optimiser's own tolerance
        assert float(rc) == pytest.approx(oc, abs=1e-6)
    pooled = restricted_rates(0.25, 0.5, 20, 10, 0.0)
    assert float(pooled[0]) == pytest.approx(1 / 3) == float(pooled[1])


def test_non_inferiority_power():
    # Margin 0.1 (higher better): z = (p_t - p_c + 0.1) / se at the restricted rates.
    # Exact: region from the optimiser's restricted rates, power by scipy.stats.binom.
    ep = BinaryEndpoint(0.6)
    rule = Significance(0.025, margin=0.1)
    region = np.zeros((NT + 1, NC + 1), dtype=bool)
    for x_t in range(NT + 1):
        for x_c in range(NC + 1):
            rt, rc = _restricted_by_optimiser(x_t, NT, x_c, NC, -0.1)
            se = math.sqrt(rt * (1 - rt) / NT + rc * (1 - rc) / NC)
            region[x_t, x_c] = (x_t / NT - x_c / NC + 0.1) / se >= stats.norm.isf(0.025)
    calc = calculator(ep, PointMass(0.0), rule)
    assert calc.power(0.0, np.array([NT]), np.array([NC]))[0] == pytest.approx(
        power_by_enumeration(region, NT, NC, 0.6, 0.6), abs=ENUM_TOL)
    # normal approximation: Phi((delta + margin - z se0) / se1), se0 at the restricted rates
    n = 300
    rt, rc = _restricted_by_optimiser(0.6 * n, n, 0.6 * n, n, -0.1)
    se0 = math.sqrt((rt * (1 - rt) + rc * (1 - rc)) / n)
    se1 = math.sqrt(2 * 0.24 / n)
    ref = stats.norm.cdf((0.1 - stats.norm.isf(0.025) * se0) / se1)
    normal = BinaryEndpoint(0.6, exact_up_to=0)
    ours = calculator(normal, PointMass(0.0), rule).power(0.0, np.array([n]), np.array([n]))
    assert float(ours[0]) == pytest.approx(ref, abs=1e-6)


def test_single_arm_margin_shifts_the_reference():
    # H0: p <= 0.3 - 0.05, tested with scipy.stats.binomtest at p = 0.25
    n = 40
    ep = BinaryEndpoint(0.3, layout="single_arm", test="exact_binomial")
    region = np.array([stats.binomtest(x, n, 0.25, alternative="greater").pvalue <= 0.025
                       for x in range(n + 1)])
    calc = calculator(ep, PointMass(0.0), Significance(0.025, margin=0.05))
    assert calc.power(0.1, np.array([n]), np.array([0]))[0] == pytest.approx(
        stats.binom.pmf(np.arange(n + 1), n, 0.4) @ region, abs=ENUM_TOL)


# ------------------------------------------------------------------------------------------
# invariants
# ------------------------------------------------------------------------------------------
beta_pair = st.tuples(st.floats(0.5, 40.0), st.floats(0.5, 40.0))
PROPS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@PROPS
@given(control=beta_pair, treatment=beta_pair, n_t=st.integers(1, 30),
       n_c=st.integers(1, 30), test=st.sampled_from(["z", "fisher_exact"]),
       better=st.sampled_from(["higher", "lower"]), cut=st.floats(-0.5, 0.5))
def test_beta_rates_probabilities_are_coherent(control, treatment, n_t, n_c, test, better,
                                               cut):
    ep = BinaryEndpoint(0.3, test=test, better=better)
    prior = BetaRates(control, treatment)
    cuts = [Cut(-1.0), Cut(cut), Cut(cut + 0.1), Cut(1.0)]
    success, joint = exact_figures(ep, prior, RULE, n_t, n_c, cuts)
    assert 0.0 <= success <= 1.0
    # joints come from Gauss-Legendre quadrature over one rate (observed error <= 2e-10)
    assert joint[0] == pytest.approx(success, abs=1e-8)  # every effect exceeds -1
    assert joint[3] == pytest.approx(0.0, abs=1e-12)  # no effect exceeds 1
    assert joint[2] <= joint[1] + 1e-8 <= success + 2e-8
    if test == "fisher_exact":  # size <= alpha (Fisher is conservative, common practice)
        design = TrialDesign(ep, prior, rule=RULE)
        assert success <= design.ceiling() + 0.025 * (1 - design.ceiling()) + 1e-12


@PROPS
@given(p_c=st.floats(0.05, 0.95), effect=st.floats(-0.5, 0.5), n_t=st.integers(1, 40),
       n_c=st.integers(1, 40), scale=st.sampled_from(["difference", "odds_ratio"]),
       test=st.sampled_from(["z", "chi_square", "fisher_exact"]))
def test_point_mass_assurance_is_power(p_c, effect, n_t, n_c, scale, test):
    ep = BinaryEndpoint(p_c, scale=scale, test=test)
    if scale == "difference" and not 0 <= p_c + effect <= 1:
        effect = 0.0
    calc = calculator(ep, PointMass(effect), RULE)
    sizes = (np.array([n_t]), np.array([n_c]))
    assert calc.success(*sizes, []).success[0] == pytest.approx(
        calc.power(effect, *sizes)[0], abs=1e-12)


# ------------------------------------------------------------------------------------------
# input checks
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("kwargs", "name"),
    [({"control_rate": 0.0}, "control_rate"), ({"control_rate": 1.2}, "control_rate"),
     ({"control_rate": 0.3, "allocation": 0.0}, "allocation"),
     ({"control_rate": 0.3, "allocation": -1.0}, "allocation"),
     ({"control_rate": 0.3, "test": "t"}, "test"),
     ({"control_rate": 0.3, "test": "exact_binomial"}, "test"),
     ({"control_rate": 0.3, "layout": "single_arm", "test": "fisher_exact"}, "test"),
     ({"control_rate": 0.3, "layout": "single_arm", "test": "unpooled_z"}, "test"),
     ({"control_rate": 0.3, "scale": "hazard_ratio"}, "scale"),
     ({"control_rate": 0.3, "better": "up"}, "better"),
     ({"control_rate": 0.3, "control_prior": (0.0, 2.0)}, "control_prior"),
     ({"control_rate": 0.3, "control_prior": (2.0,)}, "control_prior"),
     ({"control_rate": 0.3, "layout": "single_arm", "control_prior": (2.0, 3.0)},
      "control_prior"),
     ({"control_rate": 0.3, "continuity_correction": "yes"}, "continuity_correction"),
     ({"control_rate": 0.3, "test": "fisher_exact", "continuity_correction": True},
      "continuity_correction"),
     ({"control_rate": 0.3, "exact_up_to": -1}, "exact_up_to")],
)
def test_endpoint_rejects_bad_input(kwargs, name):
    with pytest.raises(AssuranceInputError, match=f"'{name}' parameter of BinaryEndpoint"):
        BinaryEndpoint(**kwargs)


@pytest.mark.parametrize(
    ("args", "name"),
    [(((0.0, 2.0), (1.0, 1.0)), "control"), (((1.0, 1.0), (1.0, -2.0)), "treatment"),
     ((1.0, (1.0, 1.0)), "control"), (((1.0, 1.0), "half"), "treatment"),
     (((1.0, 1.0), (1.0, 1.0), "ratio"), "scale")],
)
def test_beta_rates_rejects_bad_input(args, name):
    with pytest.raises(AssuranceInputError, match=f"'{name}' parameter of BetaRates"):
        BetaRates(*args)


def test_region_and_statistic_checks():
    region = SuccessRegion.from_dense(np.ones((3, 2), dtype=bool))
    with pytest.raises(AssuranceInputError, match="'pmf_t' parameter of SuccessRegion"):
        region.probability(np.ones(2), np.ones(2))
    with pytest.raises(AssuranceInputError, match="'weights_c' parameter of SuccessRegion"):
        region.by_treatment(np.ones((4, 3)))
    with pytest.raises(AssuranceInputError, match="'mask' parameter of SuccessRegion"):
        SuccessRegion.from_dense(np.ones(3, dtype=bool))
    with pytest.raises(AssuranceInputError, match="'lo' and 'hi' parameters"):
        SuccessRegion.from_columns(2, [0, 1], [2])
    spec = TestSpec("unpooled_z", 0.025, 1.0, "difference", True)
    with pytest.raises(AssuranceInputError, match="'x_t' parameter of two_arm_z"):
        two_arm_z(spec, 11, 3, 10, 10)
    with pytest.raises(AssuranceInputError, match="'n_c' parameter of two_arm_z"):
        two_arm_z(spec, 1, 0, 10, 0)
    with pytest.raises(AssuranceInputError, match="'spec.test' parameter of two_arm_z"):
        two_arm_z(TestSpec("fisher_exact", 0.025, 1.0, "difference", True), 1, 0, 10, 10)
    with pytest.raises(AssuranceInputError, match="'unpooled_z' compares two arms"):
        success_region(TestSpec("unpooled_z", 0.025, 1.0, "difference", False,
                                reference=0.3), 10, 0)


def test_calculator_and_design_checks():
    ep = BinaryEndpoint(0.3)
    with pytest.raises(AssuranceInputError, match="sizes"):
        evaluate(TrialDesign(ep, Normal(0.1, 0.05)), [1])  # two arms need 2 patients
    with pytest.raises(AssuranceInputError, match="rates must lie in"):
        evaluate(TrialDesign(ep, Normal(0.1, 0.05), assumed_effect=0.8), [20])
    with pytest.raises(AssuranceInputError, match="scale"):
        calculator(BinaryEndpoint(0.3, scale="odds_ratio"), BetaRates((1, 1), (1, 1)), RULE)
    with pytest.raises(AssuranceInputError, match="mixes BetaRates"):
        calculator(ep, Mixture([PointMass(0.0), BetaRates((1, 1), (1, 1))], [0.5, 0.5]), RULE)
    with pytest.raises(AssuranceInputError, match="control_prior"):
        calculator(BinaryEndpoint(0.3, control_prior=(3, 7)), BetaRates((1, 1), (1, 1)), RULE)
    with pytest.raises(AssuranceInputError, match="non-inferiority"):
        calculator(BinaryEndpoint(0.3, test="fisher_exact"), PointMass(0.0),
                   Significance(0.025, margin=0.1))
    with pytest.raises(AssuranceInputError, match="reference rate"):
        calculator(BinaryEndpoint(0.3, layout="single_arm"), BetaRates((1, 1), (1, 1)), RULE)
    with pytest.raises(AssuranceInputError, match="nuisance"):
        ep.calculator(Normal(0.1, 0.05), RULE, draws=100, seed=None,
                      nuisance=Normal(0.3, 0.01))
    with pytest.raises(AssuranceInputError, match="arm sizes"):
        calculator(ep, PointMass(0.1), RULE).success(np.array([0]), np.array([5]), [])


def test_design_tables():
    ep = endpoint_from_table(
        {"type": "binary", "reference_rate": 0.2, "test": "exact_binomial"}, "f.toml")
    assert ep.layout == "single_arm" and ep.control_rate == 0.2
    with pytest.raises(DesignFileError, match="Did you mean 'control_rate'"):
        endpoint_from_table({"type": "binary", "control_rte": 0.2}, "f.toml")
    with pytest.raises(DesignFileError, match="exactly one"):
        endpoint_from_table({"type": "binary"}, "f.toml")
    with pytest.raises(DesignFileError, match="'endpoint.allocation' must be a number > 0"):
        endpoint_from_table({"type": "binary", "control_rate": 0.2, "allocation": 0}, "f.toml")


def test_beta_rates_tables_follow_the_endpoint_scale():
    from assurance.design_file import parse_design

    def design(prior, **endpoint):
        return parse_design({"endpoint": {"type": "binary", "control_rate": 0.3, **endpoint},
                             "effect": {"assumed": 0.1}, "design_prior": prior},
                            source="f.toml")

    prior = design({"family": "beta_rates", "control": [2, 3], "treatment": 0.5},
                   scale="odds_ratio").design.design_prior
    assert prior.scale == "odds_ratio" and prior.treatment == 0.5
    with pytest.raises(DesignFileError, match="must agree"):
        design({"family": "beta_rates", "control": [2, 3], "treatment": [1, 1],
                "scale": "difference"}, scale="risk_ratio")
    with pytest.raises(DesignFileError, match="'design_prior.treatment' is required"):
        design({"family": "beta_rates", "control": [2, 3]})
    with pytest.raises(DesignFileError, match="'design_prior.control'"):
        design({"family": "beta_rates", "control": [2, -3], "treatment": 0.4})
    with pytest.raises(DesignFileError, match="binary endpoints only"):
        prior_from_table({"family": "beta_rates", "control": [2, 3], "treatment": [1, 1]},
                         "design_prior")


def test_posterior_tail_recurrence_matches_betainc():
    # the cumulative-sum recurrence against scipy.special.betainc directly
    for a, b, n in ((0.5, 0.7, 40), (20.0, 3.0, 200), (2.0, 2.0, 1)):
        t = np.array([0.0, 1e-6, 0.2, 0.5, 0.93, 1.0])
        x = np.arange(n + 1)[:, None]
        ref = special.betainc(a + x, b + n - x, t[None, :])
        np.testing.assert_allclose(posterior_below(a, b, n, t), ref, rtol=0, atol=1e-12)


def test_no_warning_for_valid_priors():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        calculator(BinaryEndpoint(0.3, scale="odds_ratio", control_prior=(2, 2)),
                   Normal(0.0, 3.0), RULE)


def _fleiss_power(p_t, p_c, n_t, n_c, alpha):
    """Normal-approximation power of the pooled z test (Fleiss, Tytun & Ury 1980), by hand."""
    pooled = (n_t * p_t + n_c * p_c) / (n_t + n_c)
    se0 = math.sqrt(pooled * (1 - pooled) * (1 / n_t + 1 / n_c))
    se1 = math.sqrt(p_t * (1 - p_t) / n_t + p_c * (1 - p_c) / n_c)
    z = (p_t - p_c - Z_CRIT[alpha] * se0) / se1
    return 0.5 * math.erfc(-z / math.sqrt(2))  # standard normal distribution function


Z_CRIT = {0.025: stats.norm.isf(0.025)}


@pytest.mark.parametrize(("control", "treatment"),
                         [((30.0, 70.0), (4.5, 5.5)), ((2.0, 2.0), (40.0, 60.0))])
def test_beta_rates_normal_approximation_matches_dblquad(control, treatment):
    # Beyond the switch point: dblquad over both beta densities of the power formula written
    # above, restricted to p_t - p_c > cut for the decomposition (both orientations).
    ep = BinaryEndpoint(0.3, exact_up_to=0)
    n = 400
    f_c, f_t = stats.beta(*control).pdf, stats.beta(*treatment).pdf

    def integral(cut):
        return integrate.dblquad(
            lambda t, c: f_c(c) * f_t(t) * _fleiss_power(t, c, n, n, 0.025), 0, 1,
            lambda c: min(max(c + cut, 0.0), 1.0), 1.0, epsabs=1e-10)[0]

    success, joint = exact_figures(ep, BetaRates(control, treatment), RULE, n, n,
                                   [Cut(0.0), Cut(0.1)])
    assert success == pytest.approx(integral(-1.0), abs=DBLQUAD_TOL)
    assert joint[0] == pytest.approx(integral(0.0), abs=DBLQUAD_TOL)
    assert joint[1] == pytest.approx(integral(0.1), abs=DBLQUAD_TOL)


def test_mixture_of_beta_rates_is_the_weighted_average():
    # Linearity of expectation: a mixture prior's assurance and joints are the weighted sums
    # of its parts' (and the mixture's ceiling is the weighted sum of P(p_t > p_c)).
    ep = BinaryEndpoint(0.3, test="fisher_exact")
    a, b = BetaRates((3.0, 7.0), (3.0, 7.0)), BetaRates((30.0, 70.0), (9.0, 11.0))
    mix = Mixture([a, b], [0.3, 0.7])
    cuts = [Cut(0.0), Cut(0.1, True)]
    s_mix, j_mix = exact_figures(ep, mix, RULE, NT, NC, cuts)
    s_a, j_a = exact_figures(ep, a, RULE, NT, NC, cuts)
    s_b, j_b = exact_figures(ep, b, RULE, NT, NC, cuts)
    assert s_mix == pytest.approx(0.3 * s_a + 0.7 * s_b, abs=ENUM_TOL)
    for m, x, y in zip(j_mix, j_a, j_b, strict=True):
        assert m == pytest.approx(0.3 * x + 0.7 * y, abs=ENUM_TOL)
    design = TrialDesign(ep, mix, rule=RULE)
    # identical beta priors on both arms: P(p_t > p_c) = 1/2 by symmetry
    assert design.prob_benefit() == pytest.approx(0.3 * 0.5 + 0.7 * b.prob_above(0.0),
                                                  abs=1e-10)


def test_beta_nodes_kept_for_reuse_are_the_nodes_made_afresh():
    # the nodes of a Beta prior are kept (bounded) and shared: a kept answer must equal a
    # fresh one bit for bit, be read-only, and the store must not grow past its bound
    from assurance.compute import binary_exact as be

    arm = be.RateArm.beta(3.5, 9.25)
    lo, hi = np.array([0.0, 0.2, 0.45]), np.array([0.2, 0.45, 1.0])
    first = arm.nodes(lo, hi, 16)
    be._NODES_MADE.clear()
    fresh = arm.nodes(lo, hi, 16)
    again = arm.nodes(lo, hi, 16)
    for a, b, c in zip(first, fresh, again, strict=True):
        np.testing.assert_array_equal(a, b)
        assert c is b and not c.flags.writeable
    # integrating p over the prior on [0, 1] gives the Beta mean a / (a + b) (common
    # practice)
    p, w = arm.nodes(np.array([0.0]), np.array([1.0]), 32)
    assert float(np.sum(p * w)) == pytest.approx(3.5 / 12.75, abs=1e-6)
    for k in range(be._NODES_KEPT + 10):
        arm.nodes(np.array([0.0]), np.array([0.5 + k * 1e-3]), 8)
    assert len(be._NODES_MADE) <= be._NODES_KEPT
