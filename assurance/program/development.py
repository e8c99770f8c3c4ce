"""A development program: a phase 2 trial, then a phase 3 trial that runs only after a "go".

Both trials see the same true effect ``delta`` (on the phase 3 design's analysis scale: a
difference, or the log of a ratio), drawn once from the phase 3 design prior. Phase 2 may
measure another endpoint (a surrogate) whose true effect is
``delta2 = intercept + slope * delta + e`` with ``e ~ N(0, sd^2)`` (on the phase 2 design's
analysis scale); without a surrogate ``delta2 = delta``. Given the true effects, the two
trials use different patients and so are independent. Hence, with ``g(delta)`` the chance of
a go and ``s(delta)`` the chance that phase 3 succeeds at the true effect,

* ``P(go) = E[g(delta)]``, the program's probability of success ``PoS = E[g(delta) s(delta)]``,
* ``P(phase 3 success | go) = PoS / P(go)``,
* ``P(go and the drug works) = E[g(delta) 1{delta better than no effect}]``,
* false-go rate ``P(go | no benefit) = E[g(delta) 1{no benefit}] / P(no benefit)``,
* expected patients ``n2 + P(go) n3`` and expected months ``m2 + P(go) (gap + m3)`` (a
  phase's months fixed, or ``n / recruitment + follow-up`` so that they follow its size),

the expectations taken over the design prior by Gauss-Legendre panels between the prior's
quantiles (and over the surrogate's noise by Gauss-Hermite nodes). ``g`` and ``s`` come from
each design's own power calculator (exact tests and t analyses included).

When phase 3 is re-planned from the phase 2 result, its size depends on the observed phase 2
estimate ``d2``: the estimate is turned into a design prior for phase 3 with the discounts of
:func:`assurance.prior_from_estimate` (shrinkage, power weight, robust mixture; Kirby et al.
2012) and phase 3 gets the smallest size reaching an assurance target under that prior. The
sizes are read from a table over ``d2`` (a step function), and the program's figures then
integrate over ``d2 | delta ~ N(mean, se2^2 + sd^2)`` bin by bin (phase 2 must have a normal
estimate with known SD: a continuous endpoint with a z analysis).

:func:`simulate_program` simulates whole programs (true effect, phase 2 data, the go
decision, the phase 3 size and data; each trial's data as its endpoint produces them:
normal estimates, binomial counts, patient-level event times with the log-rank test,
patient-level counts) as an independent check of these figures.

References
----------
O'Hagan A, Stevens JW, Campbell MJ (2005). Assurance in clinical trial design.
Pharmaceutical Statistics 4:187-201.
Kirby S, Burke J, Chuang-Stein C, Sin C (2012). Discounting phase 2 results when planning
phase 3 clinical trials. Pharmaceutical Statistics 11:373-385.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from scipy import special

from .._validation import check_int, check_real
from ..design import TrialDesign
from ..endpoints.continuous import ContinuousEndpoint
from ..errors import AssuranceInputError
from ..priors.evidence import DiscountedEstimate, Estimate
from ..priors.families import PointMass, Prior
from ..rules.posterior import MinimumEstimate

__all__ = ["CHECK_LIMIT", "Surrogate", "Replanning", "ProgramDesign", "ProgramResult",
           "program_result", "program_grid", "prior_nodes", "replan_table",
           "simulate_program", "simulation_gap", "effect_curves"]

#: Gauss-Legendre nodes per panel of the prior quadrature
_PANEL_NODES = 16
#: Gauss-Hermite nodes (probabilists') over the surrogate's noise
_HERMITE_NODES = 24
#: the seed used when none is given (the same as the single-trial plans')
DEFAULT_SEED = 20260101
#: a simulated figure checks a computed one when within this many Monte Carlo standard
#: errors of it (a false alarm about once in 16,000 checks of one figure)
CHECK_LIMIT = 4.0


# ------------------------------------------------------------------------------------------
# the parts of a program
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Surrogate:
    """How the phase 2 true effect follows the phase 3 true effect.

    ``delta2 = intercept + slope * delta3 + e``, ``e ~ N(0, sd^2)``, each on its design's
    analysis scale (a difference, or the log of a ratio). The default is the same endpoint:
    ``delta2 = delta3``.

    Examples
    --------
    >>> Surrogate(0.0, 0.5, 0.1).mean_effect(2.0)
    1.0
    """

    intercept: float = 0.0
    slope: float = 1.0
    sd: float = 0.0

    def __post_init__(self) -> None:
        owner = "Surrogate"
        object.__setattr__(self, "intercept", check_real(self.intercept, "intercept", owner))
        slope = check_real(self.slope, "slope", owner)
        if slope == 0:
            raise AssuranceInputError(
                "The 'slope' parameter of Surrogate must be a number other than 0 (with slope "
                "0 the phase 2 effect says nothing about phase 3). Got 0 instead.")
        object.__setattr__(self, "slope", slope)
        object.__setattr__(self, "sd", check_real(self.sd, "sd", owner, low=0))

    @property
    def identity(self) -> bool:
        """Whether phase 2 measures the phase 3 effect itself."""
        return self.intercept == 0 and self.slope == 1 and self.sd == 0

    def mean_effect(self, delta3: Any) -> Any:
        """Mean phase 2 effect at phase 3 effect(s) ``delta3``."""
        return self.intercept + self.slope * delta3

    def describe(self) -> str:
        """Plain words."""
        if self.identity:
            return "phase 2 measures the phase 3 effect itself"
        noise = "" if self.sd == 0 else f", plus normal noise with SD {self.sd:g}"
        line = f"{self.slope:g} x phase 3 effect"
        if self.intercept != 0:
            sign = "-" if self.intercept < 0 else "+"
            line = f"{line} {sign} {abs(self.intercept):g}"
        return f"phase 2 effect = {line}{noise} (each on its analysis scale)"

    def to_dict(self) -> dict[str, float]:
        return {"intercept": self.intercept, "slope": self.slope, "sd": self.sd}


@dataclass(frozen=True)
class Replanning:
    """Phase 3 sized from the observed phase 2 result.

    The phase 2 estimate, carried to the phase 3 scale through the :class:`Surrogate`
    (``(d2 - intercept) / slope``, standard error ``sqrt(se2^2 + sd^2) / |slope|``), becomes
    the phase 3 design prior by :class:`~assurance.priors.evidence.DiscountedEstimate`;
    phase 3 gets the smallest size whose assurance under it reaches ``target``, kept within
    ``[min_n, max_n]`` (``max_n`` when the target is out of reach).

    Examples
    --------
    >>> Replanning(0.8, 100, 1000, shrinkage=0.9).steps
    61
    """

    target: float
    min_n: int
    max_n: int
    shrinkage: float = 1.0
    power_weight: float = 1.0
    robust_weight: float = 1.0
    vague_sd: float | None = None
    vague_mean: float | None = None
    steps: int = 61
    span: float = 6.0

    def __post_init__(self) -> None:
        owner = "Replanning"
        object.__setattr__(self, "target", check_real(self.target, "target", owner, low=0,
                                                      high=1, low_open=True, high_open=True))
        object.__setattr__(self, "min_n", check_int(self.min_n, "min_n", owner, low=1))
        object.__setattr__(self, "max_n", check_int(self.max_n, "max_n", owner,
                                                    low=self.min_n, high=10**8))
        object.__setattr__(self, "steps", check_int(self.steps, "steps", owner, low=2,
                                                    high=1000))
        object.__setattr__(self, "span", check_real(self.span, "span", owner, low=0,
                                                    high=20, low_open=True))
        # the discounts are checked by prior_from_estimate once, here
        self.recipe(0.0, 1.0).prior()

    def recipe(self, estimate: float, se: float) -> DiscountedEstimate:
        """The discounting recipe applied to one observed estimate (phase 3 scale)."""
        return DiscountedEstimate(Estimate(estimate, se, "phase 2 estimate"),
                                  power_weight=self.power_weight, shrinkage=self.shrinkage,
                                  robust_weight=self.robust_weight, vague_sd=self.vague_sd,
                                  vague_mean=self.vague_mean)

    def describe(self) -> str:
        parts = [f"assurance target {self.target:.0%}", f"between {self.min_n:,} and "
                 f"{self.max_n:,} patients"]
        if self.shrinkage != 1:
            parts.append(f"phase 2 estimate shrunk by {self.shrinkage:g}")
        if self.power_weight != 1:
            parts.append(f"counted as {self.power_weight:.0%} of its information")
        if self.robust_weight != 1:
            parts.append(f"{1 - self.robust_weight:.0%} of the prior on a vague part "
                         f"(SD {self.vague_sd:g})")
        return "phase 3 re-planned from the phase 2 estimate: " + ", ".join(parts)

    def to_dict(self) -> dict[str, Any]:
        return {"target": self.target, "min_n": self.min_n, "max_n": self.max_n,
                "shrinkage": self.shrinkage, "power_weight": self.power_weight,
                "robust_weight": self.robust_weight, "vague_sd": self.vague_sd,
                "vague_mean": self.vague_mean, "steps": self.steps, "span": self.span}


@dataclass(frozen=True)
class ProgramDesign:
    """A phase 2 trial, its go rule, and the phase 3 trial run after a go.

    Parameters
    ----------
    phase2
        The phase 2 trial; its success rule is the go rule (unless ``go_threshold`` is
        given). Its design prior is not used: the true effect comes from ``phase3``'s.
    phase3
        The phase 3 trial; its design prior is the prior of the true effect both trials see.
    n2, n3
        Total patients in phase 2 and (when not re-planned) in phase 3.
    go_threshold
        Go when the phase 2 estimate is at least this (natural scale of phase 2: a
        difference, or a ratio; "at least" means "at most" when lower is better), in place
        of phase 2's own rule.
    surrogate
        How the phase 2 effect follows the phase 3 effect (:class:`Surrogate`).
    months_phase2, months_gap, months_phase3
        Durations in months for the expected duration: phase 2, the time from its result
        to the start of phase 3, and phase 3 (fixed, whatever the size).
    replan
        Size phase 3 from the observed phase 2 result (:class:`Replanning`), or None.
    title
        Name of the program.
    recruitment_phase2, recruitment_phase3
        Patients recruited per month (> 0), or None. With it the phase lasts ``n /
        recruitment + follow_up`` months, so its duration follows its size (the phase 2
        size of a grid, the re-planned phase 3 size); ``months_phase2`` /
        ``months_phase3`` must then be 0.
    follow_up_phase2, follow_up_phase3
        Months from the last patient's entry to the phase's result (with a recruitment
        rate only).

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> p2 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0), rule=asr.Significance(alpha=0.1))
    >>> program = ProgramDesign(p2, p3, n2=100, n3=400)
    >>> r = program_result(program)
    >>> 0 < r.pos < r.p_go < 1
    True
    """

    phase2: TrialDesign
    phase3: TrialDesign
    n2: int
    n3: int
    go_threshold: float | None = None
    surrogate: Surrogate = field(default_factory=Surrogate)
    months_phase2: float = 0.0
    months_gap: float = 0.0
    months_phase3: float = 0.0
    replan: Replanning | None = None
    title: str = "Untitled program"
    recruitment_phase2: float | None = None
    follow_up_phase2: float = 0.0
    recruitment_phase3: float | None = None
    follow_up_phase3: float = 0.0

    def __post_init__(self) -> None:
        owner = "ProgramDesign"
        for name in ("phase2", "phase3"):
            if not isinstance(getattr(self, name), TrialDesign):
                raise AssuranceInputError(
                    f"The '{name}' parameter of {owner} must be a TrialDesign. Got "
                    f"{getattr(self, name)!r:.80} instead.")
        for name in ("n2", "n3"):
            design = self.phase2 if name == "n2" else self.phase3
            object.__setattr__(self, name, check_int(
                getattr(self, name), name, owner, low=design.endpoint.smallest_total,
                high=10**8))
        if self.go_threshold is not None:
            low = 0 if self.phase2.endpoint.ratio_scale else None
            object.__setattr__(self, "go_threshold", check_real(
                self.go_threshold, "go_threshold", owner, low=low, low_open=True))
        if not isinstance(self.surrogate, Surrogate):
            raise AssuranceInputError(
                f"The 'surrogate' parameter of {owner} must be a Surrogate. Got "
                f"{self.surrogate!r:.80} instead.")
        for name in ("months_phase2", "months_gap", "months_phase3"):
            object.__setattr__(self, name, check_real(getattr(self, name), name, owner,
                                                      low=0))
        for phase in ("2", "3"):
            rate_name, follow_name = f"recruitment_phase{phase}", f"follow_up_phase{phase}"
            rate = getattr(self, rate_name)
            follow = check_real(getattr(self, follow_name), follow_name, owner, low=0)
            object.__setattr__(self, follow_name, follow)
            if rate is None:
                if follow > 0:
                    raise AssuranceInputError(
                        f"The '{follow_name}' parameter of {owner} needs '{rate_name}' (the "
                        f"follow-up is added to the recruitment time). Got {follow_name}="
                        f"{follow:g} without a recruitment rate.")
                continue
            rate = check_real(rate, rate_name, owner, low=0, low_open=True, high=1e6)
            object.__setattr__(self, rate_name, rate)
            if getattr(self, f"months_phase{phase}") > 0:
                raise AssuranceInputError(
                    f"The 'months_phase{phase}' parameter of {owner} must be 0 when "
                    f"'{rate_name}' is given (the phase then lasts n / {rate_name} + "
                    f"{follow_name} months). Got months_phase{phase}="
                    f"{getattr(self, f'months_phase{phase}'):g}.")
        if self.replan is not None:
            if not isinstance(self.replan, Replanning):
                raise AssuranceInputError(
                    f"The 'replan' parameter of {owner} must be a Replanning or None. Got "
                    f"{self.replan!r:.80} instead.")
            _normal_phase2(self.phase2, "replan", owner)
            if self.replan.min_n < self.phase3.endpoint.smallest_total:
                raise AssuranceInputError(
                    f"The 'replan' parameter of {owner} must allow at least "
                    f"{self.phase3.endpoint.smallest_total} phase 3 patients (its min_n). "
                    f"Got min_n={self.replan.min_n} instead.")
        if not isinstance(self.title, str) or not self.title.strip():
            raise AssuranceInputError(
                f"The 'title' parameter of {owner} must be a non-empty string. Got "
                f"{self.title!r:.80} instead.")

    def phase2_months(self, n2: Any) -> Any:
        """Months of phase 2 with ``n2`` patients (fixed, or recruitment plus follow-up)."""
        if self.recruitment_phase2 is None:
            return self.months_phase2 + 0.0 * np.asarray(n2, dtype=float)
        return np.asarray(n2, dtype=float) / self.recruitment_phase2 + self.follow_up_phase2

    def phase3_months(self, n3: Any) -> Any:
        """Months of phase 3 with ``n3`` patients (fixed, or recruitment plus follow-up).

        Examples
        --------
        >>> import assurance as asr
        >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
        >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
        >>> program = ProgramDesign(p3, p3, n2=100, n3=400, recruitment_phase3=20.0,
        ...                         follow_up_phase3=6.0)
        >>> float(program.phase3_months(400))
        26.0
        """
        if self.recruitment_phase3 is None:
            return self.months_phase3 + 0.0 * np.asarray(n3, dtype=float)
        return np.asarray(n3, dtype=float) / self.recruitment_phase3 + self.follow_up_phase3

    @property
    def has_durations(self) -> bool:
        """Whether any duration was given (else the expected duration is not reported)."""
        return bool(self.months_phase2 or self.months_gap or self.months_phase3
                    or self.recruitment_phase2 is not None
                    or self.recruitment_phase3 is not None)

    @property
    def prior(self) -> Prior:
        """The prior of the true effect (phase 3 design prior, its analysis scale)."""
        return self.phase3.design_prior

    def go_design(self, n2: int | None = None, go_threshold: float | None = None) -> TrialDesign:
        """The phase 2 design with the go rule in force."""
        threshold = self.go_threshold if go_threshold is None else go_threshold
        if threshold is None:
            return self.phase2
        design = replace(self.phase2, rule=MinimumEstimate(float(threshold)))
        try:
            _calc(design)
        except AssuranceInputError as exc:
            raise AssuranceInputError(
                f"The 'go_threshold' parameter of ProgramDesign cannot be used with this phase "
                f"2 endpoint ({exc}). Leave the go threshold out and let phase 2's success "
                f"rule decide. Got {threshold!r}.") from None
        return design

    def go_rule_text(self, go_threshold: float | None = None) -> str:
        """The go rule in plain words."""
        threshold = self.go_threshold if go_threshold is None else go_threshold
        if threshold is None:
            return "phase 2 meets its success rule: " + _describe_rule(self.phase2.rule)
        word = "at most" if self.phase2.endpoint.better == "lower" else "at least"
        return f"phase 2 estimate {word} {threshold:g}"


def _describe_rule(rule: Any) -> str:
    describe = getattr(rule, "describe", None)
    return str(describe()) if callable(describe) else type(rule).__name__


def _normal_phase2(design: TrialDesign, name: str, owner: str) -> None:
    ep = design.endpoint
    if not (isinstance(ep, ContinuousEndpoint) and ep.analysis == "z"):
        raise AssuranceInputError(
            f"The '{name}' parameter of {owner} needs a phase 2 estimate that is normal with a "
            "known standard error: a continuous endpoint with analysis 'z'. Got a phase 2 "
            f"endpoint: {ep.describe()}.")


# ------------------------------------------------------------------------------------------
# quadrature over the prior
# ------------------------------------------------------------------------------------------
def prior_nodes(prior: Prior, breaks: Sequence[float] = ()) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights with ``sum(w * f(x))`` close to ``E[f(delta)]`` under ``prior``.

    Point masses are nodes of their own; each continuous part is split at its quantiles
    (:func:`assurance.compute.prior_predictive.prior_edges`, 1e-15 to 1 - 1e-15) and at
    ``breaks`` (where the integrand jumps: no effect, the relevant effect), with
    Gauss-Legendre nodes in each panel.

    Examples
    --------
    >>> from assurance import Normal
    >>> x, w = prior_nodes(Normal(1.0, 2.0), breaks=[0.0])
    >>> round(float(w.sum()), 10), round(float((w * x).sum()), 8)
    (1.0, 1.0)
    """
    from ..compute.prior_predictive import prior_edges

    t, v = special.roots_legendre(_PANEL_NODES)
    xs, ws = [], []
    for weight, part in prior.parts():
        if isinstance(part, PointMass) or part.atoms():
            for loc, mass in part.atoms():
                xs.append(np.array([loc]))
                ws.append(np.array([weight * mass]))
            continue
        edges = prior_edges(part)
        extra = [b for b in breaks if edges[0] < b < edges[-1]]
        edges = np.unique(np.concatenate([edges, np.asarray(extra, dtype=float)]))
        left, right = edges[:-1], edges[1:]
        half, mid = 0.5 * (right - left), 0.5 * (right + left)
        x = (mid[:, None] + half[:, None] * t).ravel()
        w = (half[:, None] * v).ravel() * np.asarray(part.pdf(x), dtype=float)
        total = w.sum()
        if not total > 0:
            raise AssuranceInputError(
                f"The prior {part.describe()} could not be integrated (no mass between its "
                "quantiles).")
        xs.append(x)
        ws.append(weight * w / total)  # the mass beyond the 1e-15 quantiles is negligible
    return np.concatenate(xs), np.concatenate(ws)


