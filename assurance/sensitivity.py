"""How much the planned trial's assurance depends on the design prior.

A design prior is a judgement; a planner should see what happens to assurance when that
judgement moves. :func:`prior_variations` builds a short list of plausible alternatives
(centre moved down and up, spread narrowed and widened, point-mass weight moved, the
discounts of an earlier-trial prior changed, and all belief on the assumed effect);
:func:`prior_sensitivity` computes assurance at the planned size under each, the size each
would need, a map of assurance over prior centre and spread, and how far the centre may
move before assurance falls below its target.

Every variation acts on the *prior scale*: the difference, or the log ratio for ratio
endpoints (hazard, odds, risk and rate ratios). Point masses ("the drug does nothing") stay
where they are; the continuous parts move and stretch together by one affine map
``x -> c + f (x - m)`` about their common mean ``m``. For a prior from an earlier trial with
a vague robust part, only the informative part moves (the vague part stands for "the
earlier trial may simply be wrong" and does not follow the estimate).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from ._validation import MAX_DRAWS, check_int, check_real
from .design import TrialDesign
from .errors import AssuranceInputError
from .planning import DEFAULT_DRAWS, evaluate, solve_sample_size
from .priors.families import (
    FromScipy,
    Mixture,
    Normal,
    PointMass,
    Prior,
    StudentT,
    TruncatedNormal,
    Uniform,
)

__all__ = ["SensitivitySettings", "PriorVariation", "prior_variations", "prior_sensitivity"]

#: Targets that :func:`prior_sensitivity` solves under each varied prior.
ASSURANCE_TARGETS = ("assurance", "conditional_assurance")
#: How far (in elicited prior SDs) the centre search for the target looks, each way.
CENTRE_SEARCH_SDS = 20.0
#: Sizes are searched up to this many times the planned size (at most a million patients):
#: a prior that needs more is reported as not reaching the target (-1).
SEARCH_FACTOR = 20
#: Largest Monte Carlo draws used for each point of the map (common random numbers).
MAP_DRAWS = 4_000


# ------------------------------------------------------------------------------------------
# settings and the variations
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SensitivitySettings:
    """How far the prior is moved, and the grid of the assurance map.

    Parameters
    ----------
    centre_shift
        The centre is moved down and up by this many prior SDs (> 0).
    spread_factors
        The spread is multiplied by each factor (each > 0 and not 1).
    weight_change
        Point-mass weight moved down and up by this (absolute, in (0, 1)); a weight that
        would leave (0, 1) stops half way to the boundary instead.
    map_centres, map_spreads
        Grid sizes of the map (centre axis, spread axis), each in [2, 201].
    map_centre_range
        The map's centre runs from the elicited centre -/+ this many prior SDs (> 0).
    map_spread_range
        Spread factors covered by the map, log-spaced (``0 < low < high``).

    Examples
    --------
    >>> SensitivitySettings(centre_shift=1.0).spread_factors
    (0.5, 2.0)
    """

    centre_shift: float = 0.5
    spread_factors: tuple[float, ...] = (0.5, 2.0)
    weight_change: float = 0.1
    map_centres: int = 21
    map_spreads: int = 15
    map_centre_range: float = 2.0
    map_spread_range: tuple[float, float] = (0.25, 4.0)

    def __post_init__(self) -> None:
        owner = "SensitivitySettings"
        put = object.__setattr__
        put(self, "centre_shift", check_real(self.centre_shift, "centre_shift", owner, low=0,
                                             low_open=True, high=100))
        factors = self.spread_factors
        if isinstance(factors, int | float) and not isinstance(factors, bool):
            factors = (factors,)
        if isinstance(factors, str) or not hasattr(factors, "__iter__"):
            raise AssuranceInputError(
                f"The 'spread_factors' parameter of {owner} must be a list of numbers > 0 "
                f"(other than 1). Got {self.spread_factors!r} instead.")
        clean = tuple(check_real(f, "spread_factors", owner, low=0, low_open=True, high=100)
                      for f in factors)
        if any(f == 1.0 for f in clean):
            raise AssuranceInputError(
                f"The 'spread_factors' parameter of {owner} must hold factors other than 1 "
                f"(1 leaves the prior unchanged). Got {self.spread_factors!r} instead.")
        put(self, "spread_factors", clean)
        put(self, "weight_change", check_real(self.weight_change, "weight_change", owner,
                                              low=0, high=1, low_open=True, high_open=True))
        put(self, "map_centres", check_int(self.map_centres, "map_centres", owner, low=2,
                                           high=201))
        put(self, "map_spreads", check_int(self.map_spreads, "map_spreads", owner, low=2,
                                           high=201))
        put(self, "map_centre_range", check_real(self.map_centre_range, "map_centre_range",
                                                 owner, low=0, low_open=True, high=100))
        rng = self.map_spread_range
        if isinstance(rng, str) or not hasattr(rng, "__len__") or len(rng) != 2:
            raise AssuranceInputError(
                f"The 'map_spread_range' parameter of {owner} must be a pair (low, high) of "
                f"spread factors with 0 < low < high. Got {rng!r} instead.")
        low = check_real(rng[0], "map_spread_range", owner, low=0, low_open=True, high=100)
        high = check_real(rng[1], "map_spread_range", owner, low=low, low_open=True, high=100)
        put(self, "map_spread_range", (low, high))


@dataclass(frozen=True)
class PriorVariation:
    """One alternative design prior: a short label, plain words, and the prior itself.

    Examples
    --------
    >>> PriorVariation("elicited", "the design prior as elicited", Normal(1.0, 0.5)).name
    'elicited'
    """

    name: str
    description: str
    prior: Prior


class _Affine(Prior):
    """``a + f X`` for a prior ``X`` (``f > 0``): the location-scale move of a family that
    has no closed form for it (a scipy distribution, say)."""

    def __init__(self, base: Prior, shift: float, factor: float):
        self.base, self.shift, self.factor = base, float(shift), float(factor)

    def _back(self, x: Any) -> np.ndarray:
        return (np.asarray(x, dtype=float) - self.shift) / self.factor

    def pdf(self, x: Any) -> np.ndarray:
        return np.asarray(self.base.pdf(self._back(x)), dtype=float) / self.factor

    def cdf(self, x: Any) -> np.ndarray:
        return np.asarray(self.base.cdf(self._back(x)), dtype=float)

    def sf(self, x: Any) -> np.ndarray:
        y = self._back(x)
        sf = getattr(self.base, "sf", None)
        return np.asarray(sf(y) if sf is not None else 1.0 - self.base.cdf(y), dtype=float)

    def prob_above(self, x: float, *, inclusive: bool = False) -> float:
        return min(max(float(self.sf(x)), 0.0), 1.0)

    def ppf(self, q: float) -> float:
        return self.shift + self.factor * float(self.base.ppf(q))

    def sample(self, size: int, seed: Any = None) -> np.ndarray:
        return self.shift + self.factor * np.asarray(self.base.sample(size, seed), dtype=float)

    def mean(self) -> float:
        return self.shift + self.factor * float(self.base.mean())

    def var(self) -> float:
        return self.factor**2 * float(self.base.var())

    def support(self) -> tuple[float, float]:
        lo, hi = self.base.support()
        return self.shift + self.factor * lo, self.shift + self.factor * hi

    def to_dict(self) -> dict[str, Any]:
        return {"family": "moved", "base": self.base.describe(), "shift": self.shift,
                "factor": self.factor}

    def negated(self) -> Prior:
        return _Affine(self.base.negated(), -self.shift, self.factor)


def _move(part: Prior, centre: float, shift: float, factor: float) -> Prior:
    """``part`` under ``x -> centre + shift + factor (x - centre)``."""
    a = centre + shift - factor * centre

    def t(x: float) -> float:
        return a + factor * x

    if isinstance(part, PointMass):
        return PointMass(t(part.value))
    if isinstance(part, Normal):
        return Normal(t(part.mu), factor * part.sigma)
    if isinstance(part, StudentT):
        return StudentT(part.df, t(part.loc), factor * part.scale)
    if isinstance(part, Uniform):
        return Uniform(t(part.lower), t(part.upper))
    if isinstance(part, TruncatedNormal):
        return TruncatedNormal(t(part.mu), factor * part.sigma, t(part.lower), t(part.upper))
    if isinstance(part, _Affine):
        return _Affine(part.base, a + factor * part.shift, factor * part.factor)
    if isinstance(part, FromScipy) and not part._negate:
        frozen = part._dist
        kwds = dict(frozen.kwds)
        args = list(frozen.args)
        names = frozen.dist.shapes.split(",") if frozen.dist.shapes else []
        loc = kwds.pop("loc", args[len(names)] if len(args) > len(names) else 0.0)
        scale = kwds.pop("scale", args[len(names) + 1] if len(args) > len(names) + 1 else 1.0)
        try:
            return FromScipy(frozen.dist(*args[:len(names)], loc=t(float(loc)),
                                         scale=factor * float(scale), **kwds),
                             allow_slow=part._allow_slow)
        except AssuranceInputError:  # pragma: no cover - scipy refused: use the wrapper
            pass
    return _Affine(part, a, factor)


# ---- the parts of a prior that move ----------------------------------------------------------
@dataclass
class _Shape:
    """The prior split into what moves and what stays, with the moving part's centre/SD."""

    prior: Prior
    moving: list[tuple[float, Prior]]      # (weight within the whole prior, part)
    fixed: list[tuple[float, Prior]]
    centre: float
    spread: float
    beta: Any = None                        # a BetaRates prior (binary endpoints)

    def rebuilt(self, shift: float, factor: float) -> Prior:
        """The prior with its moving parts shifted by ``shift`` and scaled by ``factor``."""
        parts = [(w, _move(p, self.centre, shift, factor)) for w, p in self.moving]
        parts += self.fixed
        if len(parts) == 1:
            return parts[0][1]
        return Mixture([p for _, p in parts], [w for w, _ in parts])


