"""Event-count endpoint: the rate ratio of Poisson or negative binomial counts.

Each patient is followed for a time ``T`` (a planned follow-up, possibly cut short by
dropout) and the number of events (relapses, exacerbations, seizures) is counted. The count
is negative binomial with mean ``mu = lambda * T`` and variance ``mu + k * mu^2``, the
overdispersion ``k >= 0`` (``k = 0`` is Poisson). The effect is the rate ratio
``RR = lambda_treatment / lambda_control`` (lower is better by default); the analysis is a
Wald test on ``log RR`` from a negative binomial (or Poisson) regression with the follow-up
time as exposure.

The design prior is on the **log rate ratio** (a normal prior on ``log RR``, say); on the
benefit scale every computation uses ``sign * log RR``.

Public pieces: :class:`CountEndpoint`, the closed-form :func:`sample_size_for_rate_ratio`
and the simulation check :func:`simulate_rejection_rate`.
"""

from __future__ import annotations

import functools
import math
from dataclasses import KW_ONLY, dataclass
from typing import Any, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_int, check_real
from ..errors import AssuranceInputError
from ..priors.families import PointMass, Prior
from ..rules.significance import Significance
from .base import Endpoint, SuccessCalculator

__all__ = [
    "CountEndpoint",
    "CountSampleSize",
    "SimulatedPower",
    "sample_size_for_rate_ratio",
    "simulate_rejection_rate",
]

Layout = Literal["two_arm", "single_arm"]
VarianceAt = Literal["true_effect", "planning_ratio"]
TestVariance = Literal["observed_rates", "pooled_null"]
CountTest = Literal["wald", "exact_conditional"]

#: log rate ratios are clipped here before rates are formed (no overflow in far prior tails)
_LOG_RR_LIMIT = 50.0
_OWNER = "CountEndpoint"


def _information_per_patient(lam: np.ndarray, k: float, d: float, t: float) -> np.ndarray:
    """``E[lambda T / (1 + k lambda T)]`` for ``T = min(Exp(d), t)``, elementwise in ``lam``.

    ``T`` has density ``d exp(-d s)`` on ``[0, t)`` and an atom ``exp(-d t)`` at ``t``. The
    integral over ``[0, t)`` is a composite 16-point Gauss-Legendre rule. The integrand has a
    pole at ``s = -1 / (k lambda)``: panels ``[0, c], [c, 4c], [4c, 16c], ...`` with
    ``c = 1 / (k lambda)`` (cut at ``t``) keep every panel at least its own length away from
    it, so each converges like ``3^(-2 x 16)``; panels are also no longer than ``8 / d``, for
    the exponential weight. Where ``k lambda t <= 30`` and ``d t <= 8`` (most plans) one
    panel of 16, 32 or 64 points shared by every element does. Relative error about 1e-15
    from ``k lambda t`` = 1e-6 to 1e6 and ``d t`` up to 100 (tests/test_counts.py checks it
    against ``scipy.integrate.quad``).
    """
    lam = np.asarray(lam, dtype=float)
    shape = lam.shape
    flat = lam.reshape(-1)
    klt = k * flat * t
    top = float(np.max(klt)) if flat.size else 0.0
    mu_full = flat * t
    atom = math.exp(-d * t) * mu_full / (1.0 + k * mu_full)
    if top <= 30.0 and d * t <= 8.0:
        # one panel, nodes shared by every element: 16, 32 or 64 points as the pole nears
        # (Bernstein ellipse through it: rho^(-2N) below 1e-19 at each bound)
        x, w = _gl_rule(16 if top <= 1.0 else 32 if top <= 8.0 else 64)
        s = 0.5 * t * (x + 1.0)
        weight = 0.5 * t * w * d * np.exp(-d * s)
        mu = flat[:, None] * s
        return (np.sum(weight * mu / (1.0 + k * mu), axis=-1) + atom).reshape(shape)
    edges = [np.zeros_like(flat), np.full_like(flat, t)]
    if top > 1.0:
        with np.errstate(divide="ignore"):
            c = np.where(klt > 0, 1.0 / (k * flat), np.inf)
        for j in range(int(math.ceil(math.log(top) / math.log(4.0))) + 1):
            edges.append(np.minimum(c * 4.0**j, t))
    pieces = max(1, int(math.ceil(d * t / 8.0)))
    edges += [np.full_like(flat, t * i / pieces) for i in range(1, pieces)]
    e = np.sort(np.stack(edges, axis=-1), axis=-1)
    lo, width = e[:, :-1, None], np.diff(e, axis=-1)[:, :, None]
    x, w = _gl_rule(16)  # per panel
    s = lo + 0.5 * width * (x + 1.0)
    mu = flat[:, None, None] * s
    info = np.sum(0.5 * width * w * d * np.exp(-d * s) * mu / (1.0 + k * mu),
                  axis=(-2, -1))
    return (info + atom).reshape(shape)


