"""A computed development program: phase 2, a go decision, phase 3, and a memo.

:func:`program_plan` (from Python objects) and :meth:`ProgramPlan.from_file` (from a program
file naming two design files) compute the program's probabilities, the grid over the phase 2
size and go threshold, phase 3 re-planned from the phase 2 result (when asked) and a check
by simulated programs. :meth:`ProgramPlan.write` writes the output folder (results, figures,
memo, a copy of every input file) through
:func:`assurance.report.output_folder.write_outputs`.

Examples
--------
>>> import assurance as asr
>>> from assurance.program.development import ProgramDesign
>>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
>>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0), title="Phase 3")
>>> p2 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0), rule=asr.Significance(alpha=0.1))
>>> plan = program_plan(ProgramDesign(p2, p3, n2=100, n3=400), programs=2000)
>>> print(plan.summary().splitlines()[0])
Untitled program
"""

from __future__ import annotations

import csv
import os
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from .errors import AssuranceInputError
from .planner import DesignSource, _check_overwrite, _utc_now
from .program.development import (
    CHECK_LIMIT,
    DEFAULT_SEED,
    GRID_QUANTITIES,
    ProgramDesign,
    ProgramResult,
    effect_curves,
    program_grid,
    program_result,
    replan_table,
    simulate_program,
    simulation_gap,
)

__all__ = ["ProgramPlan", "program_plan", "CHECK_LIMIT"]

#: the figures compared with simulated programs (expected months too when durations are given)
CHECKED = ("p_go", "pos", "p_go_and_works", "expected_patients")


