"""Quadrature over the sample standard deviation of a normal trial.

When the analysis estimates sigma (a t test), success depends on the sample SD ``s`` as well
as on the estimate. With ``s^2 / sigma^2 ~ chi2_df / df`` independent of the estimate, every
success probability is ``E_s[ P(d > c(s)) ]``. These nodes and weights compute that
expectation: Gauss-Hermite on the normal score of the chi-square quantile, where the
integrand is smooth enough that 32 nodes reach machine precision for ``df >= 5`` (checked
against ``scipy.stats.nct`` in the tests); a dense Gauss-Legendre rule on the probability
scale covers ``df < 5``.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import special, stats

__all__ = ["sd_ratio_nodes"]

_HERMITE_NODES = 32
_LEGENDRE_NODES = 400


def _hermite_rule() -> tuple[np.ndarray, np.ndarray]:
    x, w = special.roots_hermitenorm(_HERMITE_NODES)
    return x, w / np.sqrt(2 * np.pi)


def _legendre_rule() -> tuple[np.ndarray, np.ndarray]:
    x, w = special.roots_legendre(_LEGENDRE_NODES)
    return (x + 1) / 2, w / 2


_HERMITE = _hermite_rule()
_LEGENDRE = _legendre_rule()


def sd_ratio_nodes(df: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``r = s / sigma`` and weights for each degrees-of-freedom value.

    Parameters
    ----------
    df
        1-D array of degrees of freedom (one per sample size), each >= 1.

    Returns
    -------
    ratio, weight
        Arrays of shape ``(K, len(df))``; ``sum(weight * g(ratio), axis=0)`` approximates
        ``E[g(s / sigma)]``. Weights in each column sum to one.

    Examples
    --------
    >>> import numpy as np
    >>> r, w = sd_ratio_nodes(np.array([30.0]))
    >>> round(float(np.sum(w * r**2)), 10)  # E[s^2 / sigma^2] = 1
    1.0
    """
    df = np.atleast_1d(np.asarray(df, dtype=float))
    ratio, weight = _nodes_for(df.tobytes())
    return ratio.copy(), weight.copy()


@lru_cache(maxsize=32)
def _nodes_for(df_bytes: bytes) -> tuple[np.ndarray, np.ndarray]:
    df = np.frombuffer(df_bytes, dtype=float)
    big = df >= 5
    k = _HERMITE_NODES if big.all() else _LEGENDRE_NODES
    ratio = np.ones((k, df.size))
    weight = np.zeros((k, df.size))
    if big.any():
        x, w = _HERMITE
        half = df[big] / 2
        chi = np.empty((x.size, half.size))
        low = x < 0  # lower half from the lower tail, upper half from the upper tail
        chi[low] = 2 * special.gammaincinv(half[None, :], special.ndtr(x[low])[:, None])
        chi[~low] = 2 * special.gammainccinv(half[None, :], special.ndtr(-x[~low])[:, None])
        ratio[: x.size, big] = np.sqrt(chi / df[None, big])
        weight[: x.size, big] = w[:, None]
    if (~big).any():
        u, w = _LEGENDRE
        d = df[None, ~big]
        ratio[: u.size, ~big] = np.sqrt(stats.chi2.ppf(u[:, None], d) / d)
        weight[: u.size, ~big] = w[:, None]
    return ratio, weight
