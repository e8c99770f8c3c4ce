"""Precision planning: posterior interval width versus n (assurance.precision).

Sources of the reference values (each check names its own):

* Known sigma: the posterior variance does not depend on the data, so the n meeting a
  length ``l`` is ``(2 z sigma / l)^2 - n0`` and ALC, ACC and WOC coincide (Joseph & Belisle
  1997, The Statistician 46:209-226, known-variance case).
* One proportion: an independent enumeration written here with ``scipy.stats.betabinom``
  (prior predictive) and a shortest-interval search on ``scipy.stats.beta``
  (``scipy.optimize.minimize_scalar`` over the lower tail probability), for the criteria of
  Joseph, Wolfson & du Berger (1995, The Statistician 44:143-154); for many sizes in one
  call (the continuation along x), every outcome of a few sizes against bisections on
  ``scipy.stats.beta`` (equal log densities at the ends, equal tails) written here.
* Normal-gamma: ``scipy.integrate`` over the prior predictive density of (sample mean,
  sum of squares), derived here by integrating the precision out in closed form (common
  practice: normal-gamma conjugacy); quantiles against direct simulation of the data.
* Simulation engines: against exact sums over the data written here (binomial event counts
  for the hazard ratio, Poisson / negative binomial totals for the rate ratio, all outcome
  pairs with a numerical convolution of the two beta posteriors for the difference of two
  proportions) and against the exact one-proportion enumeration, within 4 reported Monte
  Carlo SEs (each data set's interval is computed without posterior draws; a floor only
  for the reference's own grid error, stated at the check). Quantile-based figures:
  tests/test_precision_quantiles.py.

Published table values of Joseph, Wolfson & du Berger (1995) are not checked: they could not
be verified here.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, stats

from assurance import AssuranceInputError, Normal, PointMass
from assurance.compute import interval_width
from assurance.compute.interval_width import _beta_outcomes, beta_equal_tailed_coverage
from assurance.precision import (
    BetaPrior,
    HazardRatio,
    NormalGammaPrior,
    NormalMean,
    NormalMeanUnknownSD,
    OneProportion,
    RateRatio,
    TwoProportions,
    interval_width_curve,
    solve_precision_n,
)

# Both the package and the references below solve to ~1e-10 (Brent's method at xatol 1e-13,
# the package's iterations at relative 1e-10 or better); 1e-8 leaves room for rounding.
ENUM_TOL = 1e-8


# ------------------------------------------------------------------------------------------
# independent references
# ------------------------------------------------------------------------------------------
def ref_shortest_width(a: float, b: float, cov: float) -> float:
    """Shortest interval of a beta distribution: search over the lower tail probability."""
    d = stats.beta(a, b)
    if a > 1 and b > 1:
        res = optimize.minimize_scalar(lambda p: d.ppf(p + cov) - d.ppf(p),
                                       bounds=(0.0, 1.0 - cov), method="bounded",
                                       options={"xatol": 1e-13})
        return float(res.fun)
    return float(min(d.ppf(cov), 1.0 - d.ppf(1.0 - cov)))  # monotone / U-shaped: an end


def ref_best_coverage(a: float, b: float, length: float) -> float:
    """Largest probability a window of the given length holds (search over its start)."""
    d = stats.beta(a, b)
    if a > 1 and b > 1:
        mode = (a - 1) / (a + b - 2)
        res = optimize.minimize_scalar(lambda t: -(d.cdf(t + length) - d.cdf(t)),
                                       bounds=(max(0.0, mode - length), min(mode, 1 - length)),
                                       method="bounded", options={"xatol": 1e-13})
        return float(-res.fun)
    return float(max(d.cdf(length), d.sf(1.0 - length)))


def ref_equal_tailed_coverage(a: float, b: float, length: float) -> float:
    """Window [c, c + length] with equal tails: Brent's method on log c (the start of a
    J-shaped posterior's window can be far below any absolute tolerance, e.g. 9e-19 for
    beta(0.3, 80) and length 0.1)."""
    d = stats.beta(a, b)

    def gap(u: float) -> float:
        return d.cdf(math.exp(u)) - d.sf(math.exp(u) + length)

    if gap(-740.0) >= 0:
        c = 0.0
    else:
        c = math.exp(optimize.brentq(gap, -740.0, math.log1p(-length), xtol=1e-14,
                                     rtol=1e-15))
    return float(1.0 - d.cdf(c) - d.sf(c + length))


def _bisect(step, lo: np.ndarray, hi: np.ndarray, geometric: bool = False,
            iters: int = 200) -> np.ndarray:
    """Elementwise bisection: ``step(mid)`` is True where the root lies above mid."""
    lo, hi = lo.astype(float).copy(), hi.astype(float).copy()
    for _ in range(iters):
        mid = np.exp(0.5 * (np.log(lo) + np.log(hi))) if geometric else 0.5 * (lo + hi)
        up = step(mid)
        lo, hi = np.where(up, mid, lo), np.where(up, hi, mid)
    return 0.5 * (lo + hi)


def ref_beta_outcomes(n: int, prior, cov: float, length: float, interval: str):
    """Width and fixed-length coverage of every posterior beta(a + x, b + n - x), straight
    from scipy.stats.beta, one n at a time: shortest interval and best window by bisection
    for equal log densities at the ends (the log density is concave for shapes > 1, an end
    interval otherwise, as in ref_shortest_width); equal-tailed quantiles by ppf, the
    equal-tailed window by bisection in log c."""
    x = np.arange(n + 1)
    a, b = prior[0] + x, prior[1] + n - x
    d = stats.beta(a, b)
    inner = (a > 1) & (b > 1)
    if interval == "highest_density":
        p = _bisect(lambda t: d.logpdf(d.ppf(t)) < d.logpdf(d.ppf(t + cov)),
                    np.zeros(n + 1), np.full(n + 1, 1.0 - cov))
        width = np.where(inner, d.ppf(p + cov) - d.ppf(p),
                         np.minimum(d.ppf(cov), 1.0 - d.ppf(1.0 - cov)))
        mode = np.where(inner, (a - 1) / np.maximum(a + b - 2, 1e-300), 0.5)
        c = _bisect(lambda t: d.logpdf(t + length) > d.logpdf(t),
                    np.maximum(mode - length, 0.0), np.minimum(mode, 1.0 - length))
        cover = np.where(inner, d.cdf(c + length) - d.cdf(c),
                         np.maximum(d.cdf(length), d.sf(1.0 - length)))
    else:
        width = d.ppf(0.5 + cov / 2) - d.ppf(0.5 - cov / 2)
        c = _bisect(lambda t: d.cdf(t) < d.sf(t + length), np.full(n + 1, 1e-320),
                    np.full(n + 1, 1.0 - length), geometric=True)
        cover = 1.0 - d.cdf(c) - d.sf(c + length)
    return width, cover


def ref_binomial_summary(n, prior, design, cov, length, share, interval="highest_density"):
    x = np.arange(n + 1)
    a, b = prior[0] + x, prior[1] + n - x
    if interval == "highest_density":
        width = np.array([ref_shortest_width(ai, bi, cov) for ai, bi in zip(a, b, strict=True)])
        cover = np.array([ref_best_coverage(ai, bi, length) for ai, bi in zip(a, b, strict=True)])
    else:
        width = stats.beta.ppf(0.5 + cov / 2, a, b) - stats.beta.ppf(0.5 - cov / 2, a, b)
        cover = np.array([ref_equal_tailed_coverage(ai, bi, length)
                          for ai, bi in zip(a, b, strict=True)])
    return summarise_outcomes(n, design, width, cover, share)


def summarise_outcomes(n, design, width, cover, share):
    """The criteria's summaries over x = 0..n from each outcome's width and coverage."""
    x = np.arange(n + 1)
    if isinstance(design, tuple):
        pmf = stats.betabinom.pmf(x, n, *design)
    else:
        pmf = stats.binom.pmf(x, n, design)

    def lower_quantile(q):
        order = np.argsort(width, kind="stable")
        cum = np.cumsum(pmf[order])
        return width[order][np.searchsorted(cum, q - 1e-12)]

    # most likely first; equally likely outcomes longest interval first
    order = sorted(range(n + 1), key=lambda i: (-round(math.log(pmf[i]), 9), -width[i]))
    kept, total = [], 0.0
    for i in order:
        if total >= share - 1e-12:
            break
        kept.append(i)
        total += pmf[i]
    return {
        "width_mean": float(pmf @ width), "width_median": lower_quantile(0.5),
        "width_q90": lower_quantile(0.9), "width_worst": width.max(),
        "width_worst_likely": width[kept].max(), "coverage_mean": float(pmf @ cover),
        "coverage_worst": cover.min(), "coverage_worst_likely": cover[kept].min(),
    }


def ng_predictive_density(n: int, design: NormalGammaPrior):
    """Prior predictive density of (sample mean, sum of squares) under a normal-gamma prior.

    Given tau: ybar ~ N(m, v / tau) with v = 1/n + 1/n0, SS * tau ~ chi2_{n-1}, independent;
    tau ~ Gamma(a, b). Integrating tau out: the tau-power is a + n/2 - 1 and
    ``int tau^(a + n/2 - 1) exp(-R tau) = Gamma(a + n/2) / R^(a + n/2)``,
    ``R = b + SS/2 + (ybar - m)^2 / (2 v)``.
    """
    a, b, m = design.shape, design.rate, design.mean
    v = 1.0 / n + 1.0 / design.n0
    half_df = (n - 1) / 2
    log_const = (-0.5 * math.log(2 * math.pi * v) + a * math.log(b) - math.lgamma(a)
                 + math.lgamma(a + n / 2))
    if n == 1:
        return lambda ybar: math.exp(log_const - (a + 0.5) * math.log(
            b + (ybar - m) ** 2 / (2 * v)))
    log_const += -half_df * math.log(2) - math.lgamma(half_df)

    def dens(ss: float, ybar: float) -> float:
        r = b + ss / 2 + (ybar - m) ** 2 / (2 * v)
        return math.exp(log_const + (half_df - 1) * math.log(ss) - (a + n / 2) * math.log(r))

    return dens


def ng_reference(n, analysis: NormalGammaPrior, design: NormalGammaPrior, cov, length):
    """Average width and coverage by scipy.integrate over the prior predictive."""
    a_n = analysis.shape + n / 2
    k_n = analysis.n0 + n
    tq = stats.t.ppf(0.5 + cov / 2, 2 * a_n)

    def rate(ybar, ss):
        return analysis.rate + ss / 2 + analysis.n0 * n * (ybar - analysis.mean) ** 2 / (
            2 * (analysis.n0 + n))

    def width(ybar, ss):
        return 2 * tq * math.sqrt(rate(ybar, ss) / (a_n * k_n))

    def cover(ybar, ss):
        return 1 - 2 * stats.t.cdf(-length / 2 / math.sqrt(rate(ybar, ss) / (a_n * k_n)),
                                   2 * a_n)

    dens = ng_predictive_density(n, design)
    # integrate on scaled variables ybar = m + s_y t, SS = s_ss u (O(1) integrands)
    s_y = math.sqrt((1 / n + 1 / design.n0) * design.rate / design.shape)
    s_ss = max(n - 1, 1) * design.rate / design.shape
    m = design.mean
    out = []
    for g in (width, cover):
        if n == 1:
            val = integrate.quad(lambda t, g=g: g(m + s_y * t, 0.0) * dens(m + s_y * t) * s_y,
                                 -np.inf, np.inf, epsabs=1e-13, epsrel=1e-12)[0]
        else:
            val = integrate.dblquad(
                lambda u, t, g=g: g(m + s_y * t, s_ss * u) * dens(s_ss * u, m + s_y * t)
                * s_y * s_ss, -np.inf, np.inf, 0.0, np.inf, epsabs=1e-12, epsrel=1e-11)[0]
        out.append(val)
    return out


# ------------------------------------------------------------------------------------------
# known sigma
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("sigma, length, n0, coverage", [
    (1.0, 0.2, 1.0, 0.95),
    (2.0, 0.3, 5.0, 0.95),
    (10.0, 4.0, 0.37, 0.9),
    (3.0, 1.0, 12.5, 0.99),
])
def test_known_sigma_closed_form_and_criteria_coincide(sigma, length, n0, coverage):
    # Joseph & Belisle (1997): n = (2 z sigma / l)^2 - n0, n0 = sigma^2 / prior variance
    z = stats.norm.ppf(0.5 + coverage / 2)
    expected = math.ceil((2 * z * sigma / length) ** 2 - n0)
    model = NormalMean(sigma, prior=Normal(0.0, sigma / math.sqrt(n0)), layout="single_arm")
    answers = {c: solve_precision_n(model, length=length, coverage=coverage, criterion=c)
               for c in ("ALC", "ACC", "WOC", "MWOC")}
    assert {a.n_total for a in answers.values()} == {expected}
    assert all(a.reached for a in answers.values())
    ds = interval_width_curve(model, [expected - 1, expected], coverage=coverage, length=length)
    for name in ("width_median", "width_q90", "width_worst", "width_worst_likely"):
        np.testing.assert_allclose(ds[name], ds.width_mean, rtol=1e-15)


def test_two_means_posterior_width():
    # difference of means, flat prior on the control level: posterior precision of the
    # difference 1/v0 + 1/(sigma^2 (1/n_t + 1/n_c)) (common practice: conjugate normal)
    model = NormalMean(4.0, prior=Normal(1.0, 2.0), allocation=2.0)
    ds = interval_width_curve(model, [30, 90, 301], length=3.0)
    n_t, n_c = ds.n_treatment.values, ds.n_control.values
    sd = 1 / np.sqrt(1 / 4.0 + 1 / (16.0 * (1 / n_t + 1 / n_c)))
    np.testing.assert_allclose(ds.width_mean, 2 * stats.norm.ppf(0.975) * sd, rtol=1e-14)
    np.testing.assert_allclose(ds.coverage_mean, 2 * stats.norm.cdf(1.5 / sd) - 1, rtol=1e-12)
    np.testing.assert_allclose(ds.frequentist_ci_width,
                               2 * stats.norm.ppf(0.975) * 4.0 * np.sqrt(1 / n_t + 1 / n_c))
    assert list(n_t + n_c) == [30, 90, 301]


# ------------------------------------------------------------------------------------------
# one proportion, exact
# ------------------------------------------------------------------------------------------
BINOMIAL_CASES = [
    # (analysis prior, design, n, coverage, length, likely share, interval)
    ((1.0, 1.0), (1.0, 1.0), 7, 0.95, 0.25, 0.95, "highest_density"),
    ((1.0, 1.0), (1.0, 1.0), 40, 0.95, 0.25, 0.9, "highest_density"),
    ((2.0, 5.0), (6.0, 14.0), 25, 0.9, 0.2, 0.8, "highest_density"),
    ((0.5, 0.5), 0.2, 15, 0.95, 0.3, 0.95, "highest_density"),
    ((14.0, 30.0), (14.0, 30.0), 60, 0.99, 0.15, 0.95, "highest_density"),
    ((2.0, 5.0), (6.0, 14.0), 25, 0.9, 0.2, 0.8, "equal_tailed"),
]


@pytest.mark.parametrize("prior, design, n, cov, length, share, interval", BINOMIAL_CASES)
def test_one_proportion_against_enumeration(prior, design, n, cov, length, share, interval):
    # reference: scipy.stats.betabinom / binom and searches on scipy.stats.beta (this file)
    model = OneProportion(BetaPrior(*prior),
                          design_prior=BetaPrior(*design) if isinstance(design, tuple)
                          else design)
    ds = interval_width_curve(model, [n], coverage=cov, length=length, likely_share=share,
                              interval=interval)
    ref = ref_binomial_summary(n, prior, design, cov, length, share, interval)
    for name, value in ref.items():
        assert float(ds[name][0]) == pytest.approx(value, abs=ENUM_TOL), name


def test_one_proportion_solved_n_against_enumeration():
    # each criterion met at the solved n and missed at n - 1, judged by the independent
    # enumeration of this file (Joseph, Wolfson & du Berger 1995 criteria)
    model = OneProportion(BetaPrior(3, 3))
    length, cov = 0.3, 0.95
    for crit, key, ok in [("ALC", "width_mean", lambda v: v <= length),
                          ("ACC", "coverage_mean", lambda v: v >= cov),
                          ("WOC", "width_worst", lambda v: v <= length),
                          ("MWOC", "width_worst_likely", lambda v: v <= length)]:
        ans = solve_precision_n(model, length=length, coverage=cov, criterion=crit)
        n = ans.n_total
        at_n = ref_binomial_summary(n, (3, 3), (3, 3), cov, length, 0.95)[key]
        before = ref_binomial_summary(n - 1, (3, 3), (3, 3), cov, length, 0.95)[key]
        assert ok(at_n) and not ok(before), (crit, n, at_n, before)
        assert ans.achieved == pytest.approx(at_n, abs=ENUM_TOL)
        assert ans.previous == pytest.approx(before, abs=ENUM_TOL)


# Many sizes in one call take the continuation path (each outcome's interval from the
# previous outcome's), few sizes the outcome-by-outcome one (the number of sizes where one
# becomes faster than the other is a tuning constant, set aside here so that each path is
# checked whatever it is); both are checked against ref_beta_outcomes (scipy.stats.beta,
# one n at a time). Both
# sides solve to ~1e-13 (the references bisect to adjacent floats; scipy's incomplete beta
# function is off by up to ~1e-12 at shapes in the hundreds, checked here against an
# extended-precision quadrature), so 1e-9 is a wide margin that any misplaced interval of a
# single outcome still exceeds.
MANY_TOL = 1e-9
MANY_SIZES_CASES = [
    # (analysis prior, design, sizes, coverage, length, interval, sizes checked)
    ((1.0, 1.0), (1.0, 1.0), np.arange(10, 1001), 0.95, 0.1, "highest_density",
     (10, 23, 24, 517, 1000)),
    ((1.0, 1.0), (1.0, 1.0), np.arange(10, 1001), 0.95, 0.1, "equal_tailed",
     (10, 23, 24, 517, 1000)),
    ((2.0, 8.0), 0.3, np.arange(5, 400, 3), 0.9, 0.2, "highest_density", (5, 101, 398)),
    ((2.0, 8.0), (3.0, 9.0), np.arange(5, 400, 3), 0.9, 0.2, "equal_tailed", (5, 101, 398)),
    # J-shaped posteriors (shape 0.3 at x = 0): outcomes solved directly below the chains
    ((0.3, 3.0), (2.0, 2.0), np.arange(1, 200), 0.99, 0.3, "equal_tailed", (1, 2, 150)),
    ((0.5, 0.5), 0.2, np.arange(1, 200), 0.8, 0.05, "highest_density", (1, 2, 3, 199)),
    # long windows: coverages within 1e-15 of 1, the start far below 1e-50 for the
    # highest-density window near 0 (both were once wrong along a whole chain)
    ((2.0, 8.0), (2.0, 8.0), np.arange(20, 401), 0.95, 0.45, "equal_tailed", (234, 321)),
    ((1.002, 4.453), (1.002, 4.453), np.arange(500, 1419, 17), 0.999, 0.5,
     "highest_density", (1384,)),
]


@pytest.mark.parametrize("prior, design, sizes, cov, length, interval, checked",
                         MANY_SIZES_CASES)
def test_one_proportion_many_sizes_against_per_n_reference(prior, design, sizes, cov, length,
                                                           interval, checked, monkeypatch):
    # reference: scipy.stats.beta per outcome and scipy.stats.betabinom / binom per n (this
    # file), one n at a time
    _continuation(monkeypatch, True)
    widths, covers = _beta_outcomes(sizes, prior, cov, length, interval, True)
    start = np.concatenate([[0], np.cumsum(sizes + 1)])
    model = OneProportion(BetaPrior(*prior),
                          design_prior=BetaPrior(*design) if isinstance(design, tuple)
                          else design)
    ds = interval_width_curve(model, sizes, coverage=cov, length=length, interval=interval,
                              likely_share=0.9)
    for n in checked:
        i = int(np.flatnonzero(sizes == n)[0])
        width, cover = ref_beta_outcomes(n, prior, cov, length, interval)
        got = slice(start[i], start[i + 1])
        np.testing.assert_allclose(widths[got], width, rtol=0, atol=MANY_TOL, err_msg=str(n))
        np.testing.assert_allclose(covers[got], cover, rtol=0, atol=MANY_TOL, err_msg=str(n))
        ref = summarise_outcomes(n, design, width, cover, 0.9)
        for name, value in ref.items():
            assert float(ds[name][i]) == pytest.approx(value, abs=MANY_TOL), (n, name)


def _continuation(monkeypatch, on: bool) -> None:
    """Every call by continuation (on) or outcome by outcome (off)."""
    for name in ("_SWEEP_MIN_CHAINS", "_SWEEP_MIN_CHAINS_HD"):
        monkeypatch.setattr(interval_width, name, 1 if on else 1 << 40)


def test_one_proportion_continuation_equals_outcome_by_outcome(monkeypatch):
    # the two paths agree to rounding (each is also checked against scipy above)
    model = OneProportion(BetaPrior(2.0, 3.0), design_prior=BetaPrior(4.0, 6.0))
    sizes = np.arange(40, 100)
    for interval in ("highest_density", "equal_tailed"):
        _continuation(monkeypatch, True)
        many = interval_width_curve(model, sizes, length=0.15, interval=interval)
        _continuation(monkeypatch, False)
        few = interval_width_curve(model, [57, 99], length=0.15, interval=interval)
        for name in few.data_vars:
            np.testing.assert_allclose(many[name].sel(n=[57, 99]), few[name], rtol=0,
                                       atol=1e-11, err_msg=name)


def test_equal_tailed_coverage_of_j_shaped_posteriors():
    # the window's start is 9e-19 here (5e-16, 7e-12 below): an absolute tolerance on it
    # once left the coverage off by up to 1.2e-4; reference: Brent's method on log c with
    # scipy.stats.beta (this file). Tails of 1.6e-5 .. 1.8e-3 carry scipy's ~1e-13 relative
    # rounding, hence 1e-11.
    for a, b, length in ((0.3, 80.0, 0.1), (0.3, 20.0, 0.3), (0.3, 80.0, 0.05),
                         (0.8, 80.0, 0.3)):
        got = beta_equal_tailed_coverage(np.array([a]), np.array([b]), length)[0]
        assert got == pytest.approx(ref_equal_tailed_coverage(a, b, length), abs=1e-11)


# ------------------------------------------------------------------------------------------
# normal mean, unknown SD
# ------------------------------------------------------------------------------------------
NG_CASES = [
    # matched priors: the closed form E[W^-1/2] path
    (NormalGammaPrior(0.0, 2.0, 3.0, 6.0), None, (1, 20)),
    # vague analysis prior on the mean (n0 = 0): beta path with n - 1
    (NormalGammaPrior(0.0, 0.0, 1.0, 1.0), NormalGammaPrior(1.0, 2.0, 3.0, 6.0), (9,)),
    # reference prior p ~ 1/sigma: t interval, proper from n = 2
    (NormalGammaPrior(0.0, 0.0, -0.5, 0.0), NormalGammaPrior(0.0, 1.0, 4.0, 4.0), (2,)),
    # everything different: the general quadrature
    (NormalGammaPrior(0.0, 1.0, 1.0, 1.0), NormalGammaPrior(1.0, 2.0, 3.0, 6.0), (1, 12)),
    (NormalGammaPrior(0.5, 4.0, 2.0, 5.0), NormalGammaPrior(-1.0, 0.5, 8.0, 10.0), (40,)),
]


# quadpack's "slowly convergent" notice comes from the far tail of the sum of squares; the
# matched case agrees with the closed form to 1e-9, well inside the 2e-7 checked
@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")
@pytest.mark.parametrize("analysis, design, sizes", NG_CASES)
def test_normal_gamma_average_width_against_integration(analysis, design, sizes):
    # reference: scipy.integrate over the prior predictive density of (ybar, SS) derived in
    # ng_predictive_density; quad/dblquad at epsrel 1e-10, the package's quadrature ~1e-7
    model = NormalMeanUnknownSD(analysis, design_prior=design)
    ds = interval_width_curve(model, list(sizes), coverage=0.9, length=1.5)
    for i, n in enumerate(sizes):
        width, cover = ng_reference(n, analysis, model.design, 0.9, 1.5)
        assert float(ds.width_mean[i]) == pytest.approx(width, rel=2e-7)
        assert float(ds.coverage_mean[i]) == pytest.approx(cover, abs=2e-7)


@pytest.mark.parametrize("analysis, design", [(a, d) for a, d, _ in NG_CASES])
def test_normal_gamma_quantiles_against_simulation(analysis, design):
    # the width quantiles are exact, so the simulated share of widths below each is
    # binomial: within 4 binomial SEs of the level
    model = NormalMeanUnknownSD(analysis, design_prior=design)
    n, draws = max(model.smallest_n, 4), 200_000
    ds = interval_width_curve(model, [n], coverage=0.95, likely_share=0.8)
    de = model.design
    rng = np.random.default_rng(11)
    tau = rng.gamma(de.shape, 1 / de.rate, draws)
    mu = rng.normal(de.mean, 1 / np.sqrt(de.n0 * tau))
    ybar = rng.normal(mu, 1 / np.sqrt(n * tau))
    ss = rng.chisquare(n - 1, draws) / tau
    rate = analysis.rate + ss / 2 + analysis.n0 * n * (ybar - analysis.mean) ** 2 / (
        2 * (analysis.n0 + n))
    a_n, k_n = analysis.shape + n / 2, analysis.n0 + n
    width = 2 * stats.t.ppf(0.975, 2 * a_n) * np.sqrt(rate / (a_n * k_n))
    for name, q in (("width_median", 0.5), ("width_q90", 0.9), ("width_worst_likely", 0.8)):
        share = float(np.mean(width <= float(ds[name][0])))
        assert abs(share - q) <= 4 * math.sqrt(q * (1 - q) / draws), name


# ------------------------------------------------------------------------------------------
# simulation engines against exact sums
# ------------------------------------------------------------------------------------------
def _within(sim, exact, mcse, floor):
    assert abs(sim - exact) <= 4 * mcse + floor, (sim, exact, mcse)


@pytest.mark.parametrize("interval", ["highest_density", "equal_tailed"])
def test_one_proportion_simulation_matches_enumeration(interval):
    # each simulated data set's interval is exact (no posterior draws): no bias floor
    model = OneProportion(BetaPrior(2, 3), design_prior=BetaPrior(3, 9))
    sizes = [30, 150]
    exact = interval_width_curve(model, sizes, length=0.15, interval=interval)
    sim = interval_width_curve(model, sizes, length=0.15, interval=interval,
                               method="simulation", draws=1500, posterior_draws=2000, seed=3)
    for i in range(2):
        w = float(exact.width_mean[i])
        _within(float(sim.width_mean[i]), w, float(sim.width_mean_mcse[i]), 0.0)
        _within(float(sim.coverage_mean[i]), float(exact.coverage_mean[i]),
                float(sim.coverage_mean_mcse[i]), 0.0)


def test_hazard_ratio_simulation_matches_exact_sum():
    # fixed true log HR: event counts are binomial per arm, so the average width is a
    # double sum over (d_t, d_c) (exact given the model's normal approximation)
    p_c, hr, n = 0.4, 0.7, 160
    model = HazardRatio(Normal(0.0, 0.5), event_probability=p_c,
                        design_prior=PointMass(math.log(hr)))
    sim = interval_width_curve(model, [n], length=0.6, draws=4000, seed=9)
    n_t, n_c = int(sim.n_treatment[0]), int(sim.n_control[0])
    p_t = 1 - (1 - p_c) ** hr  # proportional hazards, same follow-up
    d_t, d_c = np.arange(n_t + 1.0), np.arange(n_c + 1.0)
    with np.errstate(divide="ignore"):
        var = 1 / d_t[:, None] + 1 / d_c[None, :]
    sd = np.sqrt(1 / (1 / 0.25 + 1 / var))
    weight = stats.binom.pmf(d_t, n_t, p_t)[:, None] * stats.binom.pmf(d_c, n_c, p_c)[None, :]
    width = float(np.sum(weight * 2 * stats.norm.ppf(0.975) * sd))
    cover = float(np.sum(weight * (2 * stats.norm.cdf(0.3 / sd) - 1)))
    _within(float(sim.width_mean[0]), width, float(sim.width_mean_mcse[0]), 0.0)
    _within(float(sim.coverage_mean[0]), cover, float(sim.coverage_mean_mcse[0]), 0.0)


@pytest.mark.parametrize("k", [0.0, 0.6])
def test_rate_ratio_simulation_matches_exact_sum(k):
    # fixed true rate ratio: arm totals are Poisson (k = 0) or negative binomial with size
    # n/k and mean n mu (a sum of n NB(mu, k) counts; scipy.stats.nbinom), summed exactly
    rate, expo, rr, n = 0.3, 2.0, 0.8, 120
    model = RateRatio(Normal(0.0, 1.0), control_rate=rate, exposure=expo, overdispersion=k,
                      design_prior=PointMass(math.log(rr)))
    sim = interval_width_curve(model, [n], length=0.5, draws=4000, seed=4)
    n_t, n_c = int(sim.n_treatment[0]), int(sim.n_control[0])
    mu_c = rate * expo

    def pmf(y, arm_n, mu):
        if k == 0:
            return stats.poisson.pmf(y, arm_n * mu)
        size = arm_n / k
        return stats.nbinom.pmf(y, size, size / (size + arm_n * mu))

    y = np.arange(0, 400.0)
    with np.errstate(divide="ignore"):
        var = ((n_t / y[:, None] + k) / n_t) + ((n_c / y[None, :] + k) / n_c)
    sd = np.sqrt(1 / (1 + 1 / var))
    weight = pmf(y, n_t, mu_c * rr)[:, None] * pmf(y, n_c, mu_c)[None, :]
    assert weight.sum() == pytest.approx(1.0, abs=1e-12)
    width = float(np.sum(weight * 2 * stats.norm.ppf(0.975) * sd))
    cover = float(np.sum(weight * (2 * stats.norm.cdf(0.25 / sd) - 1)))
    _within(float(sim.width_mean[0]), width, float(sim.width_mean_mcse[0]), 0.0)
    _within(float(sim.coverage_mean[0]), cover, float(sim.coverage_mean_mcse[0]), 0.0)


def _difference_interval(a_t, b_t, a_c, b_c, cov, interval, grid):
    """Interval of p_t - p_c under independent betas, from its distribution function
    ``F(d) = int F_t(p + d) f_c(p) dp`` (Gauss-Legendre over p, 200 nodes) on a grid of d,
    quantiles by linear interpolation."""
    x, w = np.polynomial.legendre.leggauss(200)
    p, w = (x + 1) / 2, w / 2
    cdf = stats.beta.cdf(p[None, :] + grid[:, None], a_t, b_t) @ (w * stats.beta.pdf(p, a_c,
                                                                                     b_c))
    def q(u):
        return np.interp(u, cdf, grid)
    if interval == "equal_tailed":
        return q(0.5 + cov / 2) - q(0.5 - cov / 2)
    lows = np.linspace(0.0, 1.0 - cov, 2001)[1:-1]
    return float(np.min(q(lows + cov) - q(lows)))


@pytest.mark.parametrize("interval", ["equal_tailed", "highest_density"])
def test_two_proportions_simulation_matches_enumeration(interval):
    # all outcome pairs (binomial at fixed design rates) with each posterior's interval from
    # a numerical convolution of the two betas (this file); floor 2e-4 for the convolution
    # grid (step 1e-3; interpolation error ~1e-6) and the 2000-point search over the lower
    # tail probability
    model = TwoProportions(BetaPrior(1, 1), BetaPrior(1, 1), design_control=0.3,
                           design_treatment=0.5)
    n_arm, cov = 6, 0.9
    sim = interval_width_curve(model, [2 * n_arm], coverage=cov, interval=interval,
                               draws=1500, posterior_draws=2000, seed=21)
    grid = np.linspace(-1.0, 1.0, 2001)
    ref = 0.0
    for x_t in range(n_arm + 1):
        for x_c in range(n_arm + 1):
            weight = stats.binom.pmf(x_t, n_arm, 0.5) * stats.binom.pmf(x_c, n_arm, 0.3)
            ref += weight * _difference_interval(1 + x_t, 1 + n_arm - x_t, 1 + x_c,
                                                 1 + n_arm - x_c, cov, interval, grid)
    floor = 2e-4
    _within(float(sim.width_mean[0]), ref, float(sim.width_mean_mcse[0]), floor)


def test_log_odds_ratio_and_frequentist_width():
    # Wald width of the log odds ratio at the assumed rates (common practice):
    # 2 z sqrt(1/(n_t p_t q_t) + 1/(n_c p_c q_c)); posterior widths shrink with n and stay
    # close to it once the data dominate a weak prior
    model = TwoProportions(BetaPrior(1, 1), BetaPrior(1, 1), scale="log_odds_ratio",
                           design_control=0.3, design_treatment=0.45)
    ds = interval_width_curve(model, [100, 1600], draws=400, posterior_draws=1000, seed=2)
    wald = 2 * stats.norm.ppf(0.975) * np.sqrt(1 / (800 * 0.45 * 0.55) + 1 / (800 * 0.3 * 0.7))
    assert float(ds.frequentist_ci_width[1]) == pytest.approx(wald, rel=1e-12)
    assert float(ds.width_mean[0]) > float(ds.width_mean[1])
    assert float(ds.width_mean[1]) == pytest.approx(wald, rel=0.03)
    # log risk ratio: 2 z sqrt((1 - p_t)/(n_t p_t) + (1 - p_c)/(n_c p_c)) (common practice)
    rr = TwoProportions(scale="log_risk_ratio", design_control=0.3, design_treatment=0.45)
    wald_rr = 2 * stats.norm.ppf(0.975) * np.sqrt(0.55 / (800 * 0.45) + 0.7 / (800 * 0.3))
    assert float(rr.frequentist_width(np.array([1600]), 0.95)[0]) == pytest.approx(wald_rr)


def test_design_effect_matches_fixed_rates():
    # a point-mass effect prior on the difference with a fixed control rate generates the
    # same data as fixed rates 0.3 and 0.45: the two simulations agree within 4 combined SEs
    common = dict(design_control=0.3)
    by_effect = TwoProportions(design_effect=PointMass(0.15), **common)
    by_rates = TwoProportions(design_treatment=0.45, **common)
    a = interval_width_curve(by_effect, [80], draws=800, seed=1)
    b = interval_width_curve(by_rates, [80], draws=800, seed=2)
    se = math.hypot(float(a.width_mean_mcse[0]), float(b.width_mean_mcse[0]))
    assert abs(float(a.width_mean[0]) - float(b.width_mean[0])) <= 4 * se
    assert float(a.frequentist_ci_width[0]) == pytest.approx(float(b.frequentist_ci_width[0]))


# ------------------------------------------------------------------------------------------
# properties
# ------------------------------------------------------------------------------------------
shape = st.floats(0.6, 30.0)


@settings(max_examples=30, deadline=None)
@given(a=shape, b=shape, n1=st.integers(1, 200), step=st.integers(1, 200))
def test_beta_mean_width_decreases_with_n(a, b, n1, step):
    model = OneProportion(BetaPrior(a, b))
    length = 0.5 * model.prior_width(0.95, "highest_density")
    ds = interval_width_curve(model, [n1, n1 + step], length=length)
    assert float(ds.width_mean[1]) < float(ds.width_mean[0])
    assert float(ds.coverage_mean[1]) > float(ds.coverage_mean[0])
    assert bool(((ds.coverage_mean >= 0) & (ds.coverage_mean <= 1)).all())


@settings(max_examples=30, deadline=None)
@given(shape_=st.floats(0.6, 40.0), rate=st.floats(0.1, 50.0), n0=st.floats(0.05, 20.0),
       n1=st.integers(1, 300), step=st.integers(1, 300))
def test_normal_gamma_mean_width_decreases_with_n(shape_, rate, n0, n1, step):
    model = NormalMeanUnknownSD(NormalGammaPrior(0.0, n0, shape_, rate))
    ds = interval_width_curve(model, [n1, n1 + step])
    assert float(ds.width_mean[1]) < float(ds.width_mean[0])
    assert float(ds.width_median[0]) <= float(ds.width_q90[0])


@settings(max_examples=30, deadline=None)
@given(a=st.floats(0.6, 15.0), b=st.floats(0.6, 15.0), frac=st.floats(0.15, 0.7),
       crit=st.sampled_from(["ALC", "ACC", "WOC", "MWOC"]),
       interval=st.sampled_from(["highest_density", "equal_tailed"]))
def test_binomial_criterion_met_at_n_not_before(a, b, frac, crit, interval):
    model = OneProportion(BetaPrior(a, b))
    length = frac * model.prior_width(0.9, interval)
    ans = solve_precision_n(model, length=length, coverage=0.9, criterion=crit,
                            interval=interval)
    assert ans.reached
    n = ans.n_total
    sizes = [n - 1, n] if n > 1 else [n]
    ds = interval_width_curve(model, sizes, coverage=0.9, length=length, interval=interval)
    key = {"ALC": "width_mean", "ACC": "coverage_mean", "WOC": "width_worst",
           "MWOC": "width_worst_likely"}[crit]
    values = ds[key].values

    def met(v):
        return v >= 0.9 if crit == "ACC" else v <= length

    assert met(values[-1])
    if n > 1:
        assert not met(values[0])


@settings(max_examples=15, deadline=None)
@given(shape_=st.floats(0.8, 20.0), n0=st.floats(0.1, 10.0), frac=st.floats(0.05, 0.6),
       crit=st.sampled_from(["ALC", "ACC", "MWOC"]), shift=st.floats(-1.0, 1.0))
def test_normal_gamma_criterion_met_at_n_not_before(shape_, n0, frac, crit, shift):
    prior = NormalGammaPrior(0.0, n0, shape_, shape_)
    design = NormalGammaPrior(shift, 2 * n0, shape_ + 1, shape_ + 1)
    model = NormalMeanUnknownSD(prior, design_prior=design)
    length = frac * model.prior_width(0.95, "highest_density")
    ans = solve_precision_n(model, length=length, criterion=crit)
    assert ans.reached
    if ans.n_total > model.smallest_n:
        key = {"ALC": "width_mean", "ACC": "coverage_mean", "MWOC": "width_worst_likely"}[crit]
        ds = interval_width_curve(model, [ans.n_total - 1, ans.n_total], length=length)
        before, at = ds[key].values
        if crit == "ACC":
            assert at >= 0.95 > before
        else:
            assert at <= length < before


# ------------------------------------------------------------------------------------------
# results, reproducibility, bad input
# ------------------------------------------------------------------------------------------
def test_curve_contents_and_reproducibility():
    model = RateRatio(Normal(0.0, 1.0), control_rate=0.5, design_prior=Normal(-0.2, 0.1))
    a = interval_width_curve(model, [200, 50, 200], length=0.5, draws=500, seed=5)
    b = interval_width_curve(model, [50], length=0.5, draws=500, seed=5)
    assert list(a.n.values) == [50, 200]
    assert float(a.width_mean[0]) == float(b.width_mean[0])  # same seed and n, same numbers
    for name in ("width_mean", "width_q90", "coverage_mean", "width_worst_likely"):
        assert name + "_mcse" in a and bool((a[name + "_mcse"] > 0).all())
    assert "width_worst" not in a  # not something simulation can show
    json.loads(a.attrs["model"])
    assert a.attrs["prior_interval_width"] == pytest.approx(2 * stats.norm.ppf(0.975))
    exact = interval_width_curve(OneProportion(), [10])
    assert "width_mean_mcse" not in exact and "coverage_mean" not in exact


def test_unreachable_and_unbounded_answers():
    ng = NormalMeanUnknownSD(NormalGammaPrior(0.0, 1.0, 3.0, 3.0))
    woc = solve_precision_n(ng, length=0.5, criterion="WOC")
    assert not woc.reached and woc.n_total is None and "MWOC" in woc.message
    small = solve_precision_n(OneProportion(), length=0.01, criterion="WOC", max_n=500)
    assert not small.reached and "500" in small.message
    with pytest.raises(AssuranceInputError, match="'criterion'.*simulation"):
        solve_precision_n(HazardRatio(Normal(0, 1), event_probability=0.5), length=0.5,
                          criterion="WOC")


@pytest.mark.parametrize("call, match", [
    (lambda: solve_precision_n(OneProportion(), length=0.0), r"'length'.*Got 0\.0"),
    (lambda: solve_precision_n(OneProportion(), length=-1), r"'length'"),
    (lambda: solve_precision_n(OneProportion(BetaPrior(2, 2)), length=0.9),
     r"'length'.*\(0, 0\.811.*prior's own 0\.95 highest-density interval.*Got 0\.9"),
    (lambda: solve_precision_n(NormalMean(1.0, prior=Normal(0, 0.1)), length=0.5),
     r"'length'.*\(0, 0\.39"),
    (lambda: interval_width_curve(OneProportion(), [10], coverage=1.0), r"'coverage'.*\(0, 1\)"),
    (lambda: interval_width_curve(OneProportion(), [10], coverage=0), r"'coverage'"),
    (lambda: interval_width_curve(OneProportion(), [10], interval="hpd"), r"'interval'"),
    (lambda: interval_width_curve(OneProportion(), [10.5]), r"'sizes'.*whole"),
    (lambda: interval_width_curve(
        NormalMeanUnknownSD(NormalGammaPrior(0, 0, -2.0, 0),
                            design_prior=NormalGammaPrior(0, 1, 2, 2)), [3, 10]),
     r"'sizes'.*>= 5.*improper"),
    (lambda: NormalMeanUnknownSD(NormalGammaPrior(0, 0, -0.5, 0)),
     r"'prior'.*proper normal-gamma prior.*generates the data"),
    (lambda: NormalMeanUnknownSD(NormalGammaPrior(0, 1, 0.4, 1)), r"'prior'.*shape > 0\.5"),
    (lambda: NormalGammaPrior(0, -1, 1, 1), r"'n0'.*>= 0"),
    (lambda: BetaPrior(0, 1), r"'a'.*BetaPrior"),
    (lambda: interval_width_curve(TwoProportions(), [10], method="exact"), r"'method'"),
    (lambda: interval_width_curve(OneProportion(), [10], method="simulation",
                                  posterior_draws=100), r"'posterior_draws'.*\[1000, "),
    (lambda: solve_precision_n(OneProportion(), length=0.2, likely_share=1.0),
     r"'likely_share'.*\(0, 1\)"),
    (lambda: solve_precision_n(OneProportion(), length=0.2, criterion="AVG"), r"'criterion'"),
    (lambda: HazardRatio(Normal(0, 1), event_probability=1.2), r"'event_probability'"),
    (lambda: TwoProportions(design_treatment=0.4, design_effect=Normal(0, 0.1)),
     r"'design_treatment'.*None when design_effect"),
    (lambda: interval_width_curve(TwoProportions(design_control=0.5,
                                                 design_effect=PointMass(0.7)), [10]),
     r"'design_effect'.*leaves \(0, 1\)"),
    (lambda: RateRatio(Normal(0, 1), control_rate=0.0), r"'control_rate'"),
    (lambda: interval_width_curve("model", [10]), r"'model'"),
])
def test_bad_input_messages(call, match):
    with pytest.raises(AssuranceInputError, match=match):
        call()
