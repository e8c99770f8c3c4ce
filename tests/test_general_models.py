"""The built-in general models (assurance.general.builtin): their simulators against the
stated data-generating process, their analysis models against closed forms computed here,
and ANCOVA's classical power against the textbook variance reduction."""

from __future__ import annotations

import math
import pickle
import warnings

import numpy as np
import pytest
from scipy import optimize, special, stats

from assurance.errors import AssuranceInputError
from assurance.general.builtin import (
    MODEL_KEYS,
    ancova,
    borrowed_control,
    hierarchical_regions,
    logistic,
)
from assurance.priors import Normal, PointMass, Uniform
from assurance.rules.posterior import PosteriorProbability
from assurance.rules.significance import Significance

pytest.importorskip("pymc")


def _quiet_engine(*args, **kwargs):
    """simulate_general without the progress bar, PyMC's own chatter silenced."""
    from assurance.general.engine import simulate_general

    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=RuntimeWarning)  # numpy inside samplers
        warnings.filterwarnings("ignore", category=FutureWarning)
        warnings.filterwarnings("ignore", category=UserWarning)
        return simulate_general(*args, progress=False, **kwargs)


def _compiled(model, data):
    from assurance.general.fit import CompiledModel

    return CompiledModel(model, data)


# -- ANCOVA ---------------------------------------------------------------------------------

@pytest.mark.parametrize("rho", [-0.4, 0.3, 0.8])
def test_ancova_data_have_the_stated_correlation_and_sd(rho):
    # Pearson r has asymptotic SD (1 - rho^2) / sqrt(n) (Fisher 1915; common practice);
    # the sample SD has SD about sd / sqrt(2 n) (normal outcome, common practice).
    model = ancova(Normal(3.0, 1.0), 3.0, sd=10.0, correlation=rho, baseline_mean=50.0,
                   baseline_sd=4.0, control_mean=20.0)
    rng = np.random.default_rng(11)
    n = 20_000
    data = model.simulate(rng, n, n, {"effect": 3.0, "correlation": rho})
    for arm in (1.0, 0.0):
        keep = data["treated"] == arm
        y, b = data["y"][keep], data["baseline"][keep]
        r = np.corrcoef(y, b)[0, 1]
        assert abs(r - rho) < 4 * (1 - rho**2) / math.sqrt(n)
        assert abs(y.std(ddof=1) - 10.0) < 4 * 10.0 / math.sqrt(2 * n)
        assert abs(b.mean() - 50.0) < 4 * 4.0 / math.sqrt(n)
    diff = data["y"][data["treated"] == 1].mean() - data["y"][data["treated"] == 0].mean()
    assert abs(diff - 3.0) < 4 * 10.0 * math.sqrt(2 / n)


def test_ancova_power_matches_the_variance_reduction_formula():
    # Borm, Fransen & Lemmens 2007 (J Clin Epidemiol 60:1234-1238): with 1:1 allocation the
    # ANCOVA estimate of the effect has variance 4 sd^2 (1 - rho^2) / n, so a two-sided 5%
    # test has power Phi(effect / se - z_0.975) (the far tail, below 1e-6 here, ignored).
    sd, rho, effect, n = 10.0, 0.6, 4.0, 100
    model = ancova(PointMass(effect), effect, sd=sd, correlation=rho)
    ds = _quiet_engine(model, [n], rule=Significance(alpha=0.05, sided="two"), trials=400,
                       seed=3, nuts_check=0)
    se = math.sqrt(4 * sd**2 * (1 - rho**2) / n)
    expected = stats.norm.cdf(effect / se - stats.norm.ppf(0.975))
    power, mcse = float(ds["power"][0]), float(ds["power_mcse"][0])
    assert abs(power - expected) < 3 * mcse
    # without the baseline the same test would have power ~0.52: the formula is the check
    unadjusted = stats.norm.cdf(effect / math.sqrt(4 * sd**2 / n) - stats.norm.ppf(0.975))
    assert abs(power - unadjusted) > 3 * mcse
    assert int(ds["not_converged"][0]) == 0