def _is_beta(prior: Prior) -> bool:
    return type(prior).__name__ == "BetaRates"


def _shape(design: TrialDesign, origin: Any) -> _Shape | None:
    """Split the design prior; None when nothing continuous can move (a point mass)."""
    prior = design.design_prior
    if _is_beta(prior):
        if prior.treatment_arm.fixed and prior.control_arm.fixed:
            return None
        return _Shape(prior, [], [], float(prior.mean()), float(prior.sd()), beta=prior)
    parts = prior.parts()
    moving = [(w, p) for w, p in parts if not isinstance(p, PointMass)]
    fixed = [(w, p) for w, p in parts if isinstance(p, PointMass)]
    informative = _informative(origin)
    if informative is not None and len(moving) > 1:
        keep = [(w, p) for w, p in moving if isinstance(p, Normal)
                and math.isclose(p.mu, informative.mu, rel_tol=1e-12, abs_tol=1e-12)
                and math.isclose(p.sigma, informative.sigma, rel_tol=1e-12)]
        if len(keep) == 1:
            fixed += [(w, p) for w, p in moving if p is not keep[0][1]]
            moving = keep
    if not moving:
        return None
    total = math.fsum(w for w, _ in moving)
    centre = math.fsum(w * p.mean() for w, p in moving) / total
    var = math.fsum(w * (p.var() + (p.mean() - centre) ** 2) for w, p in moving) / total
    if not (math.isfinite(centre) and math.isfinite(var) and var > 0):
        return None
    return _Shape(prior, moving, fixed, centre, math.sqrt(var))


