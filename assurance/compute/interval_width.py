"""Engines for posterior interval width: exact (conjugate) and by simulation.

Everything here works on plain numbers and numpy arrays; the public layer
(:mod:`assurance.precision`) validates input and builds results.

* **Beta posteriors** (one proportion): the shortest (highest-density) interval of given
  coverage, the best coverage an interval of given length can reach, and the equal-tailed
  versions, vectorised over arrays of beta parameters.
* **Binomial enumeration**: every outcome ``x = 0..n`` with its beta-binomial prior
  predictive probability, for many ``n`` at once.
* **Normal-gamma** (normal mean, unknown SD): the posterior is a t distribution whose scale
  depends on the data only through the posterior rate ``b_n``; its prior predictive
  distribution gives the width distribution by quadrature.
* **Posterior draws** (simulation engines): interval widths and fixed-length coverages from
  samples, with ``arviz.hdi`` for the sample-based highest-density interval, and Monte
  Carlo summaries with standard errors.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

__all__ = [
    "tanh_sinh_rule",
    "beta_shortest_interval",
    "beta_equal_tailed_interval",
    "beta_best_coverage",
    "beta_equal_tailed_coverage",
    "binomial_enumeration",
    "NormalGammaParams",
    "normal_gamma_width",
    "widths_from_draws",
    "coverage_from_draws",
    "summarise_simulated",
]

#: a last relative step in the interval length below this is taken and ends the iteration
_ACCEPT_STEP = 1e-6
_MAX_ITER = 200
#: Gauss-Legendre rule for beta masses over a window where the density is smooth
_GL_X, _GL_W = np.polynomial.legendre.leggauss(20)
#: the rule is used when both beta parameters are at least this and the window spans at
#: most _GL_SPAN posterior SDs (worst difference from scipy.special.betainc 6e-11 over
#: shapes 12..5000, about betainc's own accuracy; a 16-point rule reaches 1e-7 at 10 SDs)
_GL_MIN_SHAPE = 12.0
_GL_SPAN = 7.0
_CHUNK = 16384


# ------------------------------------------------------------------------------------------
# quadrature on the probability scale
# ------------------------------------------------------------------------------------------
def tanh_sinh_rule(step: float = 1 / 8, reach: float = 3.6
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Double-exponential (tanh-sinh) rule on (0, 1): nodes ``u``, ``1 - u`` and weights.

    ``u = 1 / (1 + exp(-pi sinh t))`` on an even grid of ``t``; endpoint singularities of
    the integrand (a quantile function near 0 or 1) cost little accuracy. Both ``u`` and
    ``1 - u`` are returned so that upper quantiles can be taken from the upper tail.

    Examples
    --------
    >>> u, v, w = tanh_sinh_rule()
    >>> round(float(w.sum()), 10), round(float(w @ u), 10)
    (1.0, 0.5)
    """
    t = np.arange(-reach, reach + step / 2, step)
    s = math.pi * np.sinh(t)
    u = special.expit(s)
    v = special.expit(-s)
    w = step * math.pi * np.cosh(t) * u * v
    return u, v, w / w.sum()


_TS_U, _TS_V, _TS_W = tanh_sinh_rule()
#: coarser rule for the smooth integrands of three-dimensional means (checked against the
#: fine rule in the tests)
_TS2_U, _TS2_V, _TS2_W = tanh_sinh_rule(1 / 5, 3.4)
_FOLD_X, _FOLD_W = np.polynomial.legendre.leggauss(40)
_FOLD_X, _FOLD_W = (_FOLD_X + 1) / 2, _FOLD_W / 2


def _gamma_nodes(shape: float, rate: float, u: np.ndarray = _TS_U, v: np.ndarray = _TS_V
                 ) -> np.ndarray:
    """Gamma(shape, rate) quantiles at probability nodes ``u`` (``v = 1 - u``); the upper
    half is taken from the upper tail, so nodes next to 1 stay finite and distinct."""
    low = u < 0.5
    return np.where(low, special.gammaincinv(shape, np.where(low, u, 0.5)),
                    special.gammainccinv(shape, np.where(low, 0.5, v))) / rate


def _chi2_nodes(df: float, u: np.ndarray = _TS_U, v: np.ndarray = _TS_V) -> np.ndarray:
    """Chi-square quantiles at probability nodes (as :func:`_gamma_nodes`)."""
    return _gamma_nodes(df / 2, 0.5, u, v)
_GH_X, _GH_W = special.roots_hermitenorm(24)
_GH_W = _GH_W / _GH_W.sum()


# ------------------------------------------------------------------------------------------
# beta posteriors
# ------------------------------------------------------------------------------------------
def _log_density(t: np.ndarray, a: np.ndarray, b: np.ndarray, lbeta: np.ndarray
                 ) -> np.ndarray:
    # xlogy: 0 * log(0) = 0, so a = 1 (or b = 1) has a finite density at the end
    return special.xlogy(a - 1, t) + special.xlog1py(b - 1, -t) - lbeta


