"""What every endpoint provides to the planning machinery.

An endpoint knows (1) how a total sample size splits into arms, (2) how its natural effect
(a difference, a ratio) maps to the *benefit scale* on which all computations work (larger
is better: a difference times +-1, or +-log of a ratio), and (3) how to compute the
probability of success for a prior and a rule, through a :class:`SuccessCalculator` that
can hold fixed Monte Carlo draws so that every sample size sees the same draws.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..priors.families import Prior
from ..rules.significance import Significance

__all__ = ["Endpoint", "SuccessCalculator", "TwoArmSizing"]


class TwoArmSizing:
    """Shared sizing rules for designs with a treatment arm and, optionally, a control arm.

    Subclasses set ``layout`` (``"two_arm"`` or ``"single_arm"``) and ``allocation``
    (treatment patients per control patient).
    """

    layout: str
    allocation: float

    @property
    def arms(self) -> int:
        """Number of arms (1 or 2)."""
        return 2 if self.layout == "two_arm" else 1

    def arm_sizes(self, n_total: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Split total sizes into (treatment, control) by the allocation ratio ``r``.

        Control gets the largest ``m`` with ``m + ceil(r m) <= n`` and treatment the rest, so
        a total produced by :meth:`sizes_from_control` splits back into the same arms (the
        sample-size solver and the grid evaluation always agree). Each arm keeps at least
        one patient. For one group the whole sample is "treatment" and control is 0.
        """
        n = np.asarray(n_total, dtype=np.int64)
        if self.layout == "single_arm":
            return n.copy(), np.zeros_like(n)
        r = self.allocation
        if r == 1.0:  # m + ceil(m) = 2 m <= n: the largest fit is n // 2 (the usual case)
            control = np.minimum(np.maximum(n // 2, 1), np.maximum(n - 1, 1))
            return n - control, control
        m = np.floor(n / (1 + r)).astype(np.int64) + 2
        for _ in range(6):  # m + ceil(r m) is increasing in m: step down to the largest fit
            too_big = m + np.ceil(r * m - 1e-9) > n
            if not too_big.any():
                break
            m = np.where(too_big, m - 1, m)
        control = np.clip(m, 1, np.maximum(n - 1, 1))
        return n - control, control

    def sizes_from_control(self, n_control: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(treatment, control) when the control arm has ``n_control`` patients.

        Treatment gets ``ceil(allocation * n_control)`` (never fewer than the ratio asks);
        for one group the argument is the whole sample.
        """
        n_c = np.asarray(n_control, dtype=int)
        if self.layout == "single_arm":
            return n_c.copy(), np.zeros_like(n_c)
        treat = np.ceil(self.allocation * n_c - 1e-9).astype(int)
        return np.maximum(treat, 1), n_c

    def layout_text(self) -> str:
        if self.layout == "two_arm":
            return f"two parallel arms, {self.allocation:g}:1 (treatment:control)"
        return "single arm against a fixed reference"


class SuccessCalculator(ABC):
    """Success probabilities of one (endpoint, design prior, rule), for any arm sizes.

    Everything is on the benefit scale. ``cuts`` are :class:`~assurance.compute.
    normal_outcome.Cut` regions of the true effect for the joint probabilities.
    """

    #: True when the figures carry Monte Carlo error (``*_mcse`` companions).
    monte_carlo: bool = False

    @abstractmethod
    def success(self, n_t: np.ndarray, n_c: np.ndarray, cuts: Sequence[Any]) -> Any:
        """:class:`~assurance.compute.normal_outcome.SuccessProbabilities` per size."""

    @abstractmethod
    def power(self, effect_benefit: float, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
        """Classical power at one true effect (benefit scale), planning nuisance values."""

    def method(self) -> str:
        """How the figures are computed, for results and memos."""
        return ""


class Endpoint(TwoArmSizing, ABC):
    """Base class of all endpoints."""

    better: str

    #: name of the effect in plain words, e.g. "difference in means"
    effect_name: str = "effect"
    #: whether the effect is a ratio (benefit scale uses its logarithm)
    ratio_scale: bool = False

    @property
    def sign(self) -> float:
        """+1 if higher is better, -1 if lower is better."""
        return 1.0 if self.better == "higher" else -1.0

    @property
    @abstractmethod
    def smallest_total(self) -> int:
        """Fewest patients (all arms) for which the analysis is defined."""

    def to_benefit(self, effect: Any) -> Any:
        """Natural-scale effect(s) to the benefit scale (larger is better)."""
        if effect is None:
            return None
        x = np.log(np.asarray(effect, dtype=float)) if self.ratio_scale else \
            np.asarray(effect, dtype=float)
        out = self.sign * x
        return out if np.ndim(effect) else float(out)

    def from_benefit(self, value: Any) -> Any:
        """Benefit-scale value(s) back to the natural scale."""
        x = self.sign * np.asarray(value, dtype=float)
        out = np.exp(x) if self.ratio_scale else x
        return out if np.ndim(value) else float(out)

    def benefit_prior(self, design_prior: Prior) -> Prior:
        """The design prior on the benefit scale.

        For a difference the prior is on the natural scale; for a ratio it is on the log
        ratio (a normal prior on the log hazard ratio, say). Either way the benefit scale is
        that scale times the sign.
        """
        return design_prior if self.sign > 0 else design_prior.negated()

    def benefit_rule(self, rule: Any, analysis_prior: Prior | None = None) -> Any:
        """The rule on the benefit scale (see each rule's ``on_benefit_scale``).

        A ratio endpoint states a non-inferiority margin as a ratio (say 1.3 for a hazard
        ratio, lower better), which becomes ``|log 1.3|`` on the benefit scale.
        """
        return rule.on_benefit_scale(self, analysis_prior)

    def check_analysis_prior(self, prior: Prior) -> Prior:
        """Accept an analysis prior this endpoint can use for posterior probabilities.

        Under the normal approximation: a Normal, or a mixture of Normal and PointMass parts.
        """
        from ..rules.posterior import _check_analysis_prior

        return _check_analysis_prior(prior, "TrialDesign")

    @abstractmethod
    def calculator(self, prior_benefit: Prior, rule_benefit: Significance, *, draws: int,
                   seed: int | None, nuisance: Prior | None = None) -> SuccessCalculator:
        """A :class:`SuccessCalculator` for this endpoint."""

    def extra_coords(self, n_t: np.ndarray, n_c: np.ndarray) -> dict[str, np.ndarray]:
        """Further per-n coordinates for results (expected events, say)."""
        return {}

    @abstractmethod
    def describe(self) -> str:
        """Plain description for memos."""

    @abstractmethod
    def to_dict(self) -> dict[str, Any]:
        """Plain description of every parameter, for results files."""
