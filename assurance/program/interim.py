"""An interim look: what the data so far predict about the final analysis.

Everything works on the benefit scale of the endpoint (larger is better: a difference, or a
log ratio, times the endpoint's sign) under the normal approximation: an estimate ``d`` of
the true effect ``delta`` with standard error ``se`` carries information ``I = 1 / se^2``.
The final analysis of the planned trial has standard error ``se_N``; an interim estimate
``d_1`` with standard error ``se_1`` sits at the information fraction ``t = se_N^2 / se_1^2``.
Because the final estimate pools the interim data with the data still to come (the
estimates follow a Brownian motion in information; Lan & Wittes 1988),

``d_N | d_1, delta ~ N(t d_1 + (1 - t) delta, (1 - t) se_N^2)``.

Every success rule of the package is a threshold ``c`` on the final estimate
(:mod:`assurance.rules`), so

* **conditional power** at an effect ``delta`` is
  ``CP(delta) = Phi((t d_1 + (1 - t) delta - c) / (se_N sqrt(1 - t)))`` -- at the assumed
  effect, at the current trend (``delta = d_1``) and at no effect;
* the **predictive probability** of success averages ``CP`` over the posterior of ``delta``
  given ``d_1`` (Spiegelhalter, Freedman & Blackburn 1986). For a normal posterior
  ``N(m_1, v_1)`` it is ``Phi((t d_1 + (1 - t) m_1 - c) / sqrt((1 - t) se_N^2 + (1 - t)^2
  v_1))``; for a mixture of normals and point masses the parts are re-weighted by their
  marginal likelihood; other prior families are integrated on a grid.

Boundaries: stop for futility when the predictive probability is below ``p_low``, for
efficacy when it is above ``p_high``. The predictive probability rises with ``d_1``, so each
boundary is a cut on the interim estimate. Their operating characteristics follow in closed
form from the bivariate normal law of ``(d_1, d_N)`` (correlation ``sqrt(t)`` at a fixed
effect; under a normal design prior ``N(m, v)`` the pair is bivariate normal with variances
``v + se_1^2``, ``v + se_N^2`` and covariance ``v + se_N^2``), with Owen's T function for the
bivariate normal probabilities.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Any, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_int, check_real
from ..errors import AssuranceInputError
from ..priors.families import Normal, PointMass, Prior

__all__ = ["InterimData", "InterimLook", "OperatingRow", "evaluate_interim",
           "final_standard_error", "conditional_power", "predictive_probability",
           "bivariate_normal_upper"]

PredictionPrior = Literal["design", "analysis"]
#: Largest information fraction accepted (the final analysis must add information).
MAX_FRACTION = 1.0 - 1e-9
#: Nodes of the grid for prior families with no closed form.
_GRID_NODES = 801
#: Gauss-Legendre nodes (on the probability scale) to average over such a prior.
_QUAD_NODES = 200


# ------------------------------------------------------------------------------------------
# arithmetic
# ------------------------------------------------------------------------------------------
def _ndtr(x: Any) -> np.ndarray:
    return special.ndtr(np.asarray(x, dtype=float))


def bivariate_normal_upper(h: Any, k: Any, rho: Any) -> np.ndarray:
    """``P(X > h, Y > k)`` for standard normals ``X, Y`` with correlation ``rho``.

    Parameters
    ----------
    h, k
        Lower limits (arrays broadcast; ``-inf`` and ``inf`` allowed).
    rho
        Correlation in (-1, 1).

    Returns
    -------
    numpy.ndarray

    Notes
    -----
    Owen's (1956) formula: ``Phi2(h, k; rho) = (Phi(h) + Phi(k)) / 2 - T(h, a_h) - T(k, a_k)
    - beta`` with ``a_h = (k - rho h) / (h sqrt(1 - rho^2))``, ``a_k`` alike and ``beta = 1/2``
    when ``h k < 0`` (or one is 0 and the other negative), and ``P(X > h, Y > k) =
    Phi2(-h, -k; rho)``.

    Examples
    --------
    >>> round(float(bivariate_normal_upper(0.0, 0.0, 0.5)), 6)  # 1/4 + asin(0.5) / (2 pi)
    0.333333
    """
    h, k, rho = np.broadcast_arrays(-np.asarray(h, float), -np.asarray(k, float),
                                    np.asarray(rho, float))
    out = np.empty(h.shape)
    s = np.sqrt(1.0 - rho * rho)
    fin = np.isfinite(h) & np.isfinite(k)
    # limits: Phi2(inf, k) = Phi(k), Phi2(-inf, k) = 0
    out[~fin] = np.where(
        (h[~fin] == -np.inf) | (k[~fin] == -np.inf), 0.0,
        np.where(h[~fin] == np.inf, _ndtr(k[~fin]), _ndtr(h[~fin])))
    hh, kk, rr, ss = h[fin], k[fin], rho[fin], s[fin]

    def t_term(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            a = (y - rr * x) / (x * ss)
        # at x = 0: T(0, +-inf) = +-1/4 (the sign of y); both 0 is handled below
        zero = x == 0
        safe = np.where(zero, 1.0, a)
        value = special.owens_t(x, safe)
        at_zero = np.where(y > 0, 0.25, np.where(y < 0, -0.25, 0.0))
        return np.where(zero, at_zero, value)

    both_zero = (hh == 0) & (kk == 0)
    # signs, not the product, which underflows to 0 for tiny arguments
    sign = np.sign(hh) * np.sign(kk)
    beta = np.where((sign < 0) | ((sign == 0) & (hh + kk < 0)), 0.5, 0.0)
    value = 0.5 * (_ndtr(hh) + _ndtr(kk)) - t_term(hh, kk) - t_term(kk, hh) - beta
    value = np.where(both_zero, 0.25 + np.arcsin(rr) / (2 * np.pi), value)
    out[fin] = value
    return np.clip(out, 0.0, 1.0)


def conditional_power(estimate: Any, effect: Any, *, interim_se: float, final_se: float,
                      threshold: float) -> np.ndarray:
    """Probability that the final estimate passes ``threshold`` given the interim estimate,
    at a true effect (benefit scale).

    Parameters
    ----------
    estimate
        Interim estimate(s) ``d_1``.
    effect
        True effect(s) ``delta`` for the rest of the trial (broadcast with ``estimate``).
    interim_se, final_se
        Standard errors at the interim and at the final analysis (``final_se < interim_se``).
    threshold
        The final estimate must exceed this (the rule's threshold ``c``).

    Returns
    -------
    numpy.ndarray

    Notes
    -----
    ``Phi((t d_1 + (1 - t) delta - c) / (se_N sqrt(1 - t)))``, ``t = se_N^2 / se_1^2``
    (Lan & Wittes 1988, in estimate units).

    Examples
    --------
    >>> # half the information, z = 1.5 at the interim, current trend, one-sided 0.025:
    >>> # Phi((1.5 / sqrt(0.5) - 1.96) / sqrt(0.5)) = Phi(0.228)
    >>> se_n = 1.0; se_1 = math.sqrt(2.0); d1 = 1.5 * se_1
    >>> round(float(conditional_power(d1, d1, interim_se=se_1, final_se=se_n,
    ...                               threshold=1.959964)), 4)
    0.5903
    """
    t = final_se**2 / interim_se**2
    d1 = np.asarray(estimate, float)
    delta = np.asarray(effect, float)
    return _ndtr((t * d1 + (1 - t) * delta - threshold) / (final_se * math.sqrt(1 - t)))


# ------------------------------------------------------------------------------------------
# the posterior given the interim estimate
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Part:
    """One part of a posterior: a point, a normal, or a weighted grid; ``logw`` per d1."""

    kind: str
    logw: np.ndarray
    mean: np.ndarray
    var: np.ndarray
    nodes: list[tuple[np.ndarray, np.ndarray]] | None = None  # per d1: (delta, weight)
    prob_benefit: np.ndarray | None = None


def _log_phi(x: Any, mean: Any, sd: Any) -> np.ndarray:
    z = (np.asarray(x, float) - mean) / sd
    return -0.5 * z * z - np.log(sd) - 0.5 * math.log(2 * math.pi)


def _grid_part(part: Prior, d1: np.ndarray, se1: float, weight: float) -> _Part:
    lo, hi = part.support()
    q_lo = float(part.ppf(1e-10)) if math.isfinite(part.ppf(1e-10)) else lo
    q_hi = float(part.ppf(1 - 1e-10)) if math.isfinite(part.ppf(1 - 1e-10)) else hi
    logw, means, vars_, nodes, probs = [], [], [], [], []
    for x in d1:
        a, b = max(q_lo, x - 12 * se1), min(q_hi, x + 12 * se1)
        if not a < b:  # the likelihood sits beyond the prior's range: use all of it
            a, b = q_lo, q_hi
        delta = np.linspace(a, b, _GRID_NODES)
        step = delta[1] - delta[0]
        with np.errstate(divide="ignore"):
            lp = np.log(np.asarray(part.pdf(delta), float)) + _log_phi(x, delta, se1)
        top = np.max(lp)
        if not np.isfinite(top):
            raise AssuranceInputError(
                f"The prior part {part.describe()} gives no density near the interim "
                f"estimate {x:g}: the posterior cannot be formed.")
        w = np.exp(lp - top)
        w[0] *= 0.5
        w[-1] *= 0.5
        total = w.sum()
        logw.append(math.log(weight) + top + math.log(total * step))
        w = w / total
        m = float(np.sum(w * delta))
        means.append(m)
        vars_.append(float(np.sum(w * (delta - m) ** 2)))
        nodes.append((delta, w))
        probs.append(float(np.sum(w[delta > 0])))
    return _Part("grid", np.array(logw), np.array(means), np.array(vars_), nodes,
                 np.array(probs))


def _posterior(prior: Prior | None, d1: np.ndarray, se1: float) -> list[tuple[np.ndarray,
                                                                             _Part]]:
    """(weight per d1, part) pairs of the posterior of delta given d1 ~ N(delta, se1^2)."""
    if prior is None:  # flat
        parts = [_Part("normal", np.zeros_like(d1), d1.copy(), np.full(d1.shape, se1**2))]
    else:
        parts = []
        for weight, part in prior.parts():
            if isinstance(part, PointMass):
                parts.append(_Part("point", math.log(weight) + _log_phi(d1, part.value, se1),
                                   np.full(d1.shape, part.value), np.zeros(d1.shape)))
            elif isinstance(part, Normal):
                v0 = part.sigma**2
                v1 = 1.0 / (1.0 / v0 + 1.0 / se1**2)
                m1 = v1 * (part.mu / v0 + d1 / se1**2)
                parts.append(_Part("normal", math.log(weight)
                                   + _log_phi(d1, part.mu, math.sqrt(v0 + se1**2)),
                                   m1, np.full(d1.shape, v1)))
            else:
                parts.append(_grid_part(part, d1, se1, weight))
    logw = np.array([p.logw for p in parts])
    w = np.exp(logw - logw.max(axis=0))
    w /= w.sum(axis=0)
    return [(w[i], p) for i, p in enumerate(parts)]


def _predictive(posterior: list[tuple[np.ndarray, _Part]], d1: np.ndarray, t: float,
                se_n: float, c: float) -> np.ndarray:
    total = np.zeros(d1.shape)
    for w, p in posterior:
        if p.kind == "grid":
            pp = np.array([np.sum(wg * _ndtr((t * x + (1 - t) * delta - c)
                                             / (se_n * math.sqrt(1 - t))))
                           for x, (delta, wg) in zip(d1, p.nodes or [], strict=True)])
        else:
            sd = np.sqrt((1 - t) * se_n**2 + (1 - t) ** 2 * p.var)
            pp = _ndtr((t * d1 + (1 - t) * p.mean - c) / sd)
        total += w * pp
    return np.clip(total, 0.0, 1.0)


def _posterior_summary(posterior: list[tuple[np.ndarray, _Part]]) -> dict[str, float]:
    mean = sum(float(w[0]) * float(p.mean[0]) for w, p in posterior)
    second = sum(float(w[0]) * (float(p.var[0]) + float(p.mean[0]) ** 2) for w, p in posterior)
    benefit = 0.0
    for w, p in posterior:
        if p.kind == "point":
            part = 1.0 if p.mean[0] > 0 else 0.0
        elif p.kind == "normal":
            part = float(_ndtr(p.mean[0] / math.sqrt(p.var[0])))
        else:
            part = float((p.prob_benefit if p.prob_benefit is not None else [0.0])[0])
        benefit += float(w[0]) * part
    return {"mean": mean, "sd": math.sqrt(max(second - mean * mean, 0.0)),
            "prob_benefit": min(max(benefit, 0.0), 1.0)}


def predictive_probability(estimate: Any, *, prior: Prior | None, interim_se: float,
                           final_se: float, threshold: float) -> np.ndarray:
    """Predictive probability that the final estimate passes ``threshold`` (benefit scale).

    Parameters
    ----------
    estimate
        Interim estimate(s) ``d_1``.
    prior
        Prior of the effect on the benefit scale (None: flat). Normal and point-mass parts
        are exact; other families are integrated on a grid of 801 points.
    interim_se, final_se, threshold
        As in :func:`conditional_power`.

    Returns
    -------
    numpy.ndarray

    Notes
    -----
    With a flat prior this is ``Phi((d_1 - c) / (se_N sqrt((1 - t) / t)))``, the "predictive
    power" of Spiegelhalter, Freedman & Blackburn (1986) in estimate units.

    Examples
    --------
    >>> # Phi((1.5 - 1.96 sqrt(0.5)) / sqrt(0.5)) = Phi(0.161) at z = 1.5, t = 0.5
    >>> se_1 = math.sqrt(2.0)
    >>> round(float(predictive_probability(1.5 * se_1, prior=None, interim_se=se_1,
    ...                                    final_se=1.0, threshold=1.959964)), 4)
    0.5641
    """
    d1 = np.atleast_1d(np.asarray(estimate, float))
    t = final_se**2 / interim_se**2
    out = _predictive(_posterior(prior, d1, interim_se), d1, t, final_se, threshold)
    return out if np.ndim(estimate) else out[0]


# ------------------------------------------------------------------------------------------
# the interim data
# ------------------------------------------------------------------------------------------
def _rate_contrast(p_t: float, p_c: float, scale: str) -> float:
    """Rates compared on the natural scale: difference, risk ratio or odds ratio."""
    if scale == "difference":
        return p_t - p_c
    if scale == "risk_ratio":
        return p_t / p_c
    return (p_t / (1 - p_t)) / (p_c / (1 - p_c))


def _wald_variance(x: int, n: int, scale: str) -> float:
    """One arm's share of the Wald variance (of the log for the ratios): ``p (1 - p) / n``,
    ``(1 - p) / x`` or ``1/x + 1/(n - x)`` (common practice)."""
    p = x / n
    if scale == "difference":
        return p * (1 - p) / n
    if scale == "risk_ratio":
        return (1 - p) / x
    return 1 / x + 1 / (n - x)


@dataclass(frozen=True)
class InterimData:
    """What the interim analysis found, on the endpoint's natural scale.

    Parameters
    ----------
    estimate
        The estimated effect: a difference, or a ratio (hazard ratio, rate ratio, risk or
        odds ratio) for ratio endpoints.
    standard_error
        Its standard error on the analysis scale (the log ratio for ratio endpoints), or
        None when ``information_fraction`` is given instead.
    information_fraction
        Share of the final analysis's information the interim holds, in (0, 1), or None
        when ``standard_error`` is given.
    description
        How the estimate was obtained, for the memo.
    responses
        ``(treatment_responders, treatment_n, control_responders, control_n)`` when the
        data are responder counts (control ``0, 0`` for a single arm): the interim look then
        also reports the exact predictive probability
        (:func:`~assurance.program.interim_exact.exact_predictive_probability`). Set by
        :meth:`from_responses` and :meth:`from_single_arm_responses`.

    Examples
    --------
    >>> InterimData(2.1, standard_error=1.3).estimate
    2.1
    """

    estimate: float
    standard_error: float | None = None
    information_fraction: float | None = None
    description: str = "estimate and standard error as given"
    responses: tuple[int, int, int, int] | None = None

    def __post_init__(self) -> None:
        owner = "InterimData"
        object.__setattr__(self, "estimate", check_real(self.estimate, "estimate", owner))
        if (self.standard_error is None) == (self.information_fraction is None):
            raise AssuranceInputError(
                f"The 'standard_error' and 'information_fraction' parameters of {owner}: give "
                f"exactly one of them. Got standard_error={self.standard_error!r} and "
                f"information_fraction={self.information_fraction!r} instead.")
        if self.standard_error is not None:
            object.__setattr__(self, "standard_error", check_real(
                self.standard_error, "standard_error", owner, low=0, low_open=True))
        if self.information_fraction is not None:
            object.__setattr__(self, "information_fraction", check_real(
                self.information_fraction, "information_fraction", owner, low=0,
                high=1, low_open=True, high_open=True))
        if self.responses is not None:
            try:
                counts = tuple(self.responses)
            except TypeError:
                counts = ()
            if len(counts) != 4 or any(
                    not isinstance(c, int | np.integer) or c < 0 for c in counts) \
                    or counts[0] > counts[1] or counts[2] > counts[3] or counts[1] < 1:
                raise AssuranceInputError(
                    f"The 'responses' parameter of {owner} must be four whole numbers "
                    "(treatment_responders, treatment_n, control_responders, control_n) "
                    "with responders <= patients and treatment_n >= 1. Got "
                    f"{self.responses!r} instead.")
            object.__setattr__(self, "responses", tuple(int(c) for c in counts))

    @classmethod
    def from_means(cls, treatment_mean: float, control_mean: float, treatment_n: int,
                   control_n: int, sd: float) -> InterimData:
        """Difference in means with ``se = sd sqrt(1/n_t + 1/n_c)``.

        Examples
        --------
        >>> d = InterimData.from_means(12.0, 9.0, 50, 50, sd=10.0)
        >>> d.estimate, round(d.standard_error, 4)
        (3.0, 2.0)
        """
        owner = "InterimData.from_means"
        m_t = check_real(treatment_mean, "treatment_mean", owner)
        m_c = check_real(control_mean, "control_mean", owner)
        n_t = check_int(treatment_n, "treatment_n", owner, low=1)
        n_c = check_int(control_n, "control_n", owner, low=1)
        s = check_real(sd, "sd", owner, low=0, low_open=True)
        return cls(m_t - m_c, s * math.sqrt(1 / n_t + 1 / n_c),
                   description=f"means {m_t:g} (treatment, {n_t} patients) and {m_c:g} "
                               f"(control, {n_c} patients), SD {s:g}")

    @classmethod
    def from_responses(cls, treatment_responders: int, treatment_n: int,
                       control_responders: int, control_n: int,
                       scale: str = "difference") -> InterimData:
        """Responders per arm: the risk difference, risk ratio or odds ratio with its Wald
        standard error (log scale for the ratios).

        Examples
        --------
        >>> d = InterimData.from_responses(30, 60, 20, 60)
        >>> round(d.estimate, 4), round(d.standard_error, 4)
        (0.1667, 0.0887)
        """
        owner = "InterimData.from_responses"
        n_t = check_int(treatment_n, "treatment_n", owner, low=1)
        n_c = check_int(control_n, "control_n", owner, low=1)
        x_t = check_int(treatment_responders, "treatment_responders", owner, low=0, high=n_t)
        x_c = check_int(control_responders, "control_responders", owner, low=0, high=n_c)
        check_choice(scale, "scale", owner, ["difference", "risk_ratio", "odds_ratio"])
        if scale != "difference":
            empty = [name for name, x, n in (("treatment", x_t, n_t), ("control", x_c, n_c))
                     if x == 0 or (scale == "odds_ratio" and x == n)]
            if empty:
                raise AssuranceInputError(
                    f"The responders of {owner} must be above 0 (and, for an odds ratio, "
                    f"below the arm's size) in each arm for a {scale.replace('_', ' ')} on "
                    f"the log scale; the {' and '.join(empty)} arm has none (or all). Got "
                    f"{x_t}/{n_t} and {x_c}/{n_c} instead. Give the estimate and its "
                    "standard error instead.")
        est = _rate_contrast(x_t / n_t, x_c / n_c, scale)
        var = _wald_variance(x_t, n_t, scale) + _wald_variance(x_c, n_c, scale)
        if var <= 0:
            raise AssuranceInputError(
                f"The responders of {owner} give a standard error of 0 ({x_t}/{n_t} and "
                f"{x_c}/{n_c}: no variation in either arm). Got those counts; give the "
                "estimate and a standard error instead.")
        return cls(float(est), math.sqrt(var),
                   description=f"{x_t} of {n_t} responded on treatment, {x_c} of {n_c} on "
                               "control", responses=(x_t, n_t, x_c, n_c))

    @classmethod
    def from_single_arm_responses(cls, responders: int, n: int, reference_rate: float,
                                  scale: str = "difference") -> InterimData:
        """Responders in a single arm against a fixed reference rate ``p0``: ``p - p0``
        (Wald standard error ``sqrt(p (1 - p) / n)``), ``p / p0`` or the odds ratio (standard
        errors of the logarithms ``sqrt((1 - p) / x)`` and ``sqrt(1/x + 1/(n - x))``).

        Examples
        --------
        >>> d = InterimData.from_single_arm_responses(16, 40, 0.25)
        >>> round(d.estimate, 4), round(d.standard_error, 4), d.responses
        (0.15, 0.0775, (16, 40, 0, 0))
        """
        owner = "InterimData.from_single_arm_responses"
        n = check_int(n, "n", owner, low=1)
        x = check_int(responders, "responders", owner, low=0, high=n)
        p0 = check_real(reference_rate, "reference_rate", owner, low=0, high=1,
                        low_open=True, high_open=True)
        check_choice(scale, "scale", owner, ["difference", "risk_ratio", "odds_ratio"])
        if x == 0 or x == n:
            raise AssuranceInputError(
                f"The 'responders' parameter of {owner} must be above 0 and below n ({n}) for "
                f"a standard error from the counts. Got {x!r} instead. Give the estimate and "
                "its standard error instead.")
        est, var = _rate_contrast(x / n, p0, scale), _wald_variance(x, n, scale)
        return cls(float(est), math.sqrt(var),
                   description=f"{x} of {n} responded (single arm, reference rate {p0:g})",
                   responses=(x, n, 0, 0))

    @classmethod
    def from_events(cls, hazard_ratio: float, events: int, allocation: float = 1.0
                    ) -> InterimData:
        """An estimated hazard ratio from ``events`` events: ``se = 1 / sqrt(E p (1 - p))``,
        ``p = allocation / (1 + allocation)`` (``2 / sqrt(E)`` for 1:1; Schoenfeld 1983).

        Examples
        --------
        >>> round(InterimData.from_events(0.8, 100).standard_error, 4)
        0.2
        """
        owner = "InterimData.from_events"
        hr = check_real(hazard_ratio, "hazard_ratio", owner, low=0, low_open=True)
        e = check_int(events, "events", owner, low=1)
        r = check_real(allocation, "allocation", owner, low=0, low_open=True)
        p = r / (1 + r)
        return cls(hr, 1 / math.sqrt(e * p * (1 - p)),
                   description=f"hazard ratio {hr:g} from {e} events")

    @classmethod
    def from_counts(cls, treatment_events: int, treatment_exposure: float,
                    control_events: int, control_exposure: float) -> InterimData:
        """Event counts and exposure per arm: the rate ratio with the Poisson standard error
        ``sqrt(1/x_t + 1/x_c)`` of its logarithm (no overdispersion).

        Examples
        --------
        >>> d = InterimData.from_counts(40, 100.0, 50, 100.0)
        >>> d.estimate, round(d.standard_error, 4)
        (0.8, 0.2121)
        """
        owner = "InterimData.from_counts"
        x_t = check_int(treatment_events, "treatment_events", owner, low=1)
        x_c = check_int(control_events, "control_events", owner, low=1)
        e_t = check_real(treatment_exposure, "treatment_exposure", owner, low=0,
                         low_open=True)
        e_c = check_real(control_exposure, "control_exposure", owner, low=0, low_open=True)
        return cls((x_t / e_t) / (x_c / e_c), math.sqrt(1 / x_t + 1 / x_c),
                   description=f"{x_t} events in {e_t:g} exposure on treatment, {x_c} in "
                               f"{e_c:g} on control (Poisson standard error)")


# ------------------------------------------------------------------------------------------
# the final analysis as planned
# ------------------------------------------------------------------------------------------
def _kind(endpoint: Any) -> str:
    return type(endpoint).__name__


def final_standard_error(design: Any, n_total: int) -> float:
    """Standard error of the final estimate (analysis scale) at the planned total size,
    with the planning values of the design (the assumed effect where the variance depends
    on it).

    Parameters
    ----------
    design
        The :class:`~assurance.TrialDesign`.
    n_total
        Planned total number of patients.

    Returns
    -------
    float

    Notes
    -----
    Means: ``sigma sqrt(1/n_t + 1/n_c)``. Response rates at the assumed effect: Wald
    variance of the difference, log risk ratio or log odds ratio. Hazard ratio:
    ``1 / sqrt(E p (1 - p))`` with the expected events ``E`` at the assumed hazard ratio.
    Counts: the endpoint's variance of the log rate ratio at the assumed ratio.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
    >>> round(final_standard_error(d, 200), 4)  # 10 sqrt(2 / 100)
    1.4142
    """
    ep = design.endpoint
    n = check_int(n_total, "n_total", "final_standard_error", low=ep.smallest_total)
    arms = ep.arm_sizes(np.array([n]))
    n_t, n_c = int(arms[0][0]), int(arms[1][0])
    kind = _kind(ep)
    if kind == "ContinuousEndpoint":
        se = float(ep.sigma * ep.se_factor(n_t, n_c))
    elif kind == "BinaryEndpoint":
        p_t, p_c = ep.rates(design.assumed_effect)
        single = ep.layout == "single_arm"
        if ep.scale == "difference":
            var = p_t * (1 - p_t) / n_t + (0 if single else p_c * (1 - p_c) / n_c)
        elif ep.scale == "risk_ratio":
            var = (1 - p_t) / (n_t * p_t) + (0 if single else (1 - p_c) / (n_c * p_c))
        else:
            var = 1 / (n_t * p_t * (1 - p_t)) + (0 if single else 1 / (n_c * p_c * (1 - p_c)))
        se = math.sqrt(var)
    elif kind == "SurvivalEndpoint":
        se = float(ep.standard_error(n_t, n_c, design.assumed_effect)[0])
    elif kind == "CountEndpoint":
        se = math.sqrt(float(ep.log_ratio_variance(design.assumed_effect, n_t, n_c)))
    else:  # pragma: no cover - every built-in endpoint is listed
        raise AssuranceInputError(
            f"The 'design' parameter of final_standard_error has an endpoint "
            f"({kind}) without a normal approximation. Give final_se instead.")
    if not (math.isfinite(se) and se > 0):
        raise AssuranceInputError(
            f"The 'n_total' parameter of final_standard_error gives no finite standard error "
            f"for this design. Got {n_total!r} instead.")
    return se


# ------------------------------------------------------------------------------------------
# the result
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class OperatingRow:
    """Operating characteristics of the boundaries under one truth.

    ``p_futility``, ``p_efficacy``: probabilities of stopping at the interim; ``p_success``:
    stopping for efficacy or continuing and passing the final rule; ``p_success_no_look``:
    the same trial without the interim look; ``expected_fraction``: expected share of the
    final information used; ``expected_size``: the same in patients (events for a hazard
    ratio), assuming they accrue in proportion to information.
    """

    name: str
    effect: float | None  # natural scale; None for the design prior
    p_futility: float
    p_efficacy: float
    p_success: float
    p_success_no_look: float
    expected_fraction: float
    expected_size: float

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass(frozen=True, eq=False)
class InterimLook:
    """What an interim look predicts: see :func:`evaluate_interim` for how it is computed.

    Attributes (benefit scale unless named ``*_natural``)
    ---------------------------------------------------------
    design, data
        The trial and the interim data.
    planned_size, size_unit
        Planned patients (or events for a hazard ratio).
    final_se, interim_se, fraction
        Standard errors and the information fraction ``t``.
    estimate, threshold
        Interim estimate ``d_1`` and the final rule's threshold ``c``.
    predictive
        ``{"design": ..., "analysis": ...}``: predictive probability of success under the
        posterior from each prior.
    posterior
        The same keys: posterior mean, SD (benefit scale) and P(benefit).
    conditional
        ``{"assumed": ..., "trend": ..., "none": ...}``: conditional power.
    futility, efficacy, prediction_prior
        The boundaries (predictive probabilities) and the prior they use.
    futility_cut, efficacy_cut
        The interim estimates where they stand (benefit scale; None when no estimate
        reaches them).
    decision
        ``"stop for futility"``, ``"continue"`` or ``"stop for efficacy"``.
    operating
        :class:`OperatingRow` per truth: the design prior, no effect, the assumed effect
        (and the relevant effect when the design has one).
    curve
        Operating characteristics over true effects: ``effect`` (benefit), ``p_futility``,
        ``p_efficacy``, ``p_success``, ``p_success_no_look``.
    notes
        Plain remarks for the memo (edge cases, approximations).
    exact
        For responder counts and a response endpoint: the exact (beta-binomial) predictive
        probability (:class:`~assurance.program.interim_exact.ExactPrediction`), else None.
    """

    design: Any
    data: InterimData
    planned_size: float
    size_unit: str
    final_se: float
    interim_se: float
    fraction: float
    estimate: float
    threshold: float
    predictive: dict[str, float]
    posterior: dict[str, dict[str, float]]
    conditional: dict[str, float]
    futility: float
    efficacy: float
    prediction_prior: str
    futility_cut: float | None
    efficacy_cut: float | None
    decision: str
    operating: tuple[OperatingRow, ...]
    curve: dict[str, np.ndarray] = field(repr=False)
    notes: tuple[str, ...] = ()
    exact: Any = None

    # ---- natural-scale helpers ------------------------------------------------------------
    def natural(self, value: float | None) -> float | None:
        """A benefit-scale value on the endpoint's natural scale (None stays None)."""
        if value is None:
            return None
        return float(self.design.endpoint.from_benefit(value))

    def predictive_at(self, estimates: Any, prior: PredictionPrior | None = None
                      ) -> np.ndarray:
        """Predictive probability at other interim estimates (benefit scale)."""
        chosen = self._prior(prior or self.prediction_prior)
        return predictive_probability(estimates, prior=chosen, interim_se=self.interim_se,
                                      final_se=self.final_se, threshold=self.threshold)

    def conditional_at(self, estimates: Any, effect: float) -> np.ndarray:
        """Conditional power at other interim estimates, at one effect (benefit scale)."""
        return conditional_power(estimates, effect, interim_se=self.interim_se,
                                 final_se=self.final_se, threshold=self.threshold)

    def _prior(self, which: str) -> Prior | None:
        return _prediction_prior(self.design, which)


def _prediction_prior(design: Any, which: str) -> Prior | None:
    if which == "design":
        return design.benefit_prior
    if design.analysis_prior is None:
        return None
    return design.endpoint.benefit_prior(design.analysis_prior)


# ------------------------------------------------------------------------------------------
# boundaries and their operating characteristics
# ------------------------------------------------------------------------------------------
def _solve_cut(pp: Callable[[np.ndarray], np.ndarray], level: float, centre: float,
               scale: float) -> float | None:
    """The interim estimate where the (rising) predictive probability equals ``level``."""
    lo, hi = centre - scale, centre + scale
    for _ in range(60):
        if float(pp(np.array([lo]))[0]) < level:
            break
        lo = centre - 2 * (centre - lo)
    else:
        return None
    for _ in range(60):
        if float(pp(np.array([hi]))[0]) > level:
            break
        hi = centre + 2 * (hi - centre)
    else:
        return None
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if mid in (lo, hi):
            break
        if float(pp(np.array([mid]))[0]) < level:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def _fixed_oc(delta: np.ndarray, f: float, e: float, se1: float, se_n: float, c: float
              ) -> dict[str, np.ndarray]:
    """OCs at fixed true effects (arrays over delta)."""
    rho = se_n / se1
    p_fut = _ndtr((f - delta) / se1)
    p_eff = 1.0 - _ndtr((e - delta) / se1)
    zc = (c - delta) / se_n
    cont = (bivariate_normal_upper((f - delta) / se1, zc, rho)
            - bivariate_normal_upper((e - delta) / se1, zc, rho))
    return {"p_futility": p_fut, "p_efficacy": p_eff,
            "p_success": np.clip(p_eff + np.maximum(cont, 0.0), 0.0, 1.0),
            "p_success_no_look": 1.0 - _ndtr(zc)}


def _normal_oc(m: float, v: float, f: float, e: float, se1: float, se_n: float, c: float
               ) -> dict[str, float]:
    """OCs averaged over a normal prior N(m, v): (d_1, d_N) is bivariate normal."""
    s1, sn = math.sqrt(v + se1**2), math.sqrt(v + se_n**2)
    rho = (v + se_n**2) / (s1 * sn)
    p_fut = float(_ndtr((f - m) / s1))
    p_eff = float(1.0 - _ndtr((e - m) / s1))
    zc = (c - m) / sn
    cont = float(bivariate_normal_upper((f - m) / s1, zc, rho)
                 - bivariate_normal_upper((e - m) / s1, zc, rho))
    return {"p_futility": p_fut, "p_efficacy": p_eff,
            "p_success": min(max(p_eff + max(cont, 0.0), 0.0), 1.0),
            "p_success_no_look": float(1.0 - _ndtr(zc))}


def _prior_oc(prior: Prior, f: float, e: float, se1: float, se_n: float, c: float
              ) -> dict[str, float]:
    total = dict.fromkeys(("p_futility", "p_efficacy", "p_success", "p_success_no_look"),
                          0.0)
    x, w = np.polynomial.legendre.leggauss(_QUAD_NODES)
    u, w = 0.5 * (x + 1), 0.5 * w
    for weight, part in prior.parts():
        if isinstance(part, Normal):
            oc = _normal_oc(part.mu, part.sigma**2, f, e, se1, se_n, c)
        elif isinstance(part, PointMass):
            oc = {k: float(v[0]) for k, v in _fixed_oc(np.array([part.value]), f, e, se1,
                                                       se_n, c).items()}
        else:  # average the fixed-effect OCs over the part's quantiles
            delta = np.array([float(part.ppf(q)) for q in u])
            fixed = _fixed_oc(delta, f, e, se1, se_n, c)
            oc = {k: float(np.sum(w * v)) for k, v in fixed.items()}
        for k in total:
            total[k] += weight * oc[k]
    return {k: min(max(v, 0.0), 1.0) for k, v in total.items()}


def _effect_grid(design: Any, estimate: float, se1: float, se_n: float, c: float,
                 count: int = 121) -> np.ndarray:
    prior = design.benefit_prior
    marks = [0.0, c, estimate, float(design.endpoint.to_benefit(design.assumed_effect))]
    try:
        marks += [float(prior.ppf(0.02)), float(prior.ppf(0.98))]
    except (AssuranceInputError, ValueError):  # pragma: no cover - every prior has a ppf
        pass
    marks = [m for m in marks if math.isfinite(m)]
    lo, hi = min(marks) - 2 * se_n, max(marks) + 2 * se_n
    return np.linspace(lo, hi, count)


# ------------------------------------------------------------------------------------------
# the entry point
# ------------------------------------------------------------------------------------------
def evaluate_interim(design: Any, data: InterimData, *, planned_total: int | None = None,
                 final_se: float | None = None, futility: float = 0.1,
                 efficacy: float = 0.99, prediction_prior: PredictionPrior = "analysis",
                 ) -> InterimLook:
    """Predictive probability, conditional power and boundaries at an interim look.

    Parameters
    ----------
    design
        The trial as planned (:class:`~assurance.TrialDesign`): its design prior, analysis
        prior, success rule and endpoint.
    data
        :class:`InterimData`: the interim estimate (natural scale) and its standard error or
        information fraction.
    planned_total
        Planned total patients of the final analysis; its standard error follows from the
        design (:func:`final_standard_error`). Give this or ``final_se``.
    final_se
        Standard error of the final estimate (analysis scale), overriding the design's.
    futility, efficacy
        Stop for futility when the predictive probability is below ``futility`` (0: never),
        for efficacy when it is above ``efficacy`` (1: never); ``futility < efficacy``.
    prediction_prior
        The prior whose posterior the boundaries use: ``"analysis"`` (the prior of the final
        analysis, flat when the design has none) or ``"design"`` (what the planners
        believe). Both predictive probabilities are reported either way.

    Returns
    -------
    InterimLook

    Notes
    -----
    On the benefit scale (see the module notes): ``t = se_N^2 / se_1^2``; the final
    rule's threshold ``c`` is the rule's threshold at ``se_N`` (z critical values: the
    normal approximation, also for a t analysis); conditional power and predictive
    probability as in :func:`conditional_power` and :func:`predictive_probability`; the
    boundary cuts solve ``PP(d_1) = futility`` and ``PP(d_1) = efficacy`` by bisection (the
    predictive probability rises with ``d_1``); operating characteristics from the
    bivariate normal law of ``(d_1, d_N)``. A stop for efficacy counts as a success: the
    probability of success at no effect is then the type I error of the two-stage trial,
    which exceeds the final rule's level when efficacy stops are allowed.

    References
    ----------
    Spiegelhalter, D. J., Freedman, L. S. & Blackburn, P. R. (1986). Monitoring clinical
    trials: conditional or predictive power? Controlled Clinical Trials 7, 8-17.

    Lan, K. K. G. & Wittes, J. (1988). The B-value: a tool for monitoring data. Biometrics
    44, 579-585.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    >>> look = evaluate_interim(design, InterimData(3.0, standard_error=2.0), planned_total=200)
    >>> round(look.fraction, 3), look.decision
    (0.5, 'continue')
    """
    owner = "evaluate_interim"
    if not isinstance(data, InterimData):
        raise AssuranceInputError(
            f"The 'data' parameter of {owner} must be an InterimData. Got {data!r} instead.")
    check_choice(prediction_prior, "prediction_prior", owner, ["analysis", "design"])
    futility = check_real(futility, "futility", owner, low=0, high=1, high_open=True)
    efficacy = check_real(efficacy, "efficacy", owner, low=0, high=1, low_open=True)
    if not futility < efficacy:
        raise AssuranceInputError(
            f"The 'futility' parameter of {owner} must be below 'efficacy' ({efficacy:g}). "
            f"Got {futility!r} instead.")
    ep = design.endpoint
    if not hasattr(ep, "benefit_prior"):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} "
            "instead.")
    if final_se is None and planned_total is None:
        raise AssuranceInputError(
            f"The 'planned_total' parameter of {owner} is needed when 'final_se' is not "
            "given (the final analysis's standard error follows from the planned size). "
            "Got None.")
    if final_se is not None:
        se_n = check_real(final_se, "final_se", owner, low=0, low_open=True)
    else:
        se_n = final_standard_error(design, planned_total)  # type: ignore[arg-type]
    if data.standard_error is not None:
        se1 = data.standard_error
        t = se_n**2 / se1**2
        if t >= MAX_FRACTION:
            raise AssuranceInputError(
                f"The 'data' parameter of {owner} holds as much information as the final "
                f"analysis or more: interim standard error {se1:.4g}, final {se_n:.4g} "
                f"(information fraction {t:.3g}). An interim look needs a standard error "
                "above the final one; check the planned size and the interim data.")
    else:
        t = float(data.information_fraction)  # type: ignore[arg-type]
        if t >= MAX_FRACTION:
            raise AssuranceInputError(
                f"The 'data' parameter of {owner} has an information fraction too close to "
                f"1 to leave anything to predict. Got {t!r} instead.")
        se1 = se_n / math.sqrt(t)
    natural = data.estimate
    if ep.ratio_scale and natural <= 0:
        raise AssuranceInputError(
            f"The 'data' parameter of {owner} must hold a ratio > 0 for a ratio endpoint. "
            f"Got estimate={natural!r} instead.")
    d1 = float(ep.to_benefit(natural))
    rule = design.benefit_rule
    notes: list[str] = []
    beta_prior = getattr(rule, "analysis_prior", None)
    if type(beta_prior).__name__ == "BetaRates":
        # The normal approximation needs a normal analysis prior: the beta priors' mean and
        # SD on the benefit scale stand in for them (the exact value from responder counts
        # uses the beta priors themselves).
        stand_in = Normal(float(beta_prior.mean()), math.sqrt(float(beta_prior.var())))
        rule = replace(rule, analysis_prior=stand_in)
        notes.append("The normal approximation replaces the beta analysis prior by a normal "
                     "prior with its mean and SD on the effect scale; give the responder "
                     "counts for the exact predictive probability.")
    try:
        c = float(np.asarray(rule.threshold(se_n, rule.critical_z())))
    except AssuranceInputError as exc:
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} has a success rule the normal approximation "
            f"of an interim look cannot use ({exc}). Use a normal (or normal mixture) "
            "analysis prior.") from None
    priors = {"design": design.benefit_prior, "analysis": _prediction_prior(design, "analysis")}
    x = np.array([d1])
    predictive, posterior = {}, {}
    for name, prior in priors.items():
        post = _posterior(prior, x, se1)
        predictive[name] = float(_predictive(post, x, t, se_n, c)[0])
        posterior[name] = _posterior_summary(post)
    assumed = float(ep.to_benefit(design.assumed_effect))
    null = 0.0
    cp = {key: float(conditional_power(d1, delta, interim_se=se1, final_se=se_n,
                                       threshold=c))
          for key, delta in (("assumed", assumed), ("trend", d1), ("none", null))}

    chosen = priors[prediction_prior]
    pp: Callable[[np.ndarray], np.ndarray] = lambda xs: predictive_probability(  # noqa: E731
        xs, prior=chosen, interim_se=se1, final_se=se_n, threshold=c)
    scale = 10 * se1 + abs(c) + abs(d1)
    f_cut = e_cut = None
    if futility > 0:
        f_cut = _solve_cut(pp, futility, c, scale)
        if f_cut is None:
            notes.append(f"No interim estimate gives a predictive probability below "
                         f"{futility:g}: the futility boundary never applies.")
    if efficacy < 1:
        e_cut = _solve_cut(pp, efficacy, c, scale)
        if e_cut is None:
            notes.append(f"No interim estimate gives a predictive probability above "
                         f"{efficacy:g}: the efficacy boundary never applies.")
    f = -math.inf if f_cut is None else f_cut
    e = math.inf if e_cut is None else e_cut
    current = predictive[prediction_prior]
    if futility > 0 and current < futility:
        decision = "stop for futility"
    elif efficacy < 1 and current > efficacy:
        decision = "stop for efficacy"
    else:
        decision = "continue"

    if ep.__class__.__name__ == "SurvivalEndpoint" and planned_total is not None:
        n_t, n_c = ep.arm_sizes(np.array([int(planned_total)]))
        size = float(ep.expected_events(n_t, n_c, design.assumed_effect)[0])
        unit = "events"
    elif planned_total is not None:
        size, unit = float(planned_total), "patients"
    else:
        size, unit = math.nan, "patients"

    def row(name: str, effect: float | None, oc: Mapping[str, float]) -> OperatingRow:
        stop = oc["p_futility"] + oc["p_efficacy"]
        frac = t + (1 - t) * (1 - stop)
        return OperatingRow(name, effect, float(oc["p_futility"]), float(oc["p_efficacy"]),
                            float(oc["p_success"]), float(oc["p_success_no_look"]), frac,
                            frac * size)

    rows = [row("design prior", None, _prior_oc(design.benefit_prior, f, e, se1, se_n, c))]
    truths = [("no effect", null), ("assumed effect", assumed)]
    if design.relevant_effect is not None:
        truths.append(("relevant effect", float(ep.to_benefit(design.relevant_effect))))
    for name, delta in truths:
        fixed = _fixed_oc(np.array([delta]), f, e, se1, se_n, c)
        rows.append(row(name, float(ep.from_benefit(delta)) + 0.0,
                        {k: float(v[0]) for k, v in fixed.items()}))
    grid = _effect_grid(design, d1, se1, se_n, c)
    curve = {"effect": grid, **_fixed_oc(grid, f, e, se1, se_n, c)}
    if t < 0.05:
        notes.append(f"The interim holds only {100 * t:.1f}% of the final information: the "
                     "predictive probability rests almost wholly on the prior.")
    if t > 0.95:
        notes.append(f"The interim holds {100 * t:.1f}% of the final information: the "
                     "final result is nearly decided already.")
    if getattr(ep, "test", None) not in (None, "z", "wald"):
        notes.append(f"The final analysis uses the {ep.test.replace('_', ' ')} test; the "
                     "interim look uses the normal approximation of the estimate.")
    if getattr(ep, "overdispersion", 0.0) and data.description.endswith(
            "(Poisson standard error)"):
        notes.append("The interim standard error comes from Poisson counts; with the "
                     "design's overdispersion the interim holds less information than this.")
    if getattr(ep, "analysis", "z") == "t":
        notes.append("The final analysis is a t test; the interim look uses its normal "
                     "approximation (z critical values).")
    exact = _exact_from_counts(design, data, planned_total, owner)
    if exact is not None:
        notes.append(_exact_note(exact, predictive, futility, efficacy, decision))
    elif data.responses is not None and type(ep).__name__ == "BinaryEndpoint" \
            and planned_total is not None:
        notes.append(f"The planned total of {planned_total:,} patients is beyond the exact "
                     "sum over final counts (at most 2,000,000): the predictive probability "
                     "is the normal approximation alone.")
    return InterimLook(design=design, data=data, planned_size=size, size_unit=unit,
                       final_se=se_n, interim_se=se1, fraction=t, estimate=d1, threshold=c,
                       predictive=predictive, posterior=posterior, conditional=cp,
                       futility=futility, efficacy=efficacy,
                       prediction_prior=prediction_prior, futility_cut=f_cut,
                       efficacy_cut=e_cut, decision=decision, operating=tuple(rows),
                       curve=curve, notes=tuple(notes), exact=exact)