def _informative(origin: Any) -> Normal | None:
    """The informative part of an earlier-trial prior (before the robust mixture)."""
    if origin is None or not hasattr(origin, "replace") or not hasattr(origin, "prior"):
        return None
    try:
        part = origin.replace(robust_weight=1.0).prior()
    except (AssuranceInputError, TypeError):
        return None
    return part if isinstance(part, Normal) else None


# ---- BetaRates: move and stretch the treatment rate's beta ---------------------------------
def _beta_with(prior: Any, centre: float, spread: float) -> Any | None:
    """A BetaRates prior with the same control arm whose effect has this mean and SD, found
    by changing the treatment rate's beta (its mean and its size ``a + b``); None when no
    beta gives it (the control arm alone is already wider, say)."""
    cls = type(prior)
    control = prior.control
    arm = prior.treatment_arm
    if arm.fixed:
        return None
    if prior.scale == "difference":
        return _beta_with_difference(prior, centre, spread)
    from scipy import optimize, special

    from .compute.binary_exact import RateArm

    mu0, size0 = arm.a / (arm.a + arm.b), arm.a + arm.b

    def shape(x: np.ndarray) -> tuple[float, float]:
        mu, size = special.expit(x[0]), math.exp(min(max(x[1], -30.0), 30.0))
        return mu * size, (1 - mu) * size

    def make(x: np.ndarray) -> Any:
        return cls(control, shape(x), prior.scale)

    # the root finder's trial points need only the effect's mean and SD: the closed-form
    # moments of BetaRates, without building (and checking) a prior at each point
    m_c, v_c = prior._moments(prior.control_arm)

    def gap(x: np.ndarray) -> np.ndarray:
        a, b = shape(x)
        if not (0.0 < a < math.inf and 0.0 < b < math.inf):  # no such beta: far away
            return np.array([1e3, 1e3])
        m_t, v_t = prior._moments(RateArm.beta(a, b))
        return np.array([(m_t - m_c - centre) / spread,
                         math.log(math.sqrt(v_t + v_c) / spread)])

    start = np.array([special.logit(mu0), math.log(size0)])
    sol = optimize.root(gap, start, method="hybr", options={"xtol": 1e-12})
    if not sol.success or np.max(np.abs(gap(sol.x))) > 1e-8:
        return None
    try:
        return make(sol.x)
    except AssuranceInputError:
        return None


def _beta_with_difference(prior: Any, centre: float, spread: float) -> Any | None:
    """:func:`_beta_with` on the difference scale, where it has a closed form: the effect's
    mean and variance are the treatment beta's minus (plus) the control's, and a beta with
    mean ``m`` and variance ``v`` has ``a + b = m (1 - m) / v - 1``."""
    cls = type(prior)
    m_c, v_c = prior._moments(prior.control_arm)
    m_t, v_t = m_c + centre, spread**2 - v_c
    if not (0.0 < m_t < 1.0 and v_t > 0.0):
        return None
    size = m_t * (1.0 - m_t) / v_t - 1.0
    if not 0.0 < size < math.inf:
        return None
    try:
        return cls(prior.control, (m_t * size, (1.0 - m_t) * size), prior.scale)
    except AssuranceInputError:
        return None