def test_ancova_refuses_a_correlation_prior_outside_minus_one_to_one():
    with pytest.raises(AssuranceInputError, match="'correlation_prior' parameter of ancova"):
        ancova(Normal(3.0, 1.0), 3.0, sd=10.0, correlation=0.5,
               correlation_prior=Normal(0.5, 0.2))
    with pytest.raises(AssuranceInputError, match="'correlation' parameter of ancova"):
        ancova(Normal(3.0, 1.0), 3.0, sd=10.0, correlation=1.0)


# -- logistic -------------------------------------------------------------------------------

def test_logistic_data_match_the_stated_rates():
    # Each arm-by-stratum cell is binomial with rate expit(a + effect t + g x); the
    # intercept a is found here independently with scipy's brentq so that control patients
    # respond at the stated rate over both strata. Counts within 4 binomial SD.
    rate, share, g, lor = 0.3, 0.4, 0.8, 0.6
    model = logistic(Normal(lor, 0.3), lor, control_rate=rate, covariate_share=share,
                     covariate_log_odds=g)
    a = optimize.brentq(
        lambda a: share * special.expit(a + g) + (1 - share) * special.expit(a) - rate,
        -20, 20, xtol=1e-14)
    rng = np.random.default_rng(5)
    n = 30_000
    data = model.simulate(rng, n, n, {"effect": lor, "control_rate": rate})
    assert data["covariate"][data["treated"] == 1].sum() == round(share * n)
    for t in (0.0, 1.0):
        for x in (0.0, 1.0):
            cell = (data["treated"] == t) & (data["covariate"] == x)
            p = special.expit(a + lor * t + g * x)
            k, m = int(data["y"][cell].sum()), int(cell.sum())
            assert abs(k - m * p) < 4 * math.sqrt(m * p * (1 - p))
    control = data["y"][data["treated"] == 0]
    assert abs(control.mean() - rate) < 4 * math.sqrt(rate * (1 - rate) / n)


def test_logistic_laplace_agrees_with_nuts():
    # The fast path's success decisions against NUTS on the same simulated trials (paired):
    # their difference within 2 Monte Carlo SE (the check).
    model = logistic(Normal(0.6, 0.3), 0.6, control_rate=0.3, covariate_share=0.4,
                     covariate_log_odds=0.8)
    ds = _quiet_engine(model, [200], rule=PosteriorProbability(0.975), trials=20, seed=8,
                       nuts_check=20, power=False, chunk=20, nuts_draws=400, nuts_tune=300)
    assert int(ds["nuts_trials"][0]) == 20
    assert abs(float(ds["nuts_agreement"][0])) <= 2.0
    assert 0.0 < float(ds["assurance"][0]) < 1.0


# -- regions --------------------------------------------------------------------------------

def test_regions_share_one_effect_gives_the_pooled_estimate():
    # With one effect for every region (true SD 0) and an analysis prior holding the
    # between-region SD near 0, the overall effect's posterior is the stratified
    # least-squares estimate with region intercepts (computed here with numpy's lstsq), and
    # its SD the least-squares SE with sigma^2 = RSS / n (the maximum-likelihood value).
    model = hierarchical_regions(Normal(2.0, 1.0), 2.0, sd=8.0,
                                 regions={"north": 0.5, "south": 0.3, "east": 0.2},
                                 region_mean_sd=3.0, region_sd_scale=1e-4)
    rng = np.random.default_rng(21)
    data = model.simulate(rng, 150, 150, {"effect": 2.0, "region_sd": 0.0})
    k = 3
    design = np.column_stack([data["region"] == r for r in range(k)] + [data["treated"]])
    coef, rss, *_ = np.linalg.lstsq(design.astype(float), data["y"], rcond=None)
    sigma2 = float(rss[0]) / data["y"].size
    se = math.sqrt(sigma2 * np.linalg.inv(design.T @ design)[k, k])
    mean, sd, converged = _compiled(model, data).laplace(data)
    assert converged
    assert abs(mean - coef[k]) < 0.01 * se
    assert abs(sd / se - 1) < 0.02


