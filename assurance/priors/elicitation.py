"""Priors fitted to an expert's judgements.

An expert states what they believe as probabilities: "the hazard ratio is as likely to be
below 0.8 as above it" (a median), "I am 90% sure it is below 1.0" (a 0.9 quantile), "70%
sure the response rate lies between 0.2 and 0.4" (an interval). :func:`fit_prior` finds the
member of a chosen family whose distribution function comes closest to these statements,
reports the elicited beside the fitted probabilities, and refuses (or warns about) a fit
that misses a statement by more than a tolerance. :func:`linear_pool` combines several
experts into one mixture, and :func:`plot_fit` draws the fitted distribution function
through the elicited points.

Scales
------
``normal``, ``t`` and ``gamma`` return a prior on the quantity the statements are about;
``beta`` too (a rate or proportion in [0, 1]). ``lognormal`` is for ratios (hazard, odds,
rate ratios): the statements are about the ratio, and the prior returned is the normal prior
on its **logarithm**, because ratio endpoints take their design prior on the log ratio
(:class:`~assurance.design.TrialDesign`). :attr:`PriorFit.scale` says which (``"natural"`` or
``"log"``).

Examples
--------
>>> from assurance.priors.elicitation import Quantile, fit_prior
>>> fit = fit_prior([Quantile(0.8, 0.5), Quantile(1.0, 0.9)], family="lognormal")
>>> fit.scale, fit.method
('log', 'closed form')
>>> round(fit.prior.mean(), 4), round(fit.prior.sd(), 4)  # log 0.8, log(1/0.8) / z_0.9
(-0.2231, 0.1741)
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_real
from ..errors import AssuranceInputError, AssuranceWarning
from .families import FromScipy, Mixture, Normal, Prior, StudentT, _Continuous

__all__ = [
    "Quantile",
    "Interval",
    "Beta",
    "Gamma",
    "PriorFit",
    "fit_prior",
    "linear_pool",
    "FAMILIES",
]

#: Families :func:`fit_prior` can fit, in the order used to break ties in ``"best"``.
FAMILIES = ("normal", "lognormal", "gamma", "beta", "t")

Family = Literal["normal", "t", "lognormal", "beta", "gamma", "best"]


# ------------------------------------------------------------------------------------------
# two extra prior families (rates and positive quantities)
# ------------------------------------------------------------------------------------------
class Beta(_Continuous):
    """Beta prior on a rate or proportion in [0, 1], ``Beta(a, b)``.

    Examples
    --------
    >>> round(Beta(2.0, 8.0).mean(), 3)
    0.2
    """

    def __init__(self, a: float, b: float):
        self.a = check_real(a, "a", "Beta", low=0, low_open=True)
        self.b = check_real(b, "b", "Beta", low=0, low_open=True)

    def _make_dist(self) -> Any:
        from scipy import stats

        return stats.beta(self.a, self.b)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "beta", "a": self.a, "b": self.b}

    def negated(self) -> Prior:
        return FromScipy(self._dist, _negate=True)


class Gamma(_Continuous):
    """Gamma prior on a positive quantity (an event rate, say), shape and rate.

    Mean ``shape / rate``, variance ``shape / rate^2``.

    Examples
    --------
    >>> round(Gamma(4.0, 2.0).mean(), 3)
    2.0
    """

    def __init__(self, shape: float, rate: float):
        self.shape = check_real(shape, "shape", "Gamma", low=0, low_open=True)
        self.rate = check_real(rate, "rate", "Gamma", low=0, low_open=True)

    def _make_dist(self) -> Any:
        from scipy import stats

        return stats.gamma(self.shape, scale=1.0 / self.rate)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "gamma", "shape": self.shape, "rate": self.rate}

    def negated(self) -> Prior:
        return FromScipy(self._dist, _negate=True)


# ------------------------------------------------------------------------------------------
# statements
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Quantile:
    """The statement ``P(X <= value) = prob``: ``value`` is the expert's ``prob`` quantile.

    "Median hazard ratio 0.8" is ``Quantile(0.8, 0.5)``; "90% sure it is below 1.0" is
    ``Quantile(1.0, 0.9)``.

    Examples
    --------
    >>> Quantile(1.0, 0.9).describe()
    'P(X <= 1) = 0.9'
    """

    value: float
    prob: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", check_real(self.value, "value", "Quantile"))
        object.__setattr__(self, "prob", check_real(self.prob, "prob", "Quantile", low=0,
                                                    high=1, low_open=True, high_open=True))

    def describe(self) -> str:
        """The statement in symbols."""
        return f"P(X <= {self.value:g}) = {self.prob:g}"


@dataclass(frozen=True)
class Interval:
    """The statement ``P(lower < X <= upper) = prob``.

    Examples
    --------
    >>> Interval(0.2, 0.4, 0.7).describe()
    'P(0.2 < X <= 0.4) = 0.7'
    """

    lower: float
    upper: float
    prob: float

    def __post_init__(self) -> None:
        lower = check_real(self.lower, "lower", "Interval")
        upper = check_real(self.upper, "upper", "Interval", low=lower, low_open=True)
        object.__setattr__(self, "lower", lower)
        object.__setattr__(self, "upper", upper)
        object.__setattr__(self, "prob", check_real(self.prob, "prob", "Interval", low=0,
                                                    high=1, low_open=True, high_open=True))

    def describe(self) -> str:
        """The statement in symbols."""
        return f"P({self.lower:g} < X <= {self.upper:g}) = {self.prob:g}"


Statement = Quantile | Interval
StatementsLike = Sequence[Statement | tuple[float, float] | tuple[float, float, float]] | \
    Mapping[float, float]


def _as_statements(statements: Any, owner: str) -> tuple[Statement, ...]:
    """Accept statement objects, ``(value, prob)`` / ``(lower, upper, prob)`` tuples, or a
    mapping ``{value: prob}``; check that quantile levels rise with their values."""
    if isinstance(statements, Mapping):
        items: list[Any] = [Quantile(v, p) for v, p in statements.items()]
    elif isinstance(statements, str) or not isinstance(statements, Sequence):
        raise AssuranceInputError(
            f"The 'statements' parameter of {owner} must be a list of Quantile / Interval "
            f"statements, (value, prob) pairs, or a mapping {{value: prob}}. "
            f"Got {statements!r} instead."
        )
    else:
        items = list(statements)
    out: list[Statement] = []
    for item in items:
        if isinstance(item, Quantile | Interval):
            out.append(item)
        elif isinstance(item, tuple | list) and len(item) == 2:
            out.append(Quantile(*item))
        elif isinstance(item, tuple | list) and len(item) == 3:
            out.append(Interval(*item))
        else:
            raise AssuranceInputError(
                f"The 'statements' parameter of {owner} must hold Quantile / Interval "
                f"statements, (value, prob) pairs or (lower, upper, prob) triples. "
                f"Got {item!r} instead."
            )
    if not out:
        raise AssuranceInputError(
            f"The 'statements' parameter of {owner} must hold at least one statement. "
            f"Got {statements!r} instead."
        )
    quantiles = sorted((s for s in out if isinstance(s, Quantile)), key=lambda s: s.value)
    for first, second in zip(quantiles, quantiles[1:], strict=False):
        if second.value == first.value or second.prob <= first.prob:
            raise AssuranceInputError(
                f"The 'statements' parameter of {owner} must have quantile levels that "
                f"increase with their values. Got {first.describe()} and "
                f"{second.describe()} instead: a larger value needs a larger probability."
            )
    return tuple(out)


# ------------------------------------------------------------------------------------------
# families: parameters on an unconstrained working scale
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Spec:
    """How one family is fitted.

    ``cdf(theta, x)`` is the distribution function on the working scale (the log for
    ``lognormal``), ``build(theta)`` the prior and its named parameters.
    """

    name: str
    n_params: int
    cdf: Callable[[np.ndarray, np.ndarray], np.ndarray]
    build: Callable[[np.ndarray], tuple[Prior, dict[str, float]]]
    starts: Callable[[float, float], list[np.ndarray]]
    bounds: tuple[list[float], list[float]]
    log_scale: bool = False
    domain: tuple[float, float] = (-math.inf, math.inf)
    closed_form: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None


def _normal_spec() -> _Spec:
    def cdf(t: np.ndarray, x: np.ndarray) -> np.ndarray:
        return special.ndtr((x - t[0]) / math.exp(t[1]))

    def build(t: np.ndarray) -> tuple[Prior, dict[str, float]]:
        mean, sd = float(t[0]), math.exp(t[1])
        return Normal(mean, sd), {"mean": mean, "sd": sd}

    def closed(x: np.ndarray, p: np.ndarray) -> np.ndarray:
        z = special.ndtri(p)
        sd = (x[1] - x[0]) / (z[1] - z[0])
        return np.array([x[0] - sd * z[0], math.log(sd)])

    return _Spec("normal", 2, cdf, build, lambda m, s: [np.array([m, math.log(s)])],
                 ([-np.inf, -50.0], [np.inf, 50.0]), closed_form=closed)


def _lognormal_spec() -> _Spec:
    base = _normal_spec()

    def build(t: np.ndarray) -> tuple[Prior, dict[str, float]]:
        prior, _ = base.build(t)
        return prior, {"log_mean": float(t[0]), "log_sd": math.exp(t[1]),
                       "median": math.exp(t[0])}

    return _Spec("lognormal", 2, base.cdf, build, base.starts, base.bounds, log_scale=True,
                 domain=(0.0, math.inf), closed_form=base.closed_form)


def _t_spec(df: float | None) -> _Spec:
    if df is not None:
        def cdf(t: np.ndarray, x: np.ndarray) -> np.ndarray:
            return special.stdtr(df, (x - t[0]) / math.exp(t[1]))

        def build(t: np.ndarray) -> tuple[Prior, dict[str, float]]:
            loc, scale = float(t[0]), math.exp(t[1])
            return StudentT(df, loc, scale), {"df": df, "loc": loc, "scale": scale}

        def closed(x: np.ndarray, p: np.ndarray) -> np.ndarray:
            z = special.stdtrit(df, p)
            scale = (x[1] - x[0]) / (z[1] - z[0])
            return np.array([x[0] - scale * z[0], math.log(scale)])

        return _Spec("t", 2, cdf, build, lambda m, s: [np.array([m, math.log(s)])],
                     ([-np.inf, -50.0], [np.inf, 50.0]), closed_form=closed)

    def cdf_free(t: np.ndarray, x: np.ndarray) -> np.ndarray:
        return special.stdtr(math.exp(t[2]), (x - t[0]) / math.exp(t[1]))

    def build_free(t: np.ndarray) -> tuple[Prior, dict[str, float]]:
        loc, scale, nu = float(t[0]), math.exp(t[1]), math.exp(t[2])
        return StudentT(nu, loc, scale), {"df": nu, "loc": loc, "scale": scale}

    def starts(m: float, s: float) -> list[np.ndarray]:
        return [np.array([m, math.log(s), math.log(nu)]) for nu in (3.0, 10.0, 50.0)]

    # df kept in [1, 1000]: at least a mean exists; beyond 1000 a t is a normal.
    return _Spec("t", 3, cdf_free, build_free, starts,
                 ([-np.inf, -50.0, 0.0], [np.inf, 50.0, math.log(1000.0)]))


def _beta_spec() -> _Spec:
    def cdf(t: np.ndarray, x: np.ndarray) -> np.ndarray:
        return special.betainc(math.exp(t[0]), math.exp(t[1]), np.clip(x, 0.0, 1.0))

    def build(t: np.ndarray) -> tuple[Prior, dict[str, float]]:
        a, b = math.exp(t[0]), math.exp(t[1])
        return Beta(a, b), {"a": a, "b": b}

    def starts(m: float, s: float) -> list[np.ndarray]:
        m = min(max(m, 0.02), 0.98)
        v = min(s * s, 0.5 * m * (1 - m))
        k = m * (1 - m) / v - 1
        out = [np.log([m * k, (1 - m) * k])]
        out += [np.log(ab) for ab in ([1.0, 1.0], [2.0, 5.0], [5.0, 2.0])]
        return out

    return _Spec("beta", 2, cdf, build, starts, ([-10.0, -10.0], [15.0, 15.0]),
                 domain=(0.0, 1.0))


def _gamma_spec() -> _Spec:
    def cdf(t: np.ndarray, x: np.ndarray) -> np.ndarray:
        return special.gammainc(math.exp(t[0]), np.maximum(x, 0.0) * math.exp(t[1]))

    def build(t: np.ndarray) -> tuple[Prior, dict[str, float]]:
        shape, rate = math.exp(t[0]), math.exp(t[1])
        return Gamma(shape, rate), {"shape": shape, "rate": rate}

    def starts(m: float, s: float) -> list[np.ndarray]:
        m = max(m, s / 2)
        shape = (m / s) ** 2
        return [np.log([shape, shape / m]), np.log([1.0, 1.0 / m]), np.log([10.0, 10.0 / m])]

    return _Spec("gamma", 2, cdf, build, starts, ([-10.0, -50.0], [15.0, 50.0]),
                 domain=(0.0, math.inf))


def _spec(family: str, df: float | None) -> _Spec:
    return {"normal": _normal_spec, "lognormal": _lognormal_spec, "beta": _beta_spec,
            "gamma": _gamma_spec}[family]() if family != "t" else _t_spec(df)


# ------------------------------------------------------------------------------------------
# the result
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PriorFit:
    """A prior fitted to elicited statements, and how well it matches them.

    Attributes
    ----------
    family
        ``"normal"``, ``"t"``, ``"lognormal"``, ``"beta"`` or ``"gamma"``.
    prior
        The fitted prior; for ``lognormal`` the normal prior on the log of the quantity.
    scale
        ``"natural"`` (the prior is on the quantity itself) or ``"log"`` (on its logarithm).
    parameters
        Named parameters of the fitted family.
    statements
        The statements, in the order given.
    elicited, fitted
        Elicited probabilities and the fitted prior's probabilities of the same events.
    sum_of_squares
        ``sum (fitted - elicited)^2``.
    method
        ``"closed form"`` (two quantiles determine a location-scale family exactly) or
        ``"least squares"``.
    tolerance
        Largest acceptable miss of one statement, on the probability scale.
    alternatives
        For ``family="best"``: the sum of squares of every family tried.
    """

    family: str
    prior: Prior
    scale: Literal["natural", "log"]
    parameters: dict[str, float]
    statements: tuple[Statement, ...]
    elicited: np.ndarray
    fitted: np.ndarray
    sum_of_squares: float
    method: str
    tolerance: float
    alternatives: dict[str, float] = field(default_factory=dict)

    @property
    def misses(self) -> np.ndarray:
        """``fitted - elicited`` per statement."""
        return self.fitted - self.elicited

    @property
    def acceptable(self) -> bool:
        """True when no statement is missed by more than :attr:`tolerance`."""
        return bool(np.max(np.abs(self.misses)) <= self.tolerance)

    def cdf(self, x: Any) -> np.ndarray:
        """Fitted distribution function of the quantity the statements are about."""
        x = np.asarray(x, dtype=float)
        if self.scale == "natural":
            return np.asarray(self.prior.cdf(x), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            inner = np.asarray(self.prior.cdf(np.log(np.where(x > 0, x, 1.0))), dtype=float)
        return np.where(x > 0, inner, 0.0)

    def ppf(self, q: float) -> float:
        """Fitted quantile of the quantity the statements are about."""
        value = self.prior.ppf(q)
        return math.exp(value) if self.scale == "log" else value

    def report(self) -> str:
        """Plain-text table: each statement, elicited and fitted probability, the miss."""
        scale = ("on the log of the quantity (a ratio endpoint's analysis scale)"
                 if self.scale == "log" else "on the quantity itself")
        width = max(len(s.describe()) for s in self.statements) + 2
        lines = [f"Fitted {self.family} prior ({self.method}): {self.prior.describe()}, "
                 f"{scale}.",
                 f"{'statement':<{width}}{'elicited':>10}{'fitted':>10}{'miss':>10}"]
        for s, e, f in zip(self.statements, self.elicited, self.fitted, strict=True):
            lines.append(f"{s.describe():<{width}}{e:>10.3f}{f:>10.3f}{f - e:>+10.3f}")
        lines.append(f"Sum of squared misses {self.sum_of_squares:.3g}; largest miss "
                     f"{np.max(np.abs(self.misses)):.3f} (tolerance {self.tolerance:g}).")
        if self.alternatives:
            lines.append("Families tried (sum of squares): " + ", ".join(
                f"{k} {v:.3g}" for k, v in self.alternatives.items()))
        if not self.acceptable:
            lines.append("WARNING: the fit misses at least one statement by more than the "
                         "tolerance; revisit the statements or the family.")
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """Plain values for results files and memos."""
        return {
            "family": self.family, "scale": self.scale, "method": self.method,
            "prior": self.prior.to_dict(), "parameters": dict(self.parameters),
            "statements": [s.describe() for s in self.statements],
            "elicited": self.elicited.tolist(), "fitted": self.fitted.tolist(),
            "sum_of_squares": self.sum_of_squares, "tolerance": self.tolerance,
            "acceptable": self.acceptable, "alternatives": dict(self.alternatives),
        }


# ------------------------------------------------------------------------------------------
# fitting
# ------------------------------------------------------------------------------------------
def _events(statements: Sequence[Statement], log: bool) -> tuple[np.ndarray, ...]:
    """Each statement as ``P(lo < X <= hi) = p`` on the working scale."""
    lo = np.array([-math.inf if isinstance(s, Quantile) else s.lower for s in statements])
    hi = np.array([s.value if isinstance(s, Quantile) else s.upper for s in statements])
    p = np.array([s.prob for s in statements])
    if log:
        with np.errstate(divide="ignore", invalid="ignore"):
            lo, hi = np.log(lo), np.log(hi)  # log 0 = -inf: an interval from 0
        lo = np.where(np.isnan(lo), -math.inf, lo)
    return lo, hi, p


def _check_domain(spec: _Spec, statements: Sequence[Statement]) -> str | None:
    """Why the family cannot describe the statements, or None.

    A quantile must lie strictly inside the family's range (the distribution function is 0
    or 1 at its ends); an interval must lie within it.
    """
    low, high = spec.domain
    if not (math.isfinite(low) or math.isfinite(high)):
        return None
    where = {"beta": "in (0, 1) (a beta prior lives on [0, 1])",
             "lognormal": "> 0 (a log-normal prior lives on positive values)",
             "gamma": "> 0 (a gamma prior lives on positive values)"}[spec.name]
    for s in statements:
        if isinstance(s, Quantile):
            bad = not low < s.value < high
        else:
            bad = s.lower < low or s.upper > high
        if bad:
            return (f"statement {s.describe()} has a value outside what a {spec.name} prior "
                    f"allows: values must be {where}")
    return None


def _residuals(spec: _Spec, lo: np.ndarray, hi: np.ndarray, p: np.ndarray
               ) -> Callable[[np.ndarray], np.ndarray]:
    finite_lo = np.isfinite(lo)

    def res(theta: np.ndarray) -> np.ndarray:
        upper = spec.cdf(theta, hi)
        lower = np.zeros_like(upper)
        if finite_lo.any():
            lower[finite_lo] = spec.cdf(theta, lo[finite_lo])
        return upper - lower - p

    return res


def _normal_start(lo: np.ndarray, hi: np.ndarray, p: np.ndarray) -> tuple[float, float]:
    """Rough location and spread on the working scale, from the statements."""
    quant = ~np.isfinite(lo)
    if quant.sum() >= 2:
        z = special.ndtri(p[quant])
        slope, intercept = np.polyfit(z, hi[quant], 1)
        if slope > 0:
            return float(intercept), float(slope)
    points = np.concatenate([hi, lo[np.isfinite(lo)]])
    centre = float(np.median(points))
    spread = float(np.ptp(points)) / 2 if points.size > 1 else abs(centre) / 2
    return centre, spread if spread > 0 else 1.0


def _fit_family(spec: _Spec, statements: tuple[Statement, ...]
                ) -> tuple[np.ndarray, float, str]:
    """Best working parameters, sum of squares and method for one family."""
    lo, hi, p = _events(statements, spec.log_scale)
    res = _residuals(spec, lo, hi, p)
    quant = ~np.isfinite(lo)
    if spec.closed_form is not None and len(statements) == 2 and quant.all():
        order = np.argsort(hi)
        theta = spec.closed_form(hi[order], p[order])
        return theta, float(np.sum(res(theta) ** 2)), "closed form"
    from scipy import optimize

    centre, spread = _normal_start(lo, hi, p)
    starts = []
    for mult in (1.0, 0.3, 3.0):
        starts.extend(spec.starts(centre, spread * mult))
    low_b, high_b = (np.asarray(b, dtype=float) for b in spec.bounds)
    best_theta, best_ss = None, math.inf
    for x0 in starts:
        x0 = np.clip(x0, low_b + 1e-9, high_b - 1e-9)
        with np.errstate(all="ignore"):
            try:
                sol = optimize.least_squares(res, x0, bounds=(low_b, high_b), method="trf",
                                             xtol=1e-15, ftol=1e-15, gtol=1e-15,
                                             max_nfev=2000)
            except (ValueError, FloatingPointError):  # pragma: no cover - odd start
                continue
        ss = float(np.sum(sol.fun ** 2))
        if np.all(np.isfinite(sol.x)) and ss < best_ss:
            best_theta, best_ss = sol.x, ss
    if best_theta is None:  # pragma: no cover - every start failed
        raise AssuranceInputError(
            f"fit_prior could not fit a {spec.name} prior to the statements "
            f"{[s.describe() for s in statements]}; try another family."
        )
    return best_theta, best_ss, "least squares"


def _make_fit(spec: _Spec, statements: tuple[Statement, ...], tolerance: float
              ) -> PriorFit:
    theta, ss, method = _fit_family(spec, statements)
    prior, params = spec.build(theta)
    lo, hi, p = _events(statements, spec.log_scale)
    fitted = _residuals(spec, lo, hi, p)(theta) + p
    return PriorFit(family=spec.name, prior=prior,
                    scale="log" if spec.log_scale else "natural", parameters=params,
                    statements=statements, elicited=p, fitted=fitted, sum_of_squares=ss,
                    method=method, tolerance=tolerance)


def fit_prior(
    statements: StatementsLike,
    family: Family = "normal",
    *,
    df: float | None = None,
    tolerance: float = 0.05,
    on_miss: Literal["raise", "warn"] = "raise",
) -> PriorFit:
    """Fit a prior to elicited quantiles or interval probabilities.

    Parameters
    ----------
    statements
        :class:`Quantile` and :class:`Interval` statements; ``(value, prob)`` pairs stand
        for quantiles, ``(lower, upper, prob)`` triples for intervals, and a mapping
        ``{value: prob}`` for a set of quantiles.
    family
        ``"normal"``, ``"t"`` (Student t; ``df`` fixed or, if None, fitted),
        ``"lognormal"`` (for ratios: returns the normal prior on the log ratio),
        ``"beta"`` (for rates in [0, 1]), ``"gamma"`` (for positive quantities), or
        ``"best"``: every family that can describe the statements, keeping the smallest
        sum of squares (ties within 1e-12 go to the fewer parameters, then the order of
        :data:`FAMILIES`).
    df
        Degrees of freedom of the t family (> 0); None fits it (needs 3 statements).
    tolerance
        Largest acceptable miss of a single statement on the probability scale, in (0, 1).
    on_miss
        What to do when the best member of the family misses a statement by more than
        ``tolerance``: ``"raise"`` an :class:`~assurance.errors.AssuranceInputError` naming
        the statement and the miss (default), or ``"warn"`` with an
        :class:`~assurance.errors.AssuranceWarning` and return the fit, whose
        :attr:`PriorFit.acceptable` is then False.

    Returns
    -------
    PriorFit
        The prior, the elicited against the fitted probabilities, the sum of squares.

    Raises
    ------
    AssuranceInputError
        Quantile levels that do not rise with their values, probabilities outside (0, 1),
        fewer statements than the family has parameters, values outside the family's range
        (a beta outside [0, 1], a log-normal or gamma at or below 0), or a fit that misses a
        statement by more than ``tolerance`` (with ``on_miss="raise"``).

    Notes
    -----
    A statement is an event ``lo < X <= hi`` (``lo = -inf`` for a quantile) with elicited
    probability ``p``. The fit minimises ``S(theta) = sum_j (F(hi_j) - F(lo_j) - p_j)^2``
    over the family's parameters (least squares on the distribution function), by a
    trust-region method from several starts. When two quantiles determine a location-scale
    family (normal, log-normal, t with fixed df) the solution is written down:
    ``scale = (x_2 - x_1) / (z_2 - z_1)``, ``location = x_1 - scale z_1`` with ``z`` the
    standard quantiles of the levels. With exactly as many statements as parameters any
    family that can bend to them matches exactly, so ``"best"`` can only discriminate with
    more statements than parameters.

    References
    ----------
    O'Hagan A, Buck CE, Daneshkhah A, et al. (2006). Uncertain Judgements: Eliciting
    Experts' Probabilities. Wiley (ch. 6, fitting distributions to elicited summaries).

    Examples
    --------
    >>> fit = fit_prior({2.0: 0.25, 3.0: 0.5, 4.5: 0.9}, family="normal")
    >>> fit.method
    'least squares'
    >>> bool(fit.acceptable)
    True
    """
    owner = "fit_prior"
    stmts = _as_statements(statements, owner)
    family = check_choice(family, "family", owner, [*FAMILIES, "best"])
    if df is not None:
        df = check_real(df, "df", owner, low=0, low_open=True)
    tolerance = check_real(tolerance, "tolerance", owner, low=0, high=1, low_open=True,
                           high_open=True)
    on_miss = check_choice(on_miss, "on_miss", owner, ["raise", "warn"])
    if family == "best":
        fit = _best(stmts, df, tolerance)
    else:
        spec = _spec(family, df)
        if len(stmts) < spec.n_params:
            extra = " (or give 'df' to fix the degrees of freedom)" if family == "t" else ""
            raise AssuranceInputError(
                f"The 'statements' parameter of {owner} must hold at least {spec.n_params} "
                f"statements to fit a {family} prior with {spec.n_params} parameters"
                f"{extra}. Got {len(stmts)} instead."
            )
        why = _check_domain(spec, stmts)
        if why:
            raise AssuranceInputError(
                f"The 'family' parameter of {owner} cannot be {family!r} for these "
                f"statements: {why}. Got family={family!r}."
            )
        fit = _make_fit(spec, stmts, tolerance)
    if not fit.acceptable:
        k = int(np.argmax(np.abs(fit.misses)))
        text = (f"The best {fit.family} prior ({fit.prior.describe()}) misses statement "
                f"{k + 1}, {stmts[k].describe()}: it gives {fit.fitted[k]:.3f}, off by "
                f"{fit.misses[k]:+.3f}, more than the tolerance {tolerance:g}. Revisit the "
                f"statements, try another family (or family='best'), or raise 'tolerance'.")
        if on_miss == "raise":
            raise AssuranceInputError(text)
        warnings.warn(text, AssuranceWarning, stacklevel=2)
    return fit


def _best(stmts: tuple[Statement, ...], df: float | None, tolerance: float) -> PriorFit:
    fits: list[tuple[int, PriorFit]] = []
    skipped: list[str] = []
    for name in FAMILIES:
        spec = _spec(name, df)
        why = _check_domain(spec, stmts)
        if why or len(stmts) < spec.n_params:
            skipped.append(why or f"a {name} prior needs {spec.n_params} statements")
            continue
        fits.append((spec.n_params, _make_fit(spec, stmts, tolerance)))
    if not fits:
        raise AssuranceInputError(
            "The 'statements' parameter of fit_prior must suit at least one family for "
            f"family='best'. Got {[s.describe() for s in stmts]}: " + "; ".join(skipped)
        )
    smallest = min(f.sum_of_squares for _, f in fits)
    # min() keeps the first of equals, so ties go to fewer parameters, then FAMILIES order
    _, best = min(((n, f) for n, f in fits if f.sum_of_squares <= smallest + 1e-12),
                  key=lambda nf: nf[0])
    return replace(best, alternatives={f.family: f.sum_of_squares for _, f in fits})


# ------------------------------------------------------------------------------------------
# several experts
# ------------------------------------------------------------------------------------------
def linear_pool(
    judgements: Sequence[PriorFit | Prior],
    weights: Sequence[float] | None = None,
) -> Mixture:
    """Combine several experts' priors by a weighted linear opinion pool.

    Parameters
    ----------
    judgements
        Fitted priors (:class:`PriorFit`) or priors, one per expert, all on the same scale.
    weights
        Non-negative weights summing to 1, one per expert; None gives equal weights.

    Returns
    -------
    Mixture
        The pooled prior: its distribution function is ``sum_i w_i F_i(x)``.

    Notes
    -----
    The linear pool keeps each expert's view as a component, so disagreement shows as a
    wider or multimodal prior rather than being averaged away (O'Hagan et al. 2006, ch. 9).

    References
    ----------
    Stone M (1961). The opinion pool. Annals of Mathematical Statistics 32:1339-1342.

    Examples
    --------
    >>> pooled = linear_pool([Normal(0.0, 1.0), Normal(2.0, 1.0)], [0.25, 0.75])
    >>> round(pooled.mean(), 3)
    1.5
    """
    owner = "linear_pool"
    if isinstance(judgements, PriorFit | Prior) or not isinstance(judgements, Sequence) \
            or not judgements:
        raise AssuranceInputError(
            f"The 'judgements' parameter of {owner} must be a non-empty list of priors or "
            f"prior fits. Got {judgements!r} instead."
        )
    priors: list[Prior] = []
    scales = set()
    for item in judgements:
        if isinstance(item, PriorFit):
            priors.append(item.prior)
            scales.add(item.scale)
        elif isinstance(item, Prior):
            priors.append(item)
        else:
            raise AssuranceInputError(
                f"The 'judgements' parameter of {owner} must hold priors or prior fits. "
                f"Got {item!r} instead."
            )
    if len(scales) > 1:
        raise AssuranceInputError(
            f"The 'judgements' parameter of {owner} must hold fits on one scale; got fits "
            "on the quantity itself and on its logarithm. Fit every expert with the same "
            "family type (e.g. all 'lognormal' for a ratio)."
        )
    if weights is None:
        w = [1.0 / len(priors)] * len(priors)
    else:
        if isinstance(weights, str) or not isinstance(weights, Sequence | np.ndarray) \
                or len(weights) != len(priors):
            raise AssuranceInputError(
                f"The 'weights' parameter of {owner} must hold one weight per expert "
                f"({len(priors)}). Got {weights!r} instead."
            )
        w = [check_real(v, "weights", owner, low=0, high=1) for v in weights]
        if abs(sum(w) - 1.0) > 1e-9:
            raise AssuranceInputError(
                f"The 'weights' parameter of {owner} must sum to 1. Got {list(weights)!r} "
                f"(sum {sum(w):.6g}) instead."
            )
    return Mixture(priors, w)


# ------------------------------------------------------------------------------------------
# figure
# ------------------------------------------------------------------------------------------