def _exact_from_counts(design: Any, data: InterimData, planned_total: int | None,
                       owner: str) -> Any:
    """The exact predictive probability when the data are responder counts, else None."""
    ep = design.endpoint
    if data.responses is None or type(ep).__name__ != "BinaryEndpoint" \
            or planned_total is None:
        return None
    from .interim_exact import MAX_EXACT_TOTAL, exact_predictive_probability

    if planned_total > MAX_EXACT_TOTAL:  # the normal approximation alone (noted)
        return None

    x_t, n_t, x_c, n_c = data.responses
    single = ep.layout == "single_arm"
    if single != (n_c == 0):
        raise AssuranceInputError(
            f"The 'data' parameter of {owner} holds responder counts for "
            f"{'one arm' if n_c == 0 else 'two arms'}; the design has "
            f"{'a single arm' if single else 'two arms'}. Use "
            f"InterimData.{'from_single_arm_responses' if single else 'from_responses'}.")
    return exact_predictive_probability(
        design, treatment_responders=x_t, treatment_n=n_t, planned_total=planned_total,
        control_responders=None if single else x_c, control_n=None if single else n_c)


def _exact_note(exact: Any, predictive: Mapping[str, float], futility: float,
                efficacy: float, decision: str) -> str:
    """The memo's sentence on the exact value beside the normal approximation."""
    p = exact.probability
    text = (f"The {exact.describe()}; the normal approximation with the analysis prior "
            f"(flat when the design has none) gives {predictive['analysis']:.4f}.")
    by_exact = ("stop for futility" if futility > 0 and p < futility else
                "stop for efficacy" if efficacy < 1 and p > efficacy else "continue")
    if by_exact != decision:
        text += (f" By the exact value the boundaries would say '{by_exact}' rather than "
                 f"'{decision}': weigh the exact value, and ask a statistician to review "
                 "before acting.")
    return text
