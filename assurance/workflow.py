"""The steps of one plan: solve each target, choose the sizes, evaluate, add zones and precision.

This is the work behind :func:`assurance.plan` and ``assurance plan``, written on the domain
objects alone (a :class:`~assurance.TrialDesign`, a :class:`~assurance.GoConsiderStop`, a
:class:`~assurance.PrecisionPlan`): it reads no files and writes none, and knows nothing of
the memo or the command line.

Examples
--------
>>> import assurance as asr
>>> from assurance.workflow import run_plan
>>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
...                          asr.Normal(4.0, 2.0))
>>> out = run_plan(design, {"assurance": 0.6}, sizes=[100, 200, 300])
>>> [int(n) for n in out.dataset.n], out.sample_sizes[0].n_total
([100, 140, 200, 300], 140)
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from ._validation import MAX_DRAWS, check_int, check_real, check_real_array
from .design import TrialDesign
from .errors import AssuranceInputError
from .planning import (
    DEFAULT_DRAWS,
    MAX_TOTAL,
    QUANTITIES,
    SampleSizeAnswer,
    evaluate,
    solve_sample_size,
)
from .precision.for_design import PrecisionPlan
from .rules.zones import GoConsiderStop

if TYPE_CHECKING:  # pragma: no cover
    from .precision.widths import PrecisionAnswer
    from .sensitivity import SensitivitySettings

__all__ = [
    "PlanResults",
    "run_plan",
    "default_sizes",
    "check_plan_inputs",
    "check_planned",
    "choose_planned",
    "DEFAULT_SEED",
    "ProgressCallback",
]

#: Seed used when none is given (the same as :func:`assurance.evaluate`'s).
DEFAULT_SEED = 20260101


#: ``progress(text)`` announces a step ("solving n for assurance 0.6");
#: ``progress(label, done, total)`` reports chunks of a long step ("Monte Carlo", 3, 8).
#: ``print`` fits.
ProgressCallback = Callable[..., Any]


@dataclass(frozen=True)
class PlanResults:
    """What :func:`run_plan` computes.

    Attributes
    ----------
    dataset
        The ``xarray.Dataset`` of :func:`assurance.evaluate` over the sizes, with the zone
        probabilities and the interval widths merged in when they were asked for.
    sample_sizes
        One :class:`~assurance.SampleSizeAnswer` per target, in the order of the targets.
    precision
        One :class:`~assurance.precision.PrecisionAnswer` per precision criterion, or the
        reason (a string) why a criterion is unavailable for this design.
    planned_n, planned_reason
        The size a decision is taken at (:func:`choose_planned`) and how it was chosen, in
        plain words.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> run_plan(design, {}, sizes=[100, 200]).sample_sizes
    ()
    """

    dataset: Any
    sample_sizes: tuple[SampleSizeAnswer, ...]
    precision: tuple[PrecisionAnswer | str, ...]
    planned_n: int = 0
    planned_reason: str = ""


def check_plan_inputs(
    design: Any,
    targets: Any,
    sizes: Any,
    zones: Any,
    precision: Any,
    draws: Any,
    seed: Any,
    progress: Any,
    *,
    owner: str,
) -> tuple[dict[str, float], np.ndarray | None, int, int]:
    """Check the inputs of a plan; return the cleaned targets, sizes, draws and seed.

    Every message names ``owner`` (the public function called), the parameter, the value
    and what is allowed.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
    >>> check_plan_inputs(design, {"power": 0.9}, [200, 100], None, None, 20000, 1, None,
    ...                   owner="plan")
    ({'power': 0.9}, array([100, 200]), 20000, 1)
    """
    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} instead.")
    cleaned: dict[str, float] = {}
    if targets is not None:
        if not isinstance(targets, Mapping):
            raise AssuranceInputError(
                f"The 'targets' parameter of {owner} must be a mapping from a quantity ("
                f"{', '.join(repr(q) for q in QUANTITIES)}) to a probability, such as "
                f"{{'assurance': 0.7}}. Got {targets!r} instead.")
        for key, value in targets.items():
            if key not in QUANTITIES:
                raise AssuranceInputError(
                    f"The 'targets' parameter of {owner} must have keys among "
                    f"{', '.join(repr(q) for q in QUANTITIES)}. Got the key {key!r} instead.")
            cleaned[key] = check_real(value, f"targets[{key!r}]", owner, low=0, high=1,
                                      low_open=True, high_open=True)
        if "conditional_assurance" in cleaned and design.relevant_effect is None:
            raise AssuranceInputError(
                f"The 'targets' parameter of {owner} can hold 'conditional_assurance' only when "
                "the design has a relevant_effect. Got a design without one.")
    grid = None
    if sizes is not None:
        smallest = design.endpoint.smallest_total
        arr = check_real_array(sizes, "sizes", owner, low=smallest, high=MAX_TOTAL)
        if np.any(arr != np.round(arr)):
            raise AssuranceInputError(
                f"The 'sizes' parameter of {owner} must hold whole numbers of patients, each "
                f">= {smallest}. Got {sizes!r} instead.")
        grid = np.unique(arr.astype(int))
    if zones is not None:
        if not isinstance(zones, GoConsiderStop):
            raise AssuranceInputError(
                f"The 'zones' parameter of {owner} must be a GoConsiderStop or None. "
                f"Got {zones!r} instead.")
        zones.check_direction(design.endpoint)
    if precision is not None and not isinstance(precision, PrecisionPlan):
        raise AssuranceInputError(
            f"The 'precision' parameter of {owner} must be a PrecisionPlan or None. "
            f"Got {precision!r} instead.")
    draws = check_int(draws, "draws", owner, low=100, high=MAX_DRAWS)
    seed = check_int(seed, "seed", owner, low=0)
    if progress is not None and not callable(progress):
        raise AssuranceInputError(
            f"The 'progress' parameter of {owner} must be a function such as print, or None. "
            f"Got {progress!r} instead.")
    return cleaned, grid, draws, seed


def run_plan(
    design: TrialDesign,
    targets: Mapping[str, float] | None = None,
    sizes: Sequence[int] | np.ndarray | None = None,
    *,
    zones: GoConsiderStop | None = None,
    precision: PrecisionPlan | None = None,
    draws: int = DEFAULT_DRAWS,
    seed: int = DEFAULT_SEED,
    progress: ProgressCallback | None = None,
    planned: int | None = None,
    sensitivity: SensitivitySettings | None = None,
    prior_origin: Any = None,
) -> PlanResults:
    """Solve every target, then evaluate the design over the sizes.

    Steps, in order: the smallest n for each target (:func:`assurance.solve_sample_size`);
    the size grid (``sizes``, or :func:`default_sizes` when None) with every solved n up to
    twice the largest size added; :func:`assurance.evaluate` over it; the go / consider /
    stop probabilities when ``zones`` is given; the posterior interval width and the n per
    precision criterion when ``precision`` is given.

    Parameters
    ----------
    design
        The trial.
    targets
        Quantity (``"power"``, ``"assurance"``, ``"conditional_assurance"``) -> required
        probability in (0, 1); solved in this order.
    sizes
        Total sample sizes to evaluate; None chooses about 50 round sizes.
    zones
        Optional three-zone rule.
    precision
        Optional precision plan.
    draws, seed
        Monte Carlo settings (used when the design needs simulation).
    progress
        Optional callback: ``progress(text)`` at each step, ``progress(label, done, total)``
        as chunks of a Monte Carlo evaluation finish.
    planned
        The total size a decision is taken at (None: chosen by :func:`choose_planned`);
        always evaluated.
    sensitivity
        How to vary the design prior (:class:`~assurance.sensitivity.SensitivitySettings`);
        None leaves the sensitivity results out.
    prior_origin
        What the design prior was built from (an earlier trial's
        :class:`~assurance.DiscountedEstimate` adds variations of its discounts).

    Returns
    -------
    PlanResults

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> out = run_plan(design, {"power": 0.9}, sizes=[100, 300])
    >>> out.sample_sizes[0].n_total, [int(n) for n in out.dataset.n]
    (264, [100, 264, 300])
    """
    targets, grid, draws, seed = check_plan_inputs(design, targets, sizes, zones, precision,
                                                   draws, seed, progress, owner="run_plan")
    say = progress if progress is not None else _quiet
    answers = []
    for quantity, target in targets.items():
        say(f"solving n for {quantity.replace('_', ' ')} {target:g}")
        answers.append(solve_sample_size(design, target, quantity=quantity, draws=draws, seed=seed))
    planned = check_planned(planned, design, owner="run_plan")
    if sensitivity is not None:
        from .sensitivity import SensitivitySettings

        if not isinstance(sensitivity, SensitivitySettings):
            raise AssuranceInputError(
                "The 'sensitivity' parameter of run_plan must be a SensitivitySettings or "
                f"None. Got {sensitivity!r} instead.")
    grid = grid if grid is not None else default_sizes(design, answers)
    solved = [a.n_total for a in answers if a.reached and a.n_total <= 2 * grid.max()]
    grid = np.unique(np.concatenate([grid, np.array(solved, dtype=int)]))
    planned_n, planned_reason = choose_planned(planned, answers, grid)
    grid = np.unique(np.append(grid, planned_n))
    say(f"evaluating {grid.size} sample sizes")
    chunks = None if progress is None else (
        lambda done, total: progress("Monte Carlo", done, total))
    ds = evaluate(design, grid, draws=draws, seed=seed, progress=chunks)
    if zones is not None:
        ds = _add_zones(ds, design, zones, grid, draws=draws, seed=seed, say=say)
    precision_answers: list[Any] = []
    if precision is not None:
        ds, precision_answers = _add_precision(ds, design, precision, seed=seed, say=say)
    if sensitivity is not None:
        ds = _add_sensitivity(ds, design, planned_n, targets, sensitivity, prior_origin,
                              draws=draws, seed=seed, say=say)
    if needs_power_check(design):
        checked = sorted({a.n_total for a in answers if a.reached} | {planned_n})
        say(f"simulating the Wald test at {len(checked)} size(s) to check the power formula")
        ds = add_power_check(ds, design, checked, seed=seed)
    return PlanResults(ds, tuple(answers), tuple(precision_answers), planned_n, planned_reason)


def check_planned(planned: Any, design: TrialDesign, *, owner: str) -> int | None:
    """Check a planned total size: None, or a whole number the analysis allows.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
    >>> check_planned(300, design, owner="plan")
    300
    """
    if planned is None:
        return None
    return check_int(planned, "planned", owner, low=design.endpoint.smallest_total,
                     high=MAX_TOTAL)


_QUANTITY_WORDS = {"assurance": "assurance", "conditional_assurance": "conditional assurance",
                   "power": "classical power"}


def choose_planned(planned: int | None, answers: Sequence[SampleSizeAnswer],
                   grid: np.ndarray) -> tuple[int, str]:
    """The size a decision is taken at, and how it was chosen, in plain words.

    ``planned`` when given; otherwise the smallest size reaching the assurance target, then
    the conditional assurance target, then the power target (the first reached); otherwise
    the largest size in ``grid``.

    Examples
    --------
    >>> import numpy as np
    >>> choose_planned(None, [], np.array([100, 200]))
    (200, 'the largest size evaluated (no target was set)')
    >>> choose_planned(150, [], np.array([100, 200]))
    (150, 'as set by the planner')
    """
    if planned is not None:
        return int(planned), "as set by the planner"
    for quantity in ("assurance", "conditional_assurance", "power"):
        for answer in answers:
            if answer.quantity == quantity and answer.reached:
                return int(answer.n_total), (
                    f"the smallest size reaching the {_QUANTITY_WORDS[quantity]} target of "
                    f"{answer.target:.0%}")
    reason = ("the largest size evaluated (no target was reached)" if answers
              else "the largest size evaluated (no target was set)")
    return int(np.max(grid)), reason


def _add_sensitivity(ds: Any, design: TrialDesign, planned_n: int, targets: Mapping[str, float],
                     settings: Any, origin: Any, *, draws: int, seed: int,
                     say: Callable[..., Any]) -> Any:
    from .sensitivity import prior_sensitivity

    say("sensitivity to the design prior")
    found = prior_sensitivity(design, planned_n, targets, settings, origin=origin,
                              draws=draws, seed=seed)
    attrs = dict(ds.attrs, **found.attrs)
    ds = ds.assign({name: found[name] for name in found.data_vars})
    ds = ds.assign_coords({name: found.coords[name] for name in found.coords
                           if name not in ds.coords})
    ds.attrs.update(attrs)
    return ds


#: Simulated trials per size when a count plan's power formula is checked: a Monte Carlo SE
#: of at most 0.0035 (at power 0.5; 0.0021 at 0.9), so a difference of half a percentage
#: point shows. Overdispersed counts are fitted by maximum likelihood trial by trial (a
#: bisection on the dispersion over every patient), about 40 times slower: 1,500 trials
#: (SE 0.0077 at power 0.9), enough to show a formula off by 1.5 points or more, and about
#: 2 s per size.
POWER_CHECK_TRIALS = {"poisson": 20_000, "negative_binomial": 1_500}
#: A simulated power this far from the formula (absolute) is shown beside it in the memo.
POWER_CHECK_SHOWN = 0.005


def needs_power_check(design: TrialDesign) -> bool:
    """Whether the plan checks its power formula by simulating the test: count endpoints
    analysed by the Wald test on the log rate ratio (an approximation of the test's own
    power) with a significance rule."""
    counts = sys.modules.get("assurance.endpoints.counts")
    if counts is None:  # never imported, so no count endpoint exists (and keep it unloaded)
        return False
    from .rules.significance import Significance

    ep = design.endpoint
    return (isinstance(ep, counts.CountEndpoint) and ep.test != "exact_conditional"
            and isinstance(design.rule, Significance))


def add_power_check(ds: Any, design: TrialDesign, sizes: Sequence[int], *, seed: int,
                    trials: int | None = None) -> Any:
    """Add the simulated power of the test beside the formula's at ``sizes`` (dimension
    ``checked_n``): ``power_check_simulated``, ``power_check_mcse``,
    ``power_check_formula``, at the assumed effect.

    Each size has its own random stream from ``seed``; the trials are analysed as the
    formula assumes (Poisson rates without overdispersion, the negative binomial fit with
    it; see :func:`assurance.endpoints.counts.simulate_rejection_rate`).
    """
    from .endpoints.counts import simulate_rejection_rate

    ep = design.endpoint
    analysis = "negative_binomial" if ep.overdispersion > 0 else "poisson"
    trials = POWER_CHECK_TRIALS[analysis] if trials is None else trials
    rows = []
    for n_total in sizes:
        n_t, n_c = ep.arm_sizes(np.array([int(n_total)]))
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(int(n_total),)))
        sim = simulate_rejection_rate(ep, float(design.assumed_effect), int(n_t[0]),
                                      int(n_c[0]), rule=design.rule, trials=trials, seed=rng,
                                      analysis=analysis)
        rows.append((sim.rejection_rate, sim.mcse, sim.predicted_power))
    values = np.array(rows, dtype=float).reshape(-1, 3)
    coords = {"checked_n": np.asarray(sizes, dtype=int)}
    out = ds.assign({
        "power_check_simulated": ("checked_n", values[:, 0]),
        "power_check_mcse": ("checked_n", values[:, 1]),
        "power_check_formula": ("checked_n", values[:, 2]),
    }).assign_coords(coords)
    out["power_check_simulated"].attrs["long_name"] = "simulated power of the test"
    out["power_check_formula"].attrs["long_name"] = "power by the formula"
    out.attrs["power_check_trials"] = int(trials)
    out.attrs["power_check_analysis"] = analysis
    return out


def _quiet(*_args: Any) -> None:
    return None


def _add_zones(ds: Any, design: TrialDesign, zones: GoConsiderStop, sizes: np.ndarray, *,
               draws: int, seed: int, say: Callable[..., Any]) -> Any:
    import xarray as xr

    from .rules.zones import evaluate_zones

    say("go / consider / stop probabilities")
    probabilities = evaluate_zones(design, zones, sizes, draws=draws, seed=seed)
    attrs = dict(ds.attrs, zones=probabilities.attrs["zones"])
    ds = xr.merge([ds, probabilities], combine_attrs="drop", compat="override", join="outer")
    ds.attrs.update(attrs)
    return ds


def _add_precision(ds: Any, design: TrialDesign, plan: PrecisionPlan, *, seed: int,
                   say: Callable[..., Any]) -> tuple[Any, list[Any]]:
    from .precision.for_design import precision_model_for
    from .precision.widths import interval_width_curve, solve_precision_n

    say("posterior interval width against n")
    model = precision_model_for(design)
    common = {"coverage": plan.coverage, "interval": plan.interval,
              "likely_share": plan.likely_share, "seed": seed}
    widths = interval_width_curve(model, ds.n.values, length=plan.length, **common)
    widths = widths.drop_vars(["n_treatment", "n_control"])
    attrs = dict(ds.attrs, precision=f"{plan.coverage:g} {plan.interval.replace('_', '-')}"
                 f" intervals, target length {plan.length:g}; {widths.attrs['method']}")
    ds = ds.assign({name: widths[name] for name in widths.data_vars})
    ds.attrs.update(attrs)
    answers: list[Any] = []
    for criterion in plan.criteria:
        say(f"solving n for precision ({criterion})")
        try:
            answers.append(solve_precision_n(model, length=plan.length, criterion=criterion,
                                             **common))
        except ValueError as exc:  # e.g. WOC unavailable by simulation: say so
            answers.append(str(exc))
    return ds, answers


def default_sizes(design: TrialDesign, answers: Sequence[SampleSizeAnswer]) -> np.ndarray:
    """About 50 evenly spaced round sizes up to 1.5 times the largest solved n.

    The step is 1, 2 or 5 times a power of ten. With no target reached, the grid reaches
    1.5 times the n for classical power 0.9 (or 1500 when even that is out of reach).

    Parameters
    ----------
    design
        The trial (its smallest allowed size bounds the grid from below).
    answers
        Solved targets; those reached set the top of the grid.

    Returns
    -------
    numpy.ndarray
        Whole total sample sizes, increasing.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> grid = default_sizes(design, [asr.solve_sample_size(design, 0.6)])
    >>> int(grid[0]), int(grid[-1]), grid.size
    (5, 210, 42)
    """
    reached = [a.n_total for a in answers if a.reached]
    if not reached:
        fallback = solve_sample_size(design, 0.9, quantity="power")
        reached = [fallback.n_total] if fallback.reached else [1000]
    high = max(1.5 * max(reached), 20.0)
    raw_step = high / 50
    magnitude = 10 ** math.floor(math.log10(raw_step))
    step = next(m * magnitude for m in (1, 2, 5, 10) if m * magnitude >= raw_step)
    step = max(int(step), 1)
    grid = np.arange(step, high + step, step).astype(int)
    return grid[grid >= design.endpoint.smallest_total]
