"""A short, self-contained HTML decision memo for one planned trial.

The memo holds everything in one file: styles inline, figures embedded as PNG data, no
scripts and no links to anything outside the file, so it can be mailed, archived or
printed as it is. All text that comes from the user (title, prior descriptions, messages)
is escaped, and control characters in it are shown as escapes (``\\x1b``), never written
raw.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import os
import textwrap
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import AssuranceInputError
from ._files import check_target, printable, write_atomic
from .figures import passable_probability

if TYPE_CHECKING:  # pragma: no cover
    from ..design import TrialDesign
    from ..planning import SampleSizeAnswer

__all__ = ["write_memo", "memo_html", "memo_text_summary", "DEFAULT_CAUTIONS"]

DEFAULT_CAUTIONS: tuple[str, ...] = (
    "These numbers support a decision; they do not make it.",
    "They do not replace review of the design by a qualified statistician.",
    "The final design must follow the applicable regulatory guidance (for example ICH E9) "
    "and the decision of the ethics committee.",
    "The sample size decides how many patients receive an experimental treatment: too few "
    "can leave their participation without a clear answer, too many exposes more patients "
    "than the question needs.",
    "Assurance is only as good as the design prior. Record where the prior comes from and "
    "check how much the answer moves when the prior changes.",
)

_QUANTITY_NAME = {
    "power": "classical power",
    "assurance": "assurance",
    "conditional_assurance": "conditional assurance",
}


# ------------------------------------------------------------------------------------------
# checks and small formatting helpers
# ------------------------------------------------------------------------------------------
def _check_inputs(design: Any, ds: Any, answers: Any, owner: str) -> list[SampleSizeAnswer]:
    from ..design import TrialDesign
    from ..planning import SampleSizeAnswer

    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} instead."
        )
    needed = ("power", "assurance", "ceiling")
    if not hasattr(ds, "data_vars") or any(name not in ds for name in needed) \
            or "n" not in ds.dims:
        raise AssuranceInputError(
            f"The 'ds' parameter of {owner} must be the dataset returned by "
            f"assurance.evaluate. Got {type(ds).__name__} instead."
        )
    try:
        recorded = json.loads(ds.attrs["design"])
    except (KeyError, TypeError, ValueError):
        recorded = None
    if recorded != json.loads(json.dumps(design.to_dict())):
        raise AssuranceInputError(
            f"The 'ds' parameter of {owner} must be computed from the same design; the design "
            f"recorded in ds does not match the design {design.title!r} passed in. Run "
            "assurance.evaluate(design, sizes) again."
        )
    if answers is None:
        return []
    if isinstance(answers, SampleSizeAnswer):
        return [answers]
    answers = list(answers)
    for item in answers:
        if not isinstance(item, SampleSizeAnswer):
            raise AssuranceInputError(
                f"The 'answers' parameter of {owner} must be a list of SampleSizeAnswer "
                f"(from assurance.solve_sample_size). Got an item {item!r} instead."
            )
    return answers


def _p(value: float) -> str:
    return f"{value:.3f}"


def _se(se: float | None) -> str:
    if se is None or not np.isfinite(se):
        return ""
    return " \u00b1 <0.001" if se < 0.0005 else f" \u00b1 {se:.3f}"


def _value(ds: Any, name: str, j: int) -> str:
    """``0.734`` or ``0.734 ± 0.004`` for variable ``name`` at row ``j``; '' if absent."""
    if name not in ds:
        return ""
    se = float(ds[f"{name}_mcse"].values[j]) if f"{name}_mcse" in ds else None
    return _p(float(ds[name].values[j])) + _se(se)


def _arms(design: TrialDesign, n_t: int, n_c: int) -> str:
    if design.endpoint.layout == "single_arm":
        return f"{n_t} in one group"
    return f"{n_t} on treatment, {n_c} on control"


def _target_name(answer: SampleSizeAnswer) -> str:
    return f"{_QUANTITY_NAME.get(answer.quantity, answer.quantity)} {answer.target:g}"


def _nearest(ds: Any, n_total: int) -> int:
    """Row of ``ds`` nearest to ``n_total`` (on a tie, the larger size)."""
    n = np.asarray(ds["n"].values, dtype=float)
    return int(np.argmin(np.abs(n - n_total) - 1e-6 * (n >= n_total)))


def _in_grid(ds: Any, answer: SampleSizeAnswer) -> bool:
    """Whether a solved size lies inside the range of sizes ``ds`` was computed for."""
    if not answer.reached or answer.n_total is None:
        return False
    n = ds["n"].values
    return bool(n.min() <= answer.n_total <= n.max())


def _pick_rows(ds: Any, answers: Sequence[SampleSizeAnswer], count: int = 9
               ) -> tuple[list[int], dict[int, list[SampleSizeAnswer]]]:
    """Evenly spaced rows of ``ds`` plus the rows nearest each solved size."""
    size = int(ds.sizes["n"])
    rows = set(np.unique(np.round(np.linspace(0, size - 1, min(count, size))).astype(int))
               .tolist())
    marked: dict[int, list[SampleSizeAnswer]] = {}
    for answer in answers:
        if _in_grid(ds, answer):
            j = _nearest(ds, answer.n_total)
            rows.add(j)
            marked.setdefault(j, []).append(answer)
    return sorted(rows), marked


# ------------------------------------------------------------------------------------------
# the summary, shared by the memo and the terminal
# ------------------------------------------------------------------------------------------
def _summary_sentences(design: TrialDesign, ds: Any,
                       answers: Sequence[SampleSizeAnswer]) -> list[str]:
    n = np.asarray(ds["n"].values)
    assumed = f"{design.assumed_effect:g}"
    reached = [a for a in answers if a.reached and a.n_total is not None]
    lead = next((a for a in reached if a.quantity == "assurance"), reached[0] if reached else None)
    out: list[str] = []
    if lead is not None:
        total = int(lead.n_total or 0)
        inside = _in_grid(ds, lead)
        out.append(
            f"The smallest trial that reaches {_target_name(lead)} has {total} patients"
            + ("" if design.endpoint.layout == "single_arm"
               else f" ({_arms(design, lead.n_treatment or 0, lead.n_control or 0)})") + "."
        )
        j = _nearest(ds, total) if inside else n.size - 1
        where = f"At {int(n[j])} patients" + (
            "" if int(n[j]) == total else " (the nearest size computed)" if inside
            else " (the largest size computed)")
        out.append(f"{where}, assurance is {_value(ds, 'assurance', j)} against classical "
                   f"power {_value(ds, 'power', j)} at the assumed effect {assumed}.")
    else:
        j = n.size - 1
        out.append(f"From {int(n[0])} to {int(n[-1])} patients, assurance goes from "
                   f"{_value(ds, 'assurance', 0)} to {_value(ds, 'assurance', j)}, against "
                   f"classical power from {_value(ds, 'power', 0)} to {_value(ds, 'power', j)} "
                   f"at the assumed effect {assumed}.")
    ceiling = float(ds["ceiling"])
    region = passable_probability(design)
    if abs(region - ceiling) < 5e-4:
        why = ("that is the prior probability that the true effect lies where the success "
               "rule can be passed.")
    else:
        edge = design.endpoint.sign * design.benefit_rule.lowest_passable_effect() + 0.0
        why = (f"the prior probability {_p(region)} that the true effect lies where the "
               f"success rule can be passed, plus false positives when it is exactly "
               f"{edge:g}.")
    out.append(f"As the trial grows, assurance approaches {_p(ceiling)} and no more: "
               + why + " (At some finite sizes false positives can lift it slightly above.)")
    if design.relevant_effect is not None and "conditional_assurance" in ds:
        word = "at most" if design.endpoint.better == "lower" else "at least"
        out.append(
            f"The design prior gives probability {_p(float(ds['prob_relevant']))} to an effect "
            f"of {word} {design.relevant_effect:g} (the relevant effect); if the effect is that "
            "large, "
            f"the chance of success at {int(n[j])} patients is "
            f"{_value(ds, 'conditional_assurance', j)} (conditional assurance)."
        )
    for answer in answers:
        if not answer.reached:
            name = _target_name(answer)
            out.append(f"{name[0].upper()}{name[1:]} cannot be reached ({_highest(answer)}).")
    return out


def _highest(answer: SampleSizeAnswer) -> str:
    """What is reachable: the highest value found by the solver, else the ceiling."""
    highest = getattr(answer, "highest", None)
    if highest is None:
        return f"highest possible {_p(answer.ceiling)}"
    where = getattr(answer, "highest_n_total", None)
    at = "" if where is None else f" at {where} patients"
    return f"highest value {_p(highest)}{at}; limit as n grows {_p(answer.ceiling)}"


def memo_text_summary(design: TrialDesign, ds: Any,
                      answers: Sequence[SampleSizeAnswer] | None = None) -> str:
    """A few plain lines for a terminal: the headline numbers and each target's answer.

    Parameters
    ----------
    design
        The trial.
    ds
        The dataset from :func:`assurance.evaluate` for that design.
    answers
        Solved targets from :func:`assurance.solve_sample_size` (may be empty).

    Returns
    -------
    str
        Lines wrapped at 88 characters, without a trailing newline.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import memo_text_summary
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5),
    ...                          title="Example")
    >>> ds = asr.evaluate(design, range(100, 1001, 100))
    >>> text = memo_text_summary(design, ds, [asr.solve_sample_size(design, 0.6)])
    >>> print(text.splitlines()[0])
    Example
    >>> print(text.splitlines()[-1].strip())
    assurance 0.6: 150 patients (75 treatment / 75 control); reaches 0.603
    """
    answers = _check_inputs(design, ds, answers, "memo_text_summary")
    lines = [printable(design.title)]  # a terminal never receives a raw control character
    for sentence in _summary_sentences(design, ds, answers):
        lines.extend(textwrap.wrap(sentence, 86, initial_indent="  ",
                                   subsequent_indent="    "))
    if answers:
        lines.append("  Targets:")
        for answer in answers:
            if answer.reached and answer.n_total is not None:
                arms = "" if design.endpoint.layout == "single_arm" else \
                    f" ({answer.n_treatment} treatment / {answer.n_control} control)"
                got = "" if answer.achieved is None else \
                    f"; reaches {_p(answer.achieved)}{_se(answer.achieved_mcse)}"
                text = f"{_target_name(answer)}: {answer.n_total} patients{arms}{got}"
            else:
                text = f"{_target_name(answer)}: not reachable ({_highest(answer)})"
            lines.extend(textwrap.wrap(text, 86, initial_indent="    ",
                                       subsequent_indent="      "))
    return "\n".join(lines)


# ------------------------------------------------------------------------------------------
# HTML
# ------------------------------------------------------------------------------------------
_CSS = """
:root { --ink: #1d2327; --soft: #5b6670; --rule: #d5dadf; --band: #f3f5f7; --mark: #fff4d6; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #ffffff;
  font: 15px/1.5 "Segoe UI", "Helvetica Neue", Arial, "DejaVu Sans", sans-serif; }