def _hermite() -> tuple[np.ndarray, np.ndarray]:
    z, w = special.roots_hermitenorm(_HERMITE_NODES)
    return z, w / w.sum()


# ------------------------------------------------------------------------------------------
# per-effect probabilities from the designs' own calculators
# ------------------------------------------------------------------------------------------
def _calc(design: TrialDesign) -> Any:
    from ..planning import DEFAULT_DRAWS, _calculator

    return _calculator(design, DEFAULT_DRAWS, DEFAULT_SEED)


#: prior mass allowed on effects an endpoint cannot have (a rate outside [0, 1], say)
MAX_OUTSIDE = 1e-6


def _power_matrix(design: TrialDesign, benefit: np.ndarray, sizes: Sequence[int],
                  outside: list[np.ndarray] | None = None) -> np.ndarray:
    """Power at each benefit-scale effect (rows) and total size (columns).

    Effects the endpoint cannot have (far in a prior's tail: a rate outside [0, 1]) take
    the power of the nearest effect it can have; their mask is appended to ``outside``
    so the caller can check that the prior puts next to no mass there.
    """
    calc = _calc(design)
    n_t, n_c = design.endpoint.arm_sizes(np.asarray(sizes, dtype=np.int64))
    values, inverse = np.unique(np.asarray(benefit, dtype=float).ravel(), return_inverse=True)
    failed = np.zeros(values.size, dtype=bool)
    many = getattr(calc.engine, "powers", None)
    table = None
    if many is not None:
        try:
            table = np.asarray(many(values, n_t, n_c), dtype=float).reshape(values.size, -1)
        except AssuranceInputError:
            table = None
    if table is None:
        rows = []
        for k, e in enumerate(values):
            try:
                rows.append(np.asarray(calc.engine.power(float(e), n_t, n_c), dtype=float))
            except AssuranceInputError:
                failed[k] = True
                rows.append(np.full(len(sizes), np.nan))
        if failed.all():
            raise AssuranceInputError(
                f"The power of {design.title!r} cannot be computed at any of the true effects "
                "the design prior (through the surrogate line) gives; check both.")
        table = np.vstack(rows)
        if failed.any():
            good = np.flatnonzero(~failed)
            nearest = good[np.clip(np.searchsorted(good, np.flatnonzero(failed)), 0,
                                   good.size - 1)]
            low = np.flatnonzero(failed) < good[0]
            nearest = np.where(low, good[0], nearest)
            table[failed] = table[nearest]
    if not np.isfinite(table).all():
        raise AssuranceInputError(
            f"The power of {design.title!r} is not finite at some true effects; check the "
            "design's parameters.")
    if outside is not None:
        outside.append(failed[inverse.ravel()].reshape(np.shape(benefit)).astype(float))
    return np.clip(table[inverse.ravel()], 0.0, 1.0).reshape(*np.shape(benefit), len(sizes))


