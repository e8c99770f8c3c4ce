"""Continuous endpoint: difference in means (two arms) or a mean change (one group).

The endpoint knows how a total sample size splits into arms, the standard error factor
``k(n)`` with ``se = sigma * k(n)``, and the degrees of freedom of the t test. It also knows
which direction of the effect is good, so everything downstream can work on a "benefit"
scale where larger is better.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from .._validation import check_choice, check_real

__all__ = ["ContinuousEndpoint"]

Layout = Literal["two_arm", "single_arm"]


@dataclass(frozen=True)
class ContinuousEndpoint:
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

    def __post_init__(self) -> None:
        owner = "ContinuousEndpoint"
        object.__setattr__(self, "sigma", check_real(self.sigma, "sigma", owner, low=0,
                                                     low_open=True))
        check_choice(self.layout, "layout", owner, ["two_arm", "single_arm"])
        object.__setattr__(self, "allocation", check_real(self.allocation, "allocation", owner,
                                                          low=0, low_open=True))
        check_choice(self.analysis, "analysis", owner, ["t", "z"])
        check_choice(self.better, "better", owner, ["higher", "lower"])

    # ---- sizes ------------------------------------------------------------------------------
    @property
    def arms(self) -> int:
        return 2 if self.layout == "two_arm" else 1

    @property
    def smallest_total(self) -> int:
        """Fewest patients for which the analysis is defined (a t test needs df >= 1)."""
        if self.layout == "single_arm":
            return 2 if self.analysis == "t" else 1
        return 3 if self.analysis == "t" else 2

    def arm_sizes(self, n_total: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Split total sizes into (treatment, control) by the allocation ratio.

        Treatment gets ``round(n * r / (1 + r))``, kept between 1 and ``n - 1``; for one
        group the whole sample is "treatment" and control is 0.
        """
        n = np.asarray(n_total, dtype=int)
        if self.layout == "single_arm":
            return n.copy(), np.zeros_like(n)
        r = self.allocation
        treat = np.clip(np.floor(n * r / (1 + r) + 0.5).astype(int), 1, np.maximum(n - 1, 1))
        return treat, n - treat

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

    # ---- direction -------------------------------------------------------------------------
    @property
    def sign(self) -> float:
        """+1 if higher is better, -1 if lower is better."""
        return 1.0 if self.better == "higher" else -1.0

    def to_benefit(self, effect: Any) -> Any:
        """Natural-scale effect(s) to the benefit scale (larger is better)."""
        if effect is None:
            return None
        return self.sign * np.asarray(effect, dtype=float) if np.ndim(effect) else \
            self.sign * float(effect)

    def describe(self) -> str:
        """Plain description for memos."""
        if self.layout == "two_arm":
            shape = f"two parallel arms, {self.allocation:g}:1 (treatment:control)"
        else:
            shape = "single arm / paired differences against a fixed reference"
        test = "t test (sigma estimated)" if self.analysis == "t" else "z test (sigma known)"
        return (f"continuous outcome, SD {self.sigma:g}; {shape}; {test}; "
                f"{self.better} values are better")

