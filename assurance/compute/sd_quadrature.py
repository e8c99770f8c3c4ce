"""Quadrature over a ratio ``q = sqrt(X / df)`` with ``X ~ chi2_df``.

Two expectations in this package have that shape:

* the sample SD of a t analysis: ``s / sigma ~ sqrt(chi2_df / df)``, independent of the
  estimate, so every success probability of a t test is ``E_r[P(d > c(r))]``;
* a scaled inverse chi-square prior on the SD: ``sigma = s0 / q`` with
  ``q ~ sqrt(chi2_nu / nu)``.

The integrand is a probability that moves from one level to another as ``q`` crosses a few
known places ("features": where the success threshold meets the effect, or the cut of a
joint probability, or the minimum observed effect), each with a known width. Two rules:

* **Gauss-Hermite** on the normal score of the chi-square quantile (nodes ``z_i``, ratio
  ``q(z_i)``). Accurate when every feature is wide on the score scale; the number of nodes
  is picked from the narrowest feature (2 to 40 nodes). For 10 to 1e5 df the ratio of each
  rule's score is read from a Chebyshev series in ``1 / sqrt(df)`` (32 terms, interpolating
  exact quantiles, made once per process and rule; ``log q`` within 5e-14 wherever a node
  weighs more than 1e-12), elsewhere it is the exact quantile (inverse incomplete gamma
  function). The ratios of a grid and the nodes asked for (by grid and features) are cached.
* **Composite Gauss-Legendre** on ``u = log q`` with the exact density of ``u``: panels
  between the scores -9, -8, ..., 9 of the distribution, and more panels placed around each
  feature (at 0, 0.7, 2, 5 and 12 widths either side). Used for small df, narrow features
  (small alpha, large effects, large n in a prior on the SD) and kinked thresholds, where a
  floor below which the integrand is constant is given: its probability becomes one node.

Both give flat arrays of (column, ratio, weight); summing ``weight * g(ratio)`` by column is
the expectation.
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict
from functools import lru_cache

import numpy as np
from scipy import special

__all__ = ["sd_ratio_nodes", "ratio_rule", "hermite_part", "ratio_log_density"]

_HERMITE_NODES = 32
_LEGENDRE_NODES = 400


@lru_cache(maxsize=64)
def _hermite_rule(k: int = _HERMITE_NODES) -> tuple[np.ndarray, np.ndarray]:
    x, w = special.roots_hermitenorm(k)
    return x, w / np.sqrt(2 * np.pi)


def _legendre_rule() -> tuple[np.ndarray, np.ndarray]:
    x, w = special.roots_legendre(_LEGENDRE_NODES)
    return (x + 1) / 2, w / 2


_HERMITE = _hermite_rule()
_LEGENDRE = _legendre_rule()
_SPLIT_NODES = 64
_SPLIT = special.roots_legendre(_SPLIT_NODES)
_Z_END = 9.0  # the normal density beyond +-9 is below 1e-18

# -- the feature-aware rule ----------------------------------------------------------------
#: scores of the chi-square distribution between which the bulk panels lie
_BULK_SCORES = np.arange(-9.0, 9.5, 1.0)
#: where panels start and end around a feature, in widths from its centre
_PATTERN = np.array([-12.0, -5.0, -2.0, -0.7, 0.0, 0.7, 2.0, 5.0, 12.0])
_PANEL_NODES = 10
_PANEL = special.roots_legendre(_PANEL_NODES)
#: a feature at least this wide on the score scale needs no panels of its own
_BROAD = 2.0
#: (narrowest feature on the score scale, fewest degrees of freedom, Gauss-Hermite nodes):
#: the first row a column satisfies gives its rule; none: the composite rule. A short rule
#: needs the score map nearly straight (many df) as well as wide features.
_TIERS = ((1000.0, 10000.0, 2), (100.0, 1000.0, 3), (20.0, 100.0, 4), (8.0, 60.0, 6),
          (5.0, 30.0, 8), (3.0, 20.0, 12), (2.0, 15.0, 16), (1.5, 10.0, 20), (1.0, 20.0, 24),
          (0.8, 30.0, 32), (0.65, 40.0, 40))
#: the tiers' rows, then the composite rule's (0 nodes), which every column fits
_TIER_WIDTH, _TIER_DF = (np.array([row[i] for row in _TIERS] + [0.0])[:, None]
                         for i in (0, 1))
_TIER_NODES = np.array([row[2] for row in _TIERS] + [0], dtype=np.int64)


def _chi_from_score(z: np.ndarray, half_df: np.ndarray) -> np.ndarray:
    """Chi-square quantile at probability Phi(z), each tail computed from its own side."""
    out = np.empty(np.broadcast(z, half_df).shape)
    z, half_df = np.broadcast_arrays(z, half_df)
    low = z < 0
    out[low] = 2 * special.gammaincinv(half_df[low], special.ndtr(z[low]))
    out[~low] = 2 * special.gammainccinv(half_df[~low], special.ndtr(-z[~low]))
    return out


def _log_norm_constant(h: np.ndarray) -> np.ndarray:
    """``h log h - h - log Gamma(h)``, without the cancellation of large ``h``.

    Stirling's series (common practice): ``log Gamma(h) = (h - 1/2) log h - h + log(2 pi)/2
    + 1/(12 h) - 1/(360 h^3) + 1/(1260 h^5) - 1/(1680 h^7)``; its next term is below 1e-13
    for ``h >= 8``.
    """
    h = np.asarray(h, dtype=float)
    small = h < 8.0
    out = np.empty(h.shape)
    hs = h[small]
    out[small] = hs * np.log(hs) - hs - special.gammaln(hs)
    hb = h[~small]
    inv = 1.0 / hb
    inv2 = inv * inv
    series = inv * (1 / 12 - inv2 * (1 / 360 - inv2 * (1 / 1260 - inv2 / 1680)))
    out[~small] = 0.5 * np.log(hb / (2 * np.pi)) - series
    return out


def ratio_log_density(u: np.ndarray, df: np.ndarray) -> np.ndarray:
    """Log density of ``u = log q``, ``q = sqrt(X / df)``, ``X ~ chi2_df``.

    With ``h = df / 2``: ``log f(u) = log 2 + h log h - h - log Gamma(h) + h (2u - expm1(2u))``
    (change of variables ``X = df exp(2u)``).

    Examples
    --------
    >>> import numpy as np
    >>> from scipy import integrate
    >>> f = lambda u: float(np.exp(ratio_log_density(np.array(u), np.array(7.0))))
    >>> round(integrate.quad(f, -30, 5)[0], 12)
    1.0
    """
    h = np.asarray(df, dtype=float) / 2
    u = np.asarray(u, dtype=float)
    return math.log(2.0) + _log_norm_constant(h) + h * (2 * u - np.expm1(2 * u))


#: Every tier's Gauss-Hermite rule, concatenated once per process: the scores, the weights,
#: and where each rule of ``k`` nodes starts (``_RULE_START[k]``).
_RULE_KS = np.unique(np.array([row[2] for row in _TIERS], dtype=np.int64))
_RULE_START = np.zeros(int(_RULE_KS.max()) + 1, dtype=np.int64)
_RULE_START[_RULE_KS] = np.cumsum(_RULE_KS) - _RULE_KS
_RULE_Z = np.concatenate([_hermite_rule(int(k))[0] for k in _RULE_KS])
_RULE_W = np.concatenate([_hermite_rule(int(k))[1] for k in _RULE_KS])

# -- the ratios of a rule's scores as smooth functions of df ----------------------------------
#: The series cover ``10 <= df <= 1e5`` (every tier asks for 10 df or more); beyond 1e5 df
#: scipy's lower-tail inverse incomplete gamma function loses digits, so larger df (and df
#: below 10) take exact quantiles.
_SERIES_DF = (10.0, 1e5)
_SERIES_S = (1.0 / math.sqrt(_SERIES_DF[1]), 1.0 / math.sqrt(_SERIES_DF[0]))
#: Chebyshev terms of each series in ``s = 1 / sqrt(df)``: 32 give ``log q`` within 5e-14
#: at every score of every tier (checked in tests/test_t_ratio_series.py).
_SERIES_TERMS = 32
#: The Chebyshev points of the first kind, ``x_j = cos((2j + 1) pi / (2m))``, the df they
#: stand for, and their barycentric weights ``(-1)^j sin((2j + 1) pi / (2m))``
_SERIES_THETA = np.pi * (np.arange(_SERIES_TERMS) + 0.5) / _SERIES_TERMS
_SERIES_X = np.cos(_SERIES_THETA)
_SERIES_POINT_DF = 1.0 / (_SERIES_S[0] + (_SERIES_X + 1.0) / 2.0
                          * (_SERIES_S[1] - _SERIES_S[0])) ** 2
_SERIES_BARY = (-1.0) ** np.arange(_SERIES_TERMS) * np.sin(_SERIES_THETA)
#: ``log q`` at every rule's scores (rows as ``_RULE_Z``) and the Chebyshev points
#: (columns), and the same series as Chebyshev coefficients; a tier's rows made on first
#: use (``_SERIES_MADE[k]``), once per process
_SERIES_AT = np.zeros((_RULE_Z.size, _SERIES_TERMS))
_SERIES = np.zeros((_RULE_Z.size, _SERIES_TERMS))
_SERIES_MADE = np.zeros(_RULE_START.size, dtype=bool)
_SERIES_LOCK = threading.Lock()


def _make_series(ks: np.ndarray) -> None:
    """Make the missing rows of the series for the tiers ``ks``: exact quantiles at the
    Chebyshev points, and the coefficients of the polynomial through them."""
    with _SERIES_LOCK:
        ks = [int(k) for k in ks if not _SERIES_MADE[k]]
        if not ks:
            return
        m = _SERIES_TERMS
        df = _SERIES_POINT_DF
        rows = np.concatenate([np.arange(_RULE_START[k], _RULE_START[k] + k) for k in ks])
        log_q = 0.5 * np.log(_chi_from_score(_RULE_Z[rows, None], df[None, :] / 2)
                             / df[None, :])
        coef = (2.0 / m) * (log_q @ np.cos(np.outer(np.arange(m), _SERIES_THETA)).T)
        coef[:, 0] /= 2.0
        _SERIES_AT[rows] = log_q
        _SERIES[rows] = coef
        _SERIES_MADE[ks] = True


def _interpolation_weights(x: np.ndarray) -> np.ndarray:
    """``L[j, i]`` with ``p(x_i) = sum_j L[j, i] p(x_j)`` for every polynomial ``p`` of degree
    below ``m`` (the Chebyshev points ``x_j``): the barycentric formula (Berrut & Trefethen
    2004, SIAM Review 46:501-517), stable at any ``x`` in ``[-1, 1]``; an ``x`` on a point
    takes its value (the difference 1e-300 makes its weight all but 1)."""
    diff = x[None, :] - _SERIES_X[:, None]
    diff[diff == 0.0] = 1e-300
    weights = _SERIES_BARY[:, None] / diff
    return weights / weights.sum(axis=0)


class _GridRatios:
    """Ratios ``q(z)`` at every rule's scores (rows as ``_RULE_Z``) for the distinct df of a
    grid (columns), filled as asked: whole tiers at once from the series (the interpolation
    weights at the grid's df made once), exact quantiles for the df outside the series
    (NaN until asked)."""

    def __init__(self, df: np.ndarray):
        self.df = df
        self.outside = (df < _SERIES_DF[0]) | (df > _SERIES_DF[1])
        self.any_outside = bool(self.outside.any())
        self.inside = np.flatnonzero(~self.outside) if self.any_outside else slice(None)
        self.table = (np.full((_RULE_Z.size, df.size), np.nan) if self.any_outside
                      else np.empty((_RULE_Z.size, df.size)))
        self.filled = np.zeros(_RULE_START.size, dtype=bool)
        self.basis: np.ndarray | None = None

    def _weights(self) -> np.ndarray:
        """Interpolation weights at the df in the series' range, ``(m, columns)``."""
        if self.basis is None:
            low, high = _SERIES_S
            x = (2.0 / np.sqrt(self.df[self.inside]) - low - high) / (high - low)
            self.basis = _interpolation_weights(np.minimum(np.maximum(x, -1.0), 1.0))
        return self.basis

    def fill(self, ks: np.ndarray, asked: np.ndarray | None) -> None:
        """Rows of the tiers ``ks`` (increasing) not yet filled; ``asked[j]``: the tier
        column ``j`` needs where the grid has df outside the series (exact quantiles are
        only made where asked). The series fill the rows of every tier from the first to
        the last asked: one product."""
        todo = ks[~self.filled[ks]]
        if todo.size:
            block = _RULE_KS[(_RULE_KS >= todo[0]) & (_RULE_KS <= todo[-1])]
            if not _SERIES_MADE[block].all():
                _make_series(block)
            rows = slice(int(_RULE_START[todo[0]]), int(_RULE_START[todo[-1]] + todo[-1]))
            if not self.any_outside:
                self.table[rows] = np.exp(_SERIES_AT[rows] @ self._weights())
            elif not isinstance(self.inside, slice) and self.inside.size:
                self.table[rows, self.inside] = np.exp(_SERIES_AT[rows] @ self._weights())
            self.filled[block] = True
        if not self.any_outside:
            return
        for k in ks:
            rows = np.arange(_RULE_START[k], _RULE_START[k] + k)
            cols = np.flatnonzero(self.outside & (asked == k) & np.isnan(self.table[rows[0]]))
            if cols.size:
                d = self.df[None, cols]
                self.table[rows[:, None], cols] = np.sqrt(
                    _chi_from_score(_RULE_Z[rows, None], d / 2) / d)


#: A grid's ratios, keyed by its sorted distinct df, the few latest kept
_RATIO_TABLES: OrderedDict[bytes, _GridRatios] = OrderedDict()
_RATIO_TABLES_KEPT = 8
_RATIO_LOCK = threading.Lock()


def _grid_ratios(uniq: np.ndarray) -> _GridRatios:
    key = uniq.tobytes()
    with _RATIO_LOCK:
        grid = _RATIO_TABLES.get(key)
        if grid is None:
            grid = _RATIO_TABLES[key] = _GridRatios(uniq)
            while len(_RATIO_TABLES) > _RATIO_TABLES_KEPT:
                _RATIO_TABLES.popitem(last=False)
        else:
            _RATIO_TABLES.move_to_end(key)
    return grid


@lru_cache(maxsize=64)
def _bulk_log_ratio(df_bytes: bytes) -> np.ndarray:
    df = np.frombuffer(df_bytes, dtype=float)
    chi = _chi_from_score(_BULK_SCORES[:, None], df[None, :] / 2)
    return 0.5 * np.log(chi / df[None, :])


def _bulk_ends(df: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ratios at the scores -9 and 9 by Wilson-Hilferty (common practice), the lower end
    pushed down to at most 3e-5, and to 0 below 5 df: never above the exact end (checked
    against scipy.stats.chi2 for df 5 to 1e4); the upper end within 10% of it."""
    a = 2.0 / (9.0 * df)
    spread = 9.0 * np.sqrt(a)
    lo = np.maximum(1.0 - a - spread, 1e-3)
    lo = np.where(df < 5.0, 0.0, lo * np.sqrt(lo))  # x ** 1.5
    hi = 1.0 - a + spread
    return lo, hi * np.sqrt(hi)


def _narrowest_score_width(df: np.ndarray, centres: np.ndarray, widths: np.ndarray
                           ) -> np.ndarray:
    """Width on the score scale of the narrowest feature that reaches the bulk, per column.

    Wilson-Hilferty (common practice): the score of ``q`` is about ``(q^(2/3) - 1 + a) /
    sqrt(a)``, ``a = 2 / (9 df)``, so ``dz/dq`` is about ``sqrt(2 df) q^(-1/3)``. The bulk is
    the ratios of scores -9 to 9; a feature more than 12 widths outside it leaves the
    integrand flat there. The width is read where the score scale is tightest within five
    widths above the centre. Only used to choose a rule, so rough is enough.
    """
    lo, hi = _bulk_ends(df)
    with np.errstate(invalid="ignore", divide="ignore"):
        # NaN or infinite centres never reach (the comparison is False)
        # (maximum, then minimum: np.clip, NaN kept, without its Python wrapper)
        reach = np.abs(centres - np.minimum(np.maximum(centres, lo), hi)) <= 12.0 * widths
        # judged where the score scale is tightest within five widths of the centre
        width = widths / np.cbrt(np.minimum(np.maximum(centres + 5.0 * widths, lo), hi))
        width[~reach] = np.inf
        # sqrt(2 df) > 0 is the same for every feature of a column: after the minimum
        return np.minimum.reduce(width, axis=0, initial=np.inf) * np.sqrt(2.0 * df)


def _exact_score_width(df: np.ndarray, centres: np.ndarray, widths: np.ndarray
                       ) -> np.ndarray:
    """Width of each feature on the score scale, read at the centre and five widths either
    side (the smallest of the three); NaN where the score cannot be formed (far tails)."""
    h = df / 2
    out = np.full(centres.shape, np.inf)
    with np.errstate(all="ignore"):
        for step in (-5.0, 0.0, 5.0):
            q = centres + step * widths
            ok = np.isfinite(q) & (q > 0)
            q = np.where(ok, q, 1.0)
            x = h * q * q
            low = q < 1.0
            z = np.where(low, special.ndtri(special.gammainc(h, x)),
                         -special.ndtri(special.gammaincc(h, x)))
            # dz/dq = f_q(q) / phi(z), f_q(q) = f_u(log q) / q
            log_slope = ratio_log_density(np.log(q), df) - np.log(q) + 0.5 * z * z \
                + 0.5 * math.log(2 * math.pi)
            width = widths * np.exp(log_slope)
            width = np.where(ok & np.isfinite(width), width, np.where(ok, np.nan, np.inf))
            out = np.fmin(out, width) if step else np.where(np.isnan(width), np.nan,
                                                            np.fmin(out, width))
    return out


def ratio_rule(df: np.ndarray, centres: np.ndarray | None = None,
               widths: np.ndarray | None = None, floor: np.ndarray | None = None
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Nodes and weights for ``E[g(q)]``, ``q = sqrt(X / df)``, ``X ~ chi2_df``, per column.

    Parameters
    ----------
    df
        1-D array of degrees of freedom, one per column, each > 0.
    centres, widths
        Arrays ``(F, len(df))``: the ratio at which ``g`` changes fastest and the width of
        the change on the ratio scale (>= 0; 0 for a kink). A centre that is NaN is ignored.
    floor
        Optional ratio per column below which ``g`` is constant (NaN or <= 0: none); its
        probability becomes one node at the floor.

    Returns
    -------
    column, ratio, weight
        Flat arrays, one entry per node: the column it belongs to, the ratio, the weight.
        ``np.bincount(column, weight * g(ratio), minlength=len(df))`` approximates ``E[g(q)]``
        for every column at once.

    Examples
    --------
    >>> import numpy as np
    >>> col, r, w = ratio_rule(np.array([3.0, 40.0]), centres=np.array([[0.4, 0.4]]),
    ...                        widths=np.array([[0.01, 0.01]]))
    >>> np.round(np.bincount(col, w * r**2), 12)  # E[X / df] = 1 in each column
    array([1., 1.])
    """
    df = np.atleast_1d(np.asarray(df, dtype=float))
    n = df.size
    if centres is None:
        centres = np.empty((0, n))
        widths = np.empty((0, n))
    centres = np.asarray(centres, dtype=float).reshape(-1, n)
    widths = np.asarray(widths, dtype=float)
    if widths.shape != centres.shape:
        widths = np.broadcast_to(widths, centres.shape)
    if floor is None:
        has_floor = np.zeros(n, dtype=bool)
        floor = np.full(n, np.nan)
    else:
        floor = np.broadcast_to(np.asarray(floor, dtype=float), (n,))
        has_floor = np.isfinite(floor) & (floor > 0)
    # a floor outside the bulk (scores -9 to 9) bends nothing: below it the mass is under
    # 1e-19 (the integrand is its smooth upper branch), above it all mass is constant
    above = np.zeros(n, dtype=bool)
    forced = b""  # columns on the composite rule (or one node) whatever their features
    if has_floor.any():
        lo, hi = _bulk_ends(df)
        above = has_floor & (floor > 1.1 * hi)
        has_floor = has_floor & (floor >= lo) & ~above
        if (has_floor | above).any():
            forced = (has_floor | above).tobytes()
    col, ratio, weight, tier = _hermite_flat(df.tobytes(), centres.tobytes(),
                                             widths.tobytes(), forced)

    parts = []
    if above.any():
        # one node at the floor carries all the mass
        keep = ~above
        k = np.flatnonzero(above)
        parts.append((k, floor[k].copy(), np.ones(k.size)))
    else:
        keep = np.ones(n, dtype=bool)
    if col.size:
        parts.append((col, ratio, weight))
    if ((tier == 0) & keep).any():
        cols = np.flatnonzero((tier == 0) & keep)
        parts.append(_composite(df[cols], centres[:, cols], widths[:, cols], floor[cols],
                                has_floor[cols], cols))
    if len(parts) == 1:
        return parts[0]
    col, ratio, weight = (np.concatenate(pieces) for pieces in zip(*parts, strict=True))
    return col, ratio, weight


def _tiers(df: np.ndarray, centres: np.ndarray, widths: np.ndarray) -> np.ndarray:
    """Gauss-Hermite nodes per column (0: the composite rule)."""
    narrowest = _narrowest_score_width(df, centres, widths)
    # (tiers and the composite rule's row, which every column fits, columns)
    fits = (narrowest >= _TIER_WIDTH) & (df >= _TIER_DF)
    fits[-1] = True  # also where a width is NaN
    return _TIER_NODES[fits.argmax(axis=0)]


def hermite_part(df: np.ndarray, centres: np.ndarray, widths: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The Gauss-Hermite part of :func:`ratio_rule` alone: nodes for the columns whose
    features are wide enough, and which columns those are (the others are left to the
    caller, who may have a closed form for them).

    Returns
    -------
    column, ratio, weight, covered
        Flat nodes as in :func:`ratio_rule`, and a boolean mask of the columns they cover.

    Examples
    --------
    >>> import numpy as np
    >>> col, r, w, covered = hermite_part(np.array([2.0, 400.0]), np.array([[0.5, 0.5]]),
    ...                                   np.array([[0.5, 0.5]]))
    >>> covered.tolist(), round(float(np.bincount(col, w, minlength=2)[1]), 12)
    ([False, True], 1.0)
    """
    df = np.atleast_1d(np.asarray(df, dtype=float))
    centres = np.asarray(centres, dtype=float).reshape(-1, df.size)
    widths = np.asarray(widths, dtype=float)
    if widths.shape != centres.shape:
        widths = np.broadcast_to(widths, centres.shape)
    col, ratio, weight, tier = _hermite_flat(df.tobytes(), centres.tobytes(),
                                             widths.tobytes())
    return col, ratio, weight, tier > 0


@lru_cache(maxsize=128)
def _hermite_flat(df_bytes: bytes, centres_bytes: bytes, widths_bytes: bytes,
                  forced_bytes: bytes = b""
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The tier of each column (:func:`_tiers`; 0 where ``forced``, a boolean mask, says so)
    and the Gauss-Hermite nodes of the columns with a tier, as :func:`_hermite_nodes`
    (cached: a grid asks for the same features at every call)."""
    df = np.frombuffer(df_bytes, dtype=float)
    centres = np.frombuffer(centres_bytes, dtype=float).reshape(-1, df.size)
    widths = np.frombuffer(widths_bytes, dtype=float).reshape(-1, df.size)
    tier = _tiers(df, centres, widths)
    if forced_bytes:
        tier[np.frombuffer(forced_bytes, dtype=bool)] = 0
    if tier.any():
        col, ratio, weight = _hermite_nodes(df, tier)
    else:
        col, ratio, weight = np.empty(0, dtype=np.int64), np.empty(0), np.empty(0)
    for v in (col, ratio, weight, tier):
        v.setflags(write=False)
    return col, ratio, weight, tier


def _hermite_nodes(df: np.ndarray, tier: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss-Hermite nodes of every column with a tier > 0, flat, ordered by column and node.
    The ratios come from the grid's table (:class:`_GridRatios`): series in ``1 / sqrt(df)``
    inside their range, exact quantiles outside it."""
    rising = df[1:] > df[:-1]
    if rising.all():  # a grid in increasing order: as it is
        uniq, inverse = df, None
    else:
        run = int(rising.argmin()) + 1  # a grid repeated (several rows of one grid)?
        if df.size % run == 0 and (df.reshape(-1, run) == df[:run]).all():
            uniq, inverse = df[:run], np.arange(df.size) % run
        else:
            uniq, inverse = np.unique(df, return_inverse=True)
    grid = _grid_ratios(uniq)
    cols = np.flatnonzero(tier)
    reps = tier[cols]
    asked = None
    if grid.any_outside:
        asked = np.zeros(uniq.size, dtype=np.int64)
        asked[cols if inverse is None else inverse[cols]] = reps
    grid.fill(np.flatnonzero(np.bincount(reps)), asked)
    first = np.cumsum(reps) - reps  # where each column's nodes start in the flat arrays
    col = np.repeat(cols, reps)
    node = np.repeat(_RULE_START[reps] - first, reps) + np.arange(col.size)
    ratio = grid.table[node, col if inverse is None else inverse[col]]
    return col, ratio, _RULE_W[node]


def _composite(df: np.ndarray, centres: np.ndarray, widths: np.ndarray, floor: np.ndarray,
               has_floor: np.ndarray, cols: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    uniq, inverse = np.unique(df, return_inverse=True)
    bulk = _bulk_log_ratio(uniq.tobytes())[:, inverse]
    lo = bulk[0]
    hi = bulk[-1]
    # a feature two score units wide or wider is resolved by the bulk panels (one unit,
    # ten nodes each): its own panels would only cost time
    broad = _exact_score_width(df, centres, widths) >= _BROAD
    centres = np.where(broad, np.nan, centres)
    with np.errstate(divide="ignore", invalid="ignore"):
        u_floor = np.where(has_floor, np.log(np.where(has_floor, floor, 1.0)), -np.inf)
        # panels about each feature are laid on the ratio scale, then read on the log scale
        extra = (centres[:, None, :] + widths[:, None, :] * _PATTERN[None, :, None]
                 ).reshape(-1, df.size)
        extra = np.log(np.where(np.isfinite(extra) & (extra > 0), extra, 0.0))
    start = np.maximum(lo, u_floor)
    points = np.clip(np.concatenate([bulk, extra, start[None, :]]), start, hi)
    points.sort(axis=0)
    half = 0.5 * (points[1:] - points[:-1])
    panel, column = np.nonzero(half > 0)  # panels squeezed to nothing are dropped
    half = half[panel, column]
    mid = 0.5 * (points[1:][panel, column] + points[:-1][panel, column])
    x, w = _PANEL
    u = (mid[:, None] + half[:, None] * x[None, :]).ravel()
    node_df = np.repeat(df[column], x.size)
    weight = np.outer(half, w).ravel() * np.exp(ratio_log_density(u, node_df))
    col = np.repeat(cols[column], x.size)
    ratio = np.exp(u)
    if has_floor.any():
        k = np.flatnonzero(has_floor)
        below = special.gammainc(df[k] / 2, df[k] / 2 * floor[k] ** 2)
        col = np.concatenate([cols[k], col])
        ratio = np.concatenate([floor[k], ratio])
        weight = np.concatenate([below, weight])
    return col, ratio, weight


# -- the general-purpose rule for thresholds of any shape -----------------------------------
def sd_ratio_nodes(df: np.ndarray, kink: np.ndarray | None = None
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``r = s / sigma`` and weights for each degrees-of-freedom value.

    Used for rules whose threshold is not linear in the sample SD (posterior probabilities
    with an informative analysis prior, combined rules); a t test uses :func:`ratio_rule`.

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
        below = special.gammainc(d / 2, x_star / 2)  # chi-square cdf
        out_r[0, cols] = kink[cols]
        out_w[0, cols] = below
        if rule == "score":
            z_star = np.where(below < 0.5, special.ndtri(below),
                              -special.ndtri(special.gammaincc(d / 2, x_star / 2)))
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
            out_r[1 : 1 + u.size, cols] = np.sqrt(_chi2_ppf(p, d[None, :]) / d[None, :])
            out_w[1 : 1 + u.size, cols] = w[:, None] * span[None, :]
    return out_r, out_w


def _chi2_ppf(p: np.ndarray, df: np.ndarray) -> np.ndarray:
    """Chi-square quantile (as scipy.stats.chi2.ppf computes it, without importing it)."""
    return 2.0 * special.gammaincinv(np.asarray(df, dtype=float) / 2, p)


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
        ratio[: u.size, ~big] = np.sqrt(_chi2_ppf(u[:, None], d) / d)
        weight[: u.size, ~big] = w[:, None]
    return ratio, weight
