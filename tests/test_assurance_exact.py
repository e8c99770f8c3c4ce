"""Exact (known-sigma) assurance against closed forms and independent quadrature.

References computed inside the tests:

* normal prior, z analysis: assurance = Phi((m - c) / sqrt(v + se^2)) (O'Hagan, Stevens &
  Campbell 2005, Pharmaceutical Statistics 4:187-201);
* normal prior, t analysis: the estimate is marginally N(m, tau^2), tau^2 = v + se^2, and
  independent of the sample SD, so P(d + margin > t_crit * s * k) is the non-central t tail
  ``nct.sf(t_crit * se / tau, df, (m + margin) / tau)`` (derived in the test module doc;
  same algebra as the classical non-central t power, common practice);
* any prior: ``scipy.integrate.quad`` of power(delta) times the prior density, with power
  from scipy.stats.norm (z) or scipy.stats.nct (t), plus the atoms of point masses;
* decomposition P(success and delta > a): quad from a, and for a normal prior the bivariate
  normal of (estimate, effect) via scipy.stats.multivariate_normal.

Tolerances: closed form against closed form 1e-10 (rounding of erf/Owen's T); against quad
1e-7 (quad run at epsabs 1e-11 and the package's fixed rule over the prior, about 1e-11,
plus its sample-SD quadrature, ~1e-8 for df >= 5); 1e-6 where df < 5 (package's
Gauss-Legendre rule over the sample SD, observed worst 4e-7 against scipy.stats.nct). The
fixed rule itself is held to 1e-9 in test_exactness.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from assurance import (
    ContinuousEndpoint,
    FromScipy,
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
from assurance.compute.prior_predictive import upper_orthant_normal

QUAD_TOL = 1e-7
CLOSED_TOL = 1e-10


# ------------------------------------------------------------------------------------------
# independent references
# ------------------------------------------------------------------------------------------
class Geometry:
    """se, df and the rule's pieces for one (n_treatment, n_control)."""

    def __init__(self, sigma, n_t, n_c, alpha, margin=0.0, min_est=None, single_arm=False):
        self.k = 1 / math.sqrt(n_t) if single_arm else math.sqrt(1 / n_t + 1 / n_c)
        self.se = sigma * self.k
        self.df = n_t - 1 if single_arm else n_t + n_c - 2
        self.alpha, self.margin, self.min_est = alpha, margin, min_est

    def threshold_z(self):
        c = -self.margin + stats.norm.isf(self.alpha) * self.se
        return c if self.min_est is None else max(c, self.min_est)

    def power_z(self, delta):
        return stats.norm.sf((self.threshold_z() - np.asarray(delta)) / self.se)

    def power_t(self, delta):
        assert self.min_est is None
        crit = stats.t.isf(self.alpha, self.df)
        return stats.nct.sf(crit, self.df, (np.asarray(delta) + self.margin) / self.se)

    def power(self, delta, analysis):
        return self.power_z(delta) if analysis == "z" else self.power_t(delta)


def quad_assurance(geo, analysis, dist, atoms=(), weight=1.0, cut=None, bounds=None):
    """weight * int_{cut}^inf power(delta) f(delta) d delta + sum of atoms above cut."""
    lo, hi = bounds if bounds is not None else (dist.ppf(1e-13), dist.isf(1e-13))
    if cut is not None:
        lo = max(lo, cut)
    total = 0.0
    if lo < hi:
        pts = [p for p in (dist.median(), geo.threshold_z() if analysis == "z" else None)
               if p is not None and lo < p < hi]
        total = integrate.quad(lambda x: float(geo.power(x, analysis)) * dist.pdf(x), lo, hi,
                               points=pts or None, epsabs=1e-11, epsrel=1e-10, limit=400)[0]
    total *= weight
    for loc, w in atoms:
        if cut is None or loc >= cut:
            total += w * float(geo.power(loc, analysis))
    return total


def arms(ds):
    return ds.n_treatment.values.astype(int), ds.n_control.values.astype(int)