def test_regions_are_split_by_share_in_each_arm():
    model = hierarchical_regions(0.0, 0.0, sd=1.0, regions=["a", "b", "c"])
    region = model.simulate.region(10, 7)
    assert np.bincount(region[:10]).tolist() == [4, 3, 3]
    assert np.bincount(region[10:]).tolist() == [3, 2, 2]
    with pytest.raises(AssuranceInputError, match="at least 2 different regions"):
        hierarchical_regions(0.0, 0.0, sd=1.0, regions=["a"])


# -- borrowed control -----------------------------------------------------------------------

def _fixed_trial(n_t, n_c, mean_t, mean_c, sd, seed=0):
    """Data whose arm means are exactly mean_t and mean_c (a fixed pattern of noise)."""
    z = np.random.default_rng(seed).standard_normal(n_t + n_c)
    z[:n_t] -= z[:n_t].mean()
    z[n_t:] -= z[n_t:].mean()
    treated = np.r_[np.ones(n_t), np.zeros(n_c)]
    return {"y": np.where(treated == 1, mean_t, mean_c) + sd * z, "treated": treated}


def _gaussian_posterior(prior_mean, prior_prec, data, sd):
    """Posterior of (control mean, effect) for a normal prior and known sd (conjugate)."""
    x = np.column_stack([np.ones_like(data["treated"]), data["treated"]])
    prec = prior_prec + x.T @ x / sd**2
    cov = np.linalg.inv(prec)
    mean = cov @ (prior_prec @ prior_mean + x.T @ data["y"] / sd**2)
    return mean, cov


@pytest.mark.parametrize("method", ["robust_mixture", "power_prior"])
def test_borrowing_with_weight_zero_is_the_model_without_borrowing(method):
    # Without borrowing the control mean has the vague prior N(m_h, vague_sd) and the effect
    # N(0, 10 sd): a conjugate normal model (outcome SD known), whose posterior is computed
    # here by linear algebra; the Laplace approximation is exact for it.
    sd, m_h = 12.0, 20.0
    model = borrowed_control(Normal(4.0, 2.0), 4.0, sd=sd, historical_mean=m_h,
                             historical_n=150, method=method, weight=0.0, vague_sd=30.0)
    data = _fixed_trial(40, 40, 27.0, 22.0, sd)
    mean, cov = _gaussian_posterior(np.array([m_h, 0.0]),
                                    np.diag([1 / 30.0**2, 1 / (10 * sd) ** 2]), data, sd)
    fit = _compiled(model, data).laplace(data)
    assert fit[2]
    assert fit[0] == pytest.approx(mean[1], rel=1e-7)
    assert fit[1] == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-6)


def test_power_prior_adds_the_weighted_historical_information():
    # Power prior with weight a0 on n_h historical patients (Ibrahim & Chen 2000): the
    # control mean's prior precision rises by a0 n_h / sd_h^2 (conjugate, computed here).
    sd, m_h, n_h, a0 = 12.0, 20.0, 150, 0.6
    model = borrowed_control(Normal(4.0, 2.0), 4.0, sd=sd, historical_mean=m_h,
                             historical_n=n_h, method="power_prior", weight=a0)
    data = _fixed_trial(40, 40, 27.0, 22.0, sd)
    prec = np.diag([1 / sd**2 + a0 * n_h / sd**2, 1 / (10 * sd) ** 2])
    mean, cov = _gaussian_posterior(np.array([m_h, 0.0]), prec, data, sd)
    fit = _compiled(model, data).laplace(data)
    assert fit[0] == pytest.approx(mean[1], rel=1e-7)
    assert fit[1] == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-6)


