"""Read a TOML design file into a :class:`~assurance.TrialDesign` and its run settings.

The file format is this package's own, in plain words; every key is declared once in
:mod:`assurance.design_file.schema` (the reference page ``docs/design-file.md`` lists them
all). A complete example::

    title = "Invented example: pain score trial"

    [endpoint]
    type = "continuous"
    sd = 10.0               # planning SD of the outcome
    layout = "two_arm"      # or "single_arm"
    allocation = 1.0        # treatment patients per control patient
    analysis = "t"          # "t": SD estimated at the analysis; "z": SD known
    better = "higher"       # or "lower"

    [success]
    alpha = 0.05
    sided = "two"           # two-sided alpha, success only in the favourable direction
    margin = 0.0            # > 0 for non-inferiority
    # min_estimate = 2.0    # observed effect must also reach this

    [effect]
    assumed = 4.0           # classical power is computed here
    relevant = 3.0          # smallest clinically relevant effect
    also_power_at = [2.0, 5.0]

    [design_prior]
    family = "normal"
    mean = 4.0
    sd = 2.5

    [sizes]                 # total patients; or: list = [100, 200, 300]
    from = 20
    to = 600
    step = 20

    [targets]
    power = 0.9
    assurance = 0.7
    conditional_assurance = 0.8

    [monte_carlo]           # used only where no exact route exists
    draws = 20000
    seed = 2026

Every unknown key is an error listing the known keys (and one of close spelling, if any).

Reading happens in three passes, and every problem found in any of them is reported
together: the schema checks each table's keys, types and ranges; the tables are turned into
the package's objects (whose own checks speak of the file's keys); and the checks that the
computation would make before it starts (a rule the endpoint cannot evaluate, precision the
prior cannot support) are run on the finished design. A file that passes ``assurance
check`` is therefore not rejected by ``assurance plan`` for its inputs.
"""

from __future__ import annotations

import math
import os
import tomllib
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import AssuranceInputError, DesignFileError
from ._problems import Problems, did_you_mean, printable, shown_key

__all__ = ["DesignFile", "read_design_file", "parse_design", "prior_from_table",
           "prior_with_origin", "endpoint_from_table"]

#: largest design file read (a design is a few hundred bytes; this stops a wrong path)
MAX_FILE_BYTES = 1_000_000


@dataclass(frozen=True)
class DesignFile:
    """A parsed design file: the design, what to compute, and the normalised record.

    Attributes
    ----------
    design
        The :class:`~assurance.TrialDesign`.
    sizes
        Total sizes to evaluate (None: chosen from the targets).
    targets
        Quantity -> target probability.
    draws, seed
        Monte Carlo settings.
    source
        Where the design came from (the file's path).
    zones, precision
        :class:`~assurance.GoConsiderStop` and :class:`~assurance.PrecisionPlan`, or None.
    prior_origin
        What the design prior was built from (a fit, a text), or None.
    record
        Every table with every key in force, defaults filled in, in the file's own names;
        :func:`assurance.design_file.record.design_toml` writes it as ``design.toml``.
    notes
        Warnings for the reader of the design (not errors).
    content
        The file's exact bytes, as read (None when parsed from a mapping).
    planned
        ``[sizes] planned``: the total size the decision is taken at, or None.
    sensitivity
        How to vary the design prior (``[sensitivity]``), or None when ``show = false``.
    model, rule, simulation
        For an analysis model (``[endpoint] type = "model"``): the
        :class:`~assurance.general.GeneralModel`, the success rule and the
        ``[simulation]`` settings; ``design`` is then None.
    title
        The design's title.
    """

    design: Any
    sizes: np.ndarray | None
    targets: dict[str, float] = field(default_factory=dict)
    draws: int = 20_000
    seed: int = 20260101
    source: str = ""
    zones: Any = None
    prior_origin: Any = None
    precision: Any = None
    record: dict[str, Any] = field(default_factory=dict, compare=False)
    notes: tuple[str, ...] = ()
    content: bytes | None = field(default=None, repr=False, compare=False)
    planned: int | None = None
    sensitivity: Any = None
    model: Any = None
    rule: Any = None
    simulation: Any = None
    title: str = ""

    def __post_init__(self) -> None:
        if not self.title and self.design is not None:
            object.__setattr__(self, "title", self.design.title)


def read_design_file(path: str | Path) -> DesignFile:
    """Read and check a TOML design file.

    Parameters
    ----------
    path
        The design file.

    Returns
    -------
    DesignFile

    Raises
    ------
    DesignFileError
        If the file is missing or not valid TOML, or describes an invalid design. Every
        problem is listed, each with its table, key, value and what is allowed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> text = '''title = "Demo"
    ... [endpoint]
    ... sd = 10
    ... [design_prior]
    ... family = "normal"
    ... mean = 4
    ... sd = 2
    ... '''
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp, "trial.toml")
    ...     _ = path.write_text(text)
    ...     spec = read_design_file(path)
    >>> spec.design.endpoint.sigma
    10.0
    """
    path = Path(path)
    shown = printable(str(path))
    if not path.is_file():
        what = "is a folder, not a file" if path.is_dir() else "was not found"
        raise DesignFileError(f"The design file '{shown}' {what}. Check the path.")
    if path.stat().st_size > MAX_FILE_BYTES:
        raise DesignFileError(f"{shown} is {path.stat().st_size:,} bytes; a design file is a "
                              f"short text file (at most {MAX_FILE_BYTES:,} bytes).")
    try:
        content = path.read_bytes()
    except OSError as exc:
        raise DesignFileError(f"The design file '{shown}' cannot be read: "
                              f"{exc.strerror}.") from None
    return replace(parse_design(_toml(content, shown), source=str(path)), content=content)