@dataclass(frozen=True, eq=False, repr=False)
class ProgramPlan:
    """A computed development program.

    Attributes
    ----------
    program
        The :class:`~assurance.program.development.ProgramDesign`.
    result
        The program with phase 3 at its fixed size (:class:`ProgramResult`).
    replanned
        The program with phase 3 re-planned from the phase 2 result, or None.
    grid
        ``xarray.Dataset`` over the phase 2 size and the go rule
        (:func:`~assurance.program.development.program_grid`).
    curves
        Probabilities against the true effect
        (:func:`~assurance.program.development.effect_curves`).
    replan
        The re-planning table (:func:`~assurance.program.development.replan_table`), or
        None.
    check
        Simulated programs: ``{"fixed": {...}, "replanned": {...}}`` (see
        :func:`~assurance.program.development.simulate_program`); empty when not run.
    programs, seed
        Programs simulated for the check and the seed.
    check_gap
        Why the check was not run, in plain words (None when it ran, or when no programs
        were asked for).
    source
        The program file (path, bytes), when read from one.
    design_sources
        The phase 2 and phase 3 design files, when read from files.
    made_by, created
        The command or call that made the plan (None: not recorded), and when (UTC).
    """

    program: ProgramDesign
    result: ProgramResult
    replanned: ProgramResult | None
    grid: Any
    curves: dict[str, Any] = field(repr=False)
    replan: dict[str, Any] | None = field(default=None, repr=False)
    check: dict[str, dict[str, float]] = field(default_factory=dict)
    programs: int = 0
    seed: int = DEFAULT_SEED
    source: DesignSource | None = None
    design_sources: tuple[DesignSource, ...] = ()
    made_by: str | None = None
    created: str = field(default_factory=lambda: _utc_now())
    check_gap: str | None = None

    # --------------------------------------------------------------------------------------
    @classmethod
    def from_file(cls, path: str | os.PathLike[str]) -> ProgramPlan:
        """Read a program file (and the design files it names) and compute the program.

        Raises
        ------
        DesignFileError
            When the program file or a design file it names cannot be read or is invalid.
        """
        from .design_file.program_file import read_program_file

        if not isinstance(path, str | os.PathLike):
            raise AssuranceInputError(
                "The 'path' parameter of ProgramPlan.from_file must be a file path (str or "
                f"pathlib.Path). Got {path!r:.80} instead.")
        spec = read_program_file(path)
        made = program_plan(spec.program, phase2_sizes=spec.phase2_sizes or None,
                            go_thresholds=spec.go_thresholds or None,
                            programs=spec.programs, seed=spec.seed)
        sources = tuple(DesignSource(Path(s.source), s.content or b"", s.record, s.notes)
                        for s in (spec.phase2_spec, spec.phase3_spec))
        return replace(made, source=DesignSource(Path(spec.path), spec.content, spec.record),
                       design_sources=sources,
                       made_by=f"assurance.ProgramPlan.from_file({str(path)!r})")

    # --------------------------------------------------------------------------------------
    @property
    def title(self) -> str:
        return self.program.title

    @property
    def input_paths(self) -> tuple[Path, ...]:
        """The program file and every design file it names (never replaced by an output)."""
        paths = [] if self.source is None else [self.source.path]
        paths += [s.path for s in self.design_sources]
        return tuple(dict.fromkeys(paths))

    @property
    def headline(self) -> ProgramResult:
        """The program as it will run: re-planned when asked, else with fixed phase 3."""
        return self.replanned if self.replanned is not None else self.result

    def check_passes(self) -> bool | None:
        """Whether every simulated figure is within :data:`CHECK_LIMIT` MC SE of the
        computed one (None when no programs were simulated)."""
        rows = self.check_rows()
        return None if not rows else all(r["passes"] for r in rows)

    def check_rows(self) -> list[dict[str, Any]]:
        """One row per checked figure: which program, computed, simulated, MC SE, distance."""
        rows = []
        for kind, sim in self.check.items():
            computed = self.result if kind == "fixed" else self.replanned
            if computed is None:
                continue
            names = CHECKED + (("expected_months",) if self.program.has_durations
                               and "expected_months" in sim else ())
            for name in names:
                value = float(getattr(computed, name))
                mcse = float(sim[name + "_mcse"])
                gap = abs(value - float(sim[name]))
                z = gap / mcse if mcse > 0 else (0.0 if gap < 1e-12 else float("inf"))
                rows.append({"program": kind, "quantity": name, "computed": value,
                             "simulated": float(sim[name]), "mcse": mcse, "z": z,
                             "passes": z <= CHECK_LIMIT})
        return rows

    # --------------------------------------------------------------------------------------
    def summary(self) -> str:
        """A few plain lines: the program's probabilities, patients and duration."""
        r = self.result
        lines = [self.title,
                 f"  phase 2: {r.n2} patients; go rule: {self.program.go_rule_text()}",
                 f"  phase 3 ({r.n3} patients): P(go) {r.p_go:.3f}, P(success | go) "
                 f"{r.p_success_given_go:.3f}, program probability of success {r.pos:.3f}",
                 f"  P(go and the drug works) {r.p_go_and_works:.3f}; false-go rate "
                 f"{r.false_go:.3f}; expected patients {r.expected_patients:,.0f}"
                 + (f", expected months {r.expected_months:.1f}"
                    if self.program.has_durations else "")]
        if self.replanned is not None:
            q = self.replanned
            lines.append(f"  phase 3 re-planned from phase 2: program probability of success "
                         f"{q.pos:.3f}, expected patients {q.expected_patients:,.0f} (mean "
                         f"phase 3 size after a go {q.expected_phase3_n:,.0f})"
                         + (f", expected months {q.expected_months:.1f}"
                            if self.program.has_durations else ""))
        passes = self.check_passes()
        if self.check_gap:
            lines.append(f"  no check by simulated programs: {self.check_gap}")
        if passes is not None:
            worst = max(row["z"] for row in self.check_rows())
            lines.append(f"  check by {self.programs:,} simulated programs: "
                         f"{'passes' if passes else 'FAILS'} (largest gap {worst:.1f} MC SE, "
                         f"limit {CHECK_LIMIT:g})")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        """A small table of the headline figures for a notebook (no scripts)."""
        import html

        r = self.headline
        rows = [("P(go after phase 2)", f"{r.p_go:.1%}"),
                ("P(phase 3 success | go)", f"{r.p_success_given_go:.1%}"),
                ("Program probability of success", f"{r.pos:.1%}"),
                ("P(go and the drug works)", f"{r.p_go_and_works:.1%}"),
                ("False-go rate", f"{r.false_go:.1%}"),
                ("Expected patients", f"{r.expected_patients:,.0f}")]
        if self.program.has_durations:
            rows.append(("Expected months", f"{r.expected_months:.1f}"))
        body = "".join(f"<tr><th style='text-align:left'>{html.escape(a)}</th>"
                       f"<td style='text-align:right'>{html.escape(b)}</td></tr>"
                       for a, b in rows)
        note = "phase 3 re-planned from phase 2" if r.replanned else \
            f"phase 3 with {r.n3:,} patients"
        return (f"<div><strong>{html.escape(self.title)}</strong> "
                f"<span>({r.n2:,} patients in phase 2; {html.escape(note)})</span>"
                f"<table>{body}</table></div>")

    def __repr__(self) -> str:
        return (f"ProgramPlan({self.title!r}: P(go) {self.result.p_go:.3f}, program PoS "
                f"{self.headline.pos:.3f})")

    # --------------------------------------------------------------------------------------
    def results(self) -> Any:
        """Everything computed as one ``xarray.Dataset`` (grid, curves, headline in attrs)."""
        import numpy as np

        ds = self.grid.copy()
        c = self.curves
        ds = ds.assign_coords(true_effect=("true_effect", np.asarray(c["effect"])))
        for key in ("go", "success", "both", "density"):
            ds[f"curve_{key}"] = ("true_effect", np.asarray(c[key], dtype=float))
        if self.replan is not None:
            t = self.replan
            ds = ds.assign_coords(replan_estimate=("replan_estimate", t["estimate"]))
            ds["replan_n3"] = ("replan_estimate", t["n3"].astype(np.int64))
            ds["replan_reached"] = ("replan_estimate", t["reached"].astype(np.int8))
        for kind, r in (("fixed", self.result), ("replanned", self.replanned)):
            if r is None:
                continue
            for key, value in r.to_dict().items():
                if isinstance(value, float | int) and not isinstance(value, bool):
                    ds.attrs[f"{kind}_{key}"] = value
        ds.attrs.update({"title": self.title, "seed": int(self.seed),
                         "programs": int(self.programs), "created": self.created,
                         "made_by": self.made_by or "not recorded"})
        from . import __version__

        ds.attrs["assurance_version"] = str(__version__)
        return ds

    def figures(self) -> dict[str, Any]:
        """The memo's figures, as matplotlib figures."""
        from .report.program_figures import program_figure_makers

        return {name: make() for name, make in program_figure_makers(self).items()}

    def memo_html(self, **kwargs: Any) -> str:
        """The memo as one HTML string (see
        :func:`assurance.report.program_memo.program_memo_html`)."""
        from .report.program_memo import program_memo_html

        return program_memo_html(self, **kwargs)

    def write_into(self, tmp: Path, formats: tuple[str, ...]) -> None:
        """Write every output file into the staging folder ``tmp`` (called by
        :func:`~assurance.report.output_folder.write_outputs`)."""
        from .report.plan_figures import start_figure_files
        from .report.program_figures import program_figure_makers
        from .report.program_memo import write_program_memo

        tmp = Path(tmp)
        # drawn (on other cores where it can) while the tables are written
        finish_figures = start_figure_files(self, tmp, formats, makers=program_figure_makers)
        self._write_csvs(tmp)
        self.results().to_netcdf(tmp / "results.nc", engine="scipy")
        write_program_memo(self, tmp / "memo.html", rendered=finish_figures())
        inputs = tmp / "inputs"
        inputs.mkdir()
        used: set[str] = set()
        for label, src in self._input_sources():
            name = src.path.name
            if name in used:
                name = f"{label}_{name}"
            used.add(name)
            (inputs / name).write_bytes(src.content)

    def _input_sources(self) -> list[tuple[str, DesignSource]]:
        out = [] if self.source is None else [("program", self.source)]
        seen = {None if self.source is None else self.source.path}
        for label, src in zip(("phase2", "phase3"), self.design_sources, strict=False):
            if src.path not in seen:
                out.append((label, src))
                seen.add(src.path)
        return out

    def _write_csvs(self, tmp: Path) -> None:
        fields = ["p_go", "p_success_given_go", "pos", "p_go_and_works", "p_go_and_relevant",
                  "false_go", "p_no_benefit", "phase3_alone", "expected_patients",
                  "expected_months", "expected_phase3_n", "expected_phase3_months"]
        with open(tmp / "results.csv", "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["quantity", "phase3_fixed", "phase3_replanned"])
            for name in fields:
                row = [name]
                for r in (self.result, self.replanned):
                    value = None if r is None else getattr(r, name)
                    row.append("" if value is None else f"{float(value):.6g}")
                w.writerow(row)
        g = self.grid
        with open(tmp / "grid.csv", "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["phase2_n", "go_rule", *GRID_QUANTITIES])
            for i, n in enumerate(g.phase2_n.values):
                for j, rule in enumerate(g.go_rule.values):
                    w.writerow([int(n), str(rule),
                                *[f"{float(g[q].values[i, j]):.6g}" for q in GRID_QUANTITIES]])
        if self.replan is not None:
            t = self.replan
            with open(tmp / "replan.csv", "w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(["phase2_estimate_from", "prior_mean", "prior_sd", "phase3_n",
                            "target_reached"])
                for k in range(t["n3"].size):
                    w.writerow([f"{float(t['estimate'][k]):.6g}",
                                f"{float(t['prior_mean'][k]):.6g}",
                                f"{float(t['prior_sd'][k]):.6g}", int(t["n3"][k]),
                                bool(t["reached"][k])])
        rows = self.check_rows()
        if rows:
            with open(tmp / "check.csv", "w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(["program", "quantity", "computed", "simulated", "mcse",
                            "distance_in_mcse", "passes"])
                for r in rows:
                    w.writerow([r["program"], r["quantity"], f"{r['computed']:.6g}",
                                f"{r['simulated']:.6g}", f"{r['mcse']:.3g}", f"{r['z']:.3g}",
                                r["passes"]])

    def write(self, out: str | os.PathLike[str], *, overwrite: bool = False,
              formats: Sequence[str] = ("png",)) -> Path:
        """Write the output folder: ``results.csv``, ``grid.csv``, ``replan.csv`` (when
        re-planned), ``check.csv`` (when simulated), ``results.nc``, ``figures/``,
        ``memo.html`` and ``inputs/`` (a copy of each input file).

        Examples
        --------
        >>> import tempfile, pathlib
        >>> import assurance as asr
        >>> from assurance.program.development import ProgramDesign
        >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
        >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
        >>> plan = program_plan(ProgramDesign(p3, p3, n2=100, n3=400), programs=0)
        >>> with tempfile.TemporaryDirectory() as folder:
        ...     out = plan.write(pathlib.Path(folder) / "program")
        ...     print(*sorted(p.name for p in out.iterdir()))
        .assurance-output figures grid.csv inputs memo.html results.csv results.nc
        """
        from .report.output_folder import write_outputs

        _check_overwrite(overwrite, "ProgramPlan.write")
        return write_outputs(out, self, overwrite=overwrite, formats=tuple(formats))