def _go_given_effect(program: ProgramDesign, x3: np.ndarray, n2: int,
                     go_threshold: float | None,
                     outside: list[np.ndarray] | None = None) -> np.ndarray:
    """P(go | phase 3 effect) at each node ``x3`` (analysis scale)."""
    design = program.go_design(n2, go_threshold)
    ep = design.endpoint
    sur = program.surrogate
    mean2 = sur.mean_effect(x3)
    if sur.sd == 0:
        return _power_matrix(design, ep.sign * mean2, [n2], outside)[:, 0]
    z, w = _hermite()
    effects = ep.sign * (mean2[:, None] + sur.sd * z[None, :])
    found: list[np.ndarray] = []
    go = _power_matrix(design, effects, [n2], found)[..., 0] @ w
    if outside is not None:
        outside.append(found[0] @ w)
    return go


def _success_given_effect(program: ProgramDesign, x3: np.ndarray,
                          sizes: Sequence[int],
                          outside: list[np.ndarray] | None = None) -> np.ndarray:
    design = program.phase3
    return _power_matrix(design, design.endpoint.sign * x3, sizes, outside)


def _check_outside(outside: list[np.ndarray], w: np.ndarray, program: ProgramDesign) -> None:
    if not outside:
        return
    mass = float(w @ np.max(np.vstack(outside), axis=0))
    if mass > MAX_OUTSIDE:
        raise AssuranceInputError(
            f"The program {program.title!r} gives true effects an endpoint cannot have (a "
            f"response rate outside [0, 1], say) with prior probability {mass:.3g} (at most "
            f"{MAX_OUTSIDE:g} is allowed): narrow the phase 3 design prior or change the "
            "surrogate line (intercept, slope, sd).")


