"""The self-contained HTML memo of a development program (phase 2, a go, then phase 3).

Same look and rules as the trial memo (:mod:`.memo`): one file, styles inline, figures as
embedded PNG data, no scripts, one autoescaped jinja2 template
(``templates/program_memo.html``) built from the shared macros (``templates/_parts.html``),
the same cautions and the same provenance (files with their SHA-256, command, time, seed,
versions). Numbers reach the page through :mod:`.wording`; nothing is computed here.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from ..errors import AssuranceInputError
from . import wording as wd
from ._files import check_target, printable, write_atomic
from .memo import DEFAULT_CAUTIONS, _date_text, _figure, _seed_text, _template, _versions_text

__all__ = ["program_memo_html", "write_program_memo", "PROGRAM_CAUTIONS"]

#: the trial memo's cautions, and what is particular to a program
PROGRAM_CAUTIONS: tuple[str, ...] = (*DEFAULT_CAUTIONS,
    "A go decision commits patients to phase 3: the false-go rate is the chance of that "
    "commitment when the drug does not work, under the design prior.",
    "The link between the phase 2 and phase 3 effects (the surrogate line and its noise) is "
    "an assumption; check how the program's figures move when it changes.")

_NAMES = {"p_go": "P(go after phase 2)", "pos": "Program probability of success",
          "p_go_and_works": "P(go and the drug works)",
          "expected_patients": "Expected patients",
          "expected_months": "Expected duration (months)"}


def _pct(p: float) -> str:
    return wd.percent(float(p), 1)


def _effect(design: Any, value: float) -> str:
    return wd.effect_text(design.endpoint, value)


def _decision(plan: Any) -> dict[str, Any]:
    r = plan.headline
    program = plan.program
    passes = plan.check_passes()
    months = f"{r.expected_months:.1f}" if program.has_durations else ""
    tiles = [
        {"key": "pos", "label": "Program probability of success", "lead": True,
         "value": _pct(r.pos), "note": "go after phase 2, then phase 3 succeeds"},
        {"key": "p_go", "label": "P(go after phase 2)", "value": _pct(r.p_go),
         "note": f"phase 2 with {r.n2:,} patients"},
        {"key": "p_success_given_go", "label": "P(phase 3 success | go)",
         "value": _pct(r.p_success_given_go),
         "note": ("phase 3 re-planned from phase 2" if r.replanned
                  else f"phase 3 with {r.n3:,} patients")},
        {"key": "p_go_and_works", "label": "P(go and the drug works)",
         "value": _pct(r.p_go_and_works), "note": "true effect better than none"},
        {"key": "false_go", "label": "False-go rate", "value": _pct(r.false_go),
         "note": ("P(go | no benefit)" if r.p_no_benefit > 0 else
                  "the prior leaves no mass on no benefit")},
        {"key": "expected_patients", "label": "Expected patients",
         "value": f"{r.expected_patients:,.0f}", "note": "both phases, phase 3 only after a go"},
    ]
    if months:
        tiles.append({"key": "expected_months", "label": "Expected duration",
                      "value": f"{months} months",
                      "note": "phase 2; the gap and phase 3 only after a go"})
    if passes is not None:
        worst = max(row["z"] for row in plan.check_rows())
        tiles.append({"key": "check", "label": "Check (simulated programs)",
                      "value": "passes" if passes else "fails", "failed": not passes,
                      "note": f"largest gap {worst:.1f} Monte Carlo SE"})
    lead = []
    if passes is False:
        lead.append(("check-failed", "The simulated programs disagree with the computed "
                     "figures by more than the limit; do not rely on these numbers before "
                     "the difference is explained."))
    sentences = [
        f"Go rule: {_go_words(plan)}. Phase 2 has {r.n2:,} patients; phase 3 "
        + (f"is re-planned from the phase 2 result (on average {r.expected_phase3_n:,.0f} "
           "patients after a go)." if r.replanned else f"has {r.n3:,} patients."),
        f"Over the design prior, the program reaches a successful phase 3 with probability "
        f"{_pct(r.pos)}; run alone without phase 2, phase 3 with {program.n3:,} patients "
        f"would succeed with probability {_pct(r.phase3_alone)}.",
    ]
    if r.p_go_and_relevant is not None:
        sentences.append(
            f"P(go and the true effect is at least the relevant effect of "
            f"{_effect(program.phase3, program.phase3.relevant_effect)}): "
            f"{_pct(r.p_go_and_relevant)}.")
    if r.replanned:
        f = plan.result
        sentences.append(f"With phase 3 fixed at {f.n3:,} patients instead: program "
                         f"probability of success {_pct(f.pos)}, expected patients "
                         f"{f.expected_patients:,.0f}"
                         + (f", expected duration {f.expected_months:.1f} months."
                            if program.has_durations else "."))
    return {"lead": lead, "tiles": tiles, "sentences": sentences,
            "caution": "These figures rest on the design prior, on the link between the "
                       "phase 2 and phase 3 effects and on the go rule; a statistician "
                       "should review all three."}


def _go_words(plan: Any, threshold: float | None = None) -> str:
    program = plan.program
    threshold = program.go_threshold if threshold is None else threshold
    if threshold is None:
        return ("phase 2 meets its success rule ("
                + wd.rule_text(program.phase2.rule, program.phase2.endpoint) + ")")
    word = "at most" if program.phase2.endpoint.better == "lower" else "at least"
    return f"the phase 2 estimate is {word} {_effect(program.phase2, threshold)}"


def _assumed(plan: Any) -> list[tuple[str, str]]:
    program = plan.program
    p2, p3 = program.phase2, program.phase3
    rows = [
        ("Phase 2", f"{wd._no_code(printable(p2.title))}: {wd.endpoint_text(p2.endpoint)}; "
                    f"{program.n2:,} patients"),
        ("Go rule", _go_words(plan)),
        ("Phase 3", f"{wd._no_code(printable(p3.title))}: {wd.endpoint_text(p3.endpoint)}; "
                    f"{program.n3:,} patients"
                    + (" (its fixed size; re-planned from the phase 2 result after a go, see "
                       "below)" if program.replan is not None else "")),
        ("Phase 3 success", wd.rule_text(p3.rule, p3.endpoint)),
        ("True effect (both trials)", "phase 3 design prior: "
                                      + wd.prior_text(program.prior, p3.endpoint)),
        ("Phase 2 effect", program.surrogate.describe()),
    ]
    held = _held_nuisance(program)
    if held:
        rows.append(("Held at planning values", held))
    if program.has_durations:
        rows.append(("Durations", _durations_text(program)))
    if program.replan is not None:
        rows.append(("Re-planning", program.replan.describe()))
    return rows


def _held_nuisance(program: Any) -> str:
    """The design files' priors on nuisance parameters, which a program does not average."""
    found = []
    for phase, design in (("phase 2", program.phase2), ("phase 3", program.phase3)):
        ep = design.endpoint
        for owner, name, words in ((design, "sigma_prior", "the outcome SD"),
                                   (ep, "control_prior", "the control rate"),
                                   (ep, "median_prior", "the control median"),
                                   (ep, "control_rate_prior", "the control event rate")):
            if getattr(owner, name, None) is not None:
                found.append(f"{words} ({phase})")
    if not found:
        return ""
    return ("the design files' priors on " + ", ".join(found) + " are not averaged over: the "
            "program's figures and its simulated check use the planning values")


