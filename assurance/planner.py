"""A computed plan: the design, its results and the sample sizes, with ways to show and save them.

:func:`plan` (from Python objects) and :meth:`Plan.from_file` (from a TOML design file) give
the same :class:`Plan` as ``assurance plan`` on the command line, with the same numbers.
A plan can write the command line's output folder (:meth:`Plan.write`), the memo alone
(:meth:`Plan.write_memo`), give its figures for a notebook to show or restyle
(:meth:`Plan.figures`), print a short summary (:meth:`Plan.summary`) and shows itself as a
small table and figure in a notebook.

Examples
--------
>>> import assurance as asr
>>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
...                          asr.Normal(4.0, 2.0), title="Demo")
>>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200, 300])
>>> p.sample_sizes[0].n_total
140
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .design import TrialDesign
from .errors import AssuranceInputError
from .planning import DEFAULT_DRAWS, SampleSizeAnswer
from .precision.for_design import PrecisionPlan
from .rules.zones import GoConsiderStop
from .workflow import DEFAULT_SEED, ProgressCallback, check_plan_inputs, check_planned, run_plan

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    from matplotlib.figure import Figure

    from .precision.widths import PrecisionAnswer
    from .sensitivity import SensitivitySettings

__all__ = ["Plan", "PlanSettings", "DesignSource", "plan"]


@dataclass(frozen=True)
class PlanSettings:
    """What a plan was asked to compute.

    Attributes
    ----------
    targets
        Quantity (``"power"``, ``"assurance"``, ``"conditional_assurance"``) -> required
        probability, in the order they were solved.
    sizes
        The total sample sizes asked for, or None for the automatic grid. The sizes computed
        are ``Plan.results.n`` (these plus each solved size).
    zones
        The go / consider / stop rule, or None.
    precision
        The precision plan, or None.
    draws, seed
        Monte Carlo settings.
    planned
        The planned total size asked for, or None (then :attr:`Plan.planned_n` is chosen
        from the targets).
    sensitivity
        How the design prior was varied (:class:`~assurance.sensitivity.SensitivitySettings`),
        or None when the sensitivity results were left out.

    Examples
    --------
    >>> PlanSettings({"assurance": 0.7}, None).draws
    20000
    """

    targets: Mapping[str, float]
    sizes: tuple[int, ...] | None
    zones: GoConsiderStop | None = None
    precision: PrecisionPlan | None = None
    draws: int = DEFAULT_DRAWS
    seed: int = DEFAULT_SEED
    planned: int | None = None
    sensitivity: Any = None


@dataclass(frozen=True)
class DesignSource:
    """The design file a plan was read from: its path, exact bytes and normalised record.

    ``record`` holds every table with every key in force, in the file's names
    (:attr:`DesignFile.record <assurance.design_file.DesignFile.record>`); ``notes`` are the
    reader's warnings (an assumed effect on the harmful side, say).

    Examples
    --------
    >>> DesignSource(Path("trial.toml"), b"title = 'T'\\n").text()
    "title = 'T'\\n"
    """

    path: Path
    content: bytes = field(repr=False)
    record: Mapping[str, Any] = field(default_factory=dict, repr=False, compare=False)
    notes: tuple[str, ...] = ()

    def text(self) -> str:
        """The file's text (UTF-8, as the design-file reader requires)."""
        return self.content.decode("utf-8")