# ---- words ---------------------------------------------------------------------------------
def _natural(design: TrialDesign, value: float, digits: int = 3) -> str:
    ep = design.endpoint
    if ep.ratio_scale:
        return f"{ep.effect_name} {math.exp(value):.{digits}g}"
    return f"{value:.{digits}g}"


def _from_to(design: TrialDesign, old: float, new: float) -> str:
    """``from 0.8 to 0.75``, with enough digits to tell the two apart."""
    for digits in range(3, 10):
        a, b = _natural(design, old, digits), _natural(design, new, digits)
        if a != b:
            break
    return f"from {a} to {b}"


def _scale_text(design: TrialDesign) -> str:
    ep = design.endpoint
    return f"prior scale: log {ep.effect_name}" if ep.ratio_scale else \
        f"prior scale: {ep.effect_name}"


def _sds(x: float) -> str:
    words = {0.5: "half a prior SD", 1.0: "one prior SD", 0.25: "a quarter of a prior SD"}
    return words.get(x, f"{x:g} prior SDs")


def _prior_scale_value(design: TrialDesign, natural: float) -> float:
    ep = design.endpoint
    return math.log(natural) if ep.ratio_scale else float(natural)


def prior_variations(design: TrialDesign, settings: SensitivitySettings | None = None,
                     origin: Any = None) -> list[PriorVariation]:
    """The elicited design prior and the alternatives a sensitivity check looks at.

    Parameters
    ----------
    design
        The trial.
    settings
        How far to move the prior (:class:`SensitivitySettings`; defaults when None).
    origin
        Where the prior came from: a :class:`~assurance.priors.evidence.DiscountedEstimate`
        adds rows that change its shrinkage (-/+ 0.1), power weight (halved, doubled) and
        robust weight (-/+ 0.1), each within its allowed range; a change that the range
        clips to nothing is left out.

    Returns
    -------
    list of PriorVariation
        ``elicited`` first, then ``centre_down``, ``centre_up``, ``spread_x<f>`` for each
        factor, ``weight_down`` / ``weight_up`` (point-mass weight, when the prior has one
        beside a continuous part), the earlier-trial rows, and ``point_prior`` (all belief
        on the assumed effect: classical power). A prior with no continuous part has no
        centre or spread rows. For a :class:`~assurance.BetaRates` prior the treatment
        rate's beta is moved (its mean and size) so that the effect's mean and SD move as
        asked; a row no beta can give is left out.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
    >>> [v.name for v in prior_variations(d)]
    ['elicited', 'centre_down', 'centre_up', 'spread_x0.5', 'spread_x2', 'point_prior']
    >>> prior_variations(d)[1].prior
    normal(mean=3, sd=2)
    """
    owner = "prior_variations"
    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} "
            "instead.")
    settings = _settings(settings, owner)
    prior = design.design_prior
    out = [PriorVariation("elicited", "the design prior as given", prior)]
    shape = _shape(design, origin)
    if shape is not None:
        m, s = shape.centre, shape.spread
        what = "the effect's" if shape.beta is not None else "centre"
        for sign, word in ((-1, "down"), (1, "up")):
            d = sign * settings.centre_shift * s
            varied = (_beta_with(shape.beta, m + d, s) if shape.beta is not None
                      else shape.rebuilt(d, 1.0))
            if varied is not None:
                text = (f"centre moved {word} by {_sds(settings.centre_shift)}, "
                        f"{_from_to(design, m, m + d)}")
                if shape.beta is not None:
                    text += f"; {what} mean moved through the treatment rate's beta prior"
                elif shape.fixed:
                    text += " (point masses and any vague part stay where they are)"
                out.append(PriorVariation(f"centre_{word}", text, varied))
        for f in settings.spread_factors:
            varied = (_beta_with(shape.beta, m, f * s) if shape.beta is not None
                      else shape.rebuilt(0.0, f))
            if varied is None:
                continue
            verb = {0.5: "halved", 2.0: "doubled"}.get(
                f, f"multiplied by {f:g}")
            text = f"spread {verb} (SD {s:.3g} to {f * s:.3g}, {_scale_text(design)})"
            if shape.beta is not None:
                text += "; through the treatment rate's beta prior"
            out.append(PriorVariation(f"spread_x{f:g}", text, varied))
        if shape.beta is None and shape.fixed and any(isinstance(p, PointMass)
                                                      for _, p in shape.fixed):
            out.extend(_weight_rows(design, shape, settings))
    out.extend(_origin_rows(design, origin))
    point = _prior_scale_value(design, design.assumed_effect)
    out.append(PriorVariation(
        "point_prior", f"all belief on the assumed effect {design.assumed_effect:g} "
        "(classical power; any uncertain nuisance value fixed at its planning value)",
        PointMass(point)))
    return out


