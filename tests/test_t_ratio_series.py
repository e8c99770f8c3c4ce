"""The sample-SD ratios of the t analysis's Gauss-Hermite rules, read from series in df.

For 10 to 1e5 degrees of freedom the ratio ``q = sqrt(chi2_df quantile at Phi(z) / df)`` at
each score ``z`` of each Gauss-Hermite rule comes from a Chebyshev series in
``1 / sqrt(df)`` (made once per process from exact quantiles); other df use the exact
quantiles themselves.

Reference (outside the package): ``scipy.stats.chi2.ppf(scipy.stats.norm.cdf(z), df)``, the
upper tail from ``scipy.stats.chi2.isf(scipy.stats.norm.sf(z), df)`` so each tail keeps its
digits.

Tolerances. The series (read by the barycentric formula at the grid's df) have 32 terms;
their last terms (an estimate of what is left out) are at most 4.3e-12 in ``log q`` at the
two outermost scores of the 40-node rule (|z| = 11.45, weight 1.5e-29) and below 2.1e-14
at every score of the rules up to 24 nodes. So: relative error of each ratio at most
1e-11; at most 5e-14 at the scores whose weight exceeds 1e-12; and the weighted error (what
moves a probability: ``|dP| <= sum_i w_i |d log q_i| max |q g'(q)|``) at most 1e-14 per
column. Observed over the grid below: 2.4e-14 largest, weighted below 1e-15.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from assurance.compute import sd_quadrature as sq

RULES = [int(k) for k in sq._RULE_KS]


def _scipy_ratio(z: np.ndarray, df: np.ndarray) -> np.ndarray:
    """scipy.stats.chi2 quantile at the normal probability of z, each tail from its side."""
    chi = np.where(z < 0, stats.chi2.ppf(stats.norm.cdf(z), df),
                   stats.chi2.isf(stats.norm.sf(z), df))
    return np.sqrt(chi / df)


def _ours(df: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Ratios of rule ``k`` at every df: arrays ``(k, df.size)`` of ratio, score, weight."""
    sq._RATIO_TABLES.clear()
    col, ratio, weight = sq._hermite_nodes(df, np.full(df.size, k, dtype=np.int64))
    z = sq._hermite_rule(k)[0]
    np.testing.assert_array_equal(col, np.repeat(np.arange(df.size), k))
    return (ratio.reshape(df.size, k).T, np.broadcast_to(z[:, None], (k, df.size)),
            weight.reshape(df.size, k).T)


def _check(df: np.ndarray, k: int) -> None:
    ratio, z, weight = _ours(df, k)
    ref = _scipy_ratio(z, df[None, :])
    rel = np.abs(ratio / ref - 1.0)
    assert rel.max() <= 1e-11, (k, float(rel.max()))
    assert rel[weight > 1e-12].max() <= 5e-14, (k, float(rel[weight > 1e-12].max()))
    assert (weight * rel).sum(axis=0).max() <= 1e-14
    np.testing.assert_allclose(weight.sum(axis=0), 1.0, rtol=0, atol=1e-13)


@pytest.mark.parametrize("k", RULES)
def test_series_match_scipy_on_a_dense_grid(k):
    # every df from 10 to 1500 and 600 more spread evenly in log df up to 1e5, with its ends
    df = np.unique(np.concatenate([np.arange(10.0, 1501.0), np.geomspace(10.0, 1e5, 600),
                                   [10.0 + 1e-9, 1e5 - 1e-6]]))
    _check(df, k)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(min_value=10.0, max_value=1e5, allow_nan=False), min_size=1,
                max_size=8, unique=True),
       st.sampled_from(RULES))
def test_series_match_scipy_at_any_df(values, k):
    # df need not be whole numbers (a Welch-type df, a design's allocation)
    _check(np.sort(np.array(values)), k)


@pytest.mark.parametrize("k", [2, 12, 40])
def test_outside_the_series_exact_quantiles(k):
    # below 10 and above 1e5 df: scipy's own quantiles (the same inverse incomplete gamma
    # function), so equal to rounding
    df = np.array([1.0, 2.5, 9.99, 1e5 + 1.0, 3e6])
    ratio, z, _ = _ours(df, k)
    np.testing.assert_allclose(ratio, _scipy_ratio(z, df[None, :]), rtol=1e-14, atol=0)


def test_series_have_converged():
    # an invariant of the construction: the last three Chebyshev terms are small at every
    # score (what the tolerances above rest on), so the series resolve log q within range
    sq._make_series(sq._RULE_KS)
    tail = np.abs(sq._SERIES[:, -3:]).max(axis=1)
    assert tail.max() < 5e-12
    outer = np.abs(sq._RULE_Z) > 10.0  # the outermost scores of the 32- and 40-node rules
    assert tail[~outer].max() < 3e-14


def test_grid_in_any_order_and_repeated_gives_the_same_ratios():
    df = np.array([40.0, 18.0, 300.0, 18.0, 2000.0])
    tier = np.array([6, 4, 3, 4, 2], dtype=np.int64)
    sq._RATIO_TABLES.clear()
    col, ratio, _ = sq._hermite_nodes(df, tier)
    for j in range(df.size):
        alone = sq._hermite_nodes(df[j : j + 1], tier[j : j + 1])[1]
        # the same to rounding (a matrix product of another shape may round differently)
        np.testing.assert_allclose(ratio[col == j], alone, rtol=1e-15, atol=0)
    # a grid asked for twice over (several effects at once) reads the same table
    twice = np.concatenate([np.sort(df), np.sort(df)])
    again = sq._hermite_nodes(twice, np.full(twice.size, 4, dtype=np.int64))[1]
    np.testing.assert_array_equal(again[: again.size // 2], again[again.size // 2 :])
