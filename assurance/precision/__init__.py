"""Precision: how wide the posterior interval for the effect will be, against n.

- :mod:`~assurance.precision.widths`: interval-width models (normal mean, normal-gamma,
  proportions, hazard and rate ratios), width curves and the ALC / ACC / WOC / modified WOC
  sample-size criteria.
- :mod:`~assurance.precision.for_design`: the width model that matches a
  :class:`~assurance.TrialDesign`, and the precision part of a plan.

The public names of both are re-exported here.
"""

from __future__ import annotations

from .for_design import PrecisionPlan, precision_model_for
from .widths import (
    CRITERIA,
    INTERVALS,
    BetaPrior,
    HazardRatio,
    NormalGammaPrior,
    NormalMean,
    NormalMeanUnknownSD,
    OneProportion,
    PrecisionAnswer,
    PrecisionModel,
    RateRatio,
    TwoProportions,
    interval_width_curve,
    solve_precision_n,
)

__all__ = ["BetaPrior", "NormalGammaPrior", "PrecisionModel", "NormalMean",
           "NormalMeanUnknownSD", "OneProportion", "TwoProportions", "HazardRatio",
           "RateRatio", "PrecisionAnswer", "interval_width_curve", "solve_precision_n",
           "CRITERIA", "INTERVALS", "PrecisionPlan", "precision_model_for"]
