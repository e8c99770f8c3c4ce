"""Count (event rate) endpoint: rate ratio of Poisson / negative binomial counts.

References used below, each computed inside the test (never copied from the package):

* Zhu & Lakkis (2014), Statistics in Medicine 33:376-387: variance of the estimated log
  rate ratio ``(1/n_t)(1/mu_t + k) + (1/n_c)(1/mu_c + k)`` (their approach 1) and, for the
  test, the variance at the pooled rate (their approach 2); sample size
  ``n_c = (z_a + z_b)^2 [(1/mu_t + k)/r + (1/mu_c + k)] / (log RR)^2``. The paper's tables
  could not be consulted here, so no table value is quoted: the formula is written out in
  the test (from memory of the paper) and, independently, checked against
  ``statsmodels.stats.rates.power_negbin_ratio_2indep`` (statsmodels 0.14+, which cites the
  same paper; ``method_var="alt"`` is approach 1, ``"ftotal"`` approach 2).
* Two Poisson rates compared on the log scale (common practice; e.g. Signorini 1991,
  Biometrika, as cited in our brief, not re-checked): per group
  ``n = (z_a + z_b)^2 (1/lambda_t + 1/lambda_c) / (t (log RR)^2)``; statsmodels
  ``power_poisson_ratio_2indep`` as a second reference.
* Assurance = integral of power over the prior (O'Hagan, Stevens & Campbell 2005,
  Pharmaceutical Statistics 4:187-201), by ``scipy.integrate.quad`` written here; for a
  normal prior with a fixed standard error, ``Phi((m - c) / sqrt(v + se^2))``.
* Expected information of a negative binomial log rate, dispersion known:
  ``sum mu_i / (1 + k mu_i)`` (Lawless 1987, Canadian Journal of Statistics 15:209-225),
  averaged over follow-up ``min(Exp(d), t)`` by ``scipy.integrate.quad`` here.

Tolerances: closed form against closed form 1e-10; package quadrature (quad_vec at
epsabs 1e-10, 64-point Gauss-Legendre over follow-up) against scipy quad 1e-7; Monte Carlo
within 4 reported standard errors plus an absolute floor (1e-3 for Rao-Blackwellised
assurance, 0.01 for simulated rejection rates, whose normal-approximation and
small-sample bias of the Wald test is of that order at these sizes).
"""

from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, stats
from statsmodels.stats import rates as sm_rates

from assurance import (
    FromScipy,
    Mixture,
    Normal,
    PointMass,
    Significance,
    StudentT,
    TrialDesign,
    evaluate,
    solve_sample_size,
)
from assurance.design_file import endpoint_from_table, read_design_file
from assurance.endpoints.counts import (
    CountEndpoint,
    sample_size_for_rate_ratio,
    simulate_rejection_rate,
)
from assurance.errors import AssuranceInputError, DesignFileError

CLOSED_TOL = 1e-10
QUAD_TOL = 1e-7
MC_FLOOR = 1e-3
SIM_FLOOR = 0.01
CASE_STUDY = Path(__file__).resolve().parents[1] / "case_studies" / "relapse_counts"


# ------------------------------------------------------------------------------------------
# independent references (written here from the formulas)
# ------------------------------------------------------------------------------------------
def zl_variance(rr, lam_c, t, k, n_t, n_c):
    """Zhu & Lakkis (2014) approach 1: variance of log RR_hat, mu = rate * follow-up."""
    mu_t, mu_c = lam_c * rr * t, lam_c * t
    return (1 / n_t) * (1 / mu_t + k) + (1 / n_c) * (1 / mu_c + k)


def wald_power(rr, lam_c, t, k, n_t, n_c, alpha=0.025):
    """Power of the one-sided Wald test for RR < 1 (lower is better)."""
    se = math.sqrt(zl_variance(rr, lam_c, t, k, n_t, n_c))
    return stats.norm.cdf(-math.log(rr) / se - stats.norm.isf(alpha))


def mean_information(lam, t, k, d):
    """E[lam T / (1 + k lam T)], T = min(Exp(d), t), by scipy quad (Lawless 1987)."""
    def g(s):
        return lam * s / (1 + k * lam * s)
    if d == 0:
        return g(t)
    cont, _ = integrate.quad(lambda s: g(s) * d * math.exp(-d * s), 0, t, epsabs=1e-13,
                             epsrel=1e-12)
    return cont + math.exp(-d * t) * g(t)


def design(endpoint, prior, **kw):
    return TrialDesign(endpoint, prior, **kw)