def _weight_rows(design: TrialDesign, shape: _Shape,
                 settings: SensitivitySettings) -> list[PriorVariation]:
    atoms = [(w, p) for w, p in shape.fixed if isinstance(p, PointMass)]
    others = shape.moving + [(w, p) for w, p in shape.fixed if not isinstance(p, PointMass)]
    w0 = math.fsum(w for w, _ in atoms)
    rows = []
    where = ", ".join(_natural(design, p.value) for _, p in atoms)
    for sign, word in ((-1, "down"), (1, "up")):
        w1 = w0 + sign * settings.weight_change
        if not 0.0 < w1 < 1.0:
            w1 = w0 / 2 if sign < 0 else (1 + w0) / 2
        parts = [(w * w1 / w0, p) for w, p in atoms] + \
                [(w * (1 - w1) / (1 - w0), p) for w, p in others]
        prior = Mixture([p for _, p in parts], [w for w, _ in parts])
        rows.append(PriorVariation(
            f"weight_{word}", f"weight of the point mass at {where} moved {word} from "
            f"{w0:.3g} to {w1:.3g}", prior))
    return rows


def _origin_rows(design: TrialDesign, origin: Any) -> list[PriorVariation]:
    if origin is None or not all(hasattr(origin, k) for k in
                                 ("shrinkage", "power_weight", "robust_weight", "replace")):
        return []
    rows = []
    changes = (
        ("shrinkage", "down", max(origin.shrinkage - 0.1, 0.0)),
        ("shrinkage", "up", min(origin.shrinkage + 0.1, 1.0)),
        ("power_weight", "down", origin.power_weight / 2),
        ("power_weight", "up", min(origin.power_weight * 2, 1.0)),
        ("robust_weight", "down", max(origin.robust_weight - 0.1, 0.0)),
        ("robust_weight", "up", min(origin.robust_weight + 0.1, 1.0)),
    )
    words = {"shrinkage": "shrinkage of the earlier estimate",
             "power_weight": "share of the earlier trial's information (power weight)",
             "robust_weight": "weight of the informative part (the rest is vague)"}
    for key, word, value in changes:
        old = getattr(origin, key)
        if value == old:
            continue
        try:
            prior = origin.replace(**{key: value}).prior()
        except (AssuranceInputError, TypeError):
            continue  # e.g. a robust weight below 1 without a vague part
        rows.append(PriorVariation(f"{key}_{word}",
                                   f"{words[key]} {word} from {old:g} to {value:g}", prior))
    return rows


def _settings(settings: Any, owner: str) -> SensitivitySettings:
    if settings is None:
        return SensitivitySettings()
    if not isinstance(settings, SensitivitySettings):
        raise AssuranceInputError(
            f"The 'settings' parameter of {owner} must be a SensitivitySettings. "
            f"Got {settings!r} instead.")
    return settings


# ------------------------------------------------------------------------------------------
# the computation
# ------------------------------------------------------------------------------------------
#: Fields of endpoints that hold a prior on a nuisance value (fixed for classical power).
_NUISANCE_FIELDS = ("control_rate_prior", "median_prior", "control_prior")


def _with_prior(design: TrialDesign, prior: Prior) -> tuple[TrialDesign, bool]:
    """The design under another design prior; the relevant effect is dropped (second value
    False) when the new prior leaves too little mass on relevant effects for it."""
    try:
        return dataclasses.replace(design, design_prior=prior), True
    except AssuranceInputError:
        if design.relevant_effect is None:
            raise
        return dataclasses.replace(design, design_prior=prior, relevant_effect=None), False


def _classical(design: TrialDesign, prior: Prior) -> tuple[TrialDesign, bool]:
    """The design with a point-mass prior and every nuisance prior removed, so that its
    assurance is classical power (planning values of the SD, control rate, median)."""
    ep = design.endpoint
    fixed = {k: None for k in _NUISANCE_FIELDS if getattr(ep, k, None) is not None}
    if fixed and dataclasses.is_dataclass(ep):
        ep = dataclasses.replace(ep, **fixed)
    return _with_prior(dataclasses.replace(design, endpoint=ep, sigma_prior=None), prior)


class _AtSize:
    """Assurance at one size for any design prior, by the design's own calculator route
    (the same arithmetic, draws and seed as :func:`~assurance.evaluate`)."""

    def __init__(self, design: TrialDesign, n: int, draws: int, seed: int | None):
        self.design, self.draws, self.seed = design, draws, seed
        self.n_t, self.n_c = design.endpoint.arm_sizes(np.array([n]))

    def __call__(self, prior: Prior, draws: int | None = None) -> tuple[float, float]:
        d, ep = self.design, self.design.endpoint
        calc = ep.calculator(ep.benefit_prior(prior), d.benefit_rule,
                             draws=self.draws if draws is None else draws, seed=self.seed,
                             nuisance=d.sigma_prior)
        res = calc.success(self.n_t, self.n_c, [])
        mcse = 0.0 if res.success_mcse is None else float(res.success_mcse[0])
        return float(res.success[0]), mcse


