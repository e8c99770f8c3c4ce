"""A short, self-contained HTML decision memo for one planned trial.

The memo holds everything in one file: styles inline, figures embedded as PNG data, no
scripts and no links to anything outside the file, so it can be mailed, archived or
printed (A4) as it is. The page comes from one jinja2 template (``templates/memo.html``)
with autoescaping on: all text that comes from the user (title, prior descriptions,
messages) is escaped, and control characters in it are shown as escapes (``\\x1b``), never
written raw. Numbers and priors reach the page through :mod:`.wording` (plain words,
rounded for reading); the results files keep full precision.
"""

from __future__ import annotations

import base64
import datetime as _dt
import functools
import hashlib
import json
import os
import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import AssuranceInputError
from . import wording as wd
from ._files import check_target, printable, write_atomic
from .figures import passable_probability

if TYPE_CHECKING:  # pragma: no cover
    from ..design import TrialDesign
    from ..planning import SampleSizeAnswer

__all__ = ["write_memo", "memo_html", "memo_text_summary", "plan_memo_html", "write_plan_memo",
           "DEFAULT_CAUTIONS"]

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


def _e(text: Any) -> str:
    """HTML-escaped text with control characters shown as escapes (line breaks kept).

    Kept for the notebook overview (``notebook.py``), which writes its small HTML by hand.
    """
    import html

    return html.escape(printable(str(text), line_breaks=True), quote=True)


# ------------------------------------------------------------------------------------------
# HTML: what the memo needs from a plan, gathered once
# ------------------------------------------------------------------------------------------
#: the go / consider / stop approach the zones follow (as cited in assurance.rules.zones)
ZONES_SOURCE = "Lalonde et al. (2007), Clinical Pharmacology & Therapeutics 82:21-32"
#: the precision criteria's source
PRECISION_SOURCE = "Joseph, Wolfson & du Berger (1995), The Statistician 44:143-154"
#: relative tolerance above the nominal level before a type I error is flagged
TYPE_ONE_TOLERANCE = 1e-6

FIGURE_NAMES = ("power_and_assurance", "prior")


@dataclass
class _Parts:
    """The pieces of a plan the memo reads (from a Plan, or from the older arguments)."""

    design: Any
    results: Any
    sample_sizes: list[Any]
    precision: Sequence[Any] = ()
    prior_origin: Any = None
    source: Any = None
    planned_n: int = 0
    planned_reason: str = ""
    made_by: str = ""
    created: str = ""
    seed: int | None = None
    zones: Any = None


def _parts_from_plan(plan: Any) -> _Parts:
    ds = plan.results
    settings = getattr(plan, "settings", None)
    seed = getattr(settings, "seed", None)
    if seed is None:
        seed = ds.attrs.get("seed")
    parts = _Parts(
        design=plan.design, results=ds, sample_sizes=list(plan.sample_sizes),
        precision=tuple(getattr(plan, "precision", ()) or ()),
        prior_origin=getattr(plan, "prior_origin", None), source=getattr(plan, "source", None),
        planned_n=int(getattr(plan, "planned_n", 0) or 0),
        planned_reason=str(getattr(plan, "planned_reason", "") or ""),
        made_by=str(getattr(plan, "made_by", "") or ""),
        created=str(getattr(plan, "created", "") or ""),
        seed=seed, zones=getattr(settings, "zones", None))
    if not parts.planned_n:
        parts.planned_n, parts.planned_reason = _choose_planned(parts.sample_sizes, ds)
    return parts


def _choose_planned(answers: Sequence[SampleSizeAnswer], ds: Any) -> tuple[int, str]:
    """The size the decision box reports when the plan does not say (as the planner does)."""
    words = {"assurance": "assurance", "conditional_assurance": "conditional assurance",
             "power": "classical power"}
    for quantity in ("assurance", "conditional_assurance", "power"):
        for answer in answers:
            if answer.quantity == quantity and answer.reached and answer.n_total is not None:
                return int(answer.n_total), (f"the smallest size reaching the "
                                             f"{words[quantity]} target of "
                                             f"{wd.percent(answer.target)}")
    why = "no target was reached" if answers else "no target was set"
    return int(np.max(ds["n"].values)), f"the largest size evaluated ({why})"


def _row(ds: Any, n_total: int) -> tuple[int, bool]:
    """Row of ``ds`` for ``n_total`` and whether it is exactly that size."""
    j = _nearest(ds, n_total)
    return j, int(ds["n"].values[j]) == int(n_total)


def _pct(ds: Any, name: str, j: int, decimals: int = 1) -> str:
    """``70.0%`` or ``70.0% ± 0.4`` (Monte Carlo standard error in percentage points)."""
    if name not in ds:
        return ""
    text = wd.percent(float(ds[name].values[j]), decimals)
    mcse = f"{name}_mcse"
    if mcse in ds:
        se = 100 * float(ds[mcse].values[j])
        text += " \u00b1 <0.1" if se < 0.05 else f" \u00b1 {se:.1f}"
    return text


def _arms_text(design: Any, ds: Any, j: int) -> str:
    if design.endpoint.layout == "single_arm":
        return "one group"
    return (f"{int(ds['n_treatment'].values[j])} on treatment, "
            f"{int(ds['n_control'].values[j])} on control")