# ------------------------------------------------------------------------------------------
# variance and classical power
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("lam_c, rr, t, k, r", [
    (1.0, 0.7, 1.0, 0.5, 1.0),
    (0.8, 0.6, 0.75, 1.0, 2.0),
    (2.0, 0.85, 1.0, 0.4, 0.5),
    (1.4, 0.5, 1.5, 1.5, 1.0),
])
def test_power_matches_statsmodels_negative_binomial(lam_c, rr, t, k, r):
    # Zhu & Lakkis (2014) approach 1 and 2 via statsmodels power_negbin_ratio_2indep
    n_c = np.array([30.0, 90.0, 250.0])
    n_t = r * n_c
    for test_variance, method in (("observed_rates", "alt"), ("pooled_null", "ftotal")):
        ep = CountEndpoint(lam_c, t, overdispersion=k, allocation=r,
                           test_variance=test_variance)
        d = design(ep, PointMass(math.log(rr)), assumed_effect=rr)
        ds = evaluate(d, (n_t + n_c).astype(int))
        assert np.array_equal(ds.n_treatment.values, n_t)
        ref = sm_rates.power_negbin_ratio_2indep(
            lam_c * rr, lam_c, n_t, nobs_ratio=1 / r, exposure=t, value=1, alpha=0.025,
            dispersion=k, alternative="smaller", method_var=method, return_results=False)
        np.testing.assert_allclose(ds.power.values, ref, rtol=0, atol=CLOSED_TOL)


def test_power_direct_normal_formula_and_exact_success_route():
    # planning-ratio mode goes through compute.normal_outcome.exact_success; power there is
    # Phi(|log RR| / se - z) with the Zhu & Lakkis variance, computed with scipy.stats.norm
    ep = CountEndpoint(0.9, 2.0, overdispersion=0.7, variance_at="planning_ratio",
                       planning_rate_ratio=0.75)
    sizes = np.array([60, 200, 501])
    ds = evaluate(design(ep, PointMass(math.log(0.75))), sizes)
    n_t, n_c = ds.n_treatment.values, ds.n_control.values
    ref = [wald_power(0.75, 0.9, 2.0, 0.7, a, b) for a, b in zip(n_t, n_c, strict=True)]
    np.testing.assert_allclose(ds.power.values, ref, atol=CLOSED_TOL)
    np.testing.assert_allclose(ds.assurance.values, ref, atol=CLOSED_TOL)
    assert ds.attrs["method"].startswith("closed form")


def test_poisson_power_classical_log_scale_formula():
    # two Poisson rates on the log scale (common practice): se^2 = 1/(n_t lam_t t) +
    # 1/(n_c lam_c t); statsmodels power_poisson_ratio_2indep(dispersion=1) agrees
    ep = CountEndpoint(3.0, 0.5)
    sizes = np.array([40, 100, 300])
    ds = evaluate(design(ep, PointMass(math.log(0.8)), rule=Significance(0.05, "two")), sizes)
    n = sizes / 2
    se = np.sqrt(1 / (n * 3.0 * 0.8 * 0.5) + 1 / (n * 3.0 * 0.5))
    ref = stats.norm.cdf(-math.log(0.8) / se - stats.norm.isf(0.025))
    np.testing.assert_allclose(ds.power.values, ref, atol=CLOSED_TOL)
    sm = sm_rates.power_poisson_ratio_2indep(2.4, 3.0, n, nobs_ratio=1, exposure=0.5,
                                             value=1, alpha=0.025, dispersion=1,
                                             alternative="smaller", method_var="alt",
                                             return_results=False)
    np.testing.assert_allclose(ds.power.values, sm, atol=CLOSED_TOL)


def test_single_arm_and_higher_is_better():
    # single arm against a fixed reference rate: se^2 = (1/(lam_ref RR t) + k) / n
    ep = CountEndpoint(0.5, 2.0, overdispersion=0.3, layout="single_arm")
    ds = evaluate(design(ep, PointMass(math.log(0.6))), [50, 120])
    se = np.sqrt((1 / (0.5 * 0.6 * 2.0) + 0.3) / np.array([50, 120]))
    ref = stats.norm.cdf(-math.log(0.6) / se - stats.norm.isf(0.025))
    np.testing.assert_allclose(ds.power.values, ref, atol=CLOSED_TOL)
    # a rise in a good count (better="higher"): power Phi(log RR / se - z)
    up = CountEndpoint(2.0, 1.0, overdispersion=0.2, better="higher")
    ds = evaluate(design(up, PointMass(math.log(1.3))), [100, 300])
    n = np.array([50, 150])
    se = np.sqrt((1 / (2.0 * 1.3) + 0.2) / n + (1 / 2.0 + 0.2) / n)
    ref = stats.norm.cdf(math.log(1.3) / se - stats.norm.isf(0.025))
    np.testing.assert_allclose(ds.power.values, ref, atol=CLOSED_TOL)


def test_non_inferiority_margin_and_pooled_null_rates():
    # RR margin 1.25 (lower better): null log RR = log 1.25. Pooled null rates by
    # maximising the expected Poisson log likelihood under lam_t = 1.25 lam_c numerically.
    lam_c, rr, t, k, n_t, n_c = 1.2, 0.95, 1.0, 0.4, 300.0, 150.0
    ep = CountEndpoint(lam_c, t, overdispersion=k, allocation=2.0, test_variance="pooled_null")
    rule = Significance(0.025, margin=1.25)
    ds = evaluate(design(ep, PointMass(math.log(rr)), rule=rule), [450])
    e_t, e_c = n_t * lam_c * rr * t, n_c * lam_c * t

    def neg_loglik(lam):
        return -(e_t * math.log(1.25 * lam) - 1.25 * lam * n_t * t
                 + e_c * math.log(lam) - lam * n_c * t)
    lam0 = optimize.minimize_scalar(neg_loglik, bounds=(0.01, 10), method="bounded",
                                    options={"xatol": 1e-12}).x
    var0 = zl_variance(1.25, lam0, t, k, n_t, n_c)
    var1 = zl_variance(rr, lam_c, t, k, n_t, n_c)
    ref = stats.norm.cdf((math.log(1.25) - math.log(rr) - 1.959964 * math.sqrt(var0))
                         / math.sqrt(var1))
    assert float(ds.power[0]) == pytest.approx(ref, abs=1e-6)  # z rounded to 6 digits


