"""A portfolio of trials: each trial's probability of success, how many will succeed, and
the size worth paying for in each.

:func:`plan_portfolio` (from plans or designs made in Python) and
:meth:`PortfolioPlan.from_file` (a portfolio file naming design files; see
:mod:`assurance.design_file.portfolio_file`) give the same :class:`PortfolioPlan`. It holds,
per trial, the probability of success at the size counted (exact, or with its Monte Carlo
interval), the exact distribution of the number of successes (Poisson-binomial, trials
independent given their priors) and, where the user gave value inputs, the expected net
value against the size, its maximiser and how flat it is. It writes an output folder with
tables, a netCDF file, figures and a memo (:meth:`PortfolioPlan.write`).

The value inputs are the user's; the expected net value is a planning aid, not a valuation.

Examples
--------
>>> import assurance as asr
>>> from assurance.program.portfolio import ValueInputs
>>> a = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
...                     asr.Normal(4.0, 2.0), title="A")
>>> b = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
...                     asr.Normal(3.0, 2.0), title="B")
>>> p = plan_portfolio([a, b], sizes=[200, 300],
...                    values=[ValueInputs(100.0, cost_per_patient=0.05), None])
>>> round(p.expected_successes, 3), p.trials[0].best.n_best > 0
(1.317, True)
"""

from __future__ import annotations

import csv
import os
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from .errors import AssuranceInputError
from .planner import DesignSource, _check_overwrite, _utc_now
from .program.portfolio import (
    DEFAULT_FLAT_SHARE,
    SizeWorthPaying,
    ValueInputs,
    best_sizes_under,
    interval,
    net_value,
    poisson_binomial,
    size_worth_paying,
    success_curves,
    value_grid,
)

__all__ = ["PortfolioPlan", "PortfolioTrial", "PortfolioSettings", "plan_portfolio"]

#: how the table names an exact probability of success
EXACT = "exact (quadrature)"

#: a chosen value curve is extended (its largest size doubled) at most this many times
#: while its best size, or the flat range around it, reaches its largest size; never beyond
#: _LARGEST_CHOSEN patients
_EXTEND_ROUNDS = 3
_LARGEST_CHOSEN = 200_000
#: sizes added each time a chosen value curve is extended
_GRID_MORE = 101

_ENDPOINT_WORDS = {"ContinuousEndpoint": "continuous", "BinaryEndpoint": "binary",
                   "SurvivalEndpoint": "time to event", "CountEndpoint": "counts"}


@dataclass(frozen=True, eq=False)
class PortfolioTrial:
    """One trial of a portfolio, computed.

    Attributes
    ----------
    name
        The trial's name in the portfolio.
    plan
        Its :class:`~assurance.Plan` (or :class:`~assurance.ModelPlan`, or
        :class:`~assurance.ProgramPlan` for a development program).
    n
        The total size counted in the portfolio (a program: its expected number of
        patients over both phases).
    pos, pos_mcse
        Probability of success at ``n`` and its Monte Carlo standard error (None: exact).
    curve_n, curve_pos, curve_mcse
        The probability of success over a fine grid of sizes (the simulated sizes of an
        analysis model), with its Monte Carlo standard error (None: exact).
    values
        The user's :class:`~assurance.program.portfolio.ValueInputs`, or None.
    best, under
        The size worth paying for (None without values), and the same with the value of
        success multiplied by each of the settings' ``value_multipliers``.
    n_target, target
        The smallest size reaching the design's assurance target and that target (None
        when the design has none or it is not reached).
    """

    name: str
    plan: Any = field(repr=False)
    n: int
    pos: float
    pos_mcse: float | None
    curve_n: np.ndarray = field(repr=False)
    curve_pos: np.ndarray = field(repr=False)
    curve_mcse: np.ndarray | None = field(default=None, repr=False)
    values: ValueInputs | None = None
    best: SizeWorthPaying | None = None
    under: tuple[SizeWorthPaying, ...] = ()
    n_target: int | None = None
    target: float | None = None

    @property
    def exact(self) -> bool:
        """Whether the probability of success is exact (closed form or quadrature)."""
        return self.pos_mcse is None

    @property
    def interval(self) -> tuple[float, float]:
        """``pos`` plus and minus two Monte Carlo standard errors (zero width when exact)."""
        return interval(self.pos, self.pos_mcse)

    @property
    def endpoint(self) -> str:
        """The kind of endpoint, in plain words."""
        if hasattr(self.plan, "model"):
            return "analysis model (simulated)"
        if _is_program(self.plan):
            return "program: phase 2 then phase 3"
        return _ENDPOINT_WORDS.get(type(self.plan.design.endpoint).__name__, "other")

    @property
    def net_values(self) -> np.ndarray | None:
        """Expected net value over ``curve_n`` (None without value inputs)."""
        if self.values is None:
            return None
        return net_value(self.curve_pos, self.curve_n, self.values)

    def net_value_at(self, n: int) -> float | None:
        """Expected net value at a size of the curve (None without values)."""
        if self.values is None:
            return None
        j = int(np.searchsorted(self.curve_n, n))
        if j >= self.curve_n.size or int(self.curve_n[j]) != int(n):
            return None
        return float(net_value([self.curve_pos[j]], [n], self.values)[0])


