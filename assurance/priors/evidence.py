"""Priors built from earlier trials, and what a prior implies before the trial is run.

Three jobs:

* **One earlier trial** (a phase 2 or pilot): its estimate and standard error, or the
  arm-level data that give them (:func:`estimate_from_events`, :func:`estimate_from_means`),
  become a normal design prior, discounted for the optimism of earlier phases
  (:func:`prior_from_estimate`): a power-prior weight, a multiplicative shrinkage of the
  estimate, and a robust mixture with a vague component (:func:`robust_mixture`).
* **Several historical control arms** combined by a normal hierarchical
  (meta-analytic-predictive, MAP) model: a closed-form normal approximation
  (:func:`meta_analytic_prior`, DerSimonian-Laird or Paule-Mandel) and a full Bayesian fit
  with PyMC (:func:`meta_analytic_prior_mcmc`).
* **Prior predictive summary** (:func:`prior_predictive_summary`): the distribution of the
  trial's estimate and of its one-sided p-value before the trial is run.

Every prior returned is an :mod:`assurance.priors` object on the analysis scale of the
estimate it came from: a difference, or the log of a ratio (log odds ratio, log risk ratio),
which is the scale a :class:`~assurance.design.TrialDesign` takes its design prior on.

Examples
--------
>>> from assurance.priors.evidence import prior_from_estimate
>>> prior = prior_from_estimate(-0.35, 0.15, shrinkage=0.9, power_weight=0.5)
>>> round(prior.mean(), 3), round(prior.sd(), 4)  # 0.9 * -0.35, 0.15 / sqrt(0.5)
(-0.315, 0.2121)
"""

from __future__ import annotations

import logging
import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_int, check_real, check_real_array
from ..errors import AssuranceInputError, AssuranceWarning
from .families import Mixture, Normal, PointMass, Prior

if TYPE_CHECKING:  # pragma: no cover
    from ..design import TrialDesign

__all__ = [
    "Estimate",
    "estimate_from_events",
    "estimate_from_means",
    "prior_from_estimate",
    "DiscountedEstimate",
    "robust_mixture",
    "arm_estimates",
    "MetaAnalyticPrior",
    "meta_analytic_prior",
    "MCMCMetaAnalyticPrior",
    "meta_analytic_prior_mcmc",
    "PriorPredictiveSummary",
    "prior_predictive_summary",
]

_SEED = 20260101


# ------------------------------------------------------------------------------------------
# one earlier trial
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Estimate:
    """An effect estimate and its standard error from an earlier trial.

    ``measure`` names the scale: ``"difference in means"``, ``"log odds ratio"``,
    ``"log risk ratio"``, ``"risk difference"``, or anything a user supplies.

    Examples
    --------
    >>> Estimate(-0.4, 0.2, "log odds ratio").describe()
    'log odds ratio -0.4 (SE 0.2)'
    """

    value: float
    se: float
    measure: str = "effect"

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", check_real(self.value, "value", "Estimate"))
        object.__setattr__(self, "se", check_real(self.se, "se", "Estimate", low=0,
                                                  low_open=True))

    def describe(self) -> str:
        """One line: measure, value, standard error."""
        return f"{self.measure} {self.value:.4g} (SE {self.se:.4g})"

    def to_dict(self) -> dict[str, Any]:
        """Plain values."""
        return {"value": self.value, "se": self.se, "measure": self.measure}


def _count(value: object, name: str, owner: str, low: int = 0, high: int | None = None) -> int:
    return check_int(value, name, owner, low=low, high=high)


def estimate_from_events(
    events_treatment: int,
    n_treatment: int,
    events_control: int,
    n_control: int,
    *,
    measure: Literal["log_odds_ratio", "log_risk_ratio", "risk_difference"] = "log_odds_ratio",
    correction: float = 0.5,
) -> Estimate:
    """Treatment-versus-control estimate and SE from events / patients per arm.

    Parameters
    ----------
    events_treatment, n_treatment, events_control, n_control
        Patients with the event and patients randomised, per arm.
    measure
        ``"log_odds_ratio"``, ``"log_risk_ratio"`` (both treatment over control) or
        ``"risk_difference"`` (treatment minus control).
    correction
        Added to every cell of the 2x2 table when one cell is empty (log scales only), so
        the log ratio and its SE stay finite; 0.5 is the Haldane-Anscombe choice.

    Notes
    -----
    With cells ``a, b`` (events, non-events, treatment) and ``c, d`` (control):
    ``log OR = log(ad / bc)``, ``SE^2 = 1/a + 1/b + 1/c + 1/d`` (Woolf);
    ``log RR = log((a / n_t) / (c / n_c))``, ``SE^2 = 1/a - 1/n_t + 1/c - 1/n_c``;
    risk difference ``p_t - p_c``, ``SE^2 = p_t (1 - p_t) / n_t + p_c (1 - p_c) / n_c``.

    References
    ----------
    Woolf B (1955). On estimating the relation between blood group and disease. Annals of
    Human Genetics 19:251-253.

    Examples
    --------
    >>> est = estimate_from_events(15, 100, 25, 100)
    >>> round(est.value, 3), round(est.se, 3)  # log(15 * 75 / (85 * 25))
    (-0.636, 0.363)
    """
    owner = "estimate_from_events"
    n_t = _count(n_treatment, "n_treatment", owner, low=1)
    n_c = _count(n_control, "n_control", owner, low=1)
    e_t = _count(events_treatment, "events_treatment", owner, high=n_t)
    e_c = _count(events_control, "events_control", owner, high=n_c)
    measure = check_choice(measure, "measure", owner,
                           ["log_odds_ratio", "log_risk_ratio", "risk_difference"])
    corr = check_real(correction, "correction", owner, low=0)
    if measure == "risk_difference":
        p_t, p_c = e_t / n_t, e_c / n_c
        se = math.sqrt(p_t * (1 - p_t) / n_t + p_c * (1 - p_c) / n_c)
        if se == 0:
            raise AssuranceInputError(
                f"{owner}: both arms have all or no events ({e_t}/{n_t}, {e_c}/{n_c}), so "
                "the risk difference has no standard error; use a log odds ratio with a "
                "zero-cell correction."
            )
        return Estimate(p_t - p_c, se, "risk difference")
    a, b, c, d = float(e_t), float(n_t - e_t), float(e_c), float(n_c - e_c)
    if min(a, b, c, d) == 0:
        if corr == 0:
            raise AssuranceInputError(
                f"The 'correction' parameter of {owner} must be > 0 when a cell of the 2x2 "
                f"table is empty ({e_t}/{n_t} against {e_c}/{n_c}). Got {correction!r} "
                "instead."
            )
        a, b, c, d = a + corr, b + corr, c + corr, d + corr
    if measure == "log_odds_ratio":
        return Estimate(math.log(a * d / (b * c)), math.sqrt(1 / a + 1 / b + 1 / c + 1 / d),
                        "log odds ratio")
    nt, nc = a + b, c + d
    return Estimate(math.log((a / nt) / (c / nc)), math.sqrt(1 / a - 1 / nt + 1 / c - 1 / nc),
                    "log risk ratio")


