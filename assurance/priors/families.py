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
import warnings
from abc import ABC, abstractmethod
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from scipy import special

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

# scipy.stats costs about half a second to import; it is imported only where a scipy
# distribution is actually built (the first time a prior other than Normal or PointMass
# evaluates itself), so reading a design with a normal prior never pays for it.

#: Continuous scipy.stats distributions whose distribution and quantile functions are closed
#: form or fast special functions (a few milliseconds for thousands of points). Others
#: (levy_stable, studentized_range, gausshyper, norminvgauss, ...) integrate or invert
#: numerically at every point: seconds to hours per plan. Chosen by timing cdf, ppf, pdf and
#: rvs at 2,000 points for every continuous scipy.stats distribution (scipy 1.17): all these
#: take under 15 ms, all others over 600 ms.
FAST_SCIPY_DISTRIBUTIONS = frozenset({
    "alpha", "anglit", "arcsine", "beta", "betaprime", "bradford", "burr", "burr12", "cauchy",
    "chi", "chi2", "cosine", "crystalball", "dgamma", "dweibull", "erlang", "expon",
    "exponpow", "exponweib", "f", "fatiguelife", "fisk", "gamma", "genexpon", "genextreme",
    "gengamma", "genhalflogistic", "genlogistic", "gennorm", "genpareto", "gibrat",
    "gompertz", "gumbel_l", "gumbel_r", "halfcauchy", "halfgennorm", "halflogistic",
    "halfnorm", "hypsecant", "invgamma", "invgauss", "invweibull", "jf_skew_t", "johnsonsb",
    "johnsonsu", "kappa3", "kappa4", "kstwobign", "landau", "laplace", "laplace_asymmetric",
    "levy", "levy_l", "loggamma", "logistic", "loglaplace", "lognorm", "loguniform", "lomax",
    "maxwell", "mielke", "moyal", "nakagami", "ncf", "nct", "ncx2", "norm", "pareto",
    "pearson3", "powerlaw", "powerlognorm", "powernorm", "rayleigh", "rdist", "reciprocal",
    "rice", "semicircular", "skewcauchy", "skewnorm", "t", "trapezoid", "triang",
    "truncexpon", "truncnorm", "truncpareto", "truncweibull_min", "tukeylambda", "uniform",
    "wald", "weibull_max", "weibull_min", "wrapcauchy",
})