def _breaks(program: ProgramDesign) -> list[float]:
    """No effect and the relevant effect, on the phase 3 analysis scale."""
    ep = program.phase3.endpoint
    out = [0.0]
    if program.phase3.relevant_effect is not None:
        out.append(float(ep.sign * ep.to_benefit(program.phase3.relevant_effect)))
    return out


# ------------------------------------------------------------------------------------------
# the result
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ProgramResult:
    """The program's probabilities, patients and duration (semi-analytic).

    Attributes
    ----------
    p_go
        P(go after phase 2).
    p_success_given_go
        P(phase 3 succeeds | go) (0 when a go is impossible).
    pos
        The program's probability of success: P(go and phase 3 succeeds).
    p_go_and_works
        P(go and the true effect is better than no effect).
    p_go_and_relevant
        P(go and the true effect is at least the relevant effect), or None without one.
    false_go
        P(go | no benefit): the chance of a go when the drug does not work (0 when the prior
        leaves no mass there; see ``p_no_benefit``).
    p_no_benefit
        Prior probability that the drug does not work (effect no better than none).
    phase3_alone
        Assurance of phase 3 run without phase 2 (at ``n3``), for comparison.
    expected_patients, expected_months
        ``n2 + E[phase 3 size; go]`` and ``m2 + E[gap + m3(phase 3 size); go]`` (``m3``
        fixed, or recruitment time plus follow-up, so it follows a re-planned size).
    expected_phase3_n
        Mean phase 3 size given a go (``n3`` unless re-planned).
    expected_phase3_months
        Mean phase 3 duration given a go (months).
    n2, n3, go_threshold, replanned
        What was evaluated (``n3`` is the fixed size; see ``expected_phase3_n``).
    """

    p_go: float
    p_success_given_go: float
    pos: float
    p_go_and_works: float
    p_go_and_relevant: float | None
    false_go: float
    p_no_benefit: float
    phase3_alone: float
    expected_patients: float
    expected_months: float
    expected_phase3_n: float
    expected_phase3_months: float
    n2: int
    n3: int
    go_threshold: float | None
    replanned: bool

    def to_dict(self) -> dict[str, Any]:
        from dataclasses import asdict

        return asdict(self)


def _finish(program: ProgramDesign, x3: np.ndarray, w: np.ndarray, go: np.ndarray,
            win: np.ndarray, phase3_n: np.ndarray, n2: int, go_threshold: float | None,
            alone: np.ndarray, replanned: bool) -> ProgramResult:
    """``go``: P(go | x); ``win``: P(go and phase 3 success | x); ``phase3_n``: E[n3; go | x]."""
    ep = program.phase3.endpoint
    benefit = ep.sign * x3
    works = benefit > 0
    p_go = float(w @ go)
    pos = float(w @ win)
    p_none = float(w @ ~works)
    relevant = None
    if program.phase3.relevant_effect is not None:
        cut = float(ep.to_benefit(program.phase3.relevant_effect))
        relevant = float(w @ (go * (benefit >= cut - 1e-12 * max(1.0, abs(cut)))))
    expected3 = float(w @ phase3_n)
    m = program
    if m.recruitment_phase3 is None:
        months3 = p_go * m.months_phase3
    else:  # linear in the size: E[n3 / rate + follow-up; go]
        months3 = expected3 / m.recruitment_phase3 + p_go * m.follow_up_phase3
    result = ProgramResult(
        p_go=_unit(p_go), p_success_given_go=_unit(pos / p_go) if p_go > 0 else 0.0,
        pos=_unit(pos), p_go_and_works=_unit(float(w @ (go * works))),
        p_go_and_relevant=None if relevant is None else _unit(relevant),
        false_go=_unit(float(w @ (go * ~works)) / p_none) if p_none > 1e-12 else 0.0,
        p_no_benefit=_unit(p_none), phase3_alone=_unit(float(w @ alone)),
        expected_patients=n2 + expected3,
        expected_months=float(m.phase2_months(n2)) + p_go * m.months_gap + months3,
        expected_phase3_n=expected3 / p_go if p_go > 0 else 0.0,
        expected_phase3_months=months3 / p_go if p_go > 0 else 0.0,
        n2=int(n2), n3=int(program.n3), go_threshold=go_threshold, replanned=replanned)
    for key, value in result.to_dict().items():
        if isinstance(value, float) and not math.isfinite(value):
            raise AssuranceInputError(f"The program's {key} is not finite; check the designs.")
    return result


