"""Time-to-event endpoint: the hazard ratio (treatment / control), analysed by the log-rank test.

Two arms enter a trial uniformly over an accrual period (optionally after a linear ramp-up),
are followed for a fixed time after accrual closes, may drop out at a constant rate, and are
censored at the analysis. Survival is exponential or piecewise exponential on control, with
proportional hazards on treatment. From these the endpoint gives the expected number of
events for any arm sizes, and through Schoenfeld's (1983) approximation the standard error
of the estimated log hazard ratio, so power and assurance follow from the normal machinery in
:mod:`assurance.compute`.

The design prior of a :class:`~assurance.TrialDesign` with this endpoint is on the **log
hazard ratio** (natural scale of the analysis); a prior median hazard ratio of 0.8 is
``Normal(log(0.8), sd)``. Patient-level simulation with a real log-rank test lives in
:mod:`assurance.simulation.survival`.

Time units are the planner's (months by default; ``time_unit`` only converts the annual
dropout probability). Every time-like input (median, accrual, follow-up, hazard change
times) is in that unit, and hazards are per unit.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from scipy import special

from .._roots import brent_root
from .._validation import check_choice, check_int, check_real, check_real_array
from ..errors import AssuranceInputError
from ..priors.families import Normal, PointMass, Prior
from ..rules.significance import Significance
from .base import Endpoint, SuccessCalculator

__all__ = ["SurvivalEndpoint", "events_needed"]

LN2 = math.log(2.0)
UNITS_PER_YEAR = {"days": 365.25, "weeks": 365.25 / 7.0, "months": 12.0, "years": 1.0}
#: log hazard ratios are clipped to +-this before computing event probabilities (overflow)
_LOG_HR_LIMIT = 50.0
#: Gauss-Legendre nodes per panel for the piecewise-exponential integrals
_GL_NODES = 12
_GL_X, _GL_W = np.polynomial.legendre.leggauss(_GL_NODES)


# ------------------------------------------------------------------------------------------
# Schoenfeld's events formula
# ------------------------------------------------------------------------------------------
def events_needed(hazard_ratio: float, *, alpha: float = 0.025, power: float = 0.8,
                  allocation: float = 1.0) -> float:
    """Events a log-rank test needs for a given power (Schoenfeld's formula).

    Parameters
    ----------
    hazard_ratio
        Hazard ratio (treatment / control) the trial is powered for, > 0 and not 1.
    alpha
        One-sided significance level in (0, 0.5) (use 0.025 for a two-sided 0.05 test).
    power
        Required power, in (0, 1).
    allocation
        Treatment patients per control patient, > 0 (2.0 means 2:1).

    Returns
    -------
    float
        Required number of events (not rounded; take the ceiling for a plan).

    Notes
    -----
    With ``p = allocation / (1 + allocation)`` the fraction on treatment,

    ``D = (z_{1-alpha} + z_{1-beta})^2 / (p (1 - p) (log HR)^2)``,

    which is the events count at which ``se(log HR) = 1 / sqrt(D p (1 - p))`` makes the
    one-sided z test reach the power (Schoenfeld 1983).

    References
    ----------
    Schoenfeld D. (1983). Sample-size formula for the proportional-hazards regression model.
    Biometrics 39:499-503.

    Examples
    --------
    >>> round(events_needed(0.75, alpha=0.025, power=0.8), 2)
    379.35
    """
    owner = "events_needed"
    hr = check_real(hazard_ratio, "hazard_ratio", owner, low=0, low_open=True)
    if hr == 1.0:
        raise AssuranceInputError(
            f"The 'hazard_ratio' parameter of {owner} must differ from 1 (no effect needs "
            f"infinitely many events). Got {hazard_ratio!r} instead.")
    alpha = check_real(alpha, "alpha", owner, low=0, high=0.5, low_open=True, high_open=True)
    power = check_real(power, "power", owner, low=0, high=1, low_open=True, high_open=True)
    r = check_real(allocation, "allocation", owner, low=0, low_open=True)
    p = r / (1.0 + r)
    z = -special.ndtri(alpha) - special.ndtri(1.0 - power)  # scipy.stats.norm.isf's arithmetic
    return float(z * z / (p * (1.0 - p) * math.log(hr) ** 2))


# ------------------------------------------------------------------------------------------
# event probabilities
# ------------------------------------------------------------------------------------------
def _series(x: np.ndarray, first: int, denominators_start: int) -> np.ndarray:
    """sum_{k>=0} (-x)^k x^first / (k + denominators_start)!, six terms (small x only)."""
    total = np.zeros_like(x)
    for k in range(6):
        total += (-x) ** k / math.factorial(k + denominators_start)
    return total * x ** first


def _j(x: np.ndarray) -> np.ndarray:
    """x - 1 + exp(-x) without cancellation (>= 0)."""
    small = x < 1e-2
    safe = np.where(small, 1.0, x)
    return np.where(small, _series(x, 2, 2), safe + np.expm1(-safe))


def _m(x: np.ndarray) -> np.ndarray:
    """(x^2/2 - x + 1 - exp(-x)) / x without cancellation (>= 0)."""
    small = x < 1e-2
    safe = np.where(small, 1.0, x)
    return np.where(small, _series(x, 2, 3), (0.5 * safe * safe - safe - np.expm1(-safe)) / safe)


def _exponential_event_probability(lam: np.ndarray, eta: float, accrual: float, ramp: float,
                                   follow_up: float) -> np.ndarray:
    """P(event observed by the analysis) for exponential hazard ``lam`` (closed form).

    Entry density ``c * min(u / R, 1)`` on ``[0, A]`` with ``c = 1 / (A - R / 2)``; analysis at
    ``T = A + F``. With ``theta = lam + eta`` the follow-up ``S = T - U`` gives
    ``P = lam / theta * (1 - E exp(-theta S))`` and, with ``a = theta (A - R)``,
    ``r = theta R``, ``1 - E exp(-theta S) = 1 - exp(-theta F) + exp(-theta F) *
    (j(a) + r/2 (1 - exp(-a)) + exp(-a) m(r)) / (a + r/2)``, every term non-negative.
    """
    lam = np.asarray(lam, dtype=float)
    theta = lam + eta
    a = theta * (accrual - ramp)
    r = theta * ramp
    inner = (_j(a) - 0.5 * r * np.expm1(-a) + np.exp(-a) * _m(r)) / (a + 0.5 * r)
    tail = np.exp(-theta * follow_up)
    return np.clip(lam / theta * (-np.expm1(-theta * follow_up) + tail * inner), 0.0, 1.0)


def _piecewise_event_by(s: np.ndarray, scale: np.ndarray, starts: np.ndarray,
                        hazards: np.ndarray, eta: float) -> np.ndarray:
    """P(event by follow-up time ``s``) with hazards ``scale * hazards`` and dropout ``eta``.

    ``s`` has shape (m,), ``scale`` shape (h,); returns shape (h, m). On piece k, with
    ``theta_k = lam_k + eta`` and ``H_k`` the total (event + dropout) hazard accumulated by its
    start, the piece adds ``exp(-H_k) lam_k / theta_k (1 - exp(-theta_k d_k(s)))``, ``d_k``
    the time spent in the piece.
    """
    lam = scale[:, None] * hazards[None, :]                       # (h, K)
    theta = lam + eta
    widths = np.diff(np.append(starts, np.inf))                  # (K,)
    spent = theta[:, :-1] * widths[None, :-1]
    h_start = np.concatenate([np.zeros((lam.shape[0], 1)), np.cumsum(spent, axis=1)], axis=1)
    dur = np.clip(s[:, None] - starts[None, :], 0.0, widths[None, :])    # (m, K)
    with np.errstate(invalid="ignore"):
        terms = (np.exp(-h_start) * lam / theta)[:, None, :] \
            * -np.expm1(-theta[:, None, :] * dur[None, :, :])
    return np.clip(np.nansum(terms, axis=2), 0.0, 1.0)


def _gauss_legendre(breaks: list[float], rate: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights on ``[breaks[0], breaks[-1]]`` for integrands with layers of width
    ``1 / rate`` at the right end of each segment.

    Each segment gets up to 32 equal panels (no longer than ``2 / rate`` when that is
    possible) and geometric panels halving toward its right end until the last is shorter
    than ``2 / rate``; 12 Gauss-Legendre nodes per panel.
    """
    edges: list[np.ndarray] = []
    for lo, hi in zip(breaks[:-1], breaks[1:], strict=True):
        if hi <= lo:
            continue
        width = hi - lo
        panels = int(min(max(math.ceil(rate * width / 2.0), 1), 32))
        last = width / panels
        halvings = int(min(max(math.ceil(math.log2(max(rate * last / 2.0, 1.0))), 0), 60))
        graded = hi - last * 0.5 ** np.arange(1, halvings + 1)
        edges.append(np.unique(np.concatenate([np.linspace(lo, hi, panels + 1), graded])))
    lows = np.concatenate([e[:-1] for e in edges])
    highs = np.concatenate([e[1:] for e in edges])
    half = 0.5 * (highs - lows)
    mid = 0.5 * (highs + lows)
    nodes = (mid[:, None] + half[:, None] * _GL_X[None, :]).ravel()
    weights = (half[:, None] * _GL_W[None, :]).ravel()
    return nodes, weights


_G8 = np.polynomial.legendre.leggauss(8)
_G16 = np.polynomial.legendre.leggauss(16)


def _adaptive_integral(func: Any, breaks: Sequence[float], *, tol: float = 1e-10,
                       rounds: int = 40) -> np.ndarray:
    """Vectorised adaptive quadrature of ``func`` over ``[breaks[0], breaks[-1]]``.

    ``func`` maps nodes (m,) to values (m, k). Every round evaluates all unfinished panels
    at once with 8- and 16-point Gauss-Legendre rules; a panel is done when the two agree
    within its share of ``tol`` (proportional to its width, in the max norm over the k
    outputs); the others are halved.
    """
    span = breaks[-1] - breaks[0]
    edges = np.unique(np.concatenate([np.linspace(lo, hi, 9) for lo, hi
                                      in zip(breaks[:-1], breaks[1:], strict=True) if hi > lo]))
    lows, highs = edges[:-1], edges[1:]
    total: np.ndarray | None = None
    for step in range(rounds):
        half = 0.5 * (highs - lows)
        mid = 0.5 * (highs + lows)
        x = np.concatenate([(mid[:, None] + half[:, None] * _G16[0]).ravel(),
                            (mid[:, None] + half[:, None] * _G8[0]).ravel()])
        values = func(x)
        p = lows.size
        v16 = values[:16 * p].reshape(p, 16, -1)
        v8 = values[16 * p:].reshape(p, 8, -1)
        fine = half[:, None] * np.einsum("pnk,n->pk", v16, _G16[1])
        coarse = half[:, None] * np.einsum("pnk,n->pk", v8, _G8[1])
        err = np.max(np.abs(fine - coarse), axis=1)
        done = (err <= tol * (2 * half) / span) | (step == rounds - 1)
        part = fine[done].sum(axis=0)
        total = part if total is None else total + part
        if done.all():
            break
        lows, highs, mid = lows[~done], highs[~done], mid[~done]
        lows, highs = np.concatenate([lows, mid]), np.concatenate([mid, highs])
    return total


# ------------------------------------------------------------------------------------------
# the endpoint
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True, kw_only=True)
class SurvivalEndpoint(Endpoint):
    """Time to an event (death, progression), compared by the hazard ratio.

    All arguments are keywords. Times are in one unit of the planner's choice (``time_unit``,
    months by default).

    Parameters
    ----------
    assumed_hazard_ratio
        Planning hazard ratio (treatment / control), > 0: the expected events, hence the
        standard error, are computed under it (see ``events_follow_true_effect``). Use the
        same value as the design's ``assumed_effect``.
    accrual_time
        Length of the accrual period, > 0. The trial's sample size ``n`` enters over this
        period whatever ``n`` is (a larger trial recruits faster).
    follow_up_time
        Further follow-up after the last patient enters, >= 0; the analysis is at
        ``accrual_time + follow_up_time`` (a fixed-follow-up design).
    control_median
        Median survival on control (exponential survival), > 0. Give this, or
        ``control_hazard``.
    control_hazard
        Control hazard per time unit: one number (exponential) or, with ``hazard_starts``,
        one hazard per interval (piecewise exponential). Each > 0.
    hazard_starts
        Start times of the piecewise intervals: first 0, strictly increasing; the last
        interval runs for ever.
    accrual_ramp
        Ramp-up time in ``[0, accrual_time]``: the entry rate rises linearly from 0 to its
        full level over the first ``accrual_ramp`` time units, then stays constant. 0 (the
        default) is uniform accrual.
    dropout_per_year
        Probability in ``[0, 1)`` that a patient is lost to follow-up within a year, turned
        into the constant hazard ``-log(1 - p) / (time units per year)``.
    time_unit
        ``"days"``, ``"weeks"``, ``"months"`` or ``"years"``: only used to convert the annual
        dropout probability.
    allocation
        Treatment patients per control patient, > 0.
    better
        ``"lower"`` (default: a hazard ratio below 1 favours treatment) or ``"higher"``.
    events_follow_true_effect
        False (default, common practice): the standard error uses the events expected under
        ``assumed_hazard_ratio`` for every true effect, so a normal design prior gives
        assurance in closed form. True: the events follow the true hazard ratio (a better
        treatment gives fewer events, hence a larger standard error), integrated over the
        design prior by adaptive quadrature; closer to what a trial would see.
    median_prior
        Optional prior on the control median (exponential survival only; all mass > 0).
        Assurance then averages over it by Monte Carlo, with standard errors. Classical
        power keeps ``control_median``.
    layout
        Only ``"two_arm"``.

    Notes
    -----
    With ``E`` expected events and ``p = n_t / (n_t + n_c)``, the log-rank / Cox estimate of
    the log hazard ratio is approximately normal with standard error
    ``1 / sqrt(E p (1 - p))`` (Schoenfeld 1983). On the benefit scale (``-log HR`` when
    lower is better) the estimate is ``N(b, se^2)``, and the success rule's threshold turns
    that into power and assurance.

    The design prior of a :class:`~assurance.TrialDesign` with this endpoint is on the log
    hazard ratio (``Normal(log(0.8), 0.15)`` for a log-normal belief with median ratio 0.8);
    ``assumed_effect``, ``relevant_effect`` and a rule's ``min_estimate`` are hazard ratios,
    a non-inferiority ``margin`` is a ratio above 1 (say 1.3).

    A patient entering at ``u`` is followed for ``s = T - u``; with event hazard ``lam(t)`` and
    dropout hazard ``eta`` the chance of an observed event is
    ``int_0^s lam(t) exp(-Lambda(t) - eta t) dt``. It is averaged over the entry density in
    closed form for exponential survival, and by Gauss-Legendre quadrature (panels split at
    the hazard change times and at the end of the ramp) for piecewise survival.

    References
    ----------
    Schoenfeld D. (1983). Sample-size formula for the proportional-hazards regression model.
    Biometrics 39:499-503.

    Examples
    --------
    >>> ep = SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
    ...                       assumed_hazard_ratio=0.75)
    >>> round(float(ep.expected_events(300, 300, 0.75)[0]), 1)
    407.9
    """

    assumed_hazard_ratio: float
    accrual_time: float
    follow_up_time: float = 0.0
    control_median: float | None = None
    control_hazard: float | Sequence[float] | None = None
    hazard_starts: Sequence[float] | None = None
    accrual_ramp: float = 0.0
    dropout_per_year: float = 0.0
    time_unit: Literal["days", "weeks", "months", "years"] = "months"
    allocation: float = 1.0
    better: Literal["lower", "higher"] = "lower"
    events_follow_true_effect: bool = False
    median_prior: Prior | None = None
    layout: Literal["two_arm"] = "two_arm"

    effect_name = "hazard ratio"
    ratio_scale = True

    def __post_init__(self) -> None:
        owner = "SurvivalEndpoint"
        put = self._put
        put("assumed_hazard_ratio", check_real(self.assumed_hazard_ratio,
                                               "assumed_hazard_ratio", owner, low=0,
                                               low_open=True))
        put("accrual_time", check_real(self.accrual_time, "accrual_time", owner, low=0,
                                       low_open=True))
        put("follow_up_time", check_real(self.follow_up_time, "follow_up_time", owner, low=0))
        put("accrual_ramp", check_real(self.accrual_ramp, "accrual_ramp", owner, low=0,
                                       high=self.accrual_time))
        put("dropout_per_year", check_real(self.dropout_per_year, "dropout_per_year", owner,
                                           low=0, high=1, high_open=True))
        check_choice(self.time_unit, "time_unit", owner, list(UNITS_PER_YEAR))
        put("allocation", check_real(self.allocation, "allocation", owner, low=0,
                                     low_open=True))
        check_choice(self.better, "better", owner, ["lower", "higher"])
        check_choice(self.layout, "layout", owner, ["two_arm"])
        if not isinstance(self.events_follow_true_effect, bool | np.bool_):
            raise AssuranceInputError(
                f"The 'events_follow_true_effect' parameter of {owner} must be True or False. "
                f"Got {self.events_follow_true_effect!r} instead.")
        put("events_follow_true_effect", bool(self.events_follow_true_effect))
        starts, hazards = self._survival_pieces(owner)
        object.__setattr__(self, "_starts", starts)
        object.__setattr__(self, "_hazards", hazards)
        if self.median_prior is not None:
            self._check_median_prior(owner)

    def _put(self, name: str, value: Any) -> None:
        object.__setattr__(self, name, value)

    def _survival_pieces(self, owner: str) -> tuple[np.ndarray, np.ndarray]:
        median, hazard, starts = self.control_median, self.control_hazard, self.hazard_starts
        if (median is None) == (hazard is None):
            raise AssuranceInputError(
                f"The 'control_median' parameter of {owner} must be given, or else "
                f"'control_hazard' (exactly one of the two). Got control_median={median!r}, "
                f"control_hazard={hazard!r} instead.")
        if median is not None:
            if starts is not None:
                raise AssuranceInputError(
                    f"The 'hazard_starts' parameter of {owner} needs 'control_hazard' (one "
                    f"hazard per interval), not 'control_median'. Got {starts!r} instead.")
            median = check_real(median, "control_median", owner, low=0, low_open=True)
            self._put("control_median", median)
            return np.zeros(1), np.array([LN2 / median])
        if starts is None:
            if isinstance(hazard, Sequence | np.ndarray) and not isinstance(hazard, str):
                raise AssuranceInputError(
                    f"The 'control_hazard' parameter of {owner} must be one number unless "
                    f"'hazard_starts' gives the interval start times. Got {hazard!r} instead.")
            lam = check_real(hazard, "control_hazard", owner, low=0, low_open=True)
            self._put("control_hazard", lam)
            return np.zeros(1), np.array([lam])
        s = check_real_array(starts, "hazard_starts", owner, low=0)
        if s[0] != 0.0 or np.any(np.diff(s) <= 0):
            raise AssuranceInputError(
                f"The 'hazard_starts' parameter of {owner} must start at 0 and increase "
                f"strictly. Got {starts!r} instead.")
        lam = check_real_array(hazard, "control_hazard", owner, low=0, low_open=True)
        if lam.size != s.size:
            raise AssuranceInputError(
                f"The 'control_hazard' parameter of {owner} must hold one hazard per entry of "
                f"hazard_starts ({s.size}). Got {hazard!r} instead.")
        self._put("hazard_starts", tuple(float(v) for v in s))
        self._put("control_hazard", tuple(float(v) for v in lam))
        return s, lam

    def _check_median_prior(self, owner: str) -> None:
        prior = self.median_prior
        if not isinstance(prior, Prior):
            raise AssuranceInputError(
                f"The 'median_prior' parameter of {owner} must be a prior such as "
                f"assurance.TruncatedNormal(12, 2, lower=0). Got {prior!r} instead.")
        if self.control_median is None:
            raise AssuranceInputError(
                f"The 'median_prior' parameter of {owner} needs exponential survival given by "
                "'control_median' (it rescales one hazard). Got it with control_hazard.")
        lo, _ = prior.support()
        if lo < 0 or float(prior.cdf(0.0)) > 0 or any(loc <= 0 for loc, _ in prior.atoms()):
            raise AssuranceInputError(
                f"The 'median_prior' parameter of {owner} must put all its mass on medians "
                f"> 0. Got {prior.describe()} instead.")

    # ---- basic facts -------------------------------------------------------------------------
    @property
    def smallest_total(self) -> int:
        """One patient per arm."""
        return 2

    @property
    def analysis_time(self) -> float:
        """Time of the analysis from the first entry: accrual plus further follow-up."""
        return self.accrual_time + self.follow_up_time

    @property
    def dropout_hazard(self) -> float:
        """Dropout hazard per time unit, ``-log(1 - p) / units per year``."""
        return -math.log1p(-self.dropout_per_year) / UNITS_PER_YEAR[self.time_unit]

    @property
    def exponential(self) -> bool:
        """True when control survival is exponential (one hazard)."""
        return self._hazards.size == 1

    @property
    def median(self) -> float:
        """Median survival on control (solved from the hazards when piecewise)."""
        return float(self._inverse_cumulative_hazard(np.array([LN2]))[0])

    def _inverse_cumulative_hazard(self, target: np.ndarray, scale: Any = 1.0) -> np.ndarray:
        """Times t with ``scale * Lambda_control(t) = target`` (vectorised)."""
        target = np.asarray(target, dtype=float) / np.asarray(scale, dtype=float)
        starts, lam = self._starts, self._hazards
        if lam.size == 1:
            return target / lam[0]
        cum = np.concatenate([[0.0], np.cumsum(lam[:-1] * np.diff(starts))])
        k = np.searchsorted(cum, target, side="right") - 1
        return starts[k] + (target - cum[k]) / lam[k]

    # ---- events ----------------------------------------------------------------------------
    def event_probability(self, hazard_ratio: Any = 1.0, *, control_scale: Any = 1.0,
                          calendar_time: float | None = None) -> np.ndarray:
        """Probability that one patient's event is observed by the analysis.

        Parameters
        ----------
        hazard_ratio
            Hazard ratio(s) applied to the control hazards (1 gives the control arm), > 0.
        control_scale
            Multiplier(s) of the control hazards (a different control median), > 0.
        calendar_time
            Time of the analysis from the first entry; default ``analysis_time``. Earlier
            than the end of accrual only those already entered count (the probability is
            per planned patient).

        Returns
        -------
        numpy.ndarray
            Probabilities with the broadcast shape of the two arguments.
        """
        owner = "SurvivalEndpoint.event_probability"
        hr = np.asarray(hazard_ratio, dtype=float)
        scale = np.asarray(control_scale, dtype=float)
        for name, value in (("hazard_ratio", hr), ("control_scale", scale)):
            if not np.all(np.isfinite(value) & (value > 0)):
                raise AssuranceInputError(f"The '{name}' parameter of {owner} must be finite "
                                          f"and > 0. Got {value!r} instead.")
        tau = self.analysis_time if calendar_time is None else check_real(
            calendar_time, "calendar_time", owner, low=0, low_open=True)
        return self._event_probability(hr * scale, tau)

    def _event_probability(self, scale: np.ndarray, tau: float | None = None) -> np.ndarray:
        tau = self.analysis_time if tau is None else tau
        scale = np.clip(np.asarray(scale, dtype=float), math.exp(-_LOG_HR_LIMIT),
                        math.exp(_LOG_HR_LIMIT))
        if self.exponential and tau >= self.accrual_time:
            return _exponential_event_probability(scale * self._hazards[0], self.dropout_hazard,
                                                  self.accrual_time, self.accrual_ramp,
                                                  tau - self.accrual_time)
        flat = np.atleast_1d(scale).ravel()
        return self._quadrature_event_probability(flat, tau).reshape(np.shape(scale))

    def _quadrature_event_probability(self, scale: np.ndarray, tau: float) -> np.ndarray:
        """Average of P(event by tau - u) over entry times u (Gauss-Legendre panels)."""
        a_time, ramp = self.accrual_time, self.accrual_ramp
        top = min(tau, a_time)
        breaks = {0.0, top}
        if 0 < ramp < top:
            breaks.add(ramp)
        breaks.update(float(tau - s) for s in self._starts if 0 < tau - s < top)
        rate = float(np.max(scale) * np.max(self._hazards) + self.dropout_hazard)
        u, w = _gauss_legendre(sorted(breaks), rate)
        density = np.minimum(u, ramp) / ramp if ramp > 0 else np.ones_like(u)
        density /= a_time - ramp / 2.0
        prob = _piecewise_event_by(tau - u, scale, self._starts, self._hazards,
                                   self.dropout_hazard)
        return prob @ (w * density)

    def expected_events(self, n_t: Any, n_c: Any, hazard_ratio: float | None = None
                        ) -> np.ndarray:
        """Expected number of events at the analysis for arm sizes ``n_t``, ``n_c``.

        Parameters
        ----------
        n_t, n_c
            Patients on treatment and on control (arrays broadcast together), >= 0.
        hazard_ratio
            True hazard ratio (treatment / control), > 0; default ``assumed_hazard_ratio``.

        Returns
        -------
        numpy.ndarray
            ``n_c P_control + n_t P_treatment`` (1-D).

        Examples
        --------
        >>> ep = SurvivalEndpoint(control_hazard=0.1, accrual_time=1e-9, follow_up_time=5.0,
        ...                       assumed_hazard_ratio=1.0)
        >>> round(float(ep.expected_events(0, 1000)[0]), 3)  # 1000 (1 - exp(-0.5))
        393.469
        """
        owner = "SurvivalEndpoint.expected_events"
        hr = self.assumed_hazard_ratio if hazard_ratio is None else check_real(
            hazard_ratio, "hazard_ratio", owner, low=0, low_open=True)
        n_t = np.atleast_1d(np.asarray(n_t, dtype=float))
        n_c = np.atleast_1d(np.asarray(n_c, dtype=float))
        if np.any(~np.isfinite(n_t) | (n_t < 0)) or np.any(~np.isfinite(n_c) | (n_c < 0)):
            raise AssuranceInputError(f"The 'n_t' and 'n_c' parameters of {owner} must be "
                                      f">= 0. Got {n_t!r} and {n_c!r} instead.")
        p_c = float(self._event_probability(np.array(1.0)))
        p_t = float(self._event_probability(np.array(hr)))
        return n_c * p_c + n_t * p_t

    def standard_error(self, n_t: Any, n_c: Any, hazard_ratio: float | None = None
                       ) -> np.ndarray:
        """Schoenfeld's ``1 / sqrt(E p (1 - p))`` for the log hazard ratio estimate."""
        n_t = np.atleast_1d(np.asarray(n_t, dtype=float))
        n_c = np.atleast_1d(np.asarray(n_c, dtype=float))
        events = self.expected_events(n_t, n_c, hazard_ratio)
        return _schoenfeld_se(events, n_t, n_c)

    def analysis_time_for_events(self, events: float, n_t: int, n_c: int, *,
                                 hazard_ratio: float | None = None) -> float:
        """Calendar time (from the first entry) at which ``events`` events are expected.

        For an event-driven plan: with ``n_t + n_c`` patients entering as configured, the
        expected events reach the target at the returned time (accrual may still be
        running). ``follow_up_time`` is not used.

        Examples
        --------
        >>> ep = SurvivalEndpoint(control_median=12.0, accrual_time=24.0,
        ...                       assumed_hazard_ratio=0.75)
        >>> t = ep.analysis_time_for_events(380, 300, 300)
        >>> round(t, 2)
        33.26
        """
        owner = "SurvivalEndpoint.analysis_time_for_events"
        target = check_real(events, "events", owner, low=0, low_open=True)
        hr = self.assumed_hazard_ratio if hazard_ratio is None else check_real(
            hazard_ratio, "hazard_ratio", owner, low=0, low_open=True)
        n_t = check_int(n_t, "n_t", owner, low=0)
        n_c = check_int(n_c, "n_c", owner, low=0)
        ratios = np.array([1.0, hr])

        def expected(tau: float) -> float:
            return float(np.dot([n_c, n_t], self._event_probability(ratios, tau)))

        most = self._eventual_events(n_t, n_c, hr)
        if target >= most * (1 - 1e-9):
            raise AssuranceInputError(
                f"The 'events' parameter of {owner} must be below {most:.1f}, the events "
                f"expected if {n_t + n_c} patients were followed for ever (dropout removes "
                f"the rest). Got {events!r} instead.")
        high = max(self.accrual_time, 1.0)
        while expected(high) < target:
            high *= 2.0
        return brent_root(lambda t: expected(t) - target, 1e-12, high, xtol=1e-10, rtol=1e-12)

    def _eventual_events(self, n_t: int, n_c: int, hr: float) -> float:
        long = np.array([np.inf])
        p = [float(_piecewise_event_by(long, np.array([r]), self._starts, self._hazards,
                                       self.dropout_hazard)[0, 0]) for r in (1.0, hr)]
        return n_c * p[0] + n_t * p[1]

    def extra_coords(self, n_t: np.ndarray, n_c: np.ndarray) -> dict[str, np.ndarray]:
        """Expected events at the assumed hazard ratio, per sample size."""
        return {"expected_events": self.expected_events(n_t, n_c)}

    # ---- descriptions ----------------------------------------------------------------------
    def describe(self) -> str:
        """Plain description for memos."""
        unit = self.time_unit
        if self.exponential:
            surv = f"control median {self.median:.3g} {unit} (exponential)"
        else:
            pieces = ", ".join(f"{h:.3g} from {s:g}" for s, h in zip(self._starts,
                                                                  self._hazards, strict=True))
            surv = (f"piecewise exponential control hazards per {unit[:-1]} ({pieces}); "
                    f"control median {self.median:.3g} {unit}")
        ramp = f" (linear ramp-up over {self.accrual_ramp:g})" if self.accrual_ramp else ""
        events = ("expected events follow the true hazard ratio" if
                  self.events_follow_true_effect else
                  f"expected events at hazard ratio {self.assumed_hazard_ratio:g}")
        text = (f"time to event, {surv}; accrual {self.accrual_time:g} {unit}{ramp}, "
                f"follow-up {self.follow_up_time:g} {unit} after accrual closes; dropout "
                f"{self.dropout_per_year:.3g} per year; {self.layout_text()}; log-rank test, "
                f"{events}; {self.better} hazard ratios are better")
        if self.median_prior is not None:
            text += f"; control median uncertain: {self.median_prior.describe()}"
        return text

    def to_dict(self) -> dict[str, Any]:
        control_hazard = self.control_hazard
        if isinstance(control_hazard, tuple):
            control_hazard = list(control_hazard)
        return {
            "kind": "time_to_event",
            "assumed_hazard_ratio": self.assumed_hazard_ratio,
            "control_median": self.control_median,
            "control_hazard": control_hazard,
            "hazard_starts": None if self.hazard_starts is None else list(self.hazard_starts),
            "accrual_time": self.accrual_time,
            "accrual_ramp": self.accrual_ramp,
            "follow_up_time": self.follow_up_time,
            "dropout_per_year": self.dropout_per_year,
            "time_unit": self.time_unit,
            "allocation": self.allocation,
            "better": self.better,
            "layout": self.layout,
            "events_follow_true_effect": self.events_follow_true_effect,
            "median_prior": None if self.median_prior is None else self.median_prior.to_dict(),
        }

    # ---- success probabilities ---------------------------------------------------------------
    def calculator(self, prior_benefit: Prior, rule_benefit: Significance, *, draws: int,
                   seed: int | None, nuisance: Prior | None = None) -> SuccessCalculator:
        """Closed form / quadrature calculator; Monte Carlo with a prior on the control median.

        ``nuisance`` (a prior on the control median) overrides ``median_prior``.
        """
        median_prior = nuisance if nuisance is not None else self.median_prior
        if nuisance is not None:
            SurvivalEndpoint(**{**self._fields(), "median_prior": nuisance})  # validates it
        return _SurvivalCalculator(self, prior_benefit, rule_benefit, median_prior, draws, seed)

    def _fields(self) -> dict[str, Any]:
        from dataclasses import fields

        return {f.name: getattr(self, f.name) for f in fields(self)}

    def _ratio(self, benefit: Any) -> np.ndarray:
        """Hazard ratio at benefit-scale effect(s), log clipped to +-50 against overflow."""
        return np.exp(np.clip(self.sign * np.asarray(benefit, dtype=float), -_LOG_HR_LIMIT,
                              _LOG_HR_LIMIT))


