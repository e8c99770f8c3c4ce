"""Success rules, each reduced to a threshold on the effect estimate.

Every rule here is written on the *benefit scale* (larger is better; an endpoint where lower
is better is flipped before it reaches the rule). A rule turns a standard error and a
critical value into the threshold ``c`` the estimate must exceed; the computations in
:mod:`assurance.compute` turn thresholds into probabilities. Later rules (posterior
probability, go/consider/stop zones) plug in through the same two methods.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_real

__all__ = ["Significance"]


@dataclass(frozen=True)
class Significance:
    """Success iff the one-sided test rejects "no benefit" at level alpha.

    Parameters
    ----------
    alpha
        Significance level. One-sided by default; with ``sided="two"`` the trial is judged
        by a two-sided test at ``alpha`` and only a result in the favourable direction counts,
        so the one-sided level used is ``alpha / 2``.
    sided
        ``"one"`` or ``"two"``.
    margin
        Non-inferiority margin (>= 0) on the effect scale. With ``margin = 0`` the null is
        "no difference" (superiority); with ``margin > 0`` it is "worse by ``margin`` or more".
    min_estimate
        Optionally, the observed effect must also be at least this large (benefit scale) for
        the trial to count as a success.

    Notes
    -----
    With standard error ``se`` and critical value ``z``, success iff
    ``d > max(-margin + z * se, min_estimate)``. As n grows the threshold tends to
    ``max(-margin, min_estimate)``, the lowest true effect at which the rule can be passed;
    the prior probability above it is the ceiling of assurance.

    Examples
    --------
    >>> rule = Significance(alpha=0.05, sided="two")
    >>> round(rule.one_sided_alpha, 3)
    0.025
    >>> round(float(rule.threshold(se=1.0, critical=rule.critical_z())), 4)
    1.96
    """

    alpha: float = 0.025
    sided: Literal["one", "two"] = "one"
    margin: float = 0.0
    min_estimate: float | None = None

    def __post_init__(self) -> None:
        check_choice(self.sided, "sided", "Significance", ["one", "two"])
        high = 0.5 if self.sided == "one" else 1.0
        alpha = check_real(self.alpha, "alpha", "Significance", low=0, high=high, low_open=True,
                           high_open=self.sided == "two")
        object.__setattr__(self, "alpha", alpha)
        object.__setattr__(self, "margin", check_real(self.margin, "margin", "Significance",
                                                      low=0))
        if self.min_estimate is not None:
            object.__setattr__(self, "min_estimate",
                               check_real(self.min_estimate, "min_estimate", "Significance"))

    @property
    def one_sided_alpha(self) -> float:
        """The one-sided level the favourable-direction test uses."""
        return self.alpha if self.sided == "one" else self.alpha / 2

    @property
    def null_value(self) -> float:
        """Effect under the null hypothesis on the benefit scale (``-margin``)."""
        return -self.margin

    def critical_z(self) -> float:
        """Standard-normal critical value ``z_{1 - alpha}``."""
        return float(-special.ndtri(self.one_sided_alpha))

    def critical_t(self, df: np.ndarray) -> np.ndarray:
        """Student t critical values ``t_{1 - alpha, df}``."""
        return -special.stdtrit(df, self.one_sided_alpha)  # t quantile, no scipy.stats import

    def threshold(self, se: Any, critical: Any) -> np.ndarray:
        """Threshold ``c`` the estimate must exceed, for standard error(s) ``se``."""
        c = self.null_value + np.asarray(critical) * np.asarray(se)
        if self.min_estimate is not None:
            c = np.maximum(c, self.min_estimate)
        return c

    def kink_ratio(self, se: Any, critical: Any) -> np.ndarray | None:
        """Multiplier ``r`` of ``se`` at which ``-margin + critical * se * r`` meets the
        minimum observed effect (where the threshold bends), or None without one."""
        if self.min_estimate is None:
            return None
        with np.errstate(divide="ignore", invalid="ignore"):
            return (self.min_estimate - self.null_value) / (np.asarray(critical)
                                                            * np.asarray(se))

    def lowest_passable_effect(self) -> float:
        """Limit of the threshold as n grows: the rule's region is ``effect > this``."""
        floor = -math.inf if self.min_estimate is None else self.min_estimate
        return max(self.null_value, floor)

    def limit_success_at(self, effect: float) -> float:
        """Probability of success at a true ``effect`` as n grows without bound.

        1 beyond :meth:`lowest_passable_effect`, 0 below it; exactly at it, the level
        ``alpha`` when it is the null value (the test keeps its size at every n) and 1/2
        when it is the minimum observed effect (the estimate falls either side of it).
        """
        lowest = self.lowest_passable_effect()
        if effect > lowest:
            return 1.0
        if effect < lowest:
            return 0.0
        return self.one_sided_alpha if lowest == self.null_value else 0.5

    def on_benefit_scale(self, endpoint: Any, analysis_prior: Any = None) -> Significance:
        """The rule with its minimum observed effect and margin on the benefit scale.

        A ratio endpoint states a non-inferiority margin as a ratio (say 1.3 for a hazard
        ratio, lower better), which becomes ``|log 1.3|``. The analysis prior plays no part
        in a significance test.
        """
        margin = self.margin
        if getattr(endpoint, "ratio_scale", False) and margin:
            margin = abs(math.log(margin))
        min_estimate = (None if self.min_estimate is None
                        else float(endpoint.to_benefit(self.min_estimate)))
        return Significance(self.alpha, self.sided, margin, min_estimate)

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "significance", "alpha": self.alpha, "sided": self.sided,
                "margin": self.margin, "min_estimate": self.min_estimate}

    def flipped(self) -> Significance:
        """The same rule for an endpoint read in the opposite direction."""
        return Significance(self.alpha, self.sided, self.margin,
                            None if self.min_estimate is None else -self.min_estimate)

    def describe(self) -> str:
        """Plain description for memos."""
        kind = "non-inferiority" if self.margin > 0 else "superiority"
        text = (f"one-sided test at {self.one_sided_alpha:g}"
                + (f" (two-sided {self.alpha:g})" if self.sided == "two" else "")
                + f", {kind}")
        if self.margin > 0:
            text += f" with margin {self.margin:g}"
        if self.min_estimate is not None:
            text += f"; observed effect must also reach {self.min_estimate:g}"
        return text
