"""Quadrature over the sample standard deviation of a normal trial.

When the analysis estimates sigma (a t test), success depends on the sample SD ``s`` as well
as on the estimate. With ``s^2 / sigma^2 ~ chi2_df / df`` independent of the estimate, every
success probability is ``E_s[ P(d > c(s)) ]``. These nodes and weights compute that
expectation: Gauss-Hermite on the normal score of the chi-square quantile, where the
integrand is smooth enough that 32 nodes reach machine precision for ``df >= 5`` (checked
against ``scipy.stats.nct`` in the tests); a dense Gauss-Legendre rule on the probability
scale covers ``df < 5``.

A rule with a minimum observed effect makes the threshold ``max(a + b s, e_min)`` kinked in
``s``. Passing the kink (the ratio ``s / sigma`` where the two branches meet) splits the
expectation there: below the kink the threshold is constant and its weight is the exact
chi-square probability; above it a Gauss-Legendre rule on the normal score integrates the
smooth branch.
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
_SPLIT_NODES = 64
_SPLIT = special.roots_legendre(_SPLIT_NODES)
_Z_END = 9.0  # the normal density beyond +-9 is below 1e-18


def _chi_from_score(z: np.ndarray, half_df: np.ndarray) -> np.ndarray:
    """Chi-square quantile at probability Phi(z), each tail computed from its own side."""
    out = np.empty(np.broadcast(z, half_df).shape)
    z, half_df = np.broadcast_arrays(z, half_df)
    low = z < 0
    out[low] = 2 * special.gammaincinv(half_df[low], special.ndtr(z[low]))
    out[~low] = 2 * special.gammainccinv(half_df[~low], special.ndtr(-z[~low]))
    return out


def sd_ratio_nodes(df: np.ndarray, kink: np.ndarray | None = None
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``r = s / sigma`` and weights for each degrees-of-freedom value.

    Parameters
    ----------
    df
        1-D array of degrees of freedom (one per sample size), each >= 1.
    kink
        Optional ratio per column at which the integrand has a kink (NaN or <= 0: none).
        The first node of a split column sits at the kink and carries the probability
        below it.

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
    if kink is None:
        return ratio.copy(), weight.copy()
    kink = np.broadcast_to(np.asarray(kink, dtype=float), df.shape)
    split = np.isfinite(kink) & (kink > 0)
    if not split.any():
        return ratio.copy(), weight.copy()
    k = max(ratio.shape[0], 1 + max(_SPLIT_NODES, _LEGENDRE_NODES if (df[split] < 5).any()
                                    else 0))
    out_r = np.ones((k, df.size))
    out_w = np.zeros((k, df.size))
    out_r[: ratio.shape[0], ~split] = ratio[:, ~split]
    out_w[: ratio.shape[0], ~split] = weight[:, ~split]
    for cols, rule in ((split & (df >= 5), "score"), (split & (df < 5), "probability")):
        if not cols.any():
            continue
        d = df[cols]
        x_star = d * kink[cols] ** 2
        below = stats.chi2.cdf(x_star, d)
        out_r[0, cols] = kink[cols]
        out_w[0, cols] = below
        if rule == "score":
            z_star = np.where(below < 0.5, special.ndtri(below),
                              -special.ndtri(stats.chi2.sf(x_star, d)))
            start = np.clip(z_star, -_Z_END, _Z_END)
            t, w = _SPLIT
            half = (_Z_END - start) / 2
            z = start[None, :] + half[None, :] * (t[:, None] + 1)
            chi = _chi_from_score(z, d[None, :] / 2)
            out_r[1 : 1 + t.size, cols] = np.sqrt(chi / d[None, :])
            out_w[1 : 1 + t.size, cols] = w[:, None] * half[None, :] * np.exp(
                -0.5 * z * z) / np.sqrt(2 * np.pi)
        else:
            u, w = _LEGENDRE
            span = 1.0 - below
            p = below[None, :] + span[None, :] * u[:, None]
            p = np.clip(p, 0.0, 1.0 - 1e-16)
            out_r[1 : 1 + u.size, cols] = np.sqrt(stats.chi2.ppf(p, d[None, :]) / d[None, :])
            out_w[1 : 1 + u.size, cols] = w[:, None] * span[None, :]
    return out_r, out_w


@lru_cache(maxsize=32)
def _nodes_for(df_bytes: bytes) -> tuple[np.ndarray, np.ndarray]:
    df = np.frombuffer(df_bytes, dtype=float)
    big = df >= 5
    k = _HERMITE_NODES if big.all() else _LEGENDRE_NODES
    ratio = np.ones((k, df.size))
    weight = np.zeros((k, df.size))
    if big.any():
        x, w = _HERMITE
        chi = _chi_from_score(x[:, None], df[None, big] / 2)
        ratio[: x.size, big] = np.sqrt(chi / df[None, big])
        weight[: x.size, big] = w[:, None]
    if (~big).any():
        u, w = _LEGENDRE
        d = df[None, ~big]
        ratio[: u.size, ~big] = np.sqrt(stats.chi2.ppf(u[:, None], d) / d)
        weight[: u.size, ~big] = w[:, None]
    return ratio, weight