def _vector_ppf(part: Prior) -> Any:
    """Quantile function of a continuous prior component, vectorised over probabilities."""
    from ..priors.families import FromScipy

    if isinstance(part, Normal):
        return lambda u: part.mu + part.sigma * special.ndtri(u)
    if isinstance(part, FromScipy):
        dist, flip = part._dist, part._negate
        return (lambda u: -dist.ppf(1.0 - u)) if flip else dist.ppf
    dist = getattr(part, "_dist", None)
    if dist is not None and hasattr(dist, "ppf"):
        return dist.ppf
    return np.vectorize(part.ppf, otypes=[float])


def _schoenfeld_se(events: np.ndarray, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
    p = n_t / (n_t + n_c)
    return 1.0 / np.sqrt(events * p * (1.0 - p))


class _SurvivalCalculator(SuccessCalculator):
    """Success probabilities for the log hazard ratio estimate ``N(b, se(n, b)^2)``.

    Three routes: events at the planning hazard ratio (``exact_success``, closed form for
    normal priors); events at the true hazard ratio (adaptive quadrature over each prior
    component on the probability scale, exact for point masses); a prior on the control
    median (Monte Carlo over effect and median, Rao-Blackwellised, with standard errors).
    """

    def __init__(self, endpoint: SurvivalEndpoint, prior: Prior, rule: Significance,
                 median_prior: Prior | None, draws: int, seed: int | None):
        self.endpoint, self.prior, self.rule = endpoint, prior, rule
        self.follow = endpoint.events_follow_true_effect
        self.monte_carlo = median_prior is not None
        self.z = rule.critical_z()
        self.p_control = float(endpoint._event_probability(np.array(1.0)))
        self.p_planned = float(endpoint._event_probability(
            np.array(endpoint.assumed_hazard_ratio)))
        if self.monte_carlo:
            gens = [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(2)]
            self.effect = prior.sample(draws, gens[0])
            scale = endpoint.control_median / median_prior.sample(draws, gens[1])
            self.p_c_draws = endpoint._event_probability(scale)
            ratio = endpoint._ratio(self.effect) if self.follow else \
                endpoint.assumed_hazard_ratio
            self.p_t_draws = endpoint._event_probability(scale * ratio)

    def _se(self, n_t: np.ndarray, n_c: np.ndarray, p_c: Any, p_t: Any) -> np.ndarray:
        n_t = np.asarray(n_t, dtype=float)
        n_c = np.asarray(n_c, dtype=float)
        return _schoenfeld_se(n_c * p_c + n_t * p_t, n_t, n_c)

    def _p_treatment(self, benefit: Any) -> np.ndarray:
        if not self.follow:
            return np.full(np.shape(benefit), self.p_planned)
        return self.endpoint._event_probability(self.endpoint._ratio(benefit))

    def power(self, effect_benefit, n_t, n_c):
        b = float(effect_benefit)
        se = self._se(n_t, n_c, self.p_control, float(self._p_treatment(b)))
        return special.ndtr((b - self.rule.threshold(se, self.z)) / se)

    def success(self, n_t, n_c, cuts):
        from ..compute.normal_outcome import SuccessProbabilities, exact_success

        if self.monte_carlo:
            return self._monte_carlo(n_t, n_c, cuts)
        if not self.follow:
            se = self._se(n_t, n_c, self.p_control, self.p_planned)
            return exact_success(self.prior, self.rule, sigma=1.0, se_factor=se,
                                 df=np.full(se.shape, np.inf), analysis="z", cuts=cuts)
        n_t = np.asarray(n_t, dtype=float)
        n_c = np.asarray(n_c, dtype=float)
        total = np.zeros((1 + len(cuts), n_t.size))
        for weight, part in self.prior.parts():
            total += weight * self._part(part, n_t, n_c, cuts)
        total = np.clip(total, 0.0, 1.0)
        return SuccessProbabilities(success=total[0], joint=list(total[1:]))

    def _conditional(self, b: np.ndarray, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
        """P(success | true effect b) for effects b (m,) and sizes (k,): shape (m, k)."""
        p_t = self._p_treatment(b)
        se = self._se(n_t[None, :], n_c[None, :], self.p_control, p_t[:, None])
        return special.ndtr((b[:, None] - self.rule.threshold(se, self.z)) / se)

    def _part(self, part: Prior, n_t, n_c, cuts) -> np.ndarray:
        if isinstance(part, PointMass):
            v = part.value
            p = self._conditional(np.array([v]), n_t, n_c)[0]
            inside = [(v >= c.value) if c.inclusive else (v > c.value) for c in cuts]
            return np.vstack([p] + [p * flag for flag in inside])
        ppf = _vector_ppf(part)
        cut_values = np.array([c.value for c in cuts])

        def integrand(u: np.ndarray) -> np.ndarray:
            b = ppf(np.clip(u, 1e-300, 1.0 - 1e-16))
            p = self._conditional(b, n_t, n_c)                      # (m, k)
            above = (b[:, None] > cut_values[None, :]).astype(float)  # (m, cuts)
            return np.concatenate([p, (above[:, :, None] * p[:, None, :]).reshape(b.size, -1)],
                                  axis=1)

        # Breakpoints where the integrand steps: the cuts, the rule's limit, and each size's
        # threshold (+- 4 planned standard errors) -- a narrow step at a large n would
        # otherwise fall between the first nodes.
        se = np.atleast_1d(self._se(n_t, n_c, self.p_control, self.p_planned))
        c = np.atleast_1d(self.rule.threshold(se, self.z))
        steps = np.concatenate([c, c - 4 * se, c + 4 * se,
                                [self.rule.lowest_passable_effect(), *cut_values]])
        steps = np.unique(steps[np.isfinite(steps)])
        if steps.size > 150:
            steps = np.quantile(steps, np.linspace(0.0, 1.0, 150))
        points = sorted({float(v) for v in np.asarray(part.cdf(steps), dtype=float)}
                        - {0.0, 1.0})
        value = _adaptive_integral(integrand, [0.0, *points, 1.0])
        return value.reshape(1 + len(cuts), n_t.size)

    def _monte_carlo(self, n_t, n_c, cuts, chunk: int = 4096):
        from ..compute.normal_outcome import DrawAverages

        n_t = np.asarray(n_t, dtype=float)
        n_c = np.asarray(n_c, dtype=float)
        m = self.effect.size
        averages = DrawAverages(1 + len(cuts), n_t.size)
        for start in range(0, m, chunk):
            sl = slice(start, min(start + chunk, m))
            b = self.effect[sl, None]
            se = self._se(n_t[None, :], n_c[None, :], self.p_c_draws[sl, None],
                          self.p_t_draws[sl, None])
            p = special.ndtr((b - self.rule.threshold(se, self.z)) / se)
            averages.add([p] + [p * ((b >= c.value) if c.inclusive else (b > c.value))
                                for c in cuts])
        return averages.success_probabilities()

    def method(self) -> str:
        ep = self.endpoint
        events = ("expected events at the planning hazard ratio" if not self.follow
                  else "expected events at each true hazard ratio")
        survival = ("exponential survival, events in closed form" if ep.exponential else
                    "piecewise exponential survival, events by Gauss-Legendre quadrature")
        if self.monte_carlo:
            return (f"Schoenfeld normal approximation, {events}; Monte Carlo over the hazard "
                    f"ratio and the control median (Rao-Blackwellised); {survival}")
        if not self.follow:
            kinds = {type(part).__name__ for _, part in self.prior.parts()}
            base = ("closed form" if kinds <= {"Normal", "PointMass"}
                    else "adaptive quadrature over the prior")
        else:
            base = "adaptive quadrature over the prior (events depend on the effect)"
        return f"Schoenfeld normal approximation, {events}; {base}; {survival}"
