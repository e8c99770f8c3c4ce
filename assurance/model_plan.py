"""A plan made with a general analysis model: simulated trials fitted by a PyMC model.

:func:`plan_model` (from Python objects) and :meth:`ModelPlan.from_file` (a design file with
``[endpoint] type = "model"``) simulate the trial at each size, read the sizes reaching the
targets and keep everything a memo needs; ``assurance plan`` writes the same output folder
as for the built-in endpoints (results, sample sizes, figures, memo, design records), plus
the finished sizes of the simulation, so that an interrupted run picks up where it stopped.

Examples
--------
>>> import assurance as asr
>>> from assurance.general.builtin import borrowed_control
>>> model = borrowed_control(asr.Normal(3.0, 1.0), 3.0, sd=10.0, historical_mean=0.0,
...                          historical_n=50, weight=0.0)
>>> p = plan_model(model, asr.Significance(alpha=0.025, sided="one"), [100, 400],
...                targets={"assurance": 0.5}, trials=100, nuts_check=0, progress=False)
>>> [int(n) for n in p.results.n], p.planned_n in (100, 400)
([100, 400], True)
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from .errors import AssuranceInputError
from .planner import DesignSource, _check_overwrite, _utc_now

__all__ = ["ModelPlan", "ModelSettings", "plan_model"]

#: the seed used when none is given (the same as the built-in endpoints')
DEFAULT_SEED = 20260101


@dataclass(frozen=True)
class ModelSettings:
    """What a model plan was asked to compute (the ``[simulation]`` settings and targets).

    Examples
    --------
    >>> ModelSettings({"assurance": 0.7}, (100, 200)).trials
    1000
    """

    targets: Mapping[str, float]
    sizes: tuple[int, ...]
    trials: int = 1000
    nuts_check: int = 20
    nuts_every: bool = False
    coverage: float = 0.95
    chunk: int = 50
    workers: int = 0
    scheduler: str | None = None
    seed: int = DEFAULT_SEED
    planned: int | None = None


@dataclass(frozen=True, eq=False, repr=False)
class ModelPlan:
    """A computed plan for a general analysis model.

    Attributes
    ----------
    model
        The :class:`~assurance.general.GeneralModel`.
    rule
        The success rule applied to the posterior of the effect.
    results
        ``xarray.Dataset`` over ``n`` (see :func:`assurance.general.simulate_general`).
    sample_sizes
        One :class:`~assurance.general.GeneralSizeAnswer` per target.
    settings
        :class:`ModelSettings`.
    source
        The design file, when read from one.
    planned_n, planned_reason
        The size the decision is taken at and how it was chosen.
    made_by, created
        The command or call that made the plan, and when (UTC).
    title, unit
        The trial's name and the outcome's unit (None when unnamed).
    record
        The design file's normalised tables (for ``design.toml``), when read from one.
    store
        The folder holding the finished sizes of the simulation, when one was used.
    precision, precision_answers
        The :class:`~assurance.PrecisionPlan` asked for (None: none) and one
        :class:`~assurance.general.GeneralSizeAnswer` per criterion.
    """

    model: Any
    rule: Any
    results: Any
    sample_sizes: tuple[Any, ...]
    settings: ModelSettings
    source: DesignSource | None = None
    planned_n: int = 0
    planned_reason: str = ""
    made_by: str = "assurance.plan_model(...)"
    created: str = field(default_factory=lambda: _utc_now())
    title: str = "Untitled trial"
    unit: str | None = None
    record: Mapping[str, Any] | None = field(default=None, compare=False)
    store: str | None = None
    precision: Any = None
    precision_answers: tuple[Any, ...] = ()

    # --------------------------------------------------------------------------------------
    @classmethod
    def from_file(cls, path: str | os.PathLike[str], *, progress: bool = False,
                  store: str | os.PathLike[str] | None = None) -> ModelPlan:
        """Read a design file with ``[endpoint] type = "model"`` and simulate its plan.

        Parameters
        ----------
        path
            The design file.
        progress
            Show a progress bar on a terminal.
        store
            A folder keeping the finished sizes: a run interrupted and started again with
            the same settings reads them instead of simulating them again.
        """
        from .design_file import read_design_file

        if not isinstance(path, str | os.PathLike):
            raise AssuranceInputError(
                "The 'path' parameter of ModelPlan.from_file must be a file path (str or "
                f"pathlib.Path). Got {path!r} instead.")
        spec = read_design_file(path)
        return cls.from_spec(spec, progress=progress, store=store)

    @classmethod
    def from_spec(cls, spec: Any, *, progress: bool = False,
                  store: str | os.PathLike[str] | None = None) -> ModelPlan:
        """The plan of an already read design file (:func:`assurance.read_design`)."""
        if spec.model is None:
            raise AssuranceInputError(
                f"The design file {spec.source} describes a built-in endpoint, not an "
                "analysis model: use assurance.Plan.from_file.")
        sim = spec.simulation
        unit = spec.record.get("endpoint", {}).get("unit")
        made = plan_model(
            spec.model, spec.rule, [int(n) for n in spec.sizes], targets=spec.targets,
            trials=sim.trials, nuts_check=sim.nuts_check, nuts_every=sim.nuts_every,
            coverage=sim.coverage, chunk=sim.chunk, workers=sim.workers,
            scheduler=sim.scheduler, seed=spec.seed, planned=spec.planned,
            progress=progress, store=store, title=spec.title, unit=unit,
            precision=spec.precision)
        path = Path(spec.source)
        return replace(made, source=DesignSource(path, spec.content or b"", spec.record,
                                                 spec.notes),
                       record=spec.record,
                       made_by=f"assurance.ModelPlan.from_file({str(path)!r})")

    # --------------------------------------------------------------------------------------
    def design_record(self) -> str | None:
        """The normalised design file (``design.toml``), or None for a plan made in Python."""
        from .design_file.record import design_toml

        if not self.record:
            return None
        source = None if self.source is None else str(self.source.path)
        return design_toml(dict(self.record), source=source)

    def figures(self) -> dict[str, Any]:
        """The memo's figures, as matplotlib figures."""
        from .report.model_figures import model_figure_makers

        return {name: make() for name, make in model_figure_makers(self).items()}

    def write(self, out: str | os.PathLike[str], *, overwrite: bool = False,
              formats: Sequence[str] = ("png",)) -> Path:
        """Write the output folder (as :meth:`assurance.Plan.write` does)."""
        from .report.output_folder import write_outputs

        _check_overwrite(overwrite, "ModelPlan.write")
        return write_outputs(out, self, overwrite=overwrite, formats=tuple(formats))

    def write_memo(self, path: str | os.PathLike[str], *, overwrite: bool = False) -> Path:
        """Write the memo alone (one self-contained HTML file)."""
        from .report.model_memo import write_model_memo

        _check_overwrite(overwrite, "ModelPlan.write_memo")
        return write_model_memo(self, path, overwrite=overwrite)

    def summary(self) -> str:
        """A few plain lines: the probability of success at the planned size, each target."""
        ds = self.results
        at = ds.sel(n=self.planned_n)
        lines = [self.title, f"  {self.model.describe()}",
                 f"  at {self.planned_n} patients ({self.planned_reason}): probability of "
                 f"success {float(at.assurance):.3f} (MC SE {float(at.assurance_mcse):.3f})"]
        for answer in self.sample_sizes:
            found = ("not reached in the grid" if answer.n is None
                     else f"{answer.n} patients ({answer.value:.3f})")
            lines.append(f"  {answer.quantity} {answer.target:g}: {found}")
        if "warning" in ds.attrs:
            lines.append(f"  warning: {ds.attrs['warning']}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        n = self.results["n"].values
        return (f"ModelPlan({self.title!r}: {n.size} sizes from {int(n.min())} to "
                f"{int(n.max())}, {self.settings.trials} trials each)")


def plan_model(
    model: Any,
    rule: Any,
    sizes: Sequence[int],
    *,
    targets: Mapping[str, float] | None = None,
    trials: int = 1000,
    nuts_check: int = 20,
    nuts_every: bool = False,
    coverage: float = 0.95,
    chunk: int = 50,
    workers: int = 0,
    scheduler: Any = None,
    seed: int = DEFAULT_SEED,
    planned: int | None = None,
    progress: bool = False,
    store: str | os.PathLike[str] | None = None,
    title: str | None = None,
    unit: str | None = None,
    precision: Any = None,
) -> ModelPlan:
    """Plan a trial analysed by a general model: simulate each size, solve the targets.

    Parameters
    ----------
    model
        A :class:`~assurance.general.GeneralModel` (e.g. from
        :mod:`assurance.general.builtin`).
    rule
        The success rule on the posterior of the effect (``Significance``,
        ``PosteriorProbability``, ``MinimumEstimate`` or ``AllOf`` of these).
    sizes
        Total sizes to simulate.
    targets
        ``{"assurance": p}`` and / or ``{"power": p}``.
    trials, nuts_check, nuts_every, coverage, chunk
        As for :func:`assurance.general.simulate_general`.
    workers, scheduler
        Local worker processes (0: this process), or a Dask scheduler address (or client)
        to spread the trials over; the numbers do not depend on either.
    seed
        The same seed gives the same numbers.
    planned
        The size the decision is taken at (None: the smallest size reaching the assurance
        target, then the power target, else the largest size).
    progress, store
        A progress bar on a terminal; a folder keeping finished sizes for resumption.
    title, unit
        The trial's name and the outcome's unit, for the memo.
    precision
        A :class:`~assurance.PrecisionPlan`: the sizes at which the posterior interval of the
        effect is short enough, by the average length (ALC), the average coverage of an
        interval of the target length (ACC) and the width in the ``likely_share`` most
        favourable trials (MWOC, simulated). Its ``coverage`` and ``interval`` replace
        ``coverage`` for the widths. The worst outcome over every data set (WOC) cannot be
        bounded by simulation and is refused.

    Returns
    -------
    ModelPlan
    """
    from .general.engine import simulate_general, solve_general_n
    from .workflow import choose_planned

    owner = "plan_model"
    if targets is None:
        targets = {}
    if not isinstance(targets, Mapping) or any(k not in ("assurance", "power")
                                               for k in targets):
        raise AssuranceInputError(
            f"The 'targets' parameter of {owner} must map 'assurance' and / or 'power' to a "
            f"probability. Got {targets!r} instead.")
    executor: Any = scheduler if scheduler is not None else (workers if workers else None)
    width_options: dict[str, Any] = {}
    if precision is not None:
        precision = _check_precision(precision, owner)
        coverage = precision.coverage
        width_options = {"length": precision.length, "interval": precision.interval,
                         "likely_share": precision.likely_share}
    ds = simulate_general(model, sizes, rule=rule, trials=trials, seed=seed,
                          nuts_check=nuts_check, nuts_every=nuts_every, coverage=coverage,
                          power=True, chunk=chunk, store=store, executor=executor,
                          progress=progress, **width_options)
    answers = tuple(solve_general_n(ds, float(p), quantity=q) for q, p in targets.items())
    precision_answers: tuple[Any, ...] = ()
    if precision is not None:
        precision_answers = tuple(
            replace(solve_general_n(ds, precision.coverage if c == "ACC" else precision.length,
                                    quantity=PRECISION_QUANTITY[c]), quantity=c)
            for c in precision.criteria)
    grid = ds["n"].values
    if planned is not None and int(planned) not in set(int(n) for n in grid):
        raise AssuranceInputError(
            f"The 'planned' parameter of {owner} must be one of the simulated sizes "
            f"({', '.join(str(int(n)) for n in grid)}). Got {planned!r} instead.")
    planned_n, reason = choose_planned(planned, _as_answers(answers), grid)
    settings = ModelSettings(dict(targets), tuple(int(n) for n in grid), trials, nuts_check,
                             nuts_every, coverage, chunk, int(workers),
                             None if scheduler is None else str(scheduler), seed, planned)
    return ModelPlan(model, rule, ds, answers, settings, planned_n=planned_n,
                     planned_reason=reason, title=title or model.name, unit=unit,
                     store=None if store is None else str(store), precision=precision,
                     precision_answers=precision_answers)


#: The simulated quantity each precision criterion reads (WOC: not available by simulation).
PRECISION_QUANTITY = {"ALC": "width_mean", "ACC": "coverage_mean",
                      "MWOC": "width_worst_likely"}


def _check_precision(precision: Any, owner: str) -> Any:
    from .precision.for_design import PrecisionPlan

    if not isinstance(precision, PrecisionPlan):
        raise AssuranceInputError(
            f"The 'precision' parameter of {owner} must be an assurance.PrecisionPlan or "
            f"None. Got {precision!r:.80} instead.")
    if "WOC" in precision.criteria:
        raise AssuranceInputError(
            f"The 'precision' parameter of {owner} asks for the worst outcome criterion "
            "(WOC), the widest interval over every possible data set, which simulated trials "
            "cannot bound. Use MWOC (the widest over the most likely share of trials), ALC or "
            "ACC.")
    return precision


@dataclass(frozen=True)
class _Reached:
    quantity: str
    target: float
    reached: bool
    n_total: int


def _as_answers(answers: Sequence[Any]) -> list[_Reached]:
    """The simulated answers in the form :func:`assurance.workflow.choose_planned` reads."""
    return [_Reached(a.quantity, a.target, a.n is not None, a.n if a.n is not None else 0)
            for a in answers]