@pytest.mark.parametrize("lam, t, k, d", [(0.8, 2.0, 0.5, 0.1), (3.0, 1.0, 2.0, 0.7),
                                          (0.2, 3.0, 0.1, 0.05), (1.5, 1.0, 0.0, 0.4)])
def test_dropout_information_matches_quadrature(lam, t, k, d):
    ep = CountEndpoint(lam, t, overdispersion=k, dropout_rate=d)
    ref = 1 / mean_information(lam, t, k, d)
    assert float(ep.unit_variance(lam)) == pytest.approx(ref, rel=QUAD_TOL)
    # mean exposure of min(Exp(d), t) is (1 - exp(-d t)) / d (common practice)
    assert ep.mean_exposure == pytest.approx(-math.expm1(-d * t) / d, rel=1e-12)


# ------------------------------------------------------------------------------------------
# sample size formula
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("lam_c, rr, t, k, r, power", [
    # control rates, ratios, dispersions and follow-up of the kind Zhu & Lakkis tabulate
    (0.8, 0.85, 0.75, 0.4, 1.0, 0.8),
    (1.0, 0.75, 0.75, 0.7, 1.0, 0.9),
    (1.2, 0.6, 1.0, 1.0, 2.0, 0.8),
    (1.4, 0.5, 1.0, 1.5, 0.5, 0.9),
])
def test_sample_size_negative_binomial_zhu_lakkis(lam_c, rr, t, k, r, power):
    # formula as printed by Zhu & Lakkis (2014), approach 1 (from memory; no table value)
    z = stats.norm.isf(0.025) + stats.norm.ppf(power)
    mu_c, mu_t = lam_c * t, lam_c * rr * t
    exact = z**2 * ((1 / mu_t + k) / r + (1 / mu_c + k)) / math.log(rr) ** 2
    got = sample_size_for_rate_ratio(rr, control_rate=lam_c, follow_up=t, overdispersion=k,
                                     allocation=r, alpha=0.025, power=power)
    assert got.n_control_exact == pytest.approx(exact, rel=1e-12)
    assert got.n_control == math.ceil(exact)
    assert got.n_treatment == math.ceil(r * got.n_control - 1e-9)
    # independent: statsmodels power at the exact size is the requested power
    sm = sm_rates.power_negbin_ratio_2indep(lam_c * rr, lam_c, r * exact, nobs_ratio=1 / r,
                                            exposure=t, alpha=0.025, dispersion=k,
                                            alternative="smaller", return_results=False)
    assert float(sm) == pytest.approx(power, abs=1e-9)
    # approach 2 (pooled null variance) also reaches the requested power in statsmodels
    pooled = sample_size_for_rate_ratio(rr, control_rate=lam_c, follow_up=t, overdispersion=k,
                                        allocation=r, power=power, test_variance="pooled_null")
    sm2 = sm_rates.power_negbin_ratio_2indep(
        lam_c * rr, lam_c, r * pooled.n_control_exact, nobs_ratio=1 / r, exposure=t,
        alpha=0.025, dispersion=k, alternative="smaller", method_var="ftotal",
        return_results=False)
    assert float(sm2) == pytest.approx(power, abs=1e-9)


def test_sample_size_poisson_classical():
    # per group n = (z_a + z_b)^2 (1/lam_t + 1/lam_c) / (t (log RR)^2) (common practice)
    lam_c, rr, t = 2.0, 0.7, 1.5
    z = stats.norm.isf(0.025) + stats.norm.isf(0.2)
    exact = z**2 * (1 / (lam_c * rr) + 1 / lam_c) / (t * math.log(rr) ** 2)
    got = sample_size_for_rate_ratio(rr, control_rate=lam_c, follow_up=t)
    assert got.n_control_exact == pytest.approx(exact, rel=1e-12)
    assert (got.n_control, got.n_treatment) == (math.ceil(exact), math.ceil(exact))


@settings(max_examples=40, deadline=None)
@given(k1=st.floats(0.0, 2.0), dk=st.floats(0.01, 2.0), rr=st.floats(0.3, 0.95),
       lam=st.floats(0.1, 5.0), t=st.floats(0.25, 3.0), r=st.floats(0.5, 3.0),
       d=st.sampled_from([0.0, 0.2]))
def test_overdispersion_increases_needed_size(k1, dk, rr, lam, t, r, d):
    common = dict(control_rate=lam, follow_up=t, allocation=r, dropout_rate=d)
    small = sample_size_for_rate_ratio(rr, overdispersion=k1, **common)
    large = sample_size_for_rate_ratio(rr, overdispersion=k1 + dk, **common)
    assert large.n_control_exact > small.n_control_exact
    # and dropout (less exposure) never helps
    if d == 0:
        shorter = sample_size_for_rate_ratio(rr, overdispersion=k1,
                                             **{**common, "dropout_rate": 0.3})
        assert shorter.n_control_exact > small.n_control_exact


