"""Bayesian success rules: "the posterior probability that the effect beats a value is high".

Under a normal approximation for the estimate, ``d | delta ~ N(delta, se^2)``, and an analysis
prior that is flat, normal, or a mixture of normals (and point masses), the posterior
probability ``P(delta > b | d)`` rises with ``d``. So the rule "success iff
``P(delta > b | d) >= gamma``" is again a threshold on the estimate, ``d > c(se)``, and every
computation of :mod:`assurance.compute` applies unchanged. The analysis prior is the one the
final analysis will use; it is separate from the design prior that generates the truth.

Rules here follow the interface of :class:`assurance.rules.Significance`:
``critical_z()``, ``critical_t(df)``, ``threshold(scale, critical)``,
``lowest_passable_effect()``, ``limit_success_at(effect)``, ``kink_ratio(...)`` and
``on_benefit_scale(endpoint, analysis_prior)``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import special

from .._validation import check_real
from ..errors import AssuranceInputError
from ..priors.families import Normal, PointMass, Prior

__all__ = ["PosteriorProbability", "AllOf", "AnyOf", "MinimumEstimate", "posterior_prob_above"]


def _check_analysis_prior(prior: Prior | None, owner: str) -> Prior | None:
    if prior is None:
        return None
    if not isinstance(prior, Prior) or not all(
        isinstance(part, Normal | PointMass) for _, part in prior.parts()
    ):
        raise AssuranceInputError(
            f"The 'analysis_prior' parameter of {owner} must be None (flat), a Normal, or a "
            f"Mixture of Normal and PointMass parts. Got {prior!r} instead."
        )
    return prior


_LOG_SQRT_2PI = 0.5 * math.log(2 * math.pi)


def _normal_logpdf(x: Any, mean: float, sd: Any) -> np.ndarray:
    """Log density of N(mean, sd^2) at x (scipy.stats.norm.logpdf without importing it)."""
    z = (np.asarray(x, dtype=float) - mean) / sd
    return -0.5 * z * z - np.log(sd) - _LOG_SQRT_2PI


def posterior_prob_above(prior: Prior | None, estimate: Any, se: Any, value: float
                         ) -> np.ndarray:
    """``P(delta > value | d)`` for ``d | delta ~ N(delta, se^2)`` and an analysis prior.

    Parameters
    ----------
    prior
        None for a flat prior, a :class:`~assurance.priors.Normal`, or a mixture of normals
        and point masses (components are re-weighted by their marginal likelihood).
    estimate, se
        Broadcastable arrays.
    value
        The effect the posterior probability is about.

    Notes
    -----
    Normal prior ``N(m0, v0)``: the posterior is normal with variance
    ``v1 = 1 / (1/v0 + 1/se^2)`` and mean ``v1 (m0/v0 + d/se^2)`` (Spiegelhalter, Abrams &
    Myles 2004, ch. 3).

    Examples
    --------
    >>> round(float(posterior_prob_above(None, 1.96, 1.0, 0.0)), 4)  # flat prior
    0.975
    """
    d, s = np.broadcast_arrays(np.asarray(estimate, float), np.asarray(se, float))
    if prior is None:
        return special.ndtr((d - value) / s)
    parts = prior.parts()
    logw, probs = [], []
    for weight, part in parts:
        if isinstance(part, PointMass):
            logw.append(math.log(weight) + _normal_logpdf(d, part.value, s))
            probs.append(np.full(d.shape, 1.0 if part.value > value else 0.0))
        else:
            v0 = part.sigma**2
            v1 = 1.0 / (1.0 / v0 + 1.0 / s**2)
            m1 = v1 * (part.mu / v0 + d / s**2)
            logw.append(math.log(weight) + _normal_logpdf(d, part.mu, np.sqrt(v0 + s**2)))
            probs.append(special.ndtr((m1 - value) / np.sqrt(v1)))
    logw_arr = np.array(logw)
    w = np.exp(logw_arr - logw_arr.max(axis=0))
    w /= w.sum(axis=0)
    return np.clip(np.sum(w * np.array(probs), axis=0), 0.0, 1.0)


@dataclass(frozen=True)
class PosteriorProbability:
    """Success iff the posterior probability that the effect beats ``beyond`` reaches ``level``.

    Parameters
    ----------
    level
        Required posterior probability, in (0, 1) (for example 0.975).
    beyond
        The effect the posterior probability is about (natural scale: a difference, or a
        ratio for ratio endpoints; "beats" means "is better than", so below it when lower is
        better). Default: no effect (0, or ratio 1 for ratio endpoints).
    analysis_prior
        Set by the design (its ``analysis_prior``) when the rule is put on the benefit
        scale; a flat prior when None. Normal, or a mixture of normals and point masses.

    Notes
    -----
    With a flat analysis prior, ``P(delta > b | d) >= gamma`` iff ``d > b + z_gamma se``: the
    rule has the operating characteristics of a one-sided test of ``delta <= b`` at level
    ``1 - gamma`` (common practice). With a normal prior ``N(m0, v0)`` the threshold is
    ``c = se^2 ((b + z_gamma sqrt(v1)) / v1 - m0 / v0)``; for mixtures it is found by
    bisection, since the posterior probability rises with ``d``.

    Examples
    --------
    >>> rule = PosteriorProbability(0.975)
    >>> round(float(rule.threshold(1.0, rule.critical_z())), 4)  # flat prior: 1.96 se
    1.96
    """

    level: float = 0.975
    beyond: float | None = None
    analysis_prior: Prior | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        owner = "PosteriorProbability"
        object.__setattr__(self, "level", check_real(self.level, "level", owner, low=0,
                                                     high=1, low_open=True, high_open=True))
        if self.beyond is not None:
            object.__setattr__(self, "beyond", check_real(self.beyond, "beyond", owner))
        if self.analysis_prior is not None and not isinstance(self.analysis_prior, Prior):
            raise AssuranceInputError(
                f"The 'analysis_prior' parameter of {owner} must be a prior or None. "
                f"Got {self.analysis_prior!r} instead.")

    # -- interface shared with Significance ------------------------------------------------
    @property
    def one_sided_alpha(self) -> float:
        """``1 - level``: the one-sided type I error at ``beyond`` under a flat prior."""
        return 1.0 - self.level

    @property
    def null_value(self) -> float:
        return 0.0 if self.beyond is None else self.beyond

    def critical_z(self) -> float:
        return float(special.ndtri(self.level))

    def critical_t(self, df: Any) -> np.ndarray:
        return special.stdtrit(df, self.level)  # the t quantile

    def threshold(self, se: Any, critical: Any) -> np.ndarray:
        """Estimate threshold ``c`` for standard error(s) ``se`` (``critical`` = z or t)."""
        se = np.asarray(se, dtype=float)
        crit = np.asarray(critical, dtype=float)
        b = self.null_value
        prior = self.analysis_prior
        if prior is None:
            return b + crit * se
        _check_analysis_prior(prior, "PosteriorProbability.threshold")
        parts = prior.parts()
        if len(parts) == 1 and isinstance(parts[0][1], Normal):
            m0, v0 = parts[0][1].mu, parts[0][1].sigma ** 2
            v1 = 1.0 / (1.0 / v0 + 1.0 / se**2)
            return se**2 * ((b + crit * np.sqrt(v1)) / v1 - m0 / v0)
        return self._bisect(se, crit)

    def _bisect(self, se: np.ndarray, crit: np.ndarray) -> np.ndarray:
        # The posterior probability rises with d: bisect for the d where it reaches
        # Phi(crit). For a z analysis that is the level itself; for a t analysis the t
        # quantile stands in for the normal score, as in the closed form for a normal prior
        # (a plug-in with the sample SD).
        se, crit = np.broadcast_arrays(se, crit)
        target = special.ndtr(crit)
        span = 50.0 * se + 10.0 * max(1.0, abs(self.null_value))
        lo = self.null_value - span
        hi = self.null_value + span
        for _ in range(100):
            mid = 0.5 * (lo + hi)
            above = posterior_prob_above(self.analysis_prior, mid, se, self.null_value) >= target
            hi = np.where(above, mid, hi)
            lo = np.where(above, lo, mid)
        return hi

    def kink_ratio(self, se: Any, critical: Any) -> None:
        return None

    def lowest_passable_effect(self) -> float:
        return self.null_value

    def limit_success_at(self, effect: float) -> float:
        b = self.null_value
        if effect > b:
            return 1.0
        if effect < b:
            return 0.0
        return 1.0 - self.level

    def on_benefit_scale(self, endpoint: Any, analysis_prior: Prior | None = None
                         ) -> PosteriorProbability:
        """The rule with ``beyond`` and the analysis prior mapped to the benefit scale."""
        beyond = 0.0 if self.beyond is None else float(endpoint.to_benefit(self.beyond))
        prior = analysis_prior if analysis_prior is not None else self.analysis_prior
        prior = None if prior is None else endpoint.benefit_prior(prior)
        return PosteriorProbability(self.level, beyond + 0.0, prior)

    def describe(self) -> str:
        where = "no effect" if self.beyond is None else f"{self.beyond:g}"
        return (f"posterior probability of an effect better than {where} at least "
                f"{self.level:g}")

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "posterior_probability", "level": self.level, "beyond": self.beyond}


@dataclass(frozen=True)
class _Combined:
    """Several threshold rules joined: ``AllOf`` (every one met) or ``AnyOf`` (at least one).

    Subclasses name the joining: ``_strict`` is True when every rule must hold, so the
    threshold is the largest of the rules' thresholds (the smallest for ``AnyOf``).
    """

    rules: Sequence[Any]
    _strict = True
    _word = "and"
    _kind = "all_of"

    def __post_init__(self) -> None:
        rules = tuple(self.rules)
        if not rules:
            raise AssuranceInputError(
                f"The 'rules' parameter of {type(self).__name__} must hold at least one rule. "
                "Got none.")
        object.__setattr__(self, "rules", rules)

    def _pick(self, values: Any) -> Any:
        return max(values) if self._strict else min(values)

    @property
    def one_sided_alpha(self) -> float:
        alphas = [r.one_sided_alpha for r in self.rules]
        return min(alphas) if self._strict else max(alphas)

    @property
    def null_value(self) -> float:
        return self._pick(r.null_value for r in self.rules)

    def critical_z(self) -> tuple:
        return tuple(r.critical_z() for r in self.rules)

    def critical_t(self, df: Any) -> tuple:
        return tuple(r.critical_t(df) for r in self.rules)

    def threshold(self, se: Any, critical: Sequence[Any]) -> np.ndarray:
        values = np.broadcast_arrays(*[r.threshold(se, c)
                                       for r, c in zip(self.rules, critical, strict=True)])
        return np.maximum.reduce(values) if self._strict else np.minimum.reduce(values)

    def kink_ratio(self, se: Any, critical: Any) -> None:
        return None

    def lowest_passable_effect(self) -> float:
        return self._pick(r.lowest_passable_effect() for r in self.rules)

    def limit_success_at(self, effect: float) -> float:
        limits = [r.limit_success_at(effect) for r in self.rules]
        return min(limits) if self._strict else max(limits)

    def on_benefit_scale(self, endpoint: Any, analysis_prior: Prior | None = None) -> Any:
        return type(self)(tuple(_on_benefit(r, endpoint, analysis_prior) for r in self.rules))

    def describe(self) -> str:
        return f" {self._word} ".join(r.describe() for r in self.rules)

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self._kind, "rules": [_rule_dict(r) for r in self.rules]}


@dataclass(frozen=True)
class AllOf(_Combined):
    """Success only when every one of several threshold rules is met.

    On the estimate this is the largest of the rules' thresholds. Used for combined rules
    ("significant and at least a minimum observed effect", "probably better than the
    minimum acceptable value and plausibly better than the target").

    Examples
    --------
    >>> rule = AllOf((PosteriorProbability(0.9, beyond=0.0), PosteriorProbability(0.5, 1.0)))
    >>> round(float(rule.threshold(1.0, rule.critical_z())), 4)  # max(1.2816, 1.0)
    1.2816
    """


@dataclass(frozen=True)
class AnyOf(_Combined):
    """Success when at least one of several threshold rules is met (smallest threshold).

    Examples
    --------
    >>> rule = AnyOf((PosteriorProbability(0.9, beyond=0.0), PosteriorProbability(0.5, 1.0)))
    >>> round(float(rule.threshold(1.0, rule.critical_z())), 4)  # min(1.2816, 1.0)
    1.0
    """

    _strict = False
    _word = "or"
    _kind = "any_of"


def _on_benefit(rule: Any, endpoint: Any, analysis_prior: Prior | None) -> Any:
    if hasattr(rule, "on_benefit_scale"):
        return rule.on_benefit_scale(endpoint, analysis_prior)
    return endpoint.benefit_rule(rule)


def _rule_dict(rule: Any) -> dict[str, Any]:
    if hasattr(rule, "to_dict"):
        return rule.to_dict()
    return {"kind": "significance", "alpha": rule.alpha, "sided": rule.sided,
            "margin": rule.margin, "min_estimate": rule.min_estimate}



@dataclass(frozen=True)
class MinimumEstimate:
    """Success iff the observed effect is at least ``value`` (natural scale; "at least" means
    "at most" when lower is better). Combine with another rule through :class:`AllOf`.

    Examples
    --------
    >>> float(MinimumEstimate(2.0).threshold(0.5, 0.0))
    2.0
    """

    value: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", check_real(self.value, "value", "MinimumEstimate"))

    one_sided_alpha = 0.5

    @property
    def null_value(self) -> float:
        return self.value

    def critical_z(self) -> float:
        return 0.0

    def critical_t(self, df: Any) -> np.ndarray:
        return np.zeros_like(np.asarray(df, dtype=float))

    def threshold(self, se: Any, critical: Any) -> np.ndarray:
        shape = np.broadcast(np.asarray(se), np.asarray(critical)).shape
        return np.full(shape, self.value)

    def kink_ratio(self, se: Any, critical: Any) -> None:
        return None

    def lowest_passable_effect(self) -> float:
        return self.value

    def limit_success_at(self, effect: float) -> float:
        return 1.0 if effect > self.value else (0.5 if effect == self.value else 0.0)

    def on_benefit_scale(self, endpoint: Any, analysis_prior: Prior | None = None
                         ) -> MinimumEstimate:
        return MinimumEstimate(float(endpoint.to_benefit(self.value)) + 0.0)

    def describe(self) -> str:
        return f"observed effect at least as good as {self.value:g}"

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "minimum_estimate", "value": self.value}