def _time_unit(endpoint: Any) -> str:
    return str(getattr(endpoint, "time_unit", None) or "units of time")


# ------------------------------------------------------------------------------------------
# decision box
# ------------------------------------------------------------------------------------------
def _unreachable(parts: _Parts) -> list[str]:
    out = []
    for answer in parts.sample_sizes:
        if answer.reached:
            continue
        target = wd.percent(answer.target)
        if answer.quantity == "assurance":
            out.append(f"No size reaches {target} assurance: even a very large trial succeeds "
                       f"with probability at most {wd.percent(answer.ceiling)}.")
        elif answer.quantity == "conditional_assurance":
            out.append(f"No size reaches {target} conditional assurance: even a very large "
                       "trial succeeds with probability at most "
                       f"{wd.percent(answer.ceiling)} when the effect is relevant.")
        else:
            highest = getattr(answer, "highest", None)
            tail = "" if highest is None else f" (the highest found is {wd.percent(highest)})"
            out.append(f"No size reaches {target} classical power{tail}.")
        highest = getattr(answer, "highest", None)
        if answer.quantity != "power" and highest is not None and \
                highest > answer.ceiling + 5e-4:
            where = getattr(answer, "highest_n_total", None)
            out[-1] += (f" (False positives lift it to {wd.percent(highest, 1)}"
                        + ("" if where is None else f" at {where} patients") + ".)")
    return out


def _decision(parts: _Parts) -> dict[str, Any]:
    design, ds = parts.design, parts.results
    ep = design.endpoint
    j, exact = _row(ds, parts.planned_n)
    n_shown = int(ds["n"].values[j])
    assurance = float(ds["assurance"].values[j])
    power = float(ds["power"].values[j])
    ceiling = float(ds["ceiling"])
    tiles = [
        {"key": "assurance", "label": "Probability of success",
         "value": wd.percent(assurance), "note": f"at {n_shown} patients"
         + ("" if "assurance_mcse" not in ds else
            f" (\u00b1 {100 * float(ds['assurance_mcse'].values[j]):.1f} points, "
            "Monte Carlo)"), "lead": True},
        {"key": "ceiling", "label": "Ceiling",
         "value": wd.percent(ceiling), "note": "the most any size can reach"},
        {"key": "power", "label": "Classical power",
         "value": wd.percent(power),
         "note": f"if the effect is exactly {wd.effect_text(ep, design.assumed_effect)}"},
        {"key": "gap", "label": "Gap",
         "value": wd.points(power - assurance).replace("percentage point", "point"),
         "note": "classical power minus probability of success"},
    ]
    if "prob_success_and_relevant" in ds and design.relevant_effect is not None:
        tiles.append({"key": "success_and_relevant", "label": "Success and a relevant effect",
                      "value": wd.percent(float(ds["prob_success_and_relevant"].values[j])),
                      "note": "the effect is at least as good as "
                              f"{wd.effect_text(ep, design.relevant_effect)}"})
    false_share = None
    non_inferiority = float(getattr(design.rule, "margin", 0.0) or 0.0) > 0
    if "prob_success_and_benefit" in ds and assurance > 0:
        # share of successes where the true effect is not beneficial (effect <= no effect):
        # 1 - P(success and truly better) / P(success)
        false_share = min(max(1.0 - float(ds["prob_success_and_benefit"].values[j])
                              / assurance, 0.0), 1.0)
        if not non_inferiority:
            tiles.append({"key": "false_positives",
                          "label": "Successes that are false positives",
                          "value": wd.percent(false_share),
                          "note": "the treatment is not truly better"})
    if "expected_events" in ds.coords or "expected_events" in ds:
        events = float(ds["expected_events"].values[j])
        duration = getattr(ep, "analysis_time", None)
        tiles.append({"key": "events", "label": "Expected events",
                      "value": f"{events:,.0f}",
                      "note": ("by the analysis" if duration is None else
                               f"study duration {wd.number(duration)} {_time_unit(ep)}")})
    if "patient_time" in ds.coords or "patient_time" in ds:
        time = float(ds["patient_time"].values[j])
        tiles.append({"key": "patient_time", "label": "Total patient time",
                      "value": f"{time:,.0f}", "note": _time_unit(ep)})
    size = f"{n_shown} patients" + ("" if design.endpoint.layout == "single_arm"
                                     else f" ({_arms_text(design, ds, j)})")
    reason = parts.planned_reason or "the size the plan was asked to report"
    planned = f"Planned size: {size}, {reason}."
    if not exact:
        planned += (f" ({parts.planned_n} patients was not computed; the nearest size "
                    f"computed, {n_shown}, is shown.)")
    sentences = [planned]
    if false_share is not None and non_inferiority:
        sentences.append(
            f"Success here shows non-inferiority, not superiority: about "
            f"{wd.percent(false_share)} of the trials that succeed would do so with a "
            "treatment that is not truly better than control.")
    elif false_share is not None and false_share >= 0.005:
        sentences.append(
            f"Of the trials that succeed, about {wd.percent(false_share)} would do so with a "
            "treatment that is not truly better.")
    caution = ("These figures rest on the design prior: the sensitivity section shows how "
               "they move with it, and a statistician should review the design.")
    return {"lead": _unreachable(parts), "tiles": tiles, "sentences": sentences,
            "caution": caution, "n": n_shown, "row": j}


