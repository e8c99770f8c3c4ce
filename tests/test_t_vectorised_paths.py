"""The vectorised t-analysis paths give the same numbers as the one-at-a-time ones.

References:

* ``scipy.stats.nct.sf(scipy.stats.t.isf(alpha, df), df, nc)``: the t test's power (scipy).
* ``scipy.stats.chi2.ppf(scipy.stats.norm.cdf(z), df)``: the chi-square quantile at each
  Gauss-Hermite score (scipy), for the sample-SD ratios of the t rule.
* The package's own one-effect-at-a-time power, for the bit-for-bit identity of the
  several-effects call (an invariant, not a reference value).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from assurance import ContinuousEndpoint, Normal, PointMass, Significance, TrialDesign, evaluate
from assurance.compute import sd_quadrature as sq

SIZES = np.array([3, 4, 6, 10, 20, 50, 100, 400, 2000, 10**5])


def _calculator(rule: Significance, layout: str = "two_arm"):
    endpoint = ContinuousEndpoint(sigma=2.0, layout=layout, analysis="t")
    return endpoint, endpoint.calculator(PointMass(0.5), rule, draws=100, seed=1)


@pytest.mark.parametrize("rule", [Significance(0.025), Significance(1e-4),
                                  Significance(0.025, margin=0.3)], ids=str)
@pytest.mark.parametrize("layout", ["two_arm", "single_arm"])
def test_several_effects_at_once_equal_one_at_a_time_bit_for_bit(rule, layout):
    endpoint, calc = _calculator(rule, layout)
    sizes = SIZES[SIZES >= endpoint.smallest_total]
    n_t, n_c = endpoint.arm_sizes(sizes)
    effects = np.array([-0.3, 0.0, 0.2, 1.0, 3.0, float(rule.null_value)])
    together = calc.powers(effects, n_t, n_c)
    for row, effect in zip(together, effects, strict=True):
        alone = calc.power(float(effect), n_t, n_c)
        assert np.array_equal(row, alone), effect


def test_several_effects_match_scipy_noncentral_t():
    rule = Significance(0.025)
    endpoint, calc = _calculator(rule)
    n_t, n_c = endpoint.arm_sizes(SIZES)
    df = (n_t + n_c - 2).astype(float)
    se = 2.0 * np.sqrt(1.0 / n_t + 1.0 / n_c)
    effects = np.array([0.1, 0.5, 1.5])
    got = calc.powers(effects, n_t, n_c)
    # scipy.stats.nct / scipy.stats.t: the t test's power at each effect and size
    ref = stats.nct.sf(stats.t.isf(0.025, df)[None, :], df[None, :],
                       effects[:, None] / se[None, :])
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9)
    # at the null value the power is the test's level (common practice)
    assert np.all(calc.powers(np.array([0.0]), n_t, n_c) == 0.025)


def test_hermite_ratios_are_scipy_chi_square_quantiles():
    # 10 to 1e5 df from the series in 1 / sqrt(df), the others from exact quantiles
    df = np.array([3.0, 10.0, 15.0, 40.0, 300.0, 5e4, 1e5, 3e5])
    for k in sq._RULE_KS:
        tier = np.full(df.size, k, dtype=np.int64)
        sq._RATIO_TABLES.clear()
        col, ratio, weight = sq._hermite_nodes(df, tier)
        z, _ = sq._hermite_rule(int(k))
        # scipy.stats.chi2.ppf at scipy.stats.norm.cdf of each score, each tail from its side
        # flat by column, then node
        np.testing.assert_array_equal(col, np.repeat(np.arange(df.size), k))
        node = np.arange(col.size) % k
        d = df[col]
        lower = z[node] < 0
        chi = np.where(lower, stats.chi2.ppf(stats.norm.cdf(z[node]), d),
                       stats.chi2.isf(stats.norm.sf(z[node]), d))
        np.testing.assert_allclose(ratio, np.sqrt(chi / d), rtol=1e-12, atol=0)
        np.testing.assert_allclose(np.bincount(col, weight), 1.0, rtol=0, atol=1e-13)


def test_cold_and_warm_evaluations_are_identical():
    design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="t"), Normal(4.0, 3.0),
                         relevant_effect=3.0)
    sizes = np.arange(20, 420, 20)
    warm = evaluate(design, sizes)
    sq._RATIO_TABLES.clear()
    sq._hermite_flat.cache_clear()
    fresh = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="t"), Normal(4.0, 3.0),
                        relevant_effect=3.0)
    cold = evaluate(fresh, sizes)
    assert cold.identical(warm)
