"""Probabilities of "estimate above a threshold" averaged over a prior on the true effect.

The estimate is ``d | delta ~ N(delta, se^2)``. For a threshold ``c`` (one per sample size,
or a grid of thresholds) these functions return

* ``P(d > c)`` with ``delta`` drawn from the prior (the assurance of a rule "success iff
  ``d > c``"), and
* ``P(d > c and delta > a)`` (or ``delta >= a``), the pieces of the success decomposition.

Normal components use the closed form of O'Hagan, Stevens & Campbell (2005) and Owen's T
function for the bivariate normal; point masses are exact; any other continuous component
is integrated over the estimate's noise ``z = (delta - d) / se`` as
``E_z[S(max(a, c + se z))]`` with ``S`` the prior's survival function (bounded, so a fixed
Gauss-Legendre panel rule split every 1.5 se and at the prior's quantiles reaches about
1e-11 for every threshold at once, one survival-function call for all nodes).
"""

from __future__ import annotations

import math
import threading
import weakref
from collections import OrderedDict

import numpy as np
from scipy import special

from ..priors.families import Normal, PointMass, Prior

__all__ = ["prob_estimate_above", "prob_estimate_above_cuts", "upper_orthant_normal", "prior_edges",
           "prob_above_at_points"]

def upper_orthant_normal(h: np.ndarray, k: np.ndarray, rho: np.ndarray) -> np.ndarray:
    """P(Z1 > h, Z2 > k) for standard normals with correlation ``rho`` in (-1, 1).

    Uses Owen's (1956) T-function identity, which is exact and vectorises over arrays.
    Infinite ``k`` is allowed (``-inf`` gives the univariate tail of ``h``).

    Examples
    --------
    >>> round(float(upper_orthant_normal(0.0, 0.0, 0.5)), 6)  # 1/4 + arcsin(0.5)/(2 pi)
    0.333333
    """
    h, k, rho = (np.asarray(v, dtype=float) for v in (h, k, rho))
    if k.ndim == 0 and np.isfinite(k) and rho.shape == h.shape:  # one cut: the usual call
        return _lower_orthant(-h, np.full(h.shape, -float(k)), rho)
    h, k, rho = np.broadcast_arrays(h, k, rho)
    out = np.empty(h.shape)
    k_low = np.isneginf(k)
    k_high = np.isposinf(k)
    finite = ~(k_low | k_high)
    out[k_low] = special.ndtr(-h[k_low])
    out[k_high] = 0.0
    if finite.any():
        # P(Z1 > h, Z2 > k) = Phi2(-h, -k; rho), by Owen's T identity
        out[finite] = _lower_orthant(-h[finite], -k[finite], rho[finite])
    return out


#: Below this size an argument of the bivariate normal is computed by the ratio form (the
#: products ``x * root`` lose digits among subnormal numbers).
_TINY_ARGUMENT = 1e-280


