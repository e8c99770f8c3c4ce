"""The program file: a phase 2 design file, a phase 3 design file, and how they connect.

A program file is TOML::

    title = "Invented program"
    seed = 20260101

    [phase2]
    design = "phase2.toml"   # an ordinary design file; its success rule is the go rule
    n = 120                  # total phase 2 patients
    go_threshold = 5.0       # optional: go when the estimate is at least this instead

    [phase3]
    design = "phase3.toml"   # its design prior is the prior of the true effect
    n = 600                  # total phase 3 patients (when not re-planned)

    [surrogate]              # optional: phase 2 effect = intercept + slope * phase 3 + noise
    intercept = 0.0
    slope = 1.0
    sd = 0.0

    [durations]              # optional, months
    phase2 = 12.0
    gap = 6.0
    phase3 = 30.0            # fixed months; or let phase 3 follow its size:
    # phase3_recruitment = 25.0   # patients recruited per month
    # phase3_follow_up = 6.0      # months from the last patient's entry to the result
    # (phase2_recruitment and phase2_follow_up likewise for phase 2)

    [grid]                   # optional: phase 2 sizes and go thresholds to compare
    phase2_sizes = [60, 120, 240]
    go_thresholds = [0.0, 5.0, 10.0]

    [replan]                 # optional: phase 3 sized from the observed phase 2 estimate
    target = 0.8
    min_n = 200
    max_n = 2000
    shrinkage = 0.9
    power_weight = 0.5

    [check]
    programs = 20000         # programs simulated to check the computed figures

Paths of design files are read relative to the program file's folder. Every problem of the
file is reported at once, each naming the file's key (``'phase2.n'``); problems of a design
file it names are reported by that file's own reader.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from ..errors import AssuranceInputError
from ._problems import Problems, did_you_mean, printable

__all__ = ["ProgramFile", "read_program_file", "PROGRAM_TABLES"]

#: a program file is a short text file
MAX_PROGRAM_BYTES = 200_000
#: the seed used when none is given (the same as the design files')
DEFAULT_SEED = 20260101


class _Table(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)


class Phase2Table(_Table):
    design: str = Field(..., min_length=1, max_length=1000,
                        description="the phase 2 design file, relative to this file")
    n: int = Field(..., ge=1, le=10**8, description="total phase 2 patients")
    go_threshold: float | None = Field(
        None, description="go when the phase 2 estimate is at least this (natural scale); "
                          "leave out to use the phase 2 design's success rule")


class Phase3Table(_Table):
    design: str = Field(..., min_length=1, max_length=1000,
                        description="the phase 3 design file, relative to this file")
    n: int = Field(..., ge=1, le=10**8, description="total phase 3 patients")


class SurrogateTable(_Table):
    intercept: float = Field(0.0, description="phase 2 effect when the phase 3 effect is 0")
    slope: float = Field(1.0, description="change in the phase 2 effect per unit of phase 3 "
                                          "effect (not 0)")
    sd: float = Field(0.0, ge=0, description="SD of the phase 2 effect around that line")


class DurationsTable(_Table):
    phase2: float = Field(0.0, ge=0, le=1200, description="months of phase 2 (fixed)")
    gap: float = Field(0.0, ge=0, le=1200, description="months from the phase 2 result to "
                                                       "the start of phase 3")
    phase3: float = Field(0.0, ge=0, le=1200, description="months of phase 3 (fixed)")
    phase2_recruitment: float | None = Field(
        None, gt=0, le=1e6, description="phase 2 patients recruited per month; phase 2 then "
                                        "lasts n / this + phase2_follow_up months")
    phase2_follow_up: float = Field(0.0, ge=0, le=1200, description="months from the last "
                                    "phase 2 patient's entry to its result")
    phase3_recruitment: float | None = Field(
        None, gt=0, le=1e6, description="phase 3 patients recruited per month; phase 3 then "
                                        "lasts n / this + phase3_follow_up months, so a "
                                        "re-planned phase 3 takes as long as its size needs")
    phase3_follow_up: float = Field(0.0, ge=0, le=1200, description="months from the last "
                                    "phase 3 patient's entry to its result")


class GridTable(_Table):
    phase2_sizes: list[int] = Field(default_factory=list, max_length=50,
                                    description="phase 2 sizes to compare")
    go_thresholds: list[float] = Field(default_factory=list, max_length=50,
                                       description="go thresholds to compare (natural scale)")


class ReplanTable(_Table):
    target: float = Field(..., gt=0, lt=1, description="assurance phase 3 must reach under "
                                                       "the prior from the phase 2 result")
    min_n: int = Field(..., ge=1, le=10**8, description="fewest phase 3 patients")
    max_n: int = Field(..., ge=1, le=10**8, description="most phase 3 patients")
    shrinkage: float = Field(1.0, ge=0, le=1, description="factor on the phase 2 estimate")
    power_weight: float = Field(1.0, gt=0, le=1, description="share of the phase 2 "
                                                             "information kept")
    robust_weight: float = Field(1.0, ge=0, le=1, description="weight of the informative "
                                                              "part in a robust mixture")
    vague_sd: float | None = Field(None, gt=0, description="SD of the vague part")
    vague_mean: float | None = Field(None, description="centre of the vague part")


class CheckTable(_Table):
    programs: int = Field(20_000, ge=0, le=10**7, description="programs simulated as a "
                                                             "check (0: no check)")


class ProgramFileModel(_Table):
    title: str = Field("Untitled program", min_length=1, max_length=200,
                       description="name of the program")
    seed: int = Field(DEFAULT_SEED, ge=0, le=2**63 - 1, description="seed of the simulation")
    phase2: Phase2Table = Field(..., description="the phase 2 trial")
    phase3: Phase3Table = Field(..., description="the phase 3 trial")
    surrogate: SurrogateTable = Field(default_factory=SurrogateTable,
                                      description="how the phase 2 effect follows phase 3's")
    durations: DurationsTable = Field(default_factory=DurationsTable,
                                      description="durations in months")
    grid: GridTable = Field(default_factory=GridTable,
                            description="phase 2 sizes and go thresholds to compare")
    replan: ReplanTable | None = Field(None, description="phase 3 re-planned from phase 2")
    check: CheckTable = Field(default_factory=CheckTable,
                              description="the simulated check")


#: table name -> model, for messages
PROGRAM_TABLES: dict[str, type[_Table]] = {
    "phase2": Phase2Table, "phase3": Phase3Table, "surrogate": SurrogateTable,
    "durations": DurationsTable, "grid": GridTable, "replan": ReplanTable,
    "check": CheckTable}


@dataclass(frozen=True)
class ProgramFile:
    """A program file as read: the program and what it asks to compute.

    Attributes
    ----------
    path, content
        The program file and its exact bytes.
    program
        The :class:`~assurance.program.development.ProgramDesign`.
    phase2_spec, phase3_spec
        The two design files as read (:class:`~assurance.design_file.DesignFile`).
    phase2_sizes, go_thresholds
        The grid to compare (empty: the program's own only).
    programs, seed
        The simulated check: programs simulated (0: none) and its seed.
    record
        Every key in force, in the file's names.
    """

    path: Path
    content: bytes = field(repr=False)
    program: Any = None
    phase2_spec: Any = field(default=None, repr=False)
    phase3_spec: Any = field(default=None, repr=False)
    phase2_sizes: tuple[int, ...] = ()
    go_thresholds: tuple[float, ...] = ()
    programs: int = 20_000
    seed: int = DEFAULT_SEED
    record: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)

    @property
    def design_paths(self) -> tuple[Path, Path]:
        """The phase 2 and phase 3 design files."""
        return Path(self.phase2_spec.source), Path(self.phase3_spec.source)


# ------------------------------------------------------------------------------------------
# messages in the file's own key names
# ------------------------------------------------------------------------------------------
_TYPE_WORDS = {"float_type": "a number", "int_type": "a whole number",
               "int_from_float": "a whole number", "string_type": "text in quotes",
               "list_type": "a list [ ... ]", "model_type": "a table",
               "model_attributes_type": "a table", "dict_type": "a table",
               "finite_number": "a finite number", "bool_type": "true or false"}


def _shown(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def _say(err: dict[str, Any], raw: dict[str, Any]) -> str:
    loc = tuple(err["loc"])
    path = ".".join(f"[{p}]" if isinstance(p, int) else str(p) for p in loc).replace(".[", "[")
    kind, ctx, value = err["type"], err.get("ctx") or {}, err.get("input")
    if kind == "extra_forbidden":
        table = str(loc[0]) if len(loc) > 1 else ""
        model = PROGRAM_TABLES.get(table, ProgramFileModel)
        known = list(model.model_fields)
        place = f"[{table}]" if table else "the top level"
        given = raw.get(table, {}) if table else raw
        hint = did_you_mean(loc[-1], [k for k in known if k not in (given or {})], cutoff=0.5)
        return (f"unknown key {str(loc[-1])!r} in {place}.{hint} Known: "
                f"{', '.join(known)}.")
    if kind == "missing":
        table = str(loc[0]) if len(loc) > 1 else ""
        model = PROGRAM_TABLES.get(table, ProgramFileModel)
        f = model.model_fields.get(str(loc[-1]))
        why = f" ({f.description})" if f is not None and f.description else ""
        return f"'{path}' is required{why}."
    if kind in _TYPE_WORDS:
        return f"'{path}' must be {_TYPE_WORDS[kind]}. Got {_shown(value)}."
    bounds = {"greater_than": "> {gt}", "greater_than_equal": ">= {ge}",
              "less_than": "< {lt}", "less_than_equal": "<= {le}",
              "too_short": "at least {min_length} long", "too_long": "at most {max_length} long",
              "string_too_short": "at least {min_length} characters long",
              "string_too_long": "at most {max_length} characters long"}
    if kind in bounds:
        try:
            allowed = bounds[kind].format(**ctx)
        except (KeyError, IndexError):
            allowed = str(err.get("msg", "allowed"))
        return f"'{path}' must be {allowed}. Got {_shown(value)}."
    return f"'{path}': {err.get('msg', 'not allowed')}. Got {_shown(value)}."


#: Python parameters of the program's classes -> the file's keys
_KEYS = {"n2": "phase2.n", "n3": "phase3.n", "go_threshold": "phase2.go_threshold",
         "go_thresholds": "grid.go_thresholds", "phase2_sizes": "grid.phase2_sizes",
         "intercept": "surrogate.intercept", "slope": "surrogate.slope", "sd": "surrogate.sd",
         "months_phase2": "durations.phase2", "months_gap": "durations.gap",
         "months_phase3": "durations.phase3", "target": "replan.target",
         "recruitment_phase2": "durations.phase2_recruitment",
         "follow_up_phase2": "durations.phase2_follow_up",
         "recruitment_phase3": "durations.phase3_recruitment",
         "follow_up_phase3": "durations.phase3_follow_up",
         "min_n": "replan.min_n", "max_n": "replan.max_n", "shrinkage": "replan.shrinkage",
         "power_weight": "replan.power_weight", "robust_weight": "replan.robust_weight",
         "vague_sd": "replan.vague_sd", "vague_mean": "replan.vague_mean",
         "replan": "replan", "title": "title", "value": "phase2.go_threshold"}


# ------------------------------------------------------------------------------------------
# the reader
# ------------------------------------------------------------------------------------------
def read_program_file(path: str | os.PathLike[str]) -> ProgramFile:
    """Read and check a program file and the two design files it names.

    Parameters
    ----------
    path
        The program file (TOML).

    Returns
    -------
    ProgramFile

    Raises
    ------
    DesignFileError
        If the file is missing, not valid TOML, or describes an invalid program (every
        problem listed, each with its key); a design file it names is checked by
        :func:`~assurance.design_file.read_design_file`, whose errors name that file.

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
    ... '''
    >>> program = '''title = "Demo program"
    ... [phase2]
    ... design = "trial.toml"
    ... n = 100
    ... [phase3]
    ... design = "trial.toml"
    ... n = 400
    ... '''
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     _ = pathlib.Path(tmp, "trial.toml").write_text(design)
    ...     _ = pathlib.Path(tmp, "program.toml").write_text(program)
    ...     spec = read_program_file(pathlib.Path(tmp, "program.toml"))
    >>> spec.program.n2, spec.program.n3, spec.program.title
    (100, 400, 'Demo program')
    """
    from .reader import read_companion_file

    path, content, raw = read_companion_file(path, "program", "read_program_file",
                                             limit=MAX_PROGRAM_BYTES)
    problems = Problems(str(path))
    try:
        model = ProgramFileModel.model_validate(raw)
    except ValidationError as exc:
        for err in exc.errors(include_url=False):
            problems.add("", _say(err, raw))
        problems.raise_if_any()
        raise  # pragma: no cover - raise_if_any raised
    return _build(model, path, content, problems)


def _resolve(folder: Path, given: str) -> Path:
    p = Path(given).expanduser()
    return p if p.is_absolute() else folder / p


def _build(model: ProgramFileModel, path: Path, content: bytes,
           problems: Problems) -> ProgramFile:
    from ..program.development import ProgramDesign, Replanning, Surrogate
    from .reader import read_design_file

    folder = path.parent
    specs = {}
    for phase in ("phase2", "phase3"):
        table = getattr(model, phase)
        target = _resolve(folder, table.design)
        if not target.is_file():
            what = "is a folder, not a file" if target.is_dir() else "was not found"
            problems.add("", f"'{phase}.design' names {printable(str(target))!r}, which "
                         f"{what}. Paths are read relative to the program file's folder.")
            continue
        if target.resolve() == path.resolve():
            problems.add("", f"'{phase}.design' names the program file itself; it must name "
                         "a design file.")
            continue
        specs[phase] = read_design_file(target)  # its own errors name its own file
    for phase, spec in specs.items():
        if spec.model is not None:
            problems.add("", f"'{phase}.design' names a design file with an analysis model "
                         "([endpoint] type = \"model\"); a program needs a built-in endpoint.")
    for phase in specs:
        smallest = specs[phase].design.endpoint.smallest_total
        if getattr(model, phase).n < smallest:
            problems.add("", f"'{phase}.n' must be at least {smallest} (the smallest trial "
                         f"its design's analysis allows). Got {getattr(model, phase).n}.")
    if model.replan is not None and model.replan.max_n < model.replan.min_n:
        problems.add("", f"'replan.max_n' must be >= 'replan.min_n' ({model.replan.min_n}). "
                     f"Got {model.replan.max_n}.")
    if model.replan is not None and model.replan.robust_weight < 1 and \
            model.replan.vague_sd is None:
        problems.add("", "'replan.vague_sd' is required when 'replan.robust_weight' is below 1 "
                     "(the SD of the vague part of the robust mixture).")
    d = model.durations
    for phase in ("phase2", "phase3"):
        rate = getattr(d, f"{phase}_recruitment")
        if rate is not None and phase in d.model_fields_set:
            problems.add("", f"'durations.{phase}' (fixed months) and "
                         f"'durations.{phase}_recruitment' (months that follow the size) "
                         "cannot both be given; keep one.")
        if rate is None and getattr(d, f"{phase}_follow_up") > 0:
            problems.add("", f"'durations.{phase}_follow_up' needs "
                         f"'durations.{phase}_recruitment' (patients per month): the "
                         "follow-up is added to the recruitment time.")
    problems.raise_if_any()
    program = None
    surrogate = replan = None
    try:
        s = model.surrogate
        surrogate = Surrogate(s.intercept, s.slope, s.sd)
    except AssuranceInputError as exc:
        problems.add_domain(exc, "surrogate", _KEYS)
    if model.replan is not None:
        r = model.replan
        try:
            replan = Replanning(r.target, r.min_n, r.max_n, shrinkage=r.shrinkage,
                                power_weight=r.power_weight, robust_weight=r.robust_weight,
                                vague_sd=r.vague_sd, vague_mean=r.vague_mean)
        except AssuranceInputError as exc:
            problems.add_domain(exc, "replan", _KEYS)
    problems.raise_if_any()
    try:
        program = ProgramDesign(
            specs["phase2"].design, specs["phase3"].design, n2=model.phase2.n,
            n3=model.phase3.n, go_threshold=model.phase2.go_threshold,
            surrogate=surrogate, months_phase2=d.phase2, months_gap=d.gap,
            months_phase3=d.phase3, replan=replan, title=model.title,
            recruitment_phase2=d.phase2_recruitment, follow_up_phase2=d.phase2_follow_up,
            recruitment_phase3=d.phase3_recruitment, follow_up_phase3=d.phase3_follow_up)
    except AssuranceInputError as exc:
        problems.add_domain(exc, "", _KEYS)
    smallest = specs["phase2"].design.endpoint.smallest_total
    for i, n in enumerate(model.grid.phase2_sizes):
        if not smallest <= n <= 10**8:
            problems.add("", f"'grid.phase2_sizes[{i}]' must be a whole number of at least "
                         f"{smallest} (the phase 2 endpoint's smallest trial). Got {n}.")
    if specs["phase2"].design.endpoint.ratio_scale:
        for i, g in enumerate(model.grid.go_thresholds):
            if g <= 0:
                problems.add("", f"'grid.go_thresholds[{i}]' must be a ratio > 0 (the phase 2 "
                             f"effect is a ratio). Got {g}.")
    problems.raise_if_any()
    record = model.model_dump(mode="python")
    return ProgramFile(path=path, content=content, program=program,
                       phase2_spec=specs["phase2"], phase3_spec=specs["phase3"],
                       phase2_sizes=tuple(model.grid.phase2_sizes),
                       go_thresholds=tuple(float(g) for g in model.grid.go_thresholds),
                       programs=model.check.programs, seed=model.seed, record=record)