def _unit(p: float) -> float:
    return min(max(float(p), 0.0), 1.0)


def program_result(program: ProgramDesign, *, n2: int | None = None,
                   go_threshold: float | None = None, replanned: bool | None = None
                   ) -> ProgramResult:
    """The program's probabilities, expected patients and duration, by quadrature.

    Parameters
    ----------
    program
        The :class:`ProgramDesign`.
    n2, go_threshold
        Another phase 2 size or go threshold than the program's own (for grids).
    replanned
        Size phase 3 from the phase 2 result (default: when the program has ``replan``).

    Returns
    -------
    ProgramResult

    Notes
    -----
    With ``g`` and ``s`` the go and phase 3 success probabilities at the true effect,
    ``PoS = E[g s]``; trials are independent given the effect. Under re-planning,
    ``PoS = E[sum_k P(d2 in bin k | delta) s(delta; n3_k)]`` over the bins of
    :func:`replan_table`.

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=1.0, analysis="z")
    >>> same = asr.TrialDesign(ep, asr.PointMass(0.0))
    >>> r = program_result(ProgramDesign(same, same, n2=100, n3=100))
    >>> round(r.p_go, 4), round(r.pos, 6)  # no effect: each trial passes with alpha 0.025
    (0.025, 0.000625)
    """
    if not isinstance(program, ProgramDesign):
        raise AssuranceInputError(
            f"The 'program' parameter of program_result must be a ProgramDesign. Got "
            f"{program!r:.80} instead.")
    n2 = program.n2 if n2 is None else check_int(
        n2, "n2", "program_result", low=program.phase2.endpoint.smallest_total, high=10**8)
    if go_threshold is not None:
        go_threshold = check_real(go_threshold, "go_threshold", "program_result")
    else:
        go_threshold = program.go_threshold
    replanned = program.replan is not None if replanned is None else bool(replanned)
    if replanned and program.replan is None:
        raise AssuranceInputError(
            "The 'replanned' parameter of program_result is True, but the program has no "
            "re-planning settings (replan=None).")
    x3, w = prior_nodes(program.prior, _breaks(program))
    outside: list[np.ndarray] = []
    alone = _success_given_effect(program, x3, [program.n3], outside)[:, 0]
    if not replanned:
        go = _go_given_effect(program, x3, n2, go_threshold, outside)
        _check_outside(outside, w, program)
        return _finish(program, x3, w, go, go * alone, go * program.n3, n2, go_threshold,
                       alone, False)
    table = replan_table(program, n2=n2, go_threshold=go_threshold)
    bins = _bin_probabilities(program, table, x3)
    sizes = table["n3"]
    success = _success_given_effect(program, x3, sizes, outside)
    _check_outside(outside, w, program)
    return _finish(program, x3, w, bins.sum(axis=1), (bins * success).sum(axis=1),
                   bins @ sizes.astype(float), n2, go_threshold, alone, True)


# ------------------------------------------------------------------------------------------
# re-planning phase 3 from the phase 2 estimate
# ------------------------------------------------------------------------------------------
def _phase2_geometry(program: ProgramDesign, n2: int, go_threshold: float | None
                     ) -> tuple[float, float, float]:
    """(go threshold on the benefit scale, se2, spread of d2 given delta3)."""
    design = program.go_design(n2, go_threshold)
    ep = design.endpoint
    n_t, n_c = ep.arm_sizes(np.array([n2]))
    se2 = float(ep.sigma * ep.se_factor(n_t, n_c)[0])
    rule = design.benefit_rule
    c2 = float(np.asarray(rule.threshold(se2, rule.critical_z())))
    return c2, se2, math.hypot(se2, program.surrogate.sd)


def replan_table(program: ProgramDesign, *, n2: int | None = None,
                 go_threshold: float | None = None) -> dict[str, np.ndarray]:
    """The phase 3 size for each observed phase 2 estimate past the go threshold.

    The observed estimates (phase 2 benefit scale) run from the go threshold ``c2`` over
    ``span`` standard deviations of ``d2 | delta3`` in ``steps`` points; an estimate between
    two points gets the size of the point below it (the larger size: the estimate is no
    better than that point's).

    Returns
    -------
    dict
        ``lower`` (benefit-scale lower edge of each bin), ``estimate`` (the same on the
        phase 2 natural scale), ``prior_mean`` and ``prior_sd`` (the discounted phase 3
        prior there, analysis scale), ``n3`` (its size) and ``reached`` (whether the
        assurance target was reached within ``max_n``).

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> p2 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0), rule=asr.Significance(alpha=0.1))
    >>> program = ProgramDesign(p2, p3, n2=100, n3=400, replan=Replanning(0.6, 100, 2000))
    >>> t = replan_table(program)
    >>> bool((t["n3"] >= 100).all() and (t["n3"] <= 2000).all())
    True
    """
    if program.replan is None:
        raise AssuranceInputError(
            "The 'program' parameter of replan_table must have re-planning settings "
            "(ProgramDesign(..., replan=Replanning(...))). Got replan=None.")
    n2 = program.n2 if n2 is None else int(n2)
    key = (n2, program.go_threshold if go_threshold is None else float(go_threshold))
    kept = program.__dict__.setdefault("_replan_tables", {})  # frozen, so computed once
    if key not in kept:
        kept[key] = _replan_table(program, n2, key[1])
    return {name: np.copy(value) for name, value in kept[key].items()}


def _replan_table(program: ProgramDesign, n2: int, go_threshold: float | None
                  ) -> dict[str, np.ndarray]:
    from ..planning import solve_sample_size

    plan = program.replan
    assert plan is not None
    c2, se2, tau = _phase2_geometry(program, n2, go_threshold)
    lower = c2 + np.linspace(0.0, plan.span * tau, plan.steps)
    ep2, sur = program.phase2.endpoint, program.surrogate
    se3 = tau / abs(sur.slope)
    sizes, reached, means, sds = [], [], [], []
    base = replace(program.phase3, relevant_effect=None)
    for d2 in lower:
        estimate3 = (ep2.sign * d2 - sur.intercept) / sur.slope
        prior = plan.recipe(float(estimate3), se3).prior()
        means.append(prior.mean())
        sds.append(prior.sd())
        design = replace(base, design_prior=prior)
        answer = solve_sample_size(design, plan.target, quantity="assurance",
                                   max_total=plan.max_n)
        ok = bool(answer.reached) and answer.n_total is not None
        sizes.append(min(max(int(answer.n_total), plan.min_n), plan.max_n) if ok
                     else plan.max_n)
        reached.append(ok)
    natural = ep2.from_benefit(lower)
    return {"lower": lower, "estimate": np.asarray(natural, dtype=float),
            "tau": np.asarray(tau), "se2": np.asarray(se2),
            "prior_mean": np.array(means), "prior_sd": np.array(sds),
            "n3": np.array(sizes, dtype=np.int64), "reached": np.array(reached)}