def read_companion_file(path: Any, kind: str, owner: str, *,
                        limit: int = MAX_FILE_BYTES) -> tuple[Path, bytes, dict[str, Any]]:
    """Read a file that names design files (a program, interim or portfolio file): its
    path, exact bytes and parsed TOML, with the same messages for every kind of file.

    ``kind`` names the file for a reader ("program", "interim", "portfolio"); ``owner`` is
    the public function, named when ``path`` is not a path at all.
    """
    if not isinstance(path, str | os.PathLike):
        raise AssuranceInputError(
            f"The 'path' parameter of {owner} must be a file path (str or pathlib.Path). "
            f"Got {path!r:.80} instead.")
    path = Path(path)
    shown = printable(str(path))
    if not path.is_file():
        what = "is a folder, not a file" if path.is_dir() else "was not found"
        raise DesignFileError(f"The {kind} file '{shown}' {what}. Check the path.")
    size = path.stat().st_size
    if size > limit:
        raise DesignFileError(f"{shown} is {size:,} bytes; a {kind} file is a short text "
                              f"file (at most {limit:,} bytes).")
    try:
        content = path.read_bytes()
    except OSError as exc:
        raise DesignFileError(f"The {kind} file '{shown}' cannot be read: "
                              f"{exc.strerror}.") from None
    return path, content, _toml(content, shown)


def _toml(content: bytes, shown: str) -> dict[str, Any]:
    """The file's tables: UTF-8 TOML, a leading byte order mark dropped; or a plain refusal."""
    for mark, name in ((b"\xff\xfe\x00\x00", "UTF-32"), (b"\x00\x00\xfe\xff", "UTF-32"),
                       (b"\xff\xfe", "UTF-16"), (b"\xfe\xff", "UTF-16")):
        if content.startswith(mark):
            raise DesignFileError(
                f"{shown} is saved as {name} text (it starts with a {name} byte order mark); "
                "save it as UTF-8 and read it again.")
    if content.startswith(b"\xef\xbb\xbf"):  # a UTF-8 byte order mark: harmless, dropped
        content = content[3:]
    try:
        text = content.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = content[:exc.start].count(b"\n") + 1
        raise DesignFileError(
            f"{shown} is not a UTF-8 text file: byte {exc.start + 1} (line {line}) is "
            f"0x{content[exc.start]:02x}, which UTF-8 does not allow there. Save the file as "
            "UTF-8.") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignFileError(f"{shown} is not valid TOML: {printable(str(exc))}.") from None


def parse_design(raw: dict[str, Any], *, source: str = "design") -> DesignFile:
    """Build a :class:`DesignFile` from an already-parsed TOML mapping.

    All problems are collected and raised together as one :class:`DesignFileError` whose
    ``problems`` attribute lists them.

    Examples
    --------
    >>> spec = parse_design({"endpoint": {"sd": 10.0},
    ...                      "design_prior": {"family": "normal", "mean": 4.0, "sd": 2.0}})
    >>> spec.record["success"]["alpha"], spec.record["endpoint"]["analysis"]
    (0.025, 't')
    """
    problems = Problems(source)
    if raw == {}:
        problems.add("", "the file has no keys or tables (it is empty, or holds only "
                     "comments). A design needs at least an [endpoint] table and a "
                     "[design_prior] table; docs/design-file.md lists every key.")
        problems.raise_if_any()
    tables = _validate_tables(raw, problems)
    built = _Builder(tables, problems, source).build()
    problems.raise_if_any()
    return built


# ------------------------------------------------------------------------------------------
# pass 1: the schema
# ------------------------------------------------------------------------------------------
@cache
def _adapters() -> dict[str, Any]:
    from pydantic import TypeAdapter

    from .schema import DesignFileModel

    return {name: TypeAdapter(f.rebuild_annotation())
            for name, f in DesignFileModel.model_fields.items()}


def _validate_tables(raw: Any, problems: Problems) -> dict[str, Any]:
    """Each top-level key validated on its own, so one bad table hides no other problem."""
    from pydantic import ValidationError

    from .schema import DesignFileModel

    if not isinstance(raw, dict):
        problems.add("", f"the design must be a TOML table of tables. Got {raw!r}.")
        return {}
    fields = DesignFileModel.model_fields
    out: dict[str, Any] = {}
    for name, value in raw.items():
        if name not in fields:
            hint = did_you_mean(name, [f for f in fields if f not in raw])
            problems.add("", f"unknown table or key {shown_key(name)} at the top level.{hint} "
                         f"Known: {', '.join(fields)}.")
            continue
        try:
            out[name] = _adapters()[name].validate_python(value)
        except ValidationError as exc:
            problems.add_validation(exc, prefix=(name,), raw=value)
            out[name] = _FAILED
    for name, f in fields.items():
        if name in out:
            continue
        if f.is_required():
            problems.add("", f"the [{name}] table is missing; it is required ({f.description})")
            out[name] = _FAILED
        else:
            out[name] = f.get_default(call_default_factory=True)
    return out


class _Failed:
    """A table that failed its checks (already reported)."""

    def __repr__(self) -> str:  # pragma: no cover - debugging aid
        return "<failed>"


_FAILED = _Failed()


def _ok(*values: Any) -> bool:
    return not any(v is _FAILED for v in values)


# ------------------------------------------------------------------------------------------
# pass 2 and 3: build the objects, then the checks the computation makes before it starts
# ------------------------------------------------------------------------------------------
#: TrialDesign parameter -> design-file key
_DESIGN_KEYS = {"assumed_effect": "effect.assumed", "relevant_effect": "effect.relevant",
                "power_effects": "effect.also_power_at", "sigma_prior": "sd_prior",
                "rule.min_estimate": "success.min_estimate", "rule.beyond": "success.beyond",
                "analysis_prior": "analysis_prior", "design_prior": "design_prior",
                "title": "title", "endpoint": "endpoint", "rule": "success"}