@dataclass(frozen=True, eq=False, repr=False)
class Plan:
    """A computed plan: design, results over the sizes, solved sample sizes, precision.

    Make one with :func:`plan` or :meth:`Plan.from_file`.

    Attributes
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`).
    results
        ``xarray.Dataset`` over the total sample size ``n``: power, assurance and the rest
        (see :func:`assurance.evaluate`), with zone probabilities and interval widths when
        asked for.
    sample_sizes
        One :class:`~assurance.SampleSizeAnswer` per target.
    precision
        One :class:`~assurance.precision.PrecisionAnswer` per precision criterion, or the
        reason a criterion is unavailable.
    settings
        What was asked (:class:`PlanSettings`).
    prior_origin
        Where the design prior comes from (a :class:`~assurance.PriorFit`, a meta-analytic
        prior or a sentence), shown in the memo; None when not said.
    source
        The design file (:class:`DesignSource`) when the plan was read from one.
    planned_n, planned_reason
        The total size the decision is taken at and how it was chosen, in plain words:
        the planned size given, else the smallest size reaching the assurance target (then
        the conditional assurance or power target), else the largest size evaluated.
    made_by
        The command line or Python call that made the plan (for the memo's provenance).
    created
        When the plan was computed: UTC date and time, ISO 8601, to the second.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0), title="Demo")
    >>> p = asr.plan(design, targets={"power": 0.9}, sizes=[100, 300])
    >>> p
    Plan('Demo': 3 sizes from 100 to 300; power 0.9: n = 264)
    """

    design: TrialDesign
    results: Any
    sample_sizes: tuple[SampleSizeAnswer, ...] = ()
    precision: tuple[PrecisionAnswer | str, ...] = ()
    settings: PlanSettings = field(default_factory=lambda: PlanSettings({}, None))
    prior_origin: Any = None
    source: DesignSource | None = None
    planned_n: int = 0
    planned_reason: str = ""
    made_by: str = "assurance.Plan(...)"
    created: str = field(default_factory=lambda: _utc_now())

    def __post_init__(self) -> None:
        if not isinstance(self.design, TrialDesign):
            raise AssuranceInputError(
                f"The 'design' parameter of Plan must be a TrialDesign. Got {self.design!r} "
                "instead.")
        if not hasattr(self.results, "data_vars") or "n" not in getattr(self.results, "dims",
                                                                          ()):
            raise AssuranceInputError(
                "The 'results' parameter of Plan must be the dataset of assurance.evaluate. "
                f"Got {type(self.results).__name__} instead.")
        object.__setattr__(self, "sample_sizes", tuple(self.sample_sizes))
        object.__setattr__(self, "precision", tuple(self.precision))
        if not self.planned_n:  # a Plan put together by hand: the largest size evaluated
            object.__setattr__(self, "planned_n", int(self.results["n"].values.max()))
            object.__setattr__(self, "planned_reason", self.planned_reason
                               or "the largest size evaluated")

    @property
    def sensitivity(self) -> Any:
        """The prior-sensitivity results (an ``xarray.Dataset``), or None when left out.

        Dimension ``variation`` (the elicited prior and each variation, with
        ``variation_description``): ``sensitivity_assurance``, ``sensitivity_ceiling``,
        ``sensitivity_n`` (per assurance target; -1: not reachable); the map
        ``sensitivity_map`` over ``map_centre`` x ``map_spread``; the sentence in
        ``attrs["sensitivity_sentence"]``. See :func:`assurance.sensitivity.prior_sensitivity`.
        """
        names = [v for v in self.results.data_vars if str(v).startswith("sensitivity_")
                 or v == "variation_description"]
        if not names:
            return None
        found = self.results[names]
        found.attrs = {k: v for k, v in self.results.attrs.items()
                       if k.startswith("sensitivity_")}
        return found

    # --------------------------------------------------------------------------------------
    # making one
    # --------------------------------------------------------------------------------------
    @classmethod
    def from_file(cls, path: str | os.PathLike[str], *,
                  progress: ProgressCallback | None = None) -> Plan:
        """Read a TOML design file and compute its plan, as ``assurance plan`` does.

        Parameters
        ----------
        path
            The design file (see :mod:`assurance.design_file`).
        progress
            Optional callback, as for :func:`plan`.

        Returns
        -------
        Plan
            With ``source`` holding the file's path and exact bytes, so :meth:`write` can
            keep a copy beside the results.

        Raises
        ------
        DesignFileError
            When the file is missing or describes an invalid design; the message names the
            key, the value and what is allowed.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> text = '''title = "From a file"
        ... [endpoint]
        ... sd = 10.0
        ... analysis = "z"
        ... [design_prior]
        ... family = "normal"
        ... mean = 4.0
        ... sd = 2.0
        ... [sizes]
        ... list = [100, 200]
        ... [targets]
        ... assurance = 0.6
        ... '''
        >>> with tempfile.TemporaryDirectory() as folder:
        ...     path = pathlib.Path(folder, "trial.toml")
        ...     _ = path.write_text(text, encoding="utf-8")
        ...     p = Plan.from_file(path)
        >>> p.sample_sizes[0].n_total, p.source.content == text.encode()
        (140, True)
        """
        from .design_file import read_design_file

        if not isinstance(path, str | os.PathLike):
            raise AssuranceInputError(
                "The 'path' parameter of Plan.from_file must be a file path (str or "
                f"pathlib.Path). Got {path!r} instead.")
        return cls.from_spec(read_design_file(Path(path)), progress=progress)

    @classmethod
    def from_spec(cls, spec: Any, *, progress: ProgressCallback | None = None) -> Plan:
        """The plan of an already read design file (:func:`assurance.read_design`)."""
        if spec.design is None:
            raise AssuranceInputError(
                f"The design file {spec.source} describes an analysis model ([endpoint] type "
                "= \"model\"): use assurance.ModelPlan.from_file.")
        path = Path(spec.source)
        made = plan(spec.design, targets=spec.targets, sizes=spec.sizes, zones=spec.zones,
                    precision=spec.precision, draws=spec.draws, seed=spec.seed,
                    prior_origin=spec.prior_origin, progress=progress, planned=spec.planned,
                    sensitivity=spec.sensitivity or False)
        return replace(made, source=DesignSource(path, spec.content, spec.record, spec.notes),
                       made_by=f"assurance.Plan.from_file({str(path)!r})")

    # --------------------------------------------------------------------------------------
    # saving
    # --------------------------------------------------------------------------------------
    def write(self, out: str | os.PathLike[str], *, overwrite: bool = False,
              formats: Sequence[str] = ("png",)) -> Path:
        """Write the output folder the command line writes.

        ``results.csv``, ``results.nc``, ``sample_sizes.csv``, ``design.toml``, ``figures/``
        (PNG by default), ``memo.html`` and ``.assurance-output`` (the list of files
        written); for a plan read from a file, also ``design_as_given.toml``, a
        byte-for-byte copy of it. Everything is written into a hidden temporary folder beside
        ``out`` that then takes its name, so ``out`` is either complete or not there, and a
        second writer into the same ``out`` at the same time is refused.

        Parameters
        ----------
        out
            The folder to write. Must not exist unless ``overwrite`` is True.
        overwrite
            Replace an existing output folder (as a whole; nothing of the old one is kept).
            Only a folder written by this package that holds nothing but the files it wrote
            is ever replaced; never the current folder or one holding the design file.
        formats
            Figure formats: ``"png"``, ``"svg"`` or both, for example ``("png", "svg")``.

        Returns
        -------
        pathlib.Path
            The folder written.

        Raises
        ------
        AssuranceInputError
            When ``out`` exists and ``overwrite`` is False, or it must not be replaced, or
            it cannot be written (it is then left untouched); the message says why.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> import assurance as asr
        >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                          asr.Normal(4.0, 2.0))
        >>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200])
        >>> with tempfile.TemporaryDirectory() as folder:
        ...     out = p.write(pathlib.Path(folder) / "plan", formats=("png", "svg"))
        ...     print((out / "memo.html").is_file(), (out / "figures" / "prior.svg").is_file())
        True True
        """
        from .report.output_folder import FIGURE_FORMATS, write_outputs

        _check_overwrite(overwrite, "Plan.write")
        if not isinstance(out, str | os.PathLike) or not str(os.fspath(out)).strip():
            raise AssuranceInputError(
                "The 'out' parameter of Plan.write must be a folder path (str or pathlib.Path)"
                f" naming a folder. Got {out!r} instead.")
        chosen = (formats,) if isinstance(formats, str) else formats
        if not isinstance(chosen, Sequence) or not chosen or \
                any(f not in FIGURE_FORMATS for f in chosen):
            raise AssuranceInputError(
                "The 'formats' parameter of Plan.write must be one or more of 'png', 'svg'. "
                f"Got {formats!r} instead.")
        return write_outputs(out, self, overwrite=overwrite, formats=tuple(chosen))

    def write_memo(self, path: str | os.PathLike[str], *, overwrite: bool = False) -> Path:
        """Write the decision memo alone, as one self-contained HTML file.

        Parameters
        ----------
        path
            The HTML file. Its folder must exist.
        overwrite
            Replace an existing file. Off by default; the file is written whole or not at
            all.

        Returns
        -------
        pathlib.Path
            The file written.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> import assurance as asr
        >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                          asr.Normal(4.0, 2.0))
        >>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200])
        >>> with tempfile.TemporaryDirectory() as folder:
        ...     memo = p.write_memo(pathlib.Path(folder) / "memo.html")
        ...     print(memo.name, "Probability of success" in memo.read_text(encoding="utf-8"))
        memo.html True
        """
        from .report import write_plan_memo

        _check_overwrite(overwrite, "Plan.write_memo")
        return write_plan_memo(self, path, overwrite=overwrite)

    # --------------------------------------------------------------------------------------
    # showing
    # --------------------------------------------------------------------------------------
    def figures(self) -> dict[str, Figure]:
        """The figures of the memo, as matplotlib figures to show, restyle or save.

        Returns
        -------
        dict of str to matplotlib.figure.Figure
            ``"prior"`` and ``"power_and_assurance"``; ``"prior_fit"`` when the design prior
            was fitted to elicited judgements; ``"interval_width"`` when precision was
            planned; ``"zones"`` and ``"zones_by_effect"`` (at the planned size) with a go /
            consider / stop rule; ``"sensitivity_map"`` with the prior sensitivity. They
            are drawn off-screen (no window opens); in a notebook, show one by leaving it as
            the last expression of a cell.

        Examples
        --------
        >>> import assurance as asr
        >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                          asr.Normal(4.0, 2.0))
        >>> figs = asr.plan(design, sizes=[100, 200]).figures()
        >>> sorted(figs)
        ['power_and_assurance', 'prior', 'sensitivity_map']
        """
        from .report.plan_figures import figure_makers

        return {name: make() for name, make in figure_makers(self).items()}

    def design_record(self) -> str | None:
        """The normalised design file (``design.toml`` text), or None if it cannot be written.

        Every key in force, in the design file's own names, defaults filled in; reading it
        back gives the same plan. A plan read from a file records that file's tables (a prior
        elicited from judgements stays elicited); a plan made in Python records its objects.

        Examples
        --------
        >>> import assurance as asr
        >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                          asr.Normal(4.0, 2.0), title="Record")
        >>> p = asr.plan(design, sizes=[100, 200])
        >>> 'sd = 10.0' in p.design_record()
        True
        """
        from .design_file.record import design_toml

        if self.source is not None and self.source.record:
            return design_toml(dict(self.source.record), source=str(self.source.path))
        from .design_file.from_objects import record_from_plan

        record = record_from_plan(self)
        return None if record is None else design_toml(record)

    def summary(self) -> str:
        """A few plain lines: the headline numbers and each target's sample size.

        The text ``assurance plan`` prints.

        Examples
        --------
        >>> import assurance as asr
        >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
        ...                          asr.Normal(4.0, 2.0), title="Demo")
        >>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200])
        >>> print(p.summary().splitlines()[-1].strip())
        assurance 0.6: 140 patients (70 treatment / 70 control); reaches 0.603
        """
        from .report import memo_text_summary

        return memo_text_summary(self.design, self.results, list(self.sample_sizes))

    def _repr_html_(self) -> str:
        """A small static overview for a notebook: the solved sizes and the main figure."""
        from .report import overview_html

        return overview_html(self.design, self.results, list(self.sample_sizes),
                             self.precision)

    def __repr__(self) -> str:
        n = self.results["n"].values
        text = f"Plan({self.design.title!r}: {n.size} sizes from {int(n.min())} to " \
               f"{int(n.max())}"
        for answer in self.sample_sizes:
            name = f"{answer.quantity.replace('_', ' ')} {answer.target:g}"
            text += f"; {name}: " + (f"n = {answer.n_total}" if answer.reached
                                     else "not reachable")
        return text + ")"


