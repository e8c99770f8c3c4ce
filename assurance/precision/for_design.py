"""Precision planning for a :class:`~assurance.TrialDesign`: the matching width model.

:mod:`assurance.precision` works on models of its own (normal mean, proportions, hazard and
rate ratios). This module builds the model that matches a trial design, so the command line
and the memo can show how wide the posterior interval for the effect will be, beside power
and assurance. The design prior generates the data; the analysis prior (flat when absent,
or a wide normal where a model needs a proper one) gives the posterior.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from .._validation import check_choice, check_real
from ..errors import AssuranceInputError
from ..priors.families import Normal

__all__ = ["PrecisionPlan", "precision_model_for"]

#: SD of the normal analysis prior on a log ratio when the design gives none: about a
#: factor of 20,000 either way at 95%, so the data decide the interval.
WIDE_LOG_SD = 5.0


@dataclass(frozen=True)
class PrecisionPlan:
    """What precision to plan for: a target interval length, its coverage, the criteria.

    Examples
    --------
    >>> PrecisionPlan(length=4.0).criteria
    ('ALC', 'ACC', 'WOC', 'MWOC')
    """

    length: float
    coverage: float = 0.95
    interval: str = "highest_density"
    criteria: tuple[str, ...] = field(default=("ALC", "ACC", "WOC", "MWOC"))
    likely_share: float = 0.95

    def __post_init__(self) -> None:
        owner = "PrecisionPlan"
        put = object.__setattr__
        put(self, "length", check_real(self.length, "length", owner, low=0, low_open=True))
        put(self, "coverage", check_real(self.coverage, "coverage", owner, low=0, high=1,
                                         low_open=True, high_open=True))
        put(self, "likely_share", check_real(self.likely_share, "likely_share", owner, low=0,
                                             high=1, low_open=True, high_open=True))
        check_choice(self.interval, "interval", owner, ["highest_density", "equal_tailed"])
        criteria = tuple(self.criteria)
        for c in criteria:
            check_choice(c, "criteria", owner, ["ALC", "ACC", "WOC", "MWOC"])
        if not criteria:
            raise AssuranceInputError(
                f"The 'criteria' parameter of {owner} must name at least one of ALC, ACC, "
                "WOC, MWOC. Got none.")
        put(self, "criteria", criteria)


def precision_model_for(design: Any) -> Any:
    """The interval-width model of :mod:`assurance.precision` matching ``design``.

    Continuous endpoints use the known-SD normal model (the planning SD; with a t analysis
    the interval is then slightly optimistic for small trials). Binary designs need
    :class:`~assurance.BetaRates` priors (or a fixed reference rate for one arm). Time-to-
    event and count designs use the normal likelihood of the log ratio.

    Examples
    --------
    >>> import assurance as asr
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
    >>> type(precision_model_for(d)).__name__
    'NormalMean'
    """
    from . import widths as pr

    ep = design.endpoint
    kind = ep.to_dict().get("kind")
    analysis = design.analysis_prior
    if kind == "continuous":
        if analysis is not None and not isinstance(analysis, Normal):
            raise AssuranceInputError(
                "Precision planning for a continuous design needs a normal analysis prior (or "
                f"none). Got {analysis.describe()}.")
        return pr.NormalMean(ep.sigma, prior=analysis, design_prior=design.design_prior,
                             layout=ep.layout, allocation=ep.allocation)
    if kind in ("time_to_event", "counts"):
        if analysis is not None and not isinstance(analysis, Normal):
            raise AssuranceInputError(
                "Precision planning for a ratio endpoint needs a normal analysis prior on the "
                f"log ratio (or none). Got {analysis.describe()}.")
        prior = analysis if analysis is not None else Normal(0.0, WIDE_LOG_SD)
        if kind == "time_to_event":
            return pr.HazardRatio(prior, event_probability=ep.event_probability,
                                  design_prior=design.design_prior, allocation=ep.allocation,
                                  assumed_hazard_ratio=design.assumed_effect)
        return pr.RateRatio(prior, control_rate=ep.control_rate, exposure=ep.mean_exposure,
                            overdispersion=ep.overdispersion, design_prior=design.design_prior,
                            allocation=ep.allocation, assumed_rate_ratio=design.assumed_effect)
    if kind == "binary":
        return _binary_model(design, pr)
    raise AssuranceInputError(
        f"Precision planning is not available for {type(ep).__name__} designs.")


def _binary_model(design: Any, pr: Any) -> Any:
    from ..endpoints.binary import BetaRates

    ep, prior = design.endpoint, design.design_prior
    if not isinstance(prior, BetaRates):
        raise AssuranceInputError(
            "Precision planning for a binary design needs a BetaRates design prior (beta "
            f"priors on each arm's rate). Got {prior.describe()}.")

    def beta(arm: Any) -> Any:
        return arm.value if arm.value is not None else pr.BetaPrior(arm.a, arm.b)

    analysis = design.analysis_prior
    if ep.layout == "single_arm":
        post = (pr.BetaPrior(analysis.treatment_arm.a, analysis.treatment_arm.b)
                if isinstance(analysis, BetaRates) and analysis.treatment_arm.value is None
                else pr.BetaPrior(1.0, 1.0))
        return pr.OneProportion(prior=post, design_prior=beta(prior.treatment_arm))
    scale = {"difference": "difference", "odds_ratio": "log_odds_ratio",
             "risk_ratio": "log_risk_ratio"}[ep.scale]
    control_post = treatment_post = pr.BetaPrior(1.0, 1.0)
    if isinstance(analysis, BetaRates):
        if analysis.control_arm.value is None:
            control_post = pr.BetaPrior(analysis.control_arm.a, analysis.control_arm.b)
        if analysis.treatment_arm.value is None:
            treatment_post = pr.BetaPrior(analysis.treatment_arm.a, analysis.treatment_arm.b)
    return pr.TwoProportions(control_post, treatment_post, scale=scale,
                             design_control=beta(prior.control_arm),
                             design_treatment=beta(prior.treatment_arm),
                             allocation=ep.allocation)
