"""Monte Carlo assurance with a prior on sigma, against exact and quadrature references.

Tolerance for every Monte Carlo figure: 4 of its reported Monte Carlo standard errors plus
an absolute floor of 1e-3 (values can sit near 0 or 1, where the reported MCSE understates
the error of a few draws). Each check runs for three seeds; each must pass.

Independent references: for a normal design prior and sigma known, assurance is
Phi((m - c) / sqrt(v + se^2)) (O'Hagan, Stevens & Campbell 2005) for a z analysis and
nct.sf(t_crit * se / tau, df, m / tau), tau^2 = v + se^2, for a t analysis (the estimate is
marginally N(m, tau^2), independent of the sample SD). With a prior on sigma these are
integrated by scipy.integrate.quad over X ~ chi2_nu, sigma = scale * sqrt(nu / X), which is
the definition of the scaled inverse chi-square (sigma^2 = nu scale^2 / X; Gelman et al.,
Bayesian Data Analysis, 3rd ed., Appendix A).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from assurance import (
    ContinuousEndpoint,
    GammaPrecision,
    Mixture,
    Normal,
    PointMass,
    ScaledInvChiSquare,
    Significance,
    StudentT,
    TrialDesign,
    evaluate,
    solve_sample_size,
)
from assurance.errors import AssuranceWarning

SEEDS = [1, 2024, 777_777]
FLOOR = 1e-3


def within_mcse(value, reference, mcse, k=4.0, floor=FLOOR):
    value, reference, mcse = (np.asarray(v, dtype=float) for v in (value, reference, mcse))
    assert np.all(np.isfinite(value)) and np.all(mcse > 0)
    bad = np.abs(value - reference) > k * mcse + floor
    assert not bad.any(), (value, reference, mcse)


def arms(ds):
    return ds.n_treatment.values.astype(int), ds.n_control.values.astype(int)


def normal_assurance_given_sigma(sigma, mean, sd, n_t, n_c, alpha, analysis, margin=0.0):
    k = math.sqrt(1 / n_t + 1 / n_c)
    se = sigma * k
    tau = math.hypot(sd, se)
    if analysis == "z":
        return stats.norm.cdf((mean + margin - stats.norm.isf(alpha) * se) / tau)
    df = n_t + n_c - 2
    return stats.nct.sf(stats.t.isf(alpha, df) * se / tau, df, (mean + margin) / tau)


def over_sigma_prior(fn, nu, scale):
    """E[fn(sigma)] with sigma^2 = nu scale^2 / X, X ~ chi2_nu (quad over X)."""
    lo, hi = stats.chi2.ppf(1e-13, nu), stats.chi2.isf(1e-13, nu)
    return integrate.quad(lambda x: fn(scale * math.sqrt(nu / x)) * stats.chi2.pdf(x, nu),
                          lo, hi, points=[nu], epsabs=1e-10, epsrel=1e-9, limit=200)[0]


# ------------------------------------------------------------------------------------------
# concentrated sigma prior: Monte Carlo equals the exact known-sigma computation
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize(
    "prior",
    [Normal(4.0, 2.0), StudentT(5, 3.0, 1.5), Mixture([PointMass(0.0), Normal(5.0, 2.0)],
                                                       [0.3, 0.7])],
    ids=["normal", "student_t", "mixture"],
)
def test_concentrated_sigma_prior_matches_exact(prior, analysis, seed):
    # df = 1e8: sigma's prior SD is 10 / sqrt(2e8) = 7e-4, effectively known.
    ep = ContinuousEndpoint(10.0, analysis=analysis, allocation=1.5)
    exact = TrialDesign(ep, prior, relevant_effect=3.0)
    mc = TrialDesign(ep, prior, relevant_effect=3.0, sigma_prior=ScaledInvChiSquare(1e8, 10.0))
    sizes = [6, 40, 150, 600]
    ex = evaluate(exact, sizes)
    ds = evaluate(mc, sizes, draws=20_000, seed=seed)
    assert ds.attrs["draws"] == 20_000 and ds.attrs["seed"] == seed
    for name in ("assurance", "prob_success_and_benefit", "prob_success_and_relevant",
                 "conditional_assurance"):
        within_mcse(ds[name].values, ex[name].values, ds[f"{name}_mcse"].values)
    # prob_miss_relevant = P(relevant) - P(success and relevant)
    within_mcse(ds.prob_miss_relevant.values, ex.prob_miss_relevant.values,
                ds.prob_miss_relevant_mcse.values)
    # classical power keeps the planning sigma: identical to the exact design
    np.testing.assert_array_equal(ds.power.values, ex.power.values)
    assert float(ds.ceiling) == float(ex.ceiling)


# ------------------------------------------------------------------------------------------
# moderate sigma prior: Monte Carlo against quadrature over sigma
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize(("nu", "scale", "margin"), [(10.0, 8.0, 0.0), (4.0, 8.0, 2.0)])
def test_moderate_sigma_prior_matches_quadrature(nu, scale, margin, analysis, seed):
    mean, sd, alpha = 4.0, 2.0, 0.025
    design = TrialDesign(ContinuousEndpoint(8.0, analysis=analysis), Normal(mean, sd),
                         rule=Significance(alpha, margin=margin),
                         sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [8, 50, 200, 800], draws=20_000, seed=seed)
    refs = [over_sigma_prior(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
        s, mean, sd, nt, nc, alpha, analysis, margin), nu, scale)
        for nt, nc in zip(*arms(ds), strict=True)]
    within_mcse(ds.assurance.values, refs, ds.assurance_mcse.values)


@pytest.mark.parametrize("seed", SEEDS)
def test_moderate_sigma_prior_decomposition_matches_quadrature(seed):
    # z analysis: P(success and delta >= a | sigma) is a bivariate normal orthant of
    # (estimate, effect) with var v + se^2, v and covariance v (O'Hagan et al. 2005 setting).
    mean, sd, alpha, rel, nu, scale = 4.0, 2.0, 0.025, 3.0, 12.0, 8.0
    design = TrialDesign(ContinuousEndpoint(8.0, analysis="z"), Normal(mean, sd),
                         relevant_effect=rel, sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [30, 300], draws=20_000, seed=seed)
    p_rel = stats.norm.sf(rel, mean, sd)
    for i, (nt, nc) in enumerate(zip(*arms(ds), strict=True)):
        k = math.sqrt(1 / nt + 1 / nc)

        def joint(sigma, cut, k=k):
            se = sigma * k
            c = stats.norm.isf(alpha) * se
            cov = [[sd**2 + se**2, sd**2], [sd**2, sd**2]]
            return float(stats.multivariate_normal([-mean, -mean], cov).cdf([-c, -cut]))

        ref_rel = over_sigma_prior(lambda s: joint(s, rel), nu, scale)
        ref_ben = over_sigma_prior(lambda s: joint(s, 0.0), nu, scale)
        within_mcse(ds.prob_success_and_relevant[i], ref_rel,
                    ds.prob_success_and_relevant_mcse[i])
        within_mcse(ds.prob_success_and_benefit[i], ref_ben, ds.prob_success_and_benefit_mcse[i])
        within_mcse(ds.conditional_assurance[i], ref_rel / p_rel,
                    ds.conditional_assurance_mcse[i])


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("analysis", ["z", "t"])
def test_null_atom_contributes_alpha_whatever_sigma(analysis, seed):
    # At delta = 0 both tests reject with probability alpha for every sigma (exact size of
    # the z test with known sigma and of the t test; common practice), so a 30% atom at 0
    # adds exactly 0.3 * alpha.
    mean, sd, alpha, nu, scale = 5.0, 2.0, 0.025, 8.0, 10.0
    prior = Mixture([PointMass(0.0), Normal(mean, sd)], [0.3, 0.7])
    design = TrialDesign(ContinuousEndpoint(10.0, analysis=analysis), prior,
                         sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [20, 120, 500], draws=20_000, seed=seed)
    refs = [0.3 * alpha + 0.7 * over_sigma_prior(
        lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(s, mean, sd, nt, nc, alpha,
                                                             analysis), nu, scale)
        for nt, nc in zip(*arms(ds), strict=True)]
    within_mcse(ds.assurance.values, refs, ds.assurance_mcse.values)


@pytest.mark.parametrize("seed", SEEDS)
def test_gamma_precision_sigma_prior(seed):
    # Precision ~ Gamma(shape, rate) is the scaled inverse chi-square with nu = 2 shape and
    # scale^2 = rate / shape (common practice; e.g. Gelman et al. 2013, Appendix A).
    shape, rate = 6.0, 6.0 * 64.0
    design = TrialDesign(ContinuousEndpoint(8.0, analysis="z"), Normal(4.0, 2.0),
                         sigma_prior=GammaPrecision(shape, rate))
    ds = evaluate(design, [40, 400], draws=20_000, seed=seed)
    refs = [over_sigma_prior(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
        s, 4.0, 2.0, nt, nc, 0.025, "z"), 2 * shape, math.sqrt(rate / shape))
        for nt, nc in zip(*arms(ds), strict=True)]
    within_mcse(ds.assurance.values, refs, ds.assurance_mcse.values)


# ------------------------------------------------------------------------------------------
# reproducibility and honesty of the standard errors
# ------------------------------------------------------------------------------------------
def _mc_design():
    return TrialDesign(ContinuousEndpoint(8.0), Normal(4.0, 2.0), relevant_effect=3.0,
                       sigma_prior=ScaledInvChiSquare(10.0, 8.0))


def test_same_seed_same_numbers():
    a = evaluate(_mc_design(), [20, 100, 400], draws=5000, seed=42)
    b = evaluate(_mc_design(), [20, 100, 400], draws=5000, seed=42)
    c = evaluate(_mc_design(), [20, 100, 400], draws=5000, seed=43)
    for name in a.data_vars:
        np.testing.assert_array_equal(a[name].values, b[name].values)
    assert not np.array_equal(a.assurance.values, c.assurance.values)
    # a size's figures do not depend on which other sizes are in the grid (common draws;
    # only the summation order can differ, hence 1e-12)
    d = evaluate(_mc_design(), [100], draws=5000, seed=42)
    assert float(d.assurance[0]) == pytest.approx(float(a.assurance.sel(n=100)), abs=1e-12)


def test_reported_mcse_matches_spread_over_seeds():
    # 20 independent runs of 2000 draws: the SD of the estimates should match the reported
    # MCSE. With 20 runs, sample SD / true SD ~ sqrt(chi2_19 / 19), inside [0.5, 1.5] with
    # probability > 0.999 (scipy.stats.chi2); the seeds are fixed, so this is deterministic.
    runs = [evaluate(_mc_design(), [60], draws=2000, seed=s) for s in range(100, 120)]
    est = np.array([float(r.assurance[0]) for r in runs])
    mcse = np.mean([float(r.assurance_mcse[0]) for r in runs])
    ratio = est.std(ddof=1) / mcse
    assert 0.5 < ratio < 1.5
    # and the MCSE shrinks like 1/sqrt(draws)
    big = evaluate(_mc_design(), [60], draws=32_000, seed=5)
    assert float(big.assurance_mcse[0]) == pytest.approx(mcse / 4, rel=0.1)


def test_monte_carlo_labels_and_mcse_variables():
    ds = evaluate(_mc_design(), [50], draws=1000, seed=1)
    for name in ("assurance", "prob_success_and_benefit", "prob_success_and_relevant",
                 "conditional_assurance", "prob_miss_relevant"):
        assert f"{name}_mcse" in ds
        assert float(ds[f"{name}_mcse"][0]) > 0
    assert "Monte Carlo" in ds.attrs["method"]


# ------------------------------------------------------------------------------------------
# regression: conditional assurance from too few draws in the relevant region
# ------------------------------------------------------------------------------------------
# It used to be the mean over the draws inside the region: NaN (MCSE inf), without a warning,
# when no draw fell there, and solve_sample_size then answered reached=True, achieved=nan.
def _rare_relevant_design():
    # P(delta >= 4) = 3.2e-5 under N(0, 1): above the 1e-6 floor, yet 1000 draws will
    # almost surely hold none inside the region.
    return TrialDesign(ContinuousEndpoint(1.0), Normal(0.0, 1.0), relevant_effect=4.0,
                       sigma_prior=ScaledInvChiSquare(20.0, 1.0))


def test_conditional_assurance_never_silently_nan():
    with pytest.warns(AssuranceWarning, match="draws"):
        ds = evaluate(_rare_relevant_design(), [10, 100], draws=1000, seed=1)
    assert np.all(np.isfinite(ds.conditional_assurance.values))
    assert np.all(np.isfinite(ds.conditional_assurance_mcse.values))


def test_solve_never_reaches_a_nan_target():
    with pytest.warns(AssuranceWarning, match="draws"):
        ans = solve_sample_size(_rare_relevant_design(), 0.5,
                                quantity="conditional_assurance", draws=1000, seed=1)
    assert not ans.reached or math.isfinite(ans.achieved)
    if ans.reached:
        assert ans.achieved >= 0.5


@pytest.mark.parametrize("seed", SEEDS)
def test_lower_is_better_mirror_with_sigma_prior(seed):
    # The same trial read with "lower is better" and every effect negated: the benefit-scale
    # prior is the same law, so the draws and every figure are identical.
    prior = Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.25, 0.75])
    sp = ScaledInvChiSquare(10.0, 8.0)
    high = TrialDesign(ContinuousEndpoint(8.0), prior, relevant_effect=3.0, sigma_prior=sp,
                       rule=Significance(0.025, min_estimate=1.0))
    low = TrialDesign(ContinuousEndpoint(8.0, better="lower"), prior.negated(),
                      relevant_effect=-3.0, sigma_prior=sp,
                      rule=Significance(0.025, min_estimate=-1.0))
    a = evaluate(high, [20, 200], draws=4000, seed=seed)
    b = evaluate(low, [20, 200], draws=4000, seed=seed)
    for name in a.data_vars:
        if name != "power_curve":
            np.testing.assert_allclose(a[name].values, b[name].values, rtol=0, atol=1e-12)
    np.testing.assert_allclose(a.power_curve.values, b.power_curve.values[::-1], rtol=0,
                               atol=1e-12)
