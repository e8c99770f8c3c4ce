"""The portfolio file: several trials' design files and what each success is worth.

A portfolio file is TOML; each ``[[trial]]`` names one design file (a path relative to the
portfolio file, or absolute) and, optionally, the user's own value inputs::

    title = "Invented portfolio: five trials read out in 2028-2030"
    value_unit = "million EUR"     # the unit of every value and cost below
    discount_rate = 0.08           # annual; a trial may set its own
    flat_share = 0.05              # sizes within 5% of the best net value count as flat
    value_multipliers = [0.5, 2.0] # the best size again with the value halved and doubled

    [[trial]]
    name = "KX-17 knee pain"
    design = "../../knee_pain/design.toml"
    n = 400                        # the size counted (default: the design's planned size)
    value_of_success = 300.0
    cost_per_patient = 0.04
    fixed_cost = 6.0
    years_to_readout = 2.5
    largest_n = 1500               # largest size of the value curve (default: chosen)

An entry may name a development program file (``program = "p2p3.toml"``, phase 2 then
phase 3) instead of a design file: the program counts as one success when its phase 3
succeeds after a go, with the program's expected number of patients; value inputs are not
yet supported for programs.

Every problem of the file and of the design files it names is reported at once, in the
file's own key names (``'trial[2].design'``); a design file that is missing or invalid is
named together with its portfolio entry.

Examples
--------
>>> import tempfile, pathlib
>>> design = '''[endpoint]
... sd = 10.0
... [design_prior]
... family = "normal"
... mean = 4.0
... sd = 2.0
... '''
>>> portfolio = '''title = "Two trials"
... [[trial]]
... name = "A"
... design = "a.toml"
... value_of_success = 100.0
... [[trial]]
... name = "B"
... design = "a.toml"
... n = 300
... '''
>>> with tempfile.TemporaryDirectory() as folder:
...     _ = pathlib.Path(folder, "a.toml").write_text(design)
...     _ = pathlib.Path(folder, "p.toml").write_text(portfolio)
...     spec = read_portfolio_file(pathlib.Path(folder, "p.toml"))
>>> [(t.name, t.n, t.values is not None) for t in spec.trials]
[('A', None, True), ('B', 300, False)]
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any

from pydantic import Field

from ..errors import DesignFileError
from ..program.portfolio import DEFAULT_FLAT_SHARE, MAX_YEARS, ValueInputs
from ._problems import Problems, did_you_mean, printable, shown_key
from .reader import read_companion_file, read_design_file
from .schema import Table, Title, Unit, key

__all__ = ["PortfolioFile", "PortfolioTrialSpec", "PortfolioFileModel", "PortfolioTrialTable",
           "read_portfolio_file", "parse_portfolio"]

#: most trials in one portfolio
MAX_TRIALS = 100
#: longest path written in a portfolio file, in characters
MAX_PATH = 1000

_Path = Annotated[str, Field(min_length=1, max_length=MAX_PATH)]
_NonNegative = Annotated[float, Field(ge=0)]
_Rate = Annotated[float, Field(ge=0, lt=1)]
_Years = Annotated[float, Field(ge=0, le=MAX_YEARS)]
_Positive = Annotated[float, Field(gt=0)]
_Share = Annotated[float, Field(gt=0, lt=1)]

#: value keys of a trial (besides value_of_success)
_COST_KEYS = ("cost_per_patient", "fixed_cost", "years_to_readout", "discount_rate")


class PortfolioTrialTable(Table):
    """One trial of a portfolio: its design file and the value inputs for it."""

    name: Title = key(help="Name of the trial in the portfolio's tables and figures.")
    design: _Path | None = key(
        None, "The trial's design file: a path relative to the portfolio file, or absolute.")
    program: _Path | None = key(
        None, "A development program file (phase 2 then phase 3) instead of a design file; "
        "counted as one success when the program succeeds.")
    n: Annotated[int, Field(ge=1)] | None = key(
        None, "The total size counted in the portfolio (default: the design's planned size).")
    value_of_success: _Positive | None = key(
        None, "Value of a successful trial at its readout, in the portfolio's value unit.")
    cost_per_patient: _NonNegative | None = key(None, "Cost of each patient enrolled.")
    fixed_cost: _NonNegative | None = key(None, "Cost of the trial whatever its size.")
    years_to_readout: _Years | None = key(
        None, "Years from the decision to the trial's result (the value is discounted).")
    discount_rate: _Rate | None = key(
        None, "Annual discount rate of this trial (default: the portfolio's).")
    largest_n: Annotated[int, Field(ge=2)] | None = key(
        None, "Largest total size on the curve of expected net value (default: chosen).")


class PortfolioFileModel(Table):
    """A whole portfolio file."""

    title: Title = key("Untitled portfolio", "Name of the portfolio for the memo.")
    value_unit: Unit | None = key(None, "Unit of every value and cost, e.g. 'million EUR'.")
    discount_rate: _Rate = key(0.0, "Annual discount rate applied to the value of success.")
    flat_share: _Share = key(DEFAULT_FLAT_SHARE, "Sizes whose expected net value is within "
                             "this share of the best count as about as good.")
    value_multipliers: Annotated[list[_Positive], Field(max_length=10)] = key(
        default_factory=lambda: [0.5, 2.0],
        help="The best size is also found with the value of success multiplied by these.")
    trial: Annotated[list[PortfolioTrialTable], Field(min_length=1, max_length=MAX_TRIALS)] = \
        key(help="The trials, one [[trial]] table each.")


@dataclass(frozen=True)
class PortfolioTrialSpec:
    """One trial as read: its name, design file (read and checked) and value inputs.

    ``design`` is the resolved path; ``spec`` the :class:`~assurance.design_file.DesignFile`
    read from it; ``values`` a :class:`~assurance.program.portfolio.ValueInputs` or None.
    ``kind`` is ``"program"`` for a development program (``spec`` is then the read program
    file and ``design`` its path).
    """

    name: str
    design: Path
    spec: Any = field(repr=False)
    n: int | None = None
    values: ValueInputs | None = None
    largest_n: int | None = None
    kind: str = "design"


@dataclass(frozen=True)
class PortfolioFile:
    """A read portfolio file: its settings, its trials, its path and exact bytes."""

    title: str
    trials: tuple[PortfolioTrialSpec, ...]
    source: Path
    content: bytes = field(repr=False)
    value_unit: str | None = None
    flat_share: float = DEFAULT_FLAT_SHARE
    value_multipliers: tuple[float, ...] = (0.5, 2.0)
    record: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)


def read_portfolio_file(path: str | Path) -> PortfolioFile:
    """Read and check a portfolio file and every design file it names.

    Parameters
    ----------
    path
        The portfolio file (TOML).

    Returns
    -------
    PortfolioFile

    Raises
    ------
    DesignFileError
        When the file is missing, not TOML, or has problems (every one listed, each with its
        key, value and what is allowed), or a design file it names is missing or invalid
        (named with its portfolio entry).
    """
    path, content, raw = read_companion_file(path, "portfolio", "read_portfolio_file")
    return parse_portfolio(raw, source=path, content=content)


def parse_portfolio(raw: dict[str, Any], *, source: str | Path,
                    content: bytes = b"") -> PortfolioFile:
    """Build a :class:`PortfolioFile` from a parsed TOML mapping (paths relative to
    ``source``'s folder); every problem is raised together as one ``DesignFileError``."""
    from pydantic import ValidationError

    source = Path(source)
    problems = Problems(str(source))
    try:
        table = PortfolioFileModel.model_validate(raw)
    except ValidationError as exc:
        _say_validation(problems, exc, raw)
        problems.raise_if_any()
        raise  # pragma: no cover - raise_if_any raised
    trials: list[PortfolioTrialSpec] = []
    seen: dict[str, int] = {}
    for i, entry in enumerate(table.trial):
        where = f"trial[{i}]"
        label = f"trial {entry.name!r} ({where})"
        if entry.name in seen:
            problems.add("", f"'{where}.name' repeats the name {entry.name!r} of "
                         f"trial[{seen[entry.name]}]; give each trial its own name.")
        seen.setdefault(entry.name, i)
        if entry.program is not None:
            program = _program(entry, source, where, label, problems)
            if program is not None:
                trials.append(program)
            continue
        if entry.design is None:
            problems.add("", f"'{where}.design' is required: the design file of {label}.")
            continue
        values = _values(entry, table, where, label, problems)
        design_path = Path(entry.design)
        if not design_path.is_absolute():
            design_path = Path(os.path.normpath(source.parent / design_path))
        if design_path.resolve() == source.resolve():
            problems.add("", f"'{where}.design' names the portfolio file itself ({label}); "
                         "name the trial's design file.")
            continue
        try:
            spec = read_design_file(design_path)
        except DesignFileError as exc:
            text = str(exc)
            problems.add("", f"'{where}.design': the design file '{printable(entry.design)}' "
                         f"of {label} cannot be used: {text}")
            continue
        if entry.largest_n is not None and entry.n is not None and entry.largest_n < entry.n:
            problems.add("", f"'{where}.largest_n' must be at least 'n' ({entry.n}). Got "
                         f"{entry.largest_n}.")
        trials.append(PortfolioTrialSpec(entry.name, design_path, spec, entry.n, values,
                                         entry.largest_n))
    problems.raise_if_any()
    record = table.model_dump(mode="json", exclude_none=True)
    return PortfolioFile(table.title, tuple(trials), source, content, table.value_unit,
                         table.flat_share, tuple(table.value_multipliers), record)


def _program(entry: PortfolioTrialTable, source: Path, where: str, label: str,
             problems: Problems) -> PortfolioTrialSpec | None:
    """A development program (phase 2 then phase 3) counted as one entry of the portfolio."""
    from .program_file import read_program_file

    bad = False
    if entry.design is not None:
        problems.add("", f"'{where}' names both a 'design' and a 'program' ({label}); keep "
                     "one.")
        bad = True
    given = [k for k in ("n", "largest_n", "value_of_success", *_COST_KEYS)
             if getattr(entry, k) is not None]
    if given:
        problems.add("", f"{', '.join(repr(f'{where}.{k}') for k in given)}: not yet "
                     f"supported for a development program ({label}); its sizes come from "
                     "its program file, and the size worth paying for is computed for single "
                     "trials only. Leave these keys out.")
        bad = True
    path = Path(entry.program or "")
    if not path.is_absolute():
        path = Path(os.path.normpath(source.parent / path))
    try:
        spec = read_program_file(path)
    except DesignFileError as exc:
        problems.add("", f"'{where}.program': the program file '{printable(entry.program or '')}'"
                     f" of {label} cannot be used: {exc}")
        return None
    return None if bad else PortfolioTrialSpec(entry.name, path, spec, kind="program")


def _values(entry: PortfolioTrialTable, table: PortfolioFileModel, where: str, label: str,
            problems: Problems) -> ValueInputs | None:
    given = [k for k in _COST_KEYS if getattr(entry, k) is not None]
    if entry.value_of_success is None:
        if given:
            problems.add("", f"'{where}.value_of_success' is required when {label} gives "
                         f"{', '.join(repr(f'{where}.{k}') for k in given)}: the net value "
                         "needs the value of a success.")
        return None
    rate = entry.discount_rate if entry.discount_rate is not None else table.discount_rate
    return ValueInputs(entry.value_of_success, entry.cost_per_patient or 0.0,
                       entry.fixed_cost or 0.0, entry.years_to_readout or 0.0, rate)


def _known(model: type[Table]) -> list[str]:
    return [f.alias or name for name, f in model.model_fields.items()]


def _say_validation(problems: Problems, exc: Any, raw: Any) -> None:
    """The schema's findings in the portfolio file's key names."""
    from ._problems import _path

    for err in exc.errors(include_url=False):
        loc = tuple(err["loc"])
        if err["type"] == "extra_forbidden":
            model = PortfolioTrialTable if loc[:1] == ("trial",) and len(loc) == 3 \
                else PortfolioFileModel
            known = _known(model)
            name = str(loc[-1])
            place = f"[{_path(loc[:-1])}]" if len(loc) > 1 else "the top level"
            problems.add("", f"unknown key {shown_key(name)} in {place}."
                         f"{did_you_mean(name, known, cutoff=0.5)} Known keys: "
                         f"{', '.join(known)}.")
            continue
        if err["type"] == "missing" and loc == ("trial",):
            problems.add("", "the portfolio names no trial: add one [[trial]] table per trial "
                         "with its 'name' and 'design' file.")
            continue
        problems.add("", problems._say(err, loc, loc, None))
