"""One fit per simulated trial: the Laplace fit against closed-form posteriors, and against
NUTS on a logistic regression.

Each model compiles once per size per process (the engine's cache, shared with
tests/test_general_engine.py).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

import assurance as asr
from assurance.errors import AssuranceInputError, AssuranceWarning
from assurance.general import GeneralModel, simulate_general
from assurance.general.engine import ChunkSpec, _compiled, run_chunk

pytest.importorskip("pymc")

from _general_models import (  # noqa: E402
    EFFECT_SD,
    MU_SD,
    SIGMA,
    A,
    B,
    arm_means_build,
    binomial_model,
    logistic_model,
    no_mode_model,
    normal_model,
)


def _normal_data(n_t: int, n_c: int, seed: int) -> dict:
    rng = np.random.default_rng(seed)
    return normal_model().simulate(rng, n_t, n_c, {"mu": 1.0, "effect": 0.7})


def _conjugate(design: np.ndarray, y: np.ndarray, prior_sd: np.ndarray):
    """Posterior of a normal linear model with known SD and independent normal priors
    centred at 0 (textbook conjugate regression, e.g. Gelman et al., Bayesian Data Analysis,
    3rd ed., section 14.8): precision X'X / sigma^2 + diag(1 / prior_sd^2)."""
    precision = design.T @ design / SIGMA**2 + np.diag(1 / prior_sd**2)
    cov = np.linalg.inv(precision)
    return cov @ design.T @ y / SIGMA**2, cov


def test_laplace_is_exact_for_a_normal_model():
    data = _normal_data(30, 30, 1)
    fit = _compiled(normal_model(), 30, 30, data)
    for seed in (1, 2, 3):
        data = _normal_data(30, 30, seed)
        mean, sd, ok = fit.laplace(data)
        design = np.column_stack([np.ones(60), data["treated"]])
        post_mean, cov = _conjugate(design, data["y"], np.array([MU_SD, EFFECT_SD]))
        assert ok
        assert mean == pytest.approx(post_mean[1], abs=1e-8)
        assert sd == pytest.approx(np.sqrt(cov[1, 1]), rel=1e-8)


def test_delta_method_for_a_deterministic_effect():
    model = GeneralModel("invented: one mean per arm", normal_model().simulate,
                         arm_means_build, design_prior=normal_model().design_prior,
                         assumed=normal_model().assumed)
    data = _normal_data(12, 8, 4)
    mean, sd, ok = _compiled(model, 12, 8, data).laplace(data)
    treated = data["treated"]
    post_mean, cov = _conjugate(np.column_stack([treated, 1 - treated]), data["y"],
                                np.array([MU_SD, MU_SD]))
    c = np.array([1.0, -1.0])
    assert ok
    assert mean == pytest.approx(c @ post_mean, abs=1e-8)
    assert sd == pytest.approx(np.sqrt(c @ cov @ c), rel=1e-8)


@pytest.mark.parametrize("x", [0, 3, 17, 20])
def test_laplace_on_the_log_odds_scale_for_a_beta_posterior(x):
    # Beta(A + x, B + n - x) posterior; on eta = logit(p) the density is
    # p^(A + x) (1 - p)^(B + n - x): mode p* = (A + x) / (A + B + n), curvature
    # (A + B + n) p* (1 - p*); the delta method gives sd(p) = sqrt(p* (1 - p*) / (A + B + n))
    n = 20
    model = binomial_model()
    data = {"x": np.array(float(x)), "n": np.array(float(n))}
    mean, sd, ok = _compiled(model, *model.arm_sizes(n), data).laplace(data)
    mode = (A + x) / (A + B + n)
    assert ok  # Newton stops once the expected rise in log density is below 1e-10
    assert mean == pytest.approx(mode, rel=1e-5)
    assert sd == pytest.approx(np.sqrt(mode * (1 - mode) / (A + B + n)), rel=1e-5)


