"""Priors over a treatment effect (and over a standard deviation).

Every prior answers the same questions: density of its continuous part, distribution
function, probability of a region, mean and standard deviation, random draws, and a plain
description. Point masses are allowed, alone or inside a :class:`Mixture`, so a planner can
say "20% chance the drug does nothing" directly.

Examples
--------
>>> from assurance.priors import Mixture, Normal, PointMass
>>> prior = Mixture([PointMass(0.0), Normal(3.0, 1.5)], weights=[0.2, 0.8])
>>> round(prior.prob_above(0.0), 4)
0.7818
>>> round(prior.mean(), 3)
2.4
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy import special, stats

from .._validation import check_int, check_real
from ..errors import AssuranceInputError

__all__ = [
    "Prior",
    "Normal",
    "StudentT",
    "Uniform",
    "TruncatedNormal",
    "PointMass",
    "Mixture",
    "FromScipy",
    "ScaledInvChiSquare",
    "GammaPrecision",
    "as_prior",
]

RandomLike = int | np.random.Generator | None


def _rng(seed: RandomLike) -> np.random.Generator:
    return seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)


def _size(size: object, owner: object) -> int:
    return check_int(size, "size", f"{type(owner).__name__}.sample", low=0)


def _q(q: object, owner: object) -> float:
    return check_real(q, "q", f"{type(owner).__name__}.ppf", low=0, high=1, low_open=True,
                      high_open=True)


def _bound(value: object, name: str, default: float) -> float:
    """A truncation bound: a finite number, or +-inf / None for no bound."""
    if value is None:
        return default
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise AssuranceInputError(
            f"The '{name}' parameter of TruncatedNormal must be a number (or None for no "
            f"bound). Got {value!r} instead."
        )
    x = float(value)
    if math.isnan(x):
        raise AssuranceInputError(
            f"The '{name}' parameter of TruncatedNormal must be a number, not NaN. "
            f"Got {value!r} instead."
        )
    return x


class Prior(ABC):
    """Base class: a probability distribution over one real quantity."""

    # ---- what each family supplies -------------------------------------------------------
    @abstractmethod
    def cdf(self, x: Any) -> np.ndarray:
        """P(X <= x)."""

    @abstractmethod
    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        """``size`` independent draws."""

    @abstractmethod
    def mean(self) -> float:
        """Expected value."""

    @abstractmethod
    def var(self) -> float:
        """Variance."""

    @abstractmethod
    def to_dict(self) -> dict[str, Any]:
        """Plain description (family and parameters) for results and memos."""

    @abstractmethod
    def negated(self) -> Prior:
        """The prior of ``-X``."""

    def pdf(self, x: Any) -> np.ndarray:
        """Density of the continuous part (zero for a point mass)."""
        return np.zeros_like(np.asarray(x, dtype=float))

    def support(self) -> tuple[float, float]:
        """Smallest interval holding all the mass."""
        return (-math.inf, math.inf)

    def atoms(self) -> list[tuple[float, float]]:
        """Point masses as ``(location, probability)`` pairs."""
        return []

    def parts(self) -> list[tuple[float, Prior]]:
        """``(weight, component)`` pairs; a single family is its own only part."""
        return [(1.0, self)]

    # ---- derived --------------------------------------------------------------------------
    def sd(self) -> float:
        """Standard deviation."""
        return math.sqrt(self.var())

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        """P(X > x), or P(X >= x) with ``inclusive=True``."""
        p = 1.0 - float(self.cdf(x))
        if inclusive:
            p += sum(w for loc, w in self.atoms() if loc == x)
        return min(max(p, 0.0), 1.0)

    def prob_between(self, lower: float, upper: float) -> float:
        """P(lower < X <= upper)."""
        if upper < lower:
            raise AssuranceInputError(
                f"The 'upper' parameter of prob_between must be >= lower={lower!r}. "
                f"Got {upper!r} instead."
            )
        return min(max(float(self.cdf(upper)) - float(self.cdf(lower)), 0.0), 1.0)

    def ppf(self, q: float) -> float:
        """Smallest x with P(X <= x) >= q.

        A mixture's quantile lies between the smallest and largest quantile of its parts;
        bisection on the condition ``F(x) >= q`` finds the smallest such x, also where the
        distribution function is flat or jumps (point masses).
        """
        q = _q(q, self)
        masses: dict[float, float] = {}
        for loc, w in self.atoms():
            masses[loc] = masses.get(loc, 0.0) + w
        for loc in sorted(masses):  # the quantile sits on an atom when q falls in its jump
            at = float(self.cdf(loc))
            if at >= q > at - masses[loc]:
                return float(loc)
        inner = [part.ppf(q) for _, part in self.parts() if part is not self]
        if not inner:
            raise NotImplementedError(f"{type(self).__name__} must define ppf")
        lo, hi = min(inner), max(inner)
        step = max(hi - lo, 1.0)
        while float(self.cdf(lo)) >= q:
            lo -= step
            step *= 2
        while float(self.cdf(hi)) < q:  # pragma: no cover - guarded by the bracket above
            hi += step
            step *= 2
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            if mid in (lo, hi) or hi - lo <= 1e-15 * max(1.0, abs(hi)):
                break
            if float(self.cdf(mid)) >= q:
                hi = mid
            else:
                lo = mid
        return float(hi)

    def describe(self) -> str:
        """One line a planner can read, e.g. ``normal(mean=3, sd=1.5)``."""
        return _describe(self.to_dict())

    def __repr__(self) -> str:
        return self.describe()


def _describe(d: dict[str, Any]) -> str:
    d = dict(d)
    family = d.pop("family")
    if family == "mixture":
        return "mixture(" + " + ".join(
            f"{w:g} x {_describe(c)}" for w, c in zip(d["weights"], d["components"], strict=True)
        ) + ")"
    args = ", ".join(
        f"{k}={v:g}" if isinstance(v, float | int) else f"{k}={v}" for k, v in d.items()
    )
    return f"{family}({args})"


class _Continuous(Prior):
    """A continuous family backed by a frozen scipy distribution ``self._dist``."""

    _dist: Any

    def pdf(self, x: Any) -> np.ndarray:
        return self._dist.pdf(x)

    def cdf(self, x: Any) -> np.ndarray:
        return self._dist.cdf(x)

    def sf(self, x: Any) -> np.ndarray:
        return self._dist.sf(x)

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return float(self._dist.sf(x))

    def ppf(self, q: float) -> float:
        q = _q(q, self)
        return float(self._dist.ppf(q))

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        return np.asarray(self._dist.rvs(size=size, random_state=_rng(seed)), dtype=float)

    def mean(self) -> float:
        return float(self._dist.mean())

    def var(self) -> float:
        return float(self._dist.var())

    def support(self) -> tuple[float, float]:
        lo, hi = self._dist.support()
        return float(lo), float(hi)


class Normal(_Continuous):
    """Normal prior ``N(mean, sd^2)``.

    Examples
    --------
    >>> round(Normal(2.0, 1.0).prob_above(0.0), 4)
    0.9772
    """

    def __init__(self, mean: float, sd: float):
        self.mu = check_real(mean, "mean", "Normal")
        self.sigma = check_real(sd, "sd", "Normal", low=0, low_open=True)
        self._dist = stats.norm(self.mu, self.sigma)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "normal", "mean": self.mu, "sd": self.sigma}

    def negated(self) -> Normal:
        return Normal(-self.mu, self.sigma)


class StudentT(_Continuous):
    """Student t prior with ``df`` degrees of freedom, location and scale.

    Heavier tails than a normal: a planner's way of saying "probably near ``loc``, but I
    would not be shocked by a large miss". The variance is finite only for ``df > 2``.

    Examples
    --------
    >>> round(StudentT(5, loc=1.0, scale=2.0).cdf(1.0).item(), 3)
    0.5
    """

    def __init__(self, df: float, loc: float = 0.0, scale: float = 1.0):
        self.df = check_real(df, "df", "StudentT", low=0, low_open=True)
        self.loc = check_real(loc, "loc", "StudentT")
        self.scale = check_real(scale, "scale", "StudentT", low=0, low_open=True)
        self._dist = stats.t(self.df, self.loc, self.scale)

    def mean(self) -> float:
        if self.df <= 1:
            raise AssuranceInputError(
                f"A StudentT prior with df={self.df:g} has no mean; use df > 1."
            )
        return self.loc

    def var(self) -> float:
        if self.df <= 2:
            raise AssuranceInputError(
                f"A StudentT prior with df={self.df:g} has infinite variance; use df > 2."
            )
        return float(self._dist.var())

    def to_dict(self) -> dict[str, Any]:
        return {"family": "student_t", "df": self.df, "loc": self.loc, "scale": self.scale}

    def negated(self) -> StudentT:
        return StudentT(self.df, -self.loc, self.scale)


class Uniform(_Continuous):
    """Uniform prior on ``[lower, upper]``.

    Examples
    --------
    >>> Uniform(0.0, 4.0).prob_above(1.0)
    0.75
    """

    def __init__(self, lower: float, upper: float):
        self.lower = check_real(lower, "lower", "Uniform")
        self.upper = check_real(upper, "upper", "Uniform", low=self.lower, low_open=True)
        self._dist = stats.uniform(self.lower, self.upper - self.lower)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "uniform", "lower": self.lower, "upper": self.upper}

    def negated(self) -> Uniform:
        return Uniform(-self.upper, -self.lower)


class TruncatedNormal(_Continuous):
    """Normal prior ``N(mean, sd^2)`` restricted to ``[lower, upper]`` (either may be infinite).

    Examples
    --------
    >>> prior = TruncatedNormal(0.0, 1.0, lower=0.0)
    >>> prior.prob_above(0.0)
    1.0
    """

    def __init__(self, mean: float, sd: float, lower: float = -math.inf,
                 upper: float = math.inf):
        self.mu = check_real(mean, "mean", "TruncatedNormal")
        self.sigma = check_real(sd, "sd", "TruncatedNormal", low=0, low_open=True)
        lower = _bound(lower, "lower", -math.inf)
        upper = _bound(upper, "upper", math.inf)
        if lower == math.inf:
            raise AssuranceInputError(
                "The 'lower' parameter of TruncatedNormal must be a number or -inf. "
                f"Got {lower!r} instead."
            )
        if upper <= lower:
            raise AssuranceInputError(
                f"The 'upper' parameter of TruncatedNormal must be > lower={lower!r}. "
                f"Got {upper!r} instead."
            )
        self.lower, self.upper = float(lower), float(upper)
        a, b = (self.lower - self.mu) / self.sigma, (self.upper - self.mu) / self.sigma
        mass = special.ndtr(b) - special.ndtr(a)
        if not mass > 1e-12:
            raise AssuranceInputError(
                f"TruncatedNormal(mean={self.mu:g}, sd={self.sigma:g}) keeps almost no mass "
                f"in [{self.lower:g}, {self.upper:g}] ({mass:.3g}); move the bounds or the mean."
            )
        self._dist = stats.truncnorm(a, b, loc=self.mu, scale=self.sigma)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "truncated_normal", "mean": self.mu, "sd": self.sigma,
                "lower": self.lower, "upper": self.upper}

    def negated(self) -> TruncatedNormal:
        return TruncatedNormal(-self.mu, self.sigma, -self.upper, -self.lower)


class PointMass(Prior):
    """All probability at one value: the classical "assume the effect is exactly x".

    Examples
    --------
    >>> PointMass(0.0).prob_above(0.0, inclusive=True)
    1.0
    """

    def __init__(self, value: float):
        self.value = check_real(value, "value", "PointMass")

    def cdf(self, x: Any) -> np.ndarray:
        return np.where(np.asarray(x, dtype=float) >= self.value, 1.0, 0.0)

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        return np.full(size, self.value)

    def mean(self) -> float:
        return self.value

    def var(self) -> float:
        return 0.0

    def support(self) -> tuple[float, float]:
        return (self.value, self.value)

    def atoms(self) -> list[tuple[float, float]]:
        return [(self.value, 1.0)]

    def ppf(self, q: float) -> float:
        _q(q, self)
        return self.value

    def to_dict(self) -> dict[str, Any]:
        return {"family": "point_mass", "value": self.value}

    def negated(self) -> PointMass:
        return PointMass(-self.value)


class FromScipy(_Continuous):
    """Any frozen continuous ``scipy.stats`` distribution used as a prior.

    Examples
    --------
    >>> from scipy import stats
    >>> prior = FromScipy(stats.logistic(loc=1.0, scale=0.5))
    >>> round(prior.cdf(1.0).item(), 3)
    0.5
    """

    def __init__(self, dist: Any, *, _negate: bool = False):
        if not (hasattr(dist, "dist") and isinstance(dist.dist, stats.rv_continuous)):
            raise AssuranceInputError(
                "The 'dist' parameter of FromScipy must be a frozen continuous scipy.stats "
                f"distribution, e.g. scipy.stats.logistic(loc=1, scale=0.5). Got {dist!r} instead."
            )
        self._dist = dist
        self._negate = _negate

    def pdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        return self._dist.pdf(-x if self._negate else x)

    def cdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        return self._dist.sf(-x) if self._negate else self._dist.cdf(x)

    def sf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        return self._dist.cdf(-x) if self._negate else self._dist.sf(x)

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return float(self.sf(x))

    def ppf(self, q: float) -> float:
        q = _q(q, self)
        return float(-self._dist.ppf(1 - q) if self._negate else self._dist.ppf(q))

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        draws = np.asarray(self._dist.rvs(size=size, random_state=_rng(seed)), dtype=float)
        return -draws if self._negate else draws

    def mean(self) -> float:
        return -float(self._dist.mean()) if self._negate else float(self._dist.mean())

    def support(self) -> tuple[float, float]:
        lo, hi = (float(v) for v in self._dist.support())
        return (-hi, -lo) if self._negate else (lo, hi)

    def to_dict(self) -> dict[str, Any]:
        name = self._dist.dist.name
        args = ", ".join([f"{a:g}" for a in self._dist.args]
                         + [f"{k}={v:g}" for k, v in self._dist.kwds.items()])
        return {"family": "scipy", "distribution": f"{'-' if self._negate else ''}{name}({args})"}

    def negated(self) -> FromScipy:
        return FromScipy(self._dist, _negate=not self._negate)


class Mixture(Prior):
    """Finite mixture of priors with weights summing to one.

    Examples
    --------
    >>> prior = Mixture([PointMass(0.0), Normal(2.0, 1.0)], weights=[0.3, 0.7])
    >>> round(prior.prob_above(0.0), 4)  # 0.7 * P(N(2, 1) > 0)
    0.6841
    """

    def __init__(self, components: Sequence[Prior], weights: Sequence[float]):
        components = list(components)
        weights = list(weights)
        if len(components) < 1 or not all(isinstance(c, Prior) for c in components):
            raise AssuranceInputError(
                "The 'components' parameter of Mixture must be a non-empty list of priors. "
                f"Got {components!r} instead."
            )
        if len(weights) != len(components):
            raise AssuranceInputError(
                f"The 'weights' parameter of Mixture must have one weight per component "
                f"({len(components)}). Got {len(weights)} weight(s) instead."
            )
        w = [check_real(v, "weights", "Mixture", low=0, high=1) for v in weights]
        if abs(sum(w) - 1.0) > 1e-9:
            raise AssuranceInputError(
                f"The 'weights' parameter of Mixture must sum to 1. Got {weights!r} "
                f"(sum {sum(w):.6g}) instead."
            )
        flat: list[tuple[float, Prior]] = []
        for wi, ci in zip(w, components, strict=True):
            flat.extend((wi * wj, cj) for wj, cj in ci.parts())
        self._parts = [(wi, ci) for wi, ci in flat if wi > 0]
        self.weights = [wi for wi, _ in self._parts]
        self.components = [ci for _, ci in self._parts]

    def parts(self) -> list[tuple[float, Prior]]:
        return list(self._parts)

    def pdf(self, x: Any) -> np.ndarray:
        return sum(w * c.pdf(x) for w, c in self._parts)

    def cdf(self, x: Any) -> np.ndarray:
        return sum(w * c.cdf(x) for w, c in self._parts)

    def atoms(self) -> list[tuple[float, float]]:
        return [(loc, w * p) for w, c in self._parts for loc, p in c.atoms()]

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        p = sum(w * c.prob_above(x, inclusive=inclusive) for w, c in self._parts)
        return min(max(p, 0.0), 1.0)

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        rng = _rng(seed)
        probs = np.array(self.weights) / sum(self.weights)
        which = rng.choice(len(self._parts), size=size, p=probs)
        out = np.empty(size)
        for k, (_, comp) in enumerate(self._parts):
            idx = np.flatnonzero(which == k)
            if idx.size:
                out[idx] = comp.sample(idx.size, rng)
        return out

    def mean(self) -> float:
        return sum(w * c.mean() for w, c in self._parts)

    def var(self) -> float:
        m = self.mean()
        return sum(w * (c.var() + (c.mean() - m) ** 2) for w, c in self._parts)

    def support(self) -> tuple[float, float]:
        bounds = [c.support() for _, c in self._parts]
        return min(b[0] for b in bounds), max(b[1] for b in bounds)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "mixture", "weights": self.weights,
                "components": [c.to_dict() for c in self.components]}

    def negated(self) -> Mixture:
        return Mixture([c.negated() for c in self.components], self.weights)


class ScaledInvChiSquare(_Continuous):
    """Prior on a standard deviation sigma whose square is scaled inverse chi-square.

    ``sigma^2 ~ df * scale^2 / chi2_df``: the usual summary of a pilot study that estimated
    the SD as ``scale`` with ``df`` degrees of freedom (``df = n - 1`` for one group).

    Examples
    --------
    >>> prior = ScaledInvChiSquare(df=30, scale=8.0)
    >>> 7.5 < prior.ppf(0.5) < 8.5
    True
    """

    def __init__(self, df: float, scale: float):
        self.df = check_real(df, "df", "ScaledInvChiSquare", low=0, low_open=True)
        self.scale = check_real(scale, "scale", "ScaledInvChiSquare", low=0, low_open=True)
        # sigma^2 ~ InvGamma(df/2, scale=df*scale^2/2); sigma = sqrt(sigma^2).
        self._var_dist = stats.invgamma(self.df / 2, scale=self.df * self.scale**2 / 2)
        self._dist = None

    def pdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        safe = np.where(x > 0, x, 1.0)
        return np.where(x > 0, self._var_dist.pdf(safe**2) * 2 * safe, 0.0)

    def cdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        return np.where(x > 0, self._var_dist.cdf(np.where(x > 0, x, 1.0) ** 2), 0.0)

    def sf(self, x: Any) -> np.ndarray:
        return 1.0 - self.cdf(x)

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return float(self.sf(x))

    def ppf(self, q: float) -> float:
        return float(np.sqrt(self._var_dist.ppf(_q(q, self))))

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        return np.sqrt(self._var_dist.rvs(size=size, random_state=_rng(seed)))

    def mean(self) -> float:
        # E[sigma] = scale * sqrt(df/2) * Gamma((df-1)/2) / Gamma(df/2)
        if self.df <= 1:
            raise AssuranceInputError(
                f"ScaledInvChiSquare(df={self.df:g}) has no mean; use df > 1.")
        return float(self.scale * math.sqrt(self.df / 2)
                     * math.exp(special.gammaln((self.df - 1) / 2) - special.gammaln(self.df / 2)))

    def var(self) -> float:
        if self.df <= 2:
            raise AssuranceInputError(
                f"ScaledInvChiSquare(df={self.df:g}) has infinite variance; use df > 2.")
        return float(self._var_dist.mean() - self.mean() ** 2)

    def support(self) -> tuple[float, float]:
        return (0.0, math.inf)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "scaled_inv_chi_square", "df": self.df, "scale": self.scale}

    def negated(self) -> Prior:
        raise AssuranceInputError("A prior on a standard deviation cannot be negated.")


class GammaPrecision(ScaledInvChiSquare):
    """Prior on sigma whose precision ``1 / sigma^2`` is Gamma(shape, rate).

    The same family as :class:`ScaledInvChiSquare` with ``df = 2 * shape`` and
    ``scale^2 = rate / shape``.

    Examples
    --------
    >>> prior = GammaPrecision(shape=15.0, rate=15.0 * 64.0)
    >>> round(prior.ppf(0.5) / ScaledInvChiSquare(30, 8.0).ppf(0.5), 12)
    1.0
    """

    def __init__(self, shape: float, rate: float):
        self.shape = check_real(shape, "shape", "GammaPrecision", low=0, low_open=True)
        self.rate = check_real(rate, "rate", "GammaPrecision", low=0, low_open=True)
        super().__init__(df=2 * self.shape, scale=math.sqrt(self.rate / self.shape))

    def to_dict(self) -> dict[str, Any]:
        return {"family": "gamma_precision", "shape": self.shape, "rate": self.rate}


def as_prior(value: Any, name: str = "prior", owner: str = "assurance") -> Prior:
    """Accept a :class:`Prior`, a number (point mass) or a frozen continuous scipy distribution.

    Examples
    --------
    >>> as_prior(2.5)
    point_mass(value=2.5)
    """
    if isinstance(value, Prior):
        return value
    if isinstance(value, int | float | np.floating | np.integer) and not isinstance(value, bool):
        return PointMass(float(value))
    if hasattr(value, "dist") and isinstance(getattr(value, "dist", None), stats.rv_continuous):
        return FromScipy(value)
    raise AssuranceInputError(
        f"The '{name}' parameter of {owner} must be a prior (e.g. assurance.Normal(3, 2)), a "
        f"number, or a frozen continuous scipy.stats distribution. Got {value!r} instead."
    )