# ------------------------------------------------------------------------------------------
# what was assumed
# ------------------------------------------------------------------------------------------
def _assumed(parts: _Parts, j: int) -> list[tuple[str, str]]:
    design, ds = parts.design, parts.results
    ep = design.endpoint
    effect = getattr(ep, "effect_name", "effect")
    rows: list[tuple[str, str]] = [("Outcome and analysis", wd.endpoint_text(ep)),
                                   ("Success", wd.rule_text(design.rule, ep))]
    origin = parts.prior_origin
    recipe = ""
    if origin is not None and type(origin).__name__ == "DiscountedEstimate":
        recipe = wd.origin_text(origin, ep).removeprefix("Design prior from an ").rstrip(".")
        recipe += ", which gives "
    rows.append((f"Design prior for the {effect}",
                 f"{recipe}{wd.prior_text(design.design_prior, ep)}. Probability that the "
                 f"treatment is better: {wd.percent(float(ds['prob_benefit']))}."))
    if hasattr(ep, "sigma"):
        unit = getattr(ep, "unit", None)
        sigma = f"{wd.number(ep.sigma)}{f' {unit}' if unit else ''}"
        sd_prior = getattr(design, "sigma_prior", None)
        rows.append(("Outcome SD", f"uncertain, {wd.sd_prior_text(sd_prior, unit)}; classical "
                     f"power uses the planning value {sigma}" if sd_prior is not None
                     else f"{sigma}, taken as known when planning"))
    if getattr(design, "analysis_prior", None) is not None:
        rows.append(("Analysis prior (used by the final analysis)",
                     wd.prior_text(design.analysis_prior, ep)))
    rows.append(("Assumed effect (classical power)", wd.effect_text(ep, design.assumed_effect)))
    if design.relevant_effect is not None:
        word = "at most" if ep.better == "lower" else "at least"
        prob = f"; prior probability of an effect this good: " \
               f"{wd.percent(float(ds['prob_relevant']))}" if "prob_relevant" in ds else ""
        rows.append(("Clinically relevant effect",
                     f"{word} {wd.effect_text(ep, design.relevant_effect)}{prob}"))
    margin = float(getattr(design.rule, "margin", 0.0) or 0.0)
    if margin > 0:
        shown = wd.ratio(margin) if getattr(ep, "ratio_scale", False) else \
            wd.effect_text(ep, margin)
        rows.append(("Non-inferiority margin",
                     f"{shown}: the treatment may be worse than control by less than this"))
    if "expected_events" in ds.coords or "expected_events" in ds:
        unit = _time_unit(ep)
        duration = getattr(ep, "analysis_time", None)
        if duration is not None:
            rows.append(("Study duration",
                         f"{wd.number(duration)} {unit}: {wd.number(ep.accrual_time)} of "
                         f"accrual, then {wd.number(ep.follow_up_time)} of follow-up"))
        rows.append(("Expected events",
                     f"{float(ds['expected_events'].values[j]):,.0f} at {int(ds.n[j])} "
                     "patients (the analysis takes place when the study ends)"))
    if "patient_time" in ds.coords or "patient_time" in ds:
        line = (f"{float(ds['patient_time'].values[j]):,.0f} {_time_unit(ep)} at "
                f"{int(ds.n[j])} patients")
        if "expected_events_if_no_effect" in ds.coords:
            line += (f"; about {float(ds['expected_events_if_no_effect'].values[j]):,.0f} "
                     "events if the treatment changed nothing")
        rows.append(("Total patient time", line))
    region = passable_probability(design)
    ceiling = float(ds["ceiling"])
    why = ("the prior probability that the true effect lies where the success rule can be "
           "passed" if abs(region - ceiling) < 5e-4 else
           f"the prior probability ({wd.percent(region, 1)}) of the effects the rule can pass, "
           "plus false positives at the edge of that region")
    rows.append(("Ceiling of the probability of success", f"{wd.percent(ceiling, 1)}: {why}"))
    rows.append(("Method", str(ds.attrs.get("method", ""))))
    draws = int(ds.attrs.get("draws", 0) or 0)
    if draws > 0:
        rows.append(("Monte Carlo", f"{draws} draws, seed {_seed_text(parts.seed)}; "
                     "\u00b1 gives one Monte Carlo standard error"))
    return rows


def _seed_text(seed: Any) -> str:
    return "not fixed" if seed is None or int(seed) < 0 else str(int(seed))


