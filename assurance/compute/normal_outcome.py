"""Success probabilities for a trial whose estimate is normal given the truth.

This is where a rule's thresholds meet a prior. Four routes, all returning the same
quantities (probability of success and of "success and effect above a cut"):

* **known sigma, z analysis**: threshold ``c(n)``; closed form for normal priors, exact for
  point masses, a fixed panel rule for other priors (:mod:`.prior_predictive`);
* **known sigma, t test** (:class:`~assurance.rules.significance.Significance`): the
  non-central t distribution function for point masses and normal priors (power and
  assurance in closed form); the joint probabilities of a normal prior (and its assurance
  alongside them, from the same nodes), a minimum observed effect, and other priors
  integrate over the sample SD with the feature-aware rule of :mod:`.sd_quadrature` (for
  other priors with the fixed panel rule over the prior at every node: no adaptive step
  anywhere);
* **known sigma, other rules with a t analysis**: the general quadrature over the sample SD;
* **uncertain sigma** (a prior on sigma): deterministic quadrature over a scaled inverse
  chi-square prior (or point masses, or mixtures of these) when the effect prior is normal,
  a point mass or a mixture of these and the rule is a significance test; otherwise Monte
  Carlo over (effect, sigma, sample SD), each draw contributing its exact conditional success
  probability (Rao-Blackwellised), with the Monte Carlo standard error of every figure.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import special

from ..priors.families import Normal, PointMass, Prior, ScaledInvChiSquare
from ..rules.significance import Significance
from .prior_predictive import (
    prior_edges,
    prob_estimate_above,
    prob_estimate_above_cuts,
    upper_orthant_normal,
)
from .sd_quadrature import hermite_part, ratio_rule, sd_ratio_nodes

__all__ = ["Cut", "SuccessProbabilities", "DrawAverages", "exact_success", "monte_carlo_success",
           "EffectDraws", "nct_sf", "sd_prior_success", "sd_quadrature_covers"]


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


def nct_sf(t: Any, df: Any, nc: Any) -> np.ndarray:
    """``P(T > t)`` for a non-central t with ``df`` degrees of freedom and non-centrality ``nc``.

    Parameters
    ----------
    t, df, nc
        Broadcastable arrays; ``df > 0``.

    Returns
    -------
    numpy.ndarray
        Upper tail probabilities.

    Notes
    -----
    ``T = (Z + nc) / r`` with ``r = sqrt(X / df)``, ``X ~ chi2_df``, so
    ``P(T > t) = E_r[Phi(nc - t r)]``. Where that integrand changes slowly on the normal score
    of ``r`` (many degrees of freedom, a step of width ``1/t`` at ``r = nc / t`` wide on that
    scale) a short Gauss-Hermite rule gives it to about 1e-12
    (:func:`.sd_quadrature.hermite_part`, 2 to 40 nodes). Elsewhere: ``P(T > t) = P(-T < -t)``
    and ``-T`` is non-central t with ``-nc``, so the lower tail of scipy's ``nctdtr`` at
    ``(df, -nc, -t)`` keeps full precision in the upper tail; where that series does not
    converge (it returns NaN: very large ``nc``, far tails) the composite rule of
    :func:`.sd_quadrature.ratio_rule` integrates it.

    Examples
    --------
    >>> from scipy import stats
    >>> round(float(nct_sf(stats.t.isf(1e-4, 5), 5.0, 4.6 * 6 ** 0.5)), 6)  # one arm, n = 6
    0.751188
    """
    t, df, nc = (np.asarray(v, dtype=float) for v in (t, df, nc))
    if not t.shape == df.shape == nc.shape:
        t, df, nc = np.broadcast_arrays(t, df, nc)
    shape = t.shape
    t, df, nc = t.ravel(), df.ravel(), nc.ravel()
    centre, width = _step(t, nc)
    col, ratio, weight, covered = hermite_part(df, centre, width)
    p = np.bincount(col, weight * special.ndtr(nc[col] - t[col] * ratio),
                    minlength=t.size).astype(float)
    rest = np.flatnonzero(~covered)
    if rest.size:
        with np.errstate(all="ignore"):
            p[rest] = special.nctdtr(df[rest], -nc[rest], -t[rest])
        bad = rest[~np.isfinite(p[rest])]
        if bad.size:
            p[bad] = _nct_sf_by_quadrature(t[bad], df[bad], nc[bad])
    return _unit(p).reshape(shape)


def _step(t: np.ndarray, nc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Feature of ``Phi(nc - t r)`` on the ratio scale: centre ``nc / t``, width ``1 / t``
    (none for ``t <= 0``, where the integrand is smooth)."""
    positive = t > 0
    centre = np.divide(nc, t, out=np.full((1, t.size), np.nan), where=positive)
    width = np.divide(1.0, t, out=np.full((1, t.size), np.nan), where=positive)
    return centre, width


