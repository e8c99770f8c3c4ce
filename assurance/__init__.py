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
    "simulate_trials": "simulation.survival",
    "simulate_assurance": "simulation.survival",
    "sample_size_for_rate_ratio": "endpoints.counts",
    "simulate_rejection_rate": "endpoints.counts",
    "Significance": "rules",
    "PosteriorProbability": "rules.posterior",
    "AllOf": "rules.posterior",
    "AnyOf": "rules.posterior",
    "MinimumEstimate": "rules.posterior",
    "GoConsiderStop": "rules.zones",
    "evaluate_zones": "rules.zones",
    "evaluate_joint": "joint",
    "TrialDesign": "design",
    "evaluate": "planning",
    "solve_sample_size": "planning",
    "SampleSizeAnswer": "planning",
    "show_versions": "versions",
    "fit_prior": "priors.elicitation",
    "linear_pool": "priors.elicitation",
    "plot_fit": "report.figures",
    "Quantile": "priors.elicitation",
    "Interval": "priors.elicitation",
    "PriorFit": "priors.elicitation",
    "Beta": "priors.elicitation",
    "Gamma": "priors.elicitation",
    "Estimate": "priors.evidence",
    "estimate_from_events": "priors.evidence",
    "estimate_from_means": "priors.evidence",
    "prior_from_estimate": "priors.evidence",
    "DiscountedEstimate": "priors.evidence",
    "robust_mixture": "priors.evidence",
    "arm_estimates": "priors.evidence",
    "meta_analytic_prior": "priors.evidence",
    "meta_analytic_prior_mcmc": "priors.evidence",
    "prior_predictive_summary": "priors.evidence",
    "interval_width_curve": "precision",
    "solve_precision_n": "precision",
    "PrecisionPlan": "precision.for_design",
    "precision_model_for": "precision.for_design",
    "Plan": "planner",
    "plan": "planner",
    "ModelPlan": "model_plan",
    "plan_model": "model_plan",
    "GeneralModel": "general.model",
    "simulate_general": "general.engine",
    "solve_general_n": "general.engine",
    "GeneralSizeAnswer": "general.engine",
    "SensitivitySettings": "sensitivity",
    "prior_sensitivity": "sensitivity",
    "prior_variations": "sensitivity",
    "read_design": "design_file:read_design_file",  # name here : name in the module
    "ProgramPlan": "program_plan",
    "program_plan": "program_plan",
    "ProgramDesign": "program.development",
    "InterimPlan": "interim_plan",
    "interim_look": "interim_plan",
    "InterimData": "program.interim",
    "exact_predictive_probability": "program.interim_exact",
    "PortfolioPlan": "portfolio_plan",
    "plan_portfolio": "portfolio_plan",
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
    "DiscountedEstimate",
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
    "ModelPlan",
    "plan_model",
    "GeneralModel",
    "simulate_general",
    "solve_general_n",
    "GeneralSizeAnswer",
    "SensitivitySettings",
    "prior_sensitivity",
    "prior_variations",
    "read_design",
    "ProgramPlan",
    "program_plan",
    "ProgramDesign",
    "InterimPlan",
    "interim_look",
    "InterimData",
    "exact_predictive_probability",
    "PortfolioPlan",
    "plan_portfolio",
]

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
    from .design import TrialDesign
    from .design_file import read_design_file as read_design
    from .endpoints.binary import BetaRates, BinaryEndpoint
    from .endpoints.continuous import ContinuousEndpoint
    from .endpoints.counts import CountEndpoint, sample_size_for_rate_ratio, simulate_rejection_rate
    from .endpoints.survival import SurvivalEndpoint, events_needed
    from .errors import AssuranceInputError, AssuranceWarning, DesignFileError
    from .general.engine import GeneralSizeAnswer, simulate_general, solve_general_n
    from .general.model import GeneralModel
    from .interim_plan import InterimPlan, interim_look
    from .joint import evaluate_joint
    from .model_plan import ModelPlan, plan_model
    from .planner import Plan, plan
    from .planning import SampleSizeAnswer, evaluate, solve_sample_size
    from .portfolio_plan import PortfolioPlan, plan_portfolio
    from .precision.for_design import PrecisionPlan, precision_model_for
    from .precision.widths import interval_width_curve, solve_precision_n
    from .priors.elicitation import (
        Beta,
        Gamma,
        Interval,
        PriorFit,
        Quantile,
        fit_prior,
        linear_pool,
    )
    from .priors.evidence import (
        DiscountedEstimate,
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
    from .priors.families import (
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
    from .program.development import ProgramDesign
    from .program.interim import InterimData
    from .program.interim_exact import exact_predictive_probability
    from .program_plan import ProgramPlan, program_plan
    from .report.figures import plot_fit
    from .rules.posterior import AllOf, AnyOf, MinimumEstimate, PosteriorProbability
    from .rules.significance import Significance
    from .rules.zones import GoConsiderStop, evaluate_zones
    from .sensitivity import SensitivitySettings, prior_sensitivity, prior_variations
    from .simulation.survival import simulate_assurance, simulate_trials
    from .versions import show_versions


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