def estimate_from_means(
    mean_treatment: float,
    sd_treatment: float,
    n_treatment: int,
    mean_control: float,
    sd_control: float,
    n_control: int,
    *,
    pooled: bool = True,
) -> Estimate:
    """Difference in means (treatment minus control) and its SE from arm summaries.

    Notes
    -----
    Pooled: ``SE = s_p sqrt(1/n_t + 1/n_c)`` with
    ``s_p^2 = ((n_t - 1) s_t^2 + (n_c - 1) s_c^2) / (n_t + n_c - 2)``; otherwise Welch's
    ``SE = sqrt(s_t^2 / n_t + s_c^2 / n_c)``.

    Examples
    --------
    >>> est = estimate_from_means(12.0, 8.0, 40, 9.0, 8.0, 40)
    >>> round(est.value, 3), round(est.se, 4)  # 8 * sqrt(2 / 40)
    (3.0, 1.7889)
    """
    owner = "estimate_from_means"
    m_t = check_real(mean_treatment, "mean_treatment", owner)
    m_c = check_real(mean_control, "mean_control", owner)
    s_t = check_real(sd_treatment, "sd_treatment", owner, low=0, low_open=True)
    s_c = check_real(sd_control, "sd_control", owner, low=0, low_open=True)
    n_t = _count(n_treatment, "n_treatment", owner, low=2)
    n_c = _count(n_control, "n_control", owner, low=2)
    if not isinstance(pooled, bool):
        raise AssuranceInputError(
            f"The 'pooled' parameter of {owner} must be True or False. Got {pooled!r} instead.")
    if pooled:
        sp2 = ((n_t - 1) * s_t**2 + (n_c - 1) * s_c**2) / (n_t + n_c - 2)
        se = math.sqrt(sp2 * (1 / n_t + 1 / n_c))
    else:
        se = math.sqrt(s_t**2 / n_t + s_c**2 / n_c)
    return Estimate(m_t - m_c, se, "difference in means")


def robust_mixture(
    prior: Prior,
    weight: float,
    *,
    vague_sd: float,
    vague_mean: float | None = None,
) -> Mixture:
    """Robustify an informative prior: ``w * prior + (1 - w) * N(vague_mean, vague_sd^2)``.

    Parameters
    ----------
    prior
        The informative prior (from an earlier trial, or a MAP prior).
    weight
        Weight ``w`` in [0, 1] of the informative part: the prior probability that the
        earlier evidence is relevant to the new trial.
    vague_sd
        SD of the vague component. A unit-information choice is the SD of one patient's (or
        one event's) worth of data on the estimate's scale: the outcome SD for one arm's
        mean, ``sqrt(2) sigma`` for a 1:1 difference in means (one patient per arm), about
        2 for a log hazard ratio (variance 4 per event).
    vague_mean
        Centre of the vague component; defaults to the informative prior's mean. A neutral
        value (0 for "no effect") makes the vague part sceptical instead.

    Notes
    -----
    When the new data conflict with the informative part, the posterior moves its weight
    to the vague component, so the earlier evidence is discounted automatically; for a
    design prior the vague part carries the chance that the earlier result does not
    transfer.

    References
    ----------
    Schmidli H, Gsteiger S, Roychoudhury S, O'Hagan A, Spiegelhalter D, Neuenschwander B
    (2014). Robust meta-analytic-predictive priors in clinical trials with historical
    control information. Biometrics 70:1023-1032.

    Examples
    --------
    >>> mix = robust_mixture(Normal(0.4, 0.1), 0.8, vague_sd=2.0)
    >>> mix.weights, round(mix.mean(), 3)
    ([0.8, 0.19999999999999996], 0.4)
    """
    owner = "robust_mixture"
    if not isinstance(prior, Prior):
        raise AssuranceInputError(
            f"The 'prior' parameter of {owner} must be a prior such as Normal(0.4, 0.1). "
            f"Got {prior!r} instead."
        )
    w = check_real(weight, "weight", owner, low=0, high=1)
    sd = check_real(vague_sd, "vague_sd", owner, low=0, low_open=True)
    centre = prior.mean() if vague_mean is None else check_real(vague_mean, "vague_mean", owner)
    return Mixture([prior, Normal(centre, sd)], [w, 1.0 - w])