class _Builder:
    def __init__(self, tables: dict[str, Any], problems: Problems, source: str):
        self.t, self.problems, self.source = tables, problems, source

    def attempt(self, where: str, make: Callable[[], Any], keys: dict[str, str] | None = None,
                note: str = "") -> Any:
        """Run ``make``; an input error becomes a problem under ``where``."""
        try:
            return make()
        except DesignFileError as exc:
            for problem in getattr(exc, "problems", [str(exc)]):
                self.problems.add("", problem)
        except AssuranceInputError as exc:
            self.problems.add_domain(exc, where, keys, note)
        return _FAILED

    def build(self) -> DesignFile:
        t = self.t
        if t["endpoint"] is not _FAILED and getattr(t["endpoint"], "type", None) == "model":
            return self.build_model()
        if t["simulation"] is not None and t["simulation"] is not _FAILED and \
                t["endpoint"] is not _FAILED:
            self.problems.add("simulation", "[simulation] is for analysis models ([endpoint] "
                              "type = \"model\"); the built-in endpoints use [monte_carlo].")
        effect = t["effect"]
        endpoint = _FAILED
        if _ok(t["endpoint"], effect):
            borrowed = (getattr(t["endpoint"], "assumed_hazard_ratio", 0) is None
                        and effect.assumed is not None)
            endpoint = self.attempt(
                "endpoint", lambda: _endpoint(t["endpoint"], effect, self),
                {"assumed_hazard_ratio": "effect.assumed"} if borrowed else None)
        if endpoint is not _FAILED and endpoint.to_dict().get("kind") == "binary":
            for problem in _binary_rate_problems(t["endpoint"], endpoint, effect, t["zones"]):
                self.problems.add("", problem)
        rule = _FAILED if t["success"] is _FAILED else self.attempt(
            "success", lambda: _rule(t["success"]))
        design_prior, origin = _FAILED, None
        if _ok(t["design_prior"], endpoint):
            made = self.attempt("design_prior", lambda: _prior_and_origin(
                t["design_prior"], "design_prior", self, endpoint))
            if made is not _FAILED:
                design_prior, origin = made
        analysis_prior = None
        if t["analysis_prior"] is not None and _ok(t["analysis_prior"], endpoint):
            analysis_prior = self.attempt("analysis_prior", lambda: _prior_and_origin(
                t["analysis_prior"], "analysis_prior", self, endpoint)[0])
        elif t["analysis_prior"] is not None:
            analysis_prior = _FAILED
        sd_prior = None
        if t["sd_prior"] is not None and _ok(t["sd_prior"], endpoint):
            if endpoint.to_dict().get("kind") != "continuous":
                self.problems.add("sd_prior", "[sd_prior] applies to continuous endpoints only "
                                  f"(this endpoint is {endpoint.to_dict().get('kind')}).")
                sd_prior = _FAILED
            else:
                sd_prior = self.attempt("sd_prior", lambda: _prior_and_origin(
                    t["sd_prior"], "sd_prior", self, None)[0])
        elif t["sd_prior"] is not None:
            sd_prior = _FAILED
        zones = None
        if t["zones"] is not None and t["zones"] is not _FAILED:
            zones = self.attempt("zones", lambda: _zones(t["zones"], endpoint))
        elif t["zones"] is _FAILED:
            zones = _FAILED
        precision = None
        if t["precision"] is not None and t["precision"] is not _FAILED:
            precision = self.attempt("precision", lambda: _precision(t["precision"]))
        elif t["precision"] is _FAILED:
            precision = _FAILED
        title = t["title"] if t["title"] is not _FAILED else None
        if title is None:  # the file's name, made safe for a title
            from .schema import MAX_TITLE

            title = printable(Path(self.source).stem).strip()[:MAX_TITLE] or "Untitled trial"
        design = _FAILED
        if _ok(endpoint, rule, design_prior, analysis_prior, sd_prior, effect):
            design = self.attempt("", lambda: _trial_design(
                endpoint, design_prior, rule, effect, sd_prior, analysis_prior, title),
                _DESIGN_KEYS, _scale_note(endpoint))
        sizes = None
        planned = None
        if t["sizes"] is not None and t["sizes"] is not _FAILED:
            sizes = _sizes(t["sizes"])
            if endpoint is not _FAILED and sizes is not None and \
                    sizes.min() < endpoint.smallest_total:
                self.problems.add("sizes", f"every size must be >= {endpoint.smallest_total} "
                                  "(the fewest patients this analysis allows). Got "
                                  f"{int(sizes.min())}.")
            planned = t["sizes"].planned
            if endpoint is not _FAILED and planned is not None and \
                    planned < endpoint.smallest_total:
                self.problems.add("", f"'sizes.planned' must be >= "
                                  f"{endpoint.smallest_total} (the fewest patients this "
                                  f"analysis allows). Got {planned}.")
        sensitivity = None
        if t["sensitivity"] is not _FAILED and t["sensitivity"].show:
            sensitivity = self.attempt("sensitivity", lambda: _sensitivity(t["sensitivity"]))
        targets: dict[str, float] = {}
        if t["targets"] is not _FAILED:
            targets = {k: float(v) for k, v in t["targets"].model_dump().items()
                       if v is not None}
            if "conditional_assurance" in targets and effect is not _FAILED and \
                    effect.relevant is None:
                self.problems.add("targets", "'targets.conditional_assurance' needs "
                                  "'effect.relevant' (the smallest clinically relevant effect).")
        mc = t["monte_carlo"]
        draws, seed = (20_000, 20260101) if mc is _FAILED else (mc.draws, mc.seed)
        notes: list[str] = []
        if design is not _FAILED:
            self.preflight(design, zones, precision, draws, seed)
            if sizes is not None and _ok(zones, precision) and not self.problems:
                from ..workflow import check_plan_inputs

                # the plan's own input checks, so that check and plan refuse the same files
                self.attempt("sizes", lambda: check_plan_inputs(
                    design, targets, sizes, zones, precision, draws, seed, None,
                    owner="plan"), {"sizes": "sizes", "draws": "monte_carlo.draws",
                                    "seed": "monte_carlo.seed"})
            notes += _harmful_side_notes(design)
        if self.problems:
            return None  # type: ignore[return-value]  # raised by the caller
        record = _record(t, title, endpoint)
        return DesignFile(design=design, sizes=sizes, targets=targets, draws=draws, seed=seed,
                          source=self.source, zones=zones, prior_origin=origin,
                          precision=precision, record=record, notes=tuple(notes),
                          planned=planned, sensitivity=sensitivity)

    def build_model(self) -> DesignFile:
        """An analysis model fitted to simulated trials: the model, the rule, the settings."""
        t = self.t
        table, effect = t["endpoint"], t["effect"]
        for name in ("analysis_prior", "sd_prior", "zones"):
            if t[name] is not None:
                self.problems.add(name, f"[{name}] is for the built-in endpoints; an analysis "
                                  "model ([endpoint] type = \"model\") carries its own analysis "
                                  "priors in the model.")
        stand_in = _RatioStandIn(False)
        design_prior = _FAILED
        if t["design_prior"] is not _FAILED:
            design_prior = self.attempt("design_prior", lambda: _prior_and_origin(
                t["design_prior"], "design_prior", self, stand_in)[0])
        rule = _FAILED if t["success"] is _FAILED else self.attempt(
            "success", lambda: _rule(t["success"]))
        if effect is not _FAILED and effect.assumed is None:
            self.problems.add("", "'effect.assumed' is required for an analysis model: "
                              "classical power is simulated with the true effect at this value.")
        model = _FAILED
        if _ok(design_prior, effect) and effect.assumed is not None:
            model = self.attempt("endpoint", lambda: _general_model(
                table, design_prior, effect.assumed, self))
        title = t["title"] if t["title"] is not _FAILED else None
        if title is None:
            from .schema import MAX_TITLE

            title = printable(Path(self.source).stem).strip()[:MAX_TITLE] or "Untitled trial"
        sizes = None
        planned = None
        if t["sizes"] is not None and t["sizes"] is not _FAILED:
            sizes = _sizes(t["sizes"])
            planned = t["sizes"].planned
            smallest = getattr(model, "smallest_total", 4) if model is not _FAILED else 4
            if sizes is not None and sizes.min() < smallest:
                self.problems.add("sizes", f"every size must be >= {smallest} (the fewest "
                                  f"patients this model allows). Got {int(sizes.min())}.")
        if sizes is None:
            self.problems.add("sizes", "an analysis model needs its sizes ('from'/'to'/'step' "
                              "or 'list'): each size costs simulated trials, so they are "
                              "not chosen automatically.")
        targets: dict[str, float] = {}
        if t["targets"] is not _FAILED:
            targets = {k: float(v) for k, v in t["targets"].model_dump().items()
                       if v is not None}
            if "conditional_assurance" in targets:
                self.problems.add("", "'targets.conditional_assurance' is not available for "
                                  "an analysis model (use 'assurance' or 'power').")
        mc = t["monte_carlo"]
        seed = 20260101 if mc is _FAILED else mc.seed
        simulation = t["simulation"]
        if simulation is None:
            from .schema import SimulationTable

            simulation = SimulationTable()
        precision = None
        if t["precision"] is not None and t["precision"] is not _FAILED:
            precision = self.attempt("precision", lambda: _model_precision(
                t["precision"], simulation, self))
        if self.problems:
            return None  # type: ignore[return-value]  # raised by the caller
        record = _record(t, title, None)
        return DesignFile(design=None, sizes=sizes, targets=targets, draws=0, seed=seed,
                          source=self.source, record=record, planned=planned, model=model,
                          rule=rule, simulation=simulation, title=title, precision=precision)

    def preflight(self, design: Any, zones: Any, precision: Any, draws: int, seed: int
                  ) -> None:
        """The checks the computation makes before it starts, reported as file problems."""
        import warnings

        from ..errors import AssuranceWarning

        endpoint = design.endpoint

        def calculator(rule_natural: Any | None) -> Any:
            rule = (design.benefit_rule if rule_natural is None
                    else endpoint.benefit_rule(rule_natural, design.analysis_prior))
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", AssuranceWarning)
                return endpoint.calculator(design.benefit_prior, rule, draws=min(draws, 200),
                                           seed=seed, nuisance=design.sigma_prior)

        self.attempt("success", lambda: calculator(None), _DESIGN_KEYS)
        if zones is not None and zones is not _FAILED:
            self.attempt("zones", lambda: [calculator(zones.go_rule()),
                                           calculator(zones.not_stop_rule())])
        if precision is not None and precision is not _FAILED:
            from ..precision.for_design import precision_model_for

            self.attempt("precision", lambda: precision_model_for(design))