# ------------------------------------------------------------------------------------------
# candidate sizes and targets
# ------------------------------------------------------------------------------------------
def _candidates(parts: _Parts, planned_row: int) -> dict[str, Any]:
    design, ds, answers = parts.design, parts.results, parts.sample_sizes
    ep = design.endpoint
    rows, marked = _pick_rows(ds, answers)
    rows = sorted(set(rows) | {planned_row})
    two_arm = ep.layout != "single_arm"
    head = ["Total patients"] + (["Treatment / control"] if two_arm else [])
    extra = [(name, label) for name, label in
             (("expected_events", "Expected events"),
              ("patient_time", f"Patient time ({_time_unit(ep)})"))
             if name in ds.coords or name in ds]
    head += [label for _, label in extra]
    head += [f"Classical power at {wd.effect_text(ep, design.assumed_effect)}",
             "Probability of success"]
    has_rel = "conditional_assurance" in ds
    if has_rel:
        head += ["Success if the effect is relevant", "Success and a relevant effect"]
    head.append("Note")
    n = ds["n"].values
    body = []
    for j in rows:
        cells = [str(int(n[j]))]
        if two_arm:
            cells.append(f"{int(ds['n_treatment'].values[j])} / "
                         f"{int(ds['n_control'].values[j])}")
        cells += [f"{float(ds[name].values[j]):,.0f}" for name, _ in extra]
        cells += [_pct(ds, "power", j), _pct(ds, "assurance", j)]
        if has_rel:
            cells += [_pct(ds, "conditional_assurance", j),
                      _pct(ds, "prob_success_and_relevant", j)]
        notes = ["planned size"] if j == planned_row else []
        for answer in marked.get(j, []):
            exact = answer.n_total == int(n[j])
            notes.append(f"smallest size for {_target_words(answer)}" if exact else
                         f"close to the smallest size for {_target_words(answer)} "
                         f"({answer.n_total})")
        cells.append("; ".join(notes))
        body.append({"cells": cells, "marked": j == planned_row or j in marked})
    note = "Rows are taken from the sizes computed; highlighted rows are the planned size " \
           "and those nearest to a solved size"
    if "assurance_mcse" in ds:
        note += "; \u00b1 gives one Monte Carlo standard error in percentage points"
    return {"head": head, "rows": body, "note": note + "."}


def _target_words(answer: SampleSizeAnswer) -> str:
    name = _QUANTITY_NAME.get(answer.quantity, answer.quantity)
    return f"{name} {wd.percent(answer.target)}"


def _targets(parts: _Parts) -> list[dict[str, Any]]:
    two_arm = parts.design.endpoint.layout != "single_arm"
    out = []
    for answer in parts.sample_sizes:
        row = {"name": _target_words(answer), "reached": bool(answer.reached),
               "ceiling": wd.percent(answer.ceiling, 1), "comment": ""}
        if answer.reached and answer.n_total is not None:
            row["n"] = str(answer.n_total)
            row["arms"] = f"{answer.n_treatment} / {answer.n_control}" if two_arm else ""
            value = "" if answer.achieved is None else wd.percent(answer.achieved, 1)
            if value and answer.achieved_mcse is not None:
                value += f" \u00b1 {100 * answer.achieved_mcse:.1f}"
            row["achieved"] = value
            if not answer.message.startswith("Smallest size"):
                row["comment"] = answer.message
        else:
            row["comment"] = answer.message
        out.append(row)
    return out


# ------------------------------------------------------------------------------------------
# sensitivity, zones, precision, type I error
# ------------------------------------------------------------------------------------------
def _target_label(key: Any) -> str:
    if isinstance(key, int | float | np.floating | np.integer):
        return f"Size for {wd.percent(float(key))} assurance"
    return f"Size for the {str(key).replace('_', ' ')} target"


def _sensitivity(parts: _Parts, figures: bool,
                 rendered: Mapping[str, bytes] | None) -> dict[str, Any] | None:
    ds = parts.results
    if "sensitivity_assurance" not in ds:
        return None
    ep = parts.design.endpoint
    planned = int(ds["sensitivity_planned_n"]) if "sensitivity_planned_n" in ds \
        else parts.planned_n
    names = [str(v) for v in ds["variation"].values]
    descriptions = [str(v) for v in ds["variation_description"].values] \
        if "variation_description" in ds.variables else names
    keys = list(ds["sensitivity_target"].values) if "sensitivity_n" in ds else []
    targets = {a.quantity: a.target for a in parts.sample_sizes}
    head = ["Design prior", f"Probability of success at {planned} patients", "Ceiling"]
    for key in keys:
        target = targets.get(str(key))
        head.append(f"Size for {wd.percent(target)} {str(key).replace('_', ' ')}"
                    if target is not None else _target_label(key))
    rows = []
    for i, (name, text) in enumerate(zip(names, descriptions, strict=True)):
        if name == "elicited":
            text = "as given: " + wd.prior_text(parts.design.design_prior, ep)
        cells = [wd._no_code(text), wd.percent(float(ds["sensitivity_assurance"].values[i]), 1),
                 wd.percent(float(ds["sensitivity_ceiling"].values[i]), 1)]
        for k in range(len(keys)):
            value = int(ds["sensitivity_n"].values[i, k])
            cells.append("not reachable" if value < 0 else f"{value:,}")
        rows.append({"name": name, "cells": cells, "marked": name == "elicited"})
    sentence = str(ds.attrs.get("sensitivity_sentence", ""))
    figure = None
    if figures:
        figure = _figure(
            "sensitivity_map", rendered,
            lambda: _call_with("plot_sensitivity_map", (ds, parts.design),
                               target=targets.get("assurance")),
            f"Probability of success at {planned} patients over the prior's centre and "
            "spread",
            "Each point is a design prior with that centre and spread; the elicited prior is "
            "marked, and a line shows where the assurance target is just met when that "
            "happens inside the map.")
    return {"head": head, "rows": rows, "sentence": sentence, "figure": figure}


