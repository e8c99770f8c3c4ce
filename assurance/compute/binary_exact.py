"""Success probabilities for a binary (response) outcome: exact enumeration of the outcomes.

A two-arm trial ends with ``x_t`` responders out of ``n_t`` on treatment and ``x_c`` out of
``n_c`` on control; a single-arm trial has ``x_t`` out of ``n_t`` and compares its rate with a
fixed reference rate. For one pair of arm sizes, the *success region* -- the outcomes at which
the chosen test rejects in the favourable direction -- is computed once, vectorised over the
whole outcome grid. Every probability of success is then a weighted sum over that region:

* classical power at fixed rates: binomial probabilities per arm;
* assurance under independent beta priors on the two rates: beta-binomial prior predictive
  probabilities per arm (exact, no simulation);
* any other prior: quadrature nodes over the rates (see :mod:`assurance.endpoints.binary`),
  with binomial probabilities at each node.

A posterior-probability rule with beta analysis priors (:class:`PosteriorSpec`) is one
more "test": its region holds the outcomes whose posterior probability of a benefit beyond
the boundary reaches the level (:func:`posterior_region`), and every sum above applies
unchanged.

Beyond a switch point the endpoint uses the normal approximation of :func:`normal_power`
(:func:`posterior_normal_power` for a posterior rule) instead of the enumeration.

All effects here are on the *natural analysis scale* ``x`` (difference ``p_t - p_c``, log risk
ratio or log odds ratio); ``sign`` is +1 when higher rates are better and -1 when lower rates
are better, so the benefit-scale effect is ``sign * x``.

References
----------
Fleiss, J. L., Tytun, A. & Ury, H. K. (1980). A simple approximation for calculating sample
sizes for comparing independent proportions. Biometrics 36, 343-346.

Farrington, C. P. & Manning, G. (1990). Test statistics and sample size formulae for
comparative binomial trials with null hypothesis of non-zero risk difference or non-unity
relative risk. Statistics in Medicine 9, 1447-1454.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from numpy.polynomial.legendre import leggauss
from scipy import special

from .._validation import check_choice, check_int
from ..errors import AssuranceInputError

__all__ = [
    "TESTS",
    "SCALES",
    "TestSpec",
    "RateArm",
    "SuccessRegion",
    "success_region",
    "success_runs",
    "two_arm_z",
    "fisher_p_values",
    "fisher_critical_counts",
    "normal_power",
    "binomial_pmf",
    "beta_binomial_pmf",
    "restricted_rates",
    "treatment_rate",
    "control_rate",
    "natural_effect",
    "effect_bounds",
    "control_breakpoints",
    "treatment_breakpoints",
    "gauss_legendre",
    "smoothed_rule",
    "posterior_below",
    "PosteriorSpec",
    "posterior_probabilities",
    "posterior_region",
    "posterior_runs",
    "posterior_normal_power",
]

#: tests the trial may use, in plain words
TESTS = ("z", "unpooled_z", "chi_square", "fisher_exact", "exact_binomial")
#: scales of the effect
SCALES = ("difference", "risk_ratio", "odds_ratio")
#: p-values within this relative distance of alpha count as rejecting (rounding guard: a
#: p-value exactly equal to alpha rejects, and sums of probabilities carry ~1e-15 error)
P_VALUE_TOLERANCE = 1e-7


# ------------------------------------------------------------------------------------------
# the effect scales
# ------------------------------------------------------------------------------------------
def treatment_rate(x, p_c, scale: str):
    """Treatment rate for natural effect ``x`` at control rate ``p_c`` (may leave [0, 1]).

    Examples
    --------
    >>> round(float(treatment_rate(np.log(1.5), 0.2, "risk_ratio")), 10)
    0.3
    """
    x, p_c = np.asarray(x, dtype=float), np.asarray(p_c, dtype=float)
    if scale == "difference":
        return p_c + x
    if scale == "risk_ratio":
        return p_c * np.exp(x)
    with np.errstate(divide="ignore"):
        return special.expit(special.logit(p_c) + x)


def control_rate(x, p_t, scale: str):
    """Control rate at which treatment rate ``p_t`` means natural effect ``x`` (inverse map)."""
    x, p_t = np.asarray(x, dtype=float), np.asarray(p_t, dtype=float)
    if scale == "difference":
        return p_t - x
    if scale == "risk_ratio":
        return p_t * np.exp(-x)
    with np.errstate(divide="ignore"):
        return special.expit(special.logit(p_t) - x)


def natural_effect(p_t, p_c, scale: str):
    """Effect of rates ``p_t`` versus ``p_c`` on the analysis scale.

    Empty cells give the limits (``log 0 = -inf``); ``0/0`` (both rates 0, or both 1 for the
    odds ratio) counts as no effect.
    """
    p_t, p_c = np.asarray(p_t, dtype=float), np.asarray(p_c, dtype=float)
    if scale == "difference":
        return p_t - p_c
    with np.errstate(divide="ignore", invalid="ignore"):
        if scale == "risk_ratio":
            out = np.log(p_t) - np.log(p_c)
        else:
            out = special.logit(p_t) - special.logit(p_c)
    return np.where(np.isnan(out), 0.0, out)


def effect_bounds(p_c, scale: str):
    """Natural effects ``[lo, hi]`` that keep the treatment rate in [0, 1] at control ``p_c``."""
    p_c = np.asarray(p_c, dtype=float)
    if scale == "difference":
        return -p_c, 1.0 - p_c
    if scale == "risk_ratio":
        with np.errstate(divide="ignore"):
            return np.full_like(p_c, -np.inf), -np.log(p_c)
    return np.full_like(p_c, -np.inf), np.full_like(p_c, np.inf)


def control_breakpoints(x: float, scale: str) -> list[float]:
    """Control rates in (0, 1) at which natural effect ``x`` reaches a bound of [0, 1]."""
    if scale == "difference":
        points = [-x, 1.0 - x]
    elif scale == "risk_ratio":
        points = [math.exp(-x)] if x > -700 else []
    else:
        points = []
    return [p for p in points if 0.0 < p < 1.0]


def treatment_breakpoints(x: float, scale: str) -> list[float]:
    """Treatment rates in (0, 1) at which the matching control rate reaches 0 or 1."""
    if scale == "difference":
        points = [x, 1.0 + x]
    elif scale == "risk_ratio":
        points = [math.exp(x)] if x < 700 else []
    else:
        points = []
    return [p for p in points if 0.0 < p < 1.0]


# ------------------------------------------------------------------------------------------
# probabilities of outcomes
# ------------------------------------------------------------------------------------------
@lru_cache(maxsize=256)
def _log_comb(n: int) -> np.ndarray:
    """``log C(n, x)`` for ``x = 0..n`` (cached, read-only)."""
    x = np.arange(n + 1)
    out = special.gammaln(n + 1) - special.gammaln(x + 1) - special.gammaln(n - x + 1)
    out.flags.writeable = False
    return out


def binomial_pmf(n: int, p) -> np.ndarray:
    """Binomial probabilities of ``0..n`` responders, one row per rate in ``p``.

    Examples
    --------
    >>> np.round(binomial_pmf(2, [0.5]), 3)
    array([[0.25, 0.5 , 0.25]])
    """
    p = np.atleast_1d(np.asarray(p, dtype=float))
    x = np.arange(n + 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        logpmf = (_log_comb(n)[None, :] + x[None, :] * np.log(p)[:, None]
                  + (n - x)[None, :] * np.log1p(-p)[:, None])
        out = np.exp(logpmf)
    for edge, count in ((p <= 0.0, 0), (p >= 1.0, n)):
        if edge.any():
            out[edge] = 0.0
            out[edge, count] = 1.0
    return out


def beta_binomial_pmf(n: int, a: float, b: float) -> np.ndarray:
    """Beta-binomial probabilities of ``0..n`` responders when the rate is Beta(a, b).

    Examples
    --------
    >>> np.round(beta_binomial_pmf(2, 1.0, 1.0), 4)  # uniform rate: all counts equally likely
    array([0.3333, 0.3333, 0.3333])
    """
    x = np.arange(n + 1)
    return np.exp(_log_comb(n) + special.betaln(x + a, n - x + b) - special.betaln(a, b))


@lru_cache(maxsize=16)
def _gauss_legendre(k: int) -> tuple[np.ndarray, np.ndarray]:
    t, w = leggauss(k)
    t, w = (t + 1.0) / 2.0, w / 2.0
    t.flags.writeable = False
    w.flags.writeable = False
    return t, w


def gauss_legendre(k: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [0, 1] (cached, read-only arrays)."""
    return _gauss_legendre(int(k))


@lru_cache(maxsize=16)
def _smoothed_rule(k: int) -> tuple[np.ndarray, np.ndarray]:
    t, w = _gauss_legendre(k)
    s = t**3 * (10.0 - 15.0 * t + 6.0 * t * t)
    ws = w * 30.0 * t * t * (1.0 - t) ** 2
    s.flags.writeable = False
    ws.flags.writeable = False
    return s, ws


