"""Two endpoints both needed: exact bivariate probabilities and Monte Carlo over priors."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

import assurance as asr
from assurance.errors import AssuranceInputError
from assurance.joint import evaluate_joint

SIZES = [60, 200, 600]


def _pair(prior_a, prior_b):
    eff = asr.TrialDesign(asr.ContinuousEndpoint(10.0, analysis="z"), prior_a, title="eff")
    # safety: difference in a continuous safety score, non-inferiority margin 1.5
    saf = asr.TrialDesign(asr.ContinuousEndpoint(6.0, analysis="z"), prior_b,
                          rule=asr.Significance(0.025, margin=1.5), title="saf")
    return eff, saf


@pytest.mark.parametrize("rho", [-0.5, 0.0, 0.4, 0.9])
def test_point_masses_give_the_bivariate_normal_probability(rho):
    eff, saf = _pair(asr.PointMass(3.0), asr.PointMass(0.2))
    ds = evaluate_joint(eff, saf, SIZES, correlation=rho, draws=200, seed=1)
    for i, n in enumerate(SIZES):
        se1, se2 = 10 * math.sqrt(4 / n), 6 * math.sqrt(4 / n)
        c1, c2 = 1.959963985 * se1, -1.5 + 1.959963985 * se2
        # independent: P(d1 > c1, d2 > c2) with scipy.stats.multivariate_normal (z scale)
        cov = [[1, rho], [rho, 1]]
        ref = stats.multivariate_normal([0, 0], cov).cdf([(3.0 - c1) / se1,
                                                          (0.2 - c2) / se2])
        assert float(ds.power_both[i]) == pytest.approx(ref, abs=1e-6)  # mvn cdf accuracy
        # with point-mass priors the Monte Carlo has nothing to average: exact too
        assert float(ds.prob_both[i]) == pytest.approx(ref, abs=1e-6)
        assert float(ds.prob_both_mcse[i]) < 1e-7  # only rounding in E[p^2] - E[p]^2


def test_independent_endpoints_multiply():
    eff, saf = _pair(asr.PointMass(3.0), asr.PointMass(0.2))
    ds = evaluate_joint(eff, saf, SIZES, correlation=0.0, draws=200, seed=1)
    p1 = asr.evaluate(eff, SIZES).power.values
    p2 = asr.evaluate(saf, SIZES).power.values
    np.testing.assert_allclose(ds.power_both.values, p1 * p2, atol=1e-12)


@pytest.mark.parametrize("seed", [3, 44])
def test_monte_carlo_against_patient_free_simulation(seed):
    # independent brute force: draw effects and correlated estimates with numpy, count
    # successes; compare within 4 combined standard errors (+ 0.002 floor).
    eff, saf = _pair(asr.Normal(3.0, 2.0), asr.Normal(0.0, 1.0))
    rho, n, draws = 0.5, 200, 20_000
    ds = evaluate_joint(eff, saf, [n], correlation=rho, draws=draws, seed=seed)
    rng = np.random.default_rng(seed + 1000)
    m = 200_000
    d1 = rng.normal(3.0, 2.0, m)
    d2 = rng.normal(0.0, 1.0, m)
    z = rng.multivariate_normal([0, 0], [[1, rho], [rho, 1]], size=m)
    se1, se2 = 10 * math.sqrt(4 / n), 6 * math.sqrt(4 / n)
    ok = (d1 + se1 * z[:, 0] > 1.959963985 * se1) & (d2 + se2 * z[:, 1] > -1.5 + 1.959963985 * se2)
    brute = ok.mean()
    brute_se = math.sqrt(brute * (1 - brute) / m)
    tol = 4 * math.hypot(float(ds.prob_both_mcse[0]), brute_se) + 0.002
    assert float(ds.prob_both[0]) == pytest.approx(brute, abs=tol)
    # each alone equals the single-design assurance (exact, O'Hagan et al. 2005)
    a1 = float(asr.evaluate(eff, [n]).assurance[0])
    assert float(ds.prob_first[0]) == pytest.approx(a1, abs=4 * float(ds.prob_first_mcse[0]))
    assert np.all(ds.prob_both.values <= np.minimum(ds.prob_first, ds.prob_second).values)


def test_joint_inputs_are_checked():
    eff, saf = _pair(asr.Normal(3.0, 2.0), asr.Normal(0.0, 1.0))
    with pytest.raises(AssuranceInputError, match="'correlation'"):
        evaluate_joint(eff, saf, SIZES, correlation=1.0)
    other = asr.TrialDesign(asr.ContinuousEndpoint(6.0, allocation=2.0), asr.Normal(0, 1))
    with pytest.raises(AssuranceInputError, match="'second'.*allocation"):
        evaluate_joint(eff, other, SIZES, correlation=0.2)