def _zones(parts: _Parts, figures: bool, rendered: Mapping[str, bytes] | None,
           planned_row: int) -> dict[str, Any] | None:
    ds = parts.results
    if "prob_go" not in ds:
        return None
    ep = parts.design.endpoint
    rows, _ = _pick_rows(ds, parts.sample_sizes)
    rows = sorted(set(rows) | {planned_row})
    table = [{"cells": [str(int(ds.n.values[i])), _pct(ds, "prob_go", i),
                        _pct(ds, "prob_consider", i), _pct(ds, "prob_stop", i)],
              "marked": i == planned_row} for i in rows]
    n = int(ds.n.values[planned_row])
    go = float(ds["prob_go"].values[planned_row])
    success = float(ds["assurance"].values[planned_row])
    zones = parts.zones
    if zones is not None:
        rule = (f"go when the probability that the effect is better than "
                f"{wd.effect_text(ep, zones.min_acceptable)} (the minimum acceptable) is at "
                f"least {wd.percent(zones.go_min_prob)}"
                + ("" if zones.go_target_prob is None else
                   f" and that it is better than {wd.effect_text(ep, zones.target)} (the "
                   f"target) is at least {wd.percent(zones.go_target_prob)}")
                + f"; stop when the probability of an effect better than the target is below "
                f"{wd.percent(zones.stop_target_prob)}; consider otherwise")
        go_needs = (f"posterior probabilities of beating the minimum acceptable effect "
                    f"({wd.effect_text(ep, zones.min_acceptable)}) and the target effect "
                    f"({wd.effect_text(ep, zones.target)})")
    else:
        rule = wd._no_code(str(ds.attrs.get("zones", "")))
        go_needs = "posterior probabilities of beating the minimum acceptable and target effects"
    reconcile = ""
    if abs(go - success) >= 0.005:
        higher = "lower" if go < success else "higher"
        reconcile = (
            f"At {n} patients the chance of a go decision is {wd.percent(go)}, {higher} than "
            f"the {wd.percent(success)} probability of success: they are different rules on "
            f"different quantities. Success needs the final test to pass the success rule "
            f"({wd.rule_text(parts.design.rule, ep)}); go needs {go_needs}, computed with "
            "the analysis prior, so it asks for a larger observed effect.")
    figs = []
    if figures:
        figs.append(_figure("zones", rendered,
                            lambda: _call_with("plot_zones", (ds,), planned_n=n),
                            "Chances of go, consider and stop by sample size",
                            "Probabilities under the design prior."))
        figs.append(_figure("zones_by_effect", rendered,
                            lambda: _call("plot_zone_characteristic", ds, n),
                            f"Chances of go, consider and stop against the true effect at {n} "
                            "patients",
                            "The operating characteristic of the rule: what it decides if the "
                            "true effect is exactly the value on the horizontal axis."))
    return {"rule": rule, "rows": table, "reconcile": reconcile,
            "source": ZONES_SOURCE, "figures": [f for f in figs if f]}


def _precision(parts: _Parts, figures: bool,
               rendered: Mapping[str, bytes] | None) -> dict[str, Any] | None:
    ds = parts.results
    if "width_mean" not in ds:
        return None
    ep = parts.design.endpoint
    rows, left_out = [], []
    for answer in parts.precision or ():
        if isinstance(answer, str):
            left_out.append(f"The {wd.criterion_name(answer)} criterion cannot be computed "
                            "for this design with the method used, so it is left out.")
            continue
        what = {"ACC": "average coverage"}.get(answer.criterion, "width")
        if answer.reached and answer.n_total is not None:
            size = f"{answer.n_total:,}" + (
                f" ({answer.n_treatment} / {answer.n_control})" if answer.n_control else "")
            value = (wd.percent(answer.achieved, 1) if answer.criterion == "ACC" else
                     wd.number(answer.achieved)) if answer.achieved is not None else ""
            detail = f"{what} {value} at this size" if value else ""
        else:
            size, detail = "not reached", ""
        target = (f"{wd.percent(answer.coverage)} interval no longer than "
                  f"{wd.number(answer.length)}")
        rows.append({"cells": [wd.criterion_name(answer.criterion), target, size, detail]})
    sd_note = ""
    if getattr(ep, "analysis", None) == "t":
        sd_note = ("The final analysis estimates the SD (t test), but these widths treat the "
                   "SD as known (the planning value), so for small trials they are slightly "
                   "optimistic.")
    figure = None
    if figures:
        figure = _figure("interval_width", rendered,
                         lambda: _call("plot_interval_width", ds, parts.precision),
                         "Posterior interval width against sample size",
                         "Width of the posterior interval for the effect, over data the "
                         "design prior makes likely.")
    return {"note": wd._no_code(str(ds.attrs.get("precision", ""))), "rows": rows,
            "left_out": left_out, "sd_note": sd_note, "figure": figure,
            "source": PRECISION_SOURCE}


