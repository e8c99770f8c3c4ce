"""An interim look as a plan: read from an interim file, summarised, written as a folder.

:meth:`InterimPlan.from_file` reads an interim file (which names the trial's design file),
computes the look (:func:`assurance.program.interim.evaluate_interim`) and holds it with
where it came from; :meth:`InterimPlan.write` writes the output folder (results CSVs,
figures, memo and copies of both input files) through
:func:`assurance.report.output_folder.write_outputs`. :func:`interim_look` does the same
from Python objects.

Examples
--------
>>> from assurance import ContinuousEndpoint, Normal, TrialDesign
>>> from assurance.program.interim import InterimData
>>> design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0),
...                      title="Demo")
>>> p = interim_look(design, InterimData(3.0, standard_error=2.0), planned_total=200)
>>> print(p.summary().splitlines()[1][:60])
Predictive probability of success: 56.4% (flat analysis prio
"""

from __future__ import annotations

import csv
import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import AssuranceInputError
from .planner import DesignSource
from .program.interim import InterimData, InterimLook, evaluate_interim

__all__ = ["InterimPlan", "interim_look"]


def _utc_now() -> str:
    import datetime as _dt

    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


def _pct(p: float) -> str:
    from .report.wording import percent

    return percent(p, 1)


@dataclass(frozen=True, eq=False)
class InterimPlan:
    """A computed interim look with its inputs, ready to summarise and write.

    Attributes
    ----------
    look
        The computation (:class:`~assurance.program.interim.InterimLook`).
    title
        The look's title.
    source
        The interim file (:class:`~assurance.planner.DesignSource`), or None when made in
        Python.
    design_source
        The design file it names, or None.
    made_by
        The command or call that made it (the command line sets it), or None.
    created
        UTC time of the computation (ISO 8601).
    """

    look: InterimLook
    title: str
    source: DesignSource | None = None
    design_source: DesignSource | None = None
    made_by: str | None = None
    created: str = field(default_factory=_utc_now)

    # ---- making one ----------------------------------------------------------------------
    @classmethod
    def from_file(cls, path: str | os.PathLike[str]) -> InterimPlan:
        r"""Read an interim file (and the design file it names) and compute the look.

        Parameters
        ----------
        path
            The interim file (see :mod:`assurance.design_file.interim_file`).

        Returns
        -------
        InterimPlan

        Raises
        ------
        DesignFileError
            When either file is wrong (every problem listed, in the files' key names).

        Examples
        --------
        >>> import tempfile, pathlib
        >>> design = "[endpoint]\nsd = 10\nanalysis = 'z'\n[design_prior]\nmean = 4\nsd = 2\n"
        >>> design += "family = 'normal'\n[sizes]\nplanned = 200\n"
        >>> look = "design = 'trial.toml'\n[interim]\nestimate = 3.0\n"
        >>> look += "information_fraction = 0.5\n"
        >>> with tempfile.TemporaryDirectory() as folder:
        ...     _ = pathlib.Path(folder, "trial.toml").write_text(design)
        ...     _ = pathlib.Path(folder, "look.toml").write_text(look)
        ...     p = InterimPlan.from_file(pathlib.Path(folder, "look.toml"))
        >>> p.look.decision, round(p.look.fraction, 3)
        ('continue', 0.5)
        """
        from .design_file.interim_file import read_interim_file
        from .errors import DesignFileError

        if not isinstance(path, str | os.PathLike):
            raise AssuranceInputError(
                "The 'path' parameter of InterimPlan.from_file must be a file path (str or "
                f"pathlib.Path). Got {path!r} instead.")
        spec = read_interim_file(Path(path))
        try:
            look = evaluate_interim(spec.design_file.design, spec.data,
                                    planned_total=spec.planned_total, final_se=spec.final_se,
                                    futility=spec.futility, efficacy=spec.efficacy,
                                    prediction_prior=spec.prior)  # type: ignore[arg-type]
        except AssuranceInputError as exc:  # the data and the design do not fit together
            raise DesignFileError(f"{spec.path}: {exc}") from None
        design = spec.design_file
        return cls(look=look, title=spec.title,
                   source=DesignSource(spec.path, spec.content, spec.record),
                   design_source=DesignSource(spec.design_path, design.content or b"",
                                              design.record, design.notes),
                   made_by=f"assurance.InterimPlan.from_file({str(path)!r})")

    # ---- the files -----------------------------------------------------------------------
    @property
    def input_paths(self) -> tuple[Path, ...]:
        """The interim file and the design file it names (never replaced by an output)."""
        return tuple(s.path for s in (self.source, self.design_source) if s is not None)

    def write(self, out: str | os.PathLike[str], *, overwrite: bool = False,
              formats: Sequence[str] = ("png",)) -> Path:
        """Write the output folder: ``interim_results.csv``, ``operating_characteristics.csv``,
        ``operating_by_effect.csv``, ``figures/``, ``memo.html``, copies of the input files
        (``interim_as_given.toml``, ``design_as_given.toml``) and the marker file.

        Written atomically through :func:`~assurance.report.output_folder.write_outputs`;
        ``out`` must not exist unless ``overwrite`` is True.
        """
        from .report.output_folder import write_outputs

        return write_outputs(out, self, overwrite=overwrite, formats=formats)

    def write_into(self, tmp: Path, formats: tuple[str, ...]) -> None:
        """Write this look's files into the staging folder ``tmp`` (see :meth:`write`)."""
        from .report.interim_figures import interim_plan_figure_makers
        from .report.interim_memo import write_interim_memo
        from .report.plan_figures import start_figure_files

        tmp = Path(tmp)
        # drawn (on other cores where it can) while the tables are written
        finish_figures = start_figure_files(self, tmp, formats,
                                            makers=interim_plan_figure_makers)
        self._write_results(tmp / "interim_results.csv")
        self._write_operating(tmp / "operating_characteristics.csv")
        self._write_curve(tmp / "operating_by_effect.csv")
        if self.source is not None:
            (tmp / "interim_as_given.toml").write_bytes(self.source.content)
        if self.design_source is not None:
            (tmp / "design_as_given.toml").write_bytes(self.design_source.content)
        write_interim_memo(self, tmp / "memo.html", rendered=finish_figures())

    def results_rows(self) -> list[tuple[str, Any, str]]:
        """(quantity, value, note) rows of ``interim_results.csv``."""
        k = self.look
        ep = k.design.endpoint
        rows: list[tuple[str, Any, str]] = [
            ("estimate", k.data.estimate, "interim estimate, natural scale"),
            ("interim_standard_error", k.interim_se, "analysis scale"),
            ("final_standard_error", k.final_se, "analysis scale, as planned"),
            ("information_fraction", k.fraction, ""),
            ("final_threshold", k.natural(k.threshold),
             "the final estimate must be better than this"),
            ("predictive_probability_analysis_prior", k.predictive["analysis"],
             "flat" if k.design.analysis_prior is None else "analysis prior"),
            ("predictive_probability_design_prior", k.predictive["design"], ""),
            ("conditional_power_assumed", k.conditional["assumed"],
             f"at the assumed effect {k.design.assumed_effect:g}"),
            ("conditional_power_trend", k.conditional["trend"], "at the interim estimate"),
            ("conditional_power_no_effect", k.conditional["none"], ""),
            ("futility_boundary", k.futility, "predictive probability"),
            ("efficacy_boundary", k.efficacy, "predictive probability"),
            ("boundary_prior", k.prediction_prior, ""),
            ("futility_estimate", "" if k.futility_cut is None else k.natural(k.futility_cut),
             "interim estimates worse than this stop for futility"),
            ("efficacy_estimate", "" if k.efficacy_cut is None else k.natural(k.efficacy_cut),
             "interim estimates better than this stop for efficacy"),
            ("decision", k.decision, ""),
        ]
        if k.exact is not None:
            rows.insert(7, ("predictive_probability_exact", k.exact.probability,
                            "beta-binomial from the responder counts, "
                            f"{k.exact.prior_words}"))
        for name in ("analysis", "design"):
            post = k.posterior[name]
            rows.append((f"posterior_mean_{name}_prior", k.natural(post["mean"]),
                         "natural scale" + (" (median of the ratio)" if ep.ratio_scale
                                            else "")))
            rows.append((f"posterior_sd_{name}_prior", post["sd"],
                         "analysis scale (log for ratios)"))
            rows.append((f"posterior_prob_benefit_{name}_prior", post["prob_benefit"], ""))
        return rows

    def _write_results(self, path: Path) -> None:
        with open(path, "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(["quantity", "value", "note"])
            for name, value, note in self.results_rows():
                writer.writerow([name, _fmt(value), note])

    def _write_operating(self, path: Path) -> None:
        with open(path, "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(["truth", "true_effect", "p_stop_futility", "p_stop_efficacy",
                             "p_success", "p_success_without_look", "expected_fraction",
                             f"expected_{self.look.size_unit}"])
            for r in self.look.operating:
                writer.writerow([r.name, "" if r.effect is None else _fmt(r.effect),
                                 _fmt(r.p_futility), _fmt(r.p_efficacy), _fmt(r.p_success),
                                 _fmt(r.p_success_no_look), _fmt(r.expected_fraction),
                                 _fmt(r.expected_size)])

    def _write_curve(self, path: Path) -> None:
        c = self.look.curve
        with open(path, "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(["true_effect", "p_stop_futility", "p_stop_efficacy", "p_success",
                             "p_success_without_look"])
            for i, b in enumerate(c["effect"]):
                writer.writerow([_fmt(self.look.natural(float(b))), _fmt(c["p_futility"][i]),
                                 _fmt(c["p_efficacy"][i]), _fmt(c["p_success"][i]),
                                 _fmt(c["p_success_no_look"][i])])

    # ---- showing it ----------------------------------------------------------------------
    def summary(self) -> str:
        """A few plain lines: the predictive probabilities, conditional powers, boundaries.

        The text ``assurance interim`` prints.
        """
        from .report.wording import effect_text

        k = self.look
        ep = k.design.endpoint
        flat = k.design.analysis_prior is None
        chosen = "analysis" if k.prediction_prior == "analysis" else "design"
        words = {"analysis": "flat analysis prior" if flat else "analysis prior",
                 "design": "design prior"}
        first, second = (chosen, "design" if chosen == "analysis" else "analysis")
        lines = [
            f"{self.title}",
            f"Predictive probability of success: {_pct(k.predictive[first])} "
            f"({words[first]}; boundaries use it), {_pct(k.predictive[second])} "
            f"({words[second]})",
        ]
        if k.exact is not None:
            lines.append(f"Exact predictive probability from the responder counts: "
                         f"{_pct(k.exact.probability)} (beta-binomial, "
                         f"{k.exact.prior_words})")
        lines += [
            f"Conditional power: {_pct(k.conditional['assumed'])} at the assumed effect "
            f"({effect_text(ep, k.design.assumed_effect)}), {_pct(k.conditional['trend'])} "
            f"at the current trend, {_pct(k.conditional['none'])} at no effect",
            f"Interim estimate {effect_text(ep, k.data.estimate)} at "
            f"{100 * k.fraction:.0f}% of the final information",
        ]
        bounds = []
        if k.futility > 0:
            bounds.append(f"futility below {_pct(k.futility)}" + (
                "" if k.futility_cut is None else
                f" (estimate worse than {effect_text(ep, k.natural(k.futility_cut))})"))
        if k.efficacy < 1:
            bounds.append(f"efficacy above {_pct(k.efficacy)}" + (
                "" if k.efficacy_cut is None else
                f" (estimate better than {effect_text(ep, k.natural(k.efficacy_cut))})"))
        lines.append("Boundaries: " + ("; ".join(bounds) if bounds else "none")
                     + f". Where the estimate stands: {k.decision}.")
        prior_row = k.operating[0]
        lines.append(f"Under the design prior: P(stop for futility) "
                     f"{_pct(prior_row.p_futility)}, P(stop for efficacy) "
                     f"{_pct(prior_row.p_efficacy)}, P(success) {_pct(prior_row.p_success)} "
                     f"(without the look {_pct(prior_row.p_success_no_look)})")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        """A small static overview for a notebook: the headline numbers."""
        import html

        k = self.look
        rows = [("Predictive probability (" + ("flat analysis prior" if
                 k.design.analysis_prior is None else "analysis prior") + ")",
                 _pct(k.predictive["analysis"])),
                ("Predictive probability (design prior)", _pct(k.predictive["design"])),
                ("Conditional power at the assumed effect", _pct(k.conditional["assumed"])),
                ("Conditional power at the current trend", _pct(k.conditional["trend"])),
                ("Information fraction", _pct(k.fraction)),
                ("Where the boundaries stand", k.decision)]
        body = "".join(f"<tr><th style='text-align:left'>{html.escape(a)}</th>"
                       f"<td>{html.escape(b)}</td></tr>" for a, b in rows)
        return f"<p><b>{html.escape(self.title)}</b></p><table>{body}</table>"

    def __repr__(self) -> str:
        k = self.look
        return (f"InterimPlan({self.title!r}: predictive probability "
                f"{k.predictive[k.prediction_prior]:.3f}, {k.decision})")