def _moments(prior: Prior) -> tuple[float, float]:
    """Mean and SD; an SD the family lacks (a t with df <= 2) is replaced by IQR / 1.349."""
    mean = float(prior.mean())
    try:
        sd = float(prior.sd())
    except AssuranceInputError:
        sd = (prior.ppf(0.75) - prior.ppf(0.25)) / 1.349
    return mean, sd


def prior_sensitivity(
    design: TrialDesign,
    planned_n: int,
    targets: Mapping[str, float],
    settings: SensitivitySettings | None = None,
    *,
    origin: Any = None,
    draws: int = DEFAULT_DRAWS,
    seed: int | None = 20260101,
) -> Any:
    """Assurance at the planned size under varied design priors, and a map over the prior.

    Parameters
    ----------
    design
        The trial.
    planned_n
        The planned total sample size.
    targets
        The plan's targets (``{"assurance": 0.7, ...}``); only ``"assurance"`` and
        ``"conditional_assurance"`` are used, each in (0, 1).
    settings
        How far the prior moves and the map's grid (defaults when None).
    origin
        Where the prior came from (a ``DiscountedEstimate`` adds rows; see
        :func:`prior_variations`).
    draws, seed
        Monte Carlo settings, as for :func:`~assurance.evaluate`: every variation uses the
        same seed (common random numbers), so differences between rows are not noise.

    Returns
    -------
    xarray.Dataset
        Dimension ``variation`` (coordinates: the names and ``variation_description``) with
        ``sensitivity_assurance``, ``sensitivity_ceiling``, ``sensitivity_prior_centre``,
        ``sensitivity_prior_spread`` and ``sensitivity_n`` (``variation`` x
        ``sensitivity_target``: smallest total n reaching each target, -1 when none up to
        20 times the planned size (at most a million patients) does); dimensions
        ``map_centre`` x ``map_spread`` (the continuous part's centre and SD on the prior
        scale) with ``sensitivity_map``; scalars
        ``sensitivity_planned_n`` and, when found, ``sensitivity_centre_shift`` (how far,
        signed, on the prior scale, the centre must move for assurance at the planned
        size to reach the assurance target). ``attrs`` hold ``sensitivity_sentence``,
        ``sensitivity_scale``, ``sensitivity_elicited_centre`` and
        ``sensitivity_elicited_spread``.

    Notes
    -----
    The elicited row is :func:`~assurance.evaluate` at ``planned_n`` and the point-prior
    row is classical power there (a point mass at the assumed effect, nuisance values at
    their planning values). The centre shift solves ``A(m + d) = target`` by Brent's method
    on the exact (or common-random-number) assurance, spread kept as elicited. Under Monte
    Carlo the map uses at most 4,000 draws per point (same seed); its largest standard
    error is in the map's attrs.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    >>> ds = prior_sensitivity(d, 200, {"assurance": 0.6})
    >>> round(float(ds.sensitivity_assurance.sel(variation="point_prior")), 4)  # power
    0.8074
    """
    import xarray as xr

    owner = "prior_sensitivity"
    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} "
            "instead.")
    settings = _settings(settings, owner)
    planned_n = check_int(planned_n, "planned_n", owner, low=design.endpoint.smallest_total,
                          high=10**9)
    if not isinstance(targets, Mapping):
        raise AssuranceInputError(
            f"The 'targets' parameter of {owner} must be a mapping such as "
            f"{{'assurance': 0.7}}. Got {targets!r} instead.")
    goals = {k: check_real(v, f"targets['{k}']", owner, low=0, high=1, low_open=True,
                           high_open=True)
             for k, v in targets.items() if k in ASSURANCE_TARGETS}
    draws = check_int(draws, "draws", owner, low=100, high=MAX_DRAWS)
    if seed is not None:
        seed = check_int(seed, "seed", owner, low=0)

    variations = prior_variations(design, settings, origin)
    limit = max(min(SEARCH_FACTOR * planned_n, 1_000_000), design.endpoint.smallest_total)
    at_size = _AtSize(design, planned_n, draws, seed)
    names, texts, values, ceilings, centres, spreads, sizes = [], [], [], [], [], [], []
    for var in variations:
        if var.name == "elicited":
            varied, relevant = design, True
        elif var.name == "point_prior":
            varied, relevant = _classical(design, var.prior)
        else:
            varied, relevant = _with_prior(design, var.prior)
        ds = evaluate(varied, [planned_n], draws=draws, seed=seed)
        names.append(var.name)
        texts.append(var.description)
        values.append(float(ds.assurance.values[0]))
        ceilings.append(float(varied.ceiling()))
        centre, spread = _moments(var.prior)
        centres.append(centre)
        spreads.append(spread)
        row = []
        for key, goal in goals.items():
            if key == "conditional_assurance" and (not relevant
                                                   or varied.relevant_effect is None):
                row.append(-1)
                continue
            ans = solve_sample_size(varied, goal, quantity=key, draws=draws, seed=seed,
                                    max_total=limit)
            row.append(int(ans.n_total) if ans.reached and ans.n_total is not None else -1)
        sizes.append(row)

    shape = _shape(design, origin)
    scale = _scale_text(design)
    attrs: dict[str, Any] = {"sensitivity_scale": scale}
    map_attrs: dict[str, Any] = {"long_name": "assurance at the planned size over the "
                                              "prior's centre and spread"}
    monte_carlo = at_size(design.design_prior)[1] > 0 or _monte_carlo(design, draws, seed)
    data: dict[str, Any] = {}
    if shape is None:
        mean, sd = _moments(design.design_prior)
        attrs.update(sensitivity_elicited_centre=mean, sensitivity_elicited_spread=sd)
        map_centres, map_spreads = np.zeros(0), np.zeros(0)
        grid = np.zeros((0, 0))
        map_attrs["note"] = "the design prior has no continuous part to move: no map"
        sentence = (f"The design prior ({design.design_prior.describe()}) has no continuous "
                    "part, so its centre and spread cannot be varied.")
    else:
        m, s = shape.centre, shape.spread
        attrs.update(sensitivity_elicited_centre=m, sensitivity_elicited_spread=s)
        prior_at = _prior_maker(shape)
        r = settings.map_centre_range
        map_centres = m + s * np.linspace(-r, r, settings.map_centres)
        map_spreads = s * np.geomspace(*settings.map_spread_range, settings.map_spreads)
        map_draws = min(draws, MAP_DRAWS) if monte_carlo else draws
        grid = np.full((map_centres.size, map_spreads.size), -1.0)
        worst = 0.0
        for i, c in enumerate(map_centres):
            for j, sd in enumerate(map_spreads):
                prior = prior_at(c, sd)
                if prior is not None:
                    grid[i, j], mcse = at_size(prior, map_draws)
                    worst = max(worst, mcse)
        if (grid < 0).any():
            map_attrs["note"] = ("-1 marks a centre and spread that no beta prior on the "
                                 "treatment rate gives")
        if monte_carlo:
            map_attrs["draws"] = map_draws
            map_attrs["largest_mcse"] = worst
            map_attrs["note"] = (f"Monte Carlo with {map_draws} draws per point (same seed "
                                 f"for every point); largest standard error {worst:.2g}")
        sentence, shift, shift_attrs = _centre_shift(design, shape, at_size, planned_n,
                                                     goals.get("assurance"), prior_at)
        if shift is not None:
            data["sensitivity_centre_shift"] = ((), shift, shift_attrs)
            sentence = _no_margin_sentence(sentence, shift / s, planned_n, goals, names, texts,
                                           values, sizes)
    attrs["sensitivity_sentence"] = sentence

    keys = list(goals)
    n_array = np.array(sizes, dtype=np.int64).reshape(len(names), len(keys))
    data.update({
        "sensitivity_assurance": (("variation",), np.array(values), {
            "long_name": "assurance at the planned size under each varied design prior"}),
        "sensitivity_ceiling": (("variation",), np.array(ceilings), {
            "long_name": "limit of assurance as n grows under each varied design prior"}),
        "sensitivity_prior_centre": (("variation",), np.array(centres), {
            "long_name": f"mean of the varied design prior ({scale})"}),
        "sensitivity_prior_spread": (("variation",), np.array(spreads), {
            "long_name": f"SD of the varied design prior ({scale})"}),
        "sensitivity_n": (("variation", "sensitivity_target"), n_array, {
            "long_name": "smallest total sample size reaching each target under each varied "
                         "design prior",
            "missing": f"-1 means no size up to {limit:,} ({SEARCH_FACTOR} times the planned "
                       "size, at most a million) reaches the target (or the varied "
                       "prior leaves too little mass on relevant effects for conditional "
                       "assurance)"}),
        "sensitivity_map": (("map_centre", "map_spread"), grid, map_attrs),
        "sensitivity_planned_n": ((), planned_n, {"long_name": "planned total sample size"}),
    })
    coords = {
        "variation": ("variation", np.array(names, dtype=object)),
        "variation_description": ("variation", np.array(texts, dtype=object)),
        "sensitivity_target": ("sensitivity_target", np.array(keys, dtype=object)),
        "map_centre": ("map_centre", map_centres, {"long_name": f"centre of the continuous "
                                                                f"part ({scale})"}),
        "map_spread": ("map_spread", map_spreads, {"long_name": f"SD of the continuous part "
                                                                f"({scale})"}),
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)


