"""Precision: how wide the posterior interval for the effect will be, against n.

- :mod:`~assurance.precision.widths`: interval-width models (normal mean, normal-gamma,
  proportions, hazard and rate ratios), width curves and the ALC / ACC / WOC / modified WOC
  sample-size criteria.
- :mod:`~assurance.precision.for_design`: the width model that matches a
  :class:`~assurance.TrialDesign`, and the precision part of a plan.

The public names of both are re-exported here.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

#: public name -> module of this folder (loaded on first use: the widths pull in scipy.stats)
_PUBLIC = {
    **{name: "widths" for name in (
        "CRITERIA", "INTERVALS", "BetaPrior", "HazardRatio", "NormalGammaPrior", "NormalMean",
        "NormalMeanUnknownSD", "OneProportion", "PrecisionAnswer", "PrecisionModel",
        "RateRatio", "TwoProportions", "interval_width_curve", "solve_precision_n")},
    "PrecisionPlan": "for_design",
    "precision_model_for": "for_design",
}

__all__ = ["BetaPrior", "NormalGammaPrior", "PrecisionModel", "NormalMean",
           "NormalMeanUnknownSD", "OneProportion", "TwoProportions", "HazardRatio",
           "RateRatio", "PrecisionAnswer", "interval_width_curve", "solve_precision_n",
           "CRITERIA", "INTERVALS", "PrecisionPlan", "precision_model_for"]

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
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


def __getattr__(name: str) -> Any:
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'assurance.precision' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