# ------------------------------------------------------------------------------------------
# normal prior: closed forms
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("mean", [-1.0, 0.0, 0.5, 2.0])
@pytest.mark.parametrize("sd", [0.1, 1.0, 3.0])
@pytest.mark.parametrize("sigma", [1.0, 10.0])
@pytest.mark.parametrize(("alpha", "allocation"), [(0.025, 1.0), (0.1, 2.5), (0.05, 0.5)])
def test_normal_prior_z_closed_form(mean, sd, sigma, alpha, allocation):
    design = TrialDesign(ContinuousEndpoint(sigma, allocation=allocation, analysis="z"),
                         Normal(mean, sd), rule=Significance(alpha))
    ds = evaluate(design, [2, 7, 30, 120, 999, 20000])
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha)
        # O'Hagan, Stevens & Campbell 2005: Phi((m - c) / sqrt(v + se^2))
        ref = stats.norm.cdf((mean - geo.threshold_z()) / math.hypot(sd, geo.se))
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=CLOSED_TOL)


@pytest.mark.parametrize("mean", [-0.5, 0.3, 1.5])
@pytest.mark.parametrize("sd", [0.2, 1.0])
@pytest.mark.parametrize(("sigma", "alpha", "allocation", "margin"),
                         [(1.0, 0.025, 1.0, 0.0), (4.0, 0.1, 2.0, 0.0), (2.0, 0.025, 1.0, 0.5)])
def test_normal_prior_z_matches_quad(mean, sd, sigma, alpha, allocation, margin):
    design = TrialDesign(ContinuousEndpoint(sigma, allocation=allocation, analysis="z"),
                         Normal(mean, sd), rule=Significance(alpha, margin=margin))
    ds = evaluate(design, [4, 25, 200, 3000])
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha, margin)
        ref = quad_assurance(geo, "z", stats.norm(mean, sd))
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=QUAD_TOL)


@pytest.mark.parametrize("mean", [-0.5, 0.3, 1.5])
@pytest.mark.parametrize("sd", [0.2, 1.0])
@pytest.mark.parametrize(("sigma", "alpha", "allocation", "margin"),
                         [(1.0, 0.025, 1.0, 0.0), (4.0, 0.1, 2.0, 0.0), (2.0, 0.025, 1.0, 0.5)])
def test_normal_prior_t_closed_form_and_quad(mean, sd, sigma, alpha, allocation, margin):
    design = TrialDesign(ContinuousEndpoint(sigma, allocation=allocation), Normal(mean, sd),
                         rule=Significance(alpha, margin=margin))
    ds = evaluate(design, [3, 5, 12, 60, 400])
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha, margin)
        tau = math.hypot(sd, geo.se)
        closed = stats.nct.sf(stats.t.isf(alpha, geo.df) * geo.se / tau, geo.df,
                              (mean + margin) / tau)
        tol = QUAD_TOL if geo.df >= 5 else 1e-6
        assert float(ds.assurance[i]) == pytest.approx(closed, abs=tol)
        if i in (0, 3):  # quad of nct power x density, on a subset to keep the suite fast
            ref = quad_assurance(geo, "t", stats.norm(mean, sd))
            assert float(ds.assurance[i]) == pytest.approx(ref, abs=tol)


def _normal_t_min_estimate(mean, sd, sigma, geo):
    """Normal prior, t analysis, min_estimate: E_s[Phi((m - max(-M + t s k, e)) / tau)].

    Given the sample SD s the threshold is fixed and the estimate is marginally N(m, tau^2)
    (O'Hagan et al. 2005); quad over x = df s^2 / sigma^2 ~ chi2_df, split at the kink.
    """
    df, k = geo.df, geo.k
    crit = stats.t.isf(geo.alpha, df)
    tau = math.hypot(sd, geo.se)

    def integrand(x):
        c = max(-geo.margin + crit * sigma * math.sqrt(x / df) * k, geo.min_est)
        return stats.norm.cdf((mean - c) / tau) * stats.chi2.pdf(x, df)

    lo, hi = stats.chi2.ppf(1e-15, df), stats.chi2.isf(1e-15, df)
    edges = {lo, float(df), hi}
    if geo.min_est + geo.margin > 0:
        kink = df * ((geo.min_est + geo.margin) / (crit * sigma * k)) ** 2
        edges.add(min(max(kink, lo), hi))
    edges = sorted(edges)
    return sum(integrate.quad(integrand, a, b, epsabs=1e-13, epsrel=1e-12, limit=500)[0]
               for a, b in zip(edges[:-1], edges[1:], strict=True))