#: a few distributions to name in messages, as examples of the allowed ones
_SCIPY_EXAMPLES = "norm, t, logistic, gamma, lognorm, beta, weibull_min, gumbel_r"


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

    def _ppf_at(self, levels: np.ndarray) -> np.ndarray:
        """:meth:`ppf` at each of ``levels`` (all in (0, 1)); one vectorised call where the
        family has one, the same numbers as calling :meth:`ppf` level by level."""
        return np.array([self.ppf(float(q)) for q in levels], dtype=float)

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
    """A continuous family backed by a frozen scipy distribution ``self._dist``.

    The frozen distribution is built on first use by ``_make_dist`` (which imports
    scipy.stats), or set directly by a subclass.
    """

    _frozen: Any = None

    @property
    def _dist(self) -> Any:
        if self._frozen is None:
            self._frozen = self._make_dist()
        return self._frozen

    @_dist.setter
    def _dist(self, value: Any) -> None:
        self._frozen = value

    def _make_dist(self) -> Any:
        """The frozen scipy distribution (None for a family that needs none)."""
        return None

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

    def _ppf_at(self, levels: np.ndarray) -> np.ndarray:
        if type(self).ppf is not _Continuous.ppf:  # a family with a quantile of its own
            return super()._ppf_at(levels)
        return np.asarray(self._dist.ppf(np.asarray(levels, dtype=float)), dtype=float)

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

    # closed forms (the same arithmetic as scipy.stats.norm, without importing it)
    def _z(self, x: Any) -> Any:
        return (np.asarray(x, dtype=float) - self.mu) / self.sigma

    def pdf(self, x: Any) -> np.ndarray:
        z = self._z(x)
        return np.exp(-z**2 / 2.0) / math.sqrt(2 * math.pi) / self.sigma

    def cdf(self, x: Any) -> np.ndarray:
        return special.ndtr(self._z(x))

    def sf(self, x: Any) -> np.ndarray:
        return special.ndtr(-self._z(x))

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return float(self.sf(x))

    def ppf(self, q: float) -> float:
        q = _q(q, self)
        return float(self.mu + self.sigma * special.ndtri(q))

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        return self.mu + self.sigma * _rng(seed).standard_normal(size)

    def mean(self) -> float:
        return self.mu

    def var(self) -> float:
        return self.sigma**2

    def support(self) -> tuple[float, float]:
        return (-math.inf, math.inf)

    def _make_dist(self) -> Any:
        from scipy import stats

        return stats.norm(self.mu, self.sigma)

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

    def _make_dist(self) -> Any:
        from scipy import stats

        return stats.t(self.df, self.loc, self.scale)

    # The t distribution's functions written out with scipy.stats.t's arithmetic (the same
    # numbers, checked in tests/test_priors.py): no scipy.stats import, and a new prior
    # (each point of a sensitivity map is one) costs nothing to make, where a frozen scipy
    # distribution takes about 1.5 ms.
    def _standard(self, x: Any) -> np.ndarray:
        return (np.asarray(x, dtype=float) - self.loc) / self.scale

    def pdf(self, x: Any) -> np.ndarray:
        z, df = self._standard(x), self.df
        log = (np.log(special.poch(0.5 * df, 0.5)) - 0.5 * (np.log(df) + np.log(np.pi))
               - (df + 1) / 2 * np.log1p(z * z / df))
        return np.exp(log) / self.scale

    def cdf(self, x: Any) -> np.ndarray:
        return special.stdtr(self.df, self._standard(x))

    def sf(self, x: Any) -> np.ndarray:
        return special.stdtr(self.df, -self._standard(x))

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return float(self.sf(x))

    def ppf(self, q: float) -> float:
        return float(special.stdtrit(self.df, _q(q, self)) * self.scale + self.loc)

    def _ppf_at(self, levels: np.ndarray) -> np.ndarray:
        return special.stdtrit(self.df, np.asarray(levels, dtype=float)) * self.scale + self.loc

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        # as scipy.stats.t.rvs draws them
        return _rng(seed).standard_t(self.df, size=size) * self.scale + self.loc

    def support(self) -> tuple[float, float]:
        return (-math.inf, math.inf)

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
        return float(self.df / (self.df - 2.0) * self.scale * self.scale)

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
        if not math.isfinite(self.upper - self.lower):  # two huge bounds
            raise AssuranceInputError(
                f"The 'upper' parameter of Uniform must be within a finite width of "
                f"lower={self.lower!r}. Got {upper!r} instead.")

    def _make_dist(self) -> Any:
        from scipy import stats

        return stats.uniform(self.lower, self.upper - self.lower)

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
        self._a, self._b = a, b

    def _make_dist(self) -> Any:
        from scipy import stats

        return stats.truncnorm(self._a, self._b, loc=self.mu, scale=self.sigma)

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

    The distribution is checked when the prior is made: it must be one whose distribution
    and quantile functions are fast (:data:`FAST_SCIPY_DISTRIBUTIONS`; others integrate or
    invert numerically at every point and can take hours over a plan), its parameters
    must be single finite numbers that scipy accepts (``scale > 0``), and its quantiles at
    a few probabilities must be finite and agree with its distribution function.

    Parameters
    ----------
    dist
        A frozen continuous distribution, e.g. ``scipy.stats.logistic(loc=1, scale=0.5)``.
    allow_slow
        Accept a distribution outside :data:`FAST_SCIPY_DISTRIBUTIONS` (a user-defined one,
        say) whose functions may be slow; its parameters are still checked.

    Examples
    --------
    >>> from scipy import stats
    >>> prior = FromScipy(stats.logistic(loc=1.0, scale=0.5))
    >>> round(prior.cdf(1.0).item(), 3)
    0.5
    >>> FromScipy(stats.norm(0.0, -1.0))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    assurance.errors.AssuranceInputError: The 'scale' parameter of scipy.stats.norm ... > 0. ...
    """

    def __init__(self, dist: Any, *, allow_slow: bool = False, _negate: bool = False):
        if not _is_frozen_continuous(dist):
            raise AssuranceInputError(
                "The 'dist' parameter of FromScipy must be a frozen continuous scipy.stats "
                f"distribution, e.g. scipy.stats.logistic(loc=1, scale=0.5). Got {dist!r} instead."
            )
        if not isinstance(allow_slow, bool):
            raise AssuranceInputError(
                f"The 'allow_slow' parameter of FromScipy must be True or False. Got "
                f"{allow_slow!r} instead.")
        name = dist.dist.name
        owner = f"scipy.stats.{name} (in FromScipy)"
        if not allow_slow and name not in FAST_SCIPY_DISTRIBUTIONS:
            raise AssuranceInputError(
                f"The 'dist' parameter of FromScipy must be a distribution with fast "
                f"distribution and quantile functions ({_SCIPY_EXAMPLES}, ...; the list is "
                f"assurance.priors.families.FAST_SCIPY_DISTRIBUTIONS). scipy.stats.{name} "
                "computes them numerically at every point, which can take hours over a "
                f"plan; pass allow_slow=True to use it anyway. Got {_frozen_text(dist)} "
                "instead.")
        values, problems = _frozen_parameters(dist)
        if not problems:
            problems = scipy_parameter_problems(dist.dist, values)
        if problems:
            parameter, text = problems[0]
            if parameter:
                raise AssuranceInputError(f"The '{parameter}' parameter of {owner} {text} "
                                          f"instead. {scipy_takes(dist.dist)}")
            raise AssuranceInputError(f"The parameters of {owner} {text} instead.")
        self._dist = dist
        self._negate = _negate
        self._allow_slow = allow_slow

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

    def _ppf_at(self, levels: np.ndarray) -> np.ndarray:
        q = np.asarray(levels, dtype=float)
        return np.asarray(-self._dist.ppf(1 - q) if self._negate else self._dist.ppf(q),
                          dtype=float)

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
        return FromScipy(self._dist, allow_slow=self._allow_slow, _negate=not self._negate)


def _is_frozen_continuous(value: Any) -> bool:
    """Whether ``value`` is a frozen continuous scipy.stats distribution."""
    gen = getattr(value, "dist", None)
    if gen is None or not hasattr(value, "args") or not hasattr(value, "kwds"):
        return False
    from scipy import stats

    return isinstance(gen, stats.rv_continuous)


def _frozen_text(dist: Any) -> str:
    """``scipy.stats.gamma(2, scale=0.5)``: a frozen distribution as it was written."""
    args = [_short(a) for a in dist.args] + [f"{k}={_short(v)}" for k, v in dist.kwds.items()]
    text = f"scipy.stats.{dist.dist.name}({', '.join(args)})"
    return text if len(text) <= 80 else text[:77] + "..."


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def scipy_parameter_names(gen: Any) -> list[str]:
    """Names of the parameters of a scipy.stats distribution: its shapes, loc and scale.

    Examples
    --------
    >>> from scipy import stats
    >>> scipy_parameter_names(stats.gamma)
    ['a', 'loc', 'scale']
    """
    shapes = [s.strip() for s in (gen.shapes or "").split(",") if s.strip()]
    return [*shapes, "loc", "scale"]


def scipy_takes(gen: Any) -> str:
    """``scipy.stats.gamma takes a, loc, scale.``: for messages."""
    return f"scipy.stats.{gen.name} takes {', '.join(scipy_parameter_names(gen))}."


def _frozen_parameters(dist: Any) -> tuple[dict[str, Any], list[tuple[str, str]]]:
    """A frozen distribution's parameters by name (positional ones named)."""
    names = scipy_parameter_names(dist.dist)
    values = dict(zip(names, dist.args, strict=False))
    if len(dist.args) > len(names):
        return values, [("", f"must be at most {len(names)} ({', '.join(names)}). Got "
                         f"{len(dist.args)} positional values")]
    for key, value in dist.kwds.items():
        values[key] = value
    return values, []