def test_laplace_agrees_with_nuts_on_a_logistic_model():
    # The engine's own subset check: the same simulated trials fitted both ways. Paired
    # difference of the decisions within 2 Monte Carlo SE; the posterior means within 0.2
    # posterior SD and SDs within 15% (a logistic likelihood with 100 per arm is close to
    # normal on the log-odds scale; NUTS means carry a Monte Carlo error of about 0.04 SD
    # with 1,000 draws).
    k = 12  # per-trial agreement is checked on each; decisions are also checked in
    # test_general_models.py::test_logistic_laplace_agrees_with_nuts
    spec = ChunkSpec(logistic_model(), asr.PosteriorProbability(0.9), 200, k, (21, (200, 0, 0)),
                     "prior", k, 0.95)
    result = run_chunk(spec)
    d = result.nuts_success.astype(float) - result.laplace_on_nuts.astype(float)
    se = d.std(ddof=1) / np.sqrt(k)
    assert abs(d.mean()) <= 2 * se or not d.any(), (d.mean(), se)
    assert (result.converged).all()
    assert np.all(np.abs(result.laplace_mean - result.nuts_mean) <= 0.2 * result.nuts_sd)
    np.testing.assert_allclose(result.laplace_sd, result.nuts_sd, rtol=0.15)
    # the normal interval against the highest-density interval of the draws (arviz.hdi)
    np.testing.assert_allclose(result.laplace_width, result.nuts_width, rtol=0.2)
    # a mean success share in [0, 1] and the truth drawn from the design prior
    assert 0 <= result.success.mean() <= 1
    assert stats.kstest(result.truth_effect, stats.norm(0.5, 0.3).cdf).pvalue > 1e-3


def test_nuts_draws_repeat_with_the_seed():
    data = _normal_data(10, 10, 9)
    fit = _compiled(normal_model(), 10, 10, data)
    first = fit.nuts(data, draws=50, tune=50, seed=7)
    fit.laplace(_normal_data(10, 10, 10))  # another trial in between
    again = fit.nuts(data, draws=50, tune=50, seed=7)
    np.testing.assert_array_equal(first, again)
    assert first.shape == (100,)


def test_data_must_match_the_containers():
    data = _normal_data(10, 10, 9)
    fit = _compiled(normal_model(), 10, 10, data)
    with pytest.raises(AssuranceInputError, match="returned data named"):
        fit.set_data({"y": data["y"]})
    with pytest.raises(AssuranceInputError, match="dimension"):
        fit.set_data({"y": data["y"][None, :], "treated": data["treated"]})


def test_a_fit_without_a_mode_is_counted_and_warned():
    # log density effect^2: no maximum (the Hessian is never negative definite)
    with pytest.warns(AssuranceWarning, match="found no posterior mode"):
        ds = simulate_general(no_mode_model(), [10], rule=asr.PosteriorProbability(0.9),
                              trials=2, chunk=2, nuts_check=0, power=False, progress=False)
    assert int(ds.not_converged[0]) == 2
    assert float(ds.assurance[0]) == 0.0  # a failed fit never counts as a success


def test_a_step_outside_the_support_is_stepped_back_not_raised():
    # A scale parameter far below its typical value underflows to 0 on a long Newton step;
    # PyMC raises there (ParameterValueError). The fit must read it as log density -inf,
    # step back and still reach the mode of the ANCOVA model (invented scenario).
    from assurance.general.builtin import ancova

    model = ancova(asr.Normal(4.0, 2.0), 4.0, sd=10.0, correlation=0.5)
    data = model.simulate(np.random.default_rng(3), 50, 50, model.assumed)
    fit = _compiled(model, 50, 50, data)
    mean, sd, ok = fit.laplace(data)
    assert ok and np.isfinite(mean) and sd > 0
    x = fit._warm.copy()
    x[:] = -800.0  # every unconstrained value far out: exp(-800) is 0 in double precision
    lp = fit._guarded(x)[0]
    assert lp == -np.inf
    again_mean, _, again_ok = fit._newton(fit._warm.copy())
    assert again_ok and again_mean == pytest.approx(mean, abs=1e-6)