@dataclass(frozen=True)
class PortfolioSettings:
    """What a portfolio plan was asked to compute.

    Examples
    --------
    >>> PortfolioSettings().flat_share
    0.05
    """

    flat_share: float = DEFAULT_FLAT_SHARE
    value_multipliers: tuple[float, ...] = (0.5, 2.0)
    value_unit: str | None = None
    scheduler: str | None = None


@dataclass(frozen=True, eq=False, repr=False)
class PortfolioPlan:
    """A computed portfolio: its trials, the distribution of successes, the sizes worth
    paying for.

    Make one with :func:`plan_portfolio` or :meth:`PortfolioPlan.from_file`.

    Attributes
    ----------
    title
        The portfolio's name.
    trials
        One :class:`PortfolioTrial` per trial, in the order given.
    results
        ``xarray.Dataset``: dimension ``trial`` (probability of success, interval, sizes),
        ``successes`` (the distribution of the number of successes), ``point`` (the curves
        over sizes, long format: ``point_trial`` is the trial's position, ``point_n`` the
        size), ``value_trial`` and ``multiplier`` (the sizes worth paying for, for the
        trials with value inputs; ``value_point_trial`` is a position along
        ``value_trial``); see :meth:`write` for the files.
    settings
        :class:`PortfolioSettings`.
    source
        The portfolio file (a :class:`~assurance.planner.DesignSource`), when read from one.
    made_by, created
        The command or call that made the plan, and when (UTC, ISO 8601).
    """

    title: str
    trials: tuple[PortfolioTrial, ...]
    results: Any
    settings: PortfolioSettings = field(default_factory=PortfolioSettings)
    source: DesignSource | None = None
    made_by: str | None = None
    created: str = field(default_factory=lambda: _utc_now())

    # --------------------------------------------------------------------------------------
    @property
    def pos(self) -> np.ndarray:
        """Each trial's probability of success at its counted size."""
        return np.array([t.pos for t in self.trials])

    @property
    def exact(self) -> bool:
        """Whether every trial's probability of success is exact."""
        return all(t.exact for t in self.trials)

    @property
    def expected_successes(self) -> float:
        """The expected number of successes (the sum of the probabilities)."""
        return float(self.results["expected_successes"])

    @property
    def distribution(self) -> np.ndarray:
        """P(0), ..., P(K successes): the Poisson-binomial distribution."""
        return np.asarray(self.results["prob_successes"].values)

    @property
    def input_paths(self) -> tuple[Path, ...]:
        """The portfolio file and every design file it names (never replaced by an output
        folder)."""
        paths: list[Path] = []
        if self.source is not None:
            paths.append(Path(self.source.path))
        for trial in self.trials:
            paths += [Path(p) for p, _ in _sources_of(trial.plan)]
        return tuple(dict.fromkeys(paths))

    # --------------------------------------------------------------------------------------
    @classmethod
    def from_file(cls, path: str | os.PathLike[str], *, scheduler: Any = None,
                  progress: bool = False) -> PortfolioPlan:
        """Read a portfolio file, plan every trial it names, and compute the portfolio.

        Parameters
        ----------
        path
            The portfolio file (see :mod:`assurance.design_file.portfolio_file`).
        scheduler
            A Dask scheduler address (or client) to spread the work over: the curves of the
            built-in endpoints and the simulated trials of analysis models; None runs
            everything in this process.
        progress
            Show progress on a terminal.

        Raises
        ------
        DesignFileError
            When the portfolio file or a design file it names has problems; each is named
            with its key and its portfolio entry.
        """
        from .design_file.portfolio_file import read_portfolio_file

        if not isinstance(path, str | os.PathLike):
            raise AssuranceInputError(
                "The 'path' parameter of PortfolioPlan.from_file must be a file path (str or "
                f"pathlib.Path). Got {path!r} instead.")
        spec = read_portfolio_file(Path(path))
        plans = [_plan_from_spec(t, scheduler, progress) for t in spec.trials]
        made = plan_portfolio(
            plans, values=[t.values for t in spec.trials], names=[t.name for t in spec.trials],
            sizes=[t.n for t in spec.trials], largest_n=[t.largest_n for t in spec.trials],
            flat_share=spec.flat_share, value_multipliers=spec.value_multipliers,
            value_unit=spec.value_unit, title=spec.title, scheduler=scheduler,
            progress=progress)
        return replace(made, source=DesignSource(Path(path), spec.content, spec.record),
                       made_by=f"assurance.PortfolioPlan.from_file({str(path)!r})")

    # --------------------------------------------------------------------------------------
    def write(self, out: str | os.PathLike[str], *, overwrite: bool = False,
              formats: Sequence[str] = ("png",)) -> Path:
        """Write the output folder: tables, results, figures, memo and copies of the inputs.

        ``trials.csv`` (probability of success per trial), ``successes.csv`` (the number of
        successes), ``curves.csv`` (probability of success and expected net value against
        the size), ``size_worth_paying.csv`` and ``value_sensitivity.csv`` (with value
        inputs), ``results.nc``, ``figures/``, ``memo.html``, ``portfolio_as_given.toml``
        and ``designs_as_given/`` (byte-for-byte copies of the inputs). Written atomically;
        an existing folder is replaced only with ``overwrite`` (see
        :func:`assurance.report.output_folder.write_outputs`).

        Examples
        --------
        >>> import tempfile, pathlib
        >>> import assurance as asr
        >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                     asr.Normal(4.0, 2.0), title="A")
        >>> p = plan_portfolio([d], sizes=[200])
        >>> with tempfile.TemporaryDirectory() as folder:
        ...     out = p.write(pathlib.Path(folder) / "portfolio")
        ...     print((out / "memo.html").is_file(), (out / "trials.csv").is_file())
        True True
        """
        from .report.output_folder import FIGURE_FORMATS, write_outputs

        _check_overwrite(overwrite, "PortfolioPlan.write")
        chosen = (formats,) if isinstance(formats, str) else formats
        if not isinstance(chosen, Sequence) or not chosen or \
                any(f not in FIGURE_FORMATS for f in chosen):
            raise AssuranceInputError(
                "The 'formats' parameter of PortfolioPlan.write must be one or more of 'png', "
                f"'svg'. Got {formats!r} instead.")
        return write_outputs(out, self, overwrite=overwrite, formats=tuple(chosen))

    def write_into(self, tmp: Path, formats: tuple[str, ...]) -> None:
        """Write every file of the output folder into the staging folder ``tmp`` (called by
        :func:`assurance.report.output_folder.write_outputs`)."""
        from .report.plan_figures import start_figure_files
        from .report.portfolio_figures import portfolio_figure_makers
        from .report.portfolio_memo import write_portfolio_memo

        tmp = Path(tmp)
        # drawn (on other cores where it can) while the tables are written
        finish_figures = start_figure_files(self, tmp, formats, makers=portfolio_figure_makers)
        _write_tables(self, tmp)
        self.results.to_netcdf(tmp / "results.nc", engine="scipy")
        if self.source is not None:
            (tmp / "portfolio_as_given.toml").write_bytes(self.source.content)
        copies = tmp / "designs_as_given"
        for i, trial in enumerate(self.trials, start=1):
            for j, (path, content) in enumerate(_sources_of(trial.plan)):
                copies.mkdir(exist_ok=True)
                part = "" if j == 0 else f"-{j}"
                (copies / f"{i:02d}{part}-{Path(path).name}").write_bytes(content)
        write_portfolio_memo(self, tmp / "memo.html", rendered=finish_figures())

    def write_memo(self, path: str | os.PathLike[str], *, overwrite: bool = False) -> Path:
        """Write the portfolio memo alone (one self-contained HTML file)."""
        from .report.portfolio_memo import write_portfolio_memo

        _check_overwrite(overwrite, "PortfolioPlan.write_memo")
        return write_portfolio_memo(self, path, overwrite=overwrite)

    def figures(self) -> dict[str, Any]:
        """The memo's figures, as matplotlib figures: ``"portfolio"``, ``"success_curves"``
        and, with value inputs, ``"net_value"``."""
        from .report.portfolio_figures import portfolio_figure_makers

        return {name: make() for name, make in portfolio_figure_makers(self).items()}

    def summary(self) -> str:
        """A few plain lines: the expected number of successes and each trial's numbers.

        Examples
        --------
        >>> import assurance as asr
        >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                     asr.Normal(4.0, 2.0), title="A")
        >>> print(plan_portfolio([d], sizes=[200], title="P").summary().splitlines()[2])
          A: 200 patients, probability of success 0.692 (exact (quadrature))
        """
        from .report._files import printable  # names shown escaped on a terminal

        k = len(self.trials)
        q = self.distribution
        how = "exact" if self.exact else "from estimated probabilities"
        lines = [printable(self.title),
                 f"  {k} trial{'s' if k != 1 else ''}: expected successes "
                 f"{self.expected_successes:.2f} of {k} ({how}); P(at least one) "
                 f"{1 - q[0]:.3f}; P(all) {q[-1]:.3f}"]
        unit = f" {self.settings.value_unit}" if self.settings.value_unit else ""
        for t in self.trials:
            how = EXACT if t.exact else f"\u00b1 {2 * t.pos_mcse:.3f}, 2 Monte Carlo SE"
            size = f"{t.n} expected patients (a program)" if _is_program(t.plan) \
                else f"{t.n} patients"
            line = f"  {printable(t.name)}: {size}, probability of success {t.pos:.3f} ({how})"
            if t.best is not None:
                b = t.best
                line += (f"; highest expected net value {b.value_best:,.1f}{unit} at {b.n_best}"
                         f" patients (within {b.share:.0%}: {b.n_low}-{b.n_high})")
                if not b.worth_paying:
                    line += ", no size pays for itself"
            if t.n_target is not None:
                line += f"; assurance {t.target:g} reached at {t.n_target}"
            lines.append(line)
        lines.append("  Trials are treated as independent given their design priors.")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (f"PortfolioPlan({self.title!r}: {len(self.trials)} trials, expected successes "
                f"{self.expected_successes:.2f})")