@pytest.mark.parametrize("layout", ["two_arm", "single_arm"])
@pytest.mark.parametrize(("mean", "sd"), [(3.0, 1.0), (0.0, 2.0)])
@pytest.mark.parametrize(("margin", "min_est"), [(0.0, 3.0), (4.0, 0.0), (2.0, 1.0)])
def test_normal_prior_t_with_minimum_estimate(layout, mean, sd, margin, min_est):
    sigma = 10.0
    design = TrialDesign(ContinuousEndpoint(sigma, layout=layout), Normal(mean, sd),
                         rule=Significance(0.025, margin=margin, min_estimate=min_est))
    ds = evaluate(design, [3, 4, 5, 6, 12, 150, 600])
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, 0.025, margin, min_est, single_arm=layout != "two_arm")
        ref = _normal_t_min_estimate(mean, sd, sigma, geo)
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=QUAD_TOL)


def test_single_arm_normal_prior():
    design = TrialDesign(ContinuousEndpoint(3.0, layout="single_arm", analysis="z"),
                         Normal(1.0, 0.5))
    ds = evaluate(design, [1, 9, 50])
    for i, n in enumerate(ds.n.values):
        se = 3.0 / math.sqrt(n)
        ref = stats.norm.cdf((1.0 - stats.norm.isf(0.025) * se) / math.hypot(0.5, se))
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=CLOSED_TOL)


def test_prior_sd_to_zero_gives_power():
    # A nearly degenerate normal prior is a point mass: assurance -> power (O'Hagan et al.
    # 2005, the v -> 0 limit of the closed form). With sd 1e-7 the gap is O(1e-7 * density).
    for analysis in ("z", "t"):
        design = TrialDesign(ContinuousEndpoint(2.0, analysis=analysis), Normal(0.8, 1e-7))
        ds = evaluate(design, [6, 40, 150])
        np.testing.assert_allclose(ds.assurance.values, ds.power.values, rtol=0, atol=1e-6)


# ------------------------------------------------------------------------------------------
# other priors against quad
# ------------------------------------------------------------------------------------------
# (package prior, scipy law of the continuous part, continuous weight, atoms, bounds)
OTHER_PRIORS = [
    pytest.param(StudentT(4, loc=0.3, scale=0.2), stats.t(4, 0.3, 0.2), 1.0, (), None,
                 id="student_t"),
    pytest.param(Uniform(-0.2, 0.8), stats.uniform(-0.2, 1.0), 1.0, (), (-0.2, 0.8),
                 id="uniform"),
    pytest.param(TruncatedNormal(0.3, 0.3, lower=0.0),
                 stats.truncnorm(-1.0, np.inf, loc=0.3, scale=0.3), 1.0, (), None,
                 id="truncated_normal"),
    pytest.param(Mixture([PointMass(0.0), Normal(0.4, 0.2)], [0.3, 0.7]), stats.norm(0.4, 0.2),
                 0.7, ((0.0, 0.3),), None, id="mixture-null-atom"),
    pytest.param(Mixture([PointMass(0.0), StudentT(5, 0.5, 0.3)], [0.25, 0.75]),
                 stats.t(5, 0.5, 0.3), 0.75, ((0.0, 0.25),), None, id="mixture-atom-t"),
    pytest.param(FromScipy(stats.logistic(loc=0.3, scale=0.1)), stats.logistic(0.3, 0.1), 1.0,
                 (), None, id="scipy-logistic"),
]


@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize(("prior", "dist", "weight", "atoms", "bounds"), OTHER_PRIORS)
def test_other_priors_match_quad(prior, dist, weight, atoms, bounds, analysis):
    sigma, alpha = 1.0, 0.025
    design = TrialDesign(ContinuousEndpoint(sigma, analysis=analysis, allocation=1.5), prior,
                         rule=Significance(alpha))
    ds = evaluate(design, [4, 40, 400])
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha)
        ref = quad_assurance(geo, analysis, dist, atoms, weight, bounds=bounds)
        tol = QUAD_TOL if (analysis == "z" or geo.df >= 5) else 1e-6
        assert float(ds.assurance[i]) == pytest.approx(ref, abs=tol)


