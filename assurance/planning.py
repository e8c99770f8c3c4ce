"""Evaluate a design over a grid of sample sizes, and solve for the n that reaches a target.

:func:`evaluate` returns an :class:`xarray.Dataset` with dimension ``n`` (total patients) and
an ``effect`` dimension for the power curve; :func:`solve_sample_size` finds the smallest n
for a target power, assurance or conditional assurance. Above the ceiling (the limit as n
grows) it searches every size up to the largest allowed for the highest value, and says
plainly whether a target is reached only through false positives or not at all.
Every returned figure is finite, or the call names the parameter that prevents it.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass
from functools import lru_cache
from typing import Any, Literal

import numpy as np

from ._validation import (
    MAX_DRAWS,
    MAX_TOTAL,
    check_choice,
    check_int,
    check_real,
    check_real_array,
)
from .compute.normal_outcome import Cut
from .design import TrialDesign
from .errors import AssuranceInputError, AssuranceWarning

__all__ = ["evaluate", "solve_sample_size", "SampleSizeAnswer", "Quantity"]

Quantity = Literal["power", "assurance", "conditional_assurance"]
QUANTITIES: tuple[str, ...] = ("power", "assurance", "conditional_assurance")
DEFAULT_DRAWS = 20_000
ProgressCallback = Callable[[int, int], None]


# ------------------------------------------------------------------------------------------
# one engine for both evaluation and solving
# ------------------------------------------------------------------------------------------
class _Calculator:
    """Computes every per-n quantity of a design for arrays of arm sizes."""

    def __init__(self, design: TrialDesign, draws: int, seed: int | None):
        self.design = design
        self.endpoint = design.endpoint
        self.rule = design.benefit_rule
        self.prior = design.benefit_prior
        self.relevant = (None if design.relevant_effect is None
                         else float(self.endpoint.to_benefit(design.relevant_effect)))
        self.cuts = [Cut(0.0)] + ([Cut(self.relevant, inclusive=True)]
                                  if self.relevant is not None else [])
        self.prob_relevant = design.prob_relevant()
        self.engine = design.endpoint.calculator(self.prior, self.rule, draws=draws, seed=seed,
                                                 nuisance=design.sigma_prior)
        self.monte_carlo = self.engine.monte_carlo
        if self.monte_carlo and self.prob_relevant is not None:
            expected = self.prob_relevant * draws
            if expected < 100:
                warnings.warn(
                    f"Only about {expected:.0f} of {draws} Monte Carlo draws fall where the "
                    f"effect is relevant (prior probability {self.prob_relevant:.3g}); "
                    "conditional assurance will be imprecise. Increase the draws.",
                    AssuranceWarning, stacklevel=3)

    def power(self, effect: float, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
        """Classical power at one natural-scale effect, planning nuisance values."""
        return self.engine.power(float(self.endpoint.to_benefit(effect)), n_t, n_c)

    def assurance(self, n_t: np.ndarray, n_c: np.ndarray) -> dict[str, np.ndarray]:
        """Assurance and its decomposition (plus standard errors under Monte Carlo)."""
        res = self.engine.success(n_t, n_c, self.cuts)
        out = {"assurance": res.success, "prob_success_and_benefit": res.joint[0]}
        if res.success_mcse is not None:
            out["assurance_mcse"] = res.success_mcse
            out["prob_success_and_benefit_mcse"] = res.joint_mcse[0]
        if self.relevant is not None:
            # P(relevant) is known exactly from the prior, so the conditional and the miss
            # probability are exact transforms of the joint (and of its standard error).
            joint = res.joint[1]
            out["prob_success_and_relevant"] = joint
            out["prob_miss_relevant"] = np.minimum(np.maximum(self.prob_relevant - joint, 0.0),
                                                   1.0)
            out["conditional_assurance"] = np.minimum(
                np.maximum(joint / self.prob_relevant, 0.0), 1.0)
            if self.monte_carlo:
                out["prob_success_and_relevant_mcse"] = res.joint_mcse[1]
                out["prob_miss_relevant_mcse"] = res.joint_mcse[1]
                out["conditional_assurance_mcse"] = res.joint_mcse[1] / self.prob_relevant
        return out

    def quantity(self, name: str, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
        if name == "power":
            return self.power(self.design.assumed_effect, n_t, n_c)
        return self.assurance(n_t, n_c)[name]


def _calculator(design: TrialDesign, draws: int, seed: int | None) -> _Calculator:
    """The design's calculator; an exact one (no Monte Carlo draws, so the same for every
    ``draws`` and ``seed``) is built once per design and kept on it."""
    kept = design._remember("exact_calculator", lambda: [])
    if kept:
        return kept[0]
    calc = _Calculator(design, draws, seed)
    if not calc.monte_carlo:
        kept.append(calc)
    return calc


# ------------------------------------------------------------------------------------------
# evaluate over a grid
# ------------------------------------------------------------------------------------------
def _check_sizes(design: TrialDesign, sizes: Any) -> np.ndarray:
    smallest = design.endpoint.smallest_total
    if isinstance(sizes, np.ndarray) and sizes.ndim == 1 and sizes.size \
            and sizes.dtype.kind in "iu":  # whole numbers already: range and order suffice
        arr = sizes.astype(np.int64)
        if smallest <= arr[0] and sizes[-1] <= MAX_TOTAL and (np.diff(arr) > 0).all():
            return arr  # sorted without repeats: what np.unique would return
    arr = check_real_array(sizes, "sizes", "evaluate", low=smallest, high=MAX_TOTAL)
    if np.any(arr != np.round(arr)):
        raise AssuranceInputError(
            f"The 'sizes' parameter of evaluate must hold whole numbers of patients. "
            f"Got {sizes!r} instead."
        )
    return np.unique(arr.astype(int))


def evaluate(
    design: TrialDesign,
    sizes: Sequence[int] | np.ndarray,
    *,
    draws: int = DEFAULT_DRAWS,
    seed: int | None = 20260101,
    progress: ProgressCallback | None = None,
) -> Any:
    """Power, assurance, ceiling and success decomposition for each total sample size.

    Parameters
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`).
    sizes
        Total numbers of patients (all arms), whole numbers at or above the smallest size
        the analysis allows. Arms are split by the allocation ratio.
    draws
        Monte Carlo draws, used only when the design has a prior on sigma.
    seed
        Seed for those draws; the same seed gives the same numbers.
    progress
        Optional callback ``progress(done, total)`` called as chunks of the grid finish.

    Returns
    -------
    xarray.Dataset
        Dimension ``n`` with coordinates ``n_treatment`` and ``n_control``; variables
        ``power`` (at the assumed effect), ``power_curve`` (``effect`` x ``n``),
        ``type_one_error`` (success probability at the rule's null value: no effect, the
        non-inferiority margin, or a posterior rule's reference value),
        ``assurance``, ``prob_success_and_benefit`` and, with a relevant effect,
        ``prob_success_and_relevant``, ``conditional_assurance``, ``prob_miss_relevant``;
        ``*_mcse`` Monte Carlo standard errors when sigma is uncertain; scalars ``ceiling``,
        ``prob_benefit``, ``prob_relevant``. ``attrs`` hold the design (JSON), seed, method
        and package version.

    Notes
    -----
    With a normal design prior ``N(m, v)`` and known sigma, assurance for the threshold
    ``c(n)`` is ``Phi((m - c) / sqrt(v + se^2))`` (O'Hagan, Stevens & Campbell 2005); the
    decomposition uses the bivariate normal of (effect, estimate).

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign, evaluate
    >>> design = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
    >>> ds = evaluate(design, [100, 200, 400])
    >>> bool((ds.assurance <= ds.ceiling).all())
    True
    """
    from . import __version__

    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of evaluate must be a TrialDesign. Got {design!r} instead."
        )
    _check_scale(design, "evaluate")
    n = _check_sizes(design, sizes)
    draws = check_int(draws, "draws", "evaluate", low=100, high=MAX_DRAWS)
    if seed is not None:
        seed = check_int(seed, "seed", "evaluate", low=0)
    calc = _calculator(design, draws, seed)
    n_t, n_c = design.endpoint.arm_sizes(n)

    chunks = np.array_split(np.arange(n.size), max(1, math.ceil(n.size / 25))) \
        if calc.monte_carlo else [np.arange(n.size)]
    parts: list[dict[str, np.ndarray]] = []
    for done, idx in enumerate(chunks, start=1):
        parts.append(calc.assurance(n_t[idx], n_c[idx]) if len(chunks) > 1
                     else calc.assurance(n_t, n_c))
        if progress is not None:
            progress(done, len(chunks))
    per_n = parts[0] if len(parts) == 1 else \
        {key: np.concatenate([p[key] for p in parts]) for key in parts[0]}

    effects = np.array(design.curve_effects())
    many = getattr(calc.engine, "powers", None)
    if many is not None:  # every effect and the null value in one call
        at = [float(calc.endpoint.to_benefit(e)) for e in effects]
        rows = many(np.array([*at, float(calc.rule.null_value)]), n_t, n_c)
        curve, type_one = rows[:-1], rows[-1]
    else:
        curve = np.vstack([calc.power(e, n_t, n_c) for e in effects])
        type_one = calc.engine.power(float(calc.rule.null_value), n_t, n_c)
    power = curve[int(np.flatnonzero(effects == design.assumed_effect)[0])]

    data_vars: dict[str, tuple[tuple[str, ...], Any]] = {
        "power": (("n",), power), "power_curve": (("effect", "n"), curve),
        "type_one_error": (("n",), type_one)}
    data_vars.update({key: (("n",), value) for key, value in per_n.items()})
    data_vars["ceiling"] = ((), design.ceiling())
    data_vars["prob_benefit"] = ((), design.prob_benefit())
    if design.relevant_effect is not None:
        data_vars["prob_relevant"] = ((), design.prob_relevant())
    _require_finite(design, {k: v for k, (_, v) in data_vars.items()}, n, "evaluate")
    coords: dict[str, tuple[tuple[str, ...], np.ndarray]] = {
        "n": (("n",), n), "n_treatment": (("n",), n_t), "n_control": (("n",), n_c),
        "effect": (("effect",), effects)}
    coords.update({k: (("n",), v) for k, v in design.endpoint.extra_coords(n_t, n_c).items()})
    attrs = {
        "title": design.title,
        "design": design.to_json(),
        "method": calc.engine.method(),
        "draws": draws if calc.monte_carlo else 0,
        "seed": -1 if seed is None else seed,
        "package_version": __version__,
    }
    return _dataset(data_vars, coords, attrs)


_LABELS = {
    "power": "classical power at the assumed effect",
    "power_curve": "classical power at each effect",
    "type_one_error": "P(success) when the true effect is the null value (type I error)",
    "assurance": "assurance: probability of success averaged over the design prior",
    "prob_success_and_benefit": "P(success and the treatment is truly better)",
    "prob_success_and_relevant": "P(success and the effect is clinically relevant)",
    "conditional_assurance": "P(success | effect is clinically relevant)",
    "prob_miss_relevant": "P(no success although the effect is clinically relevant)",
    "ceiling": "limit of assurance as n grows (false positives can lift a finite n above it)",
    "prob_benefit": "prior probability that the treatment is better",
    "prob_relevant": "prior probability that the effect is clinically relevant",
}


@lru_cache(maxsize=256)
def _long_name(name: str) -> str:
    base = name.removesuffix("_mcse")
    text = _LABELS.get(base, base)
    return f"Monte Carlo standard error of {text}" if name.endswith("_mcse") else text


def _dataset(data_vars: dict[str, tuple[tuple[str, ...], Any]],
             coords: dict[str, tuple[tuple[str, ...], np.ndarray]],
             attrs: dict[str, Any]) -> Any:
    """The results Dataset: data variables labelled, ``n`` and ``effect`` indexed.

    Every variable is already aligned on ``n`` and ``effect``, so the Dataset is assembled
    from ready-made variables and indexes (``Dataset._construct_direct``, how xarray itself
    builds Datasets internally) instead of the public constructor, which would re-check the
    alignment (two thirds of evaluate's time on a closed-form design). If that constructor
    is missing or changes signature in a later xarray, the public one builds the same
    Dataset (a test compares the two).
    """
    try:
        return _dataset_direct(data_vars, coords, attrs)
    except (AttributeError, TypeError):  # pragma: no cover - depends on the xarray version
        return _dataset_public(data_vars, coords, attrs)


def _dataset_public(data_vars: dict[str, tuple[tuple[str, ...], Any]],
                    coords: dict[str, tuple[tuple[str, ...], np.ndarray]],
                    attrs: dict[str, Any]) -> Any:
    import xarray as xr

    ds = xr.Dataset({k: (dims, v) for k, (dims, v) in data_vars.items()},
                    coords={k: (dims, v) for k, (dims, v) in coords.items()}, attrs=attrs)
    for name, var in ds.data_vars.items():
        var.attrs["long_name"] = _long_name(name)
    return ds


def _dataset_direct(data_vars: dict[str, tuple[tuple[str, ...], Any]],
                    coords: dict[str, tuple[tuple[str, ...], np.ndarray]],
                    attrs: dict[str, Any]) -> Any:
    import xarray as xr

    variables: dict[str, Any] = {}
    sizes: dict[str, int] = {name: len(value) for name, (dims, value) in coords.items()
                             if dims == (name,)}
    indexes: dict[str, Any] = {}
    for name, (dims, value) in data_vars.items():
        value = np.asarray(value, dtype=float)
        if value.shape != tuple(sizes.get(d, -1) for d in dims):  # never expected
            raise TypeError(f"{name}: dimensions {dims} do not match shape {value.shape}")
        variables[name] = xr.Variable(dims, value, {"long_name": _long_name(name)},
                                      fastpath=True)
    for name, (dims, value) in coords.items():
        value = np.asarray(value)
        if value.shape != tuple(sizes.get(d, -1) for d in dims):  # never expected
            raise TypeError(f"{name}: dimensions {dims} do not match shape {value.shape}")
        if dims == (name,):  # a dimension coordinate carries a pandas index
            # small grids (the usual case) share a cached index and its coordinate variable
            # (a shallow copy each time: own attrs and encoding, the same immutable data);
            # large ones are not kept
            index, made = (_index(name, value.tobytes(), value.dtype.str) if value.size <= 4096
                           else _index.__wrapped__(name, value.tobytes(), value.dtype.str))
            indexes[name] = index
            for key, var in made.items():
                variables[key] = var.copy(deep=False)
        else:
            variables[name] = xr.Variable(dims, value, fastpath=True)
    return xr.Dataset._construct_direct(variables, set(coords), sizes, dict(attrs), indexes)


@lru_cache(maxsize=16)
def _index(name: str, data: bytes, dtype: str) -> tuple[Any, dict[str, Any]]:
    """A pandas index of a dimension coordinate and the coordinate variables it makes;
    immutable, so shared by Datasets on the same sizes (an evaluation asked again on the
    same grid, as solving and planning do). Callers copy the variables (shallow) before use."""
    import pandas as pd
    from xarray.indexes import PandasIndex

    value = np.frombuffer(data, dtype=np.dtype(dtype)).copy()
    index = PandasIndex(pd.Index(value, name=name), name, coord_dtype=value.dtype,
                        fastpath=True)
    return index, index.create_variables()


# ------------------------------------------------------------------------------------------
# solve for n
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SampleSizeAnswer:
    """The smallest sample size that reaches a target, or why none does.

    ``ceiling`` is the limit of the quantity as n grows. ``highest`` and
    ``highest_n_total`` are filled when the target is at or above that limit: the solver
    then searches every size up to ``max_total`` for the highest value (false positives can
    lift it above the limit at a finite n) and reports it, with the size that gives it.
    """

    quantity: str
    target: float
    reached: bool
    n_total: int | None
    n_treatment: int | None
    n_control: int | None
    achieved: float | None
    achieved_mcse: float | None
    ceiling: float
    message: str
    highest: float | None = None
    highest_n_total: int | None = None

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def _ceiling_for(calc: _Calculator, quantity: str) -> float:
    design = calc.design
    if quantity == "power":
        return calc.rule.limit_success_at(float(design.endpoint.to_benefit(design.assumed_effect)))
    if quantity == "assurance":
        return design.ceiling()
    limit = design.success_limit(effect_above=calc.relevant, inclusive=True)
    return min(limit / calc.prob_relevant, 1.0)


#: Control-arm sizes tried (geometrically spaced) when looking for the highest value: about
#: ten per tenfold in n over a million patients; false-positive peaks span far more.
SCAN_POINTS = 64


def solve_sample_size(
    design: TrialDesign,
    target: float,
    *,
    quantity: Quantity = "assurance",
    max_total: int = 1_000_000,
    draws: int = DEFAULT_DRAWS,
    seed: int | None = 20260101,
) -> SampleSizeAnswer:
    """Smallest sample size at which ``quantity`` reaches ``target``.

    Sizes are searched on the control arm (whole patients), the treatment arm getting
    ``ceil(allocation * n_control)``; for one group, on the whole sample. Below the ceiling
    (the limit of the quantity as n grows) the search doubles until the target is met, then
    bisects, so that one patient fewer on control falls short. It assumes the probability
    rises with n, as it does for these rules in practical designs. :func:`evaluate` splits
    the returned total into the same arms.

    A target at or above the ceiling is reachable only where the quantity rises above its
    limit at a finite n. That happens through false positives: successes when the true
    effect is at or below the lowest effect at which the rule can be passed (a point mass
    just below the null, say), which fade as n grows. With a z or t test on a continuous
    outcome they add at most the test's level (1/2 at a minimum observed effect) times the
    prior probability of such effects, and a target above that bound is refused at once.
    Otherwise the solver evaluates sizes from the smallest to
    ``max_total`` (64 sizes spaced evenly on a log scale, then an interior peak refined to
    the patient), reports the highest value and where it lies
    (``highest``, ``highest_n_total``), and returns the smallest size reaching the target
    if the highest value does, saying that the target lies above the ceiling.

    Parameters
    ----------
    design
        The trial.
    target
        Required probability, in (0, 1).
    quantity
        ``"power"`` (at the assumed effect), ``"assurance"`` or ``"conditional_assurance"``
        (mean power over the prior restricted to relevant effects; needs a relevant effect).
    max_total
        Largest total sample size considered.
    draws, seed
        Monte Carlo settings when sigma is uncertain (the same draws serve every n);
        ``draws`` between 100 and 2,000,000.

    Returns
    -------
    SampleSizeAnswer
        ``reached`` is False, with the reason in ``message``, when no size up to
        ``max_total`` reaches the target.

    Raises
    ------
    AssuranceInputError
        For invalid inputs, and when the design's numbers are too extreme for a finite
        probability at some size (the message names the parameter).

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, PointMass, TrialDesign, solve_sample_size
    >>> d = TrialDesign(ContinuousEndpoint(sigma=1.0), PointMass(0.5))
    >>> solve_sample_size(d, 0.8, quantity="power").n_control  # Cohen's table: 64 per group
    64
    """
    owner = "solve_sample_size"
    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} instead."
        )
    _check_scale(design, owner)
    target = check_real(target, "target", owner, low=0, high=1, low_open=True, high_open=True)
    check_choice(quantity, "quantity", owner, QUANTITIES)
    if quantity == "conditional_assurance" and design.relevant_effect is None:
        raise AssuranceInputError(
            f"The 'quantity' parameter of {owner} can be 'conditional_assurance' only when the "
            "design has a relevant_effect. Got a design without one."
        )
    max_total = check_int(max_total, "max_total", owner, low=design.endpoint.smallest_total,
                          high=MAX_TOTAL)
    draws = check_int(draws, "draws", owner, low=100, high=MAX_DRAWS)
    if seed is not None:
        seed = check_int(seed, "seed", owner, low=0)
    calc = _calculator(design, draws, seed)
    ceiling = _ceiling_for(calc, quantity)
    label = quantity.replace("_", " ")
    endpoint = design.endpoint
    peak: tuple[float, int] | None = None  # (highest value, its control size) once scanned

    def totals(n_c: np.ndarray) -> np.ndarray:
        n_t_arr, n_c_arr = endpoint.sizes_from_control(np.asarray(n_c))
        return n_t_arr + n_c_arr

    def values_at(n_c: np.ndarray) -> np.ndarray:
        n_t_arr, n_c_arr = endpoint.sizes_from_control(np.asarray(n_c))
        values = np.asarray(calc.quantity(quantity, n_t_arr, n_c_arr), dtype=float)
        _require_finite(design, {quantity: values}, n_t_arr + n_c_arr, owner)
        return values

    def value_at(n_c: int) -> float:
        return float(values_at(np.array([n_c]))[0])

    def answer(reached: bool, n_c: int | None, message: str) -> SampleSizeAnswer:
        highest = None if peak is None else peak[0]
        at = None if peak is None else int(totals(np.array([peak[1]]))[0])
        if n_c is None:
            return SampleSizeAnswer(quantity, target, reached, None, None, None, None, None,
                                    ceiling, message, highest, at)
        n_t_arr, n_c_arr = endpoint.sizes_from_control(np.array([n_c]))
        value = values_at(np.array([n_c]))
        mcse = None
        if calc.monte_carlo and quantity != "power":
            mcse = float(calc.assurance(n_t_arr, n_c_arr)[f"{quantity}_mcse"][0])
        return SampleSizeAnswer(quantity, target, reached, int(n_t_arr[0] + n_c_arr[0]),
                                int(n_t_arr[0]), int(n_c_arr[0]), float(value[0]), mcse,
                                ceiling, message, highest, at)

    low = max(1, math.ceil(endpoint.smallest_total / endpoint.arms))
    while int(totals(np.array([low]))[0]) < endpoint.smallest_total:
        low += 1
    limit = max(_control_limit(design, max_total), low)

    def bisect(below: int, above: int) -> int:
        """Smallest size in (below, above] reaching the target, value(below) < target."""
        while above - below > 1:
            mid = (below + above) // 2
            if value_at(mid) >= target:
                above = mid
            else:
                below = mid
        return above

    if target < ceiling:
        if value_at(low) >= target:
            return answer(True, low, "Reached at the smallest size the analysis allows.")
        high = low
        while value_at(high) < target:
            if high >= limit:
                return answer(False, None,
                              f"Target {label} {target:g} needs more than {max_total} "
                              f"patients (ceiling {ceiling:.3f}: the limit as n grows).")
            low, high = high, min(2 * high, limit)
        return answer(True, bisect(low, high), f"Smallest size reaching {label} {target:g}.")

    # At or above the limit: only a finite n where false positives still count can reach it.
    edge = calc.rule.lowest_passable_effect()
    no_better = (f"no better than {float(endpoint.from_benefit(edge)) + 0.0:g}"
                 if math.isfinite(edge) else "at or below the lowest passable effect")
    false_positives = (f"false positives (successes when the true effect is {no_better}, "
                       "the least effect the rule can pass), which fade as n grows")
    ceiling_text = f"the ceiling {ceiling:.3f} (the limit as n grows)"
    bound = _false_positive_bound(calc, quantity)
    if bound is not None and target > bound:
        return answer(False, None,
                      f"Target {label} {target:g} is not reachable: no size can give more than "
                      f"{bound:.4f}, {ceiling_text} plus the most {false_positives} can add "
                      "(the test's level, or 1/2 at a minimum observed effect, times the "
                      "prior probability of such effects). Lower the target or revisit the "
                      "design.")
    grid = np.unique(np.geomspace(low, limit, SCAN_POINTS).round().astype(np.int64))
    grid = grid[(grid >= low) & (grid <= limit)]
    values = values_at(grid)
    best = int(np.argmax(values))
    peak = _refine_peak(value_at, grid, values, best)
    peak_total = int(totals(np.array([peak[1]]))[0])
    if peak[0] < target:
        if peak[0] > ceiling:
            why = (f"the highest {label} any size up to {max_total} patients gives is "
                   f"{peak[0]:.4f}, at {peak_total} patients, above {ceiling_text} only "
                   f"through {false_positives}")
        else:
            why = (f"no size up to {max_total} patients passes {ceiling_text}; the highest "
                   f"{label} is {peak[0]:.4f}, at {peak_total} patients")
        return answer(False, None,
                      f"Target {label} {target:g} is not reachable: {why}. Lower the target "
                      "or revisit the design.")
    sizes = np.append(grid, peak[1])
    values = np.append(values, peak[0])
    order = np.argsort(sizes, kind="stable")
    sizes, values = sizes[order], values[order]
    first = int(np.flatnonzero(values >= target)[0])
    n_c = int(sizes[0]) if first == 0 else bisect(int(sizes[first - 1]), int(sizes[first]))
    return answer(True, n_c,
                  f"Smallest size reaching {label} {target:g}, a target above {ceiling_text}: "
                  f"it is reached only through {false_positives}; the highest {label} is "
                  f"{peak[0]:.4f}, at {peak_total} patients.")


def _false_positive_bound(calc: _Calculator, quantity: str) -> float | None:
    """Most the quantity can reach at any n, when a z or t test on a continuous outcome
    decides: at a true effect no better than the lowest passable effect ``L`` the success
    probability is at most the one-sided level (``L`` the null) or 1/2 (``L`` a minimum
    observed effect above it) at every n (common practice), and at most 1 elsewhere. None
    for other rules and endpoints (an exact binary test's size can exceed its level; a
    hazard or rate ratio's standard error moves with the true effect)."""
    from .endpoints.continuous import ContinuousEndpoint
    from .rules.significance import Significance

    rule, design = calc.rule, calc.design
    if not isinstance(rule, Significance) or not isinstance(design.endpoint,
                                                            ContinuousEndpoint):
        return None
    edge = rule.lowest_passable_effect()
    if not math.isfinite(edge):
        return None
    share = rule.one_sided_alpha if edge == rule.null_value else 0.5
    if quantity == "power":
        effect = float(design.endpoint.to_benefit(design.assumed_effect))
        return 1.0 if effect > edge else share
    prior = calc.prior
    above = prior.prob_above(edge)
    if quantity == "assurance":
        return min(above + share * (1.0 - above), 1.0)
    relevant = prior.prob_above(calc.relevant, inclusive=True)
    if calc.relevant > edge:
        return 1.0
    return min((above + share * (relevant - above)) / calc.prob_relevant, 1.0)


def _refine_peak(value_at: Callable[[int], float], grid: np.ndarray, values: np.ndarray,
                 best: int) -> tuple[float, int]:
    """Highest value near grid point ``best``: ternary search on whole sizes between its
    neighbours (the quantity is assumed to have one peak there). At the largest size the
    quantity is still rising towards its limit: that size is the highest."""
    if best == grid.size - 1:
        return float(values[best]), int(grid[best])
    lo = int(grid[max(best - 1, 0)])
    hi = int(grid[min(best + 1, grid.size - 1)])
    top = (float(values[best]), int(grid[best]))
    while hi - lo > 2:
        a = lo + (hi - lo) // 3
        b = hi - (hi - lo) // 3
        va, vb = value_at(a), value_at(b)
        for v, n in ((va, a), (vb, b)):
            if v > top[0] or (v == top[0] and n < top[1]):
                top = (v, n)
        if va < vb:
            lo = a
        else:
            hi = b
    for n in range(lo, hi + 1):
        v = value_at(n)
        if v > top[0] or (v == top[0] and n < top[1]):
            top = (v, n)
    return top


def _control_limit(design: TrialDesign, max_total: int) -> int:
    ep = design.endpoint
    if ep.layout == "single_arm":
        return max_total
    return max(1, int(max_total / (1 + ep.allocation)))


# ------------------------------------------------------------------------------------------
# no quantity is returned NaN or infinite
# ------------------------------------------------------------------------------------------
#: Every finite number of a design (SDs, effects, prior parameters, margins; mixture weights
#: aside) must be at most 1e150 in size, and every scale (SD, prior scale or SD, rate) at
#: least 1e-150: the arithmetic squares and multiplies them, and beyond this range some
#: engines would overflow or underflow to a wrong but finite probability (found at scales
#: 1e300 and 1e-300) instead of a NaN that can be caught.
_HUGE, _TINY = 1e150, 1e-150
_SCALE_KEYS = frozenset({"sigma", "sd", "scale", "rate"})


def _check_scale(design: TrialDesign, owner: str) -> None:
    """Raise :class:`AssuranceInputError` naming the first number of the design out of range."""
    found = design._remember("extreme_parameter", lambda: _extreme_parameter(design))
    if found is None:
        return
    param, param_owner, shown, key = found
    purpose = f"for {owner} to compute finite probabilities"
    if isinstance(shown, str):  # a prior, shown by its description
        allowed = (f"have every number at most {_HUGE:g} in size and every scale at least "
                   f"{_TINY:g}")
        got = shown
    else:
        allowed = (f"be a number between {_TINY:g} and {_HUGE:g}" if key in _SCALE_KEYS
                   else f"be a number at most {_HUGE:g}") + " in size"
        got = repr(shown)
    raise AssuranceInputError(
        f"The '{param}' parameter of {param_owner} must {allowed} {purpose}. Got {got} "
        "instead.")


def _require_finite(design: TrialDesign, values: dict[str, Any], n_total: np.ndarray,
                    owner: str) -> None:
    """Raise :class:`AssuranceInputError` if any value is not finite (never expected once
    :func:`_check_scale` passed; a last guard so that NaN is never reported or compared)."""
    # probabilities lie in [0, 1], so their sum is finite exactly when every one is
    total = 0.0
    for v in values.values():
        total += np.add.reduce(v, axis=None) if isinstance(v, np.ndarray) else v
    if math.isfinite(total):
        return
    for name, value in values.items():
        arr = np.atleast_1d(np.asarray(value, dtype=float))
        if np.isfinite(arr).all():
            continue
        sizes = np.atleast_1d(n_total)
        bad = np.flatnonzero(~np.isfinite(arr))
        at = f" at n = {int(sizes[bad[0]])}" if sizes.size == arr.size else ""
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} gives a {name.replace('_', ' ')} that cannot "
            f"be computed in double precision{at}: its numbers must keep every standard "
            f"error, threshold and probability finite. Got {design.to_json()} instead.")


def _extreme_parameter(design: TrialDesign) -> tuple[str, str, Any, str] | None:
    """The first number of the design out of range (see ``_HUGE``, ``_TINY``): the
    parameter's name, its owner, its value (a prior as its description) and the key."""
    endpoint, rule = design.endpoint, design.rule
    # (parameter, owner, value shown, numbers looked at)
    candidates: list[tuple[str, str, Any, Any]] = []
    candidates += [(k, type(endpoint).__name__, v, {k: v})
                   for k, v in endpoint.to_dict().items()]
    for name in ("design_prior", "sigma_prior", "analysis_prior"):
        prior = getattr(design, name)
        if prior is not None:
            candidates.append((name, "TrialDesign", prior.describe(), prior.to_dict()))
    candidates += [(k, type(rule).__name__, v, {k: v}) for k, v in rule.to_dict().items()]
    for name in ("assumed_effect", "relevant_effect"):
        candidates.append((name, "TrialDesign", getattr(design, name), getattr(design, name)))
    candidates += [("power_effects", "TrialDesign", v, v) for v in design.power_effects]
    for name, owner, shown, value in candidates:
        for key, x in _numbers(value, name):
            if not math.isfinite(x):  # an infinite truncation bound means "no bound"
                continue
            if abs(x) > _HUGE or (key in _SCALE_KEYS and 0 < abs(x) < _TINY):
                return name, owner, shown, key
    return None


def _numbers(value: Any, key: str) -> list[tuple[str, float]]:
    """``(key, number)`` for every number inside ``value`` (mixture weights aside)."""
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return []
    if isinstance(value, int | float | np.integer | np.floating):
        return [(key, float(value))]
    if isinstance(value, dict):
        return [pair for k, v in value.items() if k != "weights" for pair in _numbers(v, k)]
    if isinstance(value, list | tuple):
        return [pair for v in value for pair in _numbers(v, key)]
    return []