# ------------------------------------------------------------------------------------------
# making one
# ------------------------------------------------------------------------------------------
def _plan_from_spec(entry: Any, scheduler: Any, progress: bool) -> Any:
    """The plan of one design file (the prior sensitivity is left out: the portfolio does
    not show it), or of a program file."""
    from .model_plan import ModelPlan
    from .planner import Plan

    if entry.kind == "program":
        from .program_plan import ProgramPlan

        return ProgramPlan.from_file(entry.design)
    spec = entry.spec
    if spec.model is not None:
        if scheduler is not None:
            spec = replace(spec, simulation=spec.simulation.model_copy(
                update={"scheduler": str(scheduler)}))
        return ModelPlan.from_spec(spec, progress=progress)
    return Plan.from_spec(replace(spec, sensitivity=None))


def _is_program(p: Any) -> bool:
    return hasattr(p, "program") and hasattr(p, "headline")


def _sources_of(p: Any) -> list[tuple[Path, bytes]]:
    """The files a trial's plan was read from (a program: its file and design files)."""
    found = []
    for src in [getattr(p, "source", None), *getattr(p, "design_sources", ())]:
        if src is not None and src.content:
            found.append((Path(src.path), bytes(src.content)))
    return found


def _as_list(value: Any, k: int, name: str, owner: str) -> list[Any]:
    if value is None:
        return [None] * k
    if isinstance(value, str | bytes) or not isinstance(value, Sequence):
        return [value] * k
    items = list(value)
    if len(items) != k:
        raise AssuranceInputError(
            f"The '{name}' parameter of {owner} must hold one entry per trial ({k}). Got "
            f"{len(items)} instead.")
    return items


