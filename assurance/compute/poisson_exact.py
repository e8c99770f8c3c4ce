"""Exact power of the conditional test comparing two Poisson rates, by enumeration.

Two arms with Poisson event totals; the arm whose count should be *small* if the treatment
works (treatment when lower rates are better, control when higher rates are better) has
total ``Y ~ Poisson(lam_y)`` and the other arm ``O ~ Poisson(lam_o)``, independent (each
``lam`` = patients x rate x follow-up). Given the total ``S = Y + O``, ``Y ~ Binomial(S, q)``
with ``q = lam_y / (lam_y + lam_o)``. Under the null rate ratio the share is ``q0``; the
test rejects when the one-sided binomial tail ``P(Y' <= y | S, q0) <= alpha``, i.e. when
``y <= k(S)``, the largest such ``y`` (``-1`` if none). The test keeps its level at every
size (it is exact conditionally on ``S``, hence unconditionally) and is conservative, the
more so at small ``S`` (its size is saw-toothed in the sample size).

Power at true expected counts is

``sum_S Poisson(S; lam_y + lam_o) * P(Binomial(S, q) <= k(S))``,

summed over ``S`` between bounds outside which the Poisson total has mass below ``1e-13``
(sub-gamma tail bounds for the Poisson distribution, Boucheron, Lugosi & Massart 2013,
section 2.4); vectorised over any
broadcast shape of ``lam_y, lam_o, q0``. Above :data:`ENUMERATION_LIMIT` expected events the
normal limit of the same test is used instead (only far prior tails reach it in practice).

References
----------
Przyborowski J, Wilenski H (1940). Homogeneity of results in testing samples from Poisson
series. Biometrika 31:313-323 (the conditional binomial test of two Poisson means).
Boucheron S, Lugosi G, Massart P (2013). Concentration Inequalities. Oxford University
Press (Poisson tail bounds).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import special

__all__ = ["ENUMERATION_LIMIT", "TAIL", "CriticalTable", "critical_counts", "conditional_power"]

#: Poisson mass left out of the enumeration of the total count (both tails together).
TAIL = 1e-13
#: Expected total events above which the normal limit of the test replaces enumeration.
ENUMERATION_LIMIT = 1e5


def _binom_cdf(k: np.ndarray, s: np.ndarray, q: Any) -> np.ndarray:
    """``P(Binomial(s, q) <= k)``, 0 for ``k < 0`` and 1 for ``k >= s``."""
    k = np.asarray(k, dtype=float)
    s = np.asarray(s, dtype=float)
    inside = special.bdtr(np.clip(k, 0, None).astype(np.int64), s.astype(np.int64), q)
    return np.where(k < 0, 0.0, np.where(k >= s, 1.0, inside))


def critical_counts(total: Any, q0: Any, alpha: float,
                    share_below: Any = None) -> np.ndarray:
    """Largest ``y`` with ``P(Binomial(S, q0) <= y) <= alpha`` (-1 when there is none).

    With ``share_below`` = ``b``, the count must also satisfy ``y < b S`` (an observed
    effect at least as large as a minimum), so the result is at most ``ceil(b S) - 1``.

    Examples
    --------
    >>> # P(Bin(20, 0.5) <= 5) = 0.0207 <= 0.025 < P(<= 6) = 0.0577 (scipy.stats.binom.cdf)
    >>> int(critical_counts(20, 0.5, 0.025))
    5
    >>> int(critical_counts(3, 0.5, 0.025))   # P(0) = 0.125: no count rejects
    -1
    """
    s = np.asarray(total, dtype=float)
    q0 = np.asarray(q0, dtype=float)
    s, q0 = np.broadcast_arrays(s, q0)
    z = special.ndtri(alpha)
    guess = np.floor(s * q0 + z * np.sqrt(s * q0 * (1 - q0)))
    k = np.clip(guess, -1, s)
    # walk down while the tail exceeds alpha, then up while the next count still passes;
    # the guess is within a few counts, so few steps are taken
    for _ in range(10_000):
        down = (k >= 0) & (_binom_cdf(k, s, q0) > alpha)
        if not down.any():
            break
        k = k - down
    for _ in range(10_000):
        up = (k < s) & (_binom_cdf(k + 1, s, q0) <= alpha)
        if not up.any():
            break
        k = k + up
    if share_below is not None:
        # y < b S, strictly: a count whose observed effect equals the minimum (up to
        # rounding in b) does not pass
        b = np.asarray(share_below, dtype=float)
        k = np.minimum(k, np.ceil(b * s * (1 - 1e-12)) - 1)
    return np.maximum(k, -1.0)


class CriticalTable:
    """Critical counts ``k(S)`` for a fixed vector of null shares, kept and extended.

    Row ``i`` holds :func:`critical_counts` for ``q0[i]`` (and ``share_below[i]``) at
    ``S = 0, 1, ...``; the rows grow (doubling) as larger totals are asked for, so repeated
    power evaluations at many true effects compute each critical count once.

    Examples
    --------
    >>> table = CriticalTable(np.array([0.5]), 0.025)
    >>> table.at(np.array([[20.0, 3.0]])).tolist()
    [[5.0, -1.0]]
    """

    def __init__(self, q0: np.ndarray, alpha: float, share_below: np.ndarray | None = None):
        self.q0 = np.asarray(q0, dtype=float).ravel()
        self.alpha = alpha
        self.share_below = (None if share_below is None
                            else np.broadcast_to(share_below, self.q0.shape).astype(float))
        self.table = np.empty((self.q0.size, 0))

    def at(self, s: np.ndarray) -> np.ndarray:
        """Critical counts at totals ``s`` (rows matching ``q0``, any number of columns)."""
        need = int(np.max(s)) + 1
        have = self.table.shape[1]
        if need > have:
            top = max(need, 2 * have, 64)
            grid = np.arange(have, top, dtype=float)[None, :]
            b = None if self.share_below is None else self.share_below[:, None]
            extra = critical_counts(grid, self.q0[:, None], self.alpha, b)
            self.table = np.concatenate([self.table, extra], axis=1)
        return np.take_along_axis(self.table, s.astype(np.int64), axis=1)


def conditional_power(lam_y: Any, lam_o: Any, q0: Any, alpha: float,
                      share_below: Any = None, *,
                      critical: CriticalTable | None = None) -> np.ndarray:
    """Probability that the conditional test rejects, exact by enumeration of the total.

    Parameters
    ----------
    lam_y, lam_o
        Expected event totals of the arm that should have few events and of the other arm
        (> 0); broadcast together with ``q0``.
    q0
        Share of all events expected in the ``y`` arm under the null rate ratio.
    alpha
        One-sided level.
    share_below
        Optional: success also needs ``y < share_below * S`` (a minimum observed effect).
    critical
        Optional :class:`CriticalTable` for the same ``q0``, ``alpha`` and ``share_below``,
        one row per element of the broadcast inputs (reused across calls).

    Returns
    -------
    numpy.ndarray
        Power, shape of the broadcast inputs.

    Examples
    --------
    >>> # no effect: the size of the test is at most alpha
    >>> float(conditional_power(10.0, 10.0, 0.5, 0.025)) <= 0.025
    True
    >>> round(float(conditional_power(20.0, 40.0, 0.5, 0.025)), 4)
    0.702
    """
    lam_y, lam_o, q0 = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                             for a in (lam_y, lam_o, q0)))
    shape = lam_y.shape
    lam_y, lam_o, q0 = lam_y.ravel(), lam_o.ravel(), q0.ravel()
    b = None if share_below is None else np.broadcast_to(
        np.asarray(share_below, dtype=float), shape).ravel()
    total = lam_y + lam_o
    q = lam_y / total
    out = np.empty(total.shape)
    big = total > ENUMERATION_LIMIT
    if big.any():
        out[big] = _normal_limit(total[big], q[big], q0[big], alpha,
                                 None if b is None else b[big])
    small = ~big
    if small.any():
        lam, qs, q0s = total[small], q[small], q0[small]
        # Poisson tails (Boucheron, Lugosi & Massart 2013, sub-gamma bounds): with
        # u = log(2 / TAIL), P(S >= L + sqrt(2 L u) + u / 3) <= TAIL / 2 and
        # P(S <= L - sqrt(2 L u)) <= TAIL / 2
        u = math.log(2.0 / TAIL)
        lo = np.maximum(np.ceil(lam - np.sqrt(2 * lam * u)), 0.0)
        hi = np.floor(lam + np.sqrt(2 * lam * u) + u / 3)
        width = int(np.max(hi - lo)) + 1
        s = lo[:, None] + np.arange(width)[None, :]
        keep = s <= hi[:, None]
        s = np.where(keep, s, lo[:, None])
        weight = np.exp(special.xlogy(s, lam[:, None]) - lam[:, None] - special.gammaln(s + 1))
        if critical is not None:
            k = critical.at(s)[small] if small.all() else _rows(critical, small, s)
        else:
            k = critical_counts(s, q0s[:, None], alpha,
                                None if b is None else b[small][:, None])
        cond = _binom_cdf(k, s, qs[:, None])
        out[small] = np.sum(np.where(keep, weight * cond, 0.0), axis=1)
    return np.clip(out, 0.0, 1.0).reshape(shape)


def _rows(critical: CriticalTable, rows: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Critical counts for some rows of a table (the others use the normal limit)."""
    full = np.zeros((rows.size, s.shape[1]))
    full[rows] = s
    return critical.at(full)[rows]


def _normal_limit(total, q, q0, alpha, b):
    """Normal limit of the test for very many events (unconditional moments of Y - c S)."""
    z = special.ndtri(1 - alpha)

    def below(c, margin):
        mean = total * (c - q)
        sd = np.sqrt(total * ((1 - c) ** 2 * q + c**2 * (1 - q)))
        return special.ndtr((mean - margin) / sd)

    p = below(q0, z * np.sqrt(total * q0 * (1 - q0)))
    if b is not None:
        p = np.minimum(p, below(b, 0.0))
    return p
