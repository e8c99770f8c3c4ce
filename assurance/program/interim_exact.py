"""Exact predictive probability of success from responder counts at an interim look.

For a response (yes/no) endpoint the normal approximation of :mod:`.interim` is not needed:
with a beta prior on each arm's response rate, the rate after ``x`` responders among ``n``
patients is Beta(a + x, b + n - x), the responders among the ``m`` patients still to come
follow the beta-binomial law, and the final success rule is an exact region of final counts
(:func:`~assurance.compute.binary_exact.success_runs`: the same region the planning
computations use). So

``PP = sum over final counts (X_t, X_c) in the region of P(X_t | x_t) P(X_c | x_c)``,

with ``X = x + Y`` and ``Y ~ BetaBinomial(m, a + x, b + n - x)`` per arm (independent arms;
a single arm's reference rate is fixed). This is the predictive probability of Lee & Liu
(2008) for a single arm and a posterior-probability rule, and the same sum for any of the
package's exact tests and for two arms.

The beta priors used to predict are the analysis priors of a posterior-probability rule
(the final analysis's own beliefs, as in Lee & Liu), or uniform Beta(1, 1) priors when the
final analysis is a significance test (the counterpart of the flat prior of the normal
approximation); either can be replaced.

References
----------
Lee, J. J. & Liu, D. D. (2008). A predictive probability design for phase II cancer clinical
trials. Clinical Trials 5, 93-106.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import check_int
from ..compute.binary_exact import (
    PosteriorSpec,
    RateArm,
    beta_binomial_pmf,
    success_runs,
)
from ..errors import AssuranceInputError

__all__ = ["ExactPrediction", "exact_predictive_probability", "MAX_EXACT_TOTAL"]

#: Largest planned total for the exact sum (its work and memory grow with the planned size;
#: at this size a single arm takes a few seconds, and the normal approximation is close).
MAX_EXACT_TOTAL = 2_000_000


@dataclass(frozen=True)
class ExactPrediction:
    """The exact predictive probability of success and what it rests on.

    Attributes
    ----------
    probability
        Predictive probability that the final analysis succeeds.
    final_sizes
        Planned ``(treatment, control)`` patients at the final analysis (control 0 for a
        single arm).
    remaining
        Patients still to come per arm.
    treatment_prior, control_prior
        The beta priors ``(a, b)`` used to predict (``control_prior`` None for a single arm).
    prior_source
        ``"analysis prior"``, ``"uniform"`` or ``"given"``.
    """

    probability: float
    final_sizes: tuple[int, int]
    remaining: tuple[int, int]
    treatment_prior: tuple[float, float]
    control_prior: tuple[float, float] | None
    prior_source: str

    @property
    def prior_words(self) -> str:
        """Which beta priors predict, in words."""
        return {"analysis prior": "the analysis prior's beta priors",
                "uniform": "uniform Beta(1, 1) priors"}.get(self.prior_source,
                                                          "the given beta priors")

    def describe(self) -> str:
        """One plain sentence for a memo."""
        def beta(ab: tuple[float, float]) -> str:
            return f"Beta({ab[0]:g}, {ab[1]:g})"
        if self.prior_source == "uniform":
            priors = self.prior_words
        elif self.control_prior is None:
            priors = f"{self.prior_words}: {beta(self.treatment_prior)}"
        else:
            priors = (f"{self.prior_words}: {beta(self.treatment_prior)} on treatment, "
                      f"{beta(self.control_prior)} on control")
        return (f"exact predictive probability from the responder counts: "
                f"{self.probability:.4f} ({priors}; beta-binomial prediction of the "
                f"{self.remaining[0] + self.remaining[1]} patients still to come)")


def _beta_pair(value: Any, name: str, owner: str) -> tuple[float, float]:
    try:
        a, b = (float(v) for v in value)
    except (TypeError, ValueError):
        raise AssuranceInputError(
            f"The '{name}' parameter of {owner} must be a pair (a, b) of beta parameters. "
            f"Got {value!r} instead.") from None
    if not (np.isfinite(a) and np.isfinite(b) and a > 0 and b > 0):
        raise AssuranceInputError(
            f"The '{name}' parameter of {owner} must hold two finite numbers > 0. Got "
            f"{value!r} instead.")
    return a, b


def _final_pmf(prior: tuple[float, float], responders: int, seen: int, final: int
               ) -> np.ndarray:
    """Probabilities of ``0..final`` responders at the end, given ``responders`` of ``seen``."""
    a, b = prior
    out = np.zeros(final + 1)
    out[responders:responders + final - seen + 1] = beta_binomial_pmf(
        final - seen, a + responders, b + seen - responders)
    return out


def exact_predictive_probability(design: Any, *, treatment_responders: int,
                                 treatment_n: int, planned_total: int,
                                 control_responders: int | None = None,
                                 control_n: int | None = None,
                                 treatment_prior: tuple[float, float] | None = None,
                                 control_prior: tuple[float, float] | None = None,
                                 ) -> ExactPrediction:
    """Predictive probability that a response trial succeeds, from its interim counts.

    Parameters
    ----------
    design
        The trial as planned: a :class:`~assurance.TrialDesign` with a
        :class:`~assurance.BinaryEndpoint` (single arm or two arms).
    treatment_responders, treatment_n
        Responders and patients so far on treatment.
    planned_total
        Planned total patients at the final analysis (split into arms as the design splits
        every size).
    control_responders, control_n
        Responders and patients so far on control (two arms only).
    treatment_prior, control_prior
        Beta priors ``(a, b)`` of the rates to predict with. Default: the analysis priors of
        a posterior-probability rule, else uniform Beta(1, 1).

    Returns
    -------
    ExactPrediction

    Notes
    -----
    See the module notes. The success region is exact at any planned size (the enumeration
    limit ``exact_up_to`` of the endpoint concerns averaging over rates, not this sum).

    Examples
    --------
    >>> from assurance import BinaryEndpoint, BetaRates, PosteriorProbability, TrialDesign
    >>> ep = BinaryEndpoint(0.3, layout="single_arm")
    >>> design = TrialDesign(ep, BetaRates(0.3, (5, 7)), rule=PosteriorProbability(0.95),
    ...                      analysis_prior=BetaRates(0.3, (1, 1)))
    >>> pp = exact_predictive_probability(design, treatment_responders=9, treatment_n=20,
    ...                                   planned_total=40)
    >>> pp.remaining, round(pp.probability, 3)
    ((20, 0), 0.692)
    """
    owner = "exact_predictive_probability"
    ep = getattr(design, "endpoint", None)
    if type(ep).__name__ != "BinaryEndpoint":
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign with a BinaryEndpoint "
            f"(responder counts). Got {design!r} instead.")
    single = ep.layout == "single_arm"
    n_t = check_int(treatment_n, "treatment_n", owner, low=1)
    x_t = check_int(treatment_responders, "treatment_responders", owner, low=0, high=n_t)
    total = check_int(planned_total, "planned_total", owner, low=1, high=MAX_EXACT_TOTAL)
    if single:
        if control_responders is not None or control_n is not None or \
                control_prior is not None:
            raise AssuranceInputError(
                f"The 'control_responders', 'control_n' and 'control_prior' parameters of "
                f"{owner} must be None for a single-arm design (its reference rate "
                f"{ep.control_rate:g} is fixed). Got {control_responders!r}, {control_n!r} "
                f"and {control_prior!r} instead.")
        n_c = x_c = 0
    else:
        if control_responders is None or control_n is None:
            raise AssuranceInputError(
                f"The 'control_responders' and 'control_n' parameters of {owner} are needed "
                f"for a two-arm design. Got {control_responders!r} and {control_n!r} instead.")
        n_c = check_int(control_n, "control_n", owner, low=1)
        x_c = check_int(control_responders, "control_responders", owner, low=0, high=n_c)
    big_t, big_c = (int(v[0]) for v in ep.arm_sizes(np.array([total])))
    if big_t < n_t or big_c < n_c or big_t + big_c <= n_t + n_c:
        raise AssuranceInputError(
            f"The 'planned_total' parameter of {owner} must leave patients to come in the "
            f"trial: {total} splits into {big_t} on treatment and {big_c} on control, but "
            f"{n_t} and {n_c} are already in. Got {total!r} instead.")

    calc = ep.calculator(design.benefit_prior, design.benefit_rule, draws=1, seed=None)
    spec = calc.spec
    if treatment_prior is not None or control_prior is not None:
        source = "given"
    elif isinstance(spec, PosteriorSpec):
        source = "analysis prior"
    else:
        source = "uniform"

    def arm_prior(given: Any, name: str, arm: RateArm | None) -> tuple[float, float]:
        if given is not None:
            return _beta_pair(given, name, owner)
        if arm is not None and not arm.fixed:
            return float(arm.a), float(arm.b)
        return 1.0, 1.0

    posterior = isinstance(spec, PosteriorSpec)
    prior_t = arm_prior(treatment_prior, "treatment_prior", spec.treatment if posterior
                        else None)
    prior_c = None if single else arm_prior(control_prior, "control_prior",
                                            spec.control if posterior else None)
    region = success_runs(spec, big_t, big_c)
    pmf_t = _final_pmf(prior_t, x_t, n_t, big_t)
    pmf_c = np.ones(1) if single else _final_pmf(prior_c, x_c, n_c, big_c)  # type: ignore[arg-type]
    p = min(max(region.probability(pmf_t, pmf_c), 0.0), 1.0)
    return ExactPrediction(probability=float(p), final_sizes=(big_t, big_c),
                           remaining=(big_t - n_t, big_c - n_c), treatment_prior=prior_t,
                           control_prior=prior_c, prior_source=source)