def prior_from_estimate(
    estimate: float | Estimate,
    se: float | None = None,
    *,
    power_weight: float = 1.0,
    shrinkage: float = 1.0,
    robust_weight: float = 1.0,
    vague_sd: float | None = None,
    vague_mean: float | None = None,
) -> Normal | Mixture:
    """A design prior from an earlier trial's estimate, discounted for optimism.

    Parameters
    ----------
    estimate
        The earlier estimate on the analysis scale (difference or log ratio), or an
        :class:`Estimate` (then leave ``se`` out).
    se
        Its standard error (> 0).
    power_weight
        Power-prior weight ``a0`` in (0, 1]: the earlier likelihood raised to ``a0``, i.e.
        the variance divided by ``a0`` (``a0 = 0.5`` counts the earlier trial as half its
        size). 1 keeps it whole.
    shrinkage
        Factor in [0, 1] multiplying the estimate (e.g. 0.9 keeps 90% of the effect),
        pulling it towards no effect. 1 keeps it whole.
    robust_weight
        Weight in [0, 1] of the informative part in a robust mixture with a vague normal
        component; 1 (default) gives the plain normal prior.
    vague_sd, vague_mean
        The vague component (needed when ``robust_weight < 1``); see :func:`robust_mixture`.

    Returns
    -------
    Normal or Mixture
        ``N(shrinkage * estimate, se^2 / power_weight)``, mixed with the vague component when
        ``robust_weight < 1``.

    Notes
    -----
    Phase 2 results that lead to phase 3 are selected for looking good, so taken at face
    value they overstate the effect; Kirby et al. (2012) discuss multiplying the estimate by
    a factor (0.9 and below) before planning. The power prior (Ibrahim & Chen 2000) with a
    normal likelihood is ``N(estimate, se^2 / a0)``. The three discounts can be combined; the
    shrinkage acts on the mean, the power weight on the spread and the robust mixture on the
    tails.

    References
    ----------
    Kirby S, Burke J, Chuang-Stein C, Sin C (2012). Discounting phase 2 results when
    planning phase 3 clinical trials. Pharmaceutical Statistics 11:373-385.
    Ibrahim JG, Chen M-H (2000). Power prior distributions for regression models.
    Statistical Science 15:46-60.
    Schmidli H et al. (2014). Biometrics 70:1023-1032.

    Examples
    --------
    >>> prior_from_estimate(3.0, 1.2, shrinkage=0.9)
    normal(mean=2.7, sd=1.2)
    >>> mix = prior_from_estimate(3.0, 1.2, robust_weight=0.8, vague_sd=10.0, vague_mean=0.0)
    >>> round(mix.mean(), 3)  # 0.8 * 3.0 + 0.2 * 0.0
    2.4
    """
    owner = "prior_from_estimate"
    if isinstance(estimate, Estimate):
        if se is not None:
            raise AssuranceInputError(
                f"The 'se' parameter of {owner} must be left out when 'estimate' is an "
                f"Estimate (it carries its own SE {estimate.se:g}). Got se={se!r}."
            )
        value, se_value = estimate.value, estimate.se
    else:
        value = check_real(estimate, "estimate", owner)
        if se is None:
            raise AssuranceInputError(
                f"The 'se' parameter of {owner} must be a number > 0 when 'estimate' is a "
                "number. Got None instead."
            )
        se_value = check_real(se, "se", owner, low=0, low_open=True)
    if isinstance(power_weight, int | float | np.integer | np.floating) and \
            not isinstance(power_weight, bool) and power_weight == 0:
        raise AssuranceInputError(
            f"The 'power_weight' parameter of {owner} must be a number in (0, 1]: 0 would "
            "discard the earlier trial entirely (use a vague prior instead). Got 0 instead."
        )
    a0 = check_real(power_weight, "power_weight", owner, low=0, low_open=True, high=1)
    factor = check_real(shrinkage, "shrinkage", owner, low=0, high=1)
    w = check_real(robust_weight, "robust_weight", owner, low=0, high=1)
    informative = Normal(factor * value, se_value / math.sqrt(a0))
    if w == 1.0:
        return informative
    if vague_sd is None:
        raise AssuranceInputError(
            f"The 'vague_sd' parameter of {owner} must be a number > 0 when robust_weight "
            f"< 1 (got robust_weight={w:g}); e.g. a unit-information SD. Got None instead."
        )
    return robust_mixture(informative, w, vague_sd=vague_sd, vague_mean=vague_mean)


@dataclass(frozen=True)
class DiscountedEstimate:
    """An earlier trial's estimate with the discounts that turn it into a design prior.

    The recipe behind :func:`prior_from_estimate`, kept so that a plan can say where its
    prior came from in plain words and vary the discounts (prior sensitivity).

    Attributes
    ----------
    estimate
        The earlier :class:`Estimate` (difference, or log ratio for ratio endpoints).
    power_weight, shrinkage, robust_weight, vague_sd, vague_mean
        As in :func:`prior_from_estimate`.

    Examples
    --------
    >>> recipe = DiscountedEstimate(Estimate(22.0, 9.0), shrinkage=0.8, power_weight=0.5)
    >>> recipe.prior()
    normal(mean=17.6, sd=12.7279)
    >>> recipe.replace(shrinkage=1.0).prior().mean()
    22.0
    """

    estimate: Estimate
    power_weight: float = 1.0
    shrinkage: float = 1.0
    robust_weight: float = 1.0
    vague_sd: float | None = None
    vague_mean: float | None = None

    def prior(self) -> Normal | Mixture:
        """The design prior this recipe gives."""
        return prior_from_estimate(self.estimate, power_weight=self.power_weight,
                                   shrinkage=self.shrinkage, robust_weight=self.robust_weight,
                                   vague_sd=self.vague_sd, vague_mean=self.vague_mean)

    def replace(self, **changes: Any) -> DiscountedEstimate:
        """The same recipe with some discounts changed (checked when :meth:`prior` is called)."""
        from dataclasses import replace as _replace

        return _replace(self, **changes)

    def report(self) -> str:
        """One plain sentence: the earlier result and each discount."""
        parts = [f"earlier trial: {self.estimate.measure} {self.estimate.value:.3g} "
                 f"(SE {self.estimate.se:.3g})"]
        if self.shrinkage != 1.0:
            parts.append(f"shrunk by {self.shrinkage:g}")
        if self.power_weight != 1.0:
            parts.append(f"counted as {self.power_weight:.0%} of its information")
        if self.robust_weight != 1.0:
            centre = "no effect" if not self.vague_mean else f"{self.vague_mean:g}"
            parts.append(f"{1 - self.robust_weight:.0%} of the prior on a vague part (centre "
                         f"{centre}, SD {self.vague_sd:g})")
        return "Design prior from an " + ", ".join(parts) + "."

    def to_dict(self) -> dict[str, Any]:
        """Plain values."""
        return {"estimate": self.estimate.to_dict(), "power_weight": self.power_weight,
                "shrinkage": self.shrinkage, "robust_weight": self.robust_weight,
                "vague_sd": self.vague_sd, "vague_mean": self.vague_mean}