def _robust_control_posterior(data, sd, m_h, s_h, vague, weight, effect_sd):
    """Exact posterior of the control mean under the robust mixture prior: the conjugate
    normal-mixture update (Schmidli et al. 2014, Biometrics 70:1023-1032). The treatment
    arm, with the effect integrated out, adds a normal likelihood for the control mean."""
    t = data["treated"] == 1
    n_t, n_c = int(t.sum()), int((~t).sum())
    ybar_t, ybar_c = data["y"][t].mean(), data["y"][~t].mean()
    prec_l = n_c / sd**2 + 1 / (sd**2 / n_t + effect_sd**2)
    centre = (ybar_c * n_c / sd**2 + ybar_t / (sd**2 / n_t + effect_sd**2)) / prec_l
    weights, means = [], []
    for w, s in ((weight, s_h), (1 - weight, vague)):
        weights.append(w * stats.norm.pdf(centre, m_h, math.sqrt(s**2 + 1 / prec_l)))
        means.append((m_h / s**2 + centre * prec_l) / (1 / s**2 + prec_l))
    weights = np.array(weights) / sum(weights)
    control = float(weights @ np.array(means))
    shrink = effect_sd**2 / (effect_sd**2 + sd**2 / n_t)
    return control, shrink * (ybar_t - control), weights


def test_robust_mixture_stops_borrowing_when_the_new_control_data_conflict():
    sd, m_h, n_h, w = 12.0, 20.0, 150, 0.8
    s_h = sd / math.sqrt(n_h)
    robust = borrowed_control(0.0, 0.0, sd=sd, historical_mean=m_h, historical_n=n_h,
                              weight=w)
    power = borrowed_control(0.0, 0.0, sd=sd, historical_mean=m_h, historical_n=n_h,
                             weight=w, method="power_prior")
    # new control arm 8 points (8 historical SE) above the historical one
    conflict = _fixed_trial(60, 60, 31.0, 28.0, sd)
    control, effect, weights = _robust_control_posterior(conflict, sd, m_h, s_h, sd, w,
                                                         10 * sd)
    assert weights[1] > 0.99                      # the vague component takes over
    assert abs(control - 28.0) < 0.1 * abs(control - m_h)
    fit_r = _compiled(robust, conflict).laplace(conflict)
    fit_p = _compiled(power, conflict).laplace(conflict)
    assert fit_r[2] and fit_p[2]
    assert abs(fit_r[0] - effect) < 0.05 * fit_r[1]   # the fast path finds that posterior
    # the power prior keeps borrowing: its effect estimate stays pulled towards 31 - 20
    assert fit_p[0] - effect > 2 * fit_r[1]
    # no conflict: the robust prior borrows (a smaller SD than without borrowing)
    agree = _fixed_trial(60, 60, 23.0, 20.0, sd)
    control, effect, weights = _robust_control_posterior(agree, sd, m_h, s_h, sd, w, 10 * sd)
    assert weights[0] > 0.5
    fit_a = _compiled(robust, agree).laplace(agree)
    none = borrowed_control(0.0, 0.0, sd=sd, historical_mean=m_h, historical_n=n_h,
                            weight=0.0)
    assert fit_a[1] < 0.9 * _compiled(none, agree).laplace(agree)[1]


# -- all models -----------------------------------------------------------------------------

MODELS = {
    "ancova": lambda: ancova(Normal(3.0, 1.5), 3.0, sd=10.0, correlation=0.5,
                             correlation_prior=Uniform(0.3, 0.7)),
    "logistic": lambda: logistic(Normal(0.6, 0.3), 0.6, control_rate=0.3),
    "hierarchical_regions": lambda: hierarchical_regions(
        Normal(2.0, 1.0), 2.0, sd=8.0, regions=["a", "b"], region_sd_prior=Uniform(0, 2)),
    "borrowed_control": lambda: borrowed_control(Normal(4.0, 2.0), 4.0, sd=12.0,
                                                 historical_mean=20.0, historical_n=150),
}


@pytest.mark.parametrize("name", sorted(MODELS))
def test_models_pickle_and_build_on_their_own_data(name):
    import pymc as pm

    model = MODELS[name]()
    again = pickle.loads(pickle.dumps(model))
    assert again.simulate == model.simulate and again.build == model.build
    n_t, n_c = model.arm_sizes(20)
    data = model.simulate(np.random.default_rng(0), n_t, n_c, model.assumed)
    built = model.build(data)
    assert isinstance(built, pm.Model)
    assert "effect" in built.named_vars
    for key, value in data.items():
        assert key in built.named_vars and len(value) == n_t + n_c
    assert set(model.design_prior) == set(model.assumed)
    assert name in MODEL_KEYS