# ------------------------------------------------------------------------------------------
# assurance
# ------------------------------------------------------------------------------------------
def true_effect_assurance(prior_pdf, lo, hi, lam_c, t, k, n_t, n_c, cut=None, alpha=0.025,
                          centre=None):
    """quad of power(RR) * prior density over log RR (lower better), se at each RR."""
    def integrand(x):
        se = math.sqrt(zl_variance(math.exp(x), lam_c, t, k, n_t, n_c))
        return stats.norm.cdf(-x / se - stats.norm.isf(alpha)) * prior_pdf(x)
    upper = hi if cut is None else min(hi, cut)
    points = None if centre is None else [centre]
    value, _ = integrate.quad(integrand, lo, upper, epsabs=1e-12, epsrel=1e-11, limit=500,
                              points=points)
    return value


def test_assurance_normal_prior_true_effect_vs_quad():
    lam_c, t, k = 0.7, 2.0, 0.6
    prior = Normal(math.log(0.75), 0.2)
    ep = CountEndpoint(lam_c, t, overdispersion=k)
    d = design(ep, prior, relevant_effect=0.85)
    ds = evaluate(d, [100, 300, 800])
    pdf = stats.norm(math.log(0.75), 0.2).pdf
    lo, hi = math.log(0.75) - 12 * 0.2, math.log(0.75) + 12 * 0.2
    for i, (n_t, n_c) in enumerate(zip(ds.n_treatment.values, ds.n_control.values,
                                       strict=True)):
        ref = true_effect_assurance(pdf, lo, hi, lam_c, t, k, n_t, n_c)
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=QUAD_TOL)
        # decomposition: P(success and RR < 1), P(success and RR <= 0.85)
        ref_b = true_effect_assurance(pdf, lo, hi, lam_c, t, k, n_t, n_c, cut=0.0)
        ref_r = true_effect_assurance(pdf, lo, hi, lam_c, t, k, n_t, n_c, cut=math.log(0.85))
        assert float(ds.prob_success_and_benefit[i]) == pytest.approx(ref_b, abs=QUAD_TOL)
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(ref_r, abs=QUAD_TOL)


def test_assurance_planning_ratio_closed_form_and_quad():
    # se fixed at the planning ratio: assurance = Phi((m - c)/sqrt(v + se^2)) on the benefit
    # scale (O'Hagan et al. 2005), and the same by quad of Phi((delta - c)/se)
    lam_c, t, k, m, s = 1.1, 1.0, 0.9, math.log(0.7), 0.25
    ep = CountEndpoint(lam_c, t, overdispersion=k, variance_at="planning_ratio",
                       planning_rate_ratio=0.72)
    ds = evaluate(design(ep, Normal(m, s)), [150, 400])
    for i, (n_t, n_c) in enumerate(zip(ds.n_treatment.values, ds.n_control.values,
                                       strict=True)):
        se = math.sqrt(zl_variance(0.72, lam_c, t, k, n_t, n_c))
        c = stats.norm.isf(0.025) * se
        closed = stats.norm.cdf((-m - c) / math.sqrt(s * s + se * se))
        quad, _ = integrate.quad(lambda b, se=se, c=c: stats.norm.cdf((b - c) / se)
                                 * stats.norm.pdf(b, -m, s), -m - 12 * s, -m + 12 * s,
                                 epsabs=1e-12)
        assert float(ds.assurance[i]) == pytest.approx(closed, abs=CLOSED_TOL)
        assert closed == pytest.approx(quad, abs=1e-9)


def test_assurance_mixture_with_null_atom_and_student_t():
    # 25% chance of no effect (atom at RR = 1, power alpha) + a heavy-tailed part
    lam_c, t, k = 1.0, 1.0, 0.5
    part = StudentT(6, math.log(0.7), 0.15)
    prior = Mixture([PointMass(0.0), part], [0.25, 0.75])
    ep = CountEndpoint(lam_c, t, overdispersion=k)
    ds = evaluate(design(ep, prior), [200, 600])
    pdf = stats.t(6, math.log(0.7), 0.15).pdf
    for i, (n_t, n_c) in enumerate(zip(ds.n_treatment.values, ds.n_control.values,
                                       strict=True)):
        # log RR beyond +-25 carries t6 tail mass below 1e-12
        cont = true_effect_assurance(pdf, -25.0, 25.0, lam_c, t, k, n_t, n_c,
                                     centre=math.log(0.7))
        ref = 0.25 * 0.025 + 0.75 * cont
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=QUAD_TOL)


MC_T, MC_K, MC_M, MC_S = 1.0, 0.5, math.log(0.75), 0.15
MC_GAMMA = stats.gamma(a=20, scale=0.05)


@functools.cache
def mc_reference(n_t, n_c):
    """quad over the gamma control rate of the exact assurance (itself quad over log RR)."""
    pdf = stats.norm(MC_M, MC_S).pdf

    def given_rate(lam):
        return true_effect_assurance(pdf, MC_M - 10 * MC_S, MC_M + 10 * MC_S, lam, MC_T, MC_K,
                                     n_t, n_c)
    lo, hi = MC_GAMMA.ppf(1e-10), MC_GAMMA.ppf(1 - 1e-10)
    value, _ = integrate.quad(lambda lam: given_rate(lam) * MC_GAMMA.pdf(lam), lo, hi,
                              epsabs=1e-9)
    return value