#: a planned size whose assurance falls below the target within this many prior SDs of
#: the centre has no margin: the sentence then says what a less favourable prior means
NO_MARGIN_SDS = 0.05


def _no_margin_sentence(sentence: str, shift_sds: float, n: int, goals: Mapping[str, float],
                        names: list[str], texts: list[str], values: list[float],
                        sizes: list[list[int]]) -> str:
    """At the smallest size reaching the target any worse prior misses it: say by how much.

    The centre shift is then a tiny number that tells a reader nothing; the less favourable
    centre variation (its assurance at the planned size and the size it would need) does.
    """
    target = goals.get("assurance")
    moved = [i for i, name in enumerate(names) if name in ("centre_down", "centre_up")]
    if target is None or abs(shift_sds) >= NO_MARGIN_SDS or not moved \
            or values[names.index("elicited")] < target:
        return sentence
    worse = min(moved, key=lambda i: values[i])
    k = list(goals).index("assurance")
    needed = sizes[worse][k]
    need = (f"{needed:,} patients would be needed to reach it" if needed > 0
            else "no size up to the search limit reaches it")
    return (f"{n:,} patients is the smallest size reaching the {target:.0%} assurance target, "
            "so any less favourable prior takes assurance below it: with the "
            f"{texts[worse].split(' (point masses')[0]}, assurance at {n:,} patients is "
            f"{values[worse]:.0%} and {need}.")