def _phase_months_text(program: Any, phase: str, n: int) -> str:
    rate = getattr(program, f"recruitment_phase{phase}")
    if rate is None:
        return f"phase {phase} {getattr(program, f'months_phase{phase}'):g} months (fixed)"
    follow = getattr(program, f"follow_up_phase{phase}")
    months = float(getattr(program, f"phase{phase}_months")(n))
    return (f"phase {phase} recruits {rate:g} patients a month, then {follow:g} months of "
            f"follow-up ({months:.1f} months at {n:,} patients)")


def _durations_text(program: Any) -> str:
    return (f"{_phase_months_text(program, '2', program.n2)}; then {program.months_gap:g} "
            f"months to the start of phase 3; {_phase_months_text(program, '3', program.n3)}")


def _grid(plan: Any) -> dict[str, Any]:
    g = plan.grid
    program = plan.program
    word = "at most" if program.phase2.endpoint.better == "lower" else "at least"
    months = program.has_durations
    head = ["Phase 2 patients", "Go when", "P(go)", "P(success | go)", "Program PoS",
            "False-go rate", "Expected patients", *(["Expected months"] if months else [])]
    own = "as designed" if program.go_threshold is None else f"{program.go_threshold:g}"
    rows = []
    for i, n in enumerate(g.phase2_n.values):
        for j, rule in enumerate(g.go_rule.values):
            rule = str(rule)
            mark = int(n) == program.n2 and rule == own
            cell = {q: float(g[q].values[i, j]) for q in
                    ("p_go", "p_success_given_go", "pos", "false_go", "expected_patients",
                     "expected_months")}
            go = "phase 2 succeeds" if rule == "as designed" else \
                f"estimate {word} {_effect(program.phase2, float(rule))}"
            rows.append({"marked": mark, "cells": [
                f"{int(n):,}" + (" (planned)" if mark else ""), go, _pct(cell["p_go"]),
                _pct(cell["p_success_given_go"]),
                _pct(cell["pos"]), _pct(cell["false_go"]),
                f"{cell['expected_patients']:,.0f}",
                *([f"{cell['expected_months']:.1f}"] if months else [])]})
    return {"head": head, "rows": rows}