@pytest.mark.parametrize("seed", [1, 2024, 777_777])
def test_monte_carlo_control_rate_prior_vs_double_quad(seed):
    # gamma prior on the control rate; Rao-Blackwellised Monte Carlo within 4 MCSE + 1e-3
    t, k, m, s = MC_T, MC_K, MC_M, MC_S
    ep = CountEndpoint(1.0, t, overdispersion=k, control_rate_prior=FromScipy(MC_GAMMA))
    ds = evaluate(design(ep, Normal(m, s), relevant_effect=0.8), [200, 500], draws=20_000,
                  seed=seed)
    assert ds.attrs["method"].startswith("Monte Carlo")
    for i, (n_t, n_c) in enumerate(zip(ds.n_treatment.values, ds.n_control.values,
                                       strict=True)):
        ref = mc_reference(int(n_t), int(n_c))
        got, mcse = float(ds.assurance[i]), float(ds.assurance_mcse[i])
        assert 0 < mcse < 0.01
        assert abs(got - ref) <= 4 * mcse + MC_FLOOR
    # classical power keeps the planning control rate
    ref_power = [wald_power(0.75, 1.0, t, k, a, b)
                 for a, b in zip(ds.n_treatment.values, ds.n_control.values, strict=True)]
    np.testing.assert_allclose(ds.power.values, ref_power, atol=CLOSED_TOL)
    # same seed, same numbers
    again = evaluate(design(ep, Normal(m, s), relevant_effect=0.8), [200, 500], draws=20_000,
                     seed=seed)
    np.testing.assert_array_equal(again.assurance.values, ds.assurance.values)


# ------------------------------------------------------------------------------------------
# simulation check
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kw, rr, n", [
    (dict(control_rate=1.2, follow_up=1.0, overdispersion=0.5), 0.7, 100),
    (dict(control_rate=0.8, follow_up=1.5, overdispersion=0.8, dropout_rate=0.3), 0.65, 110),
])
def test_simulated_wald_power_matches_formula(kw, rr, n):
    ep = CountEndpoint(kw.pop("control_rate"), kw.pop("follow_up"), **kw)
    sim = simulate_rejection_rate(ep, rr, n, n, trials=2000, seed=11)
    # formula written here: Zhu & Lakkis variance, information averaged over the follow-up
    lam_c = ep.control_rate
    var = (1 / mean_information(lam_c * rr, ep.follow_up, ep.overdispersion, ep.dropout_rate)
           + 1 / mean_information(lam_c, ep.follow_up, ep.overdispersion, ep.dropout_rate)) / n
    formula = stats.norm.cdf(-math.log(rr) / math.sqrt(var) - stats.norm.isf(0.025))
    assert sim.predicted_power == pytest.approx(formula, abs=QUAD_TOL)
    assert 0.3 < formula < 0.9  # a moderate design, where the check has teeth
    assert sim.undefined == 0
    assert abs(sim.rejection_rate - formula) <= 4 * sim.mcse + SIM_FLOOR
    again = simulate_rejection_rate(ep, rr, n, n, trials=2000, seed=11)
    assert again == sim


def test_simulated_poisson_analysis_ignoring_overdispersion_is_anticonservative():
    # common practice: a Poisson analysis of overdispersed counts understates the variance,
    # so its type I error exceeds alpha (here 2.5%); the NB analysis keeps close to alpha
    ep = CountEndpoint(1.5, 1.0, overdispersion=1.0)
    naive = simulate_rejection_rate(ep, 1.0, 80, 80, trials=2000, seed=5, analysis="poisson")
    nb = simulate_rejection_rate(ep, 1.0, 80, 80, trials=2000, seed=5)
    assert naive.rejection_rate > 0.025 + 4 * math.sqrt(0.025 * 0.975 / 2000)
    assert abs(nb.rejection_rate - 0.025) <= 4 * math.sqrt(0.025 * 0.975 / 2000) + SIM_FLOOR


# ------------------------------------------------------------------------------------------
# invariants (hypothesis)
# ------------------------------------------------------------------------------------------
@st.composite
def count_designs(draw, point_mass=False):
    ep = CountEndpoint(
        draw(st.floats(0.1, 5.0)), draw(st.floats(0.25, 3.0)),
        overdispersion=draw(st.sampled_from([0.0, 0.3, 1.2])),
        dropout_rate=draw(st.sampled_from([0.0, 0.25])),
        layout=draw(st.sampled_from(["two_arm", "two_arm", "single_arm"])),
        allocation=draw(st.floats(0.5, 3.0)),
        better=draw(st.sampled_from(["lower", "higher"])),
        **draw(st.sampled_from([
            dict(variance_at="true_effect", test_variance="observed_rates"),
            dict(variance_at="true_effect", test_variance="pooled_null"),
            dict(variance_at="planning_ratio", test_variance="observed_rates")])),
    )
    mean = draw(st.floats(-1.0, 1.0))
    sd = draw(st.floats(0.05, 0.5))
    if point_mass:
        prior = PointMass(mean)
    else:
        kind = draw(st.sampled_from(["normal", "mixture"]))
        prior = Normal(mean, sd) if kind == "normal" else \
            Mixture([PointMass(0.0), Normal(mean, sd)], [0.3, 0.7])
    margin = draw(st.sampled_from([0.0, 0.0, 1.2]))
    return ep, prior, Significance(0.025, margin=margin)