main { max-width: 960px; margin: 0 auto; padding: 28px 32px 48px; }
h1 { font-size: 1.55em; margin: 0 0 4px; }
h2 { font-size: 1.12em; margin: 30px 0 10px; padding-bottom: 4px;
  border-bottom: 1px solid var(--rule); }
p.meta { color: var(--soft); margin: 0; font-size: 0.92em; }
.summary p { background: var(--band); border-left: 4px solid #0072b2; padding: 12px 16px;
  margin: 0; }
table { border-collapse: collapse; width: 100%; font-size: 0.93em; }
th, td { padding: 5px 9px; border-bottom: 1px solid var(--rule); text-align: left;
  vertical-align: top; }
th { background: var(--band); font-weight: 600; }
table.grid td.num, table.grid th.num { text-align: right; font-variant-numeric: tabular-nums; }
table.grid td.num, td.name { white-space: nowrap; }
td.note { font-size: 0.92em; color: var(--soft); }
table.facts th { width: 30%; background: none; color: var(--soft); font-weight: 500; }
tr.marked td { background: var(--mark); }
td.no { color: #a33a00; font-weight: 600; }
p.note { color: var(--soft); font-size: 0.88em; margin: 6px 0 0; }
figure { margin: 16px 0 22px; }
figure img { width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { color: var(--soft); font-size: 0.88em; margin-top: 4px; }
.cautions ul { margin: 0; padding-left: 20px; }
.cautions li { margin: 3px 0; }
pre { background: var(--band); padding: 10px 12px; font-size: 0.84em; overflow-x: auto;
  white-space: pre-wrap; }
details summary { cursor: pointer; color: var(--soft); font-size: 0.9em; }
@media print { main { max-width: none; padding: 0; } h2 { break-after: avoid; }
  figure, table { break-inside: avoid; } }
"""


def _e(text: Any) -> str:
    """HTML-escaped text with control characters shown as escapes (line breaks kept)."""
    return html.escape(printable(str(text), line_breaks=True), quote=True)


def _facts(design: TrialDesign, ds: Any) -> str:
    ep = design.endpoint
    scale = " (on the log ratio scale)" if getattr(ep, "ratio_scale", False) else ""
    rows: list[tuple[str, str]] = [
        ("Outcome and layout", ep.describe()),
        ("Success rule", design.rule.describe()),
        (f"Design prior for the effect{scale}",
         f"{design.design_prior.describe()}; probability that the treatment is better: "
         f"{_p(float(ds['prob_benefit']))}"),
    ]
    if hasattr(ep, "sigma"):
        rows.append(("Outcome SD",
                     f"uncertain, prior {design.sigma_prior.describe()}; classical power uses "
                     f"the planning value {ep.sigma:g}" if design.sigma_prior is not None
                     else f"fixed at {ep.sigma:g}"))
    if getattr(design, "analysis_prior", None) is not None:
        rows.append(("Analysis prior (used by the final analysis)",
                     design.analysis_prior.describe()))
    if "type_one_error" in ds:
        t1 = ds["type_one_error"].values
        rows.append(("Type I error (success probability at the null value)",
                     f"{_p(float(t1.min()))} to {_p(float(t1.max()))} across the sizes shown"
                     if float(t1.max()) - float(t1.min()) > 5e-4 else _p(float(t1.mean()))))
    rows += [
        ("Assumed effect (classical power)", f"{design.assumed_effect:g}"),
        ("Clinically relevant effect",
         "not set" if design.relevant_effect is None else
         f"{design.relevant_effect:g}; prior probability of an effect at least this good: "
         f"{_p(float(ds['prob_relevant']))}"),
        ("Ceiling of assurance",
         f"{_p(float(ds['ceiling']))}; prior probability of the effects the rule can pass "
         f"with enough patients: {_p(passable_probability(design))}"),
        ("Method", str(ds.attrs.get("method", ""))),
    ]
    draws = int(ds.attrs.get("draws", 0) or 0)
    if draws > 0:
        seed = ds.attrs.get("seed", -1)
        rows.append(("Monte Carlo", f"{draws} draws, seed "
                     + ("not fixed" if seed is None or int(seed) < 0 else str(seed))))
    body = "".join(f"<tr><th scope=\"row\">{_e(k)}</th><td>{_e(v)}</td></tr>" for k, v in rows)
    return f'<table class="facts">{body}</table>'


def _candidates(design: TrialDesign, ds: Any, answers: Sequence[SampleSizeAnswer]) -> str:
    rows, marked = _pick_rows(ds, answers)
    two_arm = design.endpoint.layout != "single_arm"
    cols: list[tuple[str, str]] = [("Total patients", "num")]
    if two_arm:
        cols.append(("Treatment / control", "num"))
    cols += [(f"Classical power at {design.assumed_effect:g}", "num"), ("Assurance", "num")]
    has_rel = "conditional_assurance" in ds
    if has_rel:
        cols += [("Conditional assurance", "num"), ("P(success and relevant effect)", "num")]
    if marked:
        cols.append(("Solved target", "note"))
    head = "".join(f'<th class="{c}" scope="col">{_e(name)}</th>' for name, c in cols)
    n = ds["n"].values
    n_t, n_c = ds["n_treatment"].values, ds["n_control"].values
    body = []
    for j in rows:
        cells = [str(int(n[j]))]
        if two_arm:
            cells.append(f"{int(n_t[j])} / {int(n_c[j])}")
        cells += [_value(ds, "power", j), _value(ds, "assurance", j)]
        if has_rel:
            cells += [_value(ds, "conditional_assurance", j),
                      _value(ds, "prob_success_and_relevant", j)]
        if marked:
            notes = []
            for answer in marked.get(j, []):
                exact = answer.n_total == int(n[j])
                notes.append(f"smallest size for {_target_name(answer)}" if exact else
                             f"close to the smallest size for {_target_name(answer)} "
                             f"({answer.n_total})")
            cells.append("; ".join(notes))
        tds = "".join(f'<td class="{c}">{_e(v)}</td>'
                      for v, (_, c) in zip(cells, cols, strict=True))
        body.append(f'<tr class="marked">{tds}</tr>' if j in marked else f"<tr>{tds}</tr>")
    note = "Rows are taken from the computed grid of sizes"
    if marked:
        note += "; highlighted rows are those nearest to a solved size"
    if "assurance_mcse" in ds:
        note += "; \u00b1 gives one Monte Carlo standard error"
    return (f'<table class="grid"><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table><p class="note">{_e(note)}.</p>')


def _targets(design: TrialDesign, answers: Sequence[SampleSizeAnswer]) -> str:
    if not answers:
        return '<p class="note">No target was solved for this memo.</p>'
    two_arm = design.endpoint.layout != "single_arm"
    heads = ["Target", "Total patients"] + (["Treatment / control"] if two_arm else []) + \
        ["Value reached", "Highest possible", "Comment"]
    classes = ["", "num"] + (["num"] if two_arm else []) + ["num", "num", ""]
    body = []
    for answer in answers:
        if answer.reached and answer.n_total is not None:
            cells = [str(answer.n_total)]
            if two_arm:
                cells.append(f"{answer.n_treatment} / {answer.n_control}")
            cells.append("" if answer.achieved is None else
                         _p(answer.achieved) + _se(answer.achieved_mcse))
            comment = "" if answer.message.startswith("Smallest size") else answer.message
            first = f'<td class="name">{_e(_target_name(answer))}</td>'
            row = first + "".join(f'<td class="num">{_e(c)}</td>' for c in cells)
        else:
            span = 3 if two_arm else 2
            row = (f'<td class="name">{_e(_target_name(answer))}</td>'
                   f'<td class="no" colspan="{span}">not reachable</td>')
            comment = answer.message
        row += f'<td class="num">{_e(_p(answer.ceiling))}</td><td>{_e(comment)}</td>'
        body.append(f"<tr>{row}</tr>")
    head = "".join(f'<th class="{c}" scope="col">{_e(h)}</th>'
                   for h, c in zip(heads, classes, strict=True))
    return (f'<table class="grid"><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table>')


FIGURE_NAMES = ("power_and_assurance", "prior")


def _figures(design: TrialDesign, ds: Any, answers: Sequence[SampleSizeAnswer],
             rendered: Mapping[str, bytes] | None = None) -> str:
    from .figures import figure_bytes, plot_power_and_assurance, plot_prior

    captions = {
        "power_and_assurance": (
            "Classical power, assurance and the ceiling by total sample size",
            "Classical power assumes the effect is exactly the assumed value; assurance "
            "averages over the design prior and cannot pass the dashed ceiling."),
        "prior": (
            "The design prior for the true effect",
            "The shaded side holds the effects at which the rule can be passed with enough "
            "patients; their prior probability sets the ceiling of assurance."),
    }
    draw = {"power_and_assurance": lambda: plot_power_and_assurance(ds, answers=answers),
            "prior": lambda: plot_prior(design)}
    parts = []
    for name in FIGURE_NAMES:
        alt, caption = captions[name]
        if rendered is not None and name in rendered:
            png = rendered[name]
        else:
            png = figure_bytes(draw[name]().figure, "png")
        data = base64.b64encode(png).decode("ascii")
        parts.append(f'<figure><img alt="{_e(alt)}" src="data:image/png;base64,{data}">'
                     f"<figcaption>{_e(caption)}</figcaption></figure>")
    return "".join(parts)


def _precision_section(ds: Any, precision: Sequence[Any],
                       rendered: Mapping[str, bytes] | None) -> str:
    """Posterior interval width: the n each criterion gives, and the width figure."""
    if "width_mean" not in ds:
        return ""
    rows = []
    for answer in precision or ():
        if isinstance(answer, str):
            rows.append(f"<tr><td colspan=\"3\">{_e(answer)}</td></tr>")
            continue
        size = (f"{answer.n_total} ({answer.n_treatment} / {answer.n_control})"
                if answer.reached and answer.n_control else
                (str(answer.n_total) if answer.reached else "not reached"))
        rows.append(f"<tr><td>{_e(answer.criterion)}</td><td class=\"num\">{_e(size)}</td>"
                    f"<td>{_e(answer.message)}</td></tr>")
    table = ("<table class=\"grid\"><thead><tr><th scope=\"col\">Criterion</th>"
             "<th class=\"num\" scope=\"col\">Total patients (treatment / control)</th>"
             "<th scope=\"col\">Detail</th></tr></thead>"
             f"<tbody>{''.join(rows)}</tbody></table>") if rows else ""
    png = (rendered or {}).get("interval_width")
    if png is None:
        from .figures import figure_bytes, plot_interval_width

        png = figure_bytes(plot_interval_width(ds, precision).figure, "png")
    data = base64.b64encode(png).decode("ascii")
    figure = (f'<figure><img alt="Posterior interval width against sample size" '
              f'src="data:image/png;base64,{data}"><figcaption>Width of the posterior interval '
              "for the effect, over data the design prior makes likely.</figcaption></figure>")
    note = _e(ds.attrs.get("precision", ""))
    return (f"<section><h2>How precisely the effect will be known</h2><p>{note}. ALC: "
            "average width within the target; ACC: average coverage of an interval of the "
            "target length; WOC / MWOC: worst width over all / the most likely data sets "
            f"(Joseph, Wolfson &amp; du Berger 1995).</p>{table}{figure}</section>")


def _origin_section(origin: Any, rendered: Mapping[str, bytes] | None) -> str:
    """Where the design prior comes from: a fit to judgements, an earlier trial, a meta-analysis."""
    if origin is None:
        return ""
    text = origin if isinstance(origin, str) else origin.report()
    figure = ""
    if type(origin).__name__ == "PriorFit":
        from .figures import figure_bytes

        png = (rendered or {}).get("prior_fit")
        if png is None:
            from .figures import plot_fit

            png = figure_bytes(plot_fit(origin).figure, "png")
        data = base64.b64encode(png).decode("ascii")
        figure = (f'<figure><img alt="Fitted prior against the elicited judgements" '
                  f'src="data:image/png;base64,{data}"><figcaption>Elicited judgements and '
                  "the fitted distribution function.</figcaption></figure>")
    return (f"<section><h2>Where the design prior comes from</h2><pre>{_e(text)}</pre>"
            f"{figure}</section>")


def _zones_section(ds: Any, answers: Sequence[SampleSizeAnswer]) -> str:
    """Go / consider / stop probabilities at the candidate sizes, when the results have them."""
    if "prob_go" not in ds:
        return ""
    rows, _ = _pick_rows(ds, answers)
    mc = "prob_go_mcse" in ds
    head = ("<tr><th class=\"num\" scope=\"col\">Total patients</th>"
            "<th class=\"num\" scope=\"col\">P(go)</th>"
            "<th class=\"num\" scope=\"col\">P(consider)</th>"
            "<th class=\"num\" scope=\"col\">P(stop)</th></tr>")
    body = []
    for i in rows:
        go = _p(float(ds["prob_go"][i]))
        stop = _p(float(ds["prob_stop"][i]))
        if mc:
            go += f" \u00b1 {float(ds['prob_go_mcse'][i]):.3f}"
            stop += f" \u00b1 {float(ds['prob_stop_mcse'][i]):.3f}"
        body.append(f"<tr><td class=\"num\">{int(ds.n[i])}</td><td class=\"num\">{_e(go)}</td>"
                    f"<td class=\"num\">{_e(_p(float(ds['prob_consider'][i])))}</td>"
                    f"<td class=\"num\">{_e(stop)}</td></tr>")
    rule = _e(ds.attrs.get("zones", ""))
    return (f"<section><h2>Go, consider or stop</h2><p>Rule: {rule}. Probabilities under the "
            f"design prior.</p><table class=\"grid\"><thead>{head}</thead>"
            f"<tbody>{''.join(body)}</tbody></table></section>")


def _date_text(date: _dt.date | str | None) -> str:
    if date is None:
        return _dt.date.today().isoformat()
    if isinstance(date, _dt.date):
        return date.isoformat()[:10]
    if isinstance(date, str):
        return date
    raise AssuranceInputError(
        f"The 'date' parameter of write_memo must be a datetime.date, a string or None. "
        f"Got {date!r} instead."
    )


def memo_html(
    design: TrialDesign,
    ds: Any,
    answers: Sequence[SampleSizeAnswer] | None = None,
    *,
    cautions: Sequence[str] = DEFAULT_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    prior_origin: Any = None,
    precision: Sequence[Any] = (),
    design_record: str | None = None,
) -> str:
    """The decision memo as one HTML string (see :func:`write_memo`).

    Parameters
    ----------
    design, ds, answers, cautions, versions, date, figures
        As for :func:`write_memo`.
    rendered
        PNG bytes of figures already drawn, keyed by name (``"power_and_assurance"``,
        ``"prior"``), so a caller that saved them does not draw them twice.
    prior_origin
        What the design prior was built from: a fit to elicited judgements
        (:class:`~assurance.priors.elicitation.PriorFit`), a meta-analytic prior, or a sentence.
    precision
        Precision answers (one per criterion) shown with the interval-width figure when
        ``ds`` holds ``width_mean``.

    Returns
    -------
    str
        A complete HTML document.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import memo_html
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5))
    >>> ds = asr.evaluate(design, range(100, 501, 100))
    >>> page = memo_html(design, ds, [], date="2026-01-01", versions="-", figures=False)
    >>> page.startswith("<!DOCTYPE html>"), "<script" in page
    (True, False)
    """
    answers = _check_inputs(design, ds, answers, "memo_html")
    if isinstance(cautions, str):
        cautions = [cautions]
    cautions = [str(c) for c in cautions]
    versions = _versions_text() if versions is None else str(versions)
    title = printable(design.title)  # one line, even if the title holds a line break
    package = ds.attrs.get("package_version", "")
    summary = " ".join(_summary_sentences(design, ds, answers))
    seed = ds.attrs.get("seed", -1)
    draws = int(ds.attrs.get("draws", 0) or 0)
    run = [f"method: {ds.attrs.get('method', '')}"]
    if draws > 0:
        run.append(f"Monte Carlo draws: {draws}; seed: "
                   + ("not fixed" if seed is None or int(seed) < 0 else str(seed)))
    if design_record is None:
        recorded = json.dumps(json.loads(ds.attrs["design"]), indent=2)
        recorded_title = "Design as recorded with the results"
    else:
        recorded, recorded_title = design_record, "Design file as planned (design.toml)"
    caution_items = "".join(f"<li>{_e(c)}</li>" for c in cautions)
    figure_block = (f"<section><h2>Figures</h2>{_figures(design, ds, answers, rendered)}"
                    "</section>"
                    if figures else "")
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{_e(title)}: sample-size memo</title><style>{_CSS}</style></head>"
        "<body><main>"
        f"<header><h1>{_e(title)}</h1><p class=\"meta\">Sample-size decision memo "
        f"\u00b7 generated {_e(_date_text(date))} \u00b7 assurance {_e(package)}</p></header>"
        f'<section class="summary"><h2>In short</h2><p>{_e(summary)}</p></section>'
        f"<section><h2>Design</h2>{_facts(design, ds)}</section>"
        f"<section><h2>Candidate sample sizes</h2>{_candidates(design, ds, answers)}</section>"
        f"<section><h2>Sample sizes for the targets</h2>{_targets(design, answers)}</section>"
        f"{_zones_section(ds, answers)}"
        f"{_origin_section(prior_origin, rendered)}"
        f"{_precision_section(ds, precision, rendered)}"
        f"{figure_block}"
        f'<section class="cautions"><h2>Cautions</h2><ul>{caution_items}</ul></section>'
        '<section class="provenance"><h2>Provenance</h2>'
        f"<pre>{_e(chr(10).join(run))}\n\n{_e(versions)}</pre>"
        f"<details><summary>{_e(recorded_title)}</summary>"
        f"<pre>{_e(recorded)}</pre></details></section>"
        "</main></body></html>\n"
    )


def _versions_text() -> str:
    from ..versions import show_versions

    return show_versions()


def write_memo(
    design: TrialDesign,
    ds: Any,
    answers: Sequence[SampleSizeAnswer] | None,
    path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    cautions: Sequence[str] = DEFAULT_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    prior_origin: Any = None,
    precision: Sequence[Any] = (),
    design_record: str | None = None,
) -> Path:
    """Write the decision memo for a design as one self-contained HTML file.

    The memo gives, in order: a short summary (assurance against classical power and the
    ceiling), the design, candidate sample sizes taken from ``ds``, the sizes that reach
    each target (and the targets that cannot be reached), the figures, cautions and
    provenance. Nothing is computed beyond what ``ds`` and ``answers`` hold.

    Parameters
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`).
    ds
        The dataset from :func:`assurance.evaluate` for this same design.
    answers
        Solved targets from :func:`assurance.solve_sample_size`; may be empty or None.
    path
        The HTML file to write. Its folder must exist.
    overwrite
        Replace an existing file. Off by default.
    cautions
        Sentences for the cautions section; :data:`DEFAULT_CAUTIONS` unless given.
    versions
        Text for the provenance section; :func:`assurance.show_versions` unless given.
    date
        Date shown as the generation date; today unless given (fix it for reproducible
        files).
    figures
        Embed the two figures (as PNG data inside the file).
    rendered
        PNG bytes of figures already drawn, keyed ``"power_and_assurance"``,
        ``"prior"`` and ``"prior_fit"``; the others are drawn here.
    prior_origin
        What the design prior was built from (a fit to elicited judgements, a meta-analytic
        prior, or a sentence); shown with its report and, for a fit, its figure.
    precision
        Precision answers (one per criterion), shown with the interval-width figure when
        ``ds`` holds ``width_mean``.
    design_record
        The normalised design file (``design.toml`` text) shown under provenance; without
        it, the design as recorded in ``ds``.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    AssuranceInputError
        When the file exists and ``overwrite`` is False, when its folder does not exist, or
        when ``ds`` was computed for another design.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> import assurance as asr
    >>> from assurance.report import write_memo
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5))
    >>> ds = asr.evaluate(design, range(100, 501, 100))
    >>> answer = asr.solve_sample_size(design, 0.6)
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = write_memo(design, ds, [answer], pathlib.Path(folder) / "memo.html",
    ...                       figures=False)
    ...     print(path.name, "ICH E9" in path.read_text(encoding="utf-8"))
    memo.html True
    """
    target = check_target(path, "write_memo", overwrite)
    page = memo_html(design, ds, answers, cautions=cautions, versions=versions, date=date,
                     figures=figures, rendered=rendered, prior_origin=prior_origin,
                     precision=precision, design_record=design_record)
    return write_atomic(target, page.encode("utf-8"), overwrite=overwrite, owner="write_memo")