def _phase3_prior_cells(program: Any, means: Any, sds: Any) -> tuple[list[str], list[str]]:
    """The discounted phase 3 priors of the re-planning table, in the phase 3 units."""
    ep3 = program.phase3.endpoint
    if getattr(ep3, "ratio_scale", False):
        centre = [wd.ratio(float(ep3.from_benefit(ep3.sign * m))) for m in means]
        return centre, [f"{float(v):.3g} (log scale)" for v in sds]
    unit = wd.effect_unit(ep3)
    tail = f" {unit}" if unit else ""
    scaled = [float(wd._scaled(ep3, float(ep3.from_benefit(ep3.sign * m)))) for m in means]
    spread = [float(wd._scaled(ep3, float(v))) for v in sds]
    return ([t + tail for t in wd.numbers_alike(scaled)],
            [t + tail for t in wd.numbers_alike(spread)])


def _replan(plan: Any, figure: Any) -> dict[str, Any] | None:
    t = plan.replan
    if t is None:
        return None
    program, r = plan.program, plan.replanned
    ep2 = program.phase2.endpoint
    n3 = [int(v) for v in t["n3"]]
    keep = [k for k in range(len(n3)) if k == 0 or n3[k] != n3[k - 1]]
    estimates = wd.numbers_alike([float(wd._scaled(ep2, float(t["estimate"][k])))
                                  for k in keep])
    unit = wd.effect_unit(ep2)
    means, sds = _phase3_prior_cells(program, [float(t["prior_mean"][k]) for k in keep],
                                     [float(t["prior_sd"][k]) for k in keep])
    rows = []
    for i, k in enumerate(keep):
        last = i == len(keep) - 1
        upper = "" if last else f" to {estimates[i + 1]}"
        shown = f"{estimates[i]}{upper}" + (f" {unit}" if unit else "") + \
            (" or more" if last else "")
        rows.append({"marked": False, "cells": [
            shown, means[i], sds[i], f"{n3[k]:,}", "" if bool(t["reached"][k]) else
            f"target out of reach: capped at {program.replan.max_n:,}"]})
    table = {"head": ["Phase 2 estimate", "Phase 3 prior mean", "Phase 3 prior SD",
                      "Phase 3 patients", "Note"], "rows": rows}
    sentences = [
        "After a go, phase 3 is sized from the phase 2 estimate: "
        + program.replan.describe().split(": ", 1)[-1] + ".",
        f"Program probability of success {_pct(r.pos)} (fixed size: {_pct(plan.result.pos)});"
        f" mean phase 3 size after a go {r.expected_phase3_n:,.0f}; expected patients "
        f"{r.expected_patients:,.0f} (fixed size: {plan.result.expected_patients:,.0f}).",
        "Each row covers the phase 2 estimates from its value up to the next row's; the "
        "phase 3 prior shown is the discounted phase 2 result at the row's value, carried to "
        "the phase 3 effect."]
    if program.has_durations:
        if program.recruitment_phase3 is not None:
            sentences.append(
                f"Phase 3 lasts as long as its size needs: on average "
                f"{r.expected_phase3_months:.1f} months after a go (fixed size: "
                f"{plan.result.expected_phase3_months:.1f}); expected duration of the "
                f"program {r.expected_months:.1f} months (fixed size: "
                f"{plan.result.expected_months:.1f}).")
        else:
            sentences.append(
                f"Phase 3 is counted as {program.months_phase3:g} months whatever its "
                "re-planned size (the program file gives fixed months); give a recruitment "
                "rate (durations.phase3_recruitment) to let its duration follow its size.")
    return {"sentences": sentences, "table": table, "figure": figure}