HYP = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@HYP
@given(count_designs(), st.integers(2, 3000))
def test_probabilities_bounded_and_ordered(case, n):
    ep, prior, rule = case
    relevant = math.exp(prior.mean() + (0.05 if ep.better == "lower" else -0.05))
    d = design(ep, prior, rule=rule, relevant_effect=relevant)
    ds = evaluate(d, [n])
    a = float(ds.assurance[0])
    assert 0.0 <= a <= 1.0
    assert float(ds.prob_success_and_benefit[0]) <= a + 1e-12
    assert float(ds.prob_success_and_relevant[0]) <= a + 1e-12
    assert 0.0 <= float(ds.power[0]) <= 1.0
    # a test of size alpha: assurance <= ceiling + alpha (1 - ceiling) (common practice)
    ceiling = float(ds.ceiling)
    assert a <= ceiling + 0.025 * (1 - ceiling) + 1e-7


@HYP
@given(count_designs(point_mass=True), st.integers(2, 3000))
def test_point_mass_assurance_equals_power(case, n):
    ep, prior, rule = case
    ds = evaluate(design(ep, prior, rule=rule), [n])
    assert float(ds.assurance[0]) == pytest.approx(float(ds.power[0]), abs=1e-12)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(count_designs())
def test_assurance_tends_to_ceiling(case):
    ep, prior, rule = case
    d = design(ep, prior, rule=rule)
    ds = evaluate(d, [10**10])
    # threshold c(n) = L + z * se; with mu >= 0.025 events per patient, se <= 2e-4 here, so
    # the prior mass between L and c (density <= 8 for sd >= 0.05) is below 0.004
    assert float(ds.assurance[0]) == pytest.approx(d.ceiling(), abs=0.005)
    assert float(ds.assurance[0]) <= d.ceiling() + 0.025 * (1 - d.ceiling()) + 1e-7


# ------------------------------------------------------------------------------------------
# end to end: TrialDesign + evaluate + solve_sample_size
# ------------------------------------------------------------------------------------------
def test_solve_sample_size_power_matches_formula_with_allocation():
    lam_c, rr, t, k, r = 0.6, 0.7, 2.0, 0.8, 2.0
    ep = CountEndpoint(lam_c, t, overdispersion=k, allocation=r)
    d = design(ep, Normal(math.log(0.75), 0.15), assumed_effect=rr, relevant_effect=0.85)
    answer = solve_sample_size(d, 0.9, quantity="power")
    z = stats.norm.isf(0.025) + stats.norm.ppf(0.9)
    exact = z**2 * ((1 / (lam_c * rr * t) + k) / r + (1 / (lam_c * t) + k)) / math.log(rr) ** 2
    assert answer.reached and answer.n_control == math.ceil(exact)
    assert answer.n_treatment == math.ceil(r * answer.n_control)
    # assurance target: the answer reaches it and one control patient fewer does not
    target = 0.7
    ans = solve_sample_size(d, target)
    assert ans.reached and ans.achieved >= target
    ds = evaluate(d, [ans.n_total - 3, ans.n_total])  # one control patient fewer, r = 2
    assert float(ds.assurance[0]) < target <= float(ds.assurance[1])
    assert "patient_time" in ds.coords
    np.testing.assert_allclose(ds.patient_time.values, ds.n.values * t)


def test_target_above_ceiling_is_reported():
    ep = CountEndpoint(1.0, 1.0, overdispersion=0.5)
    prior = Mixture([PointMass(0.0), Normal(math.log(0.7), 0.1)], [0.4, 0.6])
    ans = solve_sample_size(design(ep, prior), 0.7)
    assert not ans.reached and "ceiling" in ans.message


# ------------------------------------------------------------------------------------------
# validation
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kwargs, name", [
    (dict(control_rate=0.0), "control_rate"),
    (dict(control_rate=-1.0), "control_rate"),
    (dict(control_rate=float("nan")), "control_rate"),
    (dict(follow_up=0.0), "follow_up"),
    (dict(follow_up=-2.0), "follow_up"),
    (dict(overdispersion=-0.1), "overdispersion"),
    (dict(dropout_rate=-0.5), "dropout_rate"),
    (dict(allocation=0.0), "allocation"),
    (dict(layout="crossover"), "layout"),
    (dict(better="fewer"), "better"),
    (dict(variance_at="mean"), "variance_at"),
    (dict(planning_rate_ratio=0.0), "planning_rate_ratio"),
    (dict(planning_rate_ratio=-0.7), "planning_rate_ratio"),
    (dict(test_variance="score"), "test_variance"),
    (dict(test_variance="pooled_null", variance_at="planning_ratio"), "test_variance"),
    (dict(control_rate_prior=Normal(1.0, 1.0)), "control_rate_prior"),
    (dict(control_rate_prior=0.8), "control_rate_prior"),
])
def test_endpoint_validation(kwargs, name):
    args = dict(control_rate=1.0, follow_up=1.0) | kwargs
    with pytest.raises(AssuranceInputError, match=f"'{name}' parameter of CountEndpoint"):
        CountEndpoint(args.pop("control_rate"), args.pop("follow_up"), **args)


