"""Priors: what is believed about the true effect, and where that belief comes from.

- :mod:`~assurance.priors.families`: the prior families (normal, t, uniform, truncated
  normal, point mass, mixtures, any scipy distribution, priors on an SD).
- :mod:`~assurance.priors.elicitation`: priors fitted to experts' judgements; linear pools.
- :mod:`~assurance.priors.evidence`: priors from earlier trials (discounting, meta-analysis).

The families are re-exported here (``from assurance.priors import Normal``).
"""

from __future__ import annotations

from .families import (
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
    as_prior,
)

__all__ = ["Prior", "Normal", "StudentT", "Uniform", "TruncatedNormal", "PointMass", "Mixture",
           "FromScipy", "ScaledInvChiSquare", "GammaPrecision", "as_prior"]