# ------------------------------------------------------------------------------------------
# several historical arms: meta-analytic-predictive prior
# ------------------------------------------------------------------------------------------
def arm_estimates(
    *,
    events: Sequence[int] | None = None,
    n: Sequence[int] | None = None,
    means: Sequence[float] | None = None,
    sds: Sequence[float] | None = None,
    scale: Literal["log_odds", "proportion"] = "log_odds",
) -> tuple[np.ndarray, np.ndarray]:
    """Per-arm estimates and SEs of historical control arms, ready for a MAP prior.

    Give ``events`` and ``n`` (binary outcome, on the ``scale`` asked for) or ``means``,
    ``sds`` and ``n`` (continuous outcome: the arm mean, SE ``sd / sqrt(n)``).

    Notes
    -----
    Log odds ``log(e / (n - e))`` with SE ``sqrt(1/e + 1/(n - e))``; 0.5 is added to events
    and non-events of an arm with none of one. Proportion ``e / n`` with SE
    ``sqrt(p (1 - p) / n)``, ``p`` from the same corrected counts when ``e`` is 0 or ``n``.

    Examples
    --------
    >>> y, s = arm_estimates(events=[20, 30], n=[100, 120])
    >>> [round(float(v), 4) for v in y]  # log(20 / 80), log(30 / 90)
    [-1.3863, -1.0986]
    """
    owner = "arm_estimates"
    if n is None:
        raise AssuranceInputError(
            f"The 'n' parameter of {owner} must list the patients per arm. Got None instead.")
    sizes = check_real_array(n, "n", owner, low=1)
    if np.any(sizes != np.round(sizes)):
        raise AssuranceInputError(
            f"The 'n' parameter of {owner} must hold whole numbers. Got {n!r} instead.")
    if (events is None) == (means is None):
        raise AssuranceInputError(
            f"{owner} needs either 'events' (binary outcome) or 'means' and 'sds' (continuous "
            f"outcome), not both or neither. Got events={events!r}, means={means!r}."
        )
    if events is not None:
        e = check_real_array(events, "events", owner, low=0)
        if e.size != sizes.size or np.any(e > sizes) or np.any(e != np.round(e)):
            raise AssuranceInputError(
                f"The 'events' parameter of {owner} must hold one whole number in [0, n] per "
                f"arm ({sizes.size} arms). Got {events!r} instead."
            )
        scale = check_choice(scale, "scale", owner, ["log_odds", "proportion"])
        edge = (e == 0) | (e == sizes)
        ec, nc = e + 0.5 * edge, sizes + 1.0 * edge
        if scale == "log_odds":
            return np.log(ec / (nc - ec)), np.sqrt(1 / ec + 1 / (nc - ec))
        p = ec / nc
        return e / sizes, np.sqrt(p * (1 - p) / sizes)
    if sds is None:
        raise AssuranceInputError(
            f"The 'sds' parameter of {owner} must be given with 'means'. Got None instead.")
    m = check_real_array(means, "means", owner)
    s = check_real_array(sds, "sds", owner, low=0, low_open=True)
    if m.size != sizes.size or s.size != sizes.size:
        raise AssuranceInputError(
            f"The 'means' and 'sds' parameters of {owner} must have one value per arm "
            f"({sizes.size}). Got {m.size} means and {s.size} SDs instead."
        )
    return m, s / np.sqrt(sizes)


def _studies(estimates: Any, ses: Any, owner: str) -> tuple[np.ndarray, np.ndarray]:
    y = check_real_array(estimates, "estimates", owner, min_size=2)
    s = check_real_array(ses, "ses", owner, low=0, low_open=True, min_size=2)
    if y.size != s.size:
        raise AssuranceInputError(
            f"The 'ses' parameter of {owner} must have one SE per estimate ({y.size}). "
            f"Got {s.size} instead."
        )
    return y, s


def _re_mean(y: np.ndarray, v: np.ndarray, tau2: float) -> tuple[float, float]:
    w = 1.0 / (v + tau2)
    return float(np.sum(w * y) / np.sum(w)), float(1.0 / math.sqrt(np.sum(w)))


def _tau2_dl(y: np.ndarray, v: np.ndarray) -> float:
    w = 1.0 / v
    mu = np.sum(w * y) / np.sum(w)
    q = float(np.sum(w * (y - mu) ** 2))
    c = float(np.sum(w) - np.sum(w**2) / np.sum(w))
    return max(0.0, (q - (y.size - 1)) / c)


def _tau2_pm(y: np.ndarray, v: np.ndarray) -> float:
    def excess(tau2: float) -> float:
        mu, _ = _re_mean(y, v, tau2)
        return float(np.sum((y - mu) ** 2 / (v + tau2))) - (y.size - 1)

    if excess(0.0) <= 0:
        return 0.0
    from scipy import optimize  # about 0.3 s to import: only when a root is needed

    hi = max(float(np.var(y)), float(np.max(v)), 1e-12)
    while excess(hi) > 0:  # the generalised Q statistic falls as tau^2 grows
        hi *= 2.0
    return float(optimize.brentq(excess, 0.0, hi, xtol=1e-14 * max(hi, 1.0), rtol=1e-14,
                                 maxiter=500))


@dataclass(frozen=True)
class MetaAnalyticPrior:
    """Closed-form meta-analytic-predictive prior from several earlier studies.

    Attributes
    ----------
    prior
        Predictive prior for a new study's true value, ``N(mean, tau^2 + mean_se^2)``.
    mean, mean_se
        Random-effects estimate of the overall mean and its SE.
    tau
        Between-study SD.
    method
        ``"paule_mandel"`` or ``"dersimonian_laird"``.
    k
        Number of studies.
    q
        Cochran's Q (fixed-effect weights).
    fixed_mean, fixed_se
        Fixed-effect (inverse-variance) estimate and SE, for comparison.
    """

    prior: Normal
    mean: float
    mean_se: float
    tau: float
    method: str
    k: int
    q: float
    fixed_mean: float
    fixed_se: float

    def report(self) -> str:
        """A short plain-text summary."""
        how = self.method.replace("_", "-")
        return (f"Meta-analytic-predictive prior from {self.k} studies ({how} "
                f"between-study SD): overall mean {self.mean:.4g} (SE {self.mean_se:.3g}), "
                f"tau {self.tau:.3g}; predictive prior for a new study "
                f"{self.prior.describe()}. Fixed-effect estimate {self.fixed_mean:.4g} "
                f"(SE {self.fixed_se:.3g}); Cochran's Q {self.q:.3g} on {self.k - 1} df.")

    def to_dict(self) -> dict[str, Any]:
        """Plain values."""
        return {"prior": self.prior.to_dict(), "mean": self.mean, "mean_se": self.mean_se,
                "tau": self.tau, "method": self.method, "k": self.k, "q": self.q,
                "fixed_mean": self.fixed_mean, "fixed_se": self.fixed_se}


