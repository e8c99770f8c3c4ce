"""Success probabilities for a trial whose estimate is normal given the truth.

This is where a rule's thresholds meet a prior. Three routes, all returning the same
quantities (probability of success and of "success and effect above a cut"):

* **known sigma, z analysis**: threshold ``c(n)``; closed form for normal priors, exact for
  point masses, adaptive quadrature for other priors (:mod:`.prior_predictive`);
* **known sigma, t analysis**: the threshold depends on the sample SD; the expectation over
  it uses the quadrature of :mod:`.sd_quadrature` on top of the first route;
* **uncertain sigma** (a prior on sigma): Monte Carlo over (effect, sigma, sample SD), each
  draw contributing its exact conditional success probability (Rao-Blackwellised), with the
  Monte Carlo standard error of every figure.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import special

from ..priors.families import Prior
from ..rules.significance import Significance
from .prior_predictive import prob_estimate_above
from .sd_quadrature import sd_ratio_nodes

__all__ = ["Cut", "SuccessProbabilities", "DrawAverages", "exact_success", "monte_carlo_success",
           "EffectDraws"]


@dataclass(frozen=True)
class Cut:
    """An effect region ``effect > value`` (or ``>=`` if ``inclusive``) on the benefit scale."""

    value: float
    inclusive: bool = False


@dataclass
class SuccessProbabilities:
    """P(success) and P(success and effect in each cut region), one value per sample size.

    ``*_mcse`` are ``None`` for exact computations.
    """

    success: np.ndarray
    joint: list[np.ndarray]
    success_mcse: np.ndarray | None = None
    joint_mcse: list[np.ndarray] | None = None


def exact_success(
    prior: Prior,
    rule: Significance,
    *,
    sigma: float,
    se_factor: np.ndarray,
    df: np.ndarray,
    analysis: str,
    cuts: Sequence[Cut] = (),
) -> SuccessProbabilities:
    """Exact (closed form or quadrature) success probabilities with sigma known.

    Parameters
    ----------
    prior
        Prior over the true effect on the benefit scale (a point mass gives power).
    rule
        Success rule on the benefit scale.
    sigma
        Outcome standard deviation.
    se_factor, df
        Per sample size: ``se = sigma * se_factor`` and the t test's degrees of freedom.
    analysis
        ``"z"`` (sigma known at analysis) or ``"t"`` (sigma estimated).
    cuts
        Effect regions for the joint probabilities.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import PointMass
    >>> from assurance.rules import Significance
    >>> p = exact_success(PointMass(0.5), Significance(0.025), sigma=1.0,
    ...                   se_factor=np.sqrt([2 / 64]), df=np.array([126.0]), analysis="z")
    >>> round(float(p.success[0]), 4)  # Phi(0.5 / sqrt(2 / 64) - 1.96)
    0.8074
    """
    se = sigma * np.asarray(se_factor, dtype=float)
    if analysis == "z":
        c = rule.threshold(se, rule.critical_z())

        def prob(cut: Cut | None) -> np.ndarray:
            return prob_estimate_above(prior, c, se, effect_above=None if cut is None
                                       else cut.value, inclusive=bool(cut and cut.inclusive))
    else:
        kink = rule.kink_ratio(se, rule.critical_t(df))
        ratio, weight = sd_ratio_nodes(df, kink=kink)
        c = rule.threshold(se[None, :] * ratio, rule.critical_t(df[None, :]))

        def prob(cut: Cut | None) -> np.ndarray:
            inner = prob_estimate_above(prior, c, se[None, :], effect_above=None if cut is None
                                        else cut.value, inclusive=bool(cut and cut.inclusive))
            return np.clip(np.sum(weight * inner, axis=0), 0.0, 1.0)

    return SuccessProbabilities(success=prob(None), joint=[prob(cut) for cut in cuts])


class DrawAverages:
    """Averages over Monte Carlo draws, accumulated chunk by chunk, with standard errors.

    Each row is one quantity (success, then one per cut region); each piece added is an
    array ``(draws in the chunk, sizes)`` of per-draw probabilities.

    Examples
    --------
    >>> acc = DrawAverages(rows=1, size=1)
    >>> acc.add([np.array([[0.2], [0.4]])])
    >>> mean, se = acc.result()
    >>> round(float(mean[0, 0]), 3), round(float(se[0, 0]), 3)  # sd 0.1, two draws
    (0.3, 0.1)
    """

    def __init__(self, rows: int, size: int):
        self.sums = np.zeros((rows, size))
        self.squares = np.zeros((rows, size))
        self.count = 0

    def add(self, pieces: Sequence[np.ndarray]) -> None:
        """Add one chunk: one ``(draws, sizes)`` array per row."""
        for row, piece in enumerate(pieces):
            self.sums[row] += piece.sum(axis=0)
            self.squares[row] += (piece * piece).sum(axis=0)
        self.count += pieces[0].shape[0]

    def result(self) -> tuple[np.ndarray, np.ndarray]:
        """Means and their Monte Carlo standard errors, each ``(rows, sizes)``."""
        mean = self.sums / self.count
        var = np.maximum(self.squares / self.count - mean * mean, 0.0)
        return mean, np.sqrt(var / max(self.count - 1, 1))

    def success_probabilities(self) -> SuccessProbabilities:
        """Row 0 as the success probability, the others as joint probabilities."""
        mean, se = self.result()
        return SuccessProbabilities(success=mean[0], joint=list(mean[1:]),
                                    success_mcse=se[0], joint_mcse=list(se[1:]))


@dataclass(frozen=True)
class EffectDraws:
    """Fixed random draws reused for every sample size (common random numbers).

    ``effect`` and ``sigma`` come from the design priors; ``uniform`` drives the sample SD
    through the chi-square quantile, so curves over n are smooth and solving for n is stable.
    """

    effect: np.ndarray
    sigma: np.ndarray
    uniform: np.ndarray

    @classmethod
    def draw(cls, prior: Prior, sigma_prior: Prior, draws: int, seed: int | None
             ) -> EffectDraws:
        """Draw ``draws`` triples from independent streams of one seed."""
        streams = np.random.SeedSequence(seed).spawn(3)
        gens = [np.random.default_rng(s) for s in streams]
        effect = prior.sample(draws, gens[0])
        sigma = sigma_prior.sample(draws, gens[1])
        uniform = gens[2].uniform(size=draws)
        return cls(effect=effect, sigma=sigma, uniform=np.clip(uniform, 1e-300, 1.0))


def monte_carlo_success(
    draws: EffectDraws,
    rule: Significance,
    *,
    se_factor: np.ndarray,
    df: np.ndarray,
    analysis: str,
    cuts: Sequence[Cut] = (),
    chunk: int = 4096,
) -> SuccessProbabilities:
    """Success probabilities averaged over draws of (effect, sigma, sample SD).

    Each draw contributes ``P(success | effect, sigma, s)``, which is exact, so the Monte
    Carlo error comes only from the prior draws. Returns standard errors for every figure.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal, ScaledInvChiSquare
    >>> from assurance.rules import Significance
    >>> d = EffectDraws.draw(Normal(0.5, 0.2), ScaledInvChiSquare(40, 1.0), 2000, seed=1)
    >>> p = monte_carlo_success(d, Significance(0.025), se_factor=np.sqrt([2 / 64]),
    ...                         df=np.array([126.0]), analysis="t")
    >>> 0.65 < float(p.success[0]) < 0.8 and float(p.success_mcse[0]) < 0.01
    True
    """
    k = np.asarray(se_factor, dtype=float)
    df = np.asarray(df, dtype=float)
    m = draws.effect.size
    masks = [(draws.effect >= c.value) if c.inclusive else (draws.effect > c.value) for c in cuts]
    averages = DrawAverages(1 + len(cuts), k.size)
    crit = rule.critical_t(df[None, :]) if analysis == "t" else rule.critical_z()
    for start in range(0, m, chunk):
        sl = slice(start, min(start + chunk, m))
        effect = draws.effect[sl, None]
        sigma = draws.sigma[sl, None]
        se = sigma * k[None, :]
        if analysis == "t":
            ratio = np.sqrt(special.chdtri(df[None, :], draws.uniform[sl, None]) / df[None, :])
            c = rule.threshold(se * ratio, crit)
        else:
            c = rule.threshold(se, crit)
        p = special.ndtr((effect - c) / se)
        averages.add([p] + [p * mask[sl, None] for mask in masks])
    return averages.success_probabilities()