# ------------------------------------------------------------------------------------------
# tables -> objects
# ------------------------------------------------------------------------------------------
def _endpoint(table: Any, effect: Any, builder: _Builder | None) -> Any:
    kind = table.type
    if kind == "continuous":
        from ..endpoints.continuous import ContinuousEndpoint

        return ContinuousEndpoint(sigma=table.sd, layout=table.layout,
                                  allocation=table.allocation, analysis=table.analysis,
                                  better=table.better, unit=table.unit)
    if kind == "binary":
        from ..endpoints.binary import BinaryEndpoint

        single = table.reference_rate is not None
        return BinaryEndpoint(
            control_rate=table.reference_rate if single else table.control_rate,
            layout=table.layout or ("single_arm" if single else "two_arm"),
            allocation=table.allocation, scale=table.scale, test=table.test,
            continuity_correction=table.continuity_correction, better=table.better,
            control_prior=None if table.control_prior is None else tuple(table.control_prior),
            exact_up_to=table.exact_up_to)
    if kind == "time_to_event":
        from ..endpoints.survival import SurvivalEndpoint

        planning = table.assumed_hazard_ratio
        if planning is None:
            planning = None if effect is None else effect.assumed
        if planning is None:
            raise DesignFileError("'endpoint.assumed_hazard_ratio' is required for a "
                                  "time-to-event endpoint when [effect] gives no 'assumed' "
                                  "hazard ratio (the events are planned at it).")
        median_prior = None
        if table.median_prior is not None:
            median_prior = _prior_and_origin(table.median_prior, "endpoint.median_prior",
                                             builder, None)[0]
        args = {k: getattr(table, k) for k in (
            "accrual_time", "follow_up_time", "control_median", "hazard_starts",
            "accrual_ramp", "dropout_per_year", "time_unit", "allocation", "better",
            "events_follow_true_effect")}
        hazard = table.control_hazard
        return SurvivalEndpoint(assumed_hazard_ratio=planning, median_prior=median_prior,
                                control_hazard=tuple(hazard) if isinstance(hazard, list)
                                else hazard, **args)
    from ..endpoints.counts import CountEndpoint

    rate_prior = None
    if table.control_rate_prior is not None:
        rate_prior = _prior_and_origin(table.control_rate_prior, "endpoint.control_rate_prior",
                                       builder, None)[0]
    return CountEndpoint(table.control_rate, table.follow_up, control_rate_prior=rate_prior,
                         **{k: getattr(table, k) for k in (
                             "overdispersion", "dropout_rate", "layout", "allocation",
                             "better", "variance_at", "planning_rate_ratio",
                             "test_variance", "test", "time_unit")})


