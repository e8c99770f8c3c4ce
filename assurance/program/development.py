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
* expected patients ``n2 + P(go) n3`` and expected months ``m2 + P(go) (gap + m3)``,

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
decision, the phase 3 size and data) as an independent check of these figures.

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
           "simulate_program", "effect_curves"]

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
        return (f"phase 2 effect = {self.intercept:g} + {self.slope:g} x phase 3 effect{noise} "
                "(each on its analysis scale)")

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
        Durations for the expected duration: phase 2, the time from its result to the start
        of phase 3, and phase 3.
    replan
        Size phase 3 from the observed phase 2 result (:class:`Replanning`), or None.
    title
        Name of the program.

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
        ``n2 + E[phase 3 size; go]`` and ``m2 + P(go) (gap + m3)``.
    expected_phase3_n
        Mean phase 3 size given a go (``n3`` unless re-planned).
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
    result = ProgramResult(
        p_go=_unit(p_go), p_success_given_go=_unit(pos / p_go) if p_go > 0 else 0.0,
        pos=_unit(pos), p_go_and_works=_unit(float(w @ (go * works))),
        p_go_and_relevant=None if relevant is None else _unit(relevant),
        false_go=_unit(float(w @ (go * ~works)) / p_none) if p_none > 1e-12 else 0.0,
        p_no_benefit=_unit(p_none), phase3_alone=_unit(float(w @ alone)),
        expected_patients=n2 + expected3,
        expected_months=m.months_phase2 + p_go * (m.months_gap + m.months_phase3),
        expected_phase3_n=expected3 / p_go if p_go > 0 else 0.0,
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
def _simulate_estimates(design: TrialDesign, x: np.ndarray, sizes: np.ndarray,
                        rng: np.random.Generator) -> np.ndarray:
    """Whether each simulated trial passes its rule (continuous endpoint, normal data).

    The estimate is drawn as ``N(effect, sigma^2 k^2)``; for a t analysis the pooled
    variance is drawn as ``sigma^2 chi2_df / df`` and the rule applied with the
    estimated standard error and t critical values.
    """
    ep = design.endpoint
    if not isinstance(ep, ContinuousEndpoint):
        raise AssuranceInputError(
            "The 'program' parameter of simulate_program must have continuous endpoints in "
            f"both phases (normal data). Got: {ep.describe()}.")
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


def simulate_program(program: ProgramDesign, *, programs: int = 20_000,
                     seed: int | None = DEFAULT_SEED, n2: int | None = None,
                     go_threshold: float | None = None) -> dict[str, float]:
    """Simulate whole programs: the check of :func:`program_result`.

    Each program draws the true effect from the design prior, the phase 2 effect through
    the surrogate, a phase 2 estimate (and SD for a t analysis), applies the go rule, sizes
    phase 3 (fixed, or from the re-planning table at the observed estimate), draws the phase
    3 result and applies its rule. Both phases must have continuous endpoints.

    Returns
    -------
    dict
        ``p_go``, ``pos``, ``p_go_and_works``, ``expected_patients`` and each with a
        ``*_mcse`` companion (Monte Carlo standard error), and ``programs``.

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
    n2 = program.n2 if n2 is None else check_int(n2, "n2", owner, low=1, high=10**8)
    threshold = program.go_threshold if go_threshold is None else go_threshold
    rng = np.random.default_rng(seed)
    x3 = np.asarray(program.prior.sample(programs, rng), dtype=float)
    sur = program.surrogate
    x2 = sur.mean_effect(x3) + (sur.sd * rng.standard_normal(programs) if sur.sd else 0.0)
    design2 = program.go_design(n2, threshold)
    if program.replan is None:
        go = _simulate_estimates(design2, x2, np.full(programs, n2), rng)
        n3 = np.full(programs, program.n3, dtype=np.int64)
    else:
        table = replan_table(program, n2=n2, go_threshold=threshold)
        ep2 = design2.endpoint
        n_t, n_c = ep2.arm_sizes(np.array([n2]))
        se2 = float(ep2.sigma * ep2.se_factor(n_t, n_c)[0])
        d2 = ep2.sign * x2 + se2 * rng.standard_normal(programs)
        go = d2 >= table["lower"][0]
        k = np.clip(np.searchsorted(table["lower"], d2, side="right") - 1, 0, None)
        n3 = np.where(go, table["n3"][k], 0)
    success = np.zeros(programs, dtype=bool)
    if go.any():
        success[go] = _simulate_estimates(program.phase3, x3[go], n3[go], rng)
    works = program.phase3.endpoint.sign * x3 > 0
    patients = n2 + np.where(go, n3, 0)
    out: dict[str, float] = {"programs": float(programs)}
    for name, values in (("p_go", go), ("pos", success), ("p_go_and_works", go & works),
                         ("expected_patients", patients)):
        v = values.astype(float)
        out[name] = float(v.mean())
        out[name + "_mcse"] = float(v.std(ddof=1) / math.sqrt(programs))
    return out