def _bin_probabilities(program: ProgramDesign, table: dict[str, np.ndarray],
                       x3: np.ndarray) -> np.ndarray:
    """P(d2 in bin k | delta3) for each node (rows) and bin (columns)."""
    mean = program.phase2.endpoint.sign * program.surrogate.mean_effect(x3)
    edges = np.append(table["lower"], np.inf)
    cdf = special.ndtr((edges[None, :] - mean[:, None]) / float(table["tau"]))
    return np.maximum(cdf[:, 1:] - cdf[:, :-1], 0.0)


# ------------------------------------------------------------------------------------------
# grid over the phase 2 size and the go threshold
# ------------------------------------------------------------------------------------------
#: the quantities of :class:`ProgramResult` a grid holds
GRID_QUANTITIES = ("p_go", "p_success_given_go", "pos", "p_go_and_works", "false_go",
                   "expected_patients", "expected_months", "expected_phase3_n")


def program_grid(program: ProgramDesign, phase2_sizes: Sequence[int] | None = None,
                 go_thresholds: Sequence[float] | None = None) -> Any:
    """The program's figures for each phase 2 size and go threshold.

    Parameters
    ----------
    program
        The :class:`ProgramDesign`.
    phase2_sizes
        Total phase 2 sizes (default: the program's ``n2``).
    go_thresholds
        Go thresholds on the phase 2 estimate (natural scale), compared with the program's
        own go rule (labelled ``"as designed"`` when it is phase 2's success rule).

    Returns
    -------
    xarray.Dataset
        Dimensions ``phase2_n`` and ``go_rule`` (labels; a numeric ``go_threshold``
        coordinate when every rule is a threshold), one variable per quantity of
        :class:`ProgramResult` (``p_go``, ``pos``, ``false_go``, ``expected_patients``...),
        with phase 3 at its fixed size ``n3`` (re-planning is left out of the grid).

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> program = ProgramDesign(p3, p3, n2=100, n3=400)
    >>> ds = program_grid(program, [50, 100], [0.0, 2.0])
    >>> dict(ds.sizes), [str(g) for g in ds.go_rule.values]
    ({'phase2_n': 2, 'go_rule': 3}, ['as designed', '0', '2'])
    >>> bool((ds.p_go.sel(go_rule="2") <= ds.p_go.sel(go_rule="0")).all())
    True
    """
    import xarray as xr

    owner = "program_grid"
    sizes = [program.n2] if phase2_sizes is None else [
        check_int(n, "phase2_sizes", owner, low=program.phase2.endpoint.smallest_total,
                  high=10**8) for n in phase2_sizes]
    if not sizes:
        raise AssuranceInputError(
            f"The 'phase2_sizes' parameter of {owner} must hold at least one size. Got "
            f"{phase2_sizes!r} instead.")
    sizes = sorted(set(sizes))
    thresholds: list[float | None] = [program.go_threshold]
    if go_thresholds is not None and len(go_thresholds) > 0:
        low = 0 if program.phase2.endpoint.ratio_scale else None
        given = {check_real(g, "go_thresholds", owner, low=low, low_open=True)
                 for g in go_thresholds}
        thresholds = ([None] if program.go_threshold is None else []) + sorted(
            given | ({program.go_threshold} if program.go_threshold is not None else set()))
    values = {q: np.zeros((len(sizes), len(thresholds))) for q in GRID_QUANTITIES}
    for i, n2 in enumerate(sizes):
        for j, g in enumerate(thresholds):
            r = program_result(program, n2=n2, go_threshold=g, replanned=False)
            for q in GRID_QUANTITIES:
                values[q][i, j] = getattr(r, q)
    labels = ["as designed" if g is None else f"{g:g}" for g in thresholds]
    coords: dict[str, Any] = {"phase2_n": sizes, "go_rule": labels}
    if all(g is not None for g in thresholds):
        coords["go_threshold"] = ("go_rule", np.array(thresholds, dtype=float))
    ds = xr.Dataset({q: (("phase2_n", "go_rule"), v) for q, v in values.items()},
                    coords=coords)
    ds.attrs.update({"n3": program.n3, "replanned": int(program.replan is not None),
                     "title": program.title})
    return ds


# ------------------------------------------------------------------------------------------
# curves over the true effect (for the figure)
# ------------------------------------------------------------------------------------------
def effect_curves(program: ProgramDesign, points: int = 121) -> dict[str, np.ndarray]:
    """P(go), P(phase 3 success) and P(both) at true effects across the prior.

    Returns ``effect`` (phase 3 natural scale), ``x`` (analysis scale), ``go``,
    ``success`` (phase 3 at ``n3``), ``both`` (their product; under re-planning, the
    chance of a go followed by success with the re-planned size) and ``density`` (the
    prior density of the continuous part, analysis scale).

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> c = effect_curves(ProgramDesign(p3, p3, n2=100, n3=400), points=11)
    >>> bool((c["both"] <= c["go"] + 1e-12).all())
    True
    """
    points = check_int(points, "points", "effect_curves", low=3, high=5001)
    prior = program.prior
    low, high = prior.ppf(0.002), prior.ppf(0.998)
    if not high > low:
        centre = float(prior.mean())
        low, high = centre - 1.0, centre + 1.0
    pad = 0.1 * (high - low)
    x = np.linspace(low - pad, high + pad, points)
    x = np.unique(np.concatenate([x, [0.0]])) if low - pad < 0 < high + pad else x
    success = _success_given_effect(program, x, [program.n3])[:, 0]
    if program.replan is not None:
        table = replan_table(program)
        bins = _bin_probabilities(program, table, x)
        go = bins.sum(axis=1)
        both = (bins * _success_given_effect(program, x, table["n3"])).sum(axis=1)
    else:
        go = _go_given_effect(program, x, program.n2, program.go_threshold)
        both = go * success
    ep = program.phase3.endpoint
    return {"effect": np.asarray(ep.from_benefit(ep.sign * x), dtype=float), "x": x,
            "go": go, "success": success, "both": both,
            "density": np.asarray(prior.pdf(x), dtype=float)}


# ------------------------------------------------------------------------------------------
# the independent check: whole programs simulated
# ------------------------------------------------------------------------------------------
#: most outcome tables of a binary trial whose success region is looked up as a dense table
#: (a region that is not one run per control count); larger ones have no simulator here
_MAX_DENSE_TABLES = 40_000_000
#: simulated patients handled at once (trials x patients per trial)
_PATIENT_BLOCK = 250_000