def meta_analytic_prior(
    estimates: Sequence[float],
    ses: Sequence[float],
    *,
    method: Literal["paule_mandel", "dersimonian_laird"] = "paule_mandel",
) -> MetaAnalyticPrior:
    """Meta-analytic-predictive prior by a normal hierarchical model, closed form.

    Parameters
    ----------
    estimates, ses
        One estimate and SE per earlier study (at least two), e.g. from
        :func:`arm_estimates`.
    method
        Between-study variance estimator: ``"paule_mandel"`` (default) or
        ``"dersimonian_laird"``.

    Notes
    -----
    Model ``y_i ~ N(theta_i, s_i^2)``, ``theta_i ~ N(mu, tau^2)``; the new study's
    ``theta_new ~ N(mu, tau^2)``. With ``w_i = 1 / (s_i^2 + tau^2)``,
    ``mu_hat = sum w_i y_i / sum w_i`` and ``se(mu_hat)^2 = 1 / sum w_i``, the predictive
    prior is ``N(mu_hat, tau^2 + se(mu_hat)^2)``.

    DerSimonian-Laird: ``tau^2 = max(0, (Q - (k - 1)) / (S1 - S2 / S1))`` with ``Q`` Cochran's
    statistic under weights ``1 / s_i^2`` and ``S_r = sum s_i^{-2r}``. Paule-Mandel: the
    ``tau^2 >= 0`` at which ``sum w_i (y_i - mu_hat)^2 = k - 1`` (0 if it is below at 0).

    Plugging in ``tau`` ignores its uncertainty, so with few studies the predictive prior is
    too narrow; :func:`meta_analytic_prior_mcmc` integrates over it.

    References
    ----------
    DerSimonian R, Laird N (1986). Meta-analysis in clinical trials. Controlled Clinical
    Trials 7:177-188.
    Paule RC, Mandel J (1982). Consensus values and weighting factors. Journal of Research
    of the National Bureau of Standards 87:377-385.
    Neuenschwander B, Capkun-Niggli G, Branson M, Spiegelhalter DJ (2010). Summarizing
    historical information on controls in clinical trials. Clinical Trials 7:5-18.

    Examples
    --------
    >>> res = meta_analytic_prior([0.2, 0.5, 0.1, 0.4], [0.1, 0.1, 0.1, 0.1],
    ...                           method="dersimonian_laird")
    >>> round(res.mean, 3), round(res.tau, 4)  # Q = 10: tau^2 = (10 - 3) / (400 - 100)
    (0.3, 0.1528)
    """
    owner = "meta_analytic_prior"
    y, s = _studies(estimates, ses, owner)
    method = check_choice(method, "method", owner, ["paule_mandel", "dersimonian_laird"])
    v = s**2
    tau2 = _tau2_pm(y, v) if method == "paule_mandel" else _tau2_dl(y, v)
    mu, se_mu = _re_mean(y, v, tau2)
    fe, se_fe = _re_mean(y, v, 0.0)
    q = float(np.sum((y - fe) ** 2 / v))
    return MetaAnalyticPrior(prior=Normal(mu, math.sqrt(tau2 + se_mu**2)), mean=mu,
                             mean_se=se_mu, tau=math.sqrt(tau2), method=method, k=int(y.size),
                             q=q, fixed_mean=fe, fixed_se=se_fe)


@dataclass(frozen=True)
class MCMCMetaAnalyticPrior:
    """Meta-analytic-predictive prior from a PyMC fit of the normal hierarchical model.

    Attributes
    ----------
    prior
        Approximation of the predictive distribution of a new study's true value: a normal
        (``approximation="normal"``) or a normal mixture (``"mixture"``) fitted to the
        predictive draws.
    approximation
        Which of the two.
    predictive_mean, predictive_mean_mcse
        Mean of the predictive draws and its Monte Carlo standard error (from their
        effective sample size).
    predictive_sd
        SD of the predictive draws.
    predictive_draws
        The draws, ``chains * draws`` of them.
    diagnostics
        Per parameter (``mu``, ``tau``, ``theta_new``): posterior ``mean``, ``sd``,
        ``mcse_mean``, ``mcse_sd``, ``ess_bulk``, ``ess_tail``, ``r_hat`` from
        ``arviz.summary``.
    divergences
        Divergent transitions after tuning.
    converged
        ``r_hat <= 1.01``, bulk and tail ESS at least 100 per chain, no divergences.
    settings
        Sampler settings and priors used (for the memo).
    """

    prior: Prior
    approximation: str
    predictive_mean: float
    predictive_mean_mcse: float
    predictive_sd: float
    predictive_draws: np.ndarray
    diagnostics: dict[str, dict[str, float]]
    divergences: int
    converged: bool
    settings: dict[str, Any] = field(default_factory=dict)

    def report(self) -> str:
        """A short plain-text summary with the sampler diagnostics."""
        rows = [f"  {name:<10} mean {d['mean']:.4g}  sd {d['sd']:.3g}  r_hat {d['r_hat']:.3f}"
                f"  ess_bulk {d['ess_bulk']:.0f}  ess_tail {d['ess_tail']:.0f}"
                for name, d in self.diagnostics.items()]
        state = "converged" if self.converged else "NOT converged: do not use without review"
        return "\n".join([
            f"Meta-analytic-predictive prior (PyMC, {self.settings.get('chains')} chains x "
            f"{self.settings.get('draws')} draws, {state}; {self.divergences} divergences):",
            f"  predictive for a new study: mean {self.predictive_mean:.4g} "
            f"(MCSE {self.predictive_mean_mcse:.2g}), sd {self.predictive_sd:.4g}",
            f"  {self.approximation} approximation: {self.prior.describe()}",
            *rows,
        ])

    def to_dict(self) -> dict[str, Any]:
        """Plain values (without the draws)."""
        return {"prior": self.prior.to_dict(), "approximation": self.approximation,
                "predictive_mean": self.predictive_mean,
                "predictive_mean_mcse": self.predictive_mean_mcse,
                "predictive_sd": self.predictive_sd, "diagnostics": self.diagnostics,
                "divergences": self.divergences, "converged": self.converged,
                "settings": dict(self.settings)}


def _normal_mixture_em(x: np.ndarray, k: int, *, iterations: int = 1000,
                       tol: float = 1e-10) -> Mixture:
    """Maximum-likelihood mixture of ``k`` normals fitted to draws by EM (deterministic
    start at the draws' quantiles)."""
    n = x.size
    spread = float(np.std(x))
    means = np.quantile(x, (np.arange(k) + 0.5) / k)
    sds = np.full(k, spread)
    weights = np.full(k, 1.0 / k)
    floor = 1e-6 * spread
    last = -math.inf
    for _ in range(iterations):
        z = (x[:, None] - means[None, :]) / sds[None, :]
        logp = np.log(weights)[None, :] - 0.5 * z * z - np.log(sds)[None, :]
        top = logp.max(axis=1, keepdims=True)
        dens = np.exp(logp - top)
        total = dens.sum(axis=1, keepdims=True)
        resp = dens / total
        loglik = float(np.sum(np.log(total) + top))
        nk = resp.sum(axis=0)
        weights = nk / n
        means = (resp * x[:, None]).sum(axis=0) / nk
        sds = np.sqrt(np.maximum((resp * (x[:, None] - means) ** 2).sum(axis=0) / nk,
                                 floor**2))
        if loglik - last < tol * n:
            break
        last = loglik
    weights = weights / weights.sum()
    return Mixture([Normal(float(m), float(s)) for m, s in zip(means, sds, strict=True)],
                   [float(w) for w in weights])