def _domain_text(info: Any) -> tuple[str, Any]:
    """('a number > 0', test) for one shape parameter, from scipy's description of it."""
    lo, hi = (float(v) for v in info.domain)
    lo_in, hi_in = info.inclusive
    parts, tests = [], []
    if lo > -math.inf:
        if 0 < lo < 1e-300:  # scipy writes "> 0" as the smallest positive float
            lo, lo_in = 0.0, False
        parts.append(f"{'>=' if lo_in else '>'} {lo:g}")
        tests.append((lambda v, lo=lo, inc=lo_in: v >= lo if inc else v > lo))
    if hi < math.inf:
        parts.append(f"{'<=' if hi_in else '<'} {hi:g}")
        tests.append((lambda v, hi=hi, inc=hi_in: v <= hi if inc else v < hi))
    kind = "a whole number" if info.integrality else "a finite number"
    if info.integrality:
        tests.append(lambda v: float(v).is_integer())
    text = f"{kind} {' and '.join(parts)}" if parts else kind
    return text, (lambda v: all(t(v) for t in tests))


def scipy_parameter_problems(gen: Any, values: Mapping[str, Any]) -> list[tuple[str, str]]:
    """What is wrong with parameters for a scipy.stats distribution, in plain words.

    Each problem is ``(parameter, text)`` with ``parameter`` empty when the problem is the
    set as a whole; ``text`` says what is allowed and ends with what was given (``must be
    a finite number > 0. Got -1.0``). Names, finiteness, ``scale > 0``, each shape's own
    range, the shapes together, and the quantiles at a few probabilities (finite, in
    order, and matching the distribution function) are checked.

    Examples
    --------
    >>> from scipy import stats
    >>> scipy_parameter_problems(stats.gamma, {"a": -1.0})
    [('a', 'must be a finite number > 0. Got -1.0')]
    >>> scipy_parameter_problems(stats.gamma, {"a": 2.0, "scale": 0.5})
    []
    """
    names = scipy_parameter_names(gen)
    shapes = names[:-2]
    problems: list[tuple[str, str]] = []
    for key in values:
        if key not in names:
            problems.append((str(key), f"is not a parameter of scipy.stats.{gen.name}. Got "
                                       f"{_short(values[key])}"))
    for key in shapes:
        if key not in values:
            problems.append((key, "is required (a shape of the distribution). Got nothing"))
    if problems:
        return problems
    clean: dict[str, float] = {}
    for key, value in values.items():
        ok = (not isinstance(value, bool) and np.ndim(value) == 0
              and isinstance(value, int | float | np.integer | np.floating)
              and math.isfinite(float(value)))
        if not ok:
            problems.append((key, f"must be a single finite number. Got {_short(value)}"))
        else:
            clean[key] = float(value)
    if "scale" in clean and not clean["scale"] > 0:
        problems.append(("scale", f"must be a finite number > 0. Got {clean['scale']!r}"))
    try:
        infos = {info.name: info for info in gen._shape_info()}
    except Exception:  # noqa: BLE001 - an older or user-made distribution: checked together
        infos = {}
    for key in shapes:
        if key in clean and key in infos:
            text, test = _domain_text(infos[key])
            if not test(clean[key]):
                problems.append((key, f"must be {text}. Got {clean[key]!r}"))
    if problems:
        return problems
    given = ", ".join(f"{k}={clean[k]:g}" for k in names if k in clean)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            frozen = gen(**clean)
            lo, hi = (float(v) for v in frozen.support())
            probs = np.array([1e-3, 0.1, 0.5, 0.9, 1 - 1e-3])
            x = np.asarray(frozen.ppf(probs), dtype=float)
            back = np.asarray(frozen.cdf(x), dtype=float)
        except Exception as exc:  # noqa: BLE001 - scipy's own refusal, in its words
            return [("", f"are not accepted by scipy ({_short(exc)}). Got {given}")]
    if math.isnan(lo) or math.isnan(hi) or not lo < hi:
        return [("", f"do not fit together (scipy gives no distribution for them). Got "
                     f"{given}")]
    if not (np.all(np.isfinite(x)) and np.all(np.diff(x) >= 0) and np.all(np.isfinite(back))
            and np.allclose(back, probs, rtol=0, atol=1e-4)):
        return [("", f"give quantiles that are not finite or do not match the distribution "
                     f"function at probabilities 0.001 to 0.999 (quantiles "
                     f"{', '.join(f'{v:.4g}' for v in x)}); choose other values. Got {given}")]
    return []