def program_plan(
    program: ProgramDesign,
    *,
    phase2_sizes: Sequence[int] | None = None,
    go_thresholds: Sequence[float] | None = None,
    programs: int = 20_000,
    seed: int = DEFAULT_SEED,
) -> ProgramPlan:
    """Compute a development program: probabilities, grid, re-planning and the check.

    Parameters
    ----------
    program
        The :class:`~assurance.program.development.ProgramDesign`.
    phase2_sizes, go_thresholds
        The grid (see :func:`~assurance.program.development.program_grid`); the program's
        own phase 2 size is always included.
    programs
        Whole programs simulated to check the computed figures (0: no check). Every
        endpoint has a simulator (:func:`~assurance.program.development.simulate_program`);
        where one phase cannot be simulated
        (:func:`~assurance.program.development.simulation_gap`) the check is left out and
        ``check_gap`` says why.
    seed
        Seed of the simulated programs.

    Returns
    -------
    ProgramPlan
    """
    from ._validation import check_int

    owner = "program_plan"
    if not isinstance(program, ProgramDesign):
        raise AssuranceInputError(
            f"The 'program' parameter of {owner} must be a ProgramDesign. Got "
            f"{program!r:.80} instead.")
    programs = check_int(programs, "programs", owner, low=0, high=10**7)
    if 0 < programs < 100:
        raise AssuranceInputError(
            f"The 'programs' parameter of {owner} must be 0 (no check) or at least 100. Got "
            f"{programs} instead.")
    seed = check_int(seed, "seed", owner, low=0)
    sizes = sorted({program.n2, *(phase2_sizes or ())})
    result = program_result(program, replanned=False)
    replanned = program_result(program, replanned=True) if program.replan is not None \
        else None
    grid = program_grid(program, sizes, go_thresholds)
    curves = effect_curves(program)
    table = replan_table(program) if program.replan is not None else None
    check: dict[str, dict[str, float]] = {}
    gap = simulation_gap(program) if programs else None
    if programs and gap is None:
        check["fixed"] = simulate_program(replace(program, replan=None), programs=programs,
                                          seed=seed)
        if program.replan is not None:
            check["replanned"] = simulate_program(program, programs=programs, seed=seed + 1)
    return ProgramPlan(program, result, replanned, grid, curves, table, check,
                       programs if check else 0, seed, check_gap=gap)