def _quad_near_threshold(dist, c, se):
    """P(d > c) = P(delta > c + 12 se) + int over |delta - c| <= 12 se of power x density.

    Outside that window the power is 0 or 1 to 1e-32; quad sees the whole transition.
    """
    lo, hi = c - 12 * se, c + 12 * se
    inner = integrate.quad(lambda x: stats.norm.sf((c - x) / se) * dist.pdf(x), lo, hi,
                           epsabs=1e-14, epsrel=1e-12)[0]
    return dist.sf(hi) + inner


@pytest.mark.parametrize(
    ("prior", "dist", "n"),
    [(FromScipy(stats.logistic(1.0, 0.1)), stats.logistic(1.0, 0.1), 10_000),
     (StudentT(3, 1.0, 0.1), stats.t(3, 1.0, 0.1), 10**8),
     (TruncatedNormal(1.0, 0.3, lower=-0.2), stats.truncnorm(-4.0, np.inf, 1.0, 0.3), 10**6),
     (Uniform(-0.001, 2.0), stats.uniform(-0.001, 2.001), 10**10)],
    ids=["logistic", "student_t", "truncated_normal", "uniform"],
)
def test_quadrature_catches_a_narrow_step_at_one_large_n(prior, dist, n):
    design = TrialDesign(ContinuousEndpoint(1.0, analysis="z"), prior, rule=Significance(0.01))
    geo = Geometry(1.0, n // 2, n // 2, 0.01)
    ref = _quad_near_threshold(dist, geo.threshold_z(), geo.se)
    alone = float(evaluate(design, [n]).assurance[0])
    in_grid = float(evaluate(design, [1000, n]).assurance[1])
    assert alone == pytest.approx(ref, abs=QUAD_TOL)
    assert alone == pytest.approx(in_grid, abs=QUAD_TOL)
    assert alone <= design.ceiling()


@pytest.mark.parametrize(("prior", "dist", "weight", "atoms", "bounds"), OTHER_PRIORS)
def test_other_priors_decomposition_match_quad(prior, dist, weight, atoms, bounds):
    sigma, alpha, relevant = 1.0, 0.025, 0.25
    design = TrialDesign(ContinuousEndpoint(sigma, analysis="z"), prior,
                         rule=Significance(alpha), relevant_effect=relevant)
    ds = evaluate(design, [10, 100, 1000])
    # prior probability of "effect >= relevant", from scipy (atoms at 0 are below it)
    p_rel = weight * dist.sf(relevant) + sum(w for loc, w in atoms if loc >= relevant)
    assert float(ds.prob_relevant) == pytest.approx(p_rel, abs=1e-12)
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha)
        # "benefit" is delta > 0 strictly: an atom at 0 does not count.
        benefit = quad_assurance(geo, "z", dist, [(loc, w) for loc, w in atoms if loc > 0],
                                 weight, cut=0.0, bounds=bounds)
        joint = quad_assurance(geo, "z", dist, atoms, weight, cut=relevant, bounds=bounds)
        assert float(ds.prob_success_and_benefit[i]) == pytest.approx(benefit, abs=QUAD_TOL)
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(joint, abs=QUAD_TOL)
        assert float(ds.conditional_assurance[i]) == pytest.approx(joint / p_rel, abs=1e-6)
        assert float(ds.prob_miss_relevant[i]) == pytest.approx(p_rel - joint, abs=QUAD_TOL)


def test_point_mass_mixture_is_weighted_power():
    # 40% no effect, 60% effect 0.5: assurance = 0.4 * alpha + 0.6 * power(0.5).
    for analysis in ("z", "t"):
        prior = Mixture([PointMass(0.0), PointMass(0.5)], [0.4, 0.6])
        design = TrialDesign(ContinuousEndpoint(1.0, analysis=analysis), prior,
                             relevant_effect=0.0)
        ds = evaluate(design, [10, 64 * 2, 400])
        for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
            geo = Geometry(1.0, n_t, n_c, 0.025)
            p5 = float(geo.power(0.5, analysis))
            assert float(ds.assurance[i]) == pytest.approx(0.4 * 0.025 + 0.6 * p5, abs=1e-7)
            # benefit excludes the atom at 0; "relevant >= 0" includes it.
            assert float(ds.prob_success_and_benefit[i]) == pytest.approx(0.6 * p5, abs=1e-7)
            assert float(ds.prob_success_and_relevant[i]) == pytest.approx(
                0.4 * 0.025 + 0.6 * p5, abs=1e-7)


