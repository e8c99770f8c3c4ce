"""A portfolio of trials: how many succeed, and the size worth paying for in each.

The arithmetic behind :class:`assurance.portfolio_plan.PortfolioPlan`, on plain numbers and
designs (no files, no report):

* :func:`poisson_binomial`: the exact distribution of the number of successes among
  independent trials with different probabilities of success (dynamic programming, one
  convolution per trial).
* :class:`ValueInputs` and :func:`net_value`: the expected net value of a trial of ``n``
  patients, ``V d P(n) - c n - F``, with ``d`` the discount factor of the time to readout.
* :func:`size_worth_paying`: the size that maximises the expected net value on a grid, and
  how flat the optimum is (the sizes whose expected net value lies within a stated share of
  the best).
* :func:`success_curves`: the probability of success of several designs over fine grids of
  sizes, one task per design, in this process or spread over workers or a Dask cluster
  through :func:`assurance.general.distribute.map_chunks`.

The trials are treated as independent given their design priors. Trials of the same drug
share its true effect, which makes their results move together: the distribution of the
number of successes is then wider than the Poisson-binomial says, although its mean (the
sum of the probabilities) is the same.

Examples
--------
>>> from assurance.program.portfolio import poisson_binomial
>>> [round(float(q), 3) for q in poisson_binomial([0.5, 0.8])]
[0.1, 0.5, 0.4]
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import check_int, check_real, check_real_array
from ..errors import AssuranceInputError

__all__ = ["ValueInputs", "SizeWorthPaying", "poisson_binomial", "net_value",
           "size_worth_paying", "best_sizes_under", "success_curves", "value_grid",
           "interval", "DEFAULT_FLAT_SHARE", "GRID_POINTS"]

#: the share of the best expected net value that counts as "about as good" (5%)
DEFAULT_FLAT_SHARE = 0.05
#: sizes in the fine grid of each trial's value curve
GRID_POINTS = 201
#: the longest time to readout accepted, in years
MAX_YEARS = 100.0


# ------------------------------------------------------------------------------------------
# the number of successes
# ------------------------------------------------------------------------------------------
def poisson_binomial(p: Sequence[float] | np.ndarray) -> np.ndarray:
    """The distribution of the number of successes among independent trials.

    Parameters
    ----------
    p
        Each trial's probability of success, in [0, 1] (at least one trial).

    Returns
    -------
    numpy.ndarray
        ``K + 1`` probabilities: of 0, 1, ..., K successes; they sum to 1.

    Notes
    -----
    Exact by dynamic programming: start from ``[1]`` and, for each trial, convolve with
    ``[1 - p_k, p_k]``: ``q_new[j] = q[j] (1 - p_k) + q[j - 1] p_k``. Each step is a
    mixture of two probability vectors, so no cancellation occurs and the result is accurate
    to rounding (Chen & Liu 1997, Statistica Sinica 7:875-892, describe this recursion).

    Examples
    --------
    >>> [round(float(q), 4) for q in poisson_binomial([0.2, 0.5, 0.9])]
    [0.04, 0.41, 0.46, 0.09]
    """
    probs = check_real_array(p, "p", "poisson_binomial", low=0.0, high=1.0)
    q = np.zeros(probs.size + 1)
    q[0] = 1.0
    for k, pk in enumerate(probs, start=1):
        q[1:k + 1] = q[1:k + 1] * (1.0 - pk) + q[:k] * pk
        q[0] *= 1.0 - pk
    return np.clip(q, 0.0, 1.0)


# ------------------------------------------------------------------------------------------
# value of a trial
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ValueInputs:
    """What a success is worth and what the trial costs (the user's own figures).

    Parameters
    ----------
    value_of_success
        The value of a successful trial at readout (any currency unit, > 0).
    cost_per_patient
        Cost of each patient enrolled (same unit, >= 0).
    fixed_cost
        Cost of running the trial whatever its size (same unit, >= 0).
    years_to_readout
        Years from the decision to the trial's result (>= 0); the value of success is
        discounted over them.
    discount_rate
        Annual discount rate in [0, 1): the value at readout is multiplied by
        ``(1 + rate) ** -years_to_readout``. Costs are counted at their face value.

    Examples
    --------
    >>> v = ValueInputs(100.0, cost_per_patient=0.05, years_to_readout=2,
    ...                 discount_rate=0.1)
    >>> round(v.discount_factor, 4), round(v.present_value, 2)
    (0.8264, 82.64)
    """

    value_of_success: float
    cost_per_patient: float = 0.0
    fixed_cost: float = 0.0
    years_to_readout: float = 0.0
    discount_rate: float = 0.0

    def __post_init__(self) -> None:
        owner = "ValueInputs"
        object.__setattr__(self, "value_of_success", check_real(
            self.value_of_success, "value_of_success", owner, low=0.0, low_open=True))
        object.__setattr__(self, "cost_per_patient", check_real(
            self.cost_per_patient, "cost_per_patient", owner, low=0.0))
        object.__setattr__(self, "fixed_cost", check_real(
            self.fixed_cost, "fixed_cost", owner, low=0.0))
        object.__setattr__(self, "years_to_readout", check_real(
            self.years_to_readout, "years_to_readout", owner, low=0.0, high=MAX_YEARS))
        object.__setattr__(self, "discount_rate", check_real(
            self.discount_rate, "discount_rate", owner, low=0.0, high=1.0, high_open=True))

    @property
    def discount_factor(self) -> float:
        """``(1 + discount_rate) ** -years_to_readout``."""
        return float((1.0 + self.discount_rate) ** -self.years_to_readout)

    @property
    def present_value(self) -> float:
        """The value of success discounted to the decision."""
        return self.value_of_success * self.discount_factor

    def scaled(self, factor: float) -> ValueInputs:
        """The same inputs with the value of success multiplied by ``factor`` (> 0)."""
        factor = check_real(factor, "factor", "ValueInputs.scaled", low=0.0, low_open=True)
        return ValueInputs(self.value_of_success * factor, self.cost_per_patient,
                           self.fixed_cost, self.years_to_readout, self.discount_rate)


def net_value(pos: Sequence[float] | np.ndarray, n: Sequence[int] | np.ndarray,
              values: ValueInputs) -> np.ndarray:
    """Expected net value of a trial at each size: ``V d P(n) - c n - F``.

    Parameters
    ----------
    pos
        Probability of success at each size, in [0, 1].
    n
        Total sizes (patients), the same length as ``pos``.
    values
        :class:`ValueInputs`.

    Returns
    -------
    numpy.ndarray
        The expected net value at each size, in the unit of the value inputs.

    Examples
    --------
    >>> net_value([0.5, 0.7], [100, 200], ValueInputs(100.0, cost_per_patient=0.1,
    ...                                                 fixed_cost=5.0)).tolist()
    [35.0, 45.0]
    """
    if not isinstance(values, ValueInputs):
        raise AssuranceInputError(
            f"The 'values' parameter of net_value must be a ValueInputs. Got {values!r} "
            "instead.")
    p = check_real_array(pos, "pos", "net_value", low=0.0, high=1.0)
    sizes = check_real_array(n, "n", "net_value", low=0.0)
    if sizes.size != p.size:
        raise AssuranceInputError(
            f"The 'n' parameter of net_value must have one size per probability ({p.size}). "
            f"Got {sizes.size} sizes instead.")
    return values.present_value * p - values.cost_per_patient * sizes - values.fixed_cost


@dataclass(frozen=True)
class SizeWorthPaying:
    """The size with the highest expected net value, and how flat that optimum is.

    Attributes
    ----------
    n_best, value_best, pos_best
        The size with the highest expected net value on the grid, that value and the
        probability of success there.
    n_low, n_high
        The smallest and largest sizes, in the unbroken run of the grid around ``n_best``,
        whose expected net value is at least ``value_best - share * |value_best|``.
    share
        The share of the best value that counts as "about as good".
    worth_paying
        Whether the best expected net value is above zero (else no size on the grid pays
        for itself with these inputs).
    at_edge
        ``"largest"`` or ``"smallest"`` when the best size is at an end of the grid (the
        true optimum may lie beyond it), else ``""``.
    """

    n_best: int
    value_best: float
    pos_best: float
    n_low: int
    n_high: int
    share: float
    worth_paying: bool
    at_edge: str = ""


def size_worth_paying(n: Sequence[int] | np.ndarray, pos: Sequence[float] | np.ndarray,
                      values: ValueInputs, *, share: float = DEFAULT_FLAT_SHARE
                      ) -> SizeWorthPaying:
    """The size on a grid that maximises the expected net value, and the flat range around it.

    Parameters
    ----------
    n
        Total sizes, increasing (at least two).
    pos
        Probability of success at each size.
    values
        :class:`ValueInputs`.
    share
        In (0, 1): sizes whose expected net value is within ``share * |best|`` of the best
        count as about as good (default 5%).

    Returns
    -------
    SizeWorthPaying

    Examples
    --------
    >>> import numpy as np
    >>> n = np.arange(100, 1001, 100)
    >>> pos = 1 - np.exp(-n / 300)
    >>> best = size_worth_paying(n, pos, ValueInputs(100.0, cost_per_patient=0.05))
    >>> best.n_best, best.n_low, best.n_high, best.worth_paying
    (600, 500, 700, True)
    """
    owner = "size_worth_paying"
    share = check_real(share, "share", owner, low=0.0, high=1.0, low_open=True, high_open=True)
    sizes = check_real_array(n, "n", owner, low=0.0, min_size=2)
    if np.any(np.diff(sizes) <= 0):
        raise AssuranceInputError(
            f"The 'n' parameter of {owner} must hold increasing sizes. Got {list(n)!r:.80} "
            "instead.")
    p = check_real_array(pos, "pos", owner, low=0.0, high=1.0)
    net = net_value(p, sizes, values)
    j = int(np.argmax(net))
    best = float(net[j])
    floor = best - share * abs(best)
    lo = j
    while lo > 0 and net[lo - 1] >= floor:
        lo -= 1
    hi = j
    while hi < net.size - 1 and net[hi + 1] >= floor:
        hi += 1
    edge = "largest" if j == net.size - 1 else "smallest" if j == 0 else ""
    return SizeWorthPaying(int(sizes[j]), best, float(p[j]), int(sizes[lo]), int(sizes[hi]),
                           share, best > 0, edge)


def best_sizes_under(n: Sequence[int] | np.ndarray, pos: Sequence[float] | np.ndarray,
                     values: ValueInputs, multipliers: Sequence[float]) -> list[SizeWorthPaying]:
    """:func:`size_worth_paying` with the value of success multiplied by each multiplier.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.arange(100, 2001, 100)
    >>> pos = 1 - np.exp(-n / 300)
    >>> [b.n_best for b in best_sizes_under(n, pos, ValueInputs(100.0, 0.05), [0.5, 2.0])]
    [400, 800]
    """
    factors = check_real_array(multipliers, "multipliers", "best_sizes_under", low=0.0,
                               low_open=True, min_size=0)
    return [size_worth_paying(n, pos, values.scaled(float(f))) for f in factors]


# ------------------------------------------------------------------------------------------
# probability of success over fine grids, one task per design
# ------------------------------------------------------------------------------------------
def value_grid(smallest: int, largest: int, *, include: Sequence[int] = (),
               points: int = GRID_POINTS) -> np.ndarray:
    """About ``points`` whole sizes from ``smallest`` to ``largest``, plus ``include``.

    Examples
    --------
    >>> value_grid(20, 220, points=5, include=[77]).tolist()
    [20, 70, 77, 120, 170, 220]
    """
    owner = "value_grid"
    smallest = check_int(smallest, "smallest", owner, low=1)
    largest = check_int(largest, "largest", owner, low=smallest + 1)
    points = check_int(points, "points", owner, low=2, high=100_000)
    grid = np.unique(np.round(np.linspace(smallest, largest, points)).astype(np.int64))
    extra = [int(v) for v in include if smallest <= int(v) <= largest]
    return np.unique(np.concatenate([grid, np.asarray(extra, dtype=np.int64)]))


@dataclass(frozen=True)
class _CurveTask:
    """One design's fine grid (picklable, for worker processes and Dask)."""

    design: Any
    sizes: tuple[int, ...]
    draws: int
    seed: int


def _curve(task: _CurveTask) -> tuple[np.ndarray, np.ndarray | None]:
    from ..planning import evaluate

    ds = evaluate(task.design, np.asarray(task.sizes, dtype=np.int64), draws=task.draws,
                  seed=task.seed)
    mcse = ds["assurance_mcse"].values.copy() if "assurance_mcse" in ds else None
    return ds["assurance"].values.copy(), mcse


def success_curves(designs: Sequence[Any], grids: Sequence[Sequence[int]], *,
                   draws: Sequence[int] | int = 20_000, seeds: Sequence[int] | int = 20260101,
                   executor: Any = None, progress: bool = False
                   ) -> list[tuple[np.ndarray, np.ndarray | None]]:
    """The probability of success of each design over its own grid of sizes.

    One task per design, run by :func:`assurance.general.distribute.map_chunks`: in this
    process (``executor=None``), in local worker processes, or on a Dask cluster (a
    scheduler address or client). The numbers do not depend on where the tasks run.

    Parameters
    ----------
    designs
        :class:`~assurance.TrialDesign` objects.
    grids
        One sequence of total sizes per design.
    draws, seeds
        Monte Carlo draws and seed (one for all, or one per design), used by designs that
        need simulation.
    executor
        As for :func:`~assurance.general.distribute.map_chunks`.
    progress
        Show progress over the tasks.

    Returns
    -------
    list of (numpy.ndarray, numpy.ndarray or None)
        Per design: the probability of success at each size of its grid (sorted, without
        repeats) and its Monte Carlo standard error (None when computed exactly).

    Examples
    --------
    >>> import assurance as asr
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0))
    >>> [(p.round(3).tolist(), se) for p, se in success_curves([d], [[100, 200]])]
    [([0.511, 0.692], None)]
    """
    owner = "success_curves"
    designs = list(designs)
    grids = [list(g) for g in grids]
    if len(grids) != len(designs):
        raise AssuranceInputError(
            f"The 'grids' parameter of {owner} must hold one grid per design "
            f"({len(designs)}). Got {len(grids)} instead.")
    k = len(designs)
    draw_list = [draws] * k if isinstance(draws, int | np.integer) else list(draws)
    seed_list = [seeds] * k if isinstance(seeds, int | np.integer) else list(seeds)
    if len(draw_list) != k or len(seed_list) != k:
        raise AssuranceInputError(
            f"The 'draws' and 'seeds' parameters of {owner} must be one whole number or one "
            f"per design ({k}). Got {draws!r:.60} and {seeds!r:.60} instead.")
    tasks = []
    for design, grid, d, s in zip(designs, grids, draw_list, seed_list, strict=True):
        sizes = tuple(int(v) for v in np.unique(np.asarray(grid, dtype=np.int64)))
        tasks.append(_CurveTask(design, sizes, int(d), int(s)))
    from ..general.distribute import map_chunks

    return map_chunks(_curve, tasks, executor, progress=progress,
                      label="portfolio: probability of success over sizes")


def interval(pos: float, mcse: float | None, times: float = 2.0) -> tuple[float, float]:
    """``pos ± times * mcse`` clipped to [0, 1]; a zero-width interval when exact.

    Examples
    --------
    >>> interval(0.5, 0.01), interval(0.99, 0.01), interval(0.3, None)
    ((0.48, 0.52), (0.97, 1.0), (0.3, 0.3))
    """
    if mcse is None or not math.isfinite(mcse):
        return float(pos), float(pos)
    return max(0.0, float(pos) - times * mcse), min(1.0, float(pos) + times * mcse)