def simulation_gap(program: ProgramDesign, *, n2: int | None = None) -> str | None:
    """Why :func:`simulate_program` cannot simulate ``program`` (plain words), or None.

    Every endpoint the semi-analytic engine accepts has a simulator: normal data
    (continuous), binomial counts decided by the test's own success region (binary),
    patient-level event times decided by the log-rank statistic (time-to-event), and
    patient-level counts decided by the Wald or the conditional exact test (counts). What is
    left out: a binary trial whose success region is not one run of treatment counts per
    control count and has more than 40 million outcome tables.

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> simulation_gap(ProgramDesign(p3, p3, n2=100, n3=400)) is None
    True
    """
    from ..endpoints.binary import BinaryEndpoint
    from ..endpoints.counts import CountEndpoint
    from ..endpoints.survival import SurvivalEndpoint

    n2 = program.n2 if n2 is None else int(n2)
    sizes3 = [program.n3] if program.replan is None else [program.replan.max_n]
    for phase, design, sizes in (("phase 2", program.go_design(n2), [n2]),
                                 ("phase 3", program.phase3, sizes3)):
        ep = design.endpoint
        if isinstance(ep, BinaryEndpoint):
            n_t, n_c = (int(v[0]) for v in ep.arm_sizes(np.array([max(sizes)])))
            if (n_t + 1) * (n_c + 1) > _MAX_DENSE_TABLES and \
                    not _staircase(design, n_t, n_c):
                return (f"the {phase} success region (a binary test with a margin or a "
                        f"posterior rule at {n_t + n_c:,} patients) has more than "
                        f"{_MAX_DENSE_TABLES:,} outcome tables, too many to look simulated "
                        "trials up in")
        elif not isinstance(ep, ContinuousEndpoint | SurvivalEndpoint | CountEndpoint):
            return f"no simulator for the {phase} endpoint ({ep.describe()})"
    return None


def _staircase(design: TrialDesign, n_t: int, n_c: int) -> bool:
    from ..compute.binary_exact import PosteriorSpec, _staircase_known

    spec = _calc(design).engine.spec
    return isinstance(spec, PosteriorSpec) or not spec.two_arm or _staircase_known(spec)


def _decide_continuous(design: TrialDesign, x: np.ndarray, sizes: np.ndarray,
                       rng: np.random.Generator) -> np.ndarray:
    """Normal data: the estimate ``N(effect, sigma^2 k^2)``; for a t analysis the pooled
    variance ``sigma^2 chi2_df / df`` and the rule at the estimated SE and t critical values.
    """
    ep = design.endpoint
    n_t, n_c = ep.arm_sizes(sizes)
    k = ep.se_factor(n_t, n_c)
    se = ep.sigma * k
    d = ep.sign * x + se * rng.standard_normal(x.size)
    rule = design.benefit_rule
    if ep.analysis == "z":
        c = rule.threshold(se, rule.critical_z())
    else:
        df = ep.degrees_of_freedom(n_t, n_c)
        s = ep.sigma * np.sqrt(rng.chisquare(df) / df)
        c = rule.threshold(s * k, rule.critical_t(df))
    return d > c


def _decide_binary(design: TrialDesign, x: np.ndarray, n: int,
                   rng: np.random.Generator) -> np.ndarray:
    """Binomial counts per arm, decided by the success region of the design's own test
    (:func:`~assurance.compute.binary_exact.success_runs`: the same decisions as the test
    run on each table), control rate at its planning value."""
    from ..compute.binary_exact import success_runs, treatment_rate

    ep = design.endpoint
    n_t, n_c = (int(v[0]) for v in ep.arm_sizes(np.array([n])))
    region = success_runs(_calc(design).engine.spec, n_t, n_c)
    p_c = ep.control_rate
    p_t = np.clip(np.nan_to_num(np.asarray(treatment_rate(x, p_c, ep.scale), dtype=float),
                                nan=p_c), 0.0, 1.0)
    x_t = rng.binomial(n_t, p_t)
    x_c = rng.binomial(n_c, p_c, size=x.size) if n_c > 0 else np.zeros(x.size, np.int64)
    if np.unique(region.col).size == region.col.size:  # at most one run per control count
        lo = np.full(n_c + 1, n_t + 1, dtype=np.int64)
        hi = np.full(n_c + 1, -1, dtype=np.int64)
        lo[region.col], hi[region.col] = region.lo, region.hi
        return (lo[x_c] <= x_t) & (x_t <= hi[x_c])
    return region.dense()[x_t, x_c]