def _monte_carlo(design: TrialDesign, draws: int, seed: int | None) -> bool:
    ep = design.endpoint
    calc = ep.calculator(design.benefit_prior, design.benefit_rule, draws=100, seed=seed,
                         nuisance=design.sigma_prior)
    return bool(calc.monte_carlo)


def _prior_maker(shape: _Shape) -> Callable[[float, float], Prior | None]:
    """``prior_at(centre, spread)``: the prior whose moving part has this centre and SD."""
    if shape.beta is not None:
        return lambda c, sd: _beta_with(shape.beta, c, sd)
    m, s = shape.centre, shape.spread
    return lambda c, sd: shape.rebuilt(c - m, sd / s)


def _centre_shift(design: TrialDesign, shape: _Shape, at_size: _AtSize, n: int,
                  target: float | None, prior_at: Callable[[float, float], Prior | None]
                  ) -> tuple[str, float | None, dict[str, Any]]:
    """How far the centre must move (spread as elicited) for assurance to meet the target."""
    from ._roots import brent_root  # not scipy.optimize: 0.3 s of importing for one root

    m, s = shape.centre, shape.spread
    if target is None:
        return ("No assurance target is set, so no centre shift is computed.", None,
                {"note": "no assurance target"})
    up = design.endpoint.sign  # moving the centre this way raises assurance

    def gap(d: float) -> float:
        prior = prior_at(m + d, s)
        if prior is None:
            raise _OutOfReach
        return at_size(prior)[0] - target

    now = gap(0.0)
    toward = -up if now >= 0 else up  # the direction that crosses the target
    lo, step, hi = 0.0, 0.25 * s, None
    try:
        while abs(lo) < CENTRE_SEARCH_SDS * s:
            d = toward * min(abs(lo) + step, CENTRE_SEARCH_SDS * s)
            if (gap(d) >= 0) != (now >= 0):
                hi = d
                break
            lo, step = d, 2 * step
    except _OutOfReach:
        hi = None
    pct = f"{target:.0%}"
    size = f"{n:,} patients"
    if hi is None:
        if now >= 0:
            return (f"Assurance at {size} stays at or above the {pct} target however far "
                    f"the prior's centre moves within {CENTRE_SEARCH_SDS:g} prior SDs.",
                    None, {})
        return (f"Assurance at {size} stays below the {pct} target however far the prior's "
                f"centre moves within {CENTRE_SEARCH_SDS:g} prior SDs.", None, {})
    root = brent_root(gap, min(lo, hi), max(lo, hi), xtol=1e-12 * max(s, 1e-300),
                      rtol=1e-14, maxiter=200)
    shift = float(root)
    word = "down" if shift < 0 else "up"
    where = _from_to(design, m, m + shift)
    if now >= 0:
        sentence = (f"Assurance at {size} falls below the {pct} target if the prior's centre "
                    f"moves {word} by {abs(shift):.3g} ({where}), about {abs(shift) / s:.2g} "
                    "prior SDs.")
    else:
        sentence = (f"Assurance at {size} is below the {pct} target; it would reach it if the "
                    f"prior's centre moved {word} by {abs(shift):.3g} ({where}), about "
                    f"{abs(shift) / s:.2g} prior SDs.")
    attrs = {"long_name": "signed move of the prior's centre (prior scale) at which "
                          "assurance at the planned size equals the assurance target",
             "in_prior_sds": shift / s, "sentence": sentence}
    return sentence, shift, attrs


class _OutOfReach(Exception):
    """No prior of the family has the centre asked for (a beta prior on a rate)."""
