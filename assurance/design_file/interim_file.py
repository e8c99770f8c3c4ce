"""The interim file: the trial's design file, what an interim analysis found, and when to stop.

A complete example (every key but ``design`` and the interim data is optional)::

    title = "Invented example: interim look at half the patients"
    design = "design.toml"        # the trial's design file, relative to this file

    [interim]                     # one of the forms below
    estimate = 2.6                # natural scale: a difference, or a ratio
    standard_error = 2.1          # analysis scale (log for ratios)
    # information_fraction = 0.5  # instead of standard_error

    [final]
    planned_total = 200           # default: [sizes] planned of the design file
    # standard_error = 1.4        # the final analysis's standard error, if known better

    [boundaries]
    futility = 0.10               # stop when the predictive probability is below this
    efficacy = 0.99               # ... or above this
    prior = "analysis"            # or "design": whose posterior the boundaries use

The interim data may also be given per arm, matching the design's endpoint:

* means (continuous): ``treatment_mean``, ``control_mean``, ``treatment_n``,
  ``control_n``, ``sd``;
* responders (binary): ``treatment_responders``, ``treatment_n``, ``control_responders``,
  ``control_n`` (a single arm: ``treatment_responders`` and ``treatment_n`` only); the look
  then also reports the exact (beta-binomial) predictive probability;
* events (time to event): ``estimate`` (the hazard ratio) and ``events``;
* counts: ``treatment_events``, ``treatment_exposure``, ``control_events``,
  ``control_exposure``.

Every problem of the file is reported at once, as a :class:`~assurance.errors.
DesignFileError` naming the file's keys (``'interim.estimate'``).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from ..errors import AssuranceInputError, DesignFileError
from ._problems import Problems, did_you_mean, shown_key
from .reader import DesignFile, read_companion_file, read_design_file
from .schema import Table, Title, key

__all__ = ["InterimFile", "InterimFileModel", "read_interim_file", "INTERIM_FORMS"]


class InterimTable(Table):
    """``[interim]``: what the interim analysis found."""

    estimate: float | None = key(
        None, "Interim estimate of the effect: a difference, or a ratio for ratio endpoints.",
        scale="natural effect scale")
    standard_error: float | None = key(
        None, "Its standard error, > 0, on the analysis scale (the log for ratios).", gt=0)
    information_fraction: float | None = key(
        None, "Share of the final information at the interim, in (0, 1), instead of "
              "standard_error.", gt=0, lt=1)
    treatment_mean: float | None = key(None, "Mean outcome on treatment so far.")
    control_mean: float | None = key(None, "Mean outcome on control so far.")
    sd: float | None = key(None, "Outcome SD at the interim, > 0 (default: the design's).",
                           gt=0)
    treatment_n: int | None = key(None, "Patients on treatment with an outcome, >= 1.", ge=1)
    control_n: int | None = key(None, "Patients on control with an outcome, >= 1.", ge=1)
    treatment_responders: int | None = key(None, "Responders on treatment, >= 0.", ge=0)
    control_responders: int | None = key(None, "Responders on control, >= 0.", ge=0)
    events: int | None = key(None, "Events so far (time to event), >= 1.", ge=1)
    treatment_events: int | None = key(None, "Events on treatment (counts), >= 1.", ge=1)
    control_events: int | None = key(None, "Events on control (counts), >= 1.", ge=1)
    treatment_exposure: float | None = key(None, "Exposure on treatment, > 0.", gt=0)
    control_exposure: float | None = key(None, "Exposure on control, > 0.", gt=0)


class FinalTable(Table):
    """``[final]``: the final analysis as planned."""

    planned_total: int | None = key(
        None, "Planned total patients (default: [sizes] planned of the design file).", ge=1)
    standard_error: float | None = key(
        None, "Standard error of the final estimate (analysis scale), if known better than "
              "the design's planning values give it.", gt=0)


class BoundariesTable(Table):
    """``[boundaries]``: stopping on the predictive probability."""

    futility: float = key(0.1, "Stop for futility below this predictive probability "
                               "(0: never).", ge=0, lt=1)
    efficacy: float = key(0.99, "Stop for efficacy above this predictive probability "
                                "(1: never).", gt=0, le=1)
    prior: Literal["analysis", "design"] = key(
        "analysis", "Whose posterior the boundaries use: the analysis prior (flat when the "
                    "design has none) or the design prior.")


class InterimFileModel(Table):
    """An interim file."""

    title: Title | None = key(None, "Name of the interim look (default: the design's title "
                                    "with 'interim look').")
    design: str = key(help="The trial's design file, relative to this file.", min_length=1)
    interim: InterimTable = key(help="What the interim analysis found.")
    final: FinalTable = key(default_factory=FinalTable, help="The final analysis as planned.")
    boundaries: BoundariesTable = key(default_factory=BoundariesTable,
                                      help="Stopping on the predictive probability.")


#: The forms of ``[interim]`` data: name -> (needed keys, optional keys, endpoint or None)
INTERIM_FORMS: dict[str, tuple[tuple[str, ...], tuple[str, ...], str | None]] = {
    "estimate and standard error": (("estimate", "standard_error"), (), None),
    "estimate and information fraction": (("estimate", "information_fraction"), (), None),
    "means": (("treatment_mean", "control_mean", "treatment_n", "control_n"), ("sd",),
              "ContinuousEndpoint"),
    "responders": (("treatment_responders", "treatment_n", "control_responders",
                    "control_n"), (), "BinaryEndpoint"),
    "single-arm responders": (("treatment_responders", "treatment_n"), (), "BinaryEndpoint"),
    "events": (("estimate", "events"), (), "SurvivalEndpoint"),
    "counts": (("treatment_events", "treatment_exposure", "control_events",
                "control_exposure"), (), "CountEndpoint"),
}
_ENDPOINT_WORDS = {"ContinuousEndpoint": "continuous", "BinaryEndpoint": "binary",
                   "SurvivalEndpoint": "time_to_event", "CountEndpoint": "counts"}


@dataclass(frozen=True)
class InterimFile:
    """A parsed interim file.

    Attributes
    ----------
    path, content
        The interim file and its exact bytes.
    design_path
        The design file it names (resolved against the interim file's folder).
    design_file
        That design file, read (:class:`~assurance.design_file.DesignFile`).
    data
        :class:`~assurance.program.interim.InterimData`.
    form
        Which form the ``[interim]`` data took (a key of :data:`INTERIM_FORMS`).
    planned_total, final_se
        The final analysis: planned total patients, and its standard error when given.
    futility, efficacy, prior
        The ``[boundaries]``.
    title
        The look's title.
    record
        Every table with every key in force (None for keys left out).
    """

    path: Path
    content: bytes = field(repr=False)
    design_path: Path
    design_file: DesignFile = field(repr=False)
    data: Any
    form: str
    planned_total: int | None
    final_se: float | None
    futility: float
    efficacy: float
    prior: str
    title: str
    record: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)


def _say(err: dict[str, Any], models: dict[str, Any]) -> str:
    """A schema finding in the file's key names."""
    loc = tuple(err["loc"])
    path = ".".join(str(p) for p in loc)
    kind, value, ctx = err["type"], err.get("input"), err.get("ctx") or {}
    shown = repr(value) if len(repr(value)) <= 80 else repr(value)[:77] + "..."
    if kind == "extra_forbidden":
        table = ".".join(str(p) for p in loc[:-1])
        model = models.get(table)
        known = [] if model is None else list(model.model_fields)
        place = f"[{table}]" if table else "the top level"
        return (f"unknown key {shown_key(loc[-1])} in {place}."
                f"{did_you_mean(str(loc[-1]), known, cutoff=0.5)} Known keys: "
                f"{', '.join(known)}.")
    if kind == "missing":
        table = ".".join(str(p) for p in loc[:-1])
        model = models.get(table)
        f = None if model is None else model.model_fields.get(str(loc[-1]))
        why = f" ({f.description.rstrip('.')})" if f is not None and f.description else ""
        return f"'{path}' is required{why}."
    bounds = {"greater_than": "> {gt}", "greater_than_equal": ">= {ge}",
              "less_than": "< {lt}", "less_than_equal": "<= {le}"}
    if kind in bounds:
        limit = bounds[kind].format(**{k: f"{float(v):g}" for k, v in ctx.items()})
        return f"'{path}' must be a number {limit}. Got {shown}."
    if kind == "literal_error":
        expected = str(ctx.get("expected", ""))
        return (f"'{path}' must be one of {expected}. Got {shown}."
                + did_you_mean(value, re.findall(r"'([^']*)'", expected)))
    words = {"float_type": "a number", "int_type": "a whole number",
             "int_from_float": "a whole number", "string_type": "text in quotes",
             "model_type": "a table", "dict_type": "a table", "finite_number":
             "a finite number", "string_too_short": "text that is not empty"}
    if kind in words:
        return f"'{path}' must be {words[kind]}. Got {shown}."
    if kind == "value_error":
        return f"'{path}' {ctx.get('error', err['msg'])}."
    return f"'{path}': {err['msg']}. Got {shown}."


def _models() -> dict[str, Any]:
    return {"": InterimFileModel, "interim": InterimTable, "final": FinalTable,
            "boundaries": BoundariesTable}


def read_interim_file(path: str | Path) -> InterimFile:
    """Read and check an interim file and the design file it names.

    Parameters
    ----------
    path
        The interim file (TOML).

    Returns
    -------
    InterimFile

    Raises
    ------
    DesignFileError
        When the file is missing, not TOML, or its keys, data or design file are wrong;
        every problem is listed, each naming its key.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> design = '''[endpoint]
    ... sd = 10
    ... analysis = "z"
    ... [design_prior]
    ... family = "normal"
    ... mean = 4
    ... sd = 2
    ... [sizes]
    ... planned = 200
    ... '''
    >>> interim = '''design = "trial.toml"
    ... [interim]
    ... estimate = 3.0
    ... standard_error = 2.0
    ... '''
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     _ = pathlib.Path(tmp, "trial.toml").write_text(design)
    ...     _ = pathlib.Path(tmp, "look.toml").write_text(interim)
    ...     spec = read_interim_file(pathlib.Path(tmp, "look.toml"))
    >>> spec.form, spec.planned_total, spec.data.standard_error
    ('estimate and standard error', 200, 2.0)
    """
    from pydantic import ValidationError

    path, content, raw = read_companion_file(path, "interim", "read_interim_file")
    problems = Problems(str(path))
    try:
        model = InterimFileModel.model_validate(raw)
    except ValidationError as exc:
        for err in exc.errors(include_url=False):
            problems.add("", _say(err, _models()))
        problems.raise_if_any()
        raise  # pragma: no cover - raise_if_any raised
    design_path = Path(model.design)
    if not design_path.is_absolute():
        design_path = path.parent / design_path
    if design_path.resolve() == path.resolve():
        problems.add("", f"'design' names this interim file itself ({model.design!r}); it "
                         "must name the trial's design file.")
        problems.raise_if_any()
    try:
        spec = read_design_file(design_path)
    except DesignFileError as exc:
        problems.add("", f"'design' names {model.design!r}, which cannot be used: {exc}")
        problems.raise_if_any()
        raise  # pragma: no cover
    if spec.design is None:
        problems.add("", f"'design' names {model.design!r}, a design with an analysis model "
                         "(endpoint type \"model\"); an interim look needs one of the "
                         "built-in endpoints (its normal approximation).")
        problems.raise_if_any()
    data, form = _data(model.interim, spec, problems)
    planned = model.final.planned_total if model.final.planned_total is not None \
        else spec.planned
    if planned is None and model.final.standard_error is None:
        problems.add("final", "'final.planned_total' is needed: the design file has no "
                              "'sizes.planned' and no 'final.standard_error' is given, so the "
                              "final analysis's size is unknown.")
    elif planned is not None and planned < spec.design.endpoint.smallest_total:
        problems.add("final", f"'final.planned_total' must be at least "
                              f"{spec.design.endpoint.smallest_total} for this endpoint. Got "
                              f"{planned}.")
    b = model.boundaries
    if not b.futility < b.efficacy:
        problems.add("boundaries", f"'boundaries.futility' ({b.futility:g}) must be below "
                                   f"'boundaries.efficacy' ({b.efficacy:g}).")
    problems.raise_if_any()
    title = model.title or f"{spec.design.title}: interim look"
    record = model.model_dump()
    record["design"] = model.design
    return InterimFile(path=path, content=content, design_path=design_path,
                       design_file=spec, data=data, form=form, planned_total=planned,
                       final_se=model.final.standard_error, futility=b.futility,
                       efficacy=b.efficacy, prior=b.prior, title=title, record=record)


def _data(table: InterimTable, spec: DesignFile, problems: Problems) -> tuple[Any, str]:
    from ..program.interim import InterimData

    given = {k for k, v in table.model_dump().items() if v is not None}
    kind = type(spec.design.endpoint).__name__
    matches = [name for name, (needed, optional, endpoint) in INTERIM_FORMS.items()
               if set(needed) <= given and given <= set(needed) | set(optional)]
    if len(matches) != 1:
        forms = "; ".join(f"{name}: {', '.join(needed)}"
                          for name, (needed, _, endpoint) in INTERIM_FORMS.items()
                          if endpoint in (None, kind))
        what = ", ".join(sorted(given)) if given else "nothing"
        problems.add("interim", f"the keys given ({what}) match none of the forms of "
                                f"interim data for a {_ENDPOINT_WORDS.get(kind, kind)} "
                                f"endpoint. Give one of: {forms}.")
        return None, ""
    form = matches[0]
    endpoint_needed = INTERIM_FORMS[form][2]
    ep = spec.design.endpoint
    if endpoint_needed is not None and endpoint_needed != kind:
        problems.add("interim", f"the {form} form of interim data belongs to a "
                                f"{_ENDPOINT_WORDS[endpoint_needed]} endpoint; the design's "
                                f"endpoint is {_ENDPOINT_WORDS.get(kind, kind)}. Give "
                                "'estimate' and 'standard_error' instead.")
        return None, form
    single_form = form == "single-arm responders"
    if endpoint_needed is not None and \
            (getattr(ep, "layout", "two_arm") != "two_arm") != single_form:
        if single_form:
            problems.add("interim", "the single-arm responders form (treatment_responders "
                                    "and treatment_n only) belongs to a single-arm design; "
                                    "this design has two arms. Give 'control_responders' "
                                    "and 'control_n' too.")
        else:
            problems.add("interim", f"the {form} form of interim data compares two arms; "
                                    "the design has a single arm. Give "
                                    "'treatment_responders' and 'treatment_n' only, or "
                                    "'estimate' and 'standard_error'.")
        return None, form
    t = table
    try:
        if form == "estimate and standard error":
            data = InterimData(t.estimate, standard_error=t.standard_error)
        elif form == "estimate and information fraction":
            data = InterimData(t.estimate, information_fraction=t.information_fraction,
                               description="estimate as given, at the stated information "
                                           "fraction")
        elif form == "means":
            data = InterimData.from_means(t.treatment_mean, t.control_mean, t.treatment_n,
                                          t.control_n, t.sd if t.sd is not None else ep.sigma)
        elif single_form:
            if t.treatment_responders > t.treatment_n:
                problems.add("interim", f"'interim.treatment_responders' "
                                        f"({t.treatment_responders}) must not exceed "
                                        f"'interim.treatment_n' ({t.treatment_n}).")
                return None, form
            data = InterimData.from_single_arm_responses(
                t.treatment_responders, t.treatment_n, ep.control_rate, scale=ep.scale)
        elif form == "responders":
            for arm in ("treatment", "control"):
                if getattr(t, f"{arm}_responders") > getattr(t, f"{arm}_n"):
                    problems.add("interim", f"'interim.{arm}_responders' "
                                            f"({getattr(t, f'{arm}_responders')}) must not "
                                            f"exceed 'interim.{arm}_n' "
                                            f"({getattr(t, f'{arm}_n')}).")
                    return None, form
            data = InterimData.from_responses(t.treatment_responders, t.treatment_n,
                                              t.control_responders, t.control_n,
                                              scale=ep.scale)
        elif form == "events":
            data = InterimData.from_events(t.estimate, t.events, allocation=ep.allocation)
        else:
            data = InterimData.from_counts(t.treatment_events, t.treatment_exposure,
                                           t.control_events, t.control_exposure)
    except AssuranceInputError as exc:
        problems.add_domain(exc, "interim", keys={"hazard_ratio": "interim.estimate",
                                                  "responders": "interim.treatment_responders",
                                                  "n": "interim.treatment_n"})
        return None, form
    if ep.ratio_scale and t.estimate is not None and not t.estimate > 0:
        problems.add("interim", f"'interim.estimate' must be a ratio > 0 for this endpoint. "
                                f"Got {t.estimate!r}.")
    if t.estimate is not None and not math.isfinite(t.estimate):  # pragma: no cover
        problems.add("interim", f"'interim.estimate' must be finite. Got {t.estimate!r}.")
    return data, form
