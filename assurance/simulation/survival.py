"""Patient-level simulation of time-to-event trials, analysed by the log-rank test.

Used to check the normal (Schoenfeld) approximation behind
:class:`~assurance.endpoints.survival.SurvivalEndpoint`: every simulated trial draws entry
times, event times (exponential or piecewise exponential, proportional hazards), dropout
times and the administrative censoring at the analysis, then runs a one-sided log-rank test
in the favourable direction.

Two engines give the same decisions: ``"numpy"`` computes the log-rank statistic for a whole
block of trials at once (sorting each trial's times and accumulating observed minus expected
events and their variance), ``"scipy"`` calls :func:`scipy.stats.logrank` trial by trial on
:class:`scipy.stats.CensoredData` (the reference; several times slower for trials of a
few hundred patients).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from scipy import stats

from .._validation import check_choice, check_int, check_real
from ..errors import AssuranceInputError
from ..rules.significance import Significance

__all__ = ["SimulationResult", "simulate_trials", "simulate_assurance", "logrank_by_row"]

Engine = Literal["numpy", "scipy"]
#: patients (trials x patients) whose random numbers are drawn at once; it fixes which
#: numbers each trial gets, so the same seed gives the same trials
_BLOCK = 250_000
#: patients analysed at once (working arrays that stay in the processor's cache)
_CHUNK = 16_384


@dataclass(frozen=True)
class SimulationResult:
    """Outcome of a batch of simulated trials.

    Attributes
    ----------
    success_rate
        Share of trials that succeed: the log-rank test rejects "no difference" one-sided in
        the favourable direction (and the estimate reaches the rule's minimum, if any). At a
        fixed hazard ratio this is the test's rejection rate (power, or size at HR 1).
    mcse
        Its Monte Carlo standard error, ``sqrt(rate (1 - rate) / trials)``.
    mean_events
        Mean number of observed events per trial.
    trials
        Number of simulated trials.
    seconds
        Wall time spent generating and analysing them.
    engine
        ``"numpy"`` or ``"scipy"``.
    """

    success_rate: float
    mcse: float
    mean_events: float
    trials: int
    seconds: float
    engine: str

    @property
    def trials_per_second(self) -> float:
        """Simulated trials per second of wall time."""
        return self.trials / self.seconds if self.seconds > 0 else math.inf


def logrank_by_row(times: np.ndarray, events: np.ndarray, treated: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Log-rank observed-minus-expected treatment events and their variance, per row.

    Parameters
    ----------
    times, events
        Arrays (trials, patients): follow-up times and event indicators.
    treated
        Boolean vector (patients,) marking the treatment arm (the same for every row).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        ``O - E`` and ``V`` for each row; ``Z = (O - E) / sqrt(V)`` is the log-rank statistic
        of the treatment arm and ``(O - E) / V`` the one-step (Peto) estimate of the log
        hazard ratio.

    Notes
    -----
    Times are continuous, so there are no ties: at the j-th smallest time (``N_j`` at risk,
    ``N_tj`` of them on treatment) an event adds ``1[treated] - N_tj / N_j`` to ``O - E`` and
    ``N_tj (N_j - N_tj) / N_j^2`` to ``V`` (Mantel 1966; the variance of scipy.stats.logrank
    with one event per time).

    Each row is put in time order by one value sort: a time's bit pattern (an integer
    increasing with the time) carries the patient's arm and event flag in its last two bits.
    This reorders only times within four units in the last place of each other (ties, in
    practice, which continuous times do not have), and is several times faster than sorting
    an index and gathering the flags with it.

    Examples
    --------
    >>> t = np.array([[1.0, 2.0, 3.0, 4.0]])
    >>> o_e, v = logrank_by_row(t, np.ones_like(t, bool), np.array([True, True, False, False]))
    >>> round(float(o_e[0]), 4), round(float(v[0]), 4)  # 1/2 + 2/3; 1/4 + 2/9
    (1.1667, 0.4722)
    >>> round(float(o_e[0] / np.sqrt(v[0])), 4)  # scipy.stats.logrank gives 1.6977
    1.6977
    """
    times = np.asarray(times, dtype=float)
    events = np.asarray(events, dtype=bool)
    treated = np.asarray(treated, dtype=bool)
    owner = "logrank_by_row"
    if times.ndim != 2 or times.shape[1] == 0:
        raise AssuranceInputError(f"The 'times' parameter of {owner} must be a 2-D array "
                                  f"(trials, patients). Got shape {times.shape} instead.")
    if events.shape != times.shape:
        raise AssuranceInputError(f"The 'events' parameter of {owner} must have the shape of "
                                  f"'times' {times.shape}. Got shape {events.shape} instead.")
    if treated.shape != times.shape[1:]:
        raise AssuranceInputError(f"The 'treated' parameter of {owner} must be a vector of "
                                  f"{times.shape[1]} flags, one per patient. Got shape "
                                  f"{treated.shape} instead.")
    n = times.shape[1]
    key = _sort_key(times)
    key |= events
    key |= treated.astype(np.int64) << 1
    key.sort(axis=1)
    flags = (key & 3).astype(np.int8)
    tr = flags >> 1
    ev = (flags & 1).astype(float)
    before = np.cumsum(tr, axis=1, dtype=np.int32)
    before -= tr                                    # treated patients earlier in the order
    frac = (int(treated.sum()) - before) * (1.0 / (n - np.arange(n, dtype=float)))
    ev *= frac                                      # frac at each event, 0 elsewhere
    expected = ev.sum(axis=1)
    var = expected - np.einsum("ij,ij->i", ev, frac)
    observed = np.count_nonzero(flags == 3, axis=1)  # treatment events
    return observed - expected, var


def _sort_key(times: np.ndarray) -> np.ndarray:
    """int64 keys in the order of the times (sign handled), last two bits cleared."""
    bits = times.view(np.int64) if times.flags.c_contiguous else \
        np.ascontiguousarray(times).view(np.int64)
    key = bits ^ ((bits >> 63) & np.int64(0x7FFFFFFFFFFFFFFF))
    key &= np.int64(~3)
    return key


def _check_common(endpoint: Any, n_t: Any, n_c: Any, trials: Any, engine: Any, owner: str):
    from ..endpoints.survival import SurvivalEndpoint

    if not isinstance(endpoint, SurvivalEndpoint):
        raise AssuranceInputError(f"The 'endpoint' parameter of {owner} must be a "
                                  f"SurvivalEndpoint. Got {endpoint!r} instead.")
    n_t = check_int(n_t, "n_t", owner, low=1)
    n_c = check_int(n_c, "n_c", owner, low=1)
    trials = check_int(trials, "trials", owner, low=1, high=10_000_000)
    check_choice(engine, "engine", owner, ["numpy", "scipy"])
    return n_t, n_c, trials


def _benefit_rule(endpoint: Any, rule: Any, owner: str) -> Significance:
    rule = Significance() if rule is None else rule
    if not isinstance(rule, Significance):
        raise AssuranceInputError(f"The 'rule' parameter of {owner} must be a Significance "
                                  f"rule. Got {rule!r} instead.")
    if rule.margin:
        raise AssuranceInputError(
            f"The 'rule' parameter of {owner} must have margin 0: the log-rank test here tests "
            f"superiority only. Got margin {rule.margin!r} instead.")
    return endpoint.benefit_rule(rule)


def _rng(seed: Any, owner: str) -> np.random.Generator:
    if isinstance(seed, np.random.Generator):
        return seed
    if seed is not None:
        seed = check_int(seed, "seed", owner, low=0)
    return np.random.default_rng(seed)


def _draw(endpoint: Any, rows: int, n: int, rng: np.random.Generator
          ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """The random numbers of ``rows`` trials: entry, event and dropout draws, in this order
    (the order fixes what a seed gives)."""
    q = rng.random((rows, n))  # the same numbers as rng.uniform(size=(rows, n))
    hazard_draw = rng.standard_exponential((rows, n))
    dropout_draw = (rng.standard_exponential((rows, n)) if endpoint.dropout_hazard > 0
                    else None)
    return q, hazard_draw, dropout_draw


def _follow_up(endpoint: Any, q: np.ndarray, hazard_draw: np.ndarray,
               dropout_draw: np.ndarray | None, ratio: np.ndarray, scale: np.ndarray,
               n_t: int) -> tuple[np.ndarray, np.ndarray]:
    """Follow-up times and event flags from the draws (rows = trials; first ``n_t`` columns
    on treatment); ``ratio`` and ``scale`` are per-trial hazard ratio and control-hazard
    multiplier. Works in place on the draws."""
    a_time, ramp = endpoint.accrual_time, endpoint.accrual_ramp
    c = 1.0 / (a_time - ramp / 2.0)
    # inverse of the entry distribution: c u^2 / (2R) on the ramp, then linear
    if ramp > 0:
        entry = np.where(q <= c * ramp / 2.0, np.sqrt(2.0 * ramp * q / c), q / c + ramp / 2.0)
    else:
        entry = np.divide(q, c, out=q)
    # the event time inverts scale * ratio * Lambda_control at a standard exponential draw
    hazard_draw[:, :n_t] /= (scale * ratio)[:, None]
    if np.any(scale != 1.0):
        hazard_draw[:, n_t:] /= scale[:, None]
    event_time = endpoint._inverse_cumulative_hazard(hazard_draw)
    censor = np.subtract(endpoint.analysis_time, entry, out=entry)
    if dropout_draw is not None:
        dropout_draw /= endpoint.dropout_hazard
        np.minimum(censor, dropout_draw, out=censor)
    events = event_time <= censor
    return np.minimum(event_time, censor, out=censor), events


def _run(endpoint: Any, ratio: np.ndarray, scale: np.ndarray, n_t: int, n_c: int,
         rule: Significance, rng: np.random.Generator, engine: str) -> SimulationResult:
    start = time.perf_counter()
    n = n_t + n_c
    treated = np.arange(n) < n_t
    block = max(1, _BLOCK // n)
    chunk = max(1, _CHUNK // n)
    success = np.zeros(ratio.size, dtype=bool)
    n_events = np.zeros(ratio.size)
    z_crit = rule.critical_z()
    sign = endpoint.sign
    alternative = "less" if endpoint.better == "lower" else "greater"
    for lo in range(0, ratio.size, block):
        hi = min(lo + block, ratio.size)
        draws = _draw(endpoint, hi - lo, n, rng)
        for c_lo in range(lo, hi, chunk):
            sl = slice(c_lo, min(c_lo + chunk, hi))
            rows = slice(sl.start - lo, sl.stop - lo)
            times, events = _follow_up(endpoint, *(d if d is None else d[rows] for d in draws),
                                       ratio[sl], scale[sl], n_t)
            n_events[sl] = np.count_nonzero(events, axis=1)
            o_minus_e, var = logrank_by_row(times, events, treated)
            ok = var > 0
            safe = np.where(ok, var, 1.0)
            estimate = sign * o_minus_e / safe          # benefit scale (Peto one-step)
            if engine == "numpy":
                passed = ok & (sign * o_minus_e / np.sqrt(safe) > z_crit)
            else:
                passed = np.zeros(times.shape[0], dtype=bool)
                for i in range(times.shape[0]):
                    arms = [stats.CensoredData(uncensored=times[i, m & events[i]],
                                               right=times[i, m & ~events[i]])
                            for m in (treated, ~treated)]
                    p = stats.logrank(arms[0], arms[1], alternative=alternative).pvalue
                    passed[i] = bool(p < rule.one_sided_alpha)
            if rule.min_estimate is not None:
                passed &= ok & (estimate > rule.min_estimate)
            success[sl] = passed
    seconds = time.perf_counter() - start
    rate = float(success.mean())
    return SimulationResult(success_rate=rate,
                            mcse=math.sqrt(rate * (1.0 - rate) / ratio.size),
                            mean_events=float(n_events.mean()), trials=int(ratio.size),
                            seconds=seconds, engine=engine)


def simulate_trials(endpoint: Any, hazard_ratio: float, n_t: int, n_c: int, *,
                    trials: int = 1000, seed: int | np.random.Generator | None = None,
                    rule: Significance | None = None, engine: Engine = "numpy"
                    ) -> SimulationResult:
    """Simulate trials at one true hazard ratio and report the log-rank rejection rate.

    Parameters
    ----------
    endpoint
        A :class:`~assurance.endpoints.survival.SurvivalEndpoint` (survival, accrual,
        follow-up, dropout, direction).
    hazard_ratio
        True hazard ratio (treatment / control), > 0.
    n_t, n_c
        Patients on treatment and on control, >= 1 each.
    trials
        Number of simulated trials.
    seed
        Seed or numpy Generator; the same seed gives the same trials.
    rule
        Success rule on the natural scale (default one-sided 0.025, superiority). Margins
        are not supported; a minimum observed effect (a hazard ratio) is checked against the
        one-step estimate ``exp((O - E) / V)``.
    engine
        ``"numpy"`` (vectorised log-rank) or ``"scipy"`` (scipy.stats.logrank per trial).

    Returns
    -------
    SimulationResult
        Rejection rate with its Monte Carlo standard error, mean observed events, speed.

    Notes
    -----
    Entry times follow the endpoint's accrual pattern; event times invert the cumulative
    hazard of an exponential draw; dropout is exponential; patients still event-free at the
    analysis are censored there.

    Examples
    --------
    >>> from assurance.endpoints.survival import SurvivalEndpoint
    >>> ep = SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
    ...                       assumed_hazard_ratio=0.75)
    >>> res = simulate_trials(ep, 0.75, 300, 300, trials=200, seed=1)
    >>> 0.6 < res.success_rate < 0.95 and res.mcse < 0.04
    True
    """
    owner = "simulate_trials"
    n_t, n_c, trials = _check_common(endpoint, n_t, n_c, trials, engine, owner)
    hr = check_real(hazard_ratio, "hazard_ratio", owner, low=0, low_open=True)
    benefit_rule = _benefit_rule(endpoint, rule, owner)
    rng = _rng(seed, owner)
    return _run(endpoint, np.full(trials, hr), np.ones(trials), n_t, n_c, benefit_rule, rng,
                engine)


def simulate_assurance(design: Any, n_total: int, *, trials: int = 1000,
                       seed: int | np.random.Generator | None = None,
                       engine: Engine = "numpy") -> SimulationResult:
    """Assurance by simulation: each trial draws its hazard ratio from the design prior.

    Parameters
    ----------
    design
        A :class:`~assurance.TrialDesign` whose endpoint is a SurvivalEndpoint; its design
        prior is on the log hazard ratio. A ``median_prior`` on the endpoint is drawn too.
    n_total
        Total patients, split by the endpoint's allocation ratio.
    trials, seed, engine
        As in :func:`simulate_trials`.

    Returns
    -------
    SimulationResult
        ``success_rate`` estimates assurance; compare it with the normal approximation of
        :func:`assurance.evaluate` (with ``events_follow_true_effect=True`` the events there
        also follow each true hazard ratio, as here).

    Examples
    --------
    >>> import math
    >>> from assurance import Normal, TrialDesign
    >>> from assurance.endpoints.survival import SurvivalEndpoint
    >>> ep = SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
    ...                       assumed_hazard_ratio=0.75)
    >>> design = TrialDesign(ep, Normal(math.log(0.75), 0.1))
    >>> res = simulate_assurance(design, 600, trials=200, seed=2)
    >>> 0.5 < res.success_rate < 0.95
    True
    """
    from ..design import TrialDesign

    owner = "simulate_assurance"
    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(f"The 'design' parameter of {owner} must be a TrialDesign. "
                                  f"Got {design!r} instead.")
    ep = design.endpoint
    n_total = check_int(n_total, "n_total", owner, low=2)
    n_t, n_c = (int(v[0]) for v in ep.arm_sizes(np.array([n_total]))) \
        if hasattr(ep, "arm_sizes") else (0, 0)
    n_t, n_c, trials = _check_common(ep, n_t, n_c, trials, engine, owner)
    benefit_rule = _benefit_rule(ep, design.rule, owner)
    rng = _rng(seed, owner)
    log_hr = design.design_prior.sample(trials, rng)
    ratio = np.exp(np.clip(log_hr, -50.0, 50.0))
    scale = (ep.control_median / ep.median_prior.sample(trials, rng)
             if ep.median_prior is not None else np.ones(trials))
    return _run(ep, ratio, scale, n_t, n_c, benefit_rule, rng, engine)