def _type_one(parts: _Parts) -> dict[str, Any] | None:
    design, ds = parts.design, parts.results
    rule = design.rule
    nominal = getattr(rule, "one_sided_alpha", None)
    kind = design.endpoint.to_dict().get("kind")
    if "type_one_error" not in ds or nominal is None:
        return None
    t1 = np.asarray(ds["type_one_error"].values, dtype=float)
    over = t1 > nominal * (1 + TYPE_ONE_TOLERANCE)
    text = []
    if over.any():
        n = ds["n"].values
        worst = int(np.argmax(t1))
        where = (f"at {int(n[over][0])} patients" if over.sum() == 1 else
                 f"at {int(over.sum())} of the {n.size} sizes computed, between "
                 f"{int(n[over].min())} and {int(n[over].max())} patients")
        text.append(f"The chance of a success when the treatment has no effect (type I error) "
                    f"exceeds the nominal {wd.percent(nominal, 1)} {where}; the worst is "
                    f"{wd.percent(float(t1[worst]), 2)} at {int(n[worst])} patients.")
    if kind == "binary":
        text.append("With a yes/no outcome the possible results are counts, so the set of "
                    "results that count as a success changes in steps as the trial grows: "
                    "exact power and type I error rise and fall in a saw-tooth rather than "
                    "smoothly with the sample size.")
    if not text:
        return None
    return {"sentences": text}


#: A simulated power this far from the formula's (absolute) is shown beside it.
POWER_CHECK_SHOWN = 0.005


def _power_check(parts: _Parts) -> dict[str, Any] | None:
    """The power formula against a simulation of the test itself (count endpoints)."""
    ds = parts.results
    if "power_check_simulated" not in ds:
        return None
    n = [int(v) for v in ds["checked_n"].values]
    sim = np.asarray(ds["power_check_simulated"].values, dtype=float)
    se = np.asarray(ds["power_check_mcse"].values, dtype=float)
    formula = np.asarray(ds["power_check_formula"].values, dtype=float)
    trials = int(ds.attrs.get("power_check_trials", 0))
    fitted = ("negative binomial regression" if ds.attrs.get("power_check_analysis")
              == "negative_binomial" else "Poisson rates")
    gap = sim - formula
    # a difference beyond half a point and beyond Monte Carlo noise (2 SE) is flagged
    apart = (np.abs(gap) > POWER_CHECK_SHOWN) & (np.abs(gap) > 2 * se)
    noisy = (np.abs(gap) > POWER_CHECK_SHOWN) & ~apart
    lead = (f"The power formula for the Wald test on the log rate ratio is an approximation. "
            f"It was checked by simulating {trials:,} trials of the test itself ({fitted}) at "
            f"the assumed effect at {_and_list([f'{v:,}' for v in n])} patients.")
    rows = [{"n": f"{v:,}", "formula": wd.percent(float(f), 1),
             "simulated": f"{wd.percent(float(q), 1)} \u00b1 {100 * float(e):.1f}",
             "gap": _signed_points(float(d)), "apart": bool(a)}
            for v, f, q, e, d, a in zip(n, formula, sim, se, gap, apart, strict=True)]
    if apart.any():
        text = (f"At {_and_list([r['n'] for r in rows if r['apart']])} patients the simulated "
                "power differs from the formula by more than half a percentage point, beyond "
                "Monte Carlo error; plan on the simulated figure (\u00b1 one Monte Carlo "
                "standard error), or choose the exact conditional test where it applies.")
    elif noisy.any():
        text = ("The simulated and formula powers differ by more than half a percentage point "
                f"at {_and_list([r['n'] for r, x in zip(rows, noisy, strict=True) if x])} "
                "patients, but by less than two Monte Carlo standard errors: the simulation "
                "does not show the formula to be off.")
    else:
        text = ("The simulation agrees with the formula within half a percentage point at "
                "every size checked.")
    return {"sentences": [lead, text], "rows": rows, "flag": bool(apart.any())}


def _and_list(items: Sequence[str]) -> str:
    """``a``, ``a and b``, ``a, b and c``."""
    items = list(items)
    return items[0] if len(items) == 1 else f"{', '.join(items[:-1])} and {items[-1]}"


def _signed_points(difference: float) -> str:
    """A difference of probabilities in percentage points, one decimal, no ``-0.0``."""
    text = f"{100 * difference:+.1f}"
    return "0.0" if text in ("+0.0", "-0.0") else text.replace("-", "\u2212")


# ------------------------------------------------------------------------------------------
# figures, provenance
# ------------------------------------------------------------------------------------------
def _call(name: str, *args: Any) -> Any:
    """A figure function of :mod:`.figures` by name, or None where it does not exist."""
    from . import figures as fg

    draw = getattr(fg, name, None)
    return None if draw is None else draw(*args)


def _call_with(name: str, args: tuple[Any, ...], **keywords: Any) -> Any:
    """As :func:`_call`, passing ``keywords`` only where the function takes them."""
    import inspect

    from . import figures as fg

    draw = getattr(fg, name, None)
    if draw is None:
        return None
    taken = inspect.signature(draw).parameters
    return draw(*args, **{k: v for k, v in keywords.items() if k in taken})