# ------------------------------------------------------------------------------------------
# decomposition for a normal prior: quad and the bivariate normal
# ------------------------------------------------------------------------------------------
def bivariate_joint(mean, sd, se, c, a):
    """P(d > c, delta > a) with delta ~ N(m, v), d | delta ~ N(delta, se^2).

    (d, delta) is bivariate normal with var(d) = v + se^2, var(delta) = v, cov = v; the
    upper orthant equals the lower orthant of (-d, -delta).
    """
    v = sd * sd
    cov = [[v + se * se, v], [v, v]]
    return float(stats.multivariate_normal([-mean, -mean], cov).cdf([-c, -a]))


@pytest.mark.parametrize(("mean", "sd"), [(0.5, 0.3), (2.0, 1.0), (-0.5, 1.0), (0.2, 0.25)])
@pytest.mark.parametrize("relevant", [0.1, 0.4, 1.2])
@pytest.mark.parametrize(("alpha", "margin", "min_est"),
                         [(0.025, 0.0, None), (0.05, 0.3, None), (0.025, 0.0, 0.35)])
def test_normal_prior_decomposition(mean, sd, relevant, alpha, margin, min_est):
    sigma = 2.0
    design = TrialDesign(ContinuousEndpoint(sigma, analysis="z", allocation=2.0),
                         Normal(mean, sd), relevant_effect=relevant,
                         rule=Significance(alpha, margin=margin, min_estimate=min_est))
    ds = evaluate(design, [6, 60, 600, 6000])
    p_rel = stats.norm.sf(relevant, mean, sd)
    assert float(ds.prob_relevant) == pytest.approx(p_rel, abs=1e-14)
    assert float(ds.prob_benefit) == pytest.approx(stats.norm.sf(0, mean, sd), abs=1e-14)
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha, margin, min_est)
        c = geo.threshold_z()
        joint_mvn = bivariate_joint(mean, sd, geo.se, c, relevant)
        benefit_mvn = bivariate_joint(mean, sd, geo.se, c, 0.0)
        # scipy's bivariate normal cdf is accurate to ~1e-12 here; 1e-9 for safety.
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(joint_mvn, abs=1e-9)
        assert float(ds.prob_success_and_benefit[i]) == pytest.approx(benefit_mvn, abs=1e-9)
        if i in (1, 2):  # quad from the cut, on a subset to keep the suite fast
            dist = stats.norm(mean, sd)
            assert float(ds.prob_success_and_relevant[i]) == pytest.approx(
                quad_assurance(geo, "z", dist, cut=relevant), abs=QUAD_TOL)
            assert float(ds.prob_success_and_benefit[i]) == pytest.approx(
                quad_assurance(geo, "z", dist, cut=0.0), abs=QUAD_TOL)
        assert float(ds.conditional_assurance[i]) == pytest.approx(joint_mvn / p_rel,
                                                                   abs=1e-9 / p_rel)
        assert float(ds.prob_miss_relevant[i]) == pytest.approx(p_rel - joint_mvn, abs=1e-9)


@pytest.mark.parametrize(("mean", "sd", "relevant"), [(0.5, 0.3, 0.4), (1.0, 1.0, 0.0)])
def test_normal_prior_decomposition_t_analysis(mean, sd, relevant):
    sigma, alpha = 1.0, 0.025
    design = TrialDesign(ContinuousEndpoint(sigma), Normal(mean, sd), relevant_effect=relevant,
                         rule=Significance(alpha))
    ds = evaluate(design, [8, 50, 300])
    for i, (n_t, n_c) in enumerate(zip(*arms(ds), strict=True)):
        geo = Geometry(sigma, n_t, n_c, alpha)
        dist = stats.norm(mean, sd)
        assert float(ds.prob_success_and_relevant[i]) == pytest.approx(
            quad_assurance(geo, "t", dist, cut=relevant), abs=QUAD_TOL)
        assert float(ds.prob_success_and_benefit[i]) == pytest.approx(
            quad_assurance(geo, "t", dist, cut=0.0), abs=QUAD_TOL)