def _fmt(value: Any) -> str:
    if isinstance(value, str):
        return value
    number = float(value)
    return f"{number:.6g}" if number == number else ""  # NaN (size unknown): empty


def interim_look(design: Any, data: InterimData, *, planned_total: int | None = None,
                 final_se: float | None = None, futility: float = 0.1,
                 efficacy: float = 0.99, prediction_prior: str = "analysis",
                 title: str | None = None) -> InterimPlan:
    """An interim look from Python objects, as :meth:`InterimPlan.from_file` makes it.

    Parameters
    ----------
    design, data, planned_total, final_se, futility, efficacy, prediction_prior
        As in :func:`~assurance.program.interim.evaluate_interim`.
    title
        The look's title (default: the design's title with "interim look").

    Returns
    -------
    InterimPlan

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> from assurance.program.interim import InterimData
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    >>> interim_look(d, InterimData(3.0, standard_error=2.0), planned_total=200).look.decision
    'continue'
    """
    look = evaluate_interim(design, data, planned_total=planned_total, final_se=final_se,
                            futility=futility, efficacy=efficacy,
                            prediction_prior=prediction_prior)  # type: ignore[arg-type]
    if title is None:
        title = f"{design.title}: interim look"
    elif not isinstance(title, str) or not title.strip() or len(title) > 200:
        raise AssuranceInputError(
            "The 'title' parameter of interim_look must be a non-empty string of at most 200 "
            f"characters. Got {title!r:.80} instead.")
    return InterimPlan(look=look, title=title, made_by="assurance.interim_look(...)")