@functools.lru_cache(maxsize=4)
def _gl_rule(points: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [-1, 1] (made once per size)."""
    return np.polynomial.legendre.leggauss(points)


@dataclass(frozen=True)
class CountEndpoint(Endpoint):
    """Counts of events per patient; effect = rate ratio treatment / control.

    Parameters
    ----------
    control_rate
        Planning value of the control event rate per unit time (> 0), e.g. 0.8 relapses per
        patient-year. With ``layout="single_arm"``, the fixed reference rate the single arm
        is compared with.
    follow_up
        Planned follow-up per patient (> 0), in the time unit of the rate.
    overdispersion
        Negative binomial ``k >= 0`` with ``Var = mu + k mu^2``; 0 gives Poisson counts.
    dropout_rate
        Hazard of leaving the study per unit time (>= 0, exponential). A patient who leaves
        contributes the events and time observed until then, so the follow-up is
        ``min(Exp(dropout_rate), follow_up)``; its mean is :attr:`mean_exposure`.
    layout
        ``"two_arm"`` (parallel groups) or ``"single_arm"`` (one group against the fixed
        reference rate ``control_rate``).
    allocation
        Patients on treatment per patient on control (two arms), > 0.
    better
        ``"lower"`` (default: fewer events is better, rate ratio below 1 is good) or
        ``"higher"``.
    variance_at
        How the standard error depends on the true effect. ``"true_effect"`` (default): at
        each true rate ratio the standard error is the one the trial would have there, so
        the power averaged by assurance is the classical power at every effect; the
        average over the prior is by adaptive quadrature. ``"planning_ratio"``: the
        standard error is fixed at ``planning_rate_ratio`` for every true effect (the usual
        shortcut; closed form for normal priors).
    planning_rate_ratio
        Rate ratio (> 0) for ``variance_at="planning_ratio"``. ``None`` uses the ratio at
        the mean of the design prior on the log scale, which is also the default
        ``assumed_effect`` of :class:`~assurance.TrialDesign`; set it to your assumed
        effect if that differs.
    test_variance
        Standard error the test statistic is divided by. ``"observed_rates"`` (default): the
        Wald test, variance at the rates of each arm (approach 1 of Zhu & Lakkis 2014).
        ``"pooled_null"``: variance with both arms at the rates expected under the null
        hypothesis, estimated by pooling the events (their approach 2); needs
        ``variance_at="true_effect"``.
    test
        ``"wald"`` (default): the Wald test on the log rate ratio described below.
        ``"exact_conditional"``: the conditional exact test for Poisson counts -- given the
        total number of events, the treatment arm's count is binomial, and the trial
        succeeds when its one-sided binomial tail under the null rate ratio is at most the
        level; power is then exact (enumeration, :mod:`assurance.compute.poisson_exact`).
        Needs two arms, Poisson counts (``overdispersion=0``), no dropout, no control-rate
        prior and the default variance settings (which it does not use).
    control_rate_prior
        Optional prior on the control rate (all mass on rates > 0, e.g.
        ``FromScipy(scipy.stats.gamma(a=40, scale=0.02))``). Assurance then averages over
        it by Monte Carlo; classical power keeps ``control_rate``.
    time_unit
        The unit of time of ``control_rate`` and ``follow_up`` (``"days"``, ``"weeks"``,
        ``"months"``, ``"years"``), for reading; None when unnamed. Labels only.

    Notes
    -----
    With ``mu = lambda * T`` the expected information of the log rate of one patient, the
    dispersion known, is ``E[mu / (1 + k mu)]`` (Lawless 1987); its inverse
    ``v(lambda) = 1 / E[lambda T / (1 + k lambda T)]`` is the variance per patient. Without
    dropout ``v = 1 / (lambda t) + k``, and the estimated log rate ratio has

    ``Var(log RR_hat) = v(lambda_t) / n_t + v(lambda_c) / n_c
    = (1/n_t)(1/mu_t + k) + (1/n_c)(1/mu_c + k)``,

    the variance of Zhu & Lakkis (2014, approach 1). With dropout, the average over the
    follow-up ``min(Exp(d), t)`` is taken by a 64-point Gauss-Legendre rule (Poisson: exactly
    ``lambda * mean_exposure``). For ``test_variance="pooled_null"`` the null rates keep
    the expected number of events: ``lambda_c0 = (n_t lambda_t + n_c lambda_c) /
    (n_t RR_0 + n_c)``, ``lambda_t0 = RR_0 lambda_c0`` (``RR_0`` is 1, or the
    non-inferiority margin); for ``RR_0 = 1`` this is Zhu & Lakkis' approach 2.

    With estimate ``d`` of the benefit ``delta = sign * log RR``, ``d ~ N(delta, se1^2)``,
    and the test passing iff ``d > -margin + z_{1-alpha} se0`` (``se0 = se1`` for the
    Wald test), power is ``Phi((delta + margin - z se0) / se1)``. Classical power (and the
    power curve) always uses the standard errors at the effect in question. Assurance
    averages this power over the design prior: exactly so with ``variance_at="true_effect"``
    (adaptive quadrature on the prior's probability scale, point masses exact; Monte Carlo
    with a control-rate prior, each draw contributing its exact conditional probability);
    with ``"planning_ratio"`` the standard error is frozen, which gives the closed form
    ``Phi((m - c) / sqrt(v + se^2))`` for a normal prior (O'Hagan, Stevens & Campbell 2005).

    With ``test="exact_conditional"`` (Poisson counts, every patient followed for
    ``follow_up``), the totals are ``X_t ~ Poisson(n_t mu_t)`` and ``X_c ~ Poisson(n_c mu_c)``,
    ``mu = lambda * follow_up``; given ``S = X_t + X_c``, ``X_t ~ Binomial(S, p)`` with
    ``p = n_t mu_t / (n_t mu_t + n_c mu_c)``, and under the null rate ratio ``RR_0`` (1, or
    the non-inferiority margin) ``p_0 = n_t RR_0 / (n_t RR_0 + n_c)``. With lower rates
    better the trial succeeds when ``P(Binomial(S, p_0) <= X_t) <= alpha`` (mirrored with
    higher rates better), and also, with a minimum estimate, when the observed rate ratio
    passes it. Power is ``sum_S Poisson(S; n_t mu_t + n_c mu_c) P(success | S)``, summed
    over all totals but a Poisson mass below 1e-13 (Przyborowski & Wilenski 1940); the
    test never exceeds its level given any total, so not overall either (it is
    conservative). Beyond 100,000 expected events in all (in practice only far tails of a
    prior) the normal limit of the same test replaces the enumeration, within about 0.001
    of it there. Assurance averages this power over the design prior by the same adaptive
    quadrature.

    The normal approximation is fair for two arms with some tens of events per arm, not
    exact: simulated Wald tests differ from the formula by up to about 1.3 percentage points,
    in either direction, at 80-100 expected events per arm (e.g. 0.9052 by the formula
    against 0.9122 +/- 0.0020 simulated); where that matters, use the exact conditional test
    (Poisson) or check with :func:`simulate_rejection_rate`. For one arm against a fixed
    rate, the Wald statistic's own standard error varies with the data and the true power
    can exceed the formula by a few points (about 0.94 against 0.90 at 84 expected events);
    check with :func:`simulate_rejection_rate`.

    References
    ----------
    Zhu H, Lakkis H (2014). Sample size calculation for comparing two negative binomial
    rates. Statistics in Medicine 33(3):376-387.
    Przyborowski J, Wilenski H (1940). Homogeneity of results in testing samples from
    Poisson series. Biometrika 31:313-323.
    Lawless JF (1987). Negative binomial and mixed Poisson regression. Canadian Journal of
    Statistics 15(3):209-225.
    O'Hagan A, Stevens JW, Campbell MJ (2005). Assurance in clinical trial design.
    Pharmaceutical Statistics 4:187-201.

    Examples
    --------
    >>> ep = CountEndpoint(0.8, 1.5, overdispersion=0.4)
    >>> ep.effect_name, ep.better
    ('rate ratio', 'lower')
    >>> # (1/100) (1/(0.8*1.5*0.7) + 0.4) + (1/100) (1/(0.8*1.5) + 0.4)
    >>> round(float(ep.log_ratio_variance(0.7, 100, 100)), 6)
    0.028238
    """

    control_rate: float
    follow_up: float
    _: KW_ONLY
    overdispersion: float = 0.0
    dropout_rate: float = 0.0
    layout: Layout = "two_arm"
    allocation: float = 1.0
    better: Literal["higher", "lower"] = "lower"
    variance_at: VarianceAt = "true_effect"
    planning_rate_ratio: float | None = None
    test_variance: TestVariance = "observed_rates"
    test: CountTest = "wald"
    control_rate_prior: Prior | None = None
    time_unit: Literal["days", "weeks", "months", "years"] | None = None

    effect_name = "rate ratio"
    ratio_scale = True

    def __post_init__(self) -> None:
        def real(name: str, **bounds: Any) -> None:
            object.__setattr__(self, name, check_real(getattr(self, name), name, _OWNER,
                                                      **bounds))

        real("control_rate", low=0, low_open=True)
        real("follow_up", low=0, low_open=True)
        real("overdispersion", low=0)
        real("dropout_rate", low=0)
        check_choice(self.layout, "layout", _OWNER, ["two_arm", "single_arm"])
        real("allocation", low=0, low_open=True)
        check_choice(self.better, "better", _OWNER, ["higher", "lower"])
        check_choice(self.variance_at, "variance_at", _OWNER, ["true_effect", "planning_ratio"])
        if self.planning_rate_ratio is not None:
            real("planning_rate_ratio", low=0, low_open=True)
        check_choice(self.test_variance, "test_variance", _OWNER,
                     ["observed_rates", "pooled_null"])
        if self.test_variance == "pooled_null" and self.variance_at == "planning_ratio":
            raise AssuranceInputError(
                f"The 'test_variance' parameter of {_OWNER} can be 'pooled_null' only with "
                "variance_at='true_effect': with both standard errors frozen at one planning "
                "ratio, the test would not keep its level where the treatment does nothing. "
                "Got 'pooled_null' with variance_at='planning_ratio'.")
        check_choice(self.test, "test", _OWNER, ["wald", "exact_conditional"])
        if self.test == "exact_conditional":
            self._check_exact()
        if self.control_rate_prior is not None:
            _check_rate_prior(self.control_rate_prior)
        if self.time_unit is not None:
            check_choice(self.time_unit, "time_unit", _OWNER,
                         ["days", "weeks", "months", "years"])

    def _check_exact(self) -> None:
        """The settings under which the conditional test's power is exact."""
        needs = [
            (self.layout == "two_arm", f"layout={self.layout!r}",
             "it compares two arms (one arm against a fixed rate has no total to condition "
             "on)"),
            (self.overdispersion == 0, f"overdispersion={self.overdispersion!r}",
             "given the total, the treatment count is binomial only for Poisson counts "
             "(overdispersion 0)"),
            (self.dropout_rate == 0, f"dropout_rate={self.dropout_rate!r}",
             "with dropout each patient's follow-up is random, so the null share of events "
             "depends on the observed follow-up times and the power is no longer a finite "
             "sum (dropout 0 gives every patient the planned follow-up)"),
            (self.variance_at == "true_effect" and self.planning_rate_ratio is None
             and self.test_variance == "observed_rates",
             f"variance_at={self.variance_at!r}, planning_rate_ratio="
             f"{self.planning_rate_ratio!r}, test_variance={self.test_variance!r}",
             "the exact test uses no variance, so these settings must keep their defaults "
             "('true_effect', None, 'observed_rates')"),
            (self.control_rate_prior is None, "a control_rate_prior",
             "the exact power is computed at the planning control rate only"),
        ]
        for ok, got, why in needs:
            if not ok:
                raise AssuranceInputError(
                    f"The 'test' parameter of {_OWNER} can be 'exact_conditional' only when "
                    f"{why}. Got test='exact_conditional' with {got}.")

    # ---- geometry ----------------------------------------------------------------------
    @property
    def smallest_total(self) -> int:
        """One patient per arm (the normal approximation is poor that small, but defined)."""
        return self.arms

    @property
    def mean_exposure(self) -> float:
        """Mean follow-up per patient: ``(1 - exp(-d t)) / d`` with dropout hazard ``d``."""
        d, t = self.dropout_rate, self.follow_up
        return t if d == 0 else -math.expm1(-d * t) / d

    def unit_variance(self, rate: Any) -> np.ndarray:
        """Variance of an arm's log rate per patient: ``1 / E[lambda T / (1 + k lambda T)]``.

        Examples
        --------
        >>> ep = CountEndpoint(1.0, 2.0, overdispersion=0.5)
        >>> float(ep.unit_variance(1.0))  # 1 / (1 * 2) + 0.5
        1.0
        """
        lam = np.asarray(rate, dtype=float)
        k, d, t = self.overdispersion, self.dropout_rate, self.follow_up
        if k == 0:
            return 1.0 / (lam * self.mean_exposure)
        if d == 0:
            return 1.0 / (lam * t) + k
        return 1.0 / _information_per_patient(lam, k, d, t)

    def log_ratio_variance(self, rate_ratio: Any, n_treatment: Any, n_control: Any = 0, *,
                           control_rate: Any = None) -> np.ndarray:
        """Variance of the estimated log rate ratio at a true rate ratio (Wald test).

        ``v(lambda_c RR) / n_t + v(lambda_c) / n_c`` (no control term for one arm);
        arguments broadcast. ``control_rate`` defaults to the planning value.
        """
        lam_c = self.control_rate if control_rate is None else control_rate
        return self._variances(np.log(np.asarray(rate_ratio, dtype=float)), lam_c,
                               np.asarray(n_treatment, float), np.asarray(n_control, float),
                               null_log_rr=None)[0]

    def _variances(self, log_rr, lam_c, n_t, n_c, null_log_rr):
        """(variance of the estimate, variance used by the test) on the log scale."""
        lam_c = np.asarray(lam_c, dtype=float)
        lam_t = lam_c * np.exp(np.clip(log_rr, -_LOG_RR_LIMIT, _LOG_RR_LIMIT))
        single = self.layout == "single_arm"
        var1 = self.unit_variance(lam_t) / n_t
        if not single:
            var1 = var1 + self.unit_variance(lam_c) / n_c
        if null_log_rr is None or self.test_variance == "observed_rates":
            return var1, var1
        ratio0 = math.exp(null_log_rr)
        if single:
            return var1, self.unit_variance(ratio0 * lam_c) / n_t
        lam_c0 = (n_t * lam_t + n_c * lam_c) / (n_t * ratio0 + n_c)
        var0 = self.unit_variance(ratio0 * lam_c0) / n_t + self.unit_variance(lam_c0) / n_c
        return var1, var0

    # ---- interface ---------------------------------------------------------------------
    def calculator(self, prior_benefit: Prior, rule_benefit: Significance, *, draws: int,
                   seed: int | None, nuisance: Prior | None = None) -> SuccessCalculator:
        """Exact calculator, or Monte Carlo with a prior on the control rate.

        ``nuisance``, if given, is a prior on the control rate and replaces
        ``control_rate_prior``.
        """
        rate_prior = self.control_rate_prior if nuisance is None else nuisance
        if rate_prior is not None:
            _check_rate_prior(rate_prior)
            if self.test == "exact_conditional":
                raise AssuranceInputError(
                    f"A prior on the control rate cannot be used with test="
                    f"'exact_conditional' of {_OWNER}: the exact power is computed at the "
                    "planning control rate only. Use test='wald' or drop the prior.")
        if self.test == "exact_conditional" and not isinstance(rule_benefit, Significance):
            raise AssuranceInputError(
                f"The exact conditional test of {_OWNER} decides by significance; the rule "
                f"{rule_benefit.describe()!r} is not a Significance rule. Use test='wald' "
                "for posterior-probability rules.")
        return _CountCalculator(self, prior_benefit, rule_benefit, rate_prior, draws, seed)

    def extra_coords(self, n_t: np.ndarray, n_c: np.ndarray) -> dict[str, np.ndarray]:
        """Total patient time and the events expected if the treatment changed nothing."""
        time = (np.asarray(n_t) + np.asarray(n_c)) * self.mean_exposure
        return {"patient_time": time, "expected_events_if_no_effect": time * self.control_rate}

    def describe(self) -> str:
        """Plain description for memos."""
        model = ("Poisson counts" if self.overdispersion == 0 else
                 f"negative binomial counts (overdispersion k = {self.overdispersion:g})")
        time = f"follow-up {self.follow_up:g}"
        if self.dropout_rate > 0:
            time += (f" with dropout {self.dropout_rate:g} per unit time "
                     f"(mean exposure {self.mean_exposure:.3g})")
        rate = ("control rate" if self.layout == "two_arm" else "fixed reference rate")
        text = (f"event counts, {model}; {rate} {self.control_rate:g} per unit time, {time}; "
                f"{self.layout_text()}; {_TEST_TEXT[self.test]}")
        if self.test_variance == "pooled_null":
            text += " (variance at the pooled null rates)"
        if self.control_rate_prior is not None:
            text += f"; control rate uncertain: {self.control_rate_prior.describe()}"
        return text + f"; {self.better} rate ratios are better"

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": "counts", "control_rate": self.control_rate, "follow_up": self.follow_up,
            "overdispersion": self.overdispersion, "dropout_rate": self.dropout_rate,
            "mean_exposure": self.mean_exposure, "layout": self.layout,
            "allocation": self.allocation, "better": self.better,
            "variance_at": self.variance_at, "planning_rate_ratio": self.planning_rate_ratio,
            "test_variance": self.test_variance, "test": self.test,
            "control_rate_prior": (None if self.control_rate_prior is None
                                   else self.control_rate_prior.to_dict()),
            "time_unit": self.time_unit,
        }


_TEST_TEXT = {
    "wald": "Wald test on the log rate ratio",
    "exact_conditional": ("exact conditional test (binomial split of the total events, "
                          "power by exact enumeration)"),
}


def _check_rate_prior(prior: Any) -> None:
    if not isinstance(prior, Prior):
        raise AssuranceInputError(
            f"The 'control_rate_prior' parameter of {_OWNER} must be a prior such as "
            f"FromScipy(scipy.stats.gamma(a=40, scale=0.02)). Got {prior!r} instead.")
    lo, _ = prior.support()
    if lo < 0 or float(prior.cdf(0.0)) > 0 or any(loc <= 0 for loc, _ in prior.atoms()):
        raise AssuranceInputError(
            f"The 'control_rate_prior' parameter of {_OWNER} must put all its mass on rates "
            f"> 0. Got {prior.describe()} instead.")


# ------------------------------------------------------------------------------------------
# success probabilities
# ------------------------------------------------------------------------------------------
class _CountCalculator(SuccessCalculator):
    def __init__(self, endpoint: CountEndpoint, prior: Prior, rule: Significance,
                 rate_prior: Prior | None, draws: int, seed: int | None):
        self.endpoint, self.prior, self.rule = endpoint, prior, rule
        self.crit = rule.critical_z()
        self.null_log_rr = endpoint.sign * rule.null_value
        self.monte_carlo = rate_prior is not None
        if endpoint.variance_at == "planning_ratio":
            ratio = endpoint.planning_rate_ratio
            self.planning_log_rr = (endpoint.sign * prior.mean() if ratio is None
                                    else math.log(ratio))
        if self.monte_carlo:
            effect_gen, rate_gen = (np.random.default_rng(s)
                                    for s in np.random.SeedSequence(seed).spawn(2))
            self.effect_draws = np.asarray(prior.sample(draws, effect_gen), dtype=float)
            self.rate_draws = np.asarray(rate_prior.sample(draws, rate_gen), dtype=float)
            if not np.all(np.isfinite(self.rate_draws) & (self.rate_draws > 0)):
                raise AssuranceInputError(
                    f"The 'control_rate_prior' parameter of {_OWNER} must give rates > 0; "
                    f"{rate_prior.describe()} gave other values.")

    # P(success | true benefit delta, control rate), broadcasting over draws and sizes
    def _conditional(self, delta, lam_c, n_t, n_c):
        ep = self.endpoint
        if ep.test == "exact_conditional":
            return self._exact(delta, n_t, n_c)
        if ep.variance_at == "true_effect":
            log_rr = ep.sign * np.asarray(delta, dtype=float)
        else:
            log_rr = np.full(np.shape(delta), self.planning_log_rr)
        var1, var0 = ep._variances(log_rr, lam_c, n_t, n_c, self.null_log_rr)
        se1, se0 = np.sqrt(var1), np.sqrt(var0)
        c = self.rule.threshold(se0, self.crit)
        return special.ndtr((delta - c) / se1)

    def _exact(self, delta, n_t, n_c):
        """Exact power of the conditional test at benefit ``delta`` (sizes broadcast)."""
        from ..compute.poisson_exact import CriticalTable, conditional_power

        ep, rule = self.endpoint, self.rule
        n_t, n_c = np.broadcast_arrays(np.asarray(n_t, float), np.asarray(n_c, float))
        log_rr = ep.sign * float(delta)
        mu_c = ep.control_rate * ep.follow_up
        lam_t = n_t * mu_c * math.exp(min(max(log_rr, -_LOG_RR_LIMIT), _LOG_RR_LIMIT))
        lam_c = n_c * mu_c
        ratio0 = math.exp(self.null_log_rr)
        # the arm whose count is small when the treatment works, and its null share
        if ep.sign < 0:
            n_y, n_o, lam_y, lam_o = n_t * ratio0, n_c, lam_t, lam_c
        else:
            n_y, n_o, lam_y, lam_o = n_c, n_t * ratio0, lam_c, lam_t
        q0 = n_y / (n_y + n_o)
        share = None
        if rule.min_estimate is not None:
            # benefit estimate log((S - y) / n_other) - log(y / n_y) > m  <=>  y < b S
            n_ys, n_os = (n_t, n_c) if ep.sign < 0 else (n_c, n_t)
            share = n_ys / (n_ys + n_os * math.exp(rule.min_estimate))
        key = (n_t.tobytes(), n_c.tobytes())
        if getattr(self, "_critical_key", None) != key:
            self._critical_key = key
            self._critical = CriticalTable(q0, rule.one_sided_alpha, share)
        return conditional_power(lam_y, lam_o, q0, rule.one_sided_alpha, share,
                                 critical=self._critical).reshape(n_t.shape)

    def success(self, n_t, n_c, cuts):
        from ..compute.normal_outcome import exact_success

        n_t = np.asarray(n_t, dtype=float)
        n_c = np.asarray(n_c, dtype=float)
        for cut in cuts:
            if not math.isfinite(cut.value):
                raise AssuranceInputError(
                    f"The 'relevant_effect' of a design with a {_OWNER} must be a rate ratio "
                    f"> 0 (its log is the benefit scale). Got a cut at {cut.value!r}.")
        if self.monte_carlo:
            return self._monte_carlo(n_t, n_c, cuts)
        ep = self.endpoint
        if ep.variance_at == "true_effect":
            return self._quadrature(n_t, n_c, cuts)
        # standard error frozen at the planning ratio (the Wald test: test_variance is
        # "observed_rates" here), so exact_success applies to any prior
        log_rr = np.full(n_t.shape, self.planning_log_rr)
        var1, _ = ep._variances(log_rr, ep.control_rate, n_t, n_c, None)
        return exact_success(self.prior, self.rule, sigma=1.0, se_factor=np.sqrt(var1),
                             df=np.full(n_t.shape, np.inf), analysis="z", cuts=cuts)

    def _quadrature(self, n_t, n_c, cuts):
        """Average of power(delta) over the prior, the standard error following delta."""
        from ..compute.normal_outcome import SuccessProbabilities

        lam_c = self.endpoint.control_rate
        regions = [(None, False)] + [(c.value, c.inclusive) for c in cuts]
        totals = np.zeros((len(regions), n_t.size))
        for weight, part in self.prior.parts():
            if isinstance(part, PointMass):
                p = self._conditional(part.value, lam_c, n_t, n_c)
                for r, (cut, inclusive) in enumerate(regions):
                    inside = cut is None or (part.value >= cut if inclusive
                                             else part.value > cut)
                    totals[r] += weight * p * inside
                continue
            lows = np.array([0.0 if cut is None else float(part.cdf(cut))
                             for cut, _ in regions])

            def integrand(u: float, part: Prior = part, lows: np.ndarray = lows) -> np.ndarray:
                delta = part.ppf(min(max(u, 1e-300), 1 - 1e-16))
                p = self._conditional(delta, lam_c, n_t, n_c)
                return np.outer(u >= lows, p).ravel()

            # split where the success probability steps up as n grows (the rule's limit),
            # so that a steep step at large n cannot fall between quadrature nodes
            lowest = self.rule.lowest_passable_effect()
            edges = [*lows, float(part.cdf(lowest)) if math.isfinite(lowest) else 0.0]
            breaks = sorted({float(x) for x in edges if 0.0 < x < 1.0})
            from scipy import integrate  # loaded on first use: slow to import

            value, _err = integrate.quad_vec(integrand, 0.0, 1.0, epsabs=1e-10, epsrel=1e-9,
                                             limit=2000, points=breaks or None)
            totals += weight * np.asarray(value).reshape(totals.shape)
        totals = np.clip(totals, 0.0, 1.0)
        return SuccessProbabilities(success=totals[0], joint=list(totals[1:]))

    def _monte_carlo(self, n_t, n_c, cuts, chunk: int = 1024):
        from ..compute.normal_outcome import DrawAverages

        effect, rate = self.effect_draws, self.rate_draws
        m = effect.size
        masks = [(effect >= c.value) if c.inclusive else (effect > c.value) for c in cuts]
        averages = DrawAverages(1 + len(cuts), n_t.size)
        for start in range(0, m, chunk):
            sl = slice(start, min(start + chunk, m))
            p = self._conditional(effect[sl, None], rate[sl, None], n_t[None, :],
                                  n_c[None, :])
            averages.add([p] + [p * mask[sl, None] for mask in masks])
        return averages.success_probabilities()

    def power(self, effect_benefit, n_t, n_c):
        """Classical power at one effect, standard error at that effect, planning rate."""
        delta = float(effect_benefit)
        if not math.isfinite(delta):
            raise AssuranceInputError(
                f"Power for a {_OWNER} needs a rate ratio > 0 (the assumed effect and every "
                f"effect of the power curve). Got an effect whose log is {delta!r}.")
        ep = self.endpoint
        n_t = np.asarray(n_t, dtype=float)
        n_c = np.asarray(n_c, dtype=float)
        if ep.test == "exact_conditional":
            return self._exact(delta, n_t, n_c)
        var1, var0 = ep._variances(np.full(n_t.shape, ep.sign * delta), ep.control_rate,
                                   n_t, n_c, self.null_log_rr)
        c = self.rule.threshold(np.sqrt(var0), self.crit)
        return special.ndtr((delta - c) / np.sqrt(var1))

    def method(self) -> str:
        ep = self.endpoint
        if self.monte_carlo:
            base = "Monte Carlo over the rate ratio and the control rate (Rao-Blackwellised)"
        elif ep.variance_at == "true_effect":
            base = "adaptive quadrature over the prior"
        else:
            kinds = {type(part).__name__ for _, part in self.prior.parts()}
            base = ("closed form" if kinds <= {"Normal", "PointMass"}
                    else "adaptive quadrature over the prior")
        if ep.test == "exact_conditional":
            return (f"{base}; exact conditional test on the split of the total events, "
                    "power by exact enumeration (Poisson tail below 1e-13 left out)")
        where = ("at each true rate ratio" if ep.variance_at == "true_effect"
                 else "at the planning rate ratio")
        test = ("Wald test" if ep.test_variance == "observed_rates"
                else "test with the variance at the pooled null rates")
        return f"{base}; normal approximation for the log rate ratio, standard error {where}; " \
               f"{test}"


# ------------------------------------------------------------------------------------------
# closed-form sample size
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class CountSampleSize:
    """Patients per arm from the closed-form formula.

    ``n_control`` is ``ceil(n_control_exact)`` and ``n_treatment`` is
    ``ceil(allocation * n_control)``.
    """

    n_control: int
    n_treatment: int
    n_control_exact: float


def sample_size_for_rate_ratio(
    rate_ratio: float,
    *,
    control_rate: float,
    follow_up: float,
    overdispersion: float = 0.0,
    allocation: float = 1.0,
    alpha: float = 0.025,
    power: float = 0.8,
    dropout_rate: float = 0.0,
    test_variance: TestVariance = "observed_rates",
) -> CountSampleSize:
    """Patients per arm for a one-sided test of "rate ratio = 1" at a given rate ratio.

    Parameters
    ----------
    rate_ratio
        Rate ratio treatment / control to be detected (> 0, not 1).
    control_rate, follow_up, overdispersion, dropout_rate, test_variance
        As for :class:`CountEndpoint`.
    allocation
        Treatment patients per control patient ``r``.
    alpha
        One-sided level (for a two-sided 5% test give 0.025).
    power
        Required power, in [0.5, 1).

    Returns
    -------
    CountSampleSize

    Notes
    -----
    ``n_c = (z_{1-alpha} sqrt(V0) + z_{power} sqrt(V1))^2 / (log RR)^2`` with, per control
    patient, ``V1 = v(lambda_c RR) / r + v(lambda_c)``, which without dropout is
    ``[(1/mu_t + k) / r + (1/mu_c + k)]``, ``mu = lambda * follow_up`` (Zhu & Lakkis 2014);
    ``V0 = V1`` for the Wald test and ``V0 = (1 + 1/r) v(lambda_0)``,
    ``lambda_0 = (r lambda_t + lambda_c) / (1 + r)``, for ``"pooled_null"``.

    References
    ----------
    Zhu H, Lakkis H (2014). Statistics in Medicine 33(3):376-387.

    Examples
    --------
    >>> s = sample_size_for_rate_ratio(0.7, control_rate=1.0, follow_up=1.0,
    ...                                overdispersion=0.5, alpha=0.025, power=0.8)
    >>> # (1.95996 + 0.84162)^2 * [(1/0.7 + 0.5) + (1/1 + 0.5)] / log(0.7)^2
    >>> round(s.n_control_exact, 2), s.n_control, s.n_treatment
    (211.53, 212, 212)
    """
    owner = "sample_size_for_rate_ratio"
    ratio = check_real(rate_ratio, "rate_ratio", owner, low=0, low_open=True)
    if ratio == 1.0:
        raise AssuranceInputError(f"The 'rate_ratio' parameter of {owner} must differ from 1 "
                                  "(no sample size detects no effect). Got 1.0 instead.")
    alpha = check_real(alpha, "alpha", owner, low=0, high=0.5, low_open=True, high_open=True)
    power = check_real(power, "power", owner, low=0.5, high=1, high_open=True)
    ep = _sizing_endpoint(owner, control_rate=control_rate, follow_up=follow_up,
                          overdispersion=overdispersion, dropout_rate=dropout_rate,
                          allocation=allocation, test_variance=test_variance)
    r = ep.allocation
    log_rr = math.log(ratio)
    var1, var0 = ep._variances(np.array(log_rr), ep.control_rate, np.array(r), np.array(1.0),
                               null_log_rr=0.0)
    z_a, z_b = -special.ndtri(alpha), special.ndtri(power)
    exact = float((z_a * np.sqrt(var0) + z_b * np.sqrt(var1)) ** 2 / log_rr**2)
    n_c = math.ceil(exact - 1e-9)
    return CountSampleSize(n_control=n_c, n_treatment=math.ceil(r * n_c - 1e-9),
                           n_control_exact=exact)


def _sizing_endpoint(owner: str, **kwargs: Any) -> CountEndpoint:
    """A CountEndpoint whose validation errors name ``owner`` instead."""
    try:
        return CountEndpoint(kwargs.pop("control_rate"), kwargs.pop("follow_up"), **kwargs)
    except AssuranceInputError as exc:
        raise AssuranceInputError(str(exc).replace(f"of {_OWNER}", f"of {owner}")) from None


# ------------------------------------------------------------------------------------------
# simulation check
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SimulatedPower:
    """Rejection rate of simulated trials, with its Monte Carlo standard error.

    ``undefined`` counts trials with no event in an arm (no log rate ratio; counted as not
    successful); ``predicted_power`` is the endpoint's formula at the same design.
    """

    rejection_rate: float
    mcse: float
    trials: int
    undefined: int
    predicted_power: float


def simulate_rejection_rate(
    endpoint: CountEndpoint,
    rate_ratio: float,
    n_treatment: int,
    n_control: int = 0,
    *,
    rule: Significance | None = None,
    trials: int = 2000,
    seed: int | np.random.Generator | None = None,
    analysis: Literal["negative_binomial", "poisson"] = "negative_binomial",
) -> SimulatedPower:
    """Simulate trials patient by patient, analyse each, and count successes.

    Counts are drawn as a gamma-Poisson mixture: each patient's rate is
    ``Gamma(shape 1/k, mean lambda)`` and the count given it is Poisson over the patient's
    follow-up ``min(Exp(dropout_rate), follow_up)`` (``k = 0``: plain Poisson). Each trial
    is analysed on the log rate ratio:

    * ``"negative_binomial"``: maximum likelihood for the two-group negative binomial
      model with exposure offset, ``(log lambda_c, log lambda_t, k)``, by bisection on the
      profile score of ``k`` (``k = 0`` when the data show no overdispersion) with Newton
      steps for the log rates; Wald standard error from the expected information
      ``sum mu_i / (1 + k mu_i)`` per arm at the estimates (Lawless 1987);
    * ``"poisson"``: rates = events / exposure, ``Var(log rate) = 1 / events``.

    The test follows ``endpoint.test_variance`` (for ``"pooled_null"`` the null rates are
    the pooled events over the pooled exposure); with ``endpoint.test="exact_conditional"``
    each trial is decided by the conditional exact test on its two event totals instead
    (``analysis`` is then not used). The rule is ``rule`` (natural scale, one-sided 0.025
    by default, margins and minimum estimates as in :class:`~assurance.rules.Significance`).

    Parameters
    ----------
    endpoint
        The design of the counts (the planning ``control_rate`` is the true control rate).
    rate_ratio
        True rate ratio (> 0).
    n_treatment, n_control
        Patients per arm (``n_control`` ignored for one arm).
    rule
        Success rule on the natural scale.
    trials
        Number of simulated trials (>= 10).
    seed
        Seed or generator; the same seed gives the same result.
    analysis
        ``"negative_binomial"`` or ``"poisson"``.

    Returns
    -------
    SimulatedPower
        Rejection rate with MCSE ``sqrt(p (1 - p) / trials)``.

    Examples
    --------
    >>> ep = CountEndpoint(1.0, 1.0, overdispersion=0.5)
    >>> sim = simulate_rejection_rate(ep, 0.6, 60, 60, trials=400, seed=3)
    >>> abs(sim.rejection_rate - sim.predicted_power) < 4 * sim.mcse + 0.01
    True
    """
    owner = "simulate_rejection_rate"
    if not isinstance(endpoint, CountEndpoint):
        raise AssuranceInputError(f"The 'endpoint' parameter of {owner} must be a "
                                  f"CountEndpoint. Got {endpoint!r} instead.")
    ratio = check_real(rate_ratio, "rate_ratio", owner, low=0, low_open=True)
    n_t = check_int(n_treatment, "n_treatment", owner, low=1)
    two_arm = endpoint.layout == "two_arm"
    n_c = check_int(n_control, "n_control", owner, low=1 if two_arm else 0) if two_arm else 0
    trials = check_int(trials, "trials", owner, low=10)
    check_choice(analysis, "analysis", owner, ["negative_binomial", "poisson"])
    rule = Significance() if rule is None else rule
    if not isinstance(rule, Significance):
        raise AssuranceInputError(f"The 'rule' parameter of {owner} must be a Significance "
                                  f"rule. Got {rule!r} instead.")
    rule_b = endpoint.benefit_rule(rule)
    crit = rule_b.critical_z()
    null_log_rr = endpoint.sign * rule_b.null_value
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    lam_c = endpoint.control_rate
    arm_specs = [(n_t, lam_c * ratio)] + ([(n_c, lam_c)] if two_arm else [])

    successes = undefined = 0
    chunk = max(1, 200_000 // (n_t + n_c))
    for start in range(0, trials, chunk):
        m = min(chunk, trials - start)
        data = [_simulate_arm(endpoint, rng, m, n, lam) for n, lam in arm_specs]
        if endpoint.test == "exact_conditional":
            successes += int(_exact_decisions(endpoint, rule_b, data, n_t, n_c).sum())
            continue
        ok, d, _var1, var0 = _analyse(endpoint, data, analysis, null_log_rr, lam_c)
        se0 = np.sqrt(np.where(ok, var0, 1.0))
        passed = ok & (endpoint.sign * d > rule_b.threshold(se0, crit))
        successes += int(passed.sum())
        undefined += int((~ok).sum())
    p = successes / trials
    calc = _CountCalculator(endpoint, PointMass(0.0), rule_b, None, 0, None)
    predicted = float(calc.power(float(endpoint.to_benefit(ratio)), np.array([n_t]),
                                 np.array([n_c]))[0])
    return SimulatedPower(rejection_rate=p, mcse=math.sqrt(max(p * (1 - p), 0.0) / trials),
                          trials=trials, undefined=undefined, predicted_power=predicted)


def _exact_decisions(ep: CountEndpoint, rule: Significance, data, n_t: int, n_c: int
                     ) -> np.ndarray:
    """Decisions of the conditional exact test on simulated event totals (two arms)."""
    from ..compute.poisson_exact import critical_counts

    x_t, x_c = (y.sum(axis=1).astype(float) for y, _ in data)
    ratio0 = math.exp(ep.sign * rule.null_value)
    if ep.sign < 0:
        y, q0, n_y, n_o = x_t, n_t * ratio0 / (n_t * ratio0 + n_c), n_t, n_c
    else:
        y, q0, n_y, n_o = x_c, n_c / (n_c + n_t * ratio0), n_c, n_t
    share = (None if rule.min_estimate is None
             else n_y / (n_y + n_o * math.exp(rule.min_estimate)))
    return y <= critical_counts(x_t + x_c, q0, rule.one_sided_alpha, share)


def _simulate_arm(ep: CountEndpoint, rng: np.random.Generator, m: int, n: int, lam: float
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Counts (m trials x n patients) and follow-up times of one arm."""
    t = np.full((m, n), ep.follow_up)
    if ep.dropout_rate > 0:
        t = np.minimum(rng.exponential(1.0 / ep.dropout_rate, size=(m, n)), ep.follow_up)
    k = ep.overdispersion
    rate = rng.gamma(1.0 / k, k * lam, size=(m, n)) if k > 0 else lam
    return rng.poisson(rate * t), t


def _analyse(ep, data, analysis, null_log_rr, lam_ref):
    """Per trial: defined?, log RR estimate, its variance, the variance used by the test."""
    totals = [(y.sum(axis=1), t.sum(axis=1)) for y, t in data]
    ok = np.all([y_tot > 0 for y_tot, _ in totals], axis=0)
    safe = [(np.where(ok, y_tot, 1.0), t_tot) for y_tot, t_tot in totals]
    log_rates = [np.log(y_tot / t_tot) for y_tot, t_tot in safe]
    if analysis == "poisson":
        k = np.zeros(ok.shape)
    else:
        k, log_rates = _fit_dispersion(data, log_rates)
    two_arm = len(data) == 2
    d = log_rates[0] - (log_rates[1] if two_arm else math.log(lam_ref))

    def variance(rates):
        return sum(1.0 / _information(y_t[1], r, k) for y_t, r in zip(data, rates, strict=True))

    var1 = variance([np.exp(lr) for lr in log_rates])
    if ep.test_variance == "observed_rates":
        return ok, d, var1, var1
    ratio0 = math.exp(null_log_rr)
    if two_arm:
        (y_t, t_t), (y_c, t_c) = safe
        lam_c0 = (y_t + y_c) / (ratio0 * t_t + t_c)
        var0 = variance([ratio0 * lam_c0, lam_c0])
    else:
        var0 = variance([np.full(ok.shape, ratio0 * lam_ref)])
    return ok, d, var1, var0


def _information(t: np.ndarray, rate: np.ndarray, k: np.ndarray) -> np.ndarray:
    """Expected information of an arm's log rate: sum of mu / (1 + k mu)."""
    mu = rate[:, None] * t
    return np.sum(mu / (1.0 + k[:, None] * mu), axis=1)


def _fit_dispersion(data, log_rates, k_low: float = 1e-8, k_high: float = 1e4):
    """Maximum likelihood of (log rates, k) for each simulated trial, vectorised.

    The profile score of k (the k-derivative of the log likelihood at the rates that
    maximise it for that k) is solved on log k (bisection, then the Illinois method); the
    rates follow by Newton steps on the log rate, which are exact in one step when every
    patient has the same follow-up.
    Per patient the log likelihood is ``sum_{j<y} log(1 + j k) + y log mu
    - (y + 1/k) log(1 + k mu)`` up to a constant, whose k-derivative is
    ``sum_{j<y} j / (1 + j k) + [log(1 + x) - x / (1 + x)] / k^2 - y mu / (1 + k mu)``,
    ``x = k mu``; at ``k = 0`` it is ``((y - mu)^2 - y) / 2``.
    """
    ys = [y for y, _ in data]
    ts = [t for _, t in data]
    m = ys[0].shape[0]
    varying = not all(np.all(t == t.flat[0]) for t in ts)
    # sum_i sum_{j < y_i} j / (1 + j k) = sum_j j / (1 + j k) * #{i: y_i > j}
    y_all = np.concatenate(ys, axis=1)
    top = int(y_all.max()) + 1
    counts = np.bincount((np.arange(m)[:, None] * (top + 1) + y_all).ravel(),
                         minlength=m * (top + 1)).reshape(m, top + 1)
    above = np.cumsum(counts[:, ::-1], axis=1)[:, ::-1][:, 1:]   # #{y > j}, j = 0..top-1
    j = np.arange(top, dtype=float)

    def newton(eta, k, iters):
        for _ in range(iters):
            for g, (y, t) in enumerate(zip(ys, ts, strict=True)):
                mu = np.exp(eta[g])[:, None] * t
                denom = 1.0 + k[:, None] * mu
                score = np.sum((y - mu) / denom, axis=1)
                info = np.sum(mu * (1.0 + k[:, None] * y) / denom**2, axis=1)
                eta[g] = eta[g] + np.clip(score / np.maximum(info, 1e-300), -1.0, 1.0)
        return eta

    def score_k(k, eta):
        total = np.sum(above * (j / (1.0 + np.outer(k, j))), axis=1)
        for g, (y, t) in enumerate(zip(ys, ts, strict=True)):
            mu = np.exp(eta[g])[:, None] * t
            x = k[:, None] * mu
            gap = np.where(x < 1e-4, x * x * (0.5 - x * (2 / 3 - 0.75 * x)),
                           np.log1p(x) - x / (1.0 + x))
            total = total + np.sum(gap / (k * k)[:, None] - y * mu / (1.0 + x), axis=1)
        return total

    eta = [lr.copy() for lr in log_rates]
    zero = np.zeros(m)
    if varying:
        eta = newton(eta, zero, 20)
    at_zero = sum(np.sum((y - np.exp(e)[:, None] * t) ** 2 - y, axis=1)
                  for y, t, e in zip(ys, ts, eta, strict=True))
    k_hat = np.zeros(m)
    active = at_zero > 0
    if active.any():
        lo = np.full(m, math.log(k_low))
        hi = np.full(m, math.log(k_high))
        f_lo = np.full(m, np.nan)  # the score at each end, once evaluated
        f_hi = np.full(m, np.nan)
        eta_mid = [e.copy() for e in eta]
        # Eight halvings of log k over [1e-8, 1e4] leave a bracket 0.11 wide, where the
        # profile score is nearly linear; the Illinois method (regula falsi halving the
        # value kept at a stale end) then narrows it below 1e-9 in about 7 evaluations
        # where bisection needs 24 (on log k; k to a relative 5e-10). The rates at each k
        # are warm-started from the previous step's, with Newton steps.
        for _ in range(8):
            mid = 0.5 * (lo + hi)
            k_mid = np.exp(mid)
            if varying:
                eta_mid = newton(eta_mid, k_mid, 3)
            f_mid = score_k(k_mid, eta_mid)
            up = f_mid > 0
            lo, f_lo = np.where(up, mid, lo), np.where(up, f_mid, f_lo)
            hi, f_hi = np.where(up, hi, mid), np.where(up, f_hi, f_mid)
        for end, value in ((lo, f_lo), (hi, f_hi)):  # an end never moved: its score
            if np.isnan(value).any():
                at = np.exp(end)
                fresh = newton([e.copy() for e in eta_mid], at, 5) if varying else eta_mid
                np.copyto(value, score_k(at, fresh), where=np.isnan(value))
        below = active & ~(f_lo > 0)    # the score falls through zero below 1e-8
        beyond = active & (f_hi > 0)    # ... or above 1e4: the estimate is that end
        open_ = active & ~below & ~beyond
        kept = np.zeros(m)              # +1: the last step kept hi, -1: kept lo
        for step in range(60):
            width = hi - lo
            todo = open_ & (width > 1e-9)
            if not todo.any():
                break
            x = lo + width * f_lo / np.where(todo, f_lo - f_hi, 1.0)
            x = np.clip(x, lo + 1e-3 * width, hi - 1e-3 * width)
            k_x = np.exp(x)
            if varying:
                eta_mid = newton(eta_mid, k_x, 2 if step < 2 else 1)
            f_x = score_k(k_x, eta_mid)
            up = f_x > 0  # the root lies above x: x becomes lo
            f_hi = np.where(todo & up & (kept == 1), 0.5 * f_hi, f_hi)
            f_lo = np.where(todo & ~up & (kept == -1), 0.5 * f_lo, f_lo)
            lo, f_lo = np.where(todo & up, x, lo), np.where(todo & up, f_x, f_lo)
            hi, f_hi = np.where(todo & ~up, x, hi), np.where(todo & ~up, f_x, f_hi)
            kept = np.where(todo, np.where(up, 1.0, -1.0), kept)
        log_k = np.where(beyond, math.log(k_high),
                         np.where(below, math.log(k_low), 0.5 * (lo + hi)))
        k_hat = np.where(active, np.exp(log_k), 0.0)
        if varying:
            eta = newton(eta_mid, k_hat, 5)
            eta = [np.where(active, e, e0) for e, e0 in zip(eta, log_rates, strict=True)]
    return k_hat, list(eta)
