"""Success rules applied to the posterior of the effect of a fitted analysis model.

The rules of :mod:`assurance.rules` are stated on the effect's natural scale; here they are
put on the benefit scale (the effect's sign flipped when lower is better) and applied either
to a normal (Laplace) approximation of the posterior, given by its mean and SD, or to
posterior draws (NUTS).
"""

from __future__ import annotations

from typing import Any, Literal

import numpy as np
from scipy import special

from ..errors import AssuranceInputError
from ..rules.posterior import AllOf, AnyOf, MinimumEstimate, PosteriorProbability
from ..rules.significance import Significance

__all__ = ["decides", "check_rule"]

_ALLOWED = "PosteriorProbability, Significance, MinimumEstimate, or AllOf / AnyOf of these"


class _Scale:
    """The smallest endpoint-like object the rules' ``on_benefit_scale`` needs."""

    ratio_scale = False

    def __init__(self, better: str) -> None:
        self.sign = -1.0 if better == "lower" else 1.0

    def to_benefit(self, value: float) -> float:
        return self.sign * value

    def benefit_prior(self, prior: Any) -> Any:  # never reached: refused in check_rule
        return prior


def check_rule(rule: Any, owner: str = "simulate_general") -> Any:
    """Return ``rule`` if these fits can apply it, or raise naming the allowed rules.

    An analysis prior on a :class:`PosteriorProbability` is refused: the analysis prior of a
    general model lives in its PyMC model.
    """
    if isinstance(rule, AllOf | AnyOf):
        for part in rule.rules:
            check_rule(part, owner)
        return rule
    if isinstance(rule, PosteriorProbability):
        if rule.analysis_prior is not None:
            raise AssuranceInputError(
                f"The 'rule' parameter of {owner} must not carry an analysis prior: the "
                f"analysis prior of a general model is written in its PyMC model. Got "
                f"{rule!r:.120} instead.")
        return rule
    if isinstance(rule, Significance | MinimumEstimate):
        return rule
    raise AssuranceInputError(
        f"The 'rule' parameter of {owner} must be {_ALLOWED}. Got {rule!r:.120} instead.")


def decides(rule: Any, better: Literal["higher", "lower"], mean: Any, sd: Any,
            draws: np.ndarray | None = None) -> np.ndarray:
    """Whether each fitted trial meets ``rule``.

    Parameters
    ----------
    rule
        A rule of :mod:`assurance.rules` on the effect's natural scale (see
        :func:`check_rule`).
    better
        ``"higher"`` or ``"lower"``.
    mean, sd
        Posterior mean (the mode for a Laplace fit) and SD of the effect, one per trial.
    draws
        Optionally, posterior draws of the effect, shape ``(trials, draws)``; then the
        posterior probability is the share of draws beyond the value, and ``mean`` / ``sd``
        should be the draws' mean and SD.

    Returns
    -------
    numpy.ndarray of bool, one per trial.

    Notes
    -----
    On the benefit scale (``b`` the rule's value there):

    * ``PosteriorProbability(level, b)``: ``Phi((mean - b) / sd) >= level`` for the normal
      approximation, ``mean(draws > b) >= level`` with draws.
    * ``Significance(alpha, sided, margin)``: the Wald form
      ``(mean + margin) / sd >= z_{1 - alpha'}`` with ``alpha' = alpha / 2`` when two-sided
      (and ``mean >= min_estimate`` when one is set). With vague analysis priors the
      posterior mode and SD are the maximum-likelihood estimate and its standard error, so
      this is the usual Wald test.
    * ``MinimumEstimate(v)``: ``mean >= v``.
    * ``AllOf`` / ``AnyOf``: every / any of the parts.

    Examples
    --------
    >>> decides(PosteriorProbability(0.975), "higher", [2.0, 1.9], [1.0, 1.0]).tolist()
    [True, False]
    >>> decides(Significance(0.025), "lower", [-2.0], [1.0]).tolist()
    [True]
    """
    check_rule(rule, "decides")
    scale = _Scale(better)
    mean = scale.sign * np.asarray(mean, dtype=float)
    sd = np.asarray(sd, dtype=float)
    if draws is not None:
        draws = scale.sign * np.asarray(draws, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return _decide(rule.on_benefit_scale(scale), mean, sd, draws)


def _decide(rule: Any, mean: np.ndarray, sd: np.ndarray, draws: np.ndarray | None
            ) -> np.ndarray:
    if isinstance(rule, AllOf):
        return np.logical_and.reduce([_decide(r, mean, sd, draws) for r in rule.rules])
    if isinstance(rule, AnyOf):
        return np.logical_or.reduce([_decide(r, mean, sd, draws) for r in rule.rules])
    if isinstance(rule, PosteriorProbability):
        if draws is not None:
            prob = np.mean(draws > rule.null_value, axis=-1)
        else:
            prob = special.ndtr((mean - rule.null_value) / sd)
        return np.asarray(prob >= rule.level)
    if isinstance(rule, Significance):
        ok = (mean - rule.null_value) / sd >= rule.critical_z()
        if rule.min_estimate is not None:
            ok &= mean >= rule.min_estimate
        return np.asarray(ok)
    return np.asarray(mean >= rule.value)  # MinimumEstimate