def _simulated_how(design: Any) -> str:
    """How one phase's trials are simulated in the check, in plain words."""
    from ..endpoints.binary import BinaryEndpoint
    from ..endpoints.continuous import ContinuousEndpoint
    from ..endpoints.counts import CountEndpoint
    from ..endpoints.survival import SurvivalEndpoint

    ep = design.endpoint
    if isinstance(ep, ContinuousEndpoint):
        return ("a normal estimate" + ("" if ep.analysis == "z" else
                                       " and a sample SD (t analysis)"))
    if isinstance(ep, BinaryEndpoint):
        return ("binomial responder counts per arm, each trial decided by the success region "
                "of its own test (the same decisions as running the test on each table)")
    if isinstance(ep, SurvivalEndpoint):
        return ("patient by patient (entry, event and dropout times, censoring at the "
                "analysis), decided on the log-rank statistic")
    if isinstance(ep, CountEndpoint):
        test = ("the conditional exact test" if ep.test == "exact_conditional" else
                "the Wald test on the log rate ratio ("
                + ("Poisson" if ep.overdispersion == 0 else "negative binomial")
                + " maximum likelihood)")
        return f"patient-level event counts, decided by {test}"
    return "its endpoint's data"


def _check(plan: Any) -> dict[str, Any] | None:
    from ..program.development import CHECK_LIMIT

    rows = plan.check_rows()
    if not rows:
        return None
    out = []
    for row in rows:
        counted = row["quantity"] in ("expected_patients", "expected_months")
        show = (lambda v: f"{v:,.1f}") if counted else _pct  # noqa: E731
        se = f"{row['mcse']:,.2f}" if counted else f"{100 * row['mcse']:.2f} points"
        out.append({"marked": not row["passes"], "cells": [
            "re-planned" if row["program"] == "replanned" else "fixed",
            _NAMES[row["quantity"]], show(row["computed"]), show(row["simulated"]), se,
            f"{row['z']:.1f}", "passes" if row["passes"] else "FAILS"]})
    program = plan.program
    sentence = (f"{plan.programs:,} whole programs were simulated (seed "
                f"{_seed_text(plan.seed)}): the true effect drawn from the design prior, the "
                "phase 2 data, the go decision, the phase 3 size and data. Phase 2 data: "
                f"{_simulated_how(program.go_design())}; phase 3 data: "
                f"{_simulated_how(program.phase3)}. Control rates, control medians and "
                "outcome SDs stay at their planning values, as in the computation. Each "
                f"computed figure must lie within {CHECK_LIMIT:g} Monte Carlo standard errors "
                "of the simulated one.")
    return {"sentence": sentence, "table": {
        "head": ["Phase 3", "Figure", "Computed", "Simulated", "Monte Carlo SE",
                 "Gap (SE)", "Result"], "rows": out}}


def _no_check(plan: Any) -> str:
    if plan.check_gap:
        return ("The computed figures were not checked by simulated programs: "
                f"{plan.check_gap}.")
    return ("No programs were simulated ([check] programs = 0), so the computed figures "
            "were not checked by simulation.")


def _method(plan: Any) -> list[str]:
    return [
        "Both trials see the same true effect, drawn once from the phase 3 design prior; "
        "given it, the two trials use different patients and are independent, so the "
        "program's probability of success is the prior average of P(go | effect) times "
        "P(phase 3 success | effect).",
        "P(go | effect) and P(phase 3 success | effect) come from each design's own power "
        "calculation (exact tests and t analyses included); the average over the prior uses "
        "Gauss-Legendre panels between the prior's quantiles, split at no effect and at the "
        "relevant effect, with point masses taken exactly; a surrogate's noise is averaged "
        "by Gauss-Hermite nodes.",
        "The drug 'works' when its true effect is better than no effect; the false-go rate is "
        "the chance of a go when it is not.",
        "Expected patients: phase 2 plus phase 3 when there is a go; expected duration: phase "
        "2, plus the gap and phase 3 when there is a go. A phase given a recruitment rate "
        "lasts its size divided by that rate plus its follow-up, so its months follow its "
        "size; a phase given fixed months lasts them whatever its size.",
        "Re-planning (when asked) turns the phase 2 estimate into a phase 3 design prior "
        "with discounts for optimism (Kirby et al. 2012, Pharmaceutical Statistics "
        "11:373-385) and gives phase 3 the smallest size reaching the assurance target "
        "(O'Hagan, Stevens & Campbell 2005, Pharmaceutical Statistics 4:187-201).",
    ]


def _provenance(plan: Any, date: str) -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = []
    if plan.source is not None:
        rows.append(("Program file", str(plan.source.path)))
        rows.append(("SHA-256 of the program file",
                     hashlib.sha256(plan.source.content).hexdigest()))
    else:
        rows.append(("Program file", "none (the program was made in Python)"))
    for label, src in zip(("Phase 2 design file", "Phase 3 design file"),
                          plan.design_sources, strict=False):
        rows.append((label, str(src.path)))
        rows.append((f"SHA-256 of the {label.lower()}", hashlib.sha256(src.content).hexdigest()))
    rows.append(("Command (made by)", str(plan.made_by or "not recorded")))
    rows.append(("Computed (UTC)", str(plan.created or "not recorded")))
    rows.append(("Memo written", date))
    rows.append(("Seed", _seed_text(plan.seed)))
    rows.append(("Programs simulated", f"{plan.programs:,}" if plan.programs else "none"))
    return rows