def meta_analytic_prior_mcmc(
    estimates: Sequence[float],
    ses: Sequence[float],
    *,
    tau_scale: float,
    mean_sd: float | None = None,
    draws: int = 1000,
    tune: int = 1000,
    chains: int = 2,
    seed: int = _SEED,
    approximation: Literal["normal", "mixture"] = "normal",
    components: int = 2,
    target_accept: float = 0.95,
) -> MCMCMetaAnalyticPrior:
    """Meta-analytic-predictive prior from a Bayesian normal hierarchical model (PyMC).

    Parameters
    ----------
    estimates, ses
        One estimate and SE per earlier study (at least two).
    tau_scale
        Scale of the half-normal prior on the between-study SD ``tau`` (> 0), on the scale
        of the estimates. A judgement: e.g. half the outcome's unit-information SD allows
        moderate heterogeneity (Neuenschwander et al. 2010).
    mean_sd
        SD of the normal prior on the overall mean, centred at the unweighted mean of the
        estimates; default 10 times the larger of the estimates' SD and their largest SE,
        which is vague on the data's own scale.
    draws, tune, chains
        NUTS draws kept and tuning steps per chain, and the number of chains (>= 2 so that
        r_hat is defined). Chains run one after another on one core.
    seed
        Seed for the sampler and the predictive draws: same seed, same numbers.
    approximation
        ``"normal"``: a normal with the predictive draws' mean and SD. ``"mixture"``: a
        mixture of ``components`` normals fitted to the draws by maximum likelihood (EM),
        which keeps the heavier tails the uncertainty in ``tau`` gives.
    target_accept
        NUTS target acceptance rate in (0.5, 1).

    Returns
    -------
    MCMCMetaAnalyticPrior
        The prior, the predictive draws' mean with its Monte Carlo standard error, and
        diagnostics (r_hat, ESS). An :class:`~assurance.errors.AssuranceWarning` is issued
        when the sampler has not converged (r_hat > 1.01, ESS below 100 per chain, or
        divergent transitions).

    Notes
    -----
    ``y_i ~ N(theta_i, s_i^2)``, ``theta_i = mu + tau z_i``, ``z_i ~ N(0, 1)`` (the
    non-centred form, which samples well when ``tau`` is near 0),
    ``mu ~ N(m0, mean_sd^2)``, ``tau ~ HalfNormal(tau_scale)``. Each posterior draw
    ``(mu, tau)`` gives one predictive draw ``theta_new = mu + tau e``, ``e ~ N(0, 1)``.
    The Monte Carlo standard error of the predictive mean is the draws' SD over the square
    root of their effective sample size (ArviZ).

    References
    ----------
    Neuenschwander B et al. (2010). Clinical Trials 7:5-18.
    Schmidli H et al. (2014). Biometrics 70:1023-1032.
    Vehtari A, Gelman A, Simpson D, Carpenter B, Buerkner P-C (2021). Rank-normalization,
    folding, and localization: an improved R-hat for assessing convergence of MCMC.
    Bayesian Analysis 16:667-718.

    Examples
    --------
    >>> res = meta_analytic_prior_mcmc([0.2, 0.5, 0.1, 0.4], [0.1] * 4,
    ...                                tau_scale=0.5, draws=200, tune=200)  # doctest: +SKIP
    >>> res.converged  # doctest: +SKIP
    True
    """
    owner = "meta_analytic_prior_mcmc"
    y, s = _studies(estimates, ses, owner)
    tau_scale = check_real(tau_scale, "tau_scale", owner, low=0, low_open=True)
    spread = max(float(np.std(y)), float(np.max(s)))
    mean_sd = 10.0 * spread if mean_sd is None else check_real(mean_sd, "mean_sd", owner,
                                                                low=0, low_open=True)
    draws = check_int(draws, "draws", owner, low=50)
    tune = check_int(tune, "tune", owner, low=50)
    chains = check_int(chains, "chains", owner, low=2)
    seed = check_int(seed, "seed", owner, low=0)
    approximation = check_choice(approximation, "approximation", owner, ["normal", "mixture"])
    components = check_int(components, "components", owner, low=1, high=10)
    target_accept = check_real(target_accept, "target_accept", owner, low=0.5, high=1,
                               low_open=True, high_open=True)

    import arviz as az
    import pymc as pm

    centre = float(np.mean(y))
    with pm.Model():
        mu = pm.Normal("mu", mu=centre, sigma=mean_sd)
        tau = pm.HalfNormal("tau", sigma=tau_scale)
        z = pm.Normal("z", 0.0, 1.0, shape=y.size)
        pm.Normal("y", mu=mu + tau * z, sigma=s, observed=y)
        quiet = logging.getLogger("pymc")
        level = quiet.level
        quiet.setLevel(logging.ERROR)
        try:
            idata = pm.sample(draws=draws, tune=tune, chains=chains, cores=1,
                              random_seed=seed, progressbar=False,
                              target_accept=target_accept, compute_convergence_checks=False)
        finally:
            quiet.setLevel(level)

    post = idata.posterior
    mu_draws = np.asarray(post["mu"], dtype=float)
    tau_draws = np.asarray(post["tau"], dtype=float)
    rng = np.random.default_rng(np.random.SeedSequence(seed).spawn(1)[0])
    theta_new = mu_draws + tau_draws * rng.standard_normal(mu_draws.shape)
    post["theta_new"] = (("chain", "draw"), theta_new)
    summary = az.summary(idata, var_names=["mu", "tau", "theta_new"], kind="all",
                         round_to="none")
    cols = ["mean", "sd", "mcse_mean", "mcse_sd", "ess_bulk", "ess_tail", "r_hat"]
    diagnostics = {name: {c: float(summary.loc[name, c]) for c in cols}
                   for name in ("mu", "tau", "theta_new")}
    divergences = int(np.asarray(idata.sample_stats["diverging"]).sum())
    flat = theta_new.ravel()
    mcse = diagnostics["theta_new"]["mcse_mean"]
    converged = (all(d["r_hat"] <= 1.01 and d["ess_bulk"] >= 100 * chains
                     and d["ess_tail"] >= 100 * chains for d in diagnostics.values())
                 and divergences == 0)
    if not converged:
        warnings.warn(
            f"{owner}: the sampler has not converged (r_hat up to "
            f"{max(d['r_hat'] for d in diagnostics.values()):.3f}, bulk ESS down to "
            f"{min(d['ess_bulk'] for d in diagnostics.values()):.0f}, {divergences} "
            "divergences). Increase 'draws'/'tune' or 'target_accept' before using the prior.",
            AssuranceWarning, stacklevel=2,
        )
    prior: Prior
    if approximation == "normal":
        prior = Normal(float(flat.mean()), float(flat.std(ddof=1)))
    else:
        prior = _normal_mixture_em(flat, components)
    return MCMCMetaAnalyticPrior(
        prior=prior, approximation=approximation, predictive_mean=float(flat.mean()),
        predictive_mean_mcse=mcse, predictive_sd=float(flat.std(ddof=1)),
        predictive_draws=flat, diagnostics=diagnostics, divergences=divergences,
        converged=converged,
        settings={"draws": draws, "tune": tune, "chains": chains, "seed": seed,
                  "tau_prior": f"half-normal(scale={tau_scale:g})",
                  "mean_prior": f"normal(mean={centre:g}, sd={mean_sd:g})",
                  "target_accept": target_accept, "pymc": pm.__version__},
    )