def _decide_survival(design: TrialDesign, x: np.ndarray, n: int,
                     rng: np.random.Generator) -> np.ndarray:
    """Patient-level trials (entry, event and dropout times, censoring at the analysis) as
    in :func:`assurance.simulation.survival.simulate_trials`, each at its own hazard ratio
    ``exp(x)``; decided by the rule on the log-rank sums: estimate ``(O - E) / V`` (benefit
    scale) against the threshold at standard error ``1 / sqrt(V)`` (for significance without
    a margin exactly the one-sided log-rank test). Control median at its planning value."""
    from ..simulation.survival import _draw, _follow_up, logrank_by_row

    ep = design.endpoint
    n_t, n_c = (int(v[0]) for v in ep.arm_sizes(np.array([n])))
    total = n_t + n_c
    treated = np.arange(total) < n_t
    ratio = np.exp(np.clip(x, -50.0, 50.0))
    rule = design.benefit_rule
    critical = rule.critical_z()
    out = np.zeros(x.size, dtype=bool)
    rows = max(1, _PATIENT_BLOCK // total)
    for lo in range(0, x.size, rows):
        sl = slice(lo, min(lo + rows, x.size))
        m = sl.stop - sl.start
        draws = _draw(ep, m, total, rng)
        times, events = _follow_up(ep, *draws, ratio[sl], np.ones(m), n_t)
        o_minus_e, var = logrank_by_row(times, events, treated)
        ok = var > 0
        safe = np.where(ok, var, 1.0)
        estimate = ep.sign * o_minus_e / safe
        out[sl] = ok & (estimate > rule.threshold(1.0 / np.sqrt(safe), critical))
    return out


def _decide_counts(design: TrialDesign, x: np.ndarray, n: int,
                   rng: np.random.Generator) -> np.ndarray:
    """Patient-level counts (gamma-Poisson, dropout) as in
    :func:`assurance.endpoints.counts.simulate_rejection_rate`, each trial at its own rate
    ratio ``exp(x)``, control rate at its planning value; analysed by Poisson rates (no
    overdispersion) or negative binomial maximum likelihood, decided by the rule on the Wald
    statistic (``test_variance`` as the endpoint states), or by the conditional exact test."""
    from ..endpoints.counts import _analyse, _exact_decisions, _simulate_arm

    ep = design.endpoint
    n_t, n_c = (int(v[0]) for v in ep.arm_sizes(np.array([n])))
    two_arm = ep.layout == "two_arm"
    lam_c = ep.control_rate
    ratio = np.exp(np.clip(x, -50.0, 50.0))
    rule = design.benefit_rule
    critical = rule.critical_z()
    null_log_rr = ep.sign * rule.null_value
    analysis = "poisson" if ep.overdispersion == 0 else "negative_binomial"
    out = np.zeros(x.size, dtype=bool)
    rows = max(1, _PATIENT_BLOCK // (n_t + n_c))
    for lo in range(0, x.size, rows):
        sl = slice(lo, min(lo + rows, x.size))
        m = sl.stop - sl.start
        data = [_simulate_arm(ep, rng, m, n_t, (lam_c * ratio[sl])[:, None])]
        if two_arm:
            data.append(_simulate_arm(ep, rng, m, n_c, lam_c))
        if ep.test == "exact_conditional":
            out[sl] = _exact_decisions(ep, rule, data, n_t, n_c)
            continue
        ok, d, _var1, var0 = _analyse(ep, data, analysis, null_log_rr, lam_c)
        se0 = np.sqrt(np.where(ok, var0, 1.0))
        out[sl] = ok & (ep.sign * d > rule.threshold(se0, critical))
    return out


def _simulate_decisions(design: TrialDesign, x: np.ndarray, sizes: np.ndarray,
                        rng: np.random.Generator) -> np.ndarray:
    """Whether each simulated trial passes its rule, at true effects ``x`` (the design's
    analysis scale) and total sizes ``sizes``."""
    from ..endpoints.binary import BinaryEndpoint
    from ..endpoints.counts import CountEndpoint
    from ..endpoints.survival import SurvivalEndpoint

    ep = design.endpoint
    if isinstance(ep, ContinuousEndpoint):
        return _decide_continuous(design, x, sizes, rng)
    decide = {BinaryEndpoint: _decide_binary, SurvivalEndpoint: _decide_survival,
              CountEndpoint: _decide_counts}.get(type(ep))
    if decide is None:
        raise AssuranceInputError(
            "The 'program' parameter of simulate_program has an endpoint with no simulator: "
            f"{ep.describe()}.")
    out = np.zeros(x.size, dtype=bool)
    for n in np.unique(sizes):
        at = np.flatnonzero(sizes == n)
        out[at] = decide(design, x[at], int(n), rng)
    return out


def simulate_program(program: ProgramDesign, *, programs: int = 20_000,
                     seed: int | None = DEFAULT_SEED, n2: int | None = None,
                     go_threshold: float | None = None) -> dict[str, float]:
    """Simulate whole programs: the check of :func:`program_result`.

    Each program draws the true effect from the design prior and the phase 2 effect
    through the surrogate; simulates the phase 2 trial and applies the go rule; sizes phase
    3 (fixed, or from the re-planning table at the observed estimate); simulates phase 3
    and applies its rule. Each trial is simulated as the endpoint's data arise:

    * continuous: the normal estimate (and, for a t analysis, the pooled SD);
    * binary: binomial counts per arm, decided by the success region of the design's own
      test (z, unpooled z, chi-square, Fisher's exact test, the exact binomial test, or a
      posterior-probability rule), the same decisions as the test run on each table;
    * time-to-event: patient by patient (entry, event, dropout, censoring at the analysis),
      decided on the log-rank statistic;
    * counts: patient by patient (Poisson or negative binomial, dropout), analysed by
      Poisson or negative binomial maximum likelihood and the Wald test, or by the
      conditional exact test.

    Nuisance parameters (control rate, control median, outcome SD) stay at their planning
    values, as in :func:`program_result`. Random numbers come from three streams spawned
    from ``numpy.random.SeedSequence(seed)``: the effects, phase 2, phase 3.

    Returns
    -------
    dict
        ``p_go``, ``pos``, ``p_go_and_works``, ``expected_patients``, ``expected_months``
        and each with a ``*_mcse`` companion (Monte Carlo standard error), and
        ``programs``.

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> program = ProgramDesign(p3, p3, n2=100, n3=400)
    >>> sim = simulate_program(program, programs=20000, seed=1)
    >>> abs(sim["pos"] - program_result(program).pos) < 4 * sim["pos_mcse"]
    True
    """
    owner = "simulate_program"
    if not isinstance(program, ProgramDesign):
        raise AssuranceInputError(
            f"The 'program' parameter of {owner} must be a ProgramDesign. Got "
            f"{program!r:.80} instead.")
    programs = check_int(programs, "programs", owner, low=100, high=10**7)
    if seed is not None:
        seed = check_int(seed, "seed", owner, low=0)
    n2 = program.n2 if n2 is None else check_int(
        n2, "n2", owner, low=program.phase2.endpoint.smallest_total, high=10**8)
    threshold = program.go_threshold if go_threshold is None else go_threshold
    gap = simulation_gap(program, n2=n2)
    if gap is not None:
        raise AssuranceInputError(
            f"The 'program' parameter of {owner} cannot be simulated: {gap}.")
    effects, first, second = (np.random.default_rng(s)
                              for s in np.random.SeedSequence(seed).spawn(3))
    x3 = np.asarray(program.prior.sample(programs, effects), dtype=float)
    sur = program.surrogate
    x2 = sur.mean_effect(x3) + (sur.sd * effects.standard_normal(programs) if sur.sd
                                else 0.0)
    design2 = program.go_design(n2, threshold)
    if program.replan is None:
        go = _simulate_decisions(design2, x2, np.full(programs, n2, dtype=np.int64), first)
        n3 = np.where(go, program.n3, 0).astype(np.int64)
    else:
        table = replan_table(program, n2=n2, go_threshold=threshold)
        ep2 = design2.endpoint
        n_t, n_c = ep2.arm_sizes(np.array([n2]))
        se2 = float(ep2.sigma * ep2.se_factor(n_t, n_c)[0])
        d2 = ep2.sign * x2 + se2 * first.standard_normal(programs)
        go = d2 >= table["lower"][0]
        k = np.clip(np.searchsorted(table["lower"], d2, side="right") - 1, 0, None)
        n3 = np.where(go, table["n3"][k], 0)
    success = np.zeros(programs, dtype=bool)
    if go.any():
        success[go] = _simulate_decisions(program.phase3, x3[go], n3[go], second)
    works = program.phase3.endpoint.sign * x3 > 0
    patients = n2 + n3
    months = program.phase2_months(n2) + np.where(
        go, program.months_gap + program.phase3_months(np.maximum(n3, 1)), 0.0)
    out: dict[str, float] = {"programs": float(programs)}
    for name, values in (("p_go", go), ("pos", success), ("p_go_and_works", go & works),
                         ("expected_patients", patients), ("expected_months", months)):
        v = np.asarray(values, dtype=float)
        out[name] = float(v.mean())
        out[name + "_mcse"] = float(v.std(ddof=1) / math.sqrt(programs))
    return out