def _check_overwrite(value: Any, owner: str) -> None:
    if not isinstance(value, bool):
        raise AssuranceInputError(
            f"The 'overwrite' parameter of {owner} must be True or False. Got {value!r} "
            "instead.")


def plan(
    design: TrialDesign,
    *,
    targets: Mapping[str, float] | None = None,
    sizes: Sequence[int] | np.ndarray | None = None,
    zones: GoConsiderStop | None = None,
    precision: PrecisionPlan | None = None,
    draws: int = DEFAULT_DRAWS,
    seed: int = DEFAULT_SEED,
    prior_origin: Any = None,
    progress: ProgressCallback | None = None,
    planned: int | None = None,
    sensitivity: bool | SensitivitySettings = True,
) -> Plan:
    """Plan a trial: solve each target, evaluate the sizes, add zones, precision, sensitivity.

    The same computation as ``assurance plan`` on a design file with the same content.

    Parameters
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`).
    targets
        Quantity -> required probability in (0, 1), for example ``{"power": 0.9,
        "assurance": 0.7}``. Quantities: ``"power"`` (at the assumed effect),
        ``"assurance"``, ``"conditional_assurance"`` (needs the design's relevant effect).
    sizes
        Total sample sizes to evaluate (whole numbers at or above the smallest size the
        analysis allows); None chooses about 50 round sizes up to 1.5 times the largest
        solved size. Each solved size up to twice the largest is added.
    zones
        Optional go / consider / stop rule (:class:`~assurance.GoConsiderStop`).
    precision
        Optional precision plan (:class:`~assurance.PrecisionPlan`): posterior interval
        width against n and the n per criterion.
    draws, seed
        Monte Carlo draws (at least 100) and seed (a whole number >= 0), used when the
        design needs simulation; the same seed gives the same numbers.
    prior_origin
        Where the design prior comes from: a :class:`~assurance.PriorFit`, a meta-analytic
        prior result, or a sentence; shown in the memo.
    progress
        Optional callback: ``progress(text)`` at each step and ``progress(label, done,
        total)`` as chunks of a Monte Carlo evaluation finish (``print`` fits).
    planned
        The total size the decision is taken at (the memo's decision box); None chooses the
        smallest size reaching the assurance target (then conditional assurance, then power).
    sensitivity
        Sensitivity of the answer to the design prior: True (default settings), a
        :class:`~assurance.sensitivity.SensitivitySettings`, or False to leave it out.

    Returns
    -------
    Plan

    Raises
    ------
    AssuranceInputError
        When a parameter is outside what is allowed; the message names it, the value and
        what is allowed.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0), relevant_effect=3.0)
    >>> p = asr.plan(design, targets={"power": 0.9, "assurance": 0.6}, sizes=[100, 200, 300])
    >>> [(a.quantity, a.n_total) for a in p.sample_sizes]
    [('power', 264), ('assurance', 140)]
    >>> [int(n) for n in p.results.n]
    [100, 140, 200, 264, 300]
    """
    owner = "plan"
    targets, grid, draws, seed = check_plan_inputs(design, targets, sizes, zones, precision,
                                                   draws, seed, progress, owner=owner)
    if prior_origin is not None and not isinstance(prior_origin, str) and \
            not callable(getattr(prior_origin, "report", None)):
        raise AssuranceInputError(
            f"The 'prior_origin' parameter of {owner} must be a sentence, a PriorFit, a "
            f"meta-analytic prior result (anything with a report() method) or None. Got "
            f"{prior_origin!r} instead.")
    planned = check_planned(planned, design, owner=owner)
    varied = _sensitivity_settings(sensitivity, owner)
    done = run_plan(design, targets, grid, zones=zones, precision=precision, draws=draws,
                    seed=seed, progress=progress, planned=planned, sensitivity=varied,
                    prior_origin=prior_origin)
    settings = PlanSettings(dict(targets), None if grid is None else tuple(int(n) for n in grid),
                            zones, precision, draws, seed, planned, varied)
    return Plan(design, done.dataset, done.sample_sizes, done.precision, settings,
                prior_origin, planned_n=done.planned_n, planned_reason=done.planned_reason,
                made_by="assurance.plan(...)")


def _sensitivity_settings(value: Any, owner: str) -> Any:
    from .sensitivity import SensitivitySettings

    if value is True:
        return SensitivitySettings()
    if value is False or value is None:
        return None
    if isinstance(value, SensitivitySettings):
        return value
    raise AssuranceInputError(
        f"The 'sensitivity' parameter of {owner} must be True, False or a "
        f"SensitivitySettings. Got {value!r} instead.")


def _utc_now() -> str:
    import datetime as _dt

    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()