def smoothed_rule(k: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre on [0, 1] after the change of variable ``s = 10t^3 - 15t^4 + 6t^5``.

    Integrals on a probability scale ``v = F(x)`` have integrands with endpoint
    singularities (``F^{-1}`` of a normal or beta prior has infinite slope at 0 and 1); the
    substitution, whose derivative ``30 t^2 (1 - t)^2`` vanishes at both ends, smooths them
    so that Gauss-Legendre converges fast again (a sigmoidal transformation in the sense of
    Sidi 1993, common practice in numerical integration).

    Examples
    --------
    >>> s, w = smoothed_rule(16)
    >>> round(float(np.sum(w * np.sqrt(s))), 8)  # integral of sqrt(v) over [0, 1] = 2/3
    0.66666667
    """
    return _smoothed_rule(int(k))


def posterior_below(a: float, b: float, n: int, t) -> np.ndarray:
    """``P(p < t | x responders of n)`` under a Beta(a, b) prior, for every ``x = 0..n``.

    Returns shape ``(n + 1, len(t))``: the regularised incomplete beta function
    ``I_t(a + x, b + n - x)``. One call of ``scipy.special.betainc`` per ``t``, then the
    recurrence ``I_t(c + 1, d - 1) = I_t(c, d) - Gamma(c + d) / (Gamma(c + 1) Gamma(d))
    t^c (1 - t)^(d - 1)`` (DLMF 8.17.20) as a cumulative sum; its absolute error is a few
    ``n`` machine epsilons.

    Examples
    --------
    >>> from scipy import special
    >>> v = posterior_below(2.0, 3.0, 4, [0.4])[:, 0]
    >>> bool(np.allclose(v, special.betainc(2.0 + np.arange(5), 3.0 + 4 - np.arange(5), 0.4)))
    True
    """
    t = np.clip(np.atleast_1d(np.asarray(t, dtype=float)), 0.0, 1.0)
    first = special.betainc(a, b + n, t)
    if n == 0:
        return first[None, :]
    # computed with x along the last (contiguous) axis; returned transposed (a view)
    out = np.empty((t.size, n + 1))
    out[t <= 0.0] = 0.0
    out[t >= 1.0] = 1.0
    inner = (t > 0.0) & (t < 1.0)
    if inner.any():
        ti = t[inner][:, None]
        x = np.arange(n)
        const = (special.gammaln(a + b + n) - special.gammaln(a + x + 1)
                 - special.gammaln(b + n - x))[None, :]
        terms = np.exp(const + (a + x) * np.log(ti) + (b + n - x - 1) * np.log1p(-ti))
        out[inner, 0] = first[inner]
        out[inner, 1:] = first[inner][:, None] - np.cumsum(terms, axis=1)
    return np.clip(out, 0.0, 1.0, out=out).T


#: Nodes of Beta priors already made (the inverse incomplete beta function is the costly
#: part of a binary plan, and a plan, its solver and its sensitivity analysis ask for the
#: same prior's nodes over the same intervals many times): key -> (rates, weights), the
#: oldest dropped first beyond _NODES_KEPT entries (at most about 1 MB each).
_NODES_MADE: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}
_NODES_KEPT = 48


@dataclass(frozen=True)
class RateArm:
    """What is assumed about one arm's rate: a Beta(a, b) prior, or a fixed value.

    Examples
    --------
    >>> arm = RateArm.beta(3.0, 7.0)
    >>> round(arm.mean, 3), RateArm.fixed_at(0.25).sd
    (0.3, 0.0)
    """

    a: float = math.nan
    b: float = math.nan
    value: float | None = None

    @classmethod
    def beta(cls, a: float, b: float) -> RateArm:
        return cls(a=float(a), b=float(b))

    @classmethod
    def fixed_at(cls, value: float) -> RateArm:
        return cls(value=float(value))

    @property
    def fixed(self) -> bool:
        return self.value is not None

    @property
    def mean(self) -> float:
        return self.value if self.fixed else self.a / (self.a + self.b)

    @property
    def sd(self) -> float:
        if self.fixed:
            return 0.0
        s = self.a + self.b
        return math.sqrt(self.a * self.b / (s * s * (s + 1.0)))

    def cdf(self, p) -> np.ndarray:
        p = np.asarray(p, dtype=float)
        if self.fixed:
            return np.where(p >= self.value, 1.0, 0.0)
        return special.betainc(self.a, self.b, np.clip(p, 0.0, 1.0))

    def pdf(self, p) -> np.ndarray:
        p = np.asarray(p, dtype=float)
        inside = (p > 0.0) & (p < 1.0)
        q = np.where(inside, p, 0.5)
        dens = np.exp((self.a - 1) * np.log(q) + (self.b - 1) * np.log1p(-q)
                      - special.betaln(self.a, self.b))
        return np.where(inside, dens, 0.0)

    def nodes(self, lo, hi, k: int) -> tuple[np.ndarray, np.ndarray]:
        """Rates and weights integrating over this arm's prior restricted to ``[lo, hi]``.

        Gauss-Legendre on the prior's probability scale ``v = F(p)`` (the weight is then 1),
        vectorised over arrays ``lo``, ``hi``: returns arrays of shape ``lo.shape + (k,)``.
        A fixed rate gives one node (weight 1 if it lies in ``[lo, hi]``).
        """
        lo, hi = np.broadcast_arrays(np.asarray(lo, dtype=float), np.asarray(hi, dtype=float))
        if self.fixed:
            inside = (lo <= self.value) & (self.value <= hi)
            return np.full(lo.shape + (1,), self.value), inside[..., None].astype(float)
        key = (float(self.a), float(self.b), k, lo.shape, lo.tobytes(), hi.tobytes())
        found = _NODES_MADE.get(key)
        if found is not None:
            return found
        t, w = smoothed_rule(k)
        v0, v1 = self.cdf(lo), self.cdf(hi)
        width = np.maximum(v1 - v0, 0.0)[..., None]
        v = v0[..., None] + width * t
        made = (special.betaincinv(self.a, self.b, v), width * w)
        for array in made:
            array.setflags(write=False)  # shared between callers through the cache
        if len(_NODES_MADE) >= _NODES_KEPT:
            del _NODES_MADE[next(iter(_NODES_MADE))]  # the oldest
        _NODES_MADE[key] = made
        return made

    def split_nodes(self, breaks: list[float], k: int) -> tuple[np.ndarray, np.ndarray]:
        """1-D nodes over the whole prior, a Gauss-Legendre block between each breakpoint."""
        edges = np.unique(np.clip([0.0, *breaks, 1.0], 0.0, 1.0))
        if self.fixed:
            return np.array([self.value]), np.array([1.0])
        p, w = self.nodes(edges[:-1], edges[1:], k)
        keep = w.ravel() > 0
        return p.ravel()[keep], w.ravel()[keep]

    def describe(self) -> list[float] | float:
        return self.value if self.fixed else [self.a, self.b]


# ------------------------------------------------------------------------------------------
# the tests
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class TestSpec:
    """One test, in the favourable direction, at one-sided level ``alpha``.

    ``null_shift`` is the natural effect under the null (0 for superiority; ``-sign *
    margin`` for non-inferiority); ``reference`` is the single-arm reference rate.
    ``min_estimate`` (benefit scale) is a further requirement on the observed effect.
    """

    __test__ = False  # not a pytest class

    test: str
    alpha: float
    sign: float
    scale: str
    two_arm: bool
    null_shift: float = 0.0
    reference: float | None = None
    continuity: bool = False
    min_estimate: float | None = None

    @property
    def null_rate(self) -> float:
        """Single arm: the treatment rate under the null hypothesis."""
        return float(treatment_rate(self.null_shift, self.reference, self.scale))

    @property
    def critical_z(self) -> float:
        return float(special.ndtri(1.0 - self.alpha))


def restricted_rates(p_t, p_c, n_t, n_c, delta0: float):
    """Maximum-likelihood rates under ``p_t - p_c = delta0`` (Farrington & Manning 1990).

    The closed-form root of the likelihood equation (a cubic), vectorised; with
    ``delta0 = 0`` it is the pooled rate for both arms.
    """
    p_t, p_c = np.asarray(p_t, dtype=float), np.asarray(p_c, dtype=float)
    theta = n_c / n_t
    a = 1.0 + theta
    b = -(1.0 + theta + p_t + theta * p_c + delta0 * (theta + 2.0))
    c = delta0 * delta0 + delta0 * (2.0 * p_t + theta + 1.0) + p_t + theta * p_c
    d = -p_t * delta0 * (1.0 + delta0)
    v = b**3 / (27.0 * a**3) - b * c / (6.0 * a * a) + d / (2.0 * a)
    u = np.sign(v) * np.sqrt(np.maximum(b * b / (9.0 * a * a) - c / (3.0 * a), 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(u != 0.0, v / u**3, 0.0)
    w = (np.pi + np.arccos(np.clip(ratio, -1.0, 1.0))) / 3.0
    rt = np.clip(2.0 * u * np.cos(w) - b / (3.0 * a), 0.0, 1.0)
    return rt, np.clip(rt - delta0, 0.0, 1.0)


# ------------------------------------------------------------------------------------------
# success regions as runs of treatment counts
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class SuccessRegion:
    """Where a trial succeeds, stored as runs of treatment counts per control count.

    Run ``j`` holds the tables ``(x_t, col[j])`` with ``lo[j] <= x_t <= hi[j]``. The region
    of a test is one run per control count reaching the top (``x_t >= t(x_c)``, higher rates
    better) or the bottom (``x_t <= u(x_c)``, lower better): a staircase. Any other region
    (:meth:`from_dense`) may have several runs per control count. A single arm has one
    control "count" (``n_c = 0``).

    Every sum over the region is a sum over runs of prefix sums along ``x_t``: ``O(n_t +
    n_c)`` operations per pair of rates and ``O((n_t + n_c) K)`` for ``K`` rates, instead of
    the ``O(n_t n_c)`` and ``O(n_t n_c K)`` of a dense table (and no matrix product, so no
    linear-algebra threads). A run reaching the top is summed from the top down, one
    starting at 0 from the bottom up, so small tails keep their relative accuracy.

    Examples
    --------
    >>> dense = np.array([[False, False], [True, False], [True, True]])  # (x_t, x_c)
    >>> region = SuccessRegion.from_dense(dense)
    >>> region.runs()
    [(0, 1, 2), (1, 2, 2)]
    >>> float(region.probability(np.array([0.25, 0.5, 0.25]), np.array([0.5, 0.5])))
    0.5
    >>> bool(np.array_equal(region.dense(), dense))
    True
    """

    n_t: int
    n_c: int
    col: np.ndarray
    lo: np.ndarray
    hi: np.ndarray

    @classmethod
    def from_columns(cls, n_t: int, lo: np.ndarray, hi: np.ndarray) -> SuccessRegion:
        """One run ``[lo[x_c], hi[x_c]]`` per control count (empty where ``lo > hi``)."""
        lo = np.asarray(lo, dtype=np.int64)
        hi = np.asarray(hi, dtype=np.int64)
        if lo.ndim != 1 or lo.shape != hi.shape or lo.size == 0 \
                or lo.min() < 0 or hi.max() > n_t:
            raise AssuranceInputError(
                "The 'lo' and 'hi' parameters of SuccessRegion.from_columns must be equally "
                f"long, non-empty lists of counts in 0..{n_t}. Got {lo.tolist()!r} and "
                f"{hi.tolist()!r} instead.")
        keep = lo <= hi
        return cls(int(n_t), lo.size - 1, np.flatnonzero(keep), lo[keep], hi[keep])

    @classmethod
    def from_dense(cls, mask: np.ndarray) -> SuccessRegion:
        """The runs of a boolean array of shape ``(n_t + 1, n_c + 1)``."""
        mask = np.asarray(mask, dtype=bool)
        if mask.ndim != 2 or mask.shape[0] < 2 or mask.shape[1] < 1:
            raise AssuranceInputError(
                "The 'mask' parameter of SuccessRegion.from_dense must be a boolean array "
                "of shape (n_t + 1, n_c + 1) with n_t >= 1. Got shape "
                f"{mask.shape!r} instead.")
        n_t, n_c = mask.shape[0] - 1, mask.shape[1] - 1
        padded = np.zeros((n_c + 1, n_t + 3), dtype=np.int8)
        padded[:, 1:-1] = mask.T
        step = np.diff(padded, axis=1)
        col, start = np.nonzero(step == 1)
        _, stop = np.nonzero(step == -1)
        return cls(n_t, n_c, col.astype(np.int64), start.astype(np.int64),
                   stop.astype(np.int64) - 1)

    def runs(self) -> list[tuple[int, int, int]]:
        """``(x_c, lo, hi)`` of every run, in order of ``x_c``."""
        return list(zip(self.col.tolist(), self.lo.tolist(), self.hi.tolist(), strict=True))

    def dense(self) -> np.ndarray:
        """The region as a boolean array of shape ``(n_t + 1, n_c + 1)``."""
        step = np.zeros((self.n_t + 2, self.n_c + 1), dtype=np.int32)
        np.add.at(step, (self.lo, self.col), 1)
        np.add.at(step, (self.hi + 1, self.col), -1)
        return np.cumsum(step, axis=0)[:-1] > 0

    def tables(self) -> int:
        """Number of outcome tables in the region."""
        return int(np.sum(self.hi - self.lo + 1))

    def _run_sums(self, values: np.ndarray) -> np.ndarray:
        """Sum of ``values[..., lo:hi + 1]`` (along the last axis) for every run."""
        head = np.cumsum(values, axis=-1)
        tail = np.cumsum(values[..., ::-1], axis=-1)[..., ::-1]
        lo, hi = self.lo, self.hi
        inner = head[..., hi] - head[..., np.maximum(lo - 1, 0)]
        return np.where(hi == self.n_t, tail[..., lo], np.where(lo == 0, head[..., hi], inner))

    def _check(self, values: np.ndarray, n: int, name: str, method: str) -> np.ndarray:
        values = np.asarray(values, dtype=float)
        if values.ndim == 0 or values.shape[-1] != n + 1:
            raise AssuranceInputError(
                f"The '{name}' parameter of SuccessRegion.{method} must have {n + 1} entries "
                f"along its last axis. Got shape {values.shape!r} instead.")
        return values

    def probability(self, pmf_t: np.ndarray, pmf_c: np.ndarray) -> float:
        """``sum over the region of pmf_t[x_t] pmf_c[x_c]`` (independent arms)."""
        pmf_t = self._check(pmf_t, self.n_t, "pmf_t", "probability")
        pmf_c = self._check(pmf_c, self.n_c, "pmf_c", "probability")
        return float(np.dot(pmf_c[self.col], self._run_sums(pmf_t)))

    def by_treatment(self, weights_c: np.ndarray) -> np.ndarray:
        """For each ``x_t``, the sum of ``weights_c[..., x_c]`` over the region's ``x_c``.

        ``weights_c`` has shape ``(K, n_c + 1)`` (one row per rate, as
        :func:`binomial_pmf` gives), the result ``(K, n_t + 1)``: ``weights_c @ R.T``.
        """
        weights_c = self._check(weights_c, self.n_c, "weights_c", "by_treatment")
        col = self.col
        if col.size and np.all(col[1:] - col[:-1] == 1):  # consecutive control counts
            w = weights_c[..., col[0]:col[-1] + 1]
        else:
            w = weights_c[..., col]
        lo, hi, x = self.lo, self.hi, np.arange(self.n_t + 1)
        top = hi == self.n_t
        bottom = (lo == 0) & ~top
        inner = ~(top | bottom)
        # a run to the top covers every x_t >= lo; one from the bottom every x_t <= hi
        parts = []
        if top.any():
            parts.append(_sums_up_to(lo[top], w[..., top], x, "right"))
        if bottom.any():
            parts.append(_sums_from(hi[bottom], w[..., bottom], x))
        if inner.any():
            parts.append(_sums_up_to(lo[inner], w[..., inner], x, "right")
                         - _sums_up_to(hi[inner], w[..., inner], x, "left"))
        if not parts:
            return np.zeros(w.shape[:-1] + (self.n_t + 1,))
        return sum(parts[1:], parts[0])

    def by_control(self, weights_t: np.ndarray) -> np.ndarray:
        """For each ``x_c``, the sum of ``weights_t[..., x_t]`` over the region's ``x_t``.

        ``weights_t`` has shape ``(K, n_t + 1)``, the result ``(K, n_c + 1)``:
        ``weights_t @ R``.
        """
        sums = self._run_sums(self._check(weights_t, self.n_t, "weights_t", "by_control"))
        out = np.zeros(sums.shape[:-1] + (self.n_c + 1,))
        if self.col.size == 0:
            return out
        first = np.concatenate(([True], self.col[1:] != self.col[:-1]))
        if first.all():  # one run per control count
            out[..., self.col] = sums
        else:  # runs are stored in order of x_c
            starts = np.flatnonzero(first)
            out[..., self.col[starts]] = np.add.reduceat(sums, starts, axis=-1)
        return out


def _cumulative(w: np.ndarray, order: np.ndarray | None) -> np.ndarray:
    """Running sums of ``w[..., order]`` along the last axis, with a leading 0."""
    head = np.zeros(w.shape[:-1] + (w.shape[-1] + 1,))
    np.cumsum(w if order is None else w[..., order], axis=-1, out=head[..., 1:])
    return head


def _sums_up_to(pos: np.ndarray, w: np.ndarray, x: np.ndarray, side: str) -> np.ndarray:
    """``out[..., i] = sum of w[..., j] over pos[j] <= x[i]`` (``< x[i]`` with side 'left')."""
    if pos.size > 1 and np.all(pos[1:] >= pos[:-1]):  # a staircase: already in order
        order = None
    else:
        order = np.argsort(pos, kind="stable")
        pos = pos[order]
    return _cumulative(w, order)[..., np.searchsorted(pos, x, side=side)]


def _sums_from(pos: np.ndarray, w: np.ndarray, x: np.ndarray) -> np.ndarray:
    """``out[..., i] = sum of w[..., j] over pos[j] >= x[i]`` (summed from the largest)."""
    if pos.size > 1 and np.all(pos[1:] >= pos[:-1]):
        order = np.arange(pos.size - 1, -1, -1)
    else:
        order = np.argsort(-pos, kind="stable")
        pos = pos[order][::-1]
    return _cumulative(w, order)[..., pos.size - np.searchsorted(pos, x, side="left")]


def _first_passing(passes, n_t: int, n_c: int, guess: np.ndarray | None = None
                   ) -> np.ndarray:
    """For every column ``x_c``, the smallest rank ``r`` in ``0..n_t`` that passes.

    ``passes(r, x_c)`` (arrays) must be monotone in ``r`` (once true, true for every larger
    rank). A ``guess`` per column is tried first, at ``guess`` and ``guess - 1``: where it is
    right the column is settled by those two decisions; elsewhere they narrow the bracket.
    Then bisection for the unsettled columns at once (at most ``ceil(log2(n_t + 2))``
    vectorised rounds). ``n_t + 1`` means no rank passes.
    """
    lo = np.full(n_c + 1, -1, dtype=np.int64)  # fails (virtual)
    hi = np.full(n_c + 1, n_t + 1, dtype=np.int64)  # passes (virtual)
    if guess is not None:
        cols = np.arange(n_c + 1)
        for probe in (np.clip(guess, 0, n_t + 1), np.clip(guess, 0, n_t + 1) - 1):
            sel = np.flatnonzero((probe > lo) & (probe < hi))
            if sel.size:
                ok = np.asarray(passes(probe[sel], cols[sel]), dtype=bool)
                hi[sel[ok]] = probe[sel[ok]]
                lo[sel[~ok]] = probe[sel[~ok]]
    while True:
        open_ = np.flatnonzero(hi - lo > 1)
        if open_.size == 0:
            return hi
        mid = (lo[open_] + hi[open_]) // 2
        ok = np.asarray(passes(mid, open_), dtype=bool)
        hi[open_[ok]] = mid[ok]
        lo[open_[~ok]] = mid[~ok]


def _z_parts(spec: TestSpec, n_t: int, n_c: int, pt, pc):
    """Numerator and variance of the two-arm z statistic at observed rates ``pt``, ``pc``."""
    d0 = spec.null_shift
    if spec.test == "unpooled_z":
        var = pt * (1.0 - pt) / n_t + pc * (1.0 - pc) / n_c
    elif d0 == 0.0:
        pooled = (n_t * pt + n_c * pc) / (n_t + n_c)
        var = pooled * (1.0 - pooled) * (1.0 / n_t + 1.0 / n_c)
    else:
        rt, rc = restricted_rates(pt, pc, n_t, n_c, d0)
        var = rt * (1.0 - rt) / n_t + rc * (1.0 - rc) / n_c
    cc = 0.5 * (1.0 / n_t + 1.0 / n_c) if spec.continuity else 0.0
    return spec.sign * (pt - pc - d0) - cc, var


def _z_rejects(spec: TestSpec, n_t: int, n_c: int, x_t, x_c, critical: float) -> np.ndarray:
    """Whether the z-type test rejects at tables ``(x_t, x_c)`` (broadcast together).

    The pooled statistics do not reject where their variance is 0 (no responders or all
    responders: no difference either); the unpooled statistic with variance 0 is
    ``+-infinity`` by the sign of its numerator (0/0 does not reject).
    """
    num, var = _z_parts(spec, n_t, n_c, x_t / n_t, x_c / n_c)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = num / np.sqrt(var)
    if spec.test == "unpooled_z":
        return z >= critical
    return (var > 0.0) & (z >= critical)


def two_arm_z(spec: TestSpec, x_t, x_c, n_t: int, n_c: int) -> np.ndarray:
    """z statistic of a two-arm test at tables ``(x_t, x_c)``, in the favourable direction.

    ``"z"`` / ``"chi_square"``: pooled variance (Farrington-Manning restricted rates with a
    margin); ``"unpooled_z"``: the Wald statistic with the unpooled variance ``p_t (1 - p_t)
    / n_t + p_c (1 - p_c) / n_c``. With a zero variance the value is ``+-inf`` (``nan`` for
    0/0); see :func:`success_region` for how such tables are decided.

    Examples
    --------
    >>> spec = TestSpec("unpooled_z", 0.025, +1.0, "difference", True)
    >>> round(float(two_arm_z(spec, 63, 43, 78, 77)), 2)  # 0.249 / 0.0721
    3.46
    """
    owner = "two_arm_z"
    n_t = check_int(n_t, "n_t", owner, low=1)
    n_c = check_int(n_c, "n_c", owner, low=1)
    if not isinstance(spec, TestSpec) or not spec.two_arm:
        raise AssuranceInputError(
            f"The 'spec' parameter of {owner} must be a two-arm TestSpec. Got {spec!r} instead.")
    check_choice(spec.test, "spec.test", owner, ["z", "unpooled_z", "chi_square"])
    x_t, x_c = np.broadcast_arrays(np.asarray(x_t), np.asarray(x_c))
    for name, x, n in (("x_t", x_t, n_t), ("x_c", x_c, n_c)):
        if not np.issubdtype(x.dtype, np.integer) or x.min(initial=0) < 0 \
                or x.max(initial=0) > n:
            raise AssuranceInputError(
                f"The '{name}' parameter of {owner} must be whole numbers of responders "
                f"from 0 to {n}. Got {x.tolist()!r} instead.")
    num, var = _z_parts(spec, n_t, n_c, x_t / n_t, x_c / n_c)
    with np.errstate(divide="ignore", invalid="ignore"):
        return num / np.sqrt(var)


def _two_arm_z(spec: TestSpec, n_t: int, n_c: int) -> np.ndarray:
    """Dense decisions of a z-type test over every table (used where no staircase is known)."""
    x_t = np.arange(n_t + 1)[:, None]
    x_c = np.arange(n_c + 1)[None, :]
    return _z_rejects(spec, n_t, n_c, x_t, x_c, spec.critical_z)


def fisher_p_values(n_t: int, n_c: int, sign: float) -> np.ndarray:
    """One-sided Fisher exact p-values for every table, shape ``(n_t + 1, n_c + 1)``.

    Given the total number of responders ``s``, ``x_t`` is hypergeometric; the p-value in
    the favourable direction is ``P(X_t >= x_t | s)`` (``<=`` when lower rates are better).
    The pmf comes from log-gamma functions on an ``(x_t, s)`` grid and the tails from
    cumulative sums along ``x_t``. (The success regions use :func:`fisher_critical_counts`,
    which needs only a band of that grid.)

    Examples
    --------
    >>> p = fisher_p_values(3, 3, +1.0)
    >>> round(float(p[3, 0]), 4)  # 3/3 versus 0/3: 1 / C(6, 3)
    0.05
    """
    n = n_t + n_c
    xt = np.arange(n_t + 1)[:, None]
    s = np.arange(n + 1)[None, :]
    xc = s - xt
    valid = (xc >= 0) & (xc <= n_c)
    log_pmf = (_log_comb(n_t)[xt] + _log_comb(n_c)[np.clip(xc, 0, n_c)]
               - _log_comb(n)[s])
    pmf = np.where(valid, np.exp(log_pmf), 0.0)
    tail = np.cumsum(pmf[::-1], axis=0)[::-1] if sign > 0 else np.cumsum(pmf, axis=0)
    return tail[xt, xt + np.arange(n_c + 1)[None, :]]


#: tail mass a banded Fisher sum may leave out, relative to the level (decisions can then
#: differ from the full sum only for p-values within this relative distance of the level,
#: which the P_VALUE_TOLERANCE guard already treats as ties)
FISHER_BAND_SLACK = 1e-14


def fisher_critical_counts(n_t: int, n_c: int, cutoff: float) -> np.ndarray:
    """For every total ``s = 0..n_t + n_c``: the smallest ``x_t`` whose one-sided Fisher
    p-value ``P(X_t >= x_t | s)`` is at most ``cutoff``.

    ``min(n_t, s) + 1`` when no table with that total rejects. Fisher's test rejects at
    ``(x_t, x_c)`` iff ``x_t >= k[x_t + x_c]``; when lower rates are better, iff ``n_t - x_t
    >= k[n_t + n_c - x_t - x_c]`` (the responders and non-responders swap roles, and the
    non-responders follow the same hypergeometric law).

    Notes
    -----
    Given ``s``, ``X_t`` is hypergeometric with mean ``m = s n_t / N`` and standard deviation
    ``d = sqrt(s (N - s) n_t n_c / (N^2 (N - 1)))``. The tail is summed from the top down
    over a band of ``x_t`` that starts 2 SD below the normal critical value (at ``m + max(z
    - 2, 0) d - 1``, ``z = z_{1-cutoff}``) and is ``(y + 1 - max(z - 2, 0)) max(d) + 12``
    wide, ``y = -Phi^{-1}(FISHER_BAND_SLACK * cutoff)``: one band per total, vectorised,
    about ``10 N max(d)`` terms instead of ``N n_t``. The pmf is log-concave, so beyond the
    band (past the mode) the ratio of successive terms falls and the mass left out is at
    most ``f / (1 - r)`` (``f`` the first term left out, ``r`` its ratio to the last term
    kept); the band is used only if that bound is below ``FISHER_BAND_SLACK * cutoff`` for
    every total and the band starts where the tail still exceeds the cutoff, otherwise the
    whole support of every total is summed (at most ``(N + 1)(min(n_t, n_c) + 1)`` terms).

    Examples
    --------
    >>> fisher_critical_counts(3, 3, 0.05).tolist()  # only 3/3 versus 0/3 (s = 3) rejects
    [1, 2, 3, 3, 4, 4, 4]
    """
    n = n_t + n_c
    s = np.arange(n + 1)
    lo_s = np.maximum(s - n_c, 0)
    hi_s = np.minimum(s, n_t)
    lc_t, lc_c, lc_n = _log_comb(n_t), _log_comb(n_c), _log_comb(n)
    sd = np.sqrt(s * (n - s) * (n_t * n_c / (n * n * max(n - 1, 1))))
    lift = max(float(-special.ndtri(cutoff)) - 2.0, 0.0)  # start 2 SD below the critical
    top = float(-special.ndtri(FISHER_BAND_SLACK * cutoff)) + 1.0
    width = int(math.ceil((top - lift) * float(sd.max()))) + 12

    def band(start: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """pmf at ``start + width`` and ``start + width - 1``, and the tails from the band's
        top down (``tail[:, -1]`` at ``x = start``). The log pmf comes from sliding windows
        of the log binomial coefficients, -inf beyond the support (pmf 0 there)."""
        pad = np.full(width + 1, -np.inf)
        win_t = sliding_window_view(np.concatenate((lc_t, pad)), width + 1)[start]
        win_c = sliding_window_view(np.concatenate((lc_c[::-1], pad)),
                                    width + 1)[n_c - s + start]  # lc_c[s - start - j]
        pmf = np.exp((win_t + win_c - lc_n[:, None])[:, ::-1])
        return pmf[:, 0], pmf[:, 1], np.cumsum(pmf[:, 1:], axis=1)

    support = min(n_t, n_c) + 1  # hi_s - lo_s < support for every total
    if 2 * width < support:
        start = np.clip(np.floor(s * (n_t / n) + lift * sd).astype(np.int64) - 1, lo_s, hi_s)
        beyond, last, tail = band(start, width)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(last > 0.0, beyond / last, 0.0)
            left_out = np.where(beyond > 0.0, beyond / (1.0 - ratio), 0.0)
        good = ((ratio < 1.0) & (left_out <= FISHER_BAND_SLACK * cutoff)
                & ((start == lo_s) | (tail[:, -1] > cutoff)))
        if good.all():
            return start + np.count_nonzero(tail > cutoff, axis=1)
    _, _, tail = band(lo_s, support)  # the whole support of every total
    return lo_s + np.count_nonzero(tail > cutoff, axis=1)


def _observed_benefit(spec: TestSpec, n_t: int, n_c: int) -> np.ndarray:
    pt = (np.arange(n_t + 1) / n_t)[:, None]
    pc = (np.arange(n_c + 1) / n_c)[None, :] if spec.two_arm else np.array([[spec.reference]])
    return spec.sign * natural_effect(pt, pc, spec.scale)


def _staircase_known(spec: TestSpec) -> bool:
    """Whether each control count's region is known to be one run from the top/bottom.

    True for two arms without a margin: Fisher's p-value falls as ``x_t`` rises (the
    hypergeometric law grows stochastically with the total); the pooled and unpooled z
    statistics, with or without the continuity correction, rise with ``x_t`` wherever they
    are positive (derivative in ``p_t`` proportional to ``pbar + p_c - 2 p_c pbar + cc w (1
    - 2 pbar)``, resp. ``p_t + p_c - 2 p_t p_c + cc (1 - 2 p_t)`` over ``2 n_t``, plus
    ``p_c (1 - p_c) / n_c``, both > 0 once ``p_t - p_c > cc``), so ``z >= z_{1-alpha} > 0``
    is an upper set. The observed effect rises with ``x_t`` on every scale. Mirror images
    when lower rates are better.
    """
    if not spec.two_arm or spec.null_shift != 0.0:
        return False
    return spec.test == "fisher_exact" or spec.critical_z > 0.0


def _staircase_region(spec: TestSpec, n_t: int, n_c: int) -> SuccessRegion:
    """One run per control count (see :func:`_staircase_known`), its end guessed
    (:func:`_staircase_guess`) and settled by :func:`_first_passing`; decisions are made by
    the same arithmetic as the dense grid."""
    upper = spec.sign > 0
    level = spec.alpha * (1.0 + P_VALUE_TOLERANCE)
    k = None
    if spec.test == "fisher_exact":
        k = fisher_critical_counts(n_t, n_c, level)
        n = n_t + n_c

        def test_passes(x_t, x_c):
            return x_t >= k[x_t + x_c] if upper else n_t - x_t >= k[n - x_t - x_c]
    else:
        critical = spec.critical_z

        def test_passes(x_t, x_c):
            return _z_rejects(spec, n_t, n_c, x_t, x_c, critical)

    def passes(rank, x_c):
        x_t = rank if upper else n_t - rank
        ok = test_passes(x_t, x_c)
        if spec.min_estimate is not None:
            observed = spec.sign * natural_effect(x_t / n_t, x_c / n_c, spec.scale)
            ok = ok & (observed >= spec.min_estimate)
        return ok

    guess = _staircase_guess(spec, n_t, n_c, k if spec.test == "fisher_exact" else None)
    first = _first_passing(passes, n_t, n_c, guess)
    if upper:
        return SuccessRegion.from_columns(n_t, first, np.full_like(first, n_t))
    return SuccessRegion.from_columns(n_t, np.zeros_like(first), n_t - first)


def _staircase_guess(spec: TestSpec, n_t: int, n_c: int, k: np.ndarray | None
                     ) -> np.ndarray:
    """First passing rank per control count, from the continuous boundary (a guess only:
    :func:`_first_passing` checks it with the exact decisions).

    Ranks count treatment responders from the favourable end (``x_t``, or ``n_t - x_t``
    when lower rates are better), and the control rate is read the same way (``q = x_c /
    n_c`` or ``1 - x_c / n_c``): the z statistics are unchanged by reading both arms from the
    other end. Fisher: the first total ``s`` with ``s - k(s) >= r_c``, less ``r_c``. z tests:
    the larger root in ``rho`` of ``(rho - q - cc)^2 = c^2 V(rho, q)``, a quadratic for the
    unpooled variance ``V = rho (1 - rho) / n_t + q (1 - q) / n_c`` and the pooled ``V =
    pbar (1 - pbar) (1/n_t + 1/n_c)``, ``pbar = w rho + (1 - w) q``; then ``ceil(n_t rho)``.
    """
    upper = spec.sign > 0
    cols = np.arange(n_c + 1)
    r_c = cols if upper else n_c - cols
    if k is not None:
        level = np.arange(n_t + n_c + 1) - k
        guess = np.searchsorted(level, r_c, side="left") - r_c
    else:
        c = spec.critical_z
        q = r_c / n_c
        a = q + (0.5 * (1.0 / n_t + 1.0 / n_c) if spec.continuity else 0.0)
        if spec.test == "unpooled_z":
            kk = c * c / n_t
            qa, qb, qc = 1.0 + kk, 2.0 * a + kk, a * a - c * c * q * (1.0 - q) / n_c
        else:
            w = n_t / (n_t + n_c)
            u = (1.0 - w) * q
            cm = c * c * (1.0 / n_t + 1.0 / n_c)
            qa = 1.0 + cm * w * w
            qb = 2.0 * a + cm * w * (1.0 - 2.0 * u)
            qc = a * a - cm * u * (1.0 - u)
        with np.errstate(invalid="ignore"):
            rho = (qb + np.sqrt(qb * qb - 4.0 * qa * qc)) / (2.0 * qa)
        guess = np.where(np.isfinite(rho), np.ceil(np.clip(rho, 0.0, 1.0) * n_t), n_t + 1)
    if spec.min_estimate is not None:
        with np.errstate(divide="ignore", invalid="ignore"):
            bound = treatment_rate(spec.sign * spec.min_estimate, cols / n_c, spec.scale)
        bound = np.clip(np.nan_to_num(bound, nan=0.0 if upper else 1.0), 0.0, 1.0)
        needed = np.ceil(bound * n_t) if upper else n_t - np.floor(bound * n_t)
        guess = np.maximum(guess, needed)
    return guess.astype(np.int64)


def success_runs(spec: TestSpec | PosteriorSpec, n_t: int, n_c: int) -> SuccessRegion:
    """The success region as runs of treatment counts (:class:`SuccessRegion`).

    Same decisions as :func:`success_region`. Without a margin, a two-arm test's region is
    a staircase: one run per control count, whose end is guessed from the continuous
    boundary and confirmed by two exact decisions, or found by bisection on ``x_t`` where the
    guess misses (about ``2 (n_c + 1)`` tables decided instead of ``(n_t + 1)(n_c + 1)``;
    Fisher's test first needs its critical counts per total,
    :func:`fisher_critical_counts`). With a
    non-inferiority margin every table is decided and the runs read off. A posterior rule
    uses the staircase of :func:`posterior_region`.

    Examples
    --------
    >>> spec = TestSpec("unpooled_z", 0.025, +1.0, "difference", True)
    >>> success_runs(spec, 4, 2).runs()  # x_c = 0 needs x_t >= 2 (z = 2); x_c >= 1: never
    [(0, 2, 4)]
    """
    if isinstance(spec, PosteriorSpec):
        return posterior_runs(spec, n_t, n_c)
    if spec.two_arm and _staircase_known(spec):
        return _staircase_region(spec, n_t, n_c)
    return SuccessRegion.from_dense(_dense_region(spec, n_t, n_c))


def _dense_region(spec: TestSpec, n_t: int, n_c: int) -> np.ndarray:
    level = spec.alpha * (1.0 + P_VALUE_TOLERANCE)
    if spec.two_arm:
        if spec.test == "fisher_exact":
            reject = fisher_p_values(n_t, n_c, spec.sign) <= level
        else:
            reject = _two_arm_z(spec, n_t, n_c)
    else:
        if spec.test == "unpooled_z":
            raise AssuranceInputError(
                "The 'test' of a single-arm TestSpec must be 'z', 'chi_square' or "
                "'exact_binomial' ('unpooled_z' compares two arms). Got 'unpooled_z' instead.")
        p0 = spec.null_rate
        x = np.arange(n_t + 1)
        if spec.test == "exact_binomial":
            pmf = binomial_pmf(n_t, p0)[0]
            tail = np.cumsum(pmf[::-1])[::-1] if spec.sign > 0 else np.cumsum(pmf)
            reject = tail <= level
        else:
            cc = 0.5 / n_t if spec.continuity else 0.0
            z = (spec.sign * (x / n_t - p0) - cc) / math.sqrt(p0 * (1.0 - p0) / n_t)
            reject = z >= spec.critical_z
        reject = reject[:, None]
    if spec.min_estimate is not None:
        reject = reject & (_observed_benefit(spec, n_t, n_c) >= spec.min_estimate)
    return reject


def success_region(spec: TestSpec | PosteriorSpec, n_t: int, n_c: int) -> np.ndarray:
    """Boolean array over outcomes ``(x_t, x_c)``: True where the trial succeeds.

    Shape ``(n_t + 1, n_c + 1)``; a single-arm trial gives shape ``(n_t + 1, 1)``. The
    probabilities use the same region as runs (:func:`success_runs`); this dense form is for
    inspection and checks.

    Notes
    -----
    * ``"z"`` (two arms): pooled two-proportion z statistic ``(p_t - p_c) / sqrt(pbar (1 -
      pbar) (1/n_t + 1/n_c))`` in the favourable direction, success iff ``z >=
      z_{1-alpha}``; with a non-inferiority margin the numerator is shifted by the margin
      and the variance uses the rates restricted to the null (Farrington & Manning 1990);
      with continuity correction ``(1/n_t + 1/n_c) / 2`` is taken off the numerator.
      Tables with no variance (all or no responders) do not reject.
    * ``"unpooled_z"`` (two arms): the Wald statistic ``(p_t - p_c) / sqrt(p_t (1 - p_t) /
      n_t + p_c (1 - p_c) / n_c)``, margin and correction as for ``"z"``. A table whose
      variance is 0 (each arm all or no responders) has ``z = +-inf`` by the sign of the
      numerator: 10/10 versus 0/10 rejects, 0/10 versus 0/10 does not -- except with a
      margin, where the numerator is the margin and it does (the Wald test's known blind
      spot; its type I error, reported per size, shows it).
    * ``"chi_square"``: Pearson's chi-square statistic equals ``z^2`` (Yates-corrected:
      the corrected ``z`` squared), so a two-sided chi-square test at ``2 alpha`` with the
      result in the favourable direction rejects exactly where ``z >= z_{1-alpha}``.
    * ``"fisher_exact"``: one-sided conditional p-value <= alpha (:func:`fisher_p_values`,
      :func:`fisher_critical_counts`).
    * single arm: ``"z"`` / ``"chi_square"`` is the score test ``(p - p0) / sqrt(p0 (1 -
      p0) / n)``; ``"exact_binomial"`` is ``P(X >= x | p0) <= alpha`` (``scipy.stats.
      binomtest`` with the one-sided alternative).

    * a :class:`PosteriorSpec`: posterior probability at least the level
      (:func:`posterior_region`).

    Examples
    --------
    >>> spec = TestSpec("fisher_exact", 0.05, +1.0, "difference", True)
    >>> np.argwhere(success_region(spec, 3, 3)).tolist()  # only 3/3 versus 0/3 succeeds
    [[3, 0]]
    """
    return success_runs(spec, n_t, n_c).dense()


def normal_power(spec: TestSpec | PosteriorSpec, p_t, p_c, n_t: float, n_c: float
                 ) -> np.ndarray:
    """Normal-approximation probability of success at true rates ``p_t``, ``p_c``.

    The observed difference ``D = sign (p_t_hat - p_c_hat)`` is taken as normal with the
    variance at the true rates, ``se1^2 = p_t q_t / n_t + p_c q_c / n_c``; the test rejects
    when ``D >= sign delta0 + cc + z_{1-alpha} se0`` with ``se0`` the standard error under
    the null (pooled rate, or the Farrington-Manning restricted rates with a margin; for the
    unpooled z test the observed rates' standard error, taken at the true rates: ``se0 =
    se1``), so

    ``power = Phi((sign (p_t - p_c) - sign delta0 - cc - z se0) / se1)``

    (Fleiss, Tytun & Ury 1980). ``cc = (1/n_t + 1/n_c)/2`` with continuity correction; the
    Fisher exact test is approximated by the continuity-corrected z test. Single arm:
    ``se0^2 = p0 q0 / n``, ``se1^2 = p q / n``, ``cc = 1/(2n)`` (the exact binomial test is
    approximated with the correction). A minimum observed effect on a ratio scale is
    converted to a difference at the true control (or reference) rate. A
    :class:`PosteriorSpec` goes to :func:`posterior_normal_power`.

    Examples
    --------
    >>> spec = TestSpec("z", 0.025, +1.0, "difference", True)
    >>> round(float(normal_power(spec, 0.4, 0.2, 82, 82)), 4)  # Fleiss et al.: n = 82
    0.8038
    """
    if isinstance(spec, PosteriorSpec):
        return posterior_normal_power(spec, p_t, p_c, n_t, n_c)
    p_t, p_c = np.broadcast_arrays(np.asarray(p_t, dtype=float), np.asarray(p_c, dtype=float))
    z = spec.critical_z
    exact_test = spec.test in ("fisher_exact", "exact_binomial")
    cc_on = spec.continuity or exact_test
    if spec.two_arm:
        d0 = spec.null_shift
        se1 = np.sqrt(p_t * (1.0 - p_t) / n_t + p_c * (1.0 - p_c) / n_c)
        if spec.test == "unpooled_z":
            se0 = se1
        elif d0 == 0.0:
            pooled = (n_t * p_t + n_c * p_c) / (n_t + n_c)
            se0 = np.sqrt(pooled * (1.0 - pooled) * (1.0 / n_t + 1.0 / n_c))
        else:
            rt, rc = restricted_rates(p_t, p_c, n_t, n_c, d0)
            se0 = np.sqrt(rt * (1.0 - rt) / n_t + rc * (1.0 - rc) / n_c)
        cc = 0.5 * (1.0 / n_t + 1.0 / n_c) if cc_on else 0.0
        ref = p_c
        threshold = spec.sign * d0 + cc + z * se0
    else:
        ref = np.full_like(p_t, spec.reference)
        p0 = spec.null_rate
        se0 = math.sqrt(p0 * (1.0 - p0) / n_t)
        se1 = np.sqrt(p_t * (1.0 - p_t) / n_t)
        cc = 0.5 / n_t if cc_on else 0.0
        threshold = spec.sign * (p0 - spec.reference) + cc + z * se0
    if spec.min_estimate is not None:
        needed = treatment_rate(spec.sign * spec.min_estimate, ref, spec.scale)
        threshold = np.maximum(threshold, spec.sign * (needed - ref))
    gap = spec.sign * (p_t - ref) - threshold
    with np.errstate(divide="ignore", invalid="ignore"):
        power = special.ndtr(gap / se1)
    return np.where(se1 > 0.0, power, (gap >= 0.0).astype(float))


# ------------------------------------------------------------------------------------------
# posterior-probability rules with beta analysis priors
# ------------------------------------------------------------------------------------------
#: Gauss-Legendre nodes (after the smoothing substitution) for one posterior probability;
#: observed error against ``scipy.integrate.quad`` below 1e-10 for arms of 10 to 1000
POSTERIOR_NODES = 64
#: posterior probabilities within this distance below the level count as reaching it
#: (rounding guard: an exactly attained level succeeds)
POSTERIOR_TOLERANCE = 1e-12


@dataclass(frozen=True)
class PosteriorSpec:
    """A posterior-probability rule on the response rates, as a "test" for the enumeration.

    Success iff ``P(benefit > beyond | data) >= level``, the posterior coming from the beta
    analysis priors ``treatment`` and ``control`` (:class:`RateArm`; a fixed control rate
    for a single arm's reference, where ``n_c = 0``). ``beyond`` is on the benefit scale:
    the natural effect must lie above ``sign * beyond`` (below it when ``sign < 0``).

    Examples
    --------
    >>> spec = PosteriorSpec(0.9, 0.0, +1.0, "difference", True, RateArm.beta(1, 1),
    ...                      RateArm.beta(1, 1))
    >>> spec.boundary, spec.above
    (0.0, True)
    """

    __test__ = False  # not a pytest class

    level: float
    beyond: float
    sign: float
    scale: str
    two_arm: bool
    treatment: RateArm
    control: RateArm
    nodes: int = POSTERIOR_NODES

    @property
    def boundary(self) -> float:
        """The natural effect the posterior probability is about (``sign * beyond``)."""
        return float(self.sign * self.beyond) + 0.0

    @property
    def above(self) -> bool:
        """True when success needs the natural effect above the boundary (higher better)."""
        return self.sign > 0

    @property
    def reference(self) -> float | None:
        """Single arm: the fixed reference rate."""
        return None if self.two_arm else self.control.value


def _posterior_params(arm: RateArm, n: int) -> tuple[np.ndarray, np.ndarray]:
    x = np.arange(n + 1, dtype=float)
    return arm.a + x, arm.b + n - x


def _beta_sd(a, b):
    s = a + b
    return np.sqrt(a * b / (s * s * (s + 1.0)))


class _PosteriorGrid:
    """``P(benefit > beyond | x_t, x_c)`` for any tables of one pair of arm sizes.

    The probability is ``E_outer[P(inner rate on the favourable side of the boundary |
    outer rate)]`` over the posterior of the *outer* arm, chosen per table as the arm whose
    posterior is narrower (a fixed arm always), so that the inner posterior's distribution
    function is smooth on the node spacing. Over the outer rates where the boundary rate of
    the inner arm lies in (0, 1) the expectation is Gauss-Legendre on the outer posterior's
    probability scale (smoothed, :func:`smoothed_rule`); elsewhere the inner probability is
    0 or 1 and the outer posterior mass is exact. Nodes per outer count are computed once.
    """

    def __init__(self, spec: PosteriorSpec, n_t: int, n_c: int):
        if spec.treatment.fixed and spec.control.fixed:
            raise AssuranceInputError(
                "The 'treatment' and 'control' parameters of PosteriorSpec must not both be "
                "fixed rates: at least one arm needs a beta analysis prior. Got "
                f"{spec.treatment.describe()!r} and {spec.control.describe()!r} instead.")
        self.spec, self.n_t, self.n_c = spec, n_t, n_c
        self.post = {"treatment": None if spec.treatment.fixed
                     else _posterior_params(spec.treatment, n_t),
                     "control": None if spec.control.fixed
                     else _posterior_params(spec.control, n_c)}
        self._outer: dict[str, dict[str, Any]] = {}

    # -- the outer arm's nodes, one row per count (computed when first needed) -----------
    def _outer_setup(self, arm_name: str) -> dict[str, Any]:
        spec = self.spec
        x0, scale = spec.boundary, spec.scale
        outer_control = arm_name == "control"
        arm = spec.control if outer_control else spec.treatment
        mapping = treatment_rate if outer_control else control_rate
        finder = control_breakpoints if outer_control else treatment_breakpoints
        edges = [0.0, *sorted(finder(x0, scale)), 1.0]
        # the one stretch of outer rates where the inner boundary rate lies in (0, 1); the
        # boundary rises with the outer rate, so below it the inner rate is "beyond 0" and
        # above it "beyond 1"
        lo, hi = 0.0, 0.0
        for left, right in zip(edges[:-1], edges[1:], strict=True):
            inner = float(mapping(x0, 0.5 * (left + right), scale))
            if 0.0 < inner < 1.0:
                lo, hi = left, right
            elif inner <= 0.0:
                lo = hi = right
        # inner probability where the boundary rate is 0 (low) or 1 (high)
        if outer_control:  # favourable: p_t above (below) h(q)
            low, high = (1.0, 0.0) if spec.above else (0.0, 1.0)
        else:  # favourable: p_c below (above) g(r)
            low, high = (0.0, 1.0) if spec.above else (1.0, 0.0)
        if arm.fixed:
            inner = float(mapping(x0, arm.value, scale))
            return {"fixed": True, "rates": np.array([[min(max(inner, 0.0), 1.0)]]),
                    "weights": np.array([[1.0]]), "const": np.array([0.0])}
        rows, k = self.post[arm_name][0].size, spec.nodes
        return {"fixed": False, "mapping": mapping, "lo": lo, "hi": hi, "low": low,
                "high": high, "done": np.zeros(rows, dtype=bool),
                "rates": np.empty((rows, k)), "weights": np.empty((rows, k)),
                "const": np.empty(rows)}

    def _outer_rows(self, arm_name: str, rows: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(inner boundary rates, weights, constant part) for outer counts ``rows``."""
        box = self._outer.get(arm_name)
        if box is None:
            box = self._outer[arm_name] = self._outer_setup(arm_name)
        if box["fixed"]:
            rows = np.zeros_like(rows)
        else:
            new = np.unique(rows[~box["done"][rows]])
            if new.size:
                a, b = (p[new] for p in self.post[arm_name])
                v_lo = special.betainc(a, b, box["lo"])
                v_hi = special.betainc(a, b, box["hi"])
                width = np.maximum(v_hi - v_lo, 0.0)[:, None]
                t, w = smoothed_rule(self.spec.nodes)
                q = special.betaincinv(a[:, None], b[:, None], v_lo[:, None] + width * t)
                box["rates"][new] = np.clip(box["mapping"](self.spec.boundary, q,
                                                           self.spec.scale), 0.0, 1.0)
                box["weights"][new] = width * w
                box["const"][new] = v_lo * box["low"] + (1.0 - v_hi) * box["high"]
                box["done"][new] = True
        return box["rates"][rows], box["weights"][rows], box["const"][rows]

    def _inner(self, arm_name: str, counts: np.ndarray, rates: np.ndarray) -> np.ndarray:
        """P(inner rate on the favourable side of ``rates`` | inner count)."""
        a, b = self.post[arm_name]
        a, b = a[counts][:, None], b[counts][:, None]
        below = arm_name == "control"  # favourable: p_c below g (higher better)
        if not self.spec.above:
            below = not below
        return special.betainc(a, b, rates) if below else special.betaincc(a, b, rates)

    def prob(self, x_t, x_c) -> np.ndarray:
        """Posterior probabilities for arrays of counts (broadcast together)."""
        x_t, x_c = np.broadcast_arrays(np.asarray(x_t, dtype=np.int64),
                                       np.asarray(x_c, dtype=np.int64))
        shape = x_t.shape
        x_t, x_c = x_t.ravel(), x_c.ravel()
        spec = self.spec
        if spec.control.fixed:
            outer_control = np.ones(x_t.shape, dtype=bool)
        elif spec.treatment.fixed:
            outer_control = np.zeros(x_t.shape, dtype=bool)
        else:
            sd_t = _beta_sd(*(p[x_t] for p in self.post["treatment"]))
            sd_c = _beta_sd(*(p[x_c] for p in self.post["control"]))
            outer_control = sd_c <= sd_t
        out = np.empty(x_t.shape)
        for flag, outer, inner, xo, xi in ((True, "control", "treatment", x_c, x_t),
                                           (False, "treatment", "control", x_t, x_c)):
            sel = outer_control == flag
            if not sel.any():
                continue
            rates, weights, const = self._outer_rows(outer, xo[sel])
            inner_p = self._inner(inner, xi[sel], rates)
            out[sel] = const + np.sum(weights * inner_p, axis=1)
        return np.clip(out, 0.0, 1.0).reshape(shape)


def posterior_probabilities(spec: PosteriorSpec, n_t: int, n_c: int) -> np.ndarray:
    """``P(benefit > beyond | x_t, x_c)`` for every outcome, shape ``(n_t + 1, n_c + 1)``.

    Single arm: ``n_c = 0`` and shape ``(n_t + 1, 1)``, the closed form
    ``P(p_t > h | x) = 1 - I_h(a + x, b + n - x)`` with ``h`` the treatment rate at the
    boundary effect (``I`` the regularised incomplete beta function).

    Notes
    -----
    Two arms, posteriors ``p_t | x_t ~ Beta(a_t + x_t, b_t + n_t - x_t)`` and likewise for
    control, independent. With ``h(q)`` the treatment rate at which the natural effect
    equals the boundary when the control rate is ``q``,

    ``P(p_t > h(p_c) | x) = int f_c(q | x_c) (1 - I_{h(q)}(a_t + x_t, b_t + n_t - x_t)) dq``

    (or the same over the treatment posterior with the control distribution function,
    whichever posterior is narrower), by Gauss-Legendre on the outer posterior's probability
    scale; see :class:`PosteriorSpec`.

    Examples
    --------
    >>> spec = PosteriorSpec(0.9, 0.0, +1.0, "difference", False, RateArm.beta(1, 1),
    ...                      RateArm.fixed_at(0.5))
    >>> np.round(posterior_probabilities(spec, 2, 0)[:, 0], 4)  # Beta(1 + x, 3 - x) > 0.5
    array([0.125, 0.5  , 0.875])
    """
    n_c = n_c if spec.two_arm else 0
    grid = _PosteriorGrid(spec, n_t, n_c)
    x_t = np.arange(n_t + 1)[:, None]
    x_c = np.arange(n_c + 1)[None, :]
    return grid.prob(x_t, x_c)


def posterior_region(spec: PosteriorSpec, n_t: int, n_c: int) -> np.ndarray:
    """Success region of a posterior-probability rule, shape ``(n_t + 1, n_c + 1)``.

    The posterior probability rises with ``x_t`` and falls with ``x_c`` when higher rates
    are better (the beta posterior grows stochastically with the count); so for each
    ``x_c`` the region is ``x_t >= t(x_c)`` (``x_t <= t(x_c)`` when lower is better), and
    ``t(x_c)`` is found by bisection over ``x_t`` inside the bracket that the monotone
    staircase ``t`` gives from already solved neighbours (:func:`_first_passing_rank`):
    at most ``(n_c + 1) log2(n_t + 2)`` tables, in practice about ``2 (n_c + 1)``, are
    evaluated instead of all ``(n_t + 1)(n_c + 1)``.

    Examples
    --------
    >>> spec = PosteriorSpec(0.975, 0.0, +1.0, "difference", True, RateArm.beta(1, 1),
    ...                      RateArm.beta(1, 1))
    >>> region = posterior_region(spec, 10, 10)
    >>> bool(region[10, 4]), bool(region[6, 4])  # 10/10 vs 4/10 succeeds, 6/10 does not
    (True, False)
    """
    return posterior_runs(spec, n_t, n_c).dense()


def posterior_runs(spec: PosteriorSpec, n_t: int, n_c: int) -> SuccessRegion:
    """Success region of a posterior-probability rule as runs (:class:`SuccessRegion`).

    The same staircase as :func:`posterior_region`, kept as one run per control count.

    Examples
    --------
    >>> spec = PosteriorSpec(0.9, 0.0, +1.0, "difference", True, RateArm.beta(1, 1),
    ...                      RateArm.beta(1, 1))
    >>> posterior_runs(spec, 3, 1).runs()  # only 3/3 versus 0/1: P(p_t > p_c) = 0.93
    [(0, 3, 3)]
    """
    n_c = n_c if spec.two_arm else 0
    grid = _PosteriorGrid(spec, n_t, n_c)
    need = spec.level - POSTERIOR_TOLERANCE
    if not spec.two_arm:
        return SuccessRegion.from_dense(grid.prob(np.arange(n_t + 1), 0)[:, None] >= need)
    first = _first_passing_rank(grid, spec, n_t, n_c, need)
    if spec.above:
        return SuccessRegion.from_columns(n_t, first, np.full_like(first, n_t))
    return SuccessRegion.from_columns(n_t, np.zeros_like(first), n_t - first)


def _first_passing_rank(grid: _PosteriorGrid, spec: PosteriorSpec, n_t: int, n_c: int,
                        need: float) -> np.ndarray:
    """For every ``x_c`` the smallest rank of ``x_t`` that succeeds (``n_t + 1``: none).

    The rank is ``x_t`` (higher better) or ``n_t - x_t`` (lower better); success rises with
    it, and the first passing rank ``t`` never falls as ``x_c`` grows (as ``x_c`` falls,
    when lower is better: the staircase is walked in that order). Rounds solve the
    midpoints of the gaps between solved ``x_c`` values at once, each by bisection inside
    the bracket its solved neighbours give (``t(left) <= t(x_c) <= t(right)``), so most
    brackets are a step or two wide and about two tables per ``x_c`` are evaluated.
    """
    first = np.full(n_c + 1, -1)
    # solved positions, with virtual ends: t(-1) = 0 and t(n_c + 1) = n_t + 1
    solved_x = np.array([-1, n_c + 1])
    solved_t = np.array([0, n_t + 1])
    while solved_x.size < n_c + 3:
        left, right = solved_x[:-1], solved_x[1:]
        gap = right - left > 1
        x_c = (left[gap] + right[gap]) // 2
        lo = solved_t[:-1][gap] - 1  # fails
        hi = solved_t[1:][gap].copy()  # passes (n_t + 1 by convention)
        while True:
            open_ = hi - lo > 1
            if not open_.any():
                break
            mid = (lo[open_] + hi[open_]) // 2
            x_t, xc = (mid, x_c[open_]) if spec.above else (n_t - mid, n_c - x_c[open_])
            passes = grid.prob(x_t, xc) >= need
            hi[open_] = np.where(passes, mid, hi[open_])
            lo[open_] = np.where(passes, lo[open_], mid)
        first[x_c if spec.above else n_c - x_c] = hi
        order = np.argsort(np.concatenate([solved_x, x_c]), kind="stable")
        solved_x = np.concatenate([solved_x, x_c])[order]
        solved_t = np.concatenate([solved_t, hi])[order]
    return first


def _analysis_moments(arm: RateArm, count, n: float, scale: str):
    """Posterior mean and variance on the analysis scale, and the mean's slope in the count.

    ``count`` may be fractional (an expected count); a fixed arm gives its value, 0, 0.
    """
    if arm.fixed:
        v = arm.value
        g = {"difference": v, "risk_ratio": math.log(v),
             "odds_ratio": math.log(v / (1.0 - v))}[scale]
        zero = np.zeros_like(np.asarray(count, dtype=float))
        return zero + g, zero, zero
    a = arm.a + np.asarray(count, dtype=float)
    b = arm.b + n - np.asarray(count, dtype=float)
    s = a + b
    if scale == "difference":
        return a / s, a * b / (s * s * (s + 1.0)), np.full_like(a, 1.0 / s)
    if scale == "risk_ratio":
        return (special.digamma(a) - special.digamma(s),
                special.polygamma(1, a) - special.polygamma(1, s), special.polygamma(1, a))
    return (special.digamma(a) - special.digamma(b),
            special.polygamma(1, a) + special.polygamma(1, b),
            special.polygamma(1, a) + special.polygamma(1, b))


def posterior_normal_power(spec: PosteriorSpec, p_t, p_c, n_t: float, n_c: float
                           ) -> np.ndarray:
    """Normal-approximation probability that a posterior-probability rule succeeds.

    The posterior of the effect on the analysis scale is taken as normal with the beta
    posteriors' exact moments on that scale, ``M(x) = E[g(p_t) | x_t] - E[g(p_c) | x_c]``
    and ``S(x)^2`` the sum of the variances (``g`` the identity, log or logit: means
    ``a/(a+b)``, ``psi(a) - psi(a+b)``, ``psi(a) - psi(b)``), so the rule succeeds iff
    ``sign M(x) - beyond >= z_level S(x)``. The counts are taken as normal about their
    means ``n p``; ``M`` is linearised in them (slopes ``1/(a+b)``, ``psi'(a)``,
    ``psi'(a) + psi'(b)``) and ``S`` is evaluated at the expected counts:

    ``power = Phi((sign M(n p) - beyond - z_level S(n p)) / sqrt(sum_j (dM/dx_j)^2
    n_j p_j (1 - p_j)))``.

    With a flat analysis prior and large samples this is the Fleiss-type normal power of a
    one-sided test of ``benefit <= beyond`` at level ``1 - level`` with the unpooled
    variance (common practice). A single arm has the reference rate fixed (``p_c`` is not
    used).

    Examples
    --------
    >>> spec = PosteriorSpec(0.975, 0.0, +1.0, "difference", True, RateArm.beta(1, 1),
    ...                      RateArm.beta(1, 1))
    >>> round(float(posterior_normal_power(spec, 0.4, 0.2, 82, 82)), 2)
    0.81
    """
    p_t, p_c = np.broadcast_arrays(np.asarray(p_t, dtype=float), np.asarray(p_c, dtype=float))
    scale = spec.scale
    m_t, v_t, d_t = _analysis_moments(spec.treatment, n_t * p_t, n_t, scale)
    var_x = d_t**2 * n_t * p_t * (1.0 - p_t)
    if spec.two_arm:
        m_c, v_c, d_c = _analysis_moments(spec.control, n_c * p_c, n_c, scale)
        var_x = var_x + d_c**2 * n_c * p_c * (1.0 - p_c)
    else:
        m_c, v_c, _ = _analysis_moments(spec.control, 0.0, 0.0, scale)
    gap = spec.sign * (m_t - m_c) - spec.beyond \
        - float(special.ndtri(spec.level)) * np.sqrt(v_t + v_c)
    sd = np.sqrt(var_x)
    with np.errstate(divide="ignore", invalid="ignore"):
        power = special.ndtr(gap / sd)
    return np.where(sd > 0.0, power, (gap >= 0.0).astype(float))