def _rule(table: Any) -> Any:
    from ..rules.posterior import AllOf, MinimumEstimate, PosteriorProbability
    from ..rules.significance import Significance

    if table.rule == "significance":
        return Significance(alpha=table.alpha, sided=table.sided, margin=table.margin,
                            min_estimate=table.min_estimate)
    rule = PosteriorProbability(level=table.level, beyond=table.beyond)
    if table.min_estimate is not None:
        rule = AllOf((rule, MinimumEstimate(table.min_estimate)))
    return rule


def _zones(table: Any, endpoint: Any) -> Any:
    from ..rules.zones import GoConsiderStop

    zones = GoConsiderStop(**table.model_dump())
    if endpoint is not _FAILED:
        zones.check_direction(endpoint)
    return zones


def _precision(table: Any) -> Any:
    from ..precision.for_design import PrecisionPlan

    values = table.model_dump()
    return PrecisionPlan(**{**values, "criteria": tuple(values["criteria"])})


def _trial_design(endpoint: Any, design_prior: Any, rule: Any, effect: Any, sd_prior: Any,
                  analysis_prior: Any, title: str) -> Any:
    from ..design import TrialDesign

    return TrialDesign(endpoint=endpoint, design_prior=design_prior, rule=rule,
                       assumed_effect=effect.assumed, relevant_effect=effect.relevant,
                       sigma_prior=sd_prior, analysis_prior=analysis_prior,
                       power_effects=tuple(effect.also_power_at), title=title)


def _model_precision(table: Any, simulation: Any, builder: _Builder) -> Any:
    """The [precision] table of an analysis model: WOC is not available by simulation (left
    out of the default criteria, refused when named), and the widths' coverage is one."""
    given = table.model_fields_set
    if "criteria" in given and "WOC" in table.criteria:
        builder.problems.add("precision", "'precision.criteria' names WOC, the widest interval "
                             "over every possible data set, which simulated trials cannot "
                             "bound; use MWOC (the widest over the most likely share of "
                             "trials), ALC or ACC.")
        return None
    if "coverage" in simulation.model_fields_set and simulation.coverage != table.coverage:
        builder.problems.add("precision", f"'precision.coverage' ({table.coverage:g}) and "
                             f"'simulation.coverage' ({simulation.coverage:g}) differ; the "
                             "interval widths have one coverage: give it once, in [precision].")
        return None
    plan = _precision(table)
    if "criteria" not in given:
        from dataclasses import replace

        plan = replace(plan, criteria=tuple(c for c in plan.criteria if c != "WOC"))
    return plan


def _general_model(table: Any, effect_prior: Any, assumed: float, builder: _Builder) -> Any:
    """The built-in analysis model an ``[endpoint] type = "model"`` table describes."""
    from ..general import builtin

    def prior_or_value(name: str) -> Any:
        value = getattr(table, name)
        if value is None or isinstance(value, int | float) and not isinstance(value, bool):
            return None if value is None else float(value)
        if not isinstance(value, dict):
            raise DesignFileError(f"'endpoint.{name}' must be a prior table or a number. "
                                  f"Got {value!r}.")
        made = _prior_and_origin(_validated("design_prior", value, f"endpoint.{name}",
                                            builder.source),
                                 f"endpoint.{name}", builder, _RatioStandIn(False))[0]
        return made

    values = table.model_dump(exclude={"type", "model", "unit"})
    for name in [k for k in values if k.endswith("_prior")]:
        values[name] = prior_or_value(name)
    values = {k: v for k, v in values.items() if v is not None}
    kind = table.model
    if kind == "hierarchical_regions":
        shares = values.pop("region_shares", None)
        regions = values.pop("regions")
        if shares is not None:
            if len(shares) != len(regions):
                raise DesignFileError(f"'endpoint.region_shares' must give one share per "
                                      f"region ({len(regions)}). Got {len(shares)}.")
            values["regions"] = dict(zip(regions, shares, strict=True))
        else:
            values["regions"] = list(regions)
    return getattr(builtin, kind)(effect_prior, assumed, **values)


def _sensitivity(table: Any) -> Any:
    from ..sensitivity import SensitivitySettings

    return SensitivitySettings(centre_shift=table.centre_shift,
                               spread_factors=tuple(table.spread_factors),
                               weight_change=table.weight_change,
                               map_centres=table.map_centres, map_spreads=table.map_spreads)