@pytest.mark.parametrize("kwargs, name", [
    (dict(rate_ratio=0.0), "rate_ratio"),
    (dict(rate_ratio=-0.7), "rate_ratio"),
    (dict(rate_ratio=1.0), "rate_ratio"),
    (dict(alpha=0.6), "alpha"),
    (dict(power=0.3), "power"),
    (dict(control_rate=-1.0), "control_rate"),
    (dict(follow_up=0.0), "follow_up"),
    (dict(overdispersion=-1.0), "overdispersion"),
])
def test_sample_size_validation(kwargs, name):
    args = dict(rate_ratio=0.7, control_rate=1.0, follow_up=1.0) | kwargs
    with pytest.raises(AssuranceInputError,
                       match=f"'{name}' parameter of sample_size_for_rate_ratio"):
        sample_size_for_rate_ratio(args.pop("rate_ratio"), **args)


def test_simulation_validation():
    ep = CountEndpoint(1.0, 1.0)
    with pytest.raises(AssuranceInputError, match="'rate_ratio' parameter"):
        simulate_rejection_rate(ep, 0.0, 10, 10)
    with pytest.raises(AssuranceInputError, match="'trials' parameter"):
        simulate_rejection_rate(ep, 0.7, 10, 10, trials=5)
    with pytest.raises(AssuranceInputError, match="'analysis' parameter"):
        simulate_rejection_rate(ep, 0.7, 10, 10, analysis="quasi")
    with pytest.raises(AssuranceInputError, match="'n_control' parameter"):
        simulate_rejection_rate(ep, 0.7, 10, 0)
    with pytest.raises(AssuranceInputError, match="'endpoint' parameter"):
        simulate_rejection_rate("counts", 0.7, 10, 10)


def test_non_positive_rate_ratio_is_an_error_not_nan():
    ep = CountEndpoint(1.0, 1.0)
    with pytest.raises(AssuranceInputError, match="'assumed_effect' parameter of TrialDesign"):
        design(ep, Normal(-0.3, 0.1), assumed_effect=-0.7)
    with pytest.raises(AssuranceInputError, match="'relevant_effect' parameter of TrialDesign"):
        design(ep, Normal(-0.3, 0.1), relevant_effect=0.0)
    # the endpoint's own guard, should a log of a non-positive ratio reach it
    calc = ep.calculator(Normal(0.3, 0.1), Significance(), draws=100, seed=1)
    with pytest.raises(AssuranceInputError, match="rate ratio > 0"):
        calc.power(float("nan"), np.array([50]), np.array([50]))


# ------------------------------------------------------------------------------------------
# design file
# ------------------------------------------------------------------------------------------
def test_from_design_table_keys_and_errors():
    table = {"type": "counts", "control_rate": 0.6, "follow_up": 2.0, "overdispersion": 0.8,
             "dropout_rate": 0.1, "allocation": 1.5, "better": "lower",
             "test_variance": "pooled_null",
             "control_rate_prior": {"family": "scipy", "name": "gamma",
                                    "parameters": {"a": 30.0, "scale": 0.02}}}
    ep = endpoint_from_table(table, "trial.toml")
    assert (ep.control_rate, ep.follow_up, ep.overdispersion, ep.allocation) == \
        (0.6, 2.0, 0.8, 1.5)
    assert ep.control_rate_prior.mean() == pytest.approx(0.6)
    with pytest.raises(DesignFileError, match="Did you mean 'overdispersion'"):
        endpoint_from_table(table | {"overdispersal": 1.0}, "trial.toml")
    with pytest.raises(DesignFileError, match="'endpoint.follow_up'"):
        endpoint_from_table({"type": "counts", "control_rate": 1.0}, "trial.toml")
    with pytest.raises(DesignFileError, match="unknown key 'control_rate' in .endpoint."):
        endpoint_from_table(table | {"type": "continuous"}, "trial.toml")
    with pytest.raises(DesignFileError, match=r"trial.toml: 'endpoint.overdispersion'"):
        endpoint_from_table(table | {"overdispersion": -1}, "trial.toml")


def test_case_study_file_runs():
    spec = read_design_file(CASE_STUDY / "design.toml")
    assert isinstance(spec.design.endpoint, CountEndpoint)
    ds = evaluate(spec.design, spec.sizes, draws=4000, seed=spec.seed)
    assert "invented" in (CASE_STUDY / "README.md").read_text(encoding="utf-8").lower()
    assert np.all(np.diff(ds.power.values) > 0)
    assert np.all(ds.assurance.values <= float(ds.ceiling) + 1e-9)
    assert np.all(ds.assurance_mcse.values < 0.01)