def plan_portfolio(
    plans_or_designs: Sequence[Any],
    values: ValueInputs | Sequence[ValueInputs | None] | None = None,
    *,
    names: Sequence[str] | None = None,
    sizes: Sequence[int | None] | None = None,
    largest_n: Sequence[int | None] | None = None,
    flat_share: float = DEFAULT_FLAT_SHARE,
    value_multipliers: Sequence[float] = (0.5, 2.0),
    value_unit: str | None = None,
    title: str = "Portfolio",
    scheduler: Any = None,
    progress: bool = False,
) -> PortfolioPlan:
    """Compute a portfolio: probabilities of success, number of successes, sizes worth paying.

    Parameters
    ----------
    plans_or_designs
        The trials: :class:`~assurance.Plan` or :class:`~assurance.ModelPlan` objects,
        :class:`~assurance.TrialDesign` objects (planned here without prior sensitivity),
        or :class:`~assurance.ProgramPlan` objects (a development program counts as one
        success when its phase 3 succeeds after a go; no value inputs or sizes for it).
    values
        The user's :class:`~assurance.program.portfolio.ValueInputs`: one for every trial,
        one per trial (None where there is none), or None.
    names
        The trials' names (default: each design's title).
    sizes
        The total size counted per trial (None: the plan's planned size). An analysis
        model's size must be one of its simulated sizes.
    largest_n
        Per trial, the largest size on the curve of expected net value (None: chosen,
        twice the larger of the counted size and the size reaching the assurance target,
        at least the plan's largest size, and doubled up to three times while the best
        size or the flat range around it reaches the largest).
    flat_share
        Sizes whose expected net value is within this share of the best are reported as
        the flat range (default 5%).
    value_multipliers
        The best size is also found with the value of success multiplied by these.
    value_unit
        The unit of values and costs (for the memo), e.g. ``"million EUR"``.
    title
        The portfolio's name.
    scheduler
        None (this process), a number of local worker processes, or a Dask scheduler
        address or client: the curves of the trials are computed as one task per trial
        (:func:`assurance.general.distribute.map_chunks`).
    progress
        Show progress on a terminal.

    Returns
    -------
    PortfolioPlan

    Notes
    -----
    The number of successes has the Poisson-binomial distribution of the trials'
    probabilities of success, which treats the trials as independent given their design
    priors; trials sharing a true effect (the same drug) are positively correlated, and the
    real distribution is then wider. The expected net value of a trial of ``n`` patients is
    ``V (1 + r)^-t P(n) - c n - F``.

    Examples
    --------
    >>> import assurance as asr
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0), title="A")
    >>> p = plan_portfolio([d, d], sizes=[100, 200], names=["A1", "A2"])
    >>> [round(float(v), 3) for v in p.distribution]
    [0.151, 0.496, 0.354]
    """
    from .planner import Plan, plan

    owner = "plan_portfolio"
    items = list(plans_or_designs) if isinstance(plans_or_designs, Sequence) and \
        not isinstance(plans_or_designs, str) else None
    if not items:
        raise AssuranceInputError(
            f"The 'plans_or_designs' parameter of {owner} must be a non-empty list of plans "
            f"or trial designs. Got {plans_or_designs!r:.80} instead.")
    k = len(items)
    from .design import TrialDesign

    plans = []
    for i, item in enumerate(items):
        if isinstance(item, TrialDesign):
            item = plan(item, sensitivity=False)
        if not isinstance(item, Plan) and not hasattr(item, "model") and \
                not _is_program(item):
            raise AssuranceInputError(
                f"The 'plans_or_designs' parameter of {owner} must hold Plan, ModelPlan, "
                f"ProgramPlan or TrialDesign objects. Got {type(item).__name__} at position "
                f"{i} instead.")
        plans.append(item)
    value_list = [values] * k if isinstance(values, ValueInputs) else \
        _as_list(values, k, "values", owner)
    for i, v in enumerate(value_list):
        if v is not None and not isinstance(v, ValueInputs):
            raise AssuranceInputError(
                f"The 'values' parameter of {owner} must hold ValueInputs or None. Got "
                f"{v!r:.80} at position {i} instead.")
    name_list = _as_list(names, k, "names", owner) if names is not None else \
        [_title_of(p) for p in plans]
    if any(not isinstance(n, str) or not n.strip() for n in name_list):
        raise AssuranceInputError(
            f"The 'names' parameter of {owner} must hold non-empty strings. Got "
            f"{name_list!r:.80} instead.")
    if len(set(name_list)) != k:
        name_list = [f"{n} ({i + 1})" for i, n in enumerate(name_list)]
    size_list = _as_list(sizes, k, "sizes", owner)
    largest_list = _as_list(largest_n, k, "largest_n", owner)
    from ._validation import check_int, check_real, check_real_array

    flat_share = check_real(flat_share, "flat_share", owner, low=0.0, high=1.0, low_open=True,
                            high_open=True)
    multipliers = tuple(float(m) for m in check_real_array(
        value_multipliers, "value_multipliers", owner, low=0.0, low_open=True, min_size=0))
    if value_unit is not None:
        from ._validation import MAX_UNIT, check_text

        check_text(value_unit, "value_unit", owner, max_length=MAX_UNIT)
    counted = []
    for i, (p, n) in enumerate(zip(plans, size_list, strict=True)):
        if _is_program(p):
            if n is not None or value_list[i] is not None or largest_list[i] is not None:
                raise AssuranceInputError(
                    f"The 'sizes', 'values' and 'largest_n' parameters of {owner} must be None"
                    f" for trial {name_list[i]!r}, a development program (its sizes come "
                    "from the program; the size worth paying for is computed for single "
                    "trials only).")
            counted.append(int(round(p.headline.expected_patients)))
            continue
        n = int(p.planned_n) if n is None else check_int(n, "sizes", owner, low=1)
        if hasattr(p, "model") and n not in {int(v) for v in p.results["n"].values}:
            raise AssuranceInputError(
                f"The 'sizes' parameter of {owner} must give trial {name_list[i]!r} (an "
                f"analysis model) one of its simulated sizes "
                f"({', '.join(str(int(v)) for v in p.results['n'].values)}). Got {n} instead.")
        counted.append(n)

    # the curves over sizes: one task per closed-form or Monte Carlo design
    targets = [_target_of(p) for p in plans]
    tops: dict[int, int] = {}
    bottoms: dict[int, int] = {}
    for i, p in enumerate(plans):
        if hasattr(p, "model") or _is_program(p):
            continue
        grid_sizes = p.results["n"].values
        smallest = max(int(p.design.endpoint.smallest_total), int(grid_sizes.min()))
        n_t = targets[i][0]
        top = largest_list[i]
        if top is None:
            top = max(int(grid_sizes.max()), 2 * max(counted[i], n_t or 0))
        tops[i] = check_int(top, "largest_n", owner, low=max(smallest + 1, counted[i]))
        bottoms[i] = min(smallest, counted[i])
    curve_of: dict[int, Any] = {}
    jobs = list(tops)
    grids = [value_grid(bottoms[i], tops[i], include=[counted[i], targets[i][0] or counted[i]])
             for i in jobs]
    for _ in range(_EXTEND_ROUNDS + 1):  # a best size at the top of a chosen grid: go on
        curves = success_curves(
            [plans[i].design for i in jobs], grids,
            draws=[int(plans[i].settings.draws) for i in jobs],
            seeds=[int(plans[i].settings.seed) for i in jobs], executor=scheduler,
            progress=progress) if jobs else []
        for i, grid, (c_p, c_se) in zip(jobs, grids, curves, strict=True):
            if i in curve_of:  # sizes above the earlier grid: join them on
                old, (o_p, o_se) = curve_of[i]
                grid = np.concatenate([old, grid])
                c_p = np.concatenate([o_p, c_p])
                c_se = None if o_se is None else np.concatenate([o_se, c_se])
            curve_of[i] = (grid, (c_p, c_se))
        again, grids = [], []
        for i in jobs:
            grid, (c_p, _) = curve_of[i]
            v = value_list[i]
            if v is None or largest_list[i] is not None or tops[i] * 2 > _LARGEST_CHOSEN:
                continue
            found = size_worth_paying(grid, np.clip(c_p, 0, 1), v, share=flat_share)
            if found.n_high == int(grid[-1]):  # the best or its flat range ends at the top
                again.append(i)
                grids.append(value_grid(tops[i], 2 * tops[i], points=_GRID_MORE)[1:])
                tops[i] *= 2
        if not again:
            break
        jobs = again

    trials = []
    for i, p in enumerate(plans):
        n = counted[i]
        if _is_program(p):  # one point: the program as planned (computed by quadrature)
            pos = float(p.headline.pos)
            trials.append(PortfolioTrial(name_list[i], p, n, pos, None, np.array([n]),
                                         np.array([pos]), None))
            continue
        if hasattr(p, "model"):
            ds = p.results
            c_n = np.asarray(ds["n"].values, dtype=np.int64)
            c_p = np.asarray(ds["assurance"].values, dtype=float)
            c_se = np.asarray(ds["assurance_mcse"].values, dtype=float)
        else:
            grid, (c_p, c_se) = curve_of[i]
            c_n = np.asarray(grid, dtype=np.int64)
        pos, se = _pos_at(p, n, c_n, c_p, c_se)
        v = value_list[i]
        best = under = None
        if v is not None:
            best = size_worth_paying(c_n, np.clip(c_p, 0, 1), v, share=flat_share)
            under = tuple(best_sizes_under(c_n, np.clip(c_p, 0, 1), v, multipliers))
        n_t, target = targets[i]
        trials.append(PortfolioTrial(name_list[i], p, n, pos, se, c_n, c_p, c_se, v, best,
                                     under or (), n_t, target))
    settings = PortfolioSettings(flat_share, multipliers, value_unit,
                                 None if scheduler is None else str(scheduler))
    results = _dataset(trials, settings, title)
    return PortfolioPlan(str(title), tuple(trials), results, settings,
                         made_by="assurance.plan_portfolio(...)")