def _lower_orthant(x: np.ndarray, y: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Phi2(x, y; r) = 1/2 Phi(x) + 1/2 Phi(y) - T(x, a_x) - T(y, a_y) - beta (Owen 1956)."""
    root = np.sqrt(1.0 - r * r)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ax = (y - r * x) / (x * root)
        ay = (x - r * y) / (y * root)
        usual = _all_finite(ax + ay) and _smallest(np.abs(x)) > _TINY_ARGUMENT \
            and _smallest(np.abs(y)) > _TINY_ARGUMENT
    if usual:  # no zero, no overflow, no subnormal: the signs of x and y decide beta
        beta = 0.5 * ((x > 0) != (y > 0))
        val = 0.5 * (special.ndtr(x) + special.ndtr(y)) - special.owens_t(x, ax) \
            - special.owens_t(y, ay) - beta
        return np.minimum(np.maximum(val, 0.0), 1.0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # as ratios, which stay exact for tiny (even subnormal) x and y of similar size;
        # at x = 0 the argument is +-infinity and T(0, +-inf) = +-1/4 (scipy's owens_t agrees)
        ax = np.where(x == 0, np.sign(y - r * x) * np.inf, (y / x - r) / root)
        ay = np.where(y == 0, np.sign(x - r * y) * np.inf, (x / y - r) / root)
    sx, sy = np.sign(x), np.sign(y)
    beta = np.where(sx * sy > 0, 0.0, np.where(sx * sy < 0, 0.5, np.where(x + y >= 0, 0.0, 0.5)))
    val = 0.5 * (special.ndtr(x) + special.ndtr(y)) - special.owens_t(x, np.nan_to_num(ax)) \
        - special.owens_t(y, np.nan_to_num(ay)) - beta
    both_zero = (x == 0) & (y == 0)
    val = np.where(both_zero, 0.25 + np.arcsin(r) / (2 * np.pi), val)
    return np.clip(val, 0.0, 1.0)


def prob_estimate_above(
    prior: Prior,
    threshold: np.ndarray,
    se: np.ndarray,
    *,
    effect_above: float | None = None,
    inclusive: bool = False,
) -> np.ndarray:
    """``P(d > threshold [and delta > effect_above])`` with ``delta`` from ``prior``.

    Parameters
    ----------
    prior
        Prior over the true effect ``delta`` (on the benefit scale: larger is better).
    threshold, se
        Broadcastable arrays: the estimate must exceed ``threshold``; ``se`` is the
        standard error of the estimate given ``delta``.
    effect_above
        Optional cut ``a``: also require ``delta > a`` (``delta >= a`` if ``inclusive``).

    Returns
    -------
    numpy.ndarray
        Probabilities with the broadcast shape of ``threshold`` and ``se``; NaN where a
        threshold or standard error is not a finite number (standard error > 0), so that
        the caller can report it instead of a wrong probability.

    Notes
    -----
    Differences such as ``(c - m) / tau`` are formed directly; where the difference itself
    overflows (two numbers near the largest double of opposite signs) they are formed as
    ``c / tau - m / tau`` instead, and ``tau = sqrt(v + se^2)`` as ``hypot(sd, se)``.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal
    >>> p = prob_estimate_above(Normal(1.0, 1.0), np.array([0.5]), np.array([1.0]))
    >>> round(float(p[0]), 6)  # Phi((1 - 0.5) / sqrt(2))
    0.638163
    """
    c, s = np.asarray(threshold, dtype=float), np.asarray(se, dtype=float)
    if c.shape != s.shape:
        c, s = np.broadcast_arrays(c, s)
    bad = None
    if not (_all_finite(c) and 0.0 < _smallest(s) and _largest(s) < math.inf):
        bad = ~(np.isfinite(c) & np.isfinite(s) & (s > 0))
        c, s = np.where(bad, 0.0, c), np.where(bad, 1.0, s)  # harmless stand-ins
    parts = prior.parts()
    total = None
    for weight, part in parts:
        if isinstance(part, PointMass):
            p = _point_mass(part.value, c, s, effect_above, inclusive)
        elif isinstance(part, Normal):
            p = _normal(part.mu, part.sigma, c, s, effect_above)
        else:
            p = _continuous(part, c, s, effect_above)
        total = p * weight if total is None else total + weight * p
    if bad is not None:
        total[bad] = np.nan  # not computable: the caller reports it
    return np.minimum(np.maximum(total, 0.0), 1.0)  # NaN stays NaN


def prob_above_at_points(values: np.ndarray, threshold: np.ndarray, se: np.ndarray
                         ) -> np.ndarray:
    """``P(d > threshold)`` for ``d ~ N(delta, se^2)`` at several true effects at once.

    The same numbers as :func:`prob_estimate_above` with a point mass at each value (a
    power curve), in one call: rows follow ``values``, columns the thresholds; NaN in a
    column whose threshold or standard error is not a finite number (standard error > 0).

    Examples
    --------
    >>> import numpy as np
    >>> p = prob_above_at_points(np.array([0.0, 1.0]), np.array([0.5]), np.array([0.5]))
    >>> np.round(p[:, 0], 6).tolist()  # Phi(-1), Phi(1)
    [0.158655, 0.841345]
    """
    values = np.asarray(values, dtype=float)[:, None]
    c, s = (np.asarray(v, dtype=float).ravel()[None, :] for v in (threshold, se))
    bad = None
    if not (_all_finite(c) and 0.0 < _smallest(s) and _largest(s) < math.inf):
        bad = ~(np.isfinite(c) & np.isfinite(s) & (s > 0))
        c, s = np.where(bad, 0.0, c), np.where(bad, 1.0, s)
    out = special.ndtr(_scaled_gap(values, c, s))
    if bad is not None:
        out[:, bad[0]] = np.nan
    return np.minimum(np.maximum(out, 0.0), 1.0)


def prob_estimate_above_cuts(prior: Prior, threshold: np.ndarray, se: np.ndarray,
                             cuts: list[tuple[float, bool]]) -> list[np.ndarray]:
    """``[P(d > c), P(d > c and delta > a_1), ...]``: :func:`prob_estimate_above` without a
    cut and then with each ``(a, inclusive)``, the same numbers; a normal prior's
    predictive scale and standardised thresholds are formed once for all of them.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal
    >>> p = prob_estimate_above_cuts(Normal(1.0, 1.0), np.array([0.5]), np.array([1.0]),
    ...                              [(0.0, False)])
    >>> round(float(p[0][0]), 6), bool(p[1][0] < p[0][0])
    (0.638163, True)
    """
    c, s = np.asarray(threshold, dtype=float), np.asarray(se, dtype=float)
    if isinstance(prior, Normal) and c.shape == s.shape and _all_finite(c) \
            and 0.0 < _smallest(s) and _largest(s) < math.inf:
        m, sd = prior.mu, prior.sigma
        tau, h = _normal_scale(m, sd, c, s)
        values = [a for a, _ in cuts]
        together = _normal_cuts_together(m, sd, s, values, tau, h) if values else None
        if together is not None:
            return [np.minimum(np.maximum(special.ndtr(-h), 0.0), 1.0), *together]
        return [np.minimum(np.maximum(_normal_from(m, sd, c, s, cut, tau, h), 0.0), 1.0)
                for cut in [None, *values]]
    return [prob_estimate_above(prior, c, s, effect_above=None if cut is None else cut[0],
                                inclusive=bool(cut and cut[1])) for cut in [None, *cuts]]


#: Below this, ``sqrt(sd^2 + se^2)`` is formed as ``hypot(sd, se)`` (the squares underflow).
_TINY_SCALE = 1e-150


# whole-array checks by plain ufunc reductions (a NaN propagates through minimum/maximum)
def _all_finite(x: np.ndarray) -> bool:
    return bool(np.logical_and.reduce(np.isfinite(x), axis=None))


def _smallest(x: np.ndarray) -> float:
    return np.minimum.reduce(x, axis=None)


def _largest(x: np.ndarray) -> float:
    return np.maximum.reduce(x, axis=None)


def _scaled_gap(a, b, scale):
    """``(a - b) / scale``; where ``a - b`` overflows, ``a / scale - b / scale``."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        gap = (a - b) / scale
        if not np.isfinite(gap).all():
            a, b, scale = (np.asarray(v, dtype=float) for v in (a, b, scale))
            gap = np.where(np.isfinite(a - b), gap, a / scale - b / scale)
    return gap


def _point_mass(value, c, s, cut, inclusive):
    if cut is not None and not (value >= cut if inclusive else value > cut):
        return np.zeros(c.shape)
    return special.ndtr(_scaled_gap(value, c, s))


def _normal(m, sd, c, s, cut):
    return _normal_from(m, sd, c, s, cut, *_normal_scale(m, sd, c, s))


def _normal_scale(m, sd, c, s):
    """``tau = sqrt(sd^2 + se^2)`` and ``h = (c - m) / tau``, safe at extreme scales."""
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        tau = np.sqrt(sd * sd + s * s)
        h = (c - m) / tau
        usual = _TINY_SCALE < _smallest(tau) and _largest(tau) < math.inf and _all_finite(h)
    if not usual:  # squares or differences that leave the range of doubles
        fix = ~(np.isfinite(tau) & (tau > _TINY_SCALE))
        tau = np.where(fix, np.hypot(sd, s), tau)
        h = _scaled_gap(c, m, tau)
    return tau, h


def _normal_cuts_together(m, sd, s, cuts, tau, h):
    """Every cut of :func:`_normal_from` in one array ``(cuts, sizes)``, the same numbers
    (the same elementwise operations, one row per cut); None where one of them needs the
    careful route (a cut at the prior mean, tiny or non-finite arguments)."""
    k = (np.array(cuts, dtype=float) - m) / sd
    if not (np.isfinite(k).all() and (np.abs(k) > _TINY_ARGUMENT).all()):
        return None
    x, y, r = -h, -k[:, None], sd / tau
    root = s / tau
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ax = (y - r * x) / (x * root)
        ay = (x - r * y) / (y * root)
        usual = _all_finite(ax + ay) and _smallest(np.abs(x)) > _TINY_ARGUMENT
    if not usual:
        return None
    val = 0.5 * (special.ndtr(x) + special.ndtr(y)) - special.owens_t(x, ax) \
        - special.owens_t(y, ay) - 0.5 * ((x > 0) != (y > 0))
    return list(np.minimum(np.maximum(val, 0.0), 1.0))


def _normal_from(m, sd, c, s, cut, tau, h):
    if cut is None:
        return special.ndtr(-h)
    k = (cut - m) / sd
    if math.isfinite(k) and abs(k) > _TINY_ARGUMENT:
        # P(Z1 > h, Z2 > k) = Phi2(x, y; r) with x = -h, y = -k, r = sd / tau, by Owen's T
        # identity; sqrt(1 - r^2) = se / tau exactly, without the cancellation as r -> 1
        x, y, r = -h, -k, sd / tau
        root = s / tau
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            ax = (y - r * x) / (x * root)
            ay = (x - r * y) / (y * root)
            usual = _all_finite(ax + ay) and _smallest(np.abs(x)) > _TINY_ARGUMENT
        if usual:
            val = 0.5 * (special.ndtr(x) + special.ndtr(y)) - special.owens_t(x, ax) \
                - special.owens_t(y, ay) - 0.5 * ((x > 0) != (y > 0))
            return np.minimum(np.maximum(val, 0.0), 1.0)
    return upper_orthant_normal(h, _scaled_gap(cut, m, sd), sd / tau)


# ------------------------------------------------------------------------------------------
# continuous priors other than the normal: a fixed panel rule, all thresholds at once
# ------------------------------------------------------------------------------------------
#: The estimate's noise ``z = (d - delta) / se`` is integrated over ``|z| <= _Z_END``: what
#: lies beyond is below ``2 Phi(-8.5) = 2e-17``.
_Z_END = 8.5
#: Panel width in units of the standard error (the scale of the normal density).
_STEP = 1.5
#: Gauss-Legendre nodes per panel.
_NODES = 10
#: Prior probability levels whose quantiles split the panels, so that on any panel the
#: prior's distribution function moves by at most 0.1 (and far less in the tails, where a
#: heavy-tailed law bends most).
_LEVELS = np.array([1e-15, 1e-13, 1e-11, 1e-9, 1e-7, 1e-6, 1e-5, 1e-4, 1e-3, 5e-3, 0.02, 0.05,
                    0.1, 0.2, 0.3, 0.4, 0.5])
_LEVELS = np.unique(np.concatenate([_LEVELS, 1.0 - _LEVELS]))
_GAUSS = special.roots_legendre(_NODES)
_SQRT_2PI = math.sqrt(2.0 * math.pi)
#: Most panels one group of thresholds may span before each threshold may get its own
#: nodes: beyond it a group is split if that takes fewer nodes (each threshold of a kept
#: group reads only the nodes near it), or if the groups would need more than
#: ``_MOST_NODES`` nodes in all.
_MAX_PANELS = 400
_MOST_NODES = 4_000_000
#: Largest number of (threshold, node) products formed at once (memory bound); up to this
#: size the normal densities are kept for the calls with a cut on the same thresholds.
_BLOCK = 2_000_000

_EDGES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_NODE_CACHE: OrderedDict = OrderedDict()
_NODE_CACHE_SIZE = 2
_NODE_LOCK = threading.Lock()


def _prior_edges(part: Prior) -> np.ndarray:
    """Quantiles of ``part`` at the fixed levels and its finite support ends (cached)."""
    try:
        return _EDGES[part]
    except (KeyError, TypeError):
        pass
    at = getattr(part, "_ppf_at", None)  # one vectorised call where the family has one
    values = list(at(_LEVELS)) if at is not None else [part.ppf(float(p)) for p in _LEVELS]
    values.extend(part.support())
    edges = np.unique(np.array([v for v in values if math.isfinite(v)], dtype=float))
    try:
        _EDGES[part] = edges
    except TypeError:  # pragma: no cover - a prior that cannot be weakly referenced
        pass
    return edges


def prior_edges(part: Prior) -> np.ndarray:
    """Where a continuous prior may bend: its quantiles at fixed probability levels (1e-15
    to 1 - 1e-15, denser in the tails) and its finite support ends, sorted and unique.

    Any feature of ``P(d > c)`` as a function of the threshold ``c`` lies near one of these
    (within a few standard errors) or is as wide as the spacing between them. Computed once
    per prior (one ``ppf`` call per level) and kept while the prior lives.

    Examples
    --------
    >>> from assurance.priors import Uniform
    >>> edges = prior_edges(Uniform(0.0, 2.0))
    >>> float(edges[0]), float(edges[-1]), bool((edges[1:] > edges[:-1]).all())
    (0.0, 2.0, True)
    """
    return _prior_edges(part)


def _survival(part: Prior, x: np.ndarray) -> np.ndarray:
    sf = getattr(part, "sf", None)
    if sf is not None:
        return np.asarray(sf(x), dtype=float)
    return 1.0 - np.asarray(part.cdf(x), dtype=float)


class _Nodes:
    """Panels and nodes for one continuous part and one set of (threshold, se) pairs.

    The pairs are made unique and grouped by standard error (a t analysis has many
    thresholds per size, one per node of the sample-SD rule); each group gets one set of
    nodes in ``delta`` covering ``[min c - 8.5 se, max c + 8.5 se]``, split every 1.5 se
    and at the prior's fixed quantiles and support ends, 10 Gauss-Legendre nodes a panel.
    A group whose thresholds spread over more than ``_MAX_PANELS`` panels is split into
    one group per threshold. ``surv`` holds the prior's survival function at every node,
    computed in one call; ``kernel`` the normal density of each threshold at its group's
    nodes, kept for the calls with a cut that follow.
    """

    def __init__(self, part: Prior, c: np.ndarray, s: np.ndarray):
        order = np.lexsort((c, s))
        cs, ss = c[order], s[order]
        new = np.ones(cs.size, dtype=bool)
        new[1:] = (cs[1:] != cs[:-1]) | (ss[1:] != ss[:-1])
        self.inverse = np.empty(c.size, dtype=np.intp)
        self.inverse[order] = np.cumsum(new) - 1
        self.c, self.s = cs[new], ss[new]         # sorted by se, then threshold
        first = np.ones(self.s.size, dtype=bool)
        first[1:] = self.s[1:] != self.s[:-1]
        starts = np.flatnonzero(first)
        ends = np.append(starts[1:], self.s.size) - 1
        span = (self.c[ends] - self.c[starts]) / self.s[starts]
        panels = (span.max() + 2 * _Z_END) / _STEP   # the widest group's panels
        shared = starts.size * panels                # panels if the groups are kept
        alone = self.s.size * (2 * _Z_END / _STEP + 2)  # one group per threshold
        if panels > _MAX_PANELS and (shared > alone or shared * _NODES > _MOST_NODES):
            first[:] = True                        # every threshold its own group
            starts = ends = np.arange(self.s.size)
        self.group = np.cumsum(first) - 1          # group of each unique threshold
        se = self.s[starts]
        low = self.c[starts] - _Z_END * se
        high = self.c[ends] + _Z_END * se
        count = np.ceil((high - low) / (_STEP * se)).astype(np.int64)
        steps = np.arange(int(count.max()) + 1)
        grid = np.minimum(low[:, None] + steps[None, :] * (_STEP * se)[:, None],
                          high[:, None])
        quantiles = np.clip(_prior_edges(part)[None, :], low[:, None], high[:, None])
        edges = np.sort(np.concatenate([grid, quantiles, high[:, None]], axis=1), axis=1)
        left, right = edges[:, :-1], edges[:, 1:]
        valid = right > left
        keep = max(int(valid.sum(axis=1).max()), 1)
        pick = np.argsort(~valid, axis=1, kind="stable")[:, :keep]
        self.left = np.take_along_axis(left, pick, axis=1)
        self.right = np.where(np.take_along_axis(valid, pick, axis=1),
                              np.take_along_axis(right, pick, axis=1), self.left)
        self.x, self.weight = _panel_nodes(self.left, self.right)
        self.surv = np.zeros(self.x.shape)
        used = self.weight > 0
        self.surv[used] = _survival(part, self.x[used])
        self.window = self._windows(low, high - low)
        self.kernel: np.ndarray | None = None
        self.norm: np.ndarray | None = None

    def _windows(self, low: np.ndarray, span: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray] | None:
        """Per threshold, the run of its group's nodes within ``c +- 8.5 se`` (one panel
        more either side), when the longest such run is well short of the group's row (a
        group whose thresholds spread over many standard errors: a t analysis): flat
        indices ``(thresholds, run)`` into the node arrays and which of them are in the
        run. Nodes beyond the run carry a normal density below 2e-16 of its peak. None
        when every threshold needs (nearly) the whole row."""
        rows, width = self.x.shape
        if rows == self.c.size or width <= 4 * _NODES:
            return None
        # one global sorted key: row g holds g + 0.999 x (its position in the row's span),
        # its padding g + 0.9995; a threshold's window ends are read on the same key
        frac = np.clip((self.x - low[:, None]) / span[:, None], 0.0, 1.0)
        keys = (np.arange(rows)[:, None] + np.where(self.weight > 0, 0.999 * frac, 0.9995)
                ).ravel()
        g = self.group
        ends = [g + 0.999 * np.clip((self.c + sign * _Z_END * self.s - low[g]) / span[g],
                                    0.0, 1.0) for sign in (-1.0, 1.0)]
        first = np.maximum(np.searchsorted(keys, ends[0], side="left") - _NODES, g * width)
        last = np.minimum(np.searchsorted(keys, ends[1], side="right") + _NODES,
                          (g + 1) * width)
        run = int((last - first).max())
        if run > 0.6 * width:
            return None
        index = first[:, None] + np.arange(run)[None, :]
        inside = index < last[:, None]
        return np.minimum(index, last[:, None] - 1), inside

    def _take(self, values: np.ndarray, block: slice) -> np.ndarray:
        """``values`` (one per node) at the nodes each threshold of ``block`` uses."""
        if self.window is None:
            return values[self.group[block]]
        return values.ravel()[self.window[0][block]]

    def _normal_kernel(self, block: slice) -> np.ndarray:
        """``exp(-z^2 / 2)`` at the nodes each threshold uses, ``z = (x - c) / se`` (0 at
        the padding of a window)."""
        z = (self._take(self.x, block) - self.c[block, None]) / self.s[block, None]
        kernel = np.exp(-0.5 * z * z)
        if self.window is not None:
            kernel *= self.window[1][block]
        return kernel

    def _sums(self, mass: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``sum(mass * kernel)`` per threshold, and the rule's total normal mass."""
        width = self.x.shape[1] if self.window is None else self.window[0].shape[1]
        size = self.c.size * width
        every = slice(None)
        if self.kernel is None and size <= _BLOCK:
            self.kernel = self._normal_kernel(every)
        if self.kernel is not None:
            if self.norm is None:
                self.norm = np.einsum("ij,ij->i", self._take(self.weight, every), self.kernel)
            return np.einsum("ij,ij->i", self._take(mass, every), self.kernel), self.norm
        out, norm = np.empty(self.c.size), np.empty(self.c.size)
        for block in _blocks(self.c.size, width):
            kernel = self._normal_kernel(block)
            out[block] = np.einsum("ij,ij->i", self._take(mass, block), kernel)
            norm[block] = np.einsum("ij,ij->i", self._take(self.weight, block), kernel)
        self.norm = norm
        return out, norm

    def integral(self, part: Prior, cut: float | None) -> np.ndarray:
        """``E_z[S(max(cut, c + se z))]`` for every unique threshold (no cut: ``S(c + se z)``).

        The integral is divided by the rule's own integral of the normal density (1 to
        within 1e-15), which keeps it right when ``se`` is so small beside ``c`` that the
        nodes round to a few representable numbers; a window that rounds to a single
        number gives the limit ``S(max(cut, c))``.
        """
        mass = self.weight * self.surv
        extra = None
        if cut is not None:
            mass = np.where(np.repeat(self.left, _NODES, axis=1) >= cut, mass, 0.0)
            inside = (self.left < cut) & (self.right > cut)
            rows = np.flatnonzero(inside.any(axis=1))
            if rows.size:  # the panel holding the cut is integrated again from the cut up
                right = self.right[rows][inside[rows]]
                ex, ew = _panel_nodes(np.full((rows.size, 1), float(cut)), right[:, None])
                extra = (rows, ex, ew * _survival(part, ex))
        out, norm = self._sums(mass)
        if extra is not None:
            rows, ex, em = extra
            where = np.full(int(self.group[-1]) + 1, -1)
            where[rows] = np.arange(rows.size)
            mine = np.flatnonzero(where[self.group] >= 0)
            r = where[self.group[mine]]
            z = (ex[r] - self.c[mine, None]) / self.s[mine, None]
            out[mine] += np.einsum("ij,ij->i", em[r], np.exp(-0.5 * z * z))
        resolved = norm > 0.5 * _SQRT_2PI * self.s
        out = np.where(resolved, out / np.where(resolved, norm, 1.0), 0.0)
        if cut is not None:  # below the cut the survival function is S(cut)
            at_cut = float(_survival(part, np.array([float(cut)]))[0])
            out += at_cut * special.ndtr(_scaled_gap(cut, self.c, self.s))
        if not resolved.all():
            limit = _survival(part, self.c if cut is None else np.maximum(self.c, cut))
            out = np.where(resolved, out, limit)
        return out


def _panel_nodes(left: np.ndarray, right: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    t, w = _GAUSS
    half = 0.5 * (right - left)
    mid = 0.5 * (right + left)
    x = (mid[..., None] + half[..., None] * t).reshape(left.shape[0], -1)
    weight = (half[..., None] * w).reshape(left.shape[0], -1)
    return x, weight


def _blocks(rows: int, width: int):
    step = max(1, _BLOCK // max(width, 1))
    for start in range(0, rows, step):
        yield slice(start, min(start + step, rows))


def _nodes_for(part: Prior, c: np.ndarray, s: np.ndarray) -> _Nodes:
    """The nodes for these thresholds, kept for the next calls (with a cut) on the same
    thresholds; the entry holds the part itself, so its id cannot be reused meanwhile."""
    key = (id(part), c.tobytes(), s.tobytes())
    with _NODE_LOCK:
        hit = _NODE_CACHE.get(key)
        if hit is not None and hit[0] is part:
            _NODE_CACHE.move_to_end(key)
            return hit[1]
    nodes = _Nodes(part, c, s)
    with _NODE_LOCK:
        _NODE_CACHE[key] = (part, nodes)
        while len(_NODE_CACHE) > _NODE_CACHE_SIZE:
            _NODE_CACHE.popitem(last=False)
    return nodes


def _continuous(part: Prior, c, s, cut):
    """``P(d > c [and delta > cut])`` for a continuous prior ``part``, every threshold at once.

    With ``z = (delta - d) / se`` standard normal and independent of ``delta``,
    ``P(d > c, delta > a) = E_z[S(max(a, c + se z))]`` where ``S`` is the prior's survival
    function: a bounded integrand against the normal density. It is integrated by a fixed
    Gauss-Legendre panel rule (see :class:`_Nodes`) in one survival-function call for all
    thresholds; the part below the cut is ``S(a) Phi((a - c) / se)`` exactly. Thresholds
    whose window ``c +- 8.5 se`` is not finite give NaN.
    """
    shape = c.shape
    cf = np.ascontiguousarray(c, dtype=float).ravel()
    sf = np.ascontiguousarray(s, dtype=float).ravel()
    with np.errstate(over="ignore", invalid="ignore"):
        ok = np.isfinite(cf - _Z_END * sf) & np.isfinite(cf + _Z_END * sf)
    out = np.full(cf.size, np.nan)
    edges = _prior_edges(part)
    if ok.any() and edges.size:
        # a window wholly above the prior's last edge (its 1 - 1e-15 quantile or upper
        # support end) gives at most 1e-15; wholly below its first edge, at least 1 - 1e-15
        # (without a cut above that edge): no nodes for those
        with np.errstate(over="ignore", invalid="ignore"):
            above = ok & (cf - _Z_END * sf > edges[-1])
            below = ok & (cf + _Z_END * sf < edges[0]) if cut is None or cut < edges[0] \
                else np.zeros(cf.size, dtype=bool)
        out[above] = 0.0
        out[below] = 1.0 if cut is None else float(_survival(part, np.array([float(cut)]))[0])
        ok &= ~(above | below)
    if ok.any():
        if not ok.all():
            cf, sf = cf[ok], sf[ok]
        nodes = _nodes_for(part, cf, sf)
        out[ok] = nodes.integral(part, cut)[nodes.inverse]
    return np.clip(out, 0.0, 1.0).reshape(shape)
