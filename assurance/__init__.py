"""assurance: plan a clinical trial when nobody knows the true treatment effect.

Classical power at an assumed effect, assurance (probability of success) averaged over a
prior on the effect, the ceiling no sample size can pass, the sample size that reaches a
target, and a decision memo. Heavy modules load on first use, so the command line starts
fast.

Examples
--------
>>> import assurance as asr
>>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
>>> ds = asr.evaluate(design, [100, 200])
>>> float(ds.assurance[1]) > float(ds.assurance[0])
True
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

# public name -> module that defines it
_PUBLIC = {
    "AssuranceInputError": "errors",
    "AssuranceWarning": "errors",
    "DesignFileError": "errors",
    "Prior": "priors",
    "Normal": "priors",
    "StudentT": "priors",
    "Uniform": "priors",
    "TruncatedNormal": "priors",
    "PointMass": "priors",
    "Mixture": "priors",
    "FromScipy": "priors",
    "ScaledInvChiSquare": "priors",
    "GammaPrecision": "priors",
    "ContinuousEndpoint": "endpoints.continuous",
    "CountEndpoint": "endpoints.counts",
    "BinaryEndpoint": "endpoints.binary",
    "BetaRates": "endpoints.binary",
    "SurvivalEndpoint": "endpoints.survival",
    "events_needed": "endpoints.survival",
    "simulate_trials": "compute.survival_sim",
    "simulate_assurance": "compute.survival_sim",
    "sample_size_for_rate_ratio": "endpoints.counts",
    "simulate_rejection_rate": "endpoints.counts",
    "Significance": "rules",
    "PosteriorProbability": "posterior_rules",
    "AllOf": "posterior_rules",
    "AnyOf": "posterior_rules",
    "MinimumEstimate": "posterior_rules",
    "GoConsiderStop": "zones",
    "evaluate_zones": "zones",
    "evaluate_joint": "joint",
    "TrialDesign": "design",
    "evaluate": "planning",
    "solve_sample_size": "planning",
    "SampleSizeAnswer": "planning",
    "show_versions": "versions",
    "fit_prior": "elicitation",
    "linear_pool": "elicitation",
    "plot_fit": "elicitation",
    "Quantile": "elicitation",
    "Interval": "elicitation",
    "PriorFit": "elicitation",
    "Beta": "elicitation",
    "Gamma": "elicitation",
    "Estimate": "evidence",
    "estimate_from_events": "evidence",
    "estimate_from_means": "evidence",
    "prior_from_estimate": "evidence",
    "robust_mixture": "evidence",
    "arm_estimates": "evidence",
    "meta_analytic_prior": "evidence",
    "meta_analytic_prior_mcmc": "evidence",
    "prior_predictive_summary": "evidence",
    "interval_width_curve": "precision",
    "solve_precision_n": "precision",
    "PrecisionPlan": "precision_design",
    "precision_model_for": "precision_design",
    "Plan": "planner",
    "plan": "planner",
    "read_design": "design_file:read_design_file",  # name here : name in the module
}

__all__ = [
    "__version__",
    "AssuranceInputError",
    "AssuranceWarning",
    "DesignFileError",
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
    "ContinuousEndpoint",
    "CountEndpoint",
    "BinaryEndpoint",
    "BetaRates",
    "SurvivalEndpoint",
    "events_needed",
    "simulate_trials",
    "simulate_assurance",
    "sample_size_for_rate_ratio",
    "simulate_rejection_rate",
    "Significance",
    "PosteriorProbability",
    "AllOf",
    "AnyOf",
    "MinimumEstimate",
    "GoConsiderStop",
    "evaluate_zones",
    "evaluate_joint",
    "TrialDesign",
    "evaluate",
    "solve_sample_size",
    "SampleSizeAnswer",
    "show_versions",
    "fit_prior",
    "linear_pool",
    "plot_fit",
    "Quantile",
    "Interval",
    "PriorFit",
    "Beta",
    "Gamma",
    "Estimate",
    "estimate_from_events",
    "estimate_from_means",
    "prior_from_estimate",
    "robust_mixture",
    "arm_estimates",
    "meta_analytic_prior",
    "meta_analytic_prior_mcmc",
    "prior_predictive_summary",
    "interval_width_curve",
    "solve_precision_n",
    "PrecisionPlan",
    "precision_model_for",
    "Plan",
    "plan",
    "read_design",
]

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
    from .compute.survival_sim import simulate_assurance, simulate_trials
    from .design import TrialDesign
    from .design_file import read_design_file as read_design
    from .elicitation import (
        Beta,
        Gamma,
        Interval,
        PriorFit,
        Quantile,
        fit_prior,
        linear_pool,
        plot_fit,
    )
    from .endpoints.binary import BetaRates, BinaryEndpoint
    from .endpoints.continuous import ContinuousEndpoint
    from .endpoints.counts import CountEndpoint, sample_size_for_rate_ratio, simulate_rejection_rate
    from .endpoints.survival import SurvivalEndpoint, events_needed
    from .errors import AssuranceInputError, AssuranceWarning, DesignFileError
    from .evidence import (
        Estimate,
        arm_estimates,
        estimate_from_events,
        estimate_from_means,
        meta_analytic_prior,
        meta_analytic_prior_mcmc,
        prior_from_estimate,
        prior_predictive_summary,
        robust_mixture,
    )
    from .joint import evaluate_joint
    from .planner import Plan, plan
    from .planning import SampleSizeAnswer, evaluate, solve_sample_size
    from .posterior_rules import AllOf, AnyOf, MinimumEstimate, PosteriorProbability
    from .precision import interval_width_curve, solve_precision_n
    from .precision_design import PrecisionPlan, precision_model_for
    from .priors import (
        FromScipy,
        GammaPrecision,
        Mixture,
        Normal,
        PointMass,
        Prior,
        ScaledInvChiSquare,
        StudentT,
        TruncatedNormal,
        Uniform,
    )
    from .rules import Significance
    from .versions import show_versions
    from .zones import GoConsiderStop, evaluate_zones


def __getattr__(name: str) -> Any:
    where = _PUBLIC.get(name)
    if where is None:
        raise AttributeError(f"module 'assurance' has no attribute {name!r}")
    module, _, inner = where.partition(":")
    value = getattr(importlib.import_module(f".{module}", __name__), inner or name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