# ------------------------------------------------------------------------------------------
# prior predictive summary
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PriorPredictiveSummary:
    """What a prior implies about the trial's result before it is run.

    Arrays have one row per standard error in :attr:`se` and, for quantiles, one column per
    level in :attr:`probs`.

    Attributes
    ----------
    se
        Standard errors of the trial's estimate (one per sample size considered).
    probs
        Quantile levels.
    estimate_quantiles
        Quantiles of the estimate ``d`` on the prior's scale (difference or log ratio).
    p_value_quantiles
        Quantiles of the one-sided p-value for benefit.
    prob_significant
        ``P(p < alpha)``.
    estimate_mean, estimate_sd
        Mean and SD of ``d`` (None when the prior has no finite mean or variance).
    alpha, null
        One-sided level and the null value on the benefit scale.
    method
        ``"closed form"`` or ``"Monte Carlo"``.
    *_mcse
        Monte Carlo standard errors (None for the closed form).
    """

    se: np.ndarray
    probs: np.ndarray
    estimate_quantiles: np.ndarray
    p_value_quantiles: np.ndarray
    prob_significant: np.ndarray
    estimate_mean: np.ndarray | None
    estimate_sd: np.ndarray | None
    alpha: float
    null: float
    method: str
    estimate_quantiles_mcse: np.ndarray | None = None
    p_value_quantiles_mcse: np.ndarray | None = None
    prob_significant_mcse: np.ndarray | None = None
    draws: int | None = None
    seed: int | None = None

    def report(self) -> str:
        """Plain-text table, one block per standard error."""
        lines = [f"Before the trial ({self.method}): one-sided p-value for benefit at "
                 f"alpha {self.alpha:g}."]
        for i, se in enumerate(self.se):
            sig = f"P(p < {self.alpha:g}) = {self.prob_significant[i]:.4f}"
            if self.prob_significant_mcse is not None:
                sig += f" (MCSE {self.prob_significant_mcse[i]:.2g})"
            lines.append(f"SE {se:.4g}: {sig}")
            for j, q in enumerate(self.probs):
                est, pv = self.estimate_quantiles[i, j], self.p_value_quantiles[i, j]
                lines.append(f"  {q:>6.3g} quantile: estimate {est:>+10.4g}   p-value {pv:.4g}")
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """Plain values."""
        def plain(a: np.ndarray | None) -> Any:
            return None if a is None else np.asarray(a).tolist()

        return {"se": plain(self.se), "probs": plain(self.probs),
                "estimate_quantiles": plain(self.estimate_quantiles),
                "p_value_quantiles": plain(self.p_value_quantiles),
                "prob_significant": plain(self.prob_significant),
                "estimate_mean": plain(self.estimate_mean),
                "estimate_sd": plain(self.estimate_sd), "alpha": self.alpha,
                "null": self.null, "method": self.method,
                "estimate_quantiles_mcse": plain(self.estimate_quantiles_mcse),
                "p_value_quantiles_mcse": plain(self.p_value_quantiles_mcse),
                "prob_significant_mcse": plain(self.prob_significant_mcse),
                "draws": self.draws, "seed": self.seed}


def _closed_form_parts(prior: Prior) -> list[tuple[float, float, float]] | None:
    """``(weight, mean, sd)`` per part if every part is normal or a point mass."""
    out = []
    for w, part in prior.parts():
        if isinstance(part, Normal):
            out.append((w, part.mu, part.sigma))
        elif isinstance(part, PointMass):
            out.append((w, part.value, 0.0))
        else:
            return None
    return out


def _mixture_quantile(parts: list[tuple[float, float, float]], se: float, q: float) -> float:
    """Quantile of ``sum w N(m, sd^2 + se^2)`` by root finding (closed form for one part)."""
    scales = [(w, m, math.sqrt(sd * sd + se * se)) for w, m, sd in parts]
    z = float(special.ndtri(q))
    if len(scales) == 1:
        return scales[0][1] + scales[0][2] * z

    def excess(x: float) -> float:
        return sum(w * special.ndtr((x - m) / t) for w, m, t in scales) - q

    lo = min(m + t * z for _, m, t in scales)
    hi = max(m + t * z for _, m, t in scales)
    if hi - lo < 1e-300:
        return lo
    from scipy import optimize

    return float(optimize.brentq(excess, lo, hi, xtol=1e-13 * max(1.0, abs(hi)), rtol=1e-13))


