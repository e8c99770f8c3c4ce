"""Continuous endpoint: difference in means (two arms) or a mean change (one group).

The endpoint knows how a total sample size splits into arms, the standard error factor
``k(n)`` with ``se = sigma * k(n)``, and the degrees of freedom of the t test. It also knows
which direction of the effect is good, so everything downstream can work on a "benefit"
scale where larger is better.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Literal

import numpy as np

from .._validation import MAX_UNIT, check_choice, check_real, check_text
from ..priors.families import Prior
from ..rules.significance import Significance
from .base import Endpoint, SuccessCalculator

__all__ = ["ContinuousEndpoint"]

Layout = Literal["two_arm", "single_arm"]


@dataclass(frozen=True)
class ContinuousEndpoint(Endpoint):
    """A normally distributed outcome with standard deviation ``sigma``.

    Parameters
    ----------
    sigma
        Planning value of the outcome's standard deviation (per patient; for a paired or
        single-arm design, the SD of the within-patient change). Must be > 0.
    layout
        ``"two_arm"``: parallel groups, effect = mean(treatment) - mean(control).
        ``"single_arm"``: one group (or paired differences) against a fixed reference,
        effect = mean change.
    allocation
        Patients on treatment per patient on control (two arms only), > 0.
    analysis
        ``"t"``: the final analysis estimates sigma (Student t test; power from the
        non-central t). ``"z"``: sigma is treated as known at the analysis.
    better
        ``"higher"`` if a larger effect is good, ``"lower"`` if a smaller one is
        (for example a fall in blood pressure).
    unit
        The outcome's unit for reading ("metres", "mmHg"), at most 40 characters of plain
        text; None when unnamed. Labels only: no number depends on it.

    Examples
    --------
    >>> ep = ContinuousEndpoint(sigma=10.0, allocation=2.0)
    >>> ep.arm_sizes(np.array([90]))
    (array([60]), array([30]))
    >>> round(float(ep.se_factor(np.array([60]), np.array([30]))[0]), 6)
    0.223607
    """

    sigma: float
    layout: Layout = "two_arm"
    allocation: float = 1.0
    analysis: Literal["t", "z"] = "t"
    better: Literal["higher", "lower"] = "higher"
    unit: str | None = None

    def __post_init__(self) -> None:
        owner = "ContinuousEndpoint"
        check_text(self.unit, "unit", owner, max_length=MAX_UNIT, allow_none=True)
        object.__setattr__(self, "sigma", check_real(self.sigma, "sigma", owner, low=0,
                                                     low_open=True))
        check_choice(self.layout, "layout", owner, ["two_arm", "single_arm"])
        object.__setattr__(self, "allocation", check_real(self.allocation, "allocation", owner,
                                                          low=0, low_open=True))
        check_choice(self.analysis, "analysis", owner, ["t", "z"])
        check_choice(self.better, "better", owner, ["higher", "lower"])

    effect_name = "difference in means"

    @property
    def smallest_total(self) -> int:
        """Fewest patients for which the analysis is defined (a t test needs df >= 1)."""
        if self.layout == "single_arm":
            return 2 if self.analysis == "t" else 1
        return 3 if self.analysis == "t" else 2

    def se_factor(self, n_treatment: np.ndarray, n_control: np.ndarray) -> np.ndarray:
        """``k`` with standard error of the estimate ``= sigma * k``."""
        n_t = np.asarray(n_treatment, dtype=float)
        if self.layout == "single_arm":
            return 1.0 / np.sqrt(n_t)
        return np.sqrt(1.0 / n_t + 1.0 / np.asarray(n_control, dtype=float))

    def degrees_of_freedom(self, n_treatment: np.ndarray, n_control: np.ndarray) -> np.ndarray:
        """Degrees of freedom of the pooled-variance t test."""
        n = np.asarray(n_treatment) + np.asarray(n_control)
        return (n - self.arms).astype(float)

    def describe(self) -> str:
        """Plain description for memos."""
        if self.layout == "two_arm":
            shape = self.layout_text()
        else:
            shape = "single arm / paired differences against a fixed reference"
        test = "t test (sigma estimated)" if self.analysis == "t" else "z test (sigma known)"
        return (f"continuous outcome, SD {self.sigma:g}; {shape}; {test}; "
                f"{self.better} values are better")

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "continuous", "sigma": self.sigma, "layout": self.layout,
                "allocation": self.allocation, "analysis": self.analysis,
                "better": self.better, "unit": self.unit}

    def calculator(self, prior_benefit: Prior, rule_benefit: Significance, *, draws: int,
                   seed: int | None, nuisance: Prior | None = None) -> SuccessCalculator:
        """Calculator of success probabilities for this endpoint.

        Exact with a known SD. With ``nuisance`` (a prior on sigma): deterministic quadrature
        over the SD when the rule is a significance test, the effect prior is made of normals
        and point masses and the SD prior of scaled inverse chi-square (or gamma-precision)
        distributions and point masses; Monte Carlo with ``draws`` and ``seed`` otherwise.
        """
        return _ContinuousCalculator(self, prior_benefit, rule_benefit, nuisance, draws, seed)


class _ContinuousCalculator(SuccessCalculator):
    def __init__(self, endpoint: ContinuousEndpoint, prior: Prior, rule: Significance,
                 sigma_prior: Prior | None, draws: int, seed: int | None):
        from ..compute.normal_outcome import EffectDraws, sd_quadrature_covers

        self.endpoint, self.prior, self.rule = endpoint, prior, rule
        self.sigma_prior = sigma_prior
        self.quadrature = sigma_prior is not None and sd_quadrature_covers(prior, rule,
                                                                            sigma_prior)
        self.monte_carlo = sigma_prior is not None and not self.quadrature
        self.draws = (EffectDraws.draw(prior, sigma_prior, draws, seed)
                      if self.monte_carlo else None)
        self._last: tuple[bytes, dict[str, Any]] | None = None

    def _geometry(self, n_t: np.ndarray, n_c: np.ndarray) -> dict[str, Any]:
        """Standard error factor, degrees of freedom and critical values, kept for the last
        arm sizes asked (a grid is asked once for assurance and once per power effect)."""
        n_t = np.asarray(n_t)
        n_c = np.asarray(n_c)
        key = n_t.tobytes() + b"|" + n_c.tobytes() + (n_t.dtype.char + n_c.dtype.char).encode()
        if self._last is not None and self._last[0] == key:
            return self._last[1]
        ep = self.endpoint
        df = ep.degrees_of_freedom(n_t, n_c)
        geo = {"se_factor": ep.se_factor(n_t, n_c), "df": df, "analysis": ep.analysis,
               "critical": _critical_t(self.rule, df) if ep.analysis == "t" else None}
        self._last = (key, geo)
        return geo

    def success(self, n_t, n_c, cuts):
        from ..compute.normal_outcome import exact_success, monte_carlo_success, sd_prior_success

        geo = self._geometry(n_t, n_c)
        if self.monte_carlo:
            geo = {k: v for k, v in geo.items() if k != "critical"}
            return monte_carlo_success(self.draws, self.rule, cuts=cuts, **geo)
        if self.quadrature:
            return sd_prior_success(self.prior, self.rule, self.sigma_prior, cuts=cuts, **geo)
        return exact_success(self.prior, self.rule, sigma=self.endpoint.sigma, cuts=cuts,
                             **geo)

    def power(self, effect_benefit, n_t, n_c):
        from ..compute.normal_outcome import exact_success
        from ..priors.families import PointMass

        return exact_success(PointMass(float(effect_benefit)), self.rule,
                             sigma=self.endpoint.sigma, **self._geometry(n_t, n_c)).success

    def powers(self, effects_benefit: np.ndarray, n_t: np.ndarray, n_c: np.ndarray
               ) -> np.ndarray:
        """Power at several effects (benefit scale) at once, one row per effect: the same
        numbers as :meth:`power` one effect at a time (a z analysis in one call)."""
        effects = np.asarray(effects_benefit, dtype=float)
        geo = self._geometry(n_t, n_c)
        if geo["analysis"] != "z":
            rule = self.rule
            if not isinstance(rule, Significance) or (
                    rule.min_estimate is not None and rule.min_estimate > rule.null_value):
                return np.vstack([self.power(float(e), n_t, n_c) for e in effects])
            return self._t_powers(effects, geo)
        from ..compute.prior_predictive import prob_above_at_points

        se = self.endpoint.sigma * np.asarray(geo["se_factor"], dtype=float)
        return prob_above_at_points(effects, self.rule.threshold(se, self.rule.critical_z()),
                                    se)

    def _t_powers(self, effects: np.ndarray, geo: dict[str, Any]) -> np.ndarray:
        """A significance test's t power at several effects: one non-central t call for
        all of them (the same numbers as :meth:`power`: ``nct_sf(t, df, (delta - A) / se)``,
        the test's level at the null value itself)."""
        from ..compute.normal_outcome import nct_sf

        rule = self.rule
        low = rule.null_value
        se = self.endpoint.sigma * np.asarray(geo["se_factor"], dtype=float)
        crit = np.asarray(geo["critical"], dtype=float)
        if crit.shape != se.shape:
            crit = np.broadcast_to(crit, se.shape)
        df = np.asarray(geo["df"], dtype=float)
        out = np.full((effects.size, se.size), float(rule.one_sided_alpha))
        away = effects != low
        if away.any():
            rows = effects[away]
            out[away] = nct_sf(crit[None, :], df[None, :], (rows[:, None] - low) / se[None, :])
        return out

    def method(self) -> str:
        if self.monte_carlo:
            return "Monte Carlo over effect and sigma (Rao-Blackwellised)"
        kinds = {type(part).__name__ for _, part in self.prior.parts()}
        t_test = self.endpoint.analysis == "t"
        if kinds <= {"Normal", "PointMass"}:
            base = "non-central t distribution (closed form)" if t_test else "closed form"
        else:
            base = "fixed quadrature over the prior (panel rule on the prior's survival function)"
        if t_test:
            base += "; quadrature over the sample SD where needed (t test)"
        if self.quadrature:
            base += "; deterministic quadrature over the SD prior"
        return base


def _critical_t(rule: Any, df: np.ndarray) -> Any:
    """The rule's t critical values, kept for the last few (significance test, df grid)
    pairs: they depend on nothing else, and a plan asks for the same grid many times."""
    if not isinstance(rule, Significance):
        return rule.critical_t(df)
    df = np.ascontiguousarray(df, dtype=float)
    return _critical_t_cached(rule, df.tobytes())


@lru_cache(maxsize=32)
def _critical_t_cached(rule: Significance, df_bytes: bytes) -> np.ndarray:
    crit = np.asarray(rule.critical_t(np.frombuffer(df_bytes, dtype=float)), dtype=float)
    crit.setflags(write=False)
    return crit
