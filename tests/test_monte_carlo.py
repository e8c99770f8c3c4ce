"""A prior on sigma: deterministic quadrature where it applies, Monte Carlo elsewhere.

With a significance rule, an effect prior made of normals and point masses, and a scaled
inverse chi-square (or gamma-precision) prior on the SD, the package integrates over the SD
by quadrature: no Monte Carlo error, no ``*_mcse`` variables. Other designs (a Student t
effect prior, a uniform prior on the SD, ...) keep the Rao-Blackwellised Monte Carlo.

Independent references: for a normal design prior and sigma known, assurance is
Phi((m - c) / sqrt(v + se^2)) (O'Hagan, Stevens & Campbell 2005) for a z analysis and
nct.sf(t_crit * se / tau, df, m / tau), tau^2 = v + se^2, for a t analysis (the estimate is
marginally N(m, tau^2), independent of the sample SD). With a prior on sigma these are
integrated by scipy.integrate.quad over X ~ chi2_nu, sigma = scale * sqrt(nu / X), which is
the definition of the scaled inverse chi-square (sigma^2 = nu scale^2 / X; Gelman et al.,
Bayesian Data Analysis, 3rd ed., Appendix A). Joint probabilities add an inner quad over the
effect: the double integral.

Tolerances. Quadrature against quad: 1e-8 (the package's rule was observed within 3e-11 of
quad over nu 2..3000, alpha 0.025 and 1e-4, z and t; quad runs at epsabs 1e-12 or better).
Monte Carlo figures: 4 of their reported Monte Carlo standard errors plus an absolute floor
of 1e-3 (values can sit near 0 or 1, where the reported MCSE understates the error of a few
draws); each such check runs for three seeds and each must pass.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

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
    Uniform,
    evaluate,
    solve_sample_size,
)
from assurance.compute.normal_outcome import (
    Cut,
    EffectDraws,
    monte_carlo_success,
    sd_prior_success,
    sd_quadrature_covers,
)
from assurance.errors import AssuranceWarning

SEEDS = [1, 2024, 777_777]
FLOOR = 1e-3
QUAD_TOL = 1e-8
QUANTITIES = ("assurance", "prob_success_and_benefit", "prob_success_and_relevant",
              "conditional_assurance", "prob_miss_relevant")


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


def over_sigma_prior(fn, nu, scale, eps=1e-12):
    """E[fn(sigma)] with sigma^2 = nu scale^2 / X, X ~ chi2_nu (quad over X, split at the
    chi-square quantiles so that every piece is smooth)."""
    lo, hi = stats.chi2.ppf(1e-16, nu), stats.chi2.isf(1e-16, nu)
    cuts = stats.chi2.ppf([1e-8, 1e-4, 0.01, 0.1, 0.5, 0.9, 0.99, 1 - 1e-4, 1 - 1e-8], nu)
    return integrate.quad(lambda x: fn(scale * math.sqrt(nu / x)) * stats.chi2.pdf(x, nu),
                          lo, hi, points=list(cuts), epsabs=eps, epsrel=eps, limit=2000)[0]


def joint_given_sigma(sigma, mean, sd, n_t, n_c, alpha, analysis, cut, margin=0.0):
    """P(success and delta > cut | sigma): quad over the normal prior of the power curve.

    Scalar scipy.special calls keep the double integral quick: ``ndtr`` for the z test's
    power, ``nctdtr(df, -ncp, -t)`` (= nct.sf(t, df, ncp)) for the t test's.
    """
    k = math.sqrt(1 / n_t + 1 / n_c)
    se = sigma * k
    if analysis == "z":
        c = -margin + stats.norm.isf(alpha) * se

        def power(delta):
            return special.ndtr((delta - c) / se)
    else:
        df = n_t + n_c - 2
        t = stats.t.isf(alpha, df)

        def power(delta):
            return special.nctdtr(df, -(delta + margin) / se, -t)
    top = mean + 12 * sd
    points = [p for p in (mean, -margin + 2 * se) if cut < p < top]
    norm = sd * math.sqrt(2 * math.pi)
    return integrate.quad(lambda d: math.exp(-0.5 * ((d - mean) / sd) ** 2) / norm * power(d),
                          cut, top, points=points or None, epsabs=1e-13, epsrel=1e-11,
                          limit=400)[0]


# ------------------------------------------------------------------------------------------
# which designs the quadrature covers, and what the results then say
# ------------------------------------------------------------------------------------------
def test_quadrature_covers_normal_and_point_mass_priors_only():
    sic = ScaledInvChiSquare(20, 5.0)
    rule = Significance()
    assert sd_quadrature_covers(Normal(1, 1), rule, sic)
    assert sd_quadrature_covers(Mixture([PointMass(0.0), Normal(2, 1)], [0.3, 0.7]), rule, sic)
    assert sd_quadrature_covers(Normal(1, 1), rule, GammaPrecision(6.0, 24.0))
    assert sd_quadrature_covers(Normal(1, 1), rule, Mixture([PointMass(4.0), sic], [0.5, 0.5]))
    assert not sd_quadrature_covers(StudentT(3, 1, 1), rule, sic)
    assert not sd_quadrature_covers(Normal(1, 1), rule, Uniform(3.0, 6.0))


def test_quadrature_results_are_deterministic_without_standard_errors():
    design = TrialDesign(ContinuousEndpoint(8.0), Normal(4.0, 2.0), relevant_effect=3.0,
                         sigma_prior=ScaledInvChiSquare(10.0, 8.0))
    a = evaluate(design, [20, 100, 400], draws=1000, seed=1)
    b = evaluate(design, [20, 100, 400], draws=5000, seed=2)
    assert not [name for name in a.data_vars if name.endswith("_mcse")]
    assert "deterministic quadrature over the SD prior" in a.attrs["method"]
    assert "Monte Carlo" not in a.attrs["method"]
    assert a.attrs["draws"] == 0
    for name in a.data_vars:  # neither the draws nor the seed matter
        np.testing.assert_array_equal(a[name].values, b[name].values)
    ans = solve_sample_size(design, 0.6, quantity="assurance")
    assert ans.reached and ans.achieved_mcse is None


# ------------------------------------------------------------------------------------------
# quadrature against quad over the SD prior
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize(("nu", "scale", "margin", "alpha"),
                         [(10.0, 8.0, 0.0, 0.025), (4.0, 8.0, 2.0, 0.025),
                          (2.0, 8.0, 0.0, 1e-4), (300.0, 8.0, 0.0, 1e-4)])
def test_sigma_prior_assurance_matches_quad(nu, scale, margin, alpha, analysis):
    mean, sd = 4.0, 2.0
    design = TrialDesign(ContinuousEndpoint(8.0, analysis=analysis), Normal(mean, sd),
                         rule=Significance(alpha, margin=margin),
                         sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [8, 50, 200, 800, 5000])
    refs = [over_sigma_prior(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
        s, mean, sd, nt, nc, alpha, analysis, margin), nu, scale)
        for nt, nc in zip(*arms(ds), strict=True)]
    np.testing.assert_allclose(ds.assurance.values, refs, rtol=0, atol=QUAD_TOL)


@pytest.mark.parametrize("analysis", ["z", "t"])
def test_sigma_prior_decomposition_matches_double_integral(analysis):
    # P(success and delta >= a) = E_sigma[ integral_a^inf p(delta) power(delta | sigma) ]:
    # quad over X ~ chi2_nu outside, quad over the normal prior inside
    mean, sd, alpha, rel, nu, scale = 4.0, 2.0, 0.025, 3.0, 12.0, 8.0
    design = TrialDesign(ContinuousEndpoint(8.0, analysis=analysis), Normal(mean, sd),
                         relevant_effect=rel, sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [30, 300])
    p_rel = stats.norm.sf(rel, mean, sd)
    for i, (nt, nc) in enumerate(zip(*arms(ds), strict=True)):
        ref_rel = over_sigma_prior(lambda s, nt=nt, nc=nc: joint_given_sigma(
            s, mean, sd, nt, nc, alpha, analysis, rel), nu, scale, eps=1e-11)
        ref_ben = over_sigma_prior(lambda s, nt=nt, nc=nc: joint_given_sigma(
            s, mean, sd, nt, nc, alpha, analysis, 0.0), nu, scale, eps=1e-11)
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(ref_rel, abs=QUAD_TOL)
        assert float(ds.prob_success_and_benefit[i]) == pytest.approx(ref_ben, abs=QUAD_TOL)
        assert float(ds.conditional_assurance[i]) == pytest.approx(ref_rel / p_rel,
                                                                   abs=QUAD_TOL / p_rel)
        assert float(ds.prob_miss_relevant[i]) == pytest.approx(p_rel - ref_rel, abs=QUAD_TOL)


@pytest.mark.parametrize("analysis", ["z", "t"])
def test_null_atom_contributes_alpha_whatever_sigma(analysis):
    # At delta = 0 both tests reject with probability alpha for every sigma (exact size of
    # the z test with known sigma and of the t test; common practice), so a 30% atom at 0
    # adds exactly 0.3 * alpha.
    mean, sd, alpha, nu, scale = 5.0, 2.0, 0.025, 8.0, 10.0
    prior = Mixture([PointMass(0.0), Normal(mean, sd)], [0.3, 0.7])
    design = TrialDesign(ContinuousEndpoint(10.0, analysis=analysis), prior,
                         sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [20, 120, 500])
    refs = [0.3 * alpha + 0.7 * over_sigma_prior(
        lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(s, mean, sd, nt, nc, alpha,
                                                             analysis), nu, scale)
        for nt, nc in zip(*arms(ds), strict=True)]
    np.testing.assert_allclose(ds.assurance.values, refs, rtol=0, atol=QUAD_TOL)


@pytest.mark.parametrize("analysis", ["z", "t"])
def test_point_mass_effect_with_sigma_prior_matches_quad(analysis):
    # classical power averaged over the SD prior: narrow steps in sigma at large n
    delta, alpha, nu, scale = 2.0, 1e-3, 5.0, 8.0
    design = TrialDesign(ContinuousEndpoint(8.0, analysis=analysis), PointMass(delta),
                         rule=Significance(alpha), sigma_prior=ScaledInvChiSquare(nu, scale))
    ds = evaluate(design, [6, 60, 600, 6000, 60000])
    refs = [over_sigma_prior(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
        s, delta, 0.0, nt, nc, alpha, analysis), nu, scale)
        for nt, nc in zip(*arms(ds), strict=True)]
    np.testing.assert_allclose(ds.assurance.values, refs, rtol=0, atol=QUAD_TOL)


def test_gamma_precision_sigma_prior():
    # Precision ~ Gamma(shape, rate) is the scaled inverse chi-square with nu = 2 shape and
    # scale^2 = rate / shape (common practice; e.g. Gelman et al. 2013, Appendix A).
    shape, rate = 6.0, 6.0 * 64.0
    design = TrialDesign(ContinuousEndpoint(8.0, analysis="z"), Normal(4.0, 2.0),
                         sigma_prior=GammaPrecision(shape, rate))
    ds = evaluate(design, [40, 400])
    refs = [over_sigma_prior(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
        s, 4.0, 2.0, nt, nc, 0.025, "z"), 2 * shape, math.sqrt(rate / shape))
        for nt, nc in zip(*arms(ds), strict=True)]
    np.testing.assert_allclose(ds.assurance.values, refs, rtol=0, atol=QUAD_TOL)


def test_mixture_of_sd_priors_is_the_weighted_sum():
    # a mixture prior on sigma: the figures are the weighted sums of each component's
    prior, rule = Normal(4.0, 2.0), Significance(0.025)
    geo = {"se_factor": np.sqrt([2 / 10, 2 / 100]), "df": np.array([18.0, 198.0]),
           "analysis": "t", "cuts": [Cut(0.0), Cut(3.0, inclusive=True)]}
    sic = ScaledInvChiSquare(6.0, 8.0)
    both = sd_prior_success(prior, rule, Mixture([PointMass(10.0), sic], [0.25, 0.75]), **geo)
    known = sd_prior_success(prior, rule, PointMass(10.0), **geo)
    alone = sd_prior_success(prior, rule, sic, **geo)
    np.testing.assert_allclose(both.success, 0.25 * known.success + 0.75 * alone.success,
                               rtol=0, atol=1e-15)
    for j in range(2):
        np.testing.assert_allclose(both.joint[j], 0.25 * known.joint[j] + 0.75 * alone.joint[j],
                                   rtol=0, atol=1e-15)


@pytest.mark.parametrize("analysis", ["z", "t"])
def test_concentrated_sigma_prior_equals_known_sigma(analysis):
    # df = 1e8: sigma's prior SD is 10 / sqrt(2e8) = 7e-4 and its mean is 10 (1 - 4e-9), so
    # every figure moves by under 1e-6 from the known-sigma design (first-order shift below
    # 1e-7, second-order term about |P''| 2.5e-7).
    prior = Mixture([PointMass(0.0), Normal(5.0, 2.0)], [0.3, 0.7])
    ep = ContinuousEndpoint(10.0, analysis=analysis, allocation=1.5)
    exact = evaluate(TrialDesign(ep, prior, relevant_effect=3.0), [6, 40, 150, 600])
    quad = evaluate(TrialDesign(ep, prior, relevant_effect=3.0,
                                sigma_prior=ScaledInvChiSquare(1e8, 10.0)), [6, 40, 150, 600])
    for name in QUANTITIES:
        np.testing.assert_allclose(quad[name].values, exact[name].values, rtol=0, atol=1e-6)
    # classical power keeps the planning sigma: identical to the exact design
    np.testing.assert_array_equal(quad.power.values, exact.power.values)


def test_weekly_injection_design_matches_double_integral():
    # The case study's shape: non-inferiority margin 3, lower is better, t analysis, SD prior
    # on 40 df (case_studies/weekly_injection/design.toml). On the benefit scale the prior
    # is N(-0.5, 1.5^2) and the relevant effect is -1.
    design = TrialDesign(ContinuousEndpoint(12.0, analysis="t", better="lower"),
                         Normal(0.5, 1.5), rule=Significance(0.025, margin=3.0),
                         assumed_effect=0.0, relevant_effect=1.0,
                         sigma_prior=ScaledInvChiSquare(40.0, 12.0))
    ds = evaluate(design, [60, 400])
    for i, (nt, nc) in enumerate(zip(*arms(ds), strict=True)):
        ref = over_sigma_prior(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
            s, -0.5, 1.5, nt, nc, 0.025, "t", margin=3.0), 40.0, 12.0)
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=QUAD_TOL)
        ref_rel = over_sigma_prior(lambda s, nt=nt, nc=nc: joint_given_sigma(
            s, -0.5, 1.5, nt, nc, 0.025, "t", -1.0, margin=3.0), 40.0, 12.0, eps=1e-11)
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(ref_rel, abs=QUAD_TOL)


# ------------------------------------------------------------------------------------------
# quadrature against the Monte Carlo it replaces (same design, compute level)
# ------------------------------------------------------------------------------------------
def _monte_carlo_of(design, sizes, seed, draws=20_000):
    ep = design.endpoint
    n_t, n_c = ep.arm_sizes(np.asarray(sizes))
    cuts = [Cut(0.0)]
    if design.relevant_effect is not None:
        cuts.append(Cut(float(ep.to_benefit(design.relevant_effect)), inclusive=True))
    d = EffectDraws.draw(design.benefit_prior, design.sigma_prior, draws, seed)
    return monte_carlo_success(d, design.benefit_rule, se_factor=ep.se_factor(n_t, n_c),
                               df=ep.degrees_of_freedom(n_t, n_c), analysis=ep.analysis,
                               cuts=cuts)


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize("min_estimate", [None, 1.5])
def test_quadrature_agrees_with_monte_carlo(min_estimate, analysis, seed):
    prior = Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.25, 0.75])
    design = TrialDesign(ContinuousEndpoint(8.0, analysis=analysis), prior, relevant_effect=3.0,
                         rule=Significance(0.025, min_estimate=min_estimate),
                         sigma_prior=ScaledInvChiSquare(6.0, 8.0))
    sizes = [6, 40, 200, 900]
    ds = evaluate(design, sizes)
    mc = _monte_carlo_of(design, sizes, seed)
    within_mcse(mc.success, ds.assurance.values, mc.success_mcse)
    within_mcse(mc.joint[0], ds.prob_success_and_benefit.values, mc.joint_mcse[0])
    within_mcse(mc.joint[1], ds.prob_success_and_relevant.values, mc.joint_mcse[1])


# ------------------------------------------------------------------------------------------
# designs the quadrature does not cover keep Monte Carlo
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("analysis", ["z", "t"])
def test_student_t_prior_monte_carlo_matches_exact(analysis, seed):
    # df = 1e8: sigma's prior SD is 10 / sqrt(2e8) = 7e-4, effectively known.
    prior = StudentT(5, 3.0, 1.5)
    ep = ContinuousEndpoint(10.0, analysis=analysis, allocation=1.5)
    exact = TrialDesign(ep, prior, relevant_effect=3.0)
    mc = TrialDesign(ep, prior, relevant_effect=3.0, sigma_prior=ScaledInvChiSquare(1e8, 10.0))
    sizes = [6, 40, 150, 600]
    ex = evaluate(exact, sizes)
    ds = evaluate(mc, sizes, draws=20_000, seed=seed)
    assert ds.attrs["draws"] == 20_000 and ds.attrs["seed"] == seed
    for name in QUANTITIES:
        within_mcse(ds[name].values, ex[name].values, ds[f"{name}_mcse"].values)
    np.testing.assert_array_equal(ds.power.values, ex.power.values)
    assert float(ds.ceiling) == float(ex.ceiling)


@pytest.mark.parametrize("seed", SEEDS)
def test_uniform_sd_prior_monte_carlo_matches_quad(seed):
    # sigma ~ Uniform(6, 10): quad over sigma of the known-sigma closed form (t analysis)
    mean, sd, alpha = 4.0, 2.0, 0.025
    design = TrialDesign(ContinuousEndpoint(8.0), Normal(mean, sd),
                         sigma_prior=Uniform(6.0, 10.0))
    ds = evaluate(design, [10, 80, 400], draws=20_000, seed=seed)
    assert "Monte Carlo" in ds.attrs["method"]
    refs = [integrate.quad(lambda s, nt=nt, nc=nc: normal_assurance_given_sigma(
        s, mean, sd, nt, nc, alpha, "t") / 4.0, 6.0, 10.0, epsabs=1e-12)[0]
        for nt, nc in zip(*arms(ds), strict=True)]
    within_mcse(ds.assurance.values, refs, ds.assurance_mcse.values)


def _mc_design():
    return TrialDesign(ContinuousEndpoint(8.0), StudentT(6, 4.0, 2.0), relevant_effect=3.0,
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
    for name in QUANTITIES:
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
    # almost surely hold none inside the region. A uniform prior on the SD keeps Monte Carlo.
    return TrialDesign(ContinuousEndpoint(1.0), Normal(0.0, 1.0), relevant_effect=4.0,
                       sigma_prior=Uniform(0.8, 1.2))


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


def test_rare_relevant_region_is_exact_by_quadrature():
    # the same question with a scaled inverse chi-square prior on the SD: no draws, no
    # warning, and the conditional assurance is a ratio of exact figures
    design = TrialDesign(ContinuousEndpoint(1.0), Normal(0.0, 1.0), relevant_effect=4.0,
                         sigma_prior=ScaledInvChiSquare(20.0, 1.0))
    ds = evaluate(design, [10, 100])
    assert np.all(np.isfinite(ds.conditional_assurance.values))
    assert np.all(ds.conditional_assurance.values > 0.5)  # at n = 10 the power at 4 SD is high


@pytest.mark.parametrize("sigma_prior", [ScaledInvChiSquare(10.0, 8.0), Uniform(6.0, 10.0)],
                         ids=["quadrature", "monte_carlo"])
def test_lower_is_better_mirror_with_sigma_prior(sigma_prior):
    # The same trial read with "lower is better" and every effect negated: the benefit-scale
    # prior is the same law, so the draws (or nodes) and every figure are identical.
    prior = Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.25, 0.75])
    high = TrialDesign(ContinuousEndpoint(8.0), prior, relevant_effect=3.0,
                       sigma_prior=sigma_prior, rule=Significance(0.025, min_estimate=1.0))
    low = TrialDesign(ContinuousEndpoint(8.0, better="lower"), prior.negated(),
                      relevant_effect=-3.0, sigma_prior=sigma_prior,
                      rule=Significance(0.025, min_estimate=-1.0))
    a = evaluate(high, [20, 200], draws=4000, seed=7)
    b = evaluate(low, [20, 200], draws=4000, seed=7)
    assert sorted(a.data_vars) == sorted(b.data_vars)
    for name in a.data_vars:
        if name != "power_curve":
            np.testing.assert_allclose(a[name].values, b[name].values, rtol=0, atol=1e-12)
    np.testing.assert_allclose(a.power_curve.values, b.power_curve.values[::-1], rtol=0,
                               atol=1e-12)