def program_memo_html(
    plan: Any,
    *,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    cautions: Sequence[str] = PROGRAM_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
) -> str:
    """The decision memo of a development program, as one HTML string.

    In order: the decision box (program probability of success, P(go), P(phase 3 success |
    go), P(go and the drug works), false-go rate, expected patients and duration, the
    simulated check), what was assumed, the chances by true effect, the grid over the phase
    2 size and go rule, phase 3 re-planned, the check table, method, provenance, cautions.

    Parameters
    ----------
    plan
        A :class:`~assurance.ProgramPlan`.
    figures
        Embed the figures (PNG data inside the file).
    rendered
        PNG bytes of figures already drawn (``"by_effect"``, ``"grid"``, ``"replan"``).
    cautions, versions, date
        As for the trial memo.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.program.development import ProgramDesign
    >>> from assurance.program_plan import program_plan  # the layer above, for the example
    >>> ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    >>> p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    >>> plan = program_plan(ProgramDesign(p3, p3, n2=100, n3=400), programs=0)
    >>> page = program_memo_html(plan, figures=False, date="2026-01-01", versions="-")
    >>> page.startswith("<!DOCTYPE html>"), "ICH E9" in page, "<script" in page
    (True, True, False)
    """
    if not hasattr(plan, "program") or not hasattr(plan, "grid"):
        raise AssuranceInputError(
            "The 'plan' parameter of program_memo_html must be a ProgramPlan. Got "
            f"{type(plan).__name__} instead.")
    if isinstance(cautions, str):
        cautions = [cautions]
    versions = _versions_text() if versions is None else str(versions)
    effect_fig = grid_fig = replan_fig = None
    if figures:
        from .program_figures import program_figure_makers

        makers = program_figure_makers(plan)
        effect_fig = _figure(
            "by_effect", rendered, lambda: makers["by_effect"]().axes[0],
            "Chance of a go, of phase 3 success and of both, by true effect",
            "Blue: the chance of a go after phase 2; green (dashed): phase 3 alone; "
            "vermillion: a go followed by phase 3 success. Grey: the design prior.")
        grid_fig = _figure(
            "grid", rendered, lambda: makers["grid"]().axes[0],
            "Program probability of success, expected patients and false-go rate by phase 2 "
            "size", "One line per go rule; the dotted line marks the planned phase 2 size.")
        if "replan" in makers:
            replan_fig = _figure(
                "replan", rendered, lambda: makers["replan"]().axes[0],
                "Re-planned phase 3 size by observed phase 2 estimate",
                "The phase 3 size after a go, as a step function of the phase 2 estimate.")
    date_text = _date_text(date)
    record = None if plan.source is None else plan.source.text()
    word = "at most" if plan.program.phase2.endpoint.better == "lower" else "at least"
    context = {
        "title": printable(str(plan.title)),
        "date": date_text,
        "package": _package_version(),
        "decision": _decision(plan),
        "assumed": _assumed(plan),
        "effect_figure": effect_fig,
        "grid_note": "How the program moves with the size of phase 2 and with a go threshold "
                     f"(go when the phase 2 estimate is {word} the value shown).",
        "grid": _grid(plan),
        "grid_figure": grid_fig,
        "replan": _replan(plan, replan_fig),
        "check": _check(plan),
        "no_check": _no_check(plan),
        "method": _method(plan),
        "provenance": _provenance(plan, date_text),
        "versions": versions,
        "recorded": record,
        "cautions": [str(c) for c in cautions],
    }
    return _template("program_memo.html").render(**context)


def _package_version() -> str:
    from .. import __version__

    return str(__version__)


def write_program_memo(
    plan: Any,
    path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    rendered: Mapping[str, bytes] | None = None,
    figures: bool = True,
    versions: str | None = None,
    date: _dt.date | str | None = None,
) -> Path:
    """Write :func:`program_memo_html` of ``plan`` to ``path`` atomically (never over an
    existing file unless ``overwrite``)."""
    target = check_target(path, "write_program_memo", overwrite)
    page = program_memo_html(plan, figures=figures, rendered=rendered, versions=versions,
                             date=date)
    return write_atomic(target, page.encode("utf-8"), overwrite=overwrite,
                        owner="write_program_memo")