def _sizes(table: Any) -> np.ndarray | None:
    if table.list_ is not None:
        return np.array(table.list_, dtype=int)
    if table.from_ is None:  # only 'planned': the sizes are chosen from the targets
        return None
    step = table.step if table.step is not None else max(1, (table.to - table.from_) // 50)
    return np.arange(table.from_, table.to + 1, step)


def _record(t: dict[str, Any], title: str, endpoint: Any) -> dict[str, Any]:
    """Every table in force, in the file's names, defaults and derived values filled in."""
    record: dict[str, Any] = {"title": title}
    for name, value in t.items():
        if name == "title" or value is None:
            continue
        record[name] = value.model_dump(by_alias=True, exclude_none=True)
    ep = record["endpoint"]
    if ep["type"] == "model":
        from .schema import MODEL_TABLES

        order = list(MODEL_TABLES[ep["model"]].model_fields)
        record["endpoint"] = {k: ep[k] for k in sorted(ep, key=order.index)}
        _record_sizes(record)
        return record
    if ep["type"] == "time_to_event":
        ep["assumed_hazard_ratio"] = endpoint.assumed_hazard_ratio
    if ep["type"] == "binary":
        ep["layout"] = endpoint.layout
    from .schema import ENDPOINT_TABLES

    order = list(ENDPOINT_TABLES[ep["type"]].model_fields)  # the schema's order
    record["endpoint"] = {k: ep[k] for k in sorted(ep, key=order.index)}
    for name in ("design_prior", "analysis_prior"):
        table = record.get(name)
        if table is not None and table["family"] == "beta_rates" and "scale" not in table:
            table["scale"] = endpoint.scale
    _record_sizes(record)
    return record


def _record_sizes(record: dict[str, Any]) -> None:
    sizes = record.get("sizes")
    if sizes is not None and "list" not in sizes and "from" in sizes and "step" not in sizes:
        sizes["step"] = max(1, (sizes["to"] - sizes["from"]) // 50)


def _binary_rate_problems(table: Any, endpoint: Any, effect: Any, zones: Any) -> list[str]:
    """Effects that would put the treatment response rate outside [0, 1].

    Power at ``effect.assumed``, ``effect.also_power_at`` and ``effect.relevant`` is
    computed at the planning (or reference) rate, so each must give a rate in [0, 1] there.
    Zone values are read on the posterior of the effect, in which the control rate of two
    arms is uncertain: a difference must lie in [-1, 1]; for one arm the reference rate is
    fixed, so the same bounds as the effects apply.
    """
    scale, p = endpoint.scale, float(endpoint.control_rate)
    if scale == "odds_ratio":
        return []  # every positive odds ratio gives a rate inside (0, 1)
    rate_key = ("endpoint.reference_rate" if table.reference_rate is not None
                else "endpoint.control_rate")
    if scale == "difference":
        low, high = -p, 1.0 - p
        room = (f"on the difference scale, effects must lie between {low:g} and {high:g} "
                f"at '{rate_key}' = {p:g}")
    else:
        low, high = 0.0, 1.0 / p
        room = f"on the risk ratio scale, effects must be at most {high:g} at '{rate_key}' = {p:g}"

    def rate(x: float) -> float:
        return p + x if scale == "difference" else p * x

    values: list[tuple[str, float]] = []
    if effect is not _FAILED:
        values += [("effect.assumed", effect.assumed), ("effect.relevant", effect.relevant)]
        values += [(f"effect.also_power_at[{i}]", v) for i, v in enumerate(effect.also_power_at)]
    out = []
    for key, x in values:
        if x is None or (scale == "risk_ratio" and x <= 0):  # a ratio <= 0 is refused anyway
            continue
        r = rate(x)
        if not -1e-12 <= r <= 1 + 1e-12:
            how = f"{p:g} + {x:g}" if scale == "difference" else f"{p:g} x {x:g}"
            out.append(f"'{key}' = {x:g} gives a treatment response rate of {r:.4g} "
                       f"({how}), outside [0, 1]; {room}.")
    if zones is not None and zones is not _FAILED:
        one_arm = endpoint.layout == "single_arm"
        for name in ("min_acceptable", "target"):
            x = getattr(zones, name)
            if scale == "risk_ratio" and (x <= 0 or not one_arm):
                continue
            lo, hi = (low, high) if one_arm else (-1.0, 1.0)
            if not lo - 1e-12 <= x <= hi + 1e-12:
                where = room if one_arm else ("a difference in response rates lies between "
                                              "-1 and 1")
                out.append(f"'zones.{name}' = {x:g} cannot be reached: {where}.")
    return out


def _scale_note(endpoint: Any) -> str:
    """For ratio endpoints: on which scale [effect] and rule values are read."""
    if not endpoint.ratio_scale:
        return ""
    return (f" ([effect] and [success] values are {endpoint.effect_name}s, no effect = 1; "
            "prior parameters are on the log ratio.)")


def _harmful_side_notes(design: Any) -> list[str]:
    """Assumed or relevant effects on the harmful side of no effect (or beyond the margin)."""
    ep = design.endpoint
    margin = float(getattr(design.rule, "margin", 0.0) or 0.0)
    null = float(getattr(design.benefit_rule, "null_value", 0.0)) if margin > 0 else 0.0
    boundary = "the non-inferiority margin" if margin > 0 else "no effect"
    notes = []
    for key, value in (("effect.assumed", design.assumed_effect),
                       ("effect.relevant", design.relevant_effect)):
        if value is None:
            continue
        benefit = float(ep.to_benefit(value))
        if benefit < null or (margin > 0 and benefit == null):
            edge = float(ep.from_benefit(null))
            side = "below" if ep.better == "higher" else "above"
            notes.append(
                f"'{key}' = {value:g} lies on the harmful side of {boundary} ({edge:g}): "
                f"{ep.better} is better, so a {ep.effect_name} {side} {edge:g} means harm. "
                "Power there is at most the type I error. Check the sign, the scale, or "
                "'endpoint.better'.")
    return notes


# ------------------------------------------------------------------------------------------
# priors
# ------------------------------------------------------------------------------------------
def _prior_and_origin(table: Any, where: str, builder: _Builder | None, endpoint: Any
                      ) -> tuple[Any, Any]:
    """Build the prior of a validated prior table; ``endpoint`` None means not an effect."""
    from .. import priors

    family = table.family
    ratio = bool(endpoint is not None and endpoint.ratio_scale)
    effect_prior = endpoint is not None
    if family == "log_normal":
        if not effect_prior:  # a positive quantity itself: a rate, a median
            return _log_normal(table), None
        if not ratio:
            raise DesignFileError(
                f"'{where}.family' = 'log_normal' is for ratio endpoints (hazard, rate, risk or "
                f"odds ratios); this endpoint's effect is a {endpoint.effect_name}, so give its "
                "prior on that scale (e.g. 'normal').")
        return priors.Normal(math.log(table.median), table.log_sd), None
    if family == "beta_rates":
        return _beta_rates(table, where, endpoint), None
    if family == "mixture":
        comps = [_prior_and_origin(part, f"{where}.parts[{i}]", builder, endpoint)[0]
                 for i, part in enumerate(table.parts)]
        weights = [part.weight for part in table.parts]
        if abs(math.fsum(weights) - 1.0) > 1e-9:
            raise DesignFileError(
                f"the weights of '{where}.parts' must sum to 1; they sum to "
                f"{math.fsum(weights):.10g} ({' + '.join(f'{w:g}' for w in weights)}).")
        return priors.Mixture(comps, weights), None
    if family == "scipy":
        return _scipy_prior(table, where), None
    if family == "elicited":
        return _elicited(table, where, ratio)
    if family == "earlier_trial":
        return _earlier_trial(table, where, ratio)
    if family == "meta_analysis":
        from ..priors.evidence import meta_analytic_prior

        result = meta_analytic_prior(table.estimates, table.ses, method=table.method)
        return result.prior, result
    simple: dict[str, Callable[[Any], Any]] = {
        "normal": lambda t: priors.Normal(t.mean, t.sd),
        "student_t": lambda t: priors.StudentT(t.df, loc=t.location, scale=t.scale),
        "uniform": lambda t: priors.Uniform(t.lower, t.upper),
        "truncated_normal": lambda t: priors.TruncatedNormal(
            t.mean, t.sd, lower=-math.inf if t.lower is None else t.lower,
            upper=math.inf if t.upper is None else t.upper),
        "point_mass": lambda t: priors.PointMass(t.value),
        "scaled_inv_chi_square": lambda t: priors.ScaledInvChiSquare(t.df, t.scale),
        "gamma_precision": lambda t: priors.GammaPrecision(t.shape, t.rate),
    }
    return simple[family](table), None


def _log_normal(table: Any) -> Any:
    """A log-normal prior on a positive quantity (a rate or a median), not on an effect."""
    from scipy import stats

    from ..priors.families import FromScipy

    return FromScipy(stats.lognorm(s=table.log_sd, scale=table.median))


def _beta_rates(table: Any, where: str, endpoint: Any) -> Any:
    from ..endpoints.binary import BetaRates

    if endpoint is None or endpoint.to_dict().get("kind") != "binary":
        kind = "this table" if endpoint is None else f"a {endpoint.to_dict().get('kind')} " \
            "endpoint"
        raise DesignFileError(f"'{where}.family' = 'beta_rates' is for binary endpoints only; "
                              f"not for {kind}.")
    own = table.scale
    if own is not None and own != endpoint.scale:
        raise DesignFileError(f"'{where}.scale' is {own!r} but the endpoint's scale is "
                              f"{endpoint.scale!r}; they must agree (or leave out "
                              f"'{where}.scale').")
    control = tuple(table.control) if isinstance(table.control, list) else table.control
    treatment = tuple(table.treatment) if isinstance(table.treatment, list) else \
        table.treatment
    return BetaRates(control, treatment, endpoint.scale)


def _scipy_prior(table: Any, where: str) -> Any:
    """A scipy.stats prior: a fast distribution, its parameters checked by name."""
    from ..priors.families import (
        FAST_SCIPY_DISTRIBUTIONS,
        FromScipy,
        scipy_parameter_names,
        scipy_parameter_problems,
        scipy_takes,
    )

    name = table.name
    if name not in FAST_SCIPY_DISTRIBUTIONS:
        from scipy import stats

        known = isinstance(getattr(stats, name, None), stats.rv_continuous)
        hint = "" if known else did_you_mean(name, FAST_SCIPY_DISTRIBUTIONS)
        why = (f"scipy.stats.{name} computes its distribution and quantile functions "
               "numerically at every point, which can take hours over a plan; only "
               "distributions with fast ones are allowed" if known else
               "it must name a continuous scipy.stats distribution with fast distribution "
               "and quantile functions")
        raise DesignFileError(
            f"'{where}.name' = {name!r} cannot be used: {why} (e.g. logistic, gamma, "
            f"lognorm, weibull_min, t; docs/design-file.md lists them all).{hint}")
    from scipy import stats

    gen = getattr(stats, name)
    problems = scipy_parameter_problems(gen, dict(table.parameters))
    if problems:
        texts = []
        for parameter, text in problems:
            if parameter and parameter in table.parameters:
                hint = ""
                if parameter not in scipy_parameter_names(gen):  # a misspelt name
                    hint = did_you_mean(parameter, [n for n in scipy_parameter_names(gen)
                                                    if n not in table.parameters])
                texts.append(f"'{where}.parameters.{parameter}' {text}.{hint}")
            elif parameter:  # a shape left out
                texts.append(f"'{where}.parameters.{parameter}' {text}.")
            else:
                texts.append(f"'{where}.parameters' of scipy.stats.{name} {text}.")
        texts[-1] += f" {scipy_takes(gen)}"
        error = DesignFileError(texts[0])
        error.problems = texts  # type: ignore[attr-defined]
        raise error
    frozen = gen(**table.parameters)
    with np.errstate(all="ignore"):
        finite = np.all(np.isfinite(frozen.support())) or np.isfinite(frozen.mean())
    if not finite:
        given = ", ".join(f"{k}={v:g}" for k, v in table.parameters.items())
        raise DesignFileError(
            f"'{where}': scipy.stats.{name}({given}) has no finite mean; a design-file prior "
            "needs one (use a distribution with lighter tails, e.g. 't' with df > 1, or "
            "bounded support).")
    return FromScipy(frozen)


def _elicited(table: Any, where: str, ratio: bool) -> tuple[Any, Any]:
    from ..priors.elicitation import Interval, Quantile, fit_prior

    fit = table.fit
    if ratio and fit not in ("lognormal", "best"):
        raise DesignFileError(f"'{where}.fit' must be 'lognormal' (or 'best') for a ratio "
                              f"endpoint: its prior is on the log ratio. Got {fit!r}.")
    if not ratio and fit == "lognormal":
        raise DesignFileError(f"'{where}.fit' = 'lognormal' is for ratio endpoints; use "
                              "normal, t, beta, gamma or best.")
    statements: list[Any] = [Quantile(v, p) for v, p in table.quantiles]
    statements += [Interval(lo, hi, p) for lo, hi, p in table.intervals]
    kwargs: dict[str, Any] = {}
    if table.df is not None:
        kwargs["df"] = table.df
    if table.tolerance is not None:
        kwargs["tolerance"] = table.tolerance
    if ratio and fit == "best":
        fit = "lognormal"
    result = fit_prior(statements, family=fit, **kwargs)
    return result.prior, result


def _earlier_trial(table: Any, where: str, ratio: bool) -> tuple[Any, Any]:
    from ..priors.evidence import DiscountedEstimate, Estimate

    if table.ratio is not None:
        if not ratio:
            raise DesignFileError(f"'{where}.ratio' is for ratio endpoints; give 'estimate' "
                                  "and 'se' on the effect scale.")
        value, se = math.log(table.ratio), table.log_se
    else:
        value, se = table.estimate, table.se
    options = {k: getattr(table, k) for k in ("power_weight", "shrinkage", "robust_weight",
                                               "vague_sd", "vague_mean")
               if getattr(table, k) is not None}
    recipe = DiscountedEstimate(Estimate(value, se, "log ratio" if ratio else "estimate"),
                                **options)
    return recipe.prior(), recipe


# ------------------------------------------------------------------------------------------
# single tables, for Python callers and tests
# ------------------------------------------------------------------------------------------
class _RatioStandIn:
    """Stands for an endpoint when only the scale of a prior table is known."""

    def __init__(self, ratio: bool):
        self.ratio_scale = ratio
        self.effect_name = "log ratio" if ratio else "difference"

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "ratio" if self.ratio_scale else "difference"}


def _validated(annotation_name: str, table: Any, where: str, source: str) -> Any:
    from pydantic import ValidationError

    problems = Problems(source)
    try:
        return _adapters()[annotation_name].validate_python(table)
    except ValidationError as exc:
        problems.add_validation(exc, prefix=tuple(where.split(".")), raw=table)
    problems.raise_if_any()


def prior_with_origin(table: dict[str, Any], where: str, source: str = "design", *,
                      ratio: bool = False) -> tuple[Any, Any]:
    """A prior from a design-file table, with the object that explains it (for the memo).

    Families built from evidence: ``elicited``, ``earlier_trial`` and ``meta_analysis``
    (see ``docs/design-file.md``); for the others the origin is None.

    Examples
    --------
    >>> prior, fit = prior_with_origin({"family": "elicited", "fit": "normal",
    ...                                 "quantiles": [[2.0, 0.5], [5.0, 0.9]]}, "design_prior")
    >>> round(prior.mean(), 3), fit.family
    (2.0, 'normal')
    """
    model = _validated("design_prior", table, where, source)
    problems = Problems(source)
    try:
        return _prior_and_origin(model, where, None, _RatioStandIn(ratio))
    except AssuranceInputError as exc:
        if isinstance(exc, DesignFileError):
            for problem in getattr(exc, "problems", [str(exc)]):
                problems.add("", problem)
        else:
            problems.add_domain(exc, where)
    problems.raise_if_any()
    raise AssertionError("unreachable")  # pragma: no cover


def prior_from_table(table: dict[str, Any], where: str, source: str = "design", *,
                     ratio: bool = False) -> Any:
    """The prior a design-file table describes.

    Examples
    --------
    >>> prior_from_table({"family": "normal", "mean": 1.0, "sd": 2.0}, "design_prior")
    normal(mean=1, sd=2)
    """
    return prior_with_origin(table, where, source, ratio=ratio)[0]


def endpoint_from_table(table: dict[str, Any], source: str = "design", *,
                        assumed_effect: float | None = None) -> Any:
    """Build the endpoint an ``[endpoint]`` table describes.

    ``assumed_effect`` stands for ``[effect] assumed`` (the default planning hazard ratio of
    a time-to-event endpoint).

    Examples
    --------
    >>> endpoint_from_table({"type": "continuous", "sd": 4.0}).sigma
    4.0
    """
    from .schema import EffectTable

    model = _validated("endpoint", table, "endpoint", source)
    problems = Problems(source)
    builder = _Builder({}, problems, source)
    made = builder.attempt("endpoint", lambda: _endpoint(
        model, EffectTable(assumed=assumed_effect), builder))
    problems.raise_if_any()
    return made