def _figure(name: str, rendered: Mapping[str, bytes] | None, draw: Any, alt: str,
            caption: str) -> dict[str, str] | None:
    png = (rendered or {}).get(name)
    if png is None:
        ax = draw()
        if ax is None:
            return None
        from .figures import figure_bytes

        png = figure_bytes(ax.figure, "png")
    data = base64.b64encode(png).decode("ascii")
    return {"src": f"data:image/png;base64,{data}", "alt": alt, "caption": caption}


def _origin(parts: _Parts, figures: bool,
            rendered: Mapping[str, bytes] | None) -> dict[str, Any] | None:
    origin = parts.prior_origin
    if origin is None:
        return None
    figure = None
    if figures and type(origin).__name__ == "PriorFit":
        figure = _figure("prior_fit", rendered, lambda: _call("plot_fit", origin),
                         "Fitted prior against the elicited judgements",
                         "Elicited judgements and the fitted distribution function.")
    return {"text": wd.origin_text(origin, parts.design.endpoint), "figure": figure}


def _provenance(parts: _Parts, versions: str, date: str) -> dict[str, Any]:
    rows: list[tuple[str, str]] = []
    source = parts.source
    if source is not None:
        rows.append(("Design file", str(source.path)))
        rows.append(("SHA-256 of the design file", hashlib.sha256(source.content).hexdigest()))
    else:
        rows.append(("Design file", "none (the plan was made in Python)"))
    rows.append(("Made by", parts.made_by or "not recorded"))
    rows.append(("Computed (UTC)", parts.created or "not recorded"))
    rows.append(("Memo written", date))
    rows.append(("Seed", _seed_text(parts.seed)))
    rows.append(("Method", str(parts.results.attrs.get("method", ""))))
    return {"rows": rows, "versions": versions}


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


@functools.lru_cache(maxsize=4)
def _template(name: str = "memo.html") -> Any:
    """A memo template (``templates/``), autoescaped, strict about missing values."""
    import jinja2
    import markupsafe

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(Path(__file__).with_name("templates"))),
        autoescape=True, trim_blocks=True, lstrip_blocks=True,
        undefined=jinja2.StrictUndefined,
        # control characters, line separators and direction overrides become visible escapes
        # (a macro's output is already-safe markup built from finalized values: kept as is)
        finalize=lambda v: v if isinstance(v, markupsafe.Markup) or not isinstance(v, str)
        else printable(v, line_breaks=True))
    return env.get_template(name)


def _render(parts: _Parts, *, cautions: Sequence[str], versions: str | None,
            date: _dt.date | str | None, figures: bool,
            rendered: Mapping[str, bytes] | None, design_record: str | None) -> str:
    if isinstance(cautions, str):
        cautions = [cautions]
    cautions = [str(c) for c in cautions]
    versions = _versions_text() if versions is None else str(versions)
    design, ds = parts.design, parts.results
    decision = _decision(parts)
    j = decision["row"]
    main = prior = None
    if figures:
        main = _figure("power_and_assurance", rendered,
                       lambda: _call("plot_power_and_assurance", ds) if not parts.sample_sizes
                       else _power_figure(ds, parts.sample_sizes),
                       "Classical power, probability of success and the ceiling by total "
                       "sample size",
                       "Classical power assumes the effect is exactly the assumed value; the "
                       "probability of success (assurance) averages over the design prior and "
                       "cannot pass the dashed ceiling.")
        prior = _figure("prior", rendered, lambda: _call("plot_prior", design),
                        "The design prior for the true effect",
                        "The shaded side holds the effects at which the rule can be passed "
                        "with enough patients; their prior probability sets the ceiling.")
    if design_record is None:
        recorded = json.dumps(json.loads(ds.attrs["design"]), indent=2)
        recorded_title = "Design as recorded with the results"
    else:
        recorded, recorded_title = design_record, "Design file as planned (design.toml)"
    context = {
        "title": printable(design.title),  # one line, even if the title holds a line break
        "date": _date_text(date),
        "package": str(ds.attrs.get("package_version", "")),
        "decision": decision,
        "assumed": _assumed(parts, j),
        "prior_figure": prior,
        "main_figure": main,
        "candidates": _candidates(parts, j),
        "targets": _targets(parts),
        "two_arm": design.endpoint.layout != "single_arm",
        "sensitivity": _sensitivity(parts, figures, rendered),
        "zones": _zones(parts, figures, rendered, j),
        "precision": _precision(parts, figures, rendered),
        "type_one": _type_one(parts),
        "power_check": _power_check(parts),
        "origin": _origin(parts, figures, rendered),
        "provenance": _provenance(parts, versions, _date_text(date)),
        "recorded": recorded,
        "recorded_title": recorded_title,
        "cautions": cautions,
    }
    return _template().render(**context)


def _power_figure(ds: Any, answers: Sequence[SampleSizeAnswer]) -> Any:
    from .figures import plot_power_and_assurance

    return plot_power_and_assurance(ds, answers=list(answers))