@pytest.mark.filterwarnings("ignore:The occurrence of roundoff error")  # quad at 2e-14
@pytest.mark.parametrize("klt", [1e-6, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0, 1e3, 1e6])
@pytest.mark.parametrize("dt", [1e-3, 0.5, 3.0, 10.0, 100.0])
def test_information_over_follow_up_cut_by_dropout_against_quad(klt, dt):
    # E[lambda T / (1 + k lambda T)], T = min(Exp(d), t), against scipy.integrate.quad of
    # the same integral (density d exp(-d s) on [0, t), atom exp(-d t) at t), given the
    # points where the pole's grading lies so that quad itself is accurate. The 64-point
    # single rule used before was off by up to 6e-5 at k lambda t = 1000.
    from scipy import integrate

    from assurance.endpoints.counts import _information_per_patient

    t = 1.5
    k, d = klt / (2.5 * t), dt / t
    lams = np.array([0.4, 2.5])
    got = _information_per_patient(lams, k, d, t)

    def density(s, lam):
        return d * math.exp(-d * s) * lam * s / (1 + k * lam * s)

    for lam, value in zip(lams, got, strict=True):
        points = [p for p in (4.0**j / (k * lam) for j in range(-3, 12)) if 0 < p < t]
        inner, _ = integrate.quad(density, 0, t, args=(lam,), epsabs=0, epsrel=2e-14,
                                  limit=1000, points=points or None)
        want = inner + math.exp(-d * t) * lam * t / (1 + k * lam * t)
        assert value == pytest.approx(want, rel=1e-13, abs=0)


@pytest.mark.parametrize("dropout", [0.0, 0.3])
def test_negative_binomial_fit_of_simulated_trials_matches_statsmodels(dropout):
    # The simulation's per-trial maximum likelihood (dispersion k and the two log rates,
    # exposure as offset) against statsmodels' NB2 regression (statsmodels
    # NegativeBinomial, loglike_method="nb2", alpha = k), trial by trial. statsmodels is
    # run with BFGS to a gradient of 1e-10; both then agree to about 1e-8, so 1e-6.
    import warnings

    import statsmodels.api as sm

    from assurance.endpoints.counts import _fit_dispersion, _simulate_arm

    ep = CountEndpoint(0.6, 2.0, overdispersion=0.8, dropout_rate=dropout)
    rng = np.random.default_rng(7)
    data = [_simulate_arm(ep, rng, 5, 80, lam) for lam in (0.42, 0.6)]
    start = [np.log(y.sum(axis=1) / t.sum(axis=1)) for y, t in data]
    k, log_rates = _fit_dispersion(data, start)
    arm = np.r_[np.ones(80), np.zeros(80)]
    design = np.column_stack([np.ones(160), arm])
    for i in range(5):
        y = np.concatenate([data[0][0][i], data[1][0][i]])
        t = np.concatenate([data[0][1][i], data[1][1][i]])
        assert k[i] > 0.01  # overdispersed data: statsmodels' alpha is away from its bound
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # statsmodels' convergence chatter
            fit = sm.NegativeBinomial(y, design, exposure=t, loglike_method="nb2").fit(
                disp=0, method="bfgs", maxiter=2000, gtol=1e-10)
        control, treated, alpha = fit.params
        assert k[i] == pytest.approx(alpha, rel=1e-6)
        assert log_rates[0][i] == pytest.approx(control + treated, abs=1e-6)
        assert log_rates[1][i] == pytest.approx(control, abs=1e-6)


def test_negative_binomial_dispersion_at_the_edges_maximises_the_likelihood():
    # With equal follow-up the rates' estimates are the arm means whatever k is, so the
    # profile likelihood of k is a sum of negative binomial log pmfs (scipy.stats.nbinom,
    # n = 1/k, p = 1 / (1 + k mu)); its maximiser over log k in [1e-8, 1e4] by
    # scipy.optimize.minimize_scalar is the reference. Trials: one huge count among zeros
    # (k near 1000), Poisson-like data (small k), negative binomial data, and data with
    # less spread than Poisson (k = 0: no overdispersion).
    from scipy import optimize, stats

    from assurance.endpoints.counts import _fit_dispersion

    n = 100
    rng = np.random.default_rng(0)
    arms = [np.zeros((4, n), dtype=np.int64), np.zeros((4, n), dtype=np.int64)]
    arms[0][0, 0], arms[1][0, 1] = 5000, 3000
    for arm in arms:
        arm[1] = rng.poisson(2.0, n)
        arm[2] = rng.negative_binomial(0.5, 0.5 / 2.5, n)
        arm[3] = 1
    follow = np.ones((4, n))
    data = [(arm, follow) for arm in arms]
    start = [np.log(arm.sum(axis=1) / n) for arm in arms]
    k, _ = _fit_dispersion(data, start)
    assert k[3] == 0.0
    for i in range(3):
        ys = [arm[i] for arm in arms]

        def minus_loglik(log_k, ys=ys):
            kk = math.exp(log_k)
            return -sum(stats.nbinom.logpmf(y, 1 / kk, 1 / (1 + kk * y.mean())).sum()
                        for y in ys)

        best = optimize.minimize_scalar(minus_loglik, bounds=(math.log(1e-8), math.log(1e4)),
                                        method="bounded", options={"xatol": 1e-10})
        # a minimiser finds a smooth maximum only to about sqrt(machine epsilon) in relative
        # terms of its argument (common practice); the score root here is sharper
        assert math.log(k[i]) == pytest.approx(best.x, abs=2e-5), i