def _nct_sf_by_quadrature(t: np.ndarray, df: np.ndarray, nc: np.ndarray) -> np.ndarray:
    """``E_r[Phi(nc - t r)]`` with the full rule (composite where needed)."""
    centre, width = _step(t, nc)
    col, ratio, weight = ratio_rule(df, centre, width)
    return np.bincount(col, weight * special.ndtr(nc[col] - t[col] * ratio), minlength=t.size)


def exact_success(
    prior: Prior,
    rule: Significance,
    *,
    sigma: float,
    se_factor: np.ndarray,
    df: np.ndarray,
    analysis: str,
    cuts: Sequence[Cut] = (),
    critical: Any = None,
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
    critical
        The rule's critical values for a t analysis (``rule.critical_t(df)``), when the
        caller already has them; computed here otherwise.

    Notes
    -----
    For a significance test analysed by t, success iff ``d > A + t s k`` with ``A = -M``,
    and the sample SD ratio ``r = s / sigma`` is ``sqrt(chi2_df / df)`` independent of ``d``.
    A point mass gives power ``P(T > t)`` for ``T`` non-central t with non-centrality
    ``(delta - A) / se``; a normal prior ``N(m, v)`` makes ``d ~ N(m, tau^2)``,
    ``tau^2 = v + se^2``, so assurance is ``P(T > t se / tau)`` with non-centrality
    ``(m - A) / tau``, which is ``E_r[Phi((m - A - t se r) / tau)]``; with cuts it is
    integrated over ``r`` on the nodes of the joint probabilities (whose first feature is
    that integrand's).

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
    df = np.asarray(df, dtype=float)
    if analysis == "z":
        c = rule.threshold(se, rule.critical_z())
        probs = prob_estimate_above_cuts(prior, c, se, [(cut.value, cut.inclusive)
                                                        for cut in cuts])
        return SuccessProbabilities(success=probs[0], joint=probs[1:])
    crit = rule.critical_t(df) if critical is None else critical
    if isinstance(rule, Significance):
        return _t_test(prior, rule, se, df, _shaped(crit, se.shape),
                       list(cuts))
    kink = rule.kink_ratio(se, crit)
    ratio, weight = sd_ratio_nodes(df, kink=kink)
    c = rule.threshold(se[None, :] * ratio, _as_row(crit))

    def prob_nodes(cut: Cut | None) -> np.ndarray:
        inner = prob_estimate_above(prior, c, se[None, :], effect_above=None if cut is None
                                    else cut.value, inclusive=bool(cut and cut.inclusive))
        return np.clip(np.sum(weight * inner, axis=0), 0.0, 1.0)

    return SuccessProbabilities(success=prob_nodes(None), joint=[prob_nodes(cut) for cut in cuts])


def _as_row(crit: Any) -> Any:
    """Critical values per size as a row over the nodes; combined rules nest tuples."""
    if isinstance(crit, tuple):
        return tuple(_as_row(c) for c in crit)
    return np.asarray(crit)[None, :]


def _in_cut(value: float, cut: Cut) -> bool:
    return value >= cut.value if cut.inclusive else value > cut.value


def _t_test(prior: Prior, rule: Significance, se: np.ndarray, df: np.ndarray,
            crit: np.ndarray, cuts: list[Cut]) -> SuccessProbabilities:
    """Success iff ``d > max(A + B r, e)``, ``B = t se``, ``r`` the sample SD ratio."""
    low = rule.null_value
    slope = crit * se
    e = rule.min_estimate
    kinked = e is not None and e > low
    floor = (e - low) / slope if kinked else None
    success = np.zeros(se.shape)
    joint = [np.zeros(se.shape) for _ in cuts]

    def threshold(cols: np.ndarray, ratio: np.ndarray) -> np.ndarray:
        c = low + slope[cols] * ratio
        return np.maximum(c, e) if kinked else c

    def column_sums(cols: np.ndarray, values: np.ndarray) -> np.ndarray:
        return np.bincount(cols, values, minlength=se.size)

    for w, part in prior.parts():
        if isinstance(part, PointMass):
            delta = part.value
            if not kinked and delta == low:
                # at the null value T is central t and t its upper alpha point: the size
                p = np.full(se.shape, rule.one_sided_alpha)
            elif not kinked:
                p = nct_sf(crit, df, (delta - low) / se)
            else:
                col, ratio, weight = ratio_rule(
                    df, ((delta - low) / slope)[None, :], (1.0 / crit)[None, :], floor=floor)
                p = column_sums(col, weight * special.ndtr(
                    (delta - threshold(col, ratio)) / se[col]))
            success += w * p
            for j, cut in enumerate(cuts):
                if _in_cut(delta, cut):
                    joint[j] += w * p
        elif isinstance(part, Normal):
            m, sd = part.mu, part.sigma
            tau = np.hypot(sd, se)
            if not (kinked or cuts):
                success += w * nct_sf(crit * se / tau, df, (m - low) / tau)
                continue
            # with cuts, success comes from the same nodes as the joint probabilities: the
            # first feature is the one nct_sf would use
            # features: where the threshold meets the prior mean (width tau) and, for each
            # cut a, where it meets m + (a - m) tau^2 / v (width se tau / sd), the bend of the
            # bivariate normal orthant
            centres = [(m - low) / slope]
            widths = [tau / slope]
            with np.errstate(over="ignore"):  # a prior far narrower than the data's SE:
                stretch = tau / sd             # the bend moves out to +-inf, as it should
                for cut in cuts:
                    bend = (m + (cut.value - m) * stretch**2 if cut.value != m
                            else np.full_like(tau, m))
                    centres.append((bend - low) / slope)
                    widths.append((se / slope) * stretch)
            col, ratio, weight = ratio_rule(df, np.array(centres), np.array(widths),
                                            floor=floor)
            h = (threshold(col, ratio) - m) / tau[col]
            success += w * column_sums(col, weight * special.ndtr(-h))
            if cuts:
                # every cut in one evaluation of the orthant probabilities
                edge = np.array([(cut.value - m) / sd for cut in cuts])[:, None]
                both = upper_orthant_normal(h[None, :], edge, sd / tau[col])
                for j in range(len(cuts)):
                    joint[j] += w * column_sums(col, weight * both[j])
        else:
            values = _power_over_prior(part, low, se, df, crit, cuts,
                                       floor_value=e if kinked else None)
            success += w * values[0]
            for j in range(len(cuts)):
                joint[j] += w * values[1 + j]
    return SuccessProbabilities(success=_unit(success), joint=[_unit(p) for p in joint])


def _unit(p: np.ndarray) -> np.ndarray:
    """``p`` clipped to [0, 1] (NaN kept), without np.clip's Python wrapper."""
    return np.minimum(np.maximum(p, 0.0), 1.0)


def _shaped(values: Any, shape: tuple[int, ...]) -> np.ndarray:
    """``values`` as floats of ``shape`` (broadcast only where needed)."""
    values = np.asarray(values, dtype=float)
    return values if values.shape == shape else np.broadcast_to(values, shape)


def _power_over_prior(part: Prior, low: float, se: np.ndarray, df: np.ndarray,
                      crit: np.ndarray, cuts: list[Cut], floor_value: float | None = None
                      ) -> list[np.ndarray]:
    """A t test's success probabilities averaged over a continuous prior that is not normal,
    by fixed rules in both directions. Rows: success, then each cut.

    Success iff ``d > c(r) = max(A + B r, e)``, ``B = t se``, ``r`` the sample SD ratio
    (independent of ``d``), ``e`` the minimum observed effect (``floor_value``) if any. So
    every figure is ``E_r[g(c(r))]`` with ``g(c) = P(d > c [and delta > a])`` averaged over
    the prior: the inner expectation by the fixed panel rule of
    :func:`.prior_predictive.prob_estimate_above` (one survival-function call for every
    threshold of every node and size), the outer by :func:`.sd_quadrature.ratio_rule`.
    ``g`` is the prior smoothed by the estimate's noise, so it bends on a scale of at least
    ``se`` (``1 / t`` in ``r``), at the prior's quantiles, support ends and cuts (the only
    places a prior's shape is sharp): those are the features given to the outer rule, each
    with that narrowest width; below the kink ``r = (e - A) / B`` the threshold is ``e``
    and the integrand constant (the rule's floor).
    """
    slope = crit * se
    with np.errstate(divide="ignore", invalid="ignore"):
        places = np.unique(np.concatenate([prior_edges(part), [cut.value for cut in cuts]]))
        centres = (_thinned(places, se) - low) / slope[None, :]
        widths = np.broadcast_to(1.0 / crit, centres.shape)
        floor = None if floor_value is None else (floor_value - low) / slope
    col, ratio, weight = ratio_rule(df, centres, widths, floor=floor)
    c = low + slope[col] * ratio
    if floor_value is not None:
        c = np.maximum(c, floor_value)
    s = se[col]
    rows = []
    for cut in [None, *cuts]:
        inner = prob_estimate_above(part, c, s, effect_above=None if cut is None
                                    else cut.value, inclusive=bool(cut and cut.inclusive))
        rows.append(np.clip(np.bincount(col, weight * inner, minlength=se.size), 0.0, 1.0))
    return rows


#: Places closer than this many standard errors to the last one kept are not features of
#: their own: the panels laid about the kept one (0.7 and 2 widths either side) resolve them.
_MERGE = 0.7


def _thinned(places: np.ndarray, se: np.ndarray) -> np.ndarray:
    """``places`` (sorted) as an array ``(len(places), len(se))``: per column, a place within
    ``_MERGE * se`` of the last place kept is NaN (ignored by the rule), so that a prior
    whose quantiles crowd within one standard error costs one feature, not dozens."""
    out = np.full((places.size, se.size), np.nan)
    if places.size == 0:
        return out
    out[0] = places[0]
    last = np.full(se.shape, places[0])
    gap = _MERGE * se
    for i in range(1, places.size):
        keep = places[i] - last >= gap
        out[i, keep] = places[i]
        last = np.where(keep, places[i], last)
    return out


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


# ------------------------------------------------------------------------------------------
# uncertain sigma by quadrature
# ------------------------------------------------------------------------------------------
def sd_quadrature_covers(prior: Prior, rule: Any, sigma_prior: Prior) -> bool:
    """Whether :func:`sd_prior_success` applies: a significance test, an effect prior made
    of normals and point masses, and a prior on the SD made of scaled inverse chi-square
    (or gamma-precision) distributions and point masses.

    Examples
    --------
    >>> from assurance.priors import Normal, ScaledInvChiSquare, StudentT
    >>> from assurance.rules import Significance
    >>> sd_quadrature_covers(Normal(1, 1), Significance(), ScaledInvChiSquare(20, 5.0))
    True
    >>> sd_quadrature_covers(StudentT(3, 1, 1), Significance(), ScaledInvChiSquare(20, 5.0))
    False
    """
    return (isinstance(rule, Significance)
            and all(isinstance(p, Normal | PointMass) for _, p in prior.parts())
            and all(isinstance(p, ScaledInvChiSquare | PointMass)
                    for _, p in sigma_prior.parts()))


def sd_prior_success(
    prior: Prior,
    rule: Significance,
    sigma_prior: Prior,
    *,
    se_factor: np.ndarray,
    df: np.ndarray,
    analysis: str,
    cuts: Sequence[Cut] = (),
    critical: Any = None,
) -> SuccessProbabilities:
    """Success probabilities averaged over a prior on sigma, by deterministic quadrature.

    Parameters
    ----------
    prior
        Effect prior on the benefit scale: normals, point masses, or a mixture of these.
    rule
        A :class:`~assurance.rules.significance.Significance` on the benefit scale.
    sigma_prior
        Prior on the outcome SD: :class:`~assurance.priors.ScaledInvChiSquare` (or
        :class:`~assurance.priors.GammaPrecision`), point masses, or a mixture of these.
    se_factor, df, analysis, cuts, critical
        As for :func:`exact_success`.

    Returns
    -------
    SuccessProbabilities
        Without standard errors: there is no Monte Carlo error.

    Notes
    -----
    With ``sigma^2 = nu s0^2 / X``, ``X ~ chi2_nu``, write ``q = s0 / sigma = sqrt(X / nu)``:
    every figure is ``E_q[P(. | sigma = s0 / q)]`` with the inner probability exact
    (:func:`exact_success`). The expectation uses :func:`.sd_quadrature.ratio_rule` with, for
    each part of the effect prior, features where the threshold ``A + crit sigma k`` meets
    the effect (point mass), the prior mean (normal, relative width ``tau / (m - A)``), each
    cut, and the minimum observed effect. Each part of a mixture is integrated on its own
    nodes.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal, ScaledInvChiSquare
    >>> from assurance.rules import Significance
    >>> p = sd_prior_success(Normal(0.5, 0.2), Significance(0.025),
    ...                      ScaledInvChiSquare(40, 1.0), se_factor=np.sqrt([2 / 64]),
    ...                      df=np.array([126.0]), analysis="t")
    >>> round(float(p.success[0]), 4), p.success_mcse is None
    (0.7033, True)
    """
    if not sd_quadrature_covers(prior, rule, sigma_prior):
        raise ValueError("sd_prior_success needs a significance test, a normal / point-mass "
                         "effect prior and a scaled inverse chi-square / point-mass SD prior")
    k = np.asarray(se_factor, dtype=float)
    df = np.asarray(df, dtype=float)
    cuts = list(cuts)
    if analysis == "t":
        crit = np.broadcast_to(np.asarray(rule.critical_t(df) if critical is None
                                          else critical, dtype=float), k.shape)
    else:
        crit = np.full(k.shape, rule.critical_z())
    success = np.zeros(k.shape)
    joint = [np.zeros(k.shape) for _ in cuts]
    for ws, sp in sigma_prior.parts():
        if isinstance(sp, PointMass):
            res = exact_success(prior, rule, sigma=sp.value, se_factor=k, df=df,
                                analysis=analysis, cuts=cuts, critical=crit)
            success += ws * res.success
            for j in range(len(cuts)):
                joint[j] += ws * res.joint[j]
            continue
        for we, part in prior.parts():
            centres, widths = _sd_features(part, rule, sp, k, crit, df, analysis, cuts)
            col, q, weight = ratio_rule(np.full(k.shape, sp.df), centres, widths)
            # every (node, size) pair is one known-sigma computation
            res = exact_success(part, rule, sigma=1.0, se_factor=sp.scale / q * k[col],
                                df=df[col], analysis=analysis, cuts=cuts, critical=crit[col])
            weight = ws * we * weight
            success += np.bincount(col, weight * res.success, minlength=k.size)
            for j in range(len(cuts)):
                joint[j] += np.bincount(col, weight * res.joint[j], minlength=k.size)
    return SuccessProbabilities(success=np.clip(success, 0.0, 1.0),
                                joint=[np.clip(p, 0.0, 1.0) for p in joint])


def _sd_features(part: Prior, rule: Significance, sigma_prior: ScaledInvChiSquare,
                 k: np.ndarray, crit: np.ndarray, df: np.ndarray, analysis: str,
                 cuts: list[Cut]) -> tuple[np.ndarray, np.ndarray]:
    """Where, on the scale ``q = s0 / sigma``, the conditional success probability of one
    prior part changes fastest, and how fast (relative widths carried to ``q``).

    The threshold is about ``A + crit sigma k``; it meets a value ``c > A`` at
    ``sigma_c = (c - A) / (crit k)``, i.e. ``q_c = s0 crit k / (c - A)``, and a change of
    width ``w`` in the threshold is a relative change ``w / (c - A)`` in ``sigma`` and ``q``.
    """
    low = rule.null_value
    s0 = sigma_prior.scale
    slope = crit * k  # threshold per unit sigma
    centres, widths = [], []

    def add(value: float, width_at: Any) -> None:
        gap = value - low
        if gap <= 0:
            return
        sigma_c = gap / slope
        q = s0 / sigma_c
        centres.append(q)
        widths.append(q * width_at(sigma_c) / gap)

    if isinstance(part, PointMass):
        add(part.value, lambda s: s * k)  # width se: Phi((delta - c) / se)
    else:
        m, sd = part.mu, part.sigma
        add(m, lambda s: np.hypot(sd, s * k))
        # where the standard error overtakes the prior SD (se = sd) the success probability
        # turns from following the prior to following the noise: a broad change
        q_cross = s0 * k / sd
        centres.append(q_cross)
        widths.append(q_cross)
        for cut in cuts:
            add(cut.value, lambda s: s * k * (np.hypot(sd, s * k) / sd))
    if rule.min_estimate is not None:
        # a kink (z) or a kink smoothed over the sample SD ratio (t)
        spread = 1.0 / np.sqrt(2.0 * df) if analysis == "t" else 0.0
        add(rule.min_estimate, lambda s: spread * (rule.min_estimate - low))
    if not centres:
        return np.empty((0, k.size)), np.empty((0, k.size))
    return (np.array([np.broadcast_to(c, k.shape) for c in centres]),
            np.array([np.broadcast_to(w, k.shape) for w in widths]))