def plan_memo_html(
    plan: Any,
    *,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    cautions: Sequence[str] = DEFAULT_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
    design_record: str | None = None,
) -> str:
    """The decision memo of a :class:`~assurance.Plan` as one self-contained HTML string.

    In order: the decision box (probability of success at the planned size, the ceiling,
    classical power and the gap, success with a relevant effect, the share of successes that
    are false positives, events or patient time), what was assumed, the main figure, the
    candidate sizes, sensitivity to the design prior, go / consider / stop, precision, a
    type I error note, where the prior comes from, provenance and cautions. Built from one
    template (``report/templates/memo.html``) with autoescaping.

    Parameters
    ----------
    plan
        The plan (:func:`assurance.plan` or :meth:`assurance.Plan.from_file`).
    figures
        Embed the figures (as PNG data inside the file).
    rendered
        PNG bytes of figures already drawn, keyed by name (``"power_and_assurance"``,
        ``"prior"``, ``"prior_fit"``, ``"interval_width"``, ``"zones"``,
        ``"zones_by_effect"``, ``"sensitivity_map"``, as :meth:`assurance.Plan.figures`
        names them); the others are drawn here.
    cautions, versions, date
        As for :func:`write_memo`.
    design_record
        The normalised design file shown under provenance; ``plan.design_record()`` unless
        given.

    Returns
    -------
    str
        A complete HTML document.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0), title="Demo")
    >>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200])
    >>> page = plan_memo_html(p, figures=False, date="2026-01-01", versions="-")
    >>> page.startswith("<!DOCTYPE html>"), "<script" in page
    (True, False)
    """
    if not hasattr(plan, "design") or not hasattr(plan, "results") or \
            not hasattr(plan, "sample_sizes"):
        raise AssuranceInputError(
            "The 'plan' parameter of plan_memo_html must be an assurance.Plan. "
            f"Got {type(plan).__name__} instead.")
    parts = _parts_from_plan(plan)
    _check_inputs(parts.design, parts.results, parts.sample_sizes, "plan_memo_html")
    if design_record is None and hasattr(plan, "design_record"):
        design_record = plan.design_record()
    return _render(parts, cautions=cautions, versions=versions, date=date, figures=figures,
                   rendered=rendered, design_record=design_record)


def write_plan_memo(
    plan: Any,
    path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    cautions: Sequence[str] = DEFAULT_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
    design_record: str | None = None,
) -> Path:
    """Write :func:`plan_memo_html` of ``plan`` to ``path`` (atomically, never overwriting
    unless asked).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200])
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = write_plan_memo(p, pathlib.Path(folder) / "memo.html", figures=False)
    ...     print(path.name, "ICH E9" in path.read_text(encoding="utf-8"))
    memo.html True
    """
    target = check_target(path, "write_plan_memo", overwrite)
    page = plan_memo_html(plan, figures=figures, rendered=rendered, cautions=cautions,
                          versions=versions, date=date, design_record=design_record)
    return write_atomic(target, page.encode("utf-8"), overwrite=overwrite,
                        owner="write_plan_memo")


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
    plan: Any = None,
) -> str:
    """The decision memo as one HTML string (see :func:`write_memo`).

    Parameters
    ----------
    design, ds, answers, cautions, versions, date, figures
        As for :func:`write_memo`.
    rendered
        PNG bytes of figures already drawn, keyed by name (``"power_and_assurance"``,
        ``"prior"``, ...), so a caller that saved them does not draw them twice.
    prior_origin
        What the design prior was built from: a fit to elicited judgements
        (:class:`~assurance.priors.elicitation.PriorFit`), an earlier trial, a meta-analytic
        prior, or a sentence.
    precision
        Precision answers (one per criterion) shown with the interval-width figure when
        ``ds`` holds ``width_mean``.
    plan
        The :class:`~assurance.Plan` these came from; when given, its planned size, its
        provenance (design file, command, time, seed) and its zone rule are used too
        (:func:`plan_memo_html` does the same from the plan alone).

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
    if plan is not None:
        parts = _parts_from_plan(plan)
        parts.design, parts.results, parts.sample_sizes = design, ds, answers
    else:
        planned_n, reason = _choose_planned(answers, ds)
        seed = ds.attrs.get("seed")
        parts = _Parts(design=design, results=ds, sample_sizes=answers,
                       planned_n=planned_n, planned_reason=reason,
                       seed=None if seed is None else int(seed))
    parts.prior_origin = prior_origin if prior_origin is not None else parts.prior_origin
    parts.precision = tuple(precision) if precision else parts.precision
    return _render(parts, cautions=cautions, versions=versions, date=date, figures=figures,
                   rendered=rendered, design_record=design_record)


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
    plan: Any = None,
) -> Path:
    """Write the decision memo for a design as one self-contained HTML file.

    The memo gives, in order: the decision box, what was assumed, the main figure, candidate
    sample sizes taken from ``ds`` and the sizes that reach each target, sensitivity, zones
    and precision (when ``ds`` holds them), a type I error note, the prior's origin,
    provenance and cautions (see :func:`plan_memo_html`). Nothing is computed beyond what
    ``ds`` and ``answers`` hold.

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
    plan
        The :class:`~assurance.Plan` these came from, for its planned size, provenance and
        zone rule (see :func:`memo_html`; :func:`write_plan_memo` takes the plan alone).

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
                     precision=precision, design_record=design_record, plan=plan)
    return write_atomic(target, page.encode("utf-8"), overwrite=overwrite, owner="write_memo")