def _sum_tolerance(weights: Sequence[Any]) -> float:
    """How far from 1 the weights may sum, for the precision they are given in.

    Double precision: 1e-9. Lower precision (float32 numbers, whose rounding alone moves a
    sum by about 1e-7): five units in the last place per weight, about 1.2e-6 for two
    float32 weights; half precision likewise.
    """
    eps = max((float(np.finfo(v.dtype).eps) for v in weights
               if isinstance(v, np.floating)), default=0.0)
    return max(1e-9, 5 * eps * max(1, len(weights)))


class Mixture(Prior):
    """Finite mixture of priors with weights summing to one.

    Weights are accepted when they sum to 1 within the rounding of their precision (1e-9
    for ordinary floats, about 1e-6 for float32) and are then divided by their sum.

    Examples
    --------
    >>> prior = Mixture([PointMass(0.0), Normal(2.0, 1.0)], weights=[0.3, 0.7])
    >>> round(prior.prob_above(0.0), 4)  # 0.7 * P(N(2, 1) > 0)
    0.6841
    """

    def __init__(self, components: Sequence[Prior], weights: Sequence[float]):
        components = list(components)
        if isinstance(weights, str) or not hasattr(weights, "__iter__"):
            raise AssuranceInputError(
                "The 'weights' parameter of Mixture must be a list of numbers, one per "
                f"component. Got {_short(weights)} instead.")
        if isinstance(weights, np.ndarray) and weights.ndim != 1:
            raise AssuranceInputError(
                "The 'weights' parameter of Mixture must be a flat list of numbers, one per "
                f"component. Got an array of shape {weights.shape} instead.")
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
        tolerance = _sum_tolerance(weights)
        w = [check_real(v, "weights", "Mixture", low=0, high=1 + tolerance) for v in weights]
        total = math.fsum(w)
        if abs(total - 1.0) > tolerance:
            raise AssuranceInputError(
                f"The 'weights' parameter of Mixture must sum to 1 (within {tolerance:g}, "
                f"for numbers of this precision). Got {_short(weights)} (sum {total:.10g}) "
                "instead."
            )
        w = [v / total for v in w]  # exactly normalised: rounding in the given weights removed
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

    # sigma^2 ~ InvGamma(a = df/2, scale b = df*scale^2/2), sigma = sqrt(sigma^2). The
    # inverse gamma's functions are written out with scipy.stats.invgamma's arithmetic (the
    # same numbers, checked in tests/test_priors.py) so that a plan with an uncertain SD
    # need not import scipy.stats (about 0.5 s).
    @property
    def _ab(self) -> tuple[float, float]:
        return self.df / 2, self.df * self.scale**2 / 2

    def _var_cdf(self, v: np.ndarray) -> np.ndarray:
        a, b = self._ab
        with np.errstate(divide="ignore", over="ignore"):  # v / b of 0 or inf: cdf 0 or 1
            return special.gammaincc(a, 1.0 / (v / b))

    def _var_ppf(self, q: Any) -> Any:
        a, b = self._ab
        return 1.0 / special.gammainccinv(a, q) * b

    def pdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        safe = np.where(x > 0, x, 1.0)
        a, b = self._ab
        with np.errstate(divide="ignore", over="ignore", under="ignore", invalid="ignore"):
            u = safe**2 / b
            var_pdf = np.exp(-(a + 1) * np.log(u) - special.gammaln(a) - 1.0 / u) / b
        # where the square leaves the range of doubles the density is 0 (as scipy's)
        return np.where((x > 0) & (u > 0) & (u < math.inf), var_pdf * 2 * safe, 0.0)

    def cdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        with np.errstate(over="ignore", under="ignore"):  # a square beyond doubles: 1 or 0
            return np.where(x > 0, self._var_cdf(np.where(x > 0, x, 1.0) ** 2), 0.0)

    def sf(self, x: Any) -> np.ndarray:
        return 1.0 - self.cdf(x)

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return float(self.sf(x))

    def ppf(self, q: float) -> float:
        return float(np.sqrt(self._var_ppf(_q(q, self))))

    def sample(self, size: int, seed: RandomLike = None) -> np.ndarray:
        size = _size(size, self)
        # by inversion of uniform draws, as scipy.stats.invgamma.rvs draws them
        return np.sqrt(self._var_ppf(_rng(seed).uniform(size=size)))

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
        a, b = self._ab
        return float(1.0 / (a - 1.0) * b - self.mean() ** 2)

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
    if _is_frozen_continuous(value):
        return FromScipy(value)
    raise AssuranceInputError(
        f"The '{name}' parameter of {owner} must be a prior (e.g. assurance.Normal(3, 2)), a "
        f"number, or a frozen continuous scipy.stats distribution. Got {value!r} instead."
    )
