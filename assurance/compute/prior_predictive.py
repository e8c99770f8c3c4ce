"""Probabilities of "estimate above a threshold" averaged over a prior on the true effect.

The estimate is ``d | delta ~ N(delta, se^2)``. For a threshold ``c`` (one per sample size,
or a grid of thresholds) these functions return

* ``P(d > c)`` with ``delta`` drawn from the prior (the assurance of a rule "success iff
  ``d > c``"), and
* ``P(d > c and delta > a)`` (or ``delta >= a``), the pieces of the success decomposition.

Normal components use the closed form of O'Hagan, Stevens & Campbell (2005) and Owen's T
function for the bivariate normal; point masses are exact; any other continuous component
is integrated adaptively on the probability scale ``u = F(delta)``, where the integrand is
bounded and the range finite.
"""

from __future__ import annotations

import numpy as np
from scipy import integrate, special

from ..priors.families import Normal, PointMass, Prior

__all__ = ["prob_estimate_above", "upper_orthant_normal"]

def upper_orthant_normal(h: np.ndarray, k: np.ndarray, rho: np.ndarray) -> np.ndarray:
    """P(Z1 > h, Z2 > k) for standard normals with correlation ``rho`` in (-1, 1).

    Uses Owen's (1956) T-function identity, which is exact and vectorises over arrays.
    Infinite ``k`` is allowed (``-inf`` gives the univariate tail of ``h``).

    Examples
    --------
    >>> round(float(upper_orthant_normal(0.0, 0.0, 0.5)), 6)  # 1/4 + arcsin(0.5)/(2 pi)
    0.333333
    """
    h, k, rho = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (h, k, rho)))
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


def _lower_orthant(x: np.ndarray, y: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Phi2(x, y; r) = 1/2 Phi(x) + 1/2 Phi(y) - T(x, a_x) - T(y, a_y) - beta (Owen 1956)."""
    root = np.sqrt(1.0 - r * r)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ax = (y - r * x) / (x * root)
        ay = (x - r * y) / (y * root)
        # at x = 0 the argument is +-infinity and T(0, +-inf) = +-1/4 (scipy's owens_t agrees)
        ax = np.where(x == 0, np.sign(y - r * x) * np.inf, ax)
        ay = np.where(y == 0, np.sign(x - r * y) * np.inf, ay)
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
        Probabilities with the broadcast shape of ``threshold`` and ``se``.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal
    >>> p = prob_estimate_above(Normal(1.0, 1.0), np.array([0.5]), np.array([1.0]))
    >>> round(float(p[0]), 6)  # Phi((1 - 0.5) / sqrt(2))
    0.638163
    """
    c, s = np.broadcast_arrays(np.asarray(threshold, float), np.asarray(se, float))
    total = np.zeros(c.shape)
    for weight, part in prior.parts():
        if isinstance(part, PointMass):
            total += weight * _point_mass(part.value, c, s, effect_above, inclusive)
        elif isinstance(part, Normal):
            total += weight * _normal(part.mu, part.sigma, c, s, effect_above)
        else:
            total += weight * _continuous(part, c, s, effect_above)
    return np.clip(total, 0.0, 1.0)


def _point_mass(value, c, s, cut, inclusive):
    p = special.ndtr((value - c) / s)
    if cut is not None and not (value >= cut if inclusive else value > cut):
        return np.zeros_like(p)
    return p


def _normal(m, sd, c, s, cut):
    tau = np.sqrt(sd * sd + s * s)
    h = (c - m) / tau
    if cut is None:
        return special.ndtr(-h)
    rho = sd / tau
    k = np.full_like(h, (cut - m) / sd)
    return upper_orthant_normal(h, k, rho)


def _continuous(part: Prior, c, s, cut):
    """Integrate Phi((delta - c)/se) over delta = F^{-1}(u), u from F(cut) to 1."""
    u_low = 0.0 if cut is None else float(part.cdf(cut))
    if u_low >= 1.0:
        return np.zeros(c.shape)

    def integrand(u: float) -> np.ndarray:
        delta = part.ppf(min(max(u, 1e-300), 1 - 1e-16))
        return special.ndtr((delta - c) / s)

    # Bounded integrand on a finite range. Each column steps from 0 to 1 near u = F(c); a
    # narrow step far in a tail could fall between the first nodes, so the places where the
    # steps start, sit and end are given as breakpoints (at most about 150 of them).
    points = _step_points(part, c, s, u_low)
    value, _err = integrate.quad_vec(
        integrand, u_low, 1.0, epsabs=1e-10, epsrel=1e-9, limit=4000, norm="max",
        points=points,
    )
    return np.asarray(value)


def _step_points(part: Prior, c: np.ndarray, s: np.ndarray, u_low: float) -> list[float]:
    centres = np.unique(np.concatenate([c.ravel(), (c - 4 * s).ravel(), (c + 4 * s).ravel()]))
    if centres.size > 150:
        centres = np.quantile(centres, np.linspace(0.0, 1.0, 150))
    u = np.unique(np.asarray(part.cdf(centres), dtype=float))
    return [float(v) for v in u if u_low < v < 1.0]
