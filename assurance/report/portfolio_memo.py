"""The self-contained HTML memo of a portfolio (:class:`assurance.PortfolioPlan`).

Same look and rules as the trial memo (:mod:`.memo`): one file, the shared stylesheet and
macros (``templates/_style.css``, ``templates/_parts.html``), figures embedded as PNG data,
no scripts; one jinja2 template (``templates/portfolio_memo.html``) with autoescaping, so
the user's text (titles, trial names, file paths) is escaped. The memo reads the plan and
computes nothing new.
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
from .memo import DEFAULT_CAUTIONS, _date_text, _figure, _template, _versions_text

__all__ = ["portfolio_memo_html", "write_portfolio_memo", "PORTFOLIO_CAUTIONS"]

#: the cautions of a portfolio memo, after the trial memo's
PORTFOLIO_CAUTIONS: tuple[str, ...] = (
    "The trials are treated as independent given their design priors. Trials of the same "
    "drug, or of drugs acting the same way, share the truth about it: their results tend to "
    "succeed or fail together, and the real spread of the number of successes is then wider "
    "than shown here (the expected number is the same).",
    "The expected net value is a planning aid. The value of a success, the costs, the time to "
    "readout and the discount rate are the user's inputs, not the package's; the size worth "
    "paying for moves with them.",
)

_EXACT = "exact (quadrature)"


def _check_plan(plan: Any, owner: str) -> None:
    if not hasattr(plan, "trials") or not hasattr(plan, "results") or \
            not getattr(plan, "trials", None) or "prob_successes" not in plan.results:
        raise AssuranceInputError(
            f"The 'plan' parameter of {owner} must be a PortfolioPlan. Got "
            f"{type(plan).__name__} instead.")


def _money(value: float | None, unit: str | None) -> str:
    if value is None:
        return "not on the curve"
    text = f"{value:,.1f}"
    if text in ("-0.0", "0.0") and value != 0:
        text = f"{value:,.3g}"
    return text.replace("-", "\u2212") + (f" {unit}" if unit else "")


def _decision(plan: Any) -> dict[str, Any]:
    trials = plan.trials
    k = len(trials)
    q = plan.distribution
    ds = plan.results
    expected = plan.expected_successes
    exact = plan.exact
    mode = int(q.argmax())
    expected_note = "the sum of the trials' probabilities of success"
    if not exact:
        se = float(ds["expected_successes_mcse"])
        expected_note += f"; \u00b1 {2 * se:.2f} (2 Monte Carlo SE)"
    tiles = [
        {"key": "expected", "label": "Expected number of successes", "lead": True,
         "value": f"{expected:.1f} of {k}", "note": expected_note},
        {"key": "at_least_one", "label": "At least one succeeds",
         "value": wd.percent(1 - float(q[0])), "note": f"none succeeds: {wd.percent(q[0])}"},
        {"key": "all", "label": f"All {k} succeed", "value": wd.percent(float(q[-1])),
         "note": "every trial at its counted size"},
        {"key": "most_likely", "label": "Most likely number",
         "value": f"{mode}", "note": f"probability {wd.percent(float(q[mode]))}"},
    ]
    valued = [t for t in trials if t.best is not None]
    unit = plan.settings.value_unit
    if valued:
        total = sum(t.net_value_at(t.n) or 0.0 for t in valued)
        tiles.append({"key": "net_value", "label": "Expected net value",
                      "value": _money(total, None),
                      "note": f"{unit + ', ' if unit else ''}{len(valued)} trial"
                              f"{'s' if len(valued) != 1 else ''} with value inputs, at the "
                              "sizes counted"})
    sentences = [
        f"{k} trial{'s' if k != 1 else ''}, each at the size counted below. The number of "
        "successes follows the exact Poisson-binomial distribution of their probabilities of "
        "success, treating the trials as independent given their design priors."]
    if not exact:
        sims = ", ".join(t.name for t in trials if not t.exact)
        sentences.append(
            f"The probabilities of success of {sims} are Monte Carlo estimates; the "
            "distribution of the number of successes is computed from these estimates and "
            "shares their Monte Carlo error.")
    lead = []
    for t in valued:
        if not t.best.worth_paying:
            lead.append(("no-value", f"{t.name}: no size on the curve has a positive expected "
                                     "net value with the inputs given."))
    return {"lead": lead, "tiles": tiles, "sentences": sentences,
            "caution": "These figures rest on each trial's design prior and on the user's "
                       "value inputs; a statistician should review the designs."}


def _trials_table(plan: Any) -> list[dict[str, Any]]:
    rows = []
    for t in plan.trials:
        lo, hi = t.interval
        note = []
        if hasattr(t.plan, "headline"):
            note.append("a development program: it succeeds when phase 3 succeeds after a go; "
                        "the patients are the expected number over both phases")
        reason = str(getattr(t.plan, "planned_reason", "") or "")
        if t.n == getattr(t.plan, "planned_n", None) and reason:
            note.append(f"planned size ({reason})")
        if t.n_target is not None and t.n_target != t.n:
            note.append(f"assurance {wd.percent(t.target)} first reached at {t.n_target:,}")
        elif t.n_target is None and t.target is not None:
            note.append(f"assurance target {wd.percent(t.target)} not reached")
        rows.append({
            "name": t.name, "endpoint": t.endpoint, "n": f"{t.n:,}",
            "pos": wd.percent(t.pos, 1),
            "interval": _EXACT if t.exact else
            f"{wd.percent(lo, 1)} to {wd.percent(hi, 1)} (\u00b1 2 MC SE)",
            "note": "; ".join(note)})
    return rows


def _successes_table(plan: Any) -> list[dict[str, str]]:
    q = plan.distribution
    at_least = plan.results["prob_at_least"].values
    return [{"k": str(j), "exactly": wd.percent(float(q[j]), 1),
             "at_least": wd.percent(float(at_least[j]), 1)} for j in range(q.size)]


def _value_table(plan: Any) -> list[dict[str, str]]:
    rows = []
    for t in plan.trials:
        if t.best is None:
            continue
        v, b = t.values, t.best
        notes = []
        if b.at_edge:
            notes.append(f"best at the {b.at_edge} size of the curve: the true best may lie "
                         "beyond it")
        if not b.worth_paying:
            notes.append("no size pays for itself with these inputs")
        if not t.exact:
            notes.append("curve simulated: the best size carries Monte Carlo error")
        target = "no target" if t.n_target is None else \
            f"{t.n_target:,}: {_money(t.net_value_at(t.n_target), None)}"
        rows.append({
            "name": t.name,
            "value": f"{wd.number(v.value_of_success)} \u00d7 {v.discount_factor:.3f}",
            "costs": f"{wd.number(v.cost_per_patient)} per patient, "
                     f"{wd.number(v.fixed_cost)} fixed",
            "best": f"{b.n_best:,}", "best_value": _money(b.value_best, None),
            "flat": f"{b.n_low:,} to {b.n_high:,}",
            "counted": f"{t.n:,}: {_money(t.net_value_at(t.n), None)}",
            "target": target, "note": "; ".join(notes)})
    return rows


def _best_text(best: Any) -> str:
    text = f"{best.n_best:,}"
    if best.at_edge:
        text += f" (the {best.at_edge} size on the curve)"
    if not best.worth_paying:
        text += " (no size pays for itself)"
    return text


def _sensitivity_table(plan: Any) -> dict[str, Any] | None:
    multipliers = plan.settings.value_multipliers
    valued = [t for t in plan.trials if t.best is not None]
    if not valued or not multipliers:
        return None
    head = ["Trial", "Best size as given",
            *[f"Value \u00d7 {m:g}" for m in multipliers]]
    rows = [[t.name, _best_text(t.best), *[_best_text(u) for u in t.under]] for t in valued]
    return {"head": head, "rows": rows}


def _method(plan: Any) -> list[str]:
    share = plan.settings.flat_share
    out = [
        "Probability of success: each trial's assurance (the probability that the trial "
        "meets its success rule, averaged over its design prior) at the size counted, from "
        "the trial's own design file. Closed-form and quadrature results are exact; the "
        "others are Monte Carlo estimates shown with two Monte Carlo standard errors.",
        "Number of successes: the Poisson-binomial distribution of the probabilities of "
        "success, computed exactly by adding one trial at a time (each step mixes the "
        "distribution so far with itself shifted by one). This treats the trials as "
        "independent given their design priors.",
        "Expected net value of a trial of n patients: V \u00d7 (1 + r)^\u2212t \u00d7 "
        "P(n) \u2212 c \u00d7 n \u2212 F, where V is the value of a success at readout, r "
        "the annual discount rate, t the years to readout, P(n) the probability of success "
        "at n patients, c the cost per patient and F the fixed cost. Costs are counted at "
        "face value.",
        f"The size worth paying for is the size with the highest expected net value on a "
        f"fine grid of sizes (about 200 per trial); the flat range is the unbroken run of "
        f"sizes around it whose expected net value is within {share:.0%} of the best. A "
        "flat optimum means the choice between those sizes can rest on other grounds.",
    ]
    if plan.settings.scheduler:
        out.append("The curves over sizes were computed as one task per trial on "
                   f"{printable(str(plan.settings.scheduler))}.")
    return out


def _provenance(plan: Any, date: str) -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = []
    source = getattr(plan, "source", None)
    if source is not None:
        rows.append(("Portfolio file", str(source.path)))
        rows.append(("SHA-256 of the portfolio file",
                     hashlib.sha256(source.content).hexdigest()))
    else:
        rows.append(("Portfolio file", "none (the portfolio was made in Python)"))
    for t in plan.trials:
        program = hasattr(t.plan, "design_sources")
        sources = [getattr(t.plan, "source", None), *getattr(t.plan, "design_sources", ())]
        sources = [src for src in sources if src is not None]
        if not sources:
            rows.append((f"Design file of {t.name}", "none (made in Python)"))
        for j, src in enumerate(sources):
            what = ("Program file" if j == 0 else "Design file in the program") if program \
                else "Design file"
            rows.append((f"{what} of {t.name}", f"{src.path} (SHA-256 "
                         f"{hashlib.sha256(src.content).hexdigest()})"))
    rows.append(("Command (made by)", str(getattr(plan, "made_by", "") or "not recorded")))
    rows.append(("Computed (UTC)", str(getattr(plan, "created", "") or "not recorded")))
    rows.append(("Memo written", date))
    return rows


def portfolio_memo_html(
    plan: Any,
    *,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    cautions: Sequence[str] = DEFAULT_CAUTIONS + PORTFOLIO_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
) -> str:
    """The portfolio memo as one HTML string.

    In order: the decision box (expected number of successes, the chance that at least one
    and that all succeed, the most likely number, the expected net value with value
    inputs), the trials' probabilities of success, the portfolio figure, the distribution of
    the number of successes, the size worth paying for (with value inputs), the method,
    provenance (every input file with its SHA-256) and cautions.

    Parameters
    ----------
    plan
        A :class:`~assurance.PortfolioPlan`.
    figures
        Embed the figures (as PNG data inside the file).
    rendered
        PNG bytes of figures already drawn, by name; the others are drawn here.
    cautions, versions, date
        As for :func:`assurance.report.plan_memo_html`.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.portfolio_plan import plan_portfolio
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0), title="A")
    >>> page = portfolio_memo_html(plan_portfolio([d], sizes=[200]), figures=False,
    ...                            versions="-", date="2026-01-01")
    >>> "exact (quadrature)" in page, "<script" in page, "ICH E9" in page
    (True, False, True)
    """
    from .portfolio_figures import portfolio_figure_makers

    _check_plan(plan, "portfolio_memo_html")
    cautions = [str(c) for c in ([cautions] if isinstance(cautions, str) else cautions)]
    versions = _versions_text() if versions is None else str(versions)
    date_text = _date_text(date)
    shown: dict[str, Any] = {"portfolio": None, "success_curves": None, "net_value": None}
    if figures:
        makers = portfolio_figure_makers(plan)
        words = {
            "portfolio": ("Probability of success per trial and number of successes",
                          "Left: each trial's probability of success at the size counted "
                          "(bars with a black interval were simulated: two Monte Carlo "
                          "standard errors). Right: the probability of each number of "
                          "successes, trials independent given their priors; the dashed "
                          "line is the expected number."),
            "success_curves": ("Probability of success by size, every trial",
                               "Each trial's probability of success against its total size; "
                               "the dot is the size counted, the ring the size first reaching "
                               "the trial's assurance target."),
            "net_value": ("Expected net value by size",
                          "Expected net value against the total size, from the user's value "
                          "inputs. The large dot is the best size, the shaded band the sizes "
                          f"within {plan.settings.flat_share:.0%} of the best, the square "
                          "the size counted and the dashed line the size reaching the "
                          "assurance target."),
        }
        for name, make in makers.items():
            alt, caption = words[name]
            shown[name] = _figure(name, rendered, lambda make=make: make().axes[0], alt,
                                  caption)
    source = getattr(plan, "source", None)
    recorded = None if source is None else source.content.decode("utf-8", "replace")
    from .. import __version__

    context = {
        "title": printable(str(plan.title)),
        "date": date_text,
        "package": str(__version__),
        "decision": _decision(plan),
        "trials": _trials_table(plan),
        "all_exact": plan.exact,
        "portfolio_figure": shown["portfolio"],
        "successes": _successes_table(plan),
        "curves_figure": shown["success_curves"],
        "value_rows": _value_table(plan),
        "value_unit": plan.settings.value_unit or "",
        "flat_share": f"{plan.settings.flat_share:.0%}",
        "value_figure": shown["net_value"],
        "sensitivity": _sensitivity_table(plan),
        "method": _method(plan),
        "provenance": _provenance(plan, date_text),
        "versions": versions,
        "recorded": recorded,
        "cautions": cautions,
    }
    return _template("portfolio_memo.html").render(**context)


def write_portfolio_memo(
    plan: Any,
    path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    rendered: Mapping[str, bytes] | None = None,
    figures: bool = True,
    versions: str | None = None,
    date: _dt.date | str | None = None,
) -> Path:
    """Write :func:`portfolio_memo_html` of ``plan`` to ``path``, atomically, never
    replacing an existing file unless ``overwrite`` is True.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> import assurance as asr
    >>> from assurance.portfolio_plan import plan_portfolio
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0), title="A")
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = write_portfolio_memo(plan_portfolio([d], sizes=[200]),
    ...                                 pathlib.Path(folder) / "memo.html", figures=False,
    ...                                 versions="-")
    ...     print(path.name)
    memo.html
    """
    target = check_target(path, "write_portfolio_memo", overwrite)
    page = portfolio_memo_html(plan, figures=figures, rendered=rendered, versions=versions,
                               date=date)
    return write_atomic(target, page.encode("utf-8"), overwrite=overwrite,
                        owner="write_portfolio_memo")
