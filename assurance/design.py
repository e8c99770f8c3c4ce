"""A trial design: endpoint, success rule, design prior and the effects a planner cares about."""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

from ._validation import check_real
from .endpoints.base import Endpoint
from .endpoints.continuous import ContinuousEndpoint
from .errors import AssuranceInputError
from .priors.families import Prior, as_prior
from .rules.significance import Significance

__all__ = ["TrialDesign"]

#: Smallest prior probability of the relevant region for which conditional figures are given.
MIN_RELEVANT_MASS = 1e-6
#: Longest title (characters); the design file's schema has the same bound.
MAX_TITLE = 200


@dataclass(frozen=True)
class TrialDesign:
    """Everything needed to compute power and assurance for one trial.

    Parameters
    ----------
    endpoint
        The outcome and how the trial is laid out (:class:`ContinuousEndpoint`).
    design_prior
        What we believe about the true effect, on the endpoint's analysis scale: the
        difference (treatment minus control, or the mean change for one group), or the log
        of a ratio for ratio endpoints (log hazard ratio, log rate ratio). A number means a
        point mass.
    rule
        When the trial counts as a success: :class:`Significance` (one-sided 0.025 by
        default), :class:`~assurance.PosteriorProbability`, or :class:`~assurance.AllOf`
        several of them.
    assumed_effect
        The single effect classical power is computed at (natural scale: a difference, or a
        ratio for ratio endpoints); defaults to the prior mean (for a ratio endpoint, the
        ratio at the mean of the prior on the log scale).
    relevant_effect
        Smallest effect that matters clinically (natural scale). Enables
        P(success and effect relevant), conditional assurance and P(miss a relevant effect).
    sigma_prior
        Optional prior on the outcome SD (e.g. :class:`ScaledInvChiSquare` from a pilot);
        assurance then integrates over it by Monte Carlo. Classical power keeps
        ``endpoint.sigma``.
    power_effects
        Further effects (natural scale) at which to report classical power.
    analysis_prior
        The prior the final analysis will use for posterior probabilities (on the same scale
        as the design prior). None means flat. It never generates data: the design prior
        does (O'Hagan & Stevens 2001; Wang & Gelfand 2002).
    title
        Name of the trial for the memo.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0), relevant_effect=3.0)
    >>> d.assumed_effect
    4.0
    """

    endpoint: ContinuousEndpoint
    design_prior: Prior
    rule: Any = field(default_factory=Significance)
    assumed_effect: float | None = None
    relevant_effect: float | None = None
    sigma_prior: Prior | None = None
    power_effects: Sequence[float] = ()
    title: str = "Untitled trial"
    analysis_prior: Prior | None = None

    def __post_init__(self) -> None:
        owner = "TrialDesign"
        if not isinstance(self.endpoint, Endpoint):
            raise AssuranceInputError(
                f"The 'endpoint' parameter of {owner} must be an endpoint such as "
                f"ContinuousEndpoint. Got {self.endpoint!r} instead."
            )
        if not hasattr(self.rule, "on_benefit_scale") or not hasattr(self.rule, "threshold"):
            raise AssuranceInputError(
                f"The 'rule' parameter of {owner} must be a success rule such as "
                f"Significance(alpha=0.025) or PosteriorProbability(0.975). "
                f"Got {self.rule!r} instead."
            )
        if self.analysis_prior is not None:
            object.__setattr__(self, "analysis_prior", self.endpoint.check_analysis_prior(
                as_prior(self.analysis_prior, "analysis_prior", owner)))
        if self.endpoint.ratio_scale:  # ratios must be positive before taking logs
            for name, value in (("assumed_effect", self.assumed_effect),
                                ("relevant_effect", self.relevant_effect),
                                ("rule.min_estimate", getattr(self.rule, "min_estimate", None)),
                                ("rule.beyond", getattr(self.rule, "beyond", None)),
                                *(("power_effects", v) for v in np.atleast_1d(
                                    np.asarray(self.power_effects, dtype=object)))):
                if value is not None:
                    check_real(value, name, owner, low=0, low_open=True)
        prior = as_prior(self.design_prior, "design_prior", owner)
        object.__setattr__(self, "design_prior", prior)
        if self.assumed_effect is None:  # the prior mean, on the endpoint's natural scale
            ep = self.endpoint
            why = ""
            try:
                mean = float(prior.mean())
            except AssuranceInputError as exc:
                mean, why = math.nan, f" ({exc})"
            if not math.isfinite(mean):
                raise AssuranceInputError(
                    f"The 'assumed_effect' parameter of {owner} is needed: the design prior "
                    f"{prior.describe()} has no finite mean to default to{why}. Got None."
                )
            object.__setattr__(self, "assumed_effect", float(ep.from_benefit(ep.sign * mean)))
        else:
            object.__setattr__(self, "assumed_effect",
                               check_real(self.assumed_effect, "assumed_effect", owner))
        if self.relevant_effect is not None:
            rel = check_real(self.relevant_effect, "relevant_effect", owner)
            object.__setattr__(self, "relevant_effect", rel)
            mass = self.benefit_prior.prob_above(self.endpoint.to_benefit(rel), inclusive=True)
            if mass < MIN_RELEVANT_MASS:
                word = ">=" if self.endpoint.better == "higher" else "<="
                raise AssuranceInputError(
                    f"The 'relevant_effect' parameter of {owner} must leave a prior "
                    f"probability of at least {MIN_RELEVANT_MASS:g} on effects {word} it; the "
                    f"design prior {prior.describe()} gives {mass:.3g} to effects {word} "
                    f"{rel:g}. Got {rel!r} instead."
                )
        if self.sigma_prior is not None:
            if not isinstance(self.endpoint, ContinuousEndpoint):
                raise AssuranceInputError(
                    f"The 'sigma_prior' parameter of {owner} applies to a ContinuousEndpoint "
                    f"only. Got it with {type(self.endpoint).__name__}."
                )
            sp = as_prior(self.sigma_prior, "sigma_prior", owner)
            lo, _ = sp.support()
            if lo < 0 or float(sp.cdf(0.0)) > 0 or any(loc <= 0 for loc, _ in sp.atoms()):
                raise AssuranceInputError(
                    f"The 'sigma_prior' parameter of {owner} must put all its mass on "
                    f"sigma > 0. Got {sp.describe()} instead."
                )
            object.__setattr__(self, "sigma_prior", sp)
        given = self.power_effects
        if isinstance(given, int | float) and not isinstance(given, bool):
            given = (given,)
        if isinstance(given, str) or not hasattr(given, "__iter__"):
            raise AssuranceInputError(
                f"The 'power_effects' parameter of {owner} must be a list of effects. "
                f"Got {self.power_effects!r} instead."
            )
        effects = tuple(check_real(e, "power_effects", owner) for e in given)
        object.__setattr__(self, "power_effects", effects)
        if not isinstance(self.title, str) or not self.title.strip():
            raise AssuranceInputError(
                f"The 'title' parameter of {owner} must be a non-empty string. "
                f"Got {self.title!r:.80} instead."
            )
        if len(self.title) > MAX_TITLE:
            raise AssuranceInputError(
                f"The 'title' parameter of {owner} must be at most {MAX_TITLE} characters "
                f"(a name for the memo). Got {len(self.title):,} characters, starting "
                f"{self.title[:40]!r}, instead."
            )
        for i, ch in enumerate(self.title):  # C0 and C1 controls, DEL, lone surrogates
            if (ch < " " and ch != "\t") or "\x7f" <= ch <= "\x9f" or "\ud800" <= ch <= "\udfff":
                raise AssuranceInputError(
                    f"The 'title' parameter of {owner} must be plain text without control "
                    f"characters; character {i + 1} is {ascii(ch)}. Got {self.title!r:.80} "
                    "instead."
                )

    # ---- the benefit scale (larger is better) used by all computations ---------------------
    # A TrialDesign is frozen and its parts are immutable, so what is derived from them is
    # computed once per design and kept on the instance (``cached_property`` writes to the
    # instance's ``__dict__``, which the frozen dataclass allows; fields, equality and
    # ``dataclasses.replace`` are unaffected).
    @cached_property
    def benefit_prior(self) -> Prior:
        """The design prior on the benefit scale (larger is better), built once per design."""
        return self.endpoint.benefit_prior(self.design_prior)

    @cached_property
    def benefit_rule(self) -> Any:
        """The success rule on the benefit scale, with the analysis prior attached (built
        once per design)."""
        return self.endpoint.benefit_rule(self.rule, self.analysis_prior)

    def _remember(self, key: Any, compute: Callable[[], Any]) -> Any:
        memo = self.__dict__.setdefault("_memo", {})
        if key not in memo:
            memo[key] = compute()
        return memo[key]

    def ceiling(self) -> float:
        """The value assurance approaches as n grows.

        Notes
        -----
        With ``L`` the lowest effect at which the rule can be passed (0 for superiority,
        ``-margin`` for non-inferiority, or the minimum observed effect), the ceiling is
        ``P(effect > L)`` plus, for a point mass exactly at ``L`` (say "the drug does
        nothing"), its weight times the success probability there in the limit (alpha at
        the null). It is the most assurance can give through true effects beyond ``L``.
        False positives (successes when the true effect is at or below ``L``) can lift
        assurance at a finite n above it, by at most about alpha times the prior
        probability of effects at or just below ``L``, and they fade as n grows;
        :func:`~assurance.solve_sample_size` reports the highest value a size reaches when
        a target lies above the ceiling.

        Examples
        --------
        >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
        >>> d = TrialDesign(ContinuousEndpoint(sigma=1.0), Normal(0.5, 0.5))
        >>> round(d.ceiling(), 4)  # P(effect > 0) = Phi(1)
        0.8413
        """
        return self.success_limit()

    def success_limit(self, *, effect_above: float | None = None,
                      inclusive: bool = False) -> float:
        """Limit as n grows of P(success and effect above a cut), benefit scale.

        Examples
        --------
        >>> from assurance import ContinuousEndpoint, Mixture, Normal, PointMass, TrialDesign
        >>> prior = Mixture([PointMass(0.0), Normal(3.0, 1e-3)], [0.2, 0.8])
        >>> d = TrialDesign(ContinuousEndpoint(sigma=1.0), prior)
        >>> round(d.success_limit(), 4)  # 0.8 + 0.2 * 0.025 (false positives at no effect)
        0.805
        """
        key = ("success_limit", None if effect_above is None else float(effect_above),
               bool(inclusive))
        return self._remember(key, lambda: self._success_limit(effect_above, inclusive))

    def _success_limit(self, effect_above: float | None, inclusive: bool) -> float:
        rule, prior = self.benefit_rule, self.benefit_prior
        lowest = rule.lowest_passable_effect()
        if lowest == -math.inf:
            return 1.0 if effect_above is None else prior.prob_above(effect_above,
                                                                      inclusive=inclusive)
        if effect_above is not None and effect_above > lowest:
            return prior.prob_above(effect_above, inclusive=inclusive)
        total = prior.prob_above(lowest)
        in_region = effect_above is None or lowest > effect_above or (
            inclusive and lowest == effect_above)
        if in_region:
            total += sum(w for loc, w in prior.atoms() if loc == lowest) \
                * rule.limit_success_at(lowest)
        return min(total, 1.0)

    def prob_benefit(self) -> float:
        """Prior probability that the treatment is better at all (effect beyond 0)."""
        return self._remember("prob_benefit", lambda: self.benefit_prior.prob_above(0.0))

    def prob_relevant(self) -> float | None:
        """Prior probability that the effect is at least the relevant value."""
        if self.relevant_effect is None:
            return None
        return self._remember("prob_relevant", lambda: self.benefit_prior.prob_above(
            self.endpoint.to_benefit(self.relevant_effect), inclusive=True))

    def curve_effects(self) -> tuple[float, ...]:
        """Effects (natural scale) for the power curve: assumed, relevant and requested."""
        values = {float(self.assumed_effect), *self.power_effects}
        if self.relevant_effect is not None:
            values.add(float(self.relevant_effect))
        return tuple(sorted(values))

    def to_json(self) -> str:
        """:meth:`to_dict` as JSON text (computed once per design), as results files hold it.

        Examples
        --------
        >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
        >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
        >>> json.loads(d.to_json())["design_prior"]["family"]
        'normal'
        """
        return self._remember("json", lambda: json.dumps(self.to_dict()))

    def to_dict(self) -> dict[str, Any]:
        """Plain description of every input, for results and memos."""
        return {
            "title": self.title,
            "endpoint": self.endpoint.to_dict(),
            "rule": self.rule.to_dict(),
            "analysis_prior": (None if self.analysis_prior is None
                               else self.analysis_prior.to_dict()),
            "design_prior": self.design_prior.to_dict(),
            "sigma_prior": None if self.sigma_prior is None else self.sigma_prior.to_dict(),
            "assumed_effect": self.assumed_effect,
            "relevant_effect": self.relevant_effect,
            "power_effects": list(self.power_effects),
        }