def _title_of(p: Any) -> str:
    return str(getattr(p, "title", None) or p.design.title)



def _target_of(p: Any) -> tuple[int | None, float | None]:
    """The smallest size reaching the assurance target, and the target."""
    for answer in getattr(p, "sample_sizes", ()) or ():
        if answer.quantity != "assurance":
            continue
        if hasattr(answer, "reached"):
            return (int(answer.n_total) if answer.reached else None), float(answer.target)
        return (None if answer.n is None else int(answer.n)), float(answer.target)
    return None, None


def _pos_at(p: Any, n: int, c_n: np.ndarray, c_p: np.ndarray, c_se: np.ndarray | None
            ) -> tuple[float, float | None]:
    """The probability of success at ``n``: the plan's own number where it has that size."""
    ds = p.results
    sizes = [int(v) for v in ds["n"].values]
    if n in sizes:
        at = ds.sel(n=n)
        se = float(at["assurance_mcse"]) if "assurance_mcse" in ds else None
        return float(at["assurance"]), se
    j = int(np.flatnonzero(c_n == n)[0])
    return float(c_p[j]), (None if c_se is None else float(c_se[j]))


# ------------------------------------------------------------------------------------------
# the results dataset and the tables
# ------------------------------------------------------------------------------------------
def _dataset(trials: Sequence[PortfolioTrial], settings: PortfolioSettings, title: str) -> Any:
    import xarray as xr

    from . import __version__

    k = len(trials)
    pos = np.array([t.pos for t in trials])
    se = np.array([0.0 if t.exact else float(t.pos_mcse) for t in trials])
    q = poisson_binomial(pos)
    lower = np.array([t.interval[0] for t in trials])
    upper = np.array([t.interval[1] for t in trials])
    data: dict[str, Any] = {
        "n": ("trial", np.array([t.n for t in trials], dtype=np.int64)),
        "pos": ("trial", pos),
        "pos_mcse": ("trial", se),
        "pos_lower": ("trial", lower),
        "pos_upper": ("trial", upper),
        "exact": ("trial", np.array([t.exact for t in trials], dtype=np.int8)),
        "n_for_target": ("trial", np.array([-1 if t.n_target is None else t.n_target
                                            for t in trials], dtype=np.int64)),
        "assurance_target": ("trial", np.array([0.0 if t.target is None else t.target
                                                for t in trials])),
        "prob_successes": ("successes", q),
        "prob_at_least": ("successes", np.cumsum(q[::-1])[::-1].clip(0, 1)),
        "expected_successes": ((), float(pos.sum())),
        "expected_successes_mcse": ((), float(np.sqrt((se ** 2).sum()))),
        "sd_successes": ((), float(np.sqrt((pos * (1 - pos)).sum()))),
        "point_pos": ("point", np.concatenate([t.curve_pos for t in trials])),
        "point_pos_mcse": ("point", np.concatenate([
            np.zeros(t.curve_n.size) if t.curve_mcse is None else t.curve_mcse
            for t in trials])),
    }
    coords: dict[str, Any] = {
        "trial": ("trial", np.array([t.name for t in trials], dtype=object).astype(str)),
        "endpoint": ("trial", np.array([t.endpoint for t in trials]).astype(str)),
        "successes": ("successes", np.arange(k + 1)),
        "point_trial": ("point", np.concatenate([np.full(t.curve_n.size, i, dtype=np.int64)
                                                 for i, t in enumerate(trials)])),
        "point_n": ("point", np.concatenate([t.curve_n for t in trials]).astype(np.int64)),
    }
    valued = [t for t in trials if t.values is not None]
    if valued:
        def column(get: Any, dtype: Any = float) -> tuple[str, np.ndarray]:
            return "value_trial", np.array([get(t) for t in valued], dtype=dtype)

        coords["value_trial"] = ("value_trial", np.array([t.name for t in valued]).astype(str))
        data.update({
            "value_of_success": column(lambda t: t.values.value_of_success),
            "cost_per_patient": column(lambda t: t.values.cost_per_patient),
            "fixed_cost": column(lambda t: t.values.fixed_cost),
            "years_to_readout": column(lambda t: t.values.years_to_readout),
            "discount_rate": column(lambda t: t.values.discount_rate),
            "discount_factor": column(lambda t: t.values.discount_factor),
            "best_n": column(lambda t: t.best.n_best, np.int64),
            "best_net_value": column(lambda t: t.best.value_best),
            "pos_at_best": column(lambda t: t.best.pos_best),
            "flat_low": column(lambda t: t.best.n_low, np.int64),
            "flat_high": column(lambda t: t.best.n_high, np.int64),
            "worth_paying": column(lambda t: t.best.worth_paying, np.int8),
            "net_value_at_n": column(lambda t: t.net_value_at(t.n)),
            "value_point_n": ("value_point", np.concatenate([t.curve_n for t in valued])),
            "net_value": ("value_point", np.concatenate([t.net_values for t in valued])),
        })
        coords["value_point_trial"] = ("value_point", np.concatenate([
            np.full(t.curve_n.size, i, dtype=np.int64) for i, t in enumerate(valued)]))
        if settings.value_multipliers:
            coords["multiplier"] = ("multiplier", np.array(settings.value_multipliers))
            data["best_n_under"] = (("value_trial", "multiplier"), np.array(
                [[u.n_best for u in t.under] for t in valued], dtype=np.int64))
            data["best_net_value_under"] = (("value_trial", "multiplier"), np.array(
                [[u.value_best for u in t.under] for t in valued]))
    attrs = {
        "title": str(title),
        "flat_share": settings.flat_share,
        "value_unit": settings.value_unit or "",
        "independence": "trials treated as independent given their design priors",
        "all_exact": int(all(t.exact for t in trials)),
        "package_version": __version__,
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _fmt(value: Any) -> str:
    return f"{float(value):.6g}"


def _write_tables(plan: PortfolioPlan, tmp: Path) -> None:
    with open(tmp / "trials.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["trial", "design_file", "endpoint", "n", "probability_of_success", "mcse",
                    "lower", "upper", "interval", "n_for_assurance_target",
                    "assurance_target"])
        for t in plan.trials:
            src = getattr(t.plan, "source", None)
            lo, hi = t.interval
            w.writerow([t.name, "" if src is None else str(src.path), t.endpoint, t.n,
                        _fmt(t.pos), "" if t.exact else _fmt(t.pos_mcse), _fmt(lo), _fmt(hi),
                        EXACT if t.exact else "2 Monte Carlo SE",
                        "" if t.n_target is None else t.n_target,
                        "" if t.target is None else _fmt(t.target)])
    q = plan.distribution
    at_least = plan.results["prob_at_least"].values
    with open(tmp / "successes.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["successes", "probability", "probability_at_least"])
        for j, v in enumerate(q):
            w.writerow([j, _fmt(v), _fmt(at_least[j])])
    with open(tmp / "curves.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["trial", "n", "probability_of_success", "mcse", "net_value"])
        for t in plan.trials:
            net = t.net_values
            for j, n in enumerate(t.curve_n):
                w.writerow([t.name, int(n), _fmt(t.curve_pos[j]),
                            "" if t.curve_mcse is None else _fmt(t.curve_mcse[j]),
                            "" if net is None else _fmt(net[j])])
    valued = [t for t in plan.trials if t.best is not None]
    if not valued:
        return
    with open(tmp / "size_worth_paying.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["trial", "value_of_success", "cost_per_patient", "fixed_cost",
                    "years_to_readout", "discount_rate", "discount_factor", "best_n",
                    "best_net_value", "pos_at_best", "flat_low", "flat_high", "flat_share",
                    "net_value_at_counted_n", "counted_n", "n_for_assurance_target",
                    "net_value_at_target_n", "worth_paying", "best_at_grid_end"])
        for t in valued:
            v, b = t.values, t.best
            at_n, at_t = t.net_value_at(t.n), (None if t.n_target is None
                                               else t.net_value_at(t.n_target))
            w.writerow([t.name, _fmt(v.value_of_success), _fmt(v.cost_per_patient),
                        _fmt(v.fixed_cost), _fmt(v.years_to_readout), _fmt(v.discount_rate),
                        _fmt(v.discount_factor), b.n_best, _fmt(b.value_best),
                        _fmt(b.pos_best), b.n_low, b.n_high, _fmt(b.share),
                        "" if at_n is None else _fmt(at_n), t.n,
                        "" if t.n_target is None else t.n_target,
                        "" if at_t is None else _fmt(at_t), b.worth_paying, b.at_edge])
    if plan.settings.value_multipliers:
        with open(tmp / "value_sensitivity.csv", "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["trial", "value_multiplier", "value_of_success", "best_n",
                        "best_net_value", "flat_low", "flat_high", "worth_paying"])
            for t in valued:
                for m, u in zip(plan.settings.value_multipliers, t.under, strict=True):
                    w.writerow([t.name, _fmt(m), _fmt(t.values.value_of_success * m),
                                u.n_best, _fmt(u.value_best), u.n_low, u.n_high,
                                u.worth_paying])