def _dlog_density(t: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return (a - 1) / t - (b - 1) / (1 - t)


def _beta_sd(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    s = a + b
    return np.sqrt(a * b / (s * s * (s + 1)))


def _beta_mass(a: np.ndarray, b: np.ndarray, lo: np.ndarray, hi: np.ndarray,
               lbeta: np.ndarray, sd: np.ndarray) -> np.ndarray:
    """P(lo < p < hi) under Beta(a, b).

    Where the density is smooth over the window (both parameters >= 12, window within
    ``_GL_SPAN`` SDs) a 20-point Gauss-Legendre rule on the window is exact to rounding and
    several times faster than two incomplete beta functions; elsewhere
    ``scipy.special.betainc``.
    """
    out = np.empty(a.shape)
    smooth = (np.minimum(a, b) >= _GL_MIN_SHAPE) & (hi - lo <= _GL_SPAN * sd)
    rough = ~smooth
    if rough.any():
        out[rough] = (special.betainc(a[rough], b[rough], hi[rough])
                      - special.betainc(a[rough], b[rough], lo[rough]))
    idx = np.flatnonzero(smooth)
    for start in range(0, idx.size, _CHUNK):
        k = idx[start:start + _CHUNK]
        half = 0.5 * (hi[k] - lo[k])
        nodes = (0.5 * (hi[k] + lo[k]))[:, None] + half[:, None] * _GL_X
        logf = np.log(nodes)
        logf *= (a[k] - 1)[:, None]
        tail = np.log1p(-nodes)
        tail *= (b[k] - 1)[:, None]
        logf += tail
        logf -= lbeta[k][:, None]
        np.exp(logf, out=logf)
        out[k] = (logf @ _GL_W) * half
    return out


def _window_start(a: np.ndarray, b: np.ndarray, length: np.ndarray, mode: np.ndarray,
                  guess: np.ndarray) -> np.ndarray:
    """Lower end ``c`` of the window ``[c, c + length]`` with equal density at both ends.

    For a beta density with an interior mode (``a, b > 1``) the log density is concave, so
    ``h(c) = log f(c + length) - log f(c)`` falls from +inf to below 0 on
    ``[max(0, mode - length), min(mode, 1 - length)]``: safeguarded Newton on that bracket.
    """
    lo = np.maximum(mode - length, 0.0)
    hi = np.minimum(mode, 1.0 - length)
    c = np.clip(guess, lo + 1e-3 * (hi - lo), hi - 1e-3 * (hi - lo))
    out = c.copy()
    act = np.arange(a.size)
    with np.errstate(divide="ignore", invalid="ignore"):
        for _ in range(_MAX_ITER):
            aa, bb, ll, cc = a[act], b[act], length[act], c
            up = 1.0 - cc
            h = (aa - 1) * np.log1p(ll / cc) + (bb - 1) * np.log1p(-ll / up)
            dh = -(aa - 1) * ll / (cc * (cc + ll)) - (bb - 1) * ll / (up * (up - ll))
            pos = h > 0
            lo[act] = np.where(pos, cc, lo[act])
            hi[act] = np.where(pos, hi[act], cc)
            newton = cc - h / dh
            bad = ~((newton > lo[act]) & (newton < hi[act]))
            # |h| <= 1e-5: the Newton step leaves |h| ~ 1e-10 (quadratic convergence; the
            # window's mass is stationary in c, so its error is second order again) and is
            # taken as it is (rounding may put it on the bracket's edge); or a bracket a few
            # rounding units wide
            close = np.abs(h) <= 1e-5
            new = np.where(close | ~bad, newton, 0.5 * (lo[act] + hi[act]))
            done = close | (hi[act] - lo[act] <= 4 * np.spacing(hi[act]))
            out[act] = new
            act, c = act[~done], new[~done]
            if act.size == 0:
                break
    return out


def _interior_shortest(a: np.ndarray, b: np.ndarray, coverage: float
                       ) -> tuple[np.ndarray, np.ndarray]:
    """Shortest interval of given coverage for betas with ``a > 1`` and ``b > 1``.

    The best coverage of a window of length ``L``, ``C(L)``, is increasing and concave with
    ``C'(L) = f(upper)`` and ``C''(L) = f g_lo g_hi / (g_lo - g_hi)`` (``g`` the derivative
    of the log density at each end): Halley's iteration from the normal approximation
    ``2 z sd``, safeguarded by a bracket.
    """
    lbeta = special.betaln(a, b)
    sd = _beta_sd(a, b)
    mode = (a - 1) / (a + b - 2)
    # cubic correction of the window start around the mode
    inv_curv = 1.0 / ((a - 1) / mode**2 + (b - 1) / (1 - mode) ** 2)
    third = (2 * (a - 1) / mode**3 - 2 * (b - 1) / (1 - mode) ** 3) / 6
    z = special.ndtri(0.5 + coverage / 2)
    # a unimodal density is >= 1 on average over its shortest interval, so the length is
    # at most the coverage: bracket [0, coverage]
    length = np.clip(2 * z * sd, 1e-300, coverage)
    lo_b, hi_b = np.zeros(a.size), np.full(a.size, float(coverage))
    guess = mode - length / 2 + third * inv_curv * length**2 / 4
    out_lo, out_len = np.empty(a.size), np.empty(a.size)
    act = np.arange(a.size)
    for _ in range(_MAX_ITER):
        aa, bb, ll = a[act], b[act], length[act]
        c = _window_start(aa, bb, ll, mode[act], guess[act])
        mass = _beta_mass(aa, bb, c, c + ll, lbeta[act], sd[act])
        g_lo, g_hi = _dlog_density(c, aa, bb), _dlog_density(c + ll, aa, bb)
        # C'(L) is the (common) density at the ends; take it where it is least steep,
        # since an end in a thin layer next to 0 or 1 is located less accurately
        at = np.where(np.abs(g_lo) <= np.abs(g_hi), c, c + ll)
        f = np.exp(_log_density(at, aa, bb, lbeta[act]))
        r = mass - coverage
        lo_b[act] = np.where(r < 0, ll, lo_b[act])
        hi_b[act] = np.where(r < 0, hi_b[act], ll)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            curv = np.nan_to_num(g_lo * g_hi / (g_lo - g_hi))  # C'' / C' (0: Newton)
            dc = np.nan_to_num(g_hi / (g_lo - g_hi))  # d(start)/d(length) at the optimum
            newton = r / f
            step = newton / np.clip(1 - 0.5 * newton * curv, 0.5, 2.0)
        new = ll - step
        bad = ~np.isfinite(new) | (new <= lo_b[act]) | (new >= hi_b[act])
        new = np.where(r == 0, ll, np.where(bad, 0.5 * (lo_b[act] + hi_b[act]), new))
        # a Halley step of relative size 1e-6 leaves an error of order 1e-18 (cubic
        # convergence; 1e-12 where the clipped step is Newton's), so it is taken and the
        # iteration stops
        done = np.abs(new - ll) <= _ACCEPT_STEP * ll
        out_lo[act] = c + dc * (new - ll)
        out_len[act] = new
        length[act] = new
        guess[act] = c + dc * (new - ll)
        act = act[~done]
        if act.size == 0:
            break
    else:  # pragma: no cover - the bracket guarantees convergence
        raise RuntimeError("shortest beta interval did not converge")
    return out_lo, out_lo + out_len


def beta_shortest_interval(a: np.ndarray, b: np.ndarray, coverage: float
                           ) -> tuple[np.ndarray, np.ndarray]:
    """Shortest interval holding ``coverage`` of a Beta(a, b) distribution.

    For a unimodal density this is the highest-density interval: equal density at both
    ends. A monotone or U-shaped density has its shortest interval at one end of [0, 1].

    Examples
    --------
    >>> lo, hi = beta_shortest_interval(np.array([3.0]), np.array([9.0]), 0.95)
    >>> from scipy import stats
    >>> d = stats.beta(3, 9)
    >>> round(float(d.cdf(hi[0]) - d.cdf(lo[0])), 10), bool(abs(d.pdf(lo[0]) - d.pdf(hi[0])) < 1e-8)
    (0.95, True)
    """
    a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
    a, b = a.ravel(), b.ravel()
    lo, hi = np.empty(a.size), np.empty(a.size)
    inner = (a > 1) & (b > 1)
    if inner.any():
        lo[inner], hi[inner] = _interior_shortest(a[inner], b[inner], coverage)
    edge = ~inner
    if edge.any():
        left = special.betaincinv(a[edge], b[edge], coverage)
        right = special.betainccinv(a[edge], b[edge], coverage)
        use_left = left <= 1 - right
        lo[edge] = np.where(use_left, 0.0, right)
        hi[edge] = np.where(use_left, left, 1.0)
    return lo, hi


def beta_equal_tailed_interval(a: np.ndarray, b: np.ndarray, coverage: float
                               ) -> tuple[np.ndarray, np.ndarray]:
    """Interval with ``(1 - coverage) / 2`` of a Beta(a, b) distribution in each tail.

    Examples
    --------
    >>> lo, hi = beta_equal_tailed_interval(np.array([2.0]), np.array([2.0]), 0.5)
    >>> round(float(lo[0] + hi[0]), 12)
    1.0
    """
    a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
    tail = (1 - coverage) / 2
    return special.betaincinv(a, b, tail).ravel(), special.betainccinv(a, b, tail).ravel()


def beta_best_coverage(a: np.ndarray, b: np.ndarray, length: float) -> np.ndarray:
    """Largest probability a window of the given length can hold under Beta(a, b).

    Interior mode: the window with equal density at both ends (:func:`_window_start`);
    otherwise the better of the two windows at the ends of [0, 1].

    Examples
    --------
    >>> round(float(beta_best_coverage(np.array([1.0]), np.array([1.0]), 0.3)[0]), 12)
    0.3
    """
    a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
    a, b = a.ravel(), b.ravel()
    out = np.empty(a.size)
    if length >= 1:
        out[:] = 1.0
        return out
    inner = (a > 1) & (b > 1)
    if inner.any():
        ai, bi = a[inner], b[inner]
        mode = (ai - 1) / (ai + bi - 2)
        inv_curv = 1.0 / ((ai - 1) / mode**2 + (bi - 1) / (1 - mode) ** 2)
        third = (2 * (ai - 1) / mode**3 - 2 * (bi - 1) / (1 - mode) ** 3) / 6
        ll = np.full(ai.size, float(length))
        c = _window_start(ai, bi, ll, mode, mode - ll / 2 + third * inv_curv * ll**2 / 4)
        out[inner] = _beta_mass(ai, bi, c, c + ll, special.betaln(ai, bi), _beta_sd(ai, bi))
    edge = ~inner
    if edge.any():
        out[edge] = np.maximum(special.betainc(a[edge], b[edge], length),
                               special.betaincc(a[edge], b[edge], 1 - length))
    return np.clip(out, 0.0, 1.0)


def beta_equal_tailed_coverage(a: np.ndarray, b: np.ndarray, length: float) -> np.ndarray:
    """Probability inside the window of the given length with equal probability in each tail.

    Solves ``F(c) = 1 - F(c + length)`` for ``c`` in ``[0, 1 - length]`` (safeguarded
    Newton); the coverage is ``1 - 2 F(c)``.

    Examples
    --------
    >>> round(float(beta_equal_tailed_coverage(np.array([1.0]), np.array([1.0]), 0.4)[0]), 10)
    0.4
    """
    a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
    a, b = a.ravel(), b.ravel()
    if length >= 1:
        return np.ones(a.size)
    lbeta = special.betaln(a, b)
    lo, hi = np.zeros(a.size), np.full(a.size, 1.0 - length)
    c = np.clip(a / (a + b) - length / 2, 0.0, 1.0 - length)
    out = np.empty(a.size)
    act = np.arange(a.size)
    for _ in range(_MAX_ITER):
        aa, bb, cc = a[act], b[act], c
        low_tail = special.betainc(aa, bb, cc)
        high_tail = special.betaincc(aa, bb, cc + length)
        phi = low_tail - high_tail
        lo[act] = np.where(phi < 0, cc, lo[act])
        hi[act] = np.where(phi < 0, hi[act], cc)
        dens = (np.exp(_log_density(cc, aa, bb, lbeta[act]))
                + np.exp(_log_density(cc + length, aa, bb, lbeta[act])))
        with np.errstate(divide="ignore", invalid="ignore"):
            new = cc - phi / dens
        bad = ~np.isfinite(new) | (new <= lo[act]) | (new >= hi[act])
        new = np.where(bad, 0.5 * (lo[act] + hi[act]), new)
        done = (np.abs(phi) <= 1e-13) | (hi[act] - lo[act] <= 1e-15)
        out[act] = 1.0 - low_tail - high_tail
        act, c = act[~done], new[~done]
        if act.size == 0:
            break
    return np.clip(out, 0.0, 1.0)


# ------------------------------------------------------------------------------------------
# binomial enumeration
# ------------------------------------------------------------------------------------------
def _group_quantile(values: np.ndarray, weights: np.ndarray, group: np.ndarray,
                    starts: np.ndarray, q: float) -> np.ndarray:
    """Lower ``q`` quantile of each group's discrete distribution (smallest v with F >= q)."""
    order = np.lexsort((values, group))
    cum = np.cumsum(weights[order])
    base = np.concatenate([[0.0], cum[starts[1:] - 1]])
    within = cum - base[group[order]]
    ok = within >= q - 1e-12
    # last element of each group is always ok (its cumulative weight is 1)
    ok[np.r_[starts[1:] - 1, values.size - 1]] = True
    first = np.flatnonzero(ok)
    grp = group[order][first]
    keep = np.r_[True, grp[1:] != grp[:-1]]
    return values[order][first[keep]]


def binomial_enumeration(
    n: np.ndarray,
    *,
    prior: tuple[float, float],
    design: tuple[float, float] | float,
    coverage: float,
    length: float | None,
    interval: str,
    likely_share: float,
    widths: bool = True,
) -> dict[str, np.ndarray]:
    """Width and coverage summaries over all outcomes ``x = 0..n`` for each ``n``.

    Parameters
    ----------
    n
        1-D array of sample sizes (>= 1).
    prior
        ``(a, b)`` of the analysis prior Beta(a, b).
    design
        ``(a, b)`` of the design prior (beta-binomial prior predictive) or a fixed rate
        (binomial).
    coverage, length
        Interval coverage; fixed length for the coverage summaries (None: skip them).
    interval
        ``"highest_density"`` (shortest) or ``"equal_tailed"``.
    likely_share
        Share of data sets, most likely first, over which the modified worst outcome is
        taken. Outcomes of equal probability (to 1e-9 on the log scale) are taken
        longest interval first, so a tie never makes the criterion easier to meet.
    widths
        Compute the width summaries (False: coverages only, faster).

    Returns
    -------
    dict
        Per-n arrays ``width_mean``, ``width_median``, ``width_q90``, ``width_worst``,
        ``width_worst_likely`` and, with a length, ``coverage_mean``, ``coverage_worst``,
        ``coverage_worst_likely``.

    Examples
    --------
    >>> r = binomial_enumeration(np.array([1]), prior=(1.0, 1.0), design=(1.0, 1.0),
    ...                          coverage=0.5, length=None, interval="equal_tailed",
    ...                          likely_share=0.9)
    >>> # x = 0, 1 equally likely; Beta(1, 2) quartiles 1 - sqrt(3/4), 1 - sqrt(1/4)
    >>> round(float(r["width_mean"][0]), 6), round(math.sqrt(0.75) - 0.5, 6)
    (0.366025, 0.366025)
    """
    n = np.asarray(n, dtype=np.int64)
    sizes = n + 1
    group = np.repeat(np.arange(n.size), sizes)
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    x = np.arange(group.size) - starts[group]
    nn = n[group]
    # prior predictive probability of each outcome
    log_choose = special.gammaln(nn + 1) - special.gammaln(x + 1) - special.gammaln(nn - x + 1)
    if isinstance(design, tuple):
        da, db = design
        logp = log_choose + special.betaln(x + da, nn - x + db) - special.betaln(da, db)
    else:
        logp = log_choose + special.xlogy(x, design) + special.xlog1py(nn - x, -design)
    weight = np.exp(logp)
    weight /= np.add.reduceat(weight, starts)[group]
    a_post = prior[0] + x
    b_post = prior[1] + nn - x
    out: dict[str, np.ndarray] = {}
    # data sets ranked most likely first; ties broken longest interval first
    key = np.round(logp, 9)
    width = None
    if widths:
        if interval == "highest_density":
            lo, hi = beta_shortest_interval(a_post, b_post, coverage)
        else:
            lo, hi = beta_equal_tailed_interval(a_post, b_post, coverage)
        width = hi - lo
        out["width_mean"] = np.add.reduceat(weight * width, starts)
        out["width_median"] = _group_quantile(width, weight, group, starts, 0.5)
        out["width_q90"] = _group_quantile(width, weight, group, starts, 0.9)
        out["width_worst"] = np.maximum.reduceat(width, starts)
    tie = -width if width is not None else np.zeros(group.size)
    order = np.lexsort((tie, -key, group))
    cum = np.cumsum(weight[order])
    base = np.concatenate([[0.0], cum[starts[1:] - 1]])
    before = cum - weight[order] - base[group[order]]
    kept = before < likely_share - 1e-12
    if width is not None:
        w_sorted = np.where(kept, width[order], -np.inf)
        out["width_worst_likely"] = np.maximum.reduceat(w_sorted, starts)
    if length is not None:
        if interval == "highest_density":
            cov = beta_best_coverage(a_post, b_post, length)
        else:
            cov = beta_equal_tailed_coverage(a_post, b_post, length)
        out["coverage_mean"] = np.add.reduceat(weight * cov, starts)
        out["coverage_worst"] = np.minimum.reduceat(cov, starts)
        c_sorted = np.where(kept, cov[order], np.inf)
        out["coverage_worst_likely"] = np.minimum.reduceat(c_sorted, starts)
    return out


# ------------------------------------------------------------------------------------------
# normal mean, unknown SD: normal-gamma prior
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class NormalGammaParams:
    """``mean | tau ~ N(m, 1/(k tau))``, ``tau ~ Gamma(shape, rate)`` (plain numbers)."""

    m: float
    k: float
    shape: float
    rate: float


def _beta_form(n: np.ndarray, an: NormalGammaParams, de: NormalGammaParams
               ) -> tuple[bool, np.ndarray]:
    """Whether ``b_n = b0 + rate_d (1 - W) / W`` with ``W ~ Beta(shape_d, m/2)``; and m.

    True when the sample-mean term drops out (analysis ``k = 0``) or follows the same
    distribution as under the analysis prior (same prior mean and ``k``).
    """
    if an.k == 0:
        return True, n - 1.0
    if an.k == de.k and an.m == de.m:
        return True, n.astype(float)
    return False, n.astype(float)


def _t_factor(n: np.ndarray, an: NormalGammaParams, coverage: float
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Degrees of freedom, ``a_n k_n`` and the width factor ``2 t_q / sqrt(a_n k_n)``."""
    a_n = an.shape + n / 2
    k_n = an.k + n
    df = 2 * a_n
    tq = stats.t.ppf(0.5 + coverage / 2, df)
    return df, a_n * k_n, 2 * tq / np.sqrt(a_n * k_n)


def normal_gamma_width(
    n: np.ndarray,
    *,
    analysis: NormalGammaParams,
    design: NormalGammaParams,
    coverage: float,
    length: float | None,
    likely_share: float,
) -> dict[str, np.ndarray]:
    """Prior predictive summaries of the posterior t interval width for each ``n``.

    Notes
    -----
    With analysis prior NG(m0, k0, a0, b0) the posterior of the mean is
    ``t_{2 a_n}(m_n, b_n / (a_n k_n))``, ``a_n = a0 + n/2``, ``k_n = k0 + n`` and
    ``b_n = b0 + SS/2 + k0 n (ybar - m0)^2 / (2 (k0 + n))``; its central (= highest-density)
    interval has width ``w = 2 t_{2 a_n, (1+coverage)/2} sqrt(b_n / (a_n k_n))``. Under the
    design prior NG(m_d, k_d, a_d, b_d), given the precision ``tau``,

    ``b_n = b0 + (X + c (Z + delta sqrt(tau))^2) / (2 tau)``,

    ``X ~ chi2_{n-1}``, ``Z ~ N(0, 1)``, ``c = k0 n (1/n + 1/k_d) / (k0 + n)``,
    ``delta = (m_d - m0) / sqrt(1/n + 1/k_d)``, ``tau ~ Gamma(a_d, b_d)``. When ``c`` is 0
    or (``k_d = k0`` and ``m_d = m0``) 1, ``b_n = b0 + b_d (1 - W)/W`` with
    ``W ~ Beta(a_d, (n - 1 + c)/2)`` (Joseph & Belisle 1997): quantiles are explicit and
    means one-dimensional integrals; with ``b0 = b_d`` the mean width is the closed form
    ``factor sqrt(b_d) B(a_d - 1/2, m/2) / B(a_d, m/2)``. Otherwise means are product
    quadrature over (tau, Z, X) and quantiles solve the distribution function, computed
    with one of the three variables integrated in closed form.

    Examples
    --------
    >>> p = NormalGammaParams(m=0.0, k=1.0, shape=3.0, rate=3.0)
    >>> r = normal_gamma_width(np.array([10, 40]), analysis=p, design=p, coverage=0.95,
    ...                        length=None, likely_share=0.9)
    >>> bool(r["width_mean"][1] < r["width_mean"][0])
    True
    """
    n = np.asarray(n, dtype=np.int64)
    df, ak, factor = _t_factor(n, analysis, coverage)
    simple, m = _beta_form(n, analysis, design)
    if simple:
        res = _ng_beta_form(m, df, ak, factor, analysis, design, coverage, length,
                            likely_share)
    else:
        res = _ng_general(n, df, ak, factor, analysis, design, coverage, length,
                          likely_share)
    return res


def _ng_beta_form(m, df, ak, factor, an, de, coverage, length, likely_share):
    a_d, b_d, b0 = de.shape, de.rate, an.rate
    half_m = m / 2
    fixed = half_m <= 0  # n = 1 with the sample-mean term absent: b_n = b0

    def rate_at(w_lower: np.ndarray, w_upper: np.ndarray) -> np.ndarray:
        # b0 + b_d (1 - W) / W, with 1 - W taken from its own tail for accuracy
        return b0 + b_d * w_upper / w_lower

    def width_quantile(q: float) -> np.ndarray:
        safe = np.where(fixed, 1.0, half_m)
        w_lo = special.betaincinv(a_d, safe, 1 - q)
        w_hi = special.betainccinv(safe, a_d, 1 - q)  # 1 - W at the same point
        return np.where(fixed, factor * math.sqrt(b0), factor * np.sqrt(rate_at(w_lo, w_hi)))

    out = {
        "width_median": width_quantile(0.5),
        "width_q90": width_quantile(0.9),
        "width_worst_likely": width_quantile(likely_share),
    }
    safe = np.where(fixed, 1.0, half_m)
    # E[W^-1/2] for W ~ Beta(a_d, m/2)
    ratio = np.exp(special.gammaln(a_d - 0.5) + special.gammaln(a_d + safe)
                   - special.gammaln(a_d) - special.gammaln(a_d + safe - 0.5))
    if b0 == b_d:
        mean_root = math.sqrt(b_d) * ratio
    else:
        # E[W^-1/2 sqrt(b0 W + b_d (1 - W))] = E[W^-1/2] E'[sqrt(...)], W' ~ Beta(a_d - 1/2, m/2)
        w1 = special.betaincinv(a_d - 0.5, safe[:, None], _TS_U)
        w2 = special.betainccinv(safe[:, None], a_d - 0.5, _TS_U)  # 1 - W' at the same u
        inner = np.sqrt(b0 * w1 + b_d * w2) @ _TS_W
        mean_root = ratio * inner
    out["width_mean"] = np.where(fixed, factor * math.sqrt(b0), factor * mean_root)
    if length is not None:
        w_lo = special.betaincinv(a_d, safe[:, None], _TS_U)
        w_hi = special.betainccinv(safe[:, None], a_d, _TS_U)  # 1 - W at the same u
        rate = rate_at(w_lo, w_hi)
        cov = _t_coverage(length, rate, ak[:, None], df[:, None])
        cov_mean = cov @ _TS_W
        fixed_cov = _t_coverage(length, np.full(m.shape, b0), ak, df)
        out["coverage_mean"] = np.where(fixed, fixed_cov, cov_mean)
        worst = out["width_worst_likely"]
        out["coverage_worst_likely"] = _coverage_from_width(worst, factor, length, ak, df)
    return out


def _t_coverage(length: float, rate: np.ndarray, ak: np.ndarray, df: np.ndarray
                ) -> np.ndarray:
    """Posterior probability of the central window of ``length`` under the posterior t."""
    with np.errstate(divide="ignore"):
        half = 0.5 * length / np.sqrt(rate / ak)
    return 1.0 - 2.0 * special.stdtr(df, -half)


def _coverage_from_width(width: np.ndarray, factor: np.ndarray, length: float,
                         ak: np.ndarray, df: np.ndarray) -> np.ndarray:
    """Coverage of ``length`` for the data set whose interval has ``width`` (monotone map)."""
    return _t_coverage(length, (width / factor) ** 2, ak, df)


def _folded_normal_nodes(shift: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``t >= 0`` and weights for ``E[h((Z + shift)^2)]``, ``Z ~ N(0, 1)``.

    ``E[h((Z + m)^2)] = int_0^inf h(t^2) (phi(t - m) + phi(t + m)) dt``: on ``t >= 0`` the
    integrand is smooth (``h`` of a square has a kink at ``Z = -m`` that Gauss-Hermite
    nodes on Z resolve poorly), so a Gauss-Legendre rule on ``[max(0, |m| - 9), |m| + 9]``.
    Shapes: ``shift`` (T,) -> nodes and weights (T, K).
    """
    m = np.abs(shift)[:, None]
    lo = np.maximum(m - 9.0, 0.0)
    hi = m + 9.0
    t = lo + (hi - lo) * _FOLD_X
    w = (hi - lo) * _FOLD_W * (np.exp(-0.5 * (t - m) ** 2) + np.exp(-0.5 * (t + m) ** 2))
    return t, w / math.sqrt(2 * math.pi)


def _ng_general(n, df, ak, factor, an, de, coverage, length, likely_share):
    """Product quadrature over (tau, Z, X) and distribution-function inversion."""
    a_d, b_d, b0, k0 = de.shape, de.rate, an.rate, an.k
    out: dict[str, np.ndarray] = {}
    c = k0 * n * (1.0 / n + 1.0 / de.k) / (k0 + n)
    delta = (de.m - an.m) / np.sqrt(1.0 / n + 1.0 / de.k)
    # tau nodes: plain for coverages, size-biased Gamma(a_d - 1/2) for the mean root rate
    tau = _gamma_nodes(a_d, b_d, _TS2_U, _TS2_V)
    tau_sb = _gamma_nodes(a_d - 0.5, b_d, _TS2_U, _TS2_V)
    e_inv_root = math.sqrt(b_d) * math.exp(special.gammaln(a_d - 0.5) - special.gammaln(a_d))
    mean_root = np.empty(n.size)
    cov_mean = np.empty(n.size) if length is not None else None
    for i, ni in enumerate(n):
        if ni > 1:
            x = _chi2_nodes(ni - 1, _TS2_U, _TS2_V)[None, None, :]
            wx = _TS2_W
        else:
            x = np.zeros((1, 1, 1))
            wx = np.ones(1)
        # axes: (tau, folded Z, X)
        t_sb, w_sb = _folded_normal_nodes(delta[i] * np.sqrt(tau_sb))
        inner = np.sqrt(b0 * tau_sb[:, None, None] + 0.5 * (x + c[i] * t_sb[..., None] ** 2))
        mean_root[i] = e_inv_root * np.einsum("ijk,i,ij,k->", inner, _TS2_W, w_sb, wx)
        if cov_mean is not None:
            t_z, w_z = _folded_normal_nodes(delta[i] * np.sqrt(tau))
            rate = b0 + (x + c[i] * t_z[..., None] ** 2) / (2 * tau[:, None, None])
            cov = _t_coverage(length, rate, ak[i], df[i])
            cov_mean[i] = np.einsum("ijk,i,ij,k->", cov, _TS2_W, w_z, wx)
    out["width_mean"] = factor * mean_root
    levels = np.array([0.5, 0.9, likely_share])
    rate_q = np.array([_ng_rate_quantiles(levels, int(ni), an, de, float(c[i]), float(delta[i]))
                       for i, ni in enumerate(n)])
    for k, name in enumerate(("width_median", "width_q90", "width_worst_likely")):
        out[name] = factor * np.sqrt(rate_q[:, k])
    if cov_mean is not None:
        out["coverage_mean"] = cov_mean
        out["coverage_worst_likely"] = _t_coverage(
            length, (out["width_worst_likely"] / factor) ** 2, ak, df)
    return out


def _ng_rate_cdf(r: np.ndarray, ni: int, an, de, c: float, delta: float) -> np.ndarray:
    """P(b_n - b0 <= r) under the design prior, for an array of r > 0 (``c > 0``).

    ``b_n - b0 = (X + c (Z + delta s)^2) / (2 s^2)``, ``s = sqrt(tau)``. By the symmetry of
    Z only ``|delta|`` matters. The variable with the larger spread is integrated in closed
    form, so the remaining integrand is smooth: when X (``chi2_{n-1}``) is the more spread,
    nodes on tau and, given tau, on Z over the interval where the event is possible
    (tanh-sinh on its normal probability scale), with X's distribution function inside;
    otherwise nodes on X and Z, and tau's distribution function over the set of ``s``
    solving a quadratic inequality.
    """
    a_d, b_d = de.shape, de.rate
    d = abs(delta)
    r = np.asarray(r, dtype=float)
    tau_cv = 1 / math.sqrt(a_d)
    x_cv = math.sqrt(2 / (ni - 1)) if ni > 1 else math.inf
    if x_cv > tau_cv:
        tau = _gamma_nodes(a_d, b_d)[None, :]
        s = np.sqrt(tau)
        half = np.sqrt(2 * tau * r[:, None] / c)
        p_lo = special.ndtr(-d * s - half)
        p_hi = special.ndtr(-d * s + half)
        if ni == 1:  # X = 0: the event is |Z + delta s| <= half
            given_tau = p_hi - p_lo
        else:
            u = p_lo[..., None] + (p_hi - p_lo)[..., None] * _TS_U
            z = special.ndtri(u)
            bound = 2 * tau[..., None] * r[:, None, None] - c * (z + d * s[..., None]) ** 2
            inner = special.chdtr(ni - 1, np.maximum(bound, 0.0))
            given_tau = (p_hi - p_lo) * (inner @ _TS_W)
        return given_tau @ _TS_W
    # nodes on X and Z, tau ~ Gamma(a_d, b_d) in closed form: with s = sqrt(tau),
    # b_n - b0 <= r  <=>  A s^2 - B s - C >= 0, A = 2r - c d^2, B = 2 c d Z, C = X + c Z^2
    r = r[:, None, None]
    z = _GH_X[None, :, None]
    wz = _GH_W[None, :, None]
    x = _chi2_nodes(ni - 1)[None, None, :]
    wx = _TS_W[None, None, :]
    big_a = 2 * r - c * d**2
    big_b = 2 * c * d * z
    big_c = x + c * z**2

    def gamma_cdf(t: np.ndarray) -> np.ndarray:
        return special.gammainc(a_d, b_d * t)

    def gamma_sf(t: np.ndarray) -> np.ndarray:
        return special.gammaincc(a_d, b_d * t)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        disc = big_b**2 + 4 * big_a * big_c
        root = np.sqrt(np.maximum(disc, 0.0))
        # A > 0: s >= s_plus, written without cancellation
        s_plus = np.where(big_b >= 0, (big_b + root) / (2 * big_a),
                          2 * big_c / (root - big_b))
        p_pos = gamma_sf(s_plus**2)
        # A < 0: |A| s^2 + B s + C <= 0 between the two positive roots (needs B < 0)
        s1 = 2 * big_c / (-big_b + root)
        s2 = (-big_b + root) / (2 * -big_a)
        p_neg = np.where((disc >= 0) & (big_b < 0),
                         gamma_cdf(s2**2) - gamma_cdf(s1**2), 0.0)
        # A = 0: -B s - C >= 0 needs B < 0, s >= C / |B|
        p_zero = np.where(big_b < 0, gamma_sf((big_c / -big_b) ** 2), 0.0)
    prob = np.where(big_a > 0, p_pos, np.where(big_a < 0, p_neg, p_zero))
    return np.sum(prob * wz * wx, axis=(1, 2))


def _ng_rate_quantiles(qs: np.ndarray, ni: int, an, de, c: float, delta: float
                       ) -> np.ndarray:
    """Quantiles ``qs`` of ``b_n`` at one n: bracketing, then Illinois steps on
    ``log(b_n - b0)``, all levels at once."""

    def f(logr: np.ndarray) -> np.ndarray:
        return _ng_rate_cdf(np.exp(logr), ni, an, de, c, delta) - qs

    # start from the scale of E[(X + c (Z + delta s)^2)] / 2 at the typical precision
    centre = math.log((max(ni - 1, 0) + c * (1 + delta**2 * de.shape / de.rate) + 1e-12)
                      * de.rate / (2 * de.shape))
    lo, hi = np.full(qs.size, centre - 2.0), np.full(qs.size, centre + 2.0)
    f_lo, f_hi = f(lo), f(hi)
    for _ in range(200):
        move_lo, move_hi = f_lo > 0, f_hi < 0
        if not (move_lo.any() or move_hi.any()):
            break
        lo = np.where(move_lo, lo - 4.0, lo)
        hi = np.where(move_hi, hi + 4.0, hi)
        f_lo, f_hi = f(lo), f(hi)
    side = np.zeros(qs.size)
    mid = 0.5 * (lo + hi)
    for _ in range(100):
        mid = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
        f_mid = f(mid)
        below = f_mid < 0
        f_hi = np.where(below & (side == -1), f_hi / 2, f_hi)
        f_lo = np.where(~below & (side == 1), f_lo / 2, f_lo)
        lo, f_lo = np.where(below, mid, lo), np.where(below, f_mid, f_lo)
        hi, f_hi = np.where(below, hi, mid), np.where(below, f_hi, f_mid)
        side = np.where(below, -1.0, 1.0)
        if np.all((hi - lo < 1e-11) | (np.abs(f_mid) < 1e-13)):
            break
    return an.rate + np.exp(mid)


# ------------------------------------------------------------------------------------------
# posterior draws (simulation engines)
# ------------------------------------------------------------------------------------------
def _arviz():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        import arviz

    return arviz


#: The shortest window through sample points is shorter than the true highest-density
#: interval (the minimum of noisy widths) and its best fixed-length count is too high. Both
#: biases fall as a power of the number of draws S; the estimate from all draws and the
#: average of the two half samples give a Richardson extrapolation to S = infinity. Measured
#: exponents (beta, logit-beta and log-gamma posteriors, S = 500..4000, 6000-10000 replicates):
#: 0.55 for the width (the window's probability content adds a 1/S term to the S^(-2/3)
#: selection term) and 2/3 for the coverage; after correction the mean bias is below 0.25%
#: of the width (usually below 0.06%) and below 0.0007 in coverage for S >= 1000, against
#: 0.5-1.3% and 0.001-0.007 uncorrected.
_WIDTH_RATE = 0.55
_COVERAGE_RATE = 2.0 / 3.0


def _richardson(full: np.ndarray, half: np.ndarray, rate: float) -> np.ndarray:
    return full + (full - half) / (2.0**rate - 1.0)


def _arviz_width(draws: np.ndarray, coverage: float) -> np.ndarray:
    az = _arviz()
    bounds = np.asarray(az.hdi(draws.T[None, :, :], hdi_prob=coverage))
    return bounds[:, 1] - bounds[:, 0]


def widths_from_draws(draws: np.ndarray, coverage: float, interval: str) -> np.ndarray:
    """Interval width for each row of posterior draws (rows = data sets).

    ``"highest_density"``: ``arviz.hdi`` (the shortest window through the draws) on all
    draws and on each half, extrapolated to infinitely many draws (see ``_WIDTH_RATE``);
    ``"equal_tailed"``: sample quantiles (median-unbiased, Hyndman & Fan type 8, whose
    bias is negligible at a few thousand draws).

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> w = widths_from_draws(rng.normal(size=(3, 4000)), 0.95, "equal_tailed")
    >>> bool(np.all(np.abs(w - 3.92) < 0.3))
    True
    """
    if interval == "highest_density":
        half = draws.shape[1] // 2
        full = _arviz_width(draws, coverage)
        halves = 0.5 * (_arviz_width(draws[:, :half], coverage)
                        + _arviz_width(draws[:, half:], coverage))
        return np.maximum(_richardson(full, halves, _WIDTH_RATE), 0.0)
    tail = (1 - coverage) / 2
    q = np.quantile(draws, [tail, 1 - tail], axis=1, method="median_unbiased")
    return q[1] - q[0]


def _window_counts(draws: np.ndarray, length: float) -> tuple[np.ndarray, np.ndarray]:
    """For each row and each sorted draw ``s_i``: draws in ``[s_i, s_i + length]`` and the
    index one past the window's end."""
    d, s = draws.shape
    srt = np.sort(draws, axis=1)
    srt -= srt[:, :1]  # each row from 0 to its span; rows then stacked apart
    span = srt[:, -1]
    offset = np.cumsum(np.r_[0.0, span[:-1] + length + 1.0])[:, None]
    flat = (srt + offset).ravel()
    ends = np.searchsorted(flat, (srt + length + offset).ravel(), side="right")
    ends = ends.reshape(d, s) - (np.arange(d) * s)[:, None]
    return ends - np.arange(s)[None, :], ends


def coverage_from_draws(draws: np.ndarray, length: float, interval: str) -> np.ndarray:
    """Posterior probability, estimated from each row's draws, of the best window of
    ``length``.

    ``"highest_density"``: the largest share of draws any window of that length holds, on
    all draws and on each half, extrapolated to infinitely many draws (see
    ``_COVERAGE_RATE``); ``"equal_tailed"``: the window whose two tails hold (as nearly as
    the draws allow) the same number of draws.
    """
    s = draws.shape[1]
    if interval == "highest_density":
        def best(x: np.ndarray) -> np.ndarray:
            return _window_counts(x, length)[0].max(axis=1) / x.shape[1]

        half = s // 2
        halves = 0.5 * (best(draws[:, :half]) + best(draws[:, half:]))
        return np.clip(_richardson(best(draws), halves, _COVERAGE_RATE), 0.0, 1.0)
    inside, ends = _window_counts(draws, length)
    upper_tail = s - ends
    gap = np.abs(np.arange(s)[None, :] - upper_tail)
    pick = np.argmin(gap, axis=1)
    return inside[np.arange(draws.shape[0]), pick] / s


def _quantile_with_error(values: np.ndarray, q: float) -> tuple[float, float]:
    """Lower ``q`` quantile and its Monte Carlo standard error from order statistics.

    The error is half the distance between the order statistics at ``D q -+ sqrt(D q (1 -
    q))`` (the binomial standard deviation of the count below the quantile).
    """
    d = values.size
    srt = np.sort(values)
    k = min(max(math.ceil(d * q) - 1, 0), d - 1)
    half = math.sqrt(d * q * (1 - q))
    lo = min(max(math.floor(d * q - half) - 1, 0), d - 1)
    hi = min(max(math.ceil(d * q + half) - 1, 0), d - 1)
    return float(srt[k]), float(0.5 * (srt[hi] - srt[lo]))


def summarise_simulated(width: np.ndarray, coverage: np.ndarray | None, likely_share: float
                        ) -> dict[str, float]:
    """Mean, median, 90th centile and ``likely_share`` quantile of widths, with errors.

    With fixed-length coverages, also their mean and ``1 - likely_share`` quantile (the
    worst coverage over the ``likely_share`` of data sets with the best coverage).
    """
    d = width.size
    out = {"width_mean": float(width.mean()),
           "width_mean_mcse": float(width.std(ddof=1) / math.sqrt(d))}
    for name, q in (("width_median", 0.5), ("width_q90", 0.9),
                    ("width_worst_likely", likely_share)):
        out[name], out[name + "_mcse"] = _quantile_with_error(width, q)
    if coverage is not None:
        out["coverage_mean"] = float(coverage.mean())
        out["coverage_mean_mcse"] = float(coverage.std(ddof=1) / math.sqrt(d))
        value, err = _quantile_with_error(-coverage, likely_share)
        out["coverage_worst_likely"], out["coverage_worst_likely_mcse"] = -value, err
    return out