def test_decomposition_when_threshold_equals_prior_mean_and_cut():
    # Regression: upper_orthant_normal(0, 0, rho) returned 0, so P(success and benefit) was 0
    # here while assurance was 0.5.
    # Sceptical prior centred at 0, non-inferiority margin 1 with "estimate must be > 0":
    # for large n the threshold is max(-1 + z se, 0) = 0, equal to the prior mean and the
    # benefit cut, so h = k = 0 in the orthant probability.
    design = TrialDesign(ContinuousEndpoint(1.0, analysis="z"), Normal(0.0, 1.0),
                         rule=Significance(0.025, margin=1.0, min_estimate=0.0))
    ds = evaluate(design, [1000])
    geo = Geometry(1.0, 500, 500, 0.025, 1.0, 0.0)
    assert geo.threshold_z() == 0.0
    ref = bivariate_joint(0.0, 1.0, geo.se, 0.0, 0.0)  # ~0.49: 1/4 + asin(rho)/(2 pi)
    assert float(ds.assurance[0]) == pytest.approx(0.5, abs=1e-12)
    assert float(ds.prob_success_and_benefit[0]) == pytest.approx(ref, abs=1e-9)


# ------------------------------------------------------------------------------------------
# the bivariate normal helper
# ------------------------------------------------------------------------------------------
def _orthant_ref(h, k, rho):
    return float(stats.multivariate_normal([0, 0], [[1, rho], [rho, 1]]).cdf([-h, -k]))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_upper_orthant_normal_random(seed):
    rng = np.random.default_rng(seed)
    h = rng.normal(0, 2, 60)
    k = rng.normal(0, 2, 60)
    rho = rng.uniform(-0.98, 0.98, 60)
    # one coordinate exactly 0 (the branch point of Owen's T identity)
    h[:10] = 0.0
    k[10:20] = 0.0
    got = upper_orthant_normal(h, k, rho)
    ref = [_orthant_ref(*args) for args in zip(h, k, rho, strict=True)]
    # Owen's T identity and scipy's bivariate normal are both accurate to ~1e-14.
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12)


def test_upper_orthant_normal_special_values():
    # Infinite limits and the independent case.
    h = np.array([0.3, -1.0, 2.0])
    np.testing.assert_allclose(upper_orthant_normal(h, -np.inf, 0.5), stats.norm.sf(h),
                               rtol=0, atol=1e-15)
    np.testing.assert_array_equal(upper_orthant_normal(h, np.inf, 0.5), 0.0)
    # rho = 0: product of the tails
    k = np.array([0.5, 1.5, -0.7])
    np.testing.assert_allclose(upper_orthant_normal(h, k, 0.0),
                               stats.norm.sf(h) * stats.norm.sf(k), rtol=0, atol=1e-14)


@pytest.mark.parametrize("rho", [-0.5, 0.0, 0.5, 0.95])
def test_upper_orthant_normal_at_origin(rho):
    # Regression: used to return 0 at the origin. Sheppard's orthant formula (Sheppard 1899,
    # attribution from memory; the formula is common practice):
    # P(Z1 > 0, Z2 > 0) = 1/4 + arcsin(rho) / (2 pi).
    assert float(upper_orthant_normal(0.0, 0.0, rho)) == pytest.approx(
        0.25 + math.asin(rho) / (2 * math.pi), abs=1e-12)


@pytest.mark.parametrize(("h", "k", "rho"),
                         [(-0.3, -5e-324, 0.5), (1e-200, 1e-200, 0.5), (-1e-170, -1e-170, 0.2),
                          (-5e-324, -5e-324, 0.98), (-1e-320, -2e-320, 0.9)])
def test_upper_orthant_normal_tiny_limits(h, k, rho):
    # Regression: the Owen's T branch was picked from the sign of x*y, which underflows to 0
    # for tiny limits of the same sign; and among subnormal limits the product x * sqrt(1 -
    # rho^2) rounded to 0 (0.5 instead of 1/4 + asin(0.98) / (2 pi) = 0.468).
    assert float(upper_orthant_normal(h, k, rho)) == pytest.approx(_orthant_ref(h, k, rho),
                                                                   abs=1e-12)