def _moments(prior: Prior, se: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
    try:
        mean = float(prior.mean())
    except AssuranceInputError:
        return None, None
    try:
        var = float(prior.var())
    except AssuranceInputError:
        return np.full(se.shape, mean), None
    return np.full(se.shape, mean), np.sqrt(var + se**2)


def prior_predictive_summary(
    design_or_prior: TrialDesign | Prior,
    se: float | Sequence[float],
    *,
    alpha: float | None = None,
    null: float | None = None,
    probs: Sequence[float] = (0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95),
    draws: int = 200_000,
    seed: int = _SEED,
) -> PriorPredictiveSummary:
    """The distribution of the trial's estimate and one-sided p-value before the trial.

    Parameters
    ----------
    design_or_prior
        A :class:`~assurance.design.TrialDesign` (its design prior, the direction of
        benefit, the rule's one-sided level and null value are used), or a prior on the
        benefit scale (larger is better).
    se
        Standard error(s) of the trial's estimate on the prior's scale, e.g. one per
        sample size (``sigma sqrt(1/n_t + 1/n_c)`` for means, ``2 / sqrt(events)`` for a
        1:1 log hazard ratio).
    alpha
        One-sided level in (0, 0.5]; default the design's rule, or 0.025 for a prior.
    null
        Null value on the benefit scale; default the design's (``-margin``), or 0.
    probs
        Quantile levels in (0, 1).
    draws, seed
        Monte Carlo draws and seed, used only when the prior has parts other than normals
        and point masses.

    Notes
    -----
    With ``d | delta ~ N(delta, se^2)`` and benefit-scale prior ``delta ~ sum_k w_k
    N(m_k, v_k)`` (a point mass has ``v_k = 0``), the estimate is a normal mixture,
    ``F_d(x) = sum_k w_k Phi((x - m_k) / sqrt(v_k + se^2))``. The one-sided p-value
    ``p = 1 - Phi((d - null) / se)`` falls as ``d`` rises, so its ``q`` quantile is
    ``1 - Phi((Q_d(1 - q) - null) / se)``, and ``P(p < alpha) = 1 - F_d(null + z_{1-alpha}
    se)`` (O'Hagan, Stevens & Campbell 2005: assurance of the significance rule). Any other
    prior: ``delta`` and ``d`` are drawn; ``P(p < alpha)`` averages
    ``Phi((delta - null - z se) / se)`` over the prior draws (Rao-Blackwellised) and a
    quantile's standard error is half the distance between the order statistics at
    ``N q -+ sqrt(N q (1 - q))``.

    References
    ----------
    O'Hagan A, Stevens JW, Campbell MJ (2005). Assurance in clinical trial design.
    Pharmaceutical Statistics 4:187-201.

    Examples
    --------
    >>> res = prior_predictive_summary(Normal(0.3, 0.2), [0.1, 0.15], probs=[0.5])
    >>> res.method, [round(float(v), 4) for v in res.prob_significant]
    ('closed form', [0.6791, 0.5096])
    """
    owner = "prior_predictive_summary"
    from ..design import TrialDesign

    if isinstance(design_or_prior, TrialDesign):
        design = design_or_prior
        prior_b = design.benefit_prior
        rule = design.benefit_rule
        sign = design.endpoint.sign
        alpha_default, null_default = rule.one_sided_alpha, rule.null_value
    elif isinstance(design_or_prior, Prior):
        prior_b, sign = design_or_prior, 1.0
        alpha_default, null_default = 0.025, 0.0
    else:
        raise AssuranceInputError(
            f"The 'design_or_prior' parameter of {owner} must be a TrialDesign or a prior. "
            f"Got {design_or_prior!r} instead."
        )
    se_arr = check_real_array(se, "se", owner, low=0, low_open=True)
    alpha = alpha_default if alpha is None else check_real(alpha, "alpha", owner, low=0,
                                                           high=0.5, low_open=True)
    null = null_default if null is None else check_real(null, "null", owner)
    q = check_real_array(probs, "probs", owner, low=0, high=1, low_open=True, high_open=True)
    draws = check_int(draws, "draws", owner, low=100)
    seed = check_int(seed, "seed", owner, low=0)
    crit = float(-special.ndtri(alpha))
    cut = null + crit * se_arr  # estimate (benefit scale) above this: p < alpha

    parts = _closed_form_parts(prior_b)
    mcse_q = mcse_p = mcse_sig = None
    if parts is not None:
        method = "closed form"
        upper = np.array([[_mixture_quantile(parts, s, 1 - level) for level in q]
                          for s in se_arr])  # Q_d(1 - q), benefit scale
        lower = np.array([[_mixture_quantile(parts, s, level) for level in q]
                          for s in se_arr])
        sig = np.array([sum(w * special.ndtr((m - c) / math.sqrt(sd * sd + s * s))
                            for w, m, sd in parts) for s, c in zip(se_arr, cut, strict=True)])
        used_draws = used_seed = None
    else:
        method = "Monte Carlo"
        streams = [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(2)]
        delta = prior_b.sample(draws, streams[0])
        noise = streams[1].standard_normal(draws)
        d = np.sort(delta[None, :] + se_arr[:, None] * noise[None, :], axis=1)
        cond = special.ndtr((delta[None, :] - cut[:, None]) / se_arr[:, None])
        sig = cond.mean(axis=1)
        mcse_sig = cond.std(axis=1, ddof=1) / math.sqrt(draws)
        upper, up_lo, up_hi = _sample_quantiles(d, 1 - q)
        lower, low_lo, low_hi = _sample_quantiles(d, q)
        p_of = _p_value(null, se_arr[:, None])
        mcse_p = 0.5 * np.abs(p_of(up_lo) - p_of(up_hi))
        mcse_q = 0.5 * ((low_hi - low_lo) if sign > 0 else (up_hi - up_lo))
        used_draws, used_seed = draws, seed
    p_quant = _p_value(null, se_arr[:, None])(upper)
    est_quant = lower if sign > 0 else -upper  # back to the prior's own scale
    mean_b, sd_d = _moments(prior_b, se_arr)
    mean_d = None if mean_b is None else sign * mean_b
    return PriorPredictiveSummary(
        se=se_arr, probs=q, estimate_quantiles=est_quant, p_value_quantiles=p_quant,
        prob_significant=np.clip(sig, 0.0, 1.0), estimate_mean=mean_d, estimate_sd=sd_d,
        alpha=alpha, null=null, method=method, estimate_quantiles_mcse=mcse_q,
        p_value_quantiles_mcse=mcse_p, prob_significant_mcse=mcse_sig, draws=used_draws,
        seed=used_seed,
    )


def _p_value(null: float, se: np.ndarray) -> Any:
    def p(d: np.ndarray) -> np.ndarray:
        return special.ndtr(-(d - null) / se)

    return p


def _sample_quantiles(d_sorted: np.ndarray, levels: np.ndarray
                      ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quantiles of each row of sorted draws, and the order statistics one standard error
    either side (binomial spread of the count below the quantile)."""
    n = d_sorted.shape[1]
    est = np.quantile(d_sorted, levels, axis=1).T
    half = np.sqrt(n * levels * (1 - levels))
    lo = np.clip(np.floor(n * levels - half).astype(int), 0, n - 1)
    hi = np.clip(np.ceil(n * levels + half).astype(int), 0, n - 1)
    return est, d_sorted[:, lo], d_sorted[:, hi]
