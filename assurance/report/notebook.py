"""A small HTML overview of a plan, for a notebook cell.

Static and well formed (every element closed, so it also reads as XML): a title, one table
with each target's solved size, the value it reaches, assurance there and the ceiling, the
precision criteria when planned, and the power-and-assurance figure as PNG data. No scripts,
no styles from outside, every piece of user text escaped (control characters included).
"""

from __future__ import annotations

import base64
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ._files import printable
from .memo import _arms, _check_inputs, _e, _highest, _p, _se, _target_name

if TYPE_CHECKING:  # pragma: no cover
    from ..design import TrialDesign
    from ..planning import SampleSizeAnswer

__all__ = ["overview_html"]

_CELL = "text-align:left"
_NUM = "text-align:right"


def _assurance_at(ds: Any, n_total: int | None) -> str:
    """Assurance at ``n_total`` when that size was computed, else a plain note."""
    if n_total is None:
        return ""
    rows = np.flatnonzero(np.asarray(ds["n"].values) == n_total)
    if rows.size == 0:
        return "not computed"
    j = int(rows[0])
    se = float(ds["assurance_mcse"].values[j]) if "assurance_mcse" in ds else None
    return _p(float(ds["assurance"].values[j])) + _se(se)


def _row(cells: Sequence[tuple[str, bool]]) -> str:
    return "<tr>" + "".join(
        f'<td style="{_NUM if num else _CELL}">{_e(text)}</td>' for text, num in cells) + "</tr>"


def _head(names: Sequence[tuple[str, bool]]) -> str:
    return "<tr>" + "".join(
        f'<th style="{_NUM if num else _CELL}">{_e(text)}</th>' for text, num in names) + "</tr>"


def overview_html(
    design: TrialDesign,
    ds: Any,
    answers: Sequence[SampleSizeAnswer] | None = None,
    precision: Sequence[Any] = (),
    *,
    figure: bool = True,
) -> str:
    """A short static HTML overview of a planned trial (for ``_repr_html_`` in a notebook).

    Parameters
    ----------
    design
        The trial.
    ds
        The dataset from :func:`assurance.evaluate` for that design.
    answers
        Solved targets (:class:`~assurance.SampleSizeAnswer`); may be empty.
    precision
        Precision answers (:class:`~assurance.precision.PrecisionAnswer`) or reasons a
        criterion is unavailable.
    figure
        Embed the power-and-assurance figure as a PNG.

    Returns
    -------
    str
        One ``<div>`` element.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import overview_html
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0), title="A & B")
    >>> ds = asr.evaluate(design, [100, 140, 200])
    >>> page = overview_html(design, ds, [asr.solve_sample_size(design, 0.6)], figure=False)
    >>> "A &amp; B" in page, "<script" in page
    (True, False)
    """
    answers = _check_inputs(design, ds, answers, "overview_html")
    two_arm = design.endpoint.layout != "single_arm"
    n = np.asarray(ds["n"].values)
    ceiling = float(ds["ceiling"])
    parts = [f'<div class="assurance-plan"><h3>{_e(printable(design.title))}</h3>',
             f"<p>Computed for {n.size} sizes from {int(n.min())} to {int(n.max())} patients. "
             f"Classical power assumes the effect is {_e(f'{design.assumed_effect:g}')}; "
             "assurance averages over the design prior and cannot pass "
             f"{_e(_p(ceiling))} (its ceiling).</p>"]
    if answers:
        head = [("Target", False), ("Total patients", True)]
        head += [("Treatment / control", True)] if two_arm else []
        head += [("Value reached", True), ("Assurance at that size", True),
                 ("Ceiling of assurance", True)]
        body = []
        for answer in answers:
            if answer.reached and answer.n_total is not None:
                cells = [(_target_name(answer), False), (str(answer.n_total), True)]
                if two_arm:
                    cells.append((f"{answer.n_treatment} / {answer.n_control}", True))
                got = "" if answer.achieved is None else \
                    _p(answer.achieved) + _se(answer.achieved_mcse)
                cells += [(got, True), (_assurance_at(ds, answer.n_total), True)]
            else:
                cells = [(_target_name(answer), False), ("not reachable", True)]
                cells += [("", True)] if two_arm else []
                cells += [(_highest(answer), True), ("", True)]
            cells.append((_p(ceiling), True))
            body.append(_row(cells))
        parts.append('<table style="border-collapse:collapse">'
                     f"<thead>{_head(head)}</thead><tbody>{''.join(body)}</tbody></table>")
    else:
        parts.append("<p>No target was solved.</p>")
    rows = []
    for answer in precision or ():
        if isinstance(answer, str):
            rows.append(_row([("", False), (answer, False)]))
        elif answer.reached and answer.n_total is not None:
            size = (f"{answer.n_total} ({_arms(design, answer.n_treatment, answer.n_control)})"
                    if answer.n_control else str(answer.n_total))
            rows.append(_row([(answer.criterion, False), (size, False)]))
        else:
            rows.append(_row([(answer.criterion, False), ("not reached", False)]))
    if rows:
        parts.append(f"<p>Precision: {_e(ds.attrs.get('precision', ''))}.</p>"
                     '<table style="border-collapse:collapse"><thead>'
                     f"{_head([('Criterion', False), ('Total patients', False)])}</thead>"
                     f"<tbody>{''.join(rows)}</tbody></table>")
    if figure:
        from .figures import figure_bytes, plot_power_and_assurance

        png = figure_bytes(plot_power_and_assurance(ds, answers=answers).figure, "png", dpi=96)
        data = base64.b64encode(png).decode("ascii")
        parts.append('<img alt="Classical power, assurance and the ceiling by total sample '
                     f'size" style="max-width:100%;height:auto" src="data:image/png;base64,'
                     f'{data}" />')
    parts.append("</div>")
    return "".join(parts)
