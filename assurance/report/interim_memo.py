"""The self-contained HTML memo of an interim look.

Same look and rules as the trial memo (:mod:`.memo`): one file, styles inline, figures as
embedded PNG data, no scripts; the shared macros of ``templates/_parts.html`` (decision box,
fact tables, the table of rows, provenance, cautions). It leads with the numbers a data
monitoring discussion needs: the predictive probability of success, the conditional powers,
and where the boundaries stand against the interim estimate. The plan is read duck-typed
(``look``, ``title``, ``source``, ``design_source``, ``made_by``, ``created``): this layer
never imports the plan objects above it.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from . import wording as wd
from ._files import printable, write_atomic
from .memo import DEFAULT_CAUTIONS, _date_text, _figure, _template, _versions_text

__all__ = ["interim_memo_html", "write_interim_memo", "INTERIM_CAUTIONS"]

#: Cautions an interim memo adds to :data:`~assurance.report.memo.DEFAULT_CAUTIONS`.
INTERIM_CAUTIONS: tuple[str, ...] = (
    "An interim decision weighs more than the chance of success: safety, the quality and "
    "completeness of the interim data, and what is known from outside the trial. It belongs "
    "to the independent data monitoring committee and the process written in the protocol.",
    "Stopping for efficacy at an interim spends type I error: the probability of success "
    "at no effect in the table is the two-stage trial's type I error, which may exceed the "
    "final rule's level. Boundaries meant to be binding must be fixed in the protocol before "
    "the data are seen.",
    "The figures use the normal approximation of the estimate and assume the rest of the "
    "trial runs as planned (the same patients, the same analysis, the planned size).",
)

_PRIOR_WORDS = {"analysis": "analysis prior", "design": "design prior"}


def _p(value: float) -> str:
    return wd.percent(value, 0)


def _p1(value: float) -> str:
    return wd.percent(value, 1)


def _prior_word(look: Any, which: str) -> str:
    if which == "analysis" and look.design.analysis_prior is None:
        return "flat analysis prior"
    return _PRIOR_WORDS[which]


def _effect(look: Any, value: float | None) -> str:
    if value is None:
        return "none"
    return wd.effect_text(look.design.endpoint, value)


def _better(look: Any) -> tuple[str, str]:
    """Words for 'better' and 'worse' estimates on the natural scale."""
    ep = look.design.endpoint
    if ep.better == "lower":
        return "below", "above"
    return "above", "below"


def _decision(look: Any) -> dict[str, Any]:
    chosen = look.prediction_prior
    other = "design" if chosen == "analysis" else "analysis"
    better, worse = _better(look)
    ep = look.design.endpoint
    verdict = {"continue": "Continue: the predictive probability lies between the "
                           "boundaries.",
               "stop for futility": "Stop for futility: the predictive probability is below "
                                    "the futility boundary.",
               "stop for efficacy": "Stop for efficacy: the predictive probability is above "
                                    "the efficacy boundary."}[look.decision]
    lead = [("verdict", verdict)]
    tiles = [
        {"label": "Predictive probability of success", "key": "predictive", "lead": True,
         "value": _p(look.predictive[chosen]),
         "note": f"under the posterior from the {_prior_word(look, chosen)} (the boundaries "
                 "use it)"},
        {"label": "Predictive probability, other prior", "key": "predictive_other",
         "value": _p(look.predictive[other]),
         "note": f"under the posterior from the {_prior_word(look, other)}"},
    ]
    if look.exact is not None:
        tiles.append(
            {"label": "Predictive probability, exact from counts", "key": "predictive_exact",
             "value": _p(look.exact.probability),
             "note": f"beta-binomial: {look.exact.remaining[0] + look.exact.remaining[1]} "
                     f"patients still to come, {look.exact.prior_words}"})
    tiles += [
        {"label": "Conditional power, assumed effect", "key": "cp_assumed",
         "value": _p(look.conditional["assumed"]),
         "note": f"if the rest of the trial sees {_effect(look, look.design.assumed_effect)}"},
        {"label": "Conditional power, current trend", "key": "cp_trend",
         "value": _p(look.conditional["trend"]),
         "note": f"if it sees the interim estimate {_effect(look, look.data.estimate)}"},
        {"label": "Where the boundaries stand", "key": "decision",
         "value": look.decision, "failed": look.decision == "stop for futility",
         "note": f"futility below {_p1(look.futility)}, efficacy above {_p1(look.efficacy)}"},
    ]
    sentences = [
        f"The interim estimate is {_effect(look, look.data.estimate)} with "
        f"{100 * look.fraction:.0f}% of the final analysis's information. The final analysis "
        f"succeeds if its estimate is {better} {_effect(look, look.natural(look.threshold))}."
    ]
    cuts = []
    if look.futility_cut is not None:
        cuts.append(f"an interim estimate {worse} "
                    f"{_effect(look, look.natural(look.futility_cut))} stops for futility")
    if look.efficacy_cut is not None:
        cuts.append(f"one {better} {_effect(look, look.natural(look.efficacy_cut))} stops for "
                    "efficacy")
    if cuts:
        sentences.append("On the estimate's scale, " + "; ".join(cuts) + ".")
    sentences.append(
        f"Conditional power at no effect is {_p1(look.conditional['none'])}: the chance of "
        "a final success if the treatment does nothing from here on.")
    caution = ("Predictive probability averages over what is still uncertain about the "
               "effect; conditional power fixes the effect. Both rest on the assumptions in "
               "the method section, and the decision rests with the data monitoring "
               "committee.")
    if ep.ratio_scale:
        caution += " Ratios are read on the log scale."
    return {"lead": lead, "tiles": tiles, "sentences": sentences, "caution": caution}


def _found(look: Any, plan: Any) -> list[tuple[str, str]]:
    ep = look.design.endpoint
    design = look.design

    z = 1.959963984540054
    lo, hi = look.estimate - z * look.interim_se, look.estimate + z * look.interim_se
    a, b = sorted((look.natural(lo), look.natural(hi)))
    rows = [
        ("Interim data", look.data.description),
        ("Interim estimate", f"{_effect(look, look.data.estimate)} (95% interval "
                             f"{_effect(look, a)} to {_effect(look, b)}; standard error "
                             f"{wd.number(look.interim_se)}"
                             f"{' on the log scale' if ep.ratio_scale else ''})"),
        ("Information fraction", f"{100 * look.fraction:.1f}% of the final analysis's "
                                 "information"),
    ]
    if math.isfinite(look.planned_size):
        rows.append(("Final analysis as planned",
                     f"{wd.number(look.planned_size)} {look.size_unit}; standard error "
                     f"{wd.number(look.final_se)}"))
    else:
        rows.append(("Final analysis as planned",
                     f"standard error {wd.number(look.final_se)} (as given)"))
    rows += [
        ("Outcome", wd.endpoint_text(ep)),
        ("Success at the final analysis", wd.rule_text(design.rule, ep)),
        ("Design prior", wd.prior_text(design.design_prior, ep)),
        ("Analysis prior", "flat (none given)" if design.analysis_prior is None
         else wd.prior_text(design.analysis_prior, ep)),
    ]
    for which in ("analysis", "design"):
        post = look.posterior[which]
        rows.append((f"Posterior from the {_prior_word(look, which)}",
                     f"centre {_effect(look, look.natural(post['mean']))}, probability of "
                     f"benefit {_p1(post['prob_benefit'])}"))
    return rows


def _operating(look: Any) -> dict[str, Any]:
    head = ["Truth", "P(stop for futility)", "P(stop for efficacy)", "P(success)",
            "P(success) without the look", f"Expected {look.size_unit}"]
    rows = []
    for r in look.operating:
        name = r.name if r.effect is None else f"{r.name} ({_effect(look, r.effect)})"
        size = wd.number(r.expected_size) if r.expected_size == r.expected_size else \
            f"{100 * r.expected_fraction:.0f}% of planned"
        rows.append({"marked": r.name == "design prior",
                     "cells": [name, _p1(r.p_futility), _p1(r.p_efficacy), _p1(r.p_success),
                               _p1(r.p_success_no_look), size]})
    return {"head": head, "rows": rows}


def _boundary_text(look: Any) -> str:
    chosen = _prior_word(look, look.prediction_prior)
    return (f"Stop for futility when the predictive probability (posterior from the "
            f"{chosen}) is below {_p1(look.futility)}, for efficacy when it is above "
            f"{_p1(look.efficacy)}, at this interim's information fraction "
            f"({100 * look.fraction:.0f}%). Before any interim data, these boundaries would "
            "give the following chances; a stop for efficacy counts as a success.")


def _method(look: Any) -> list[str]:
    return [
        "The estimate is treated as normal with information one over its squared standard "
        "error; the final estimate pools the interim data with the data still to come, so "
        "given the interim estimate and a true effect it is normal with mean t times the "
        "interim estimate plus (1 - t) times the effect and variance (1 - t) times the final "
        "squared standard error, t being the information fraction (Lan & Wittes 1988).",
        "Conditional power fixes the true effect for the rest of the trial (the assumed "
        "effect, the interim estimate, or no effect). The predictive probability averages "
        "it over the posterior of the effect given the interim estimate (Spiegelhalter, "
        "Freedman & Blackburn 1986): in closed form for normal priors, normal and point-mass "
        "parts of a mixture re-weighted by their marginal likelihood, other families on a "
        "grid.",
        "The analysis prior is the prior the final analysis will use (flat when the design "
        "has none); the design prior is what the planners believe. The boundaries use the "
        f"{_prior_word(look, look.prediction_prior)}; both predictive probabilities are "
        "shown.",
        "Each boundary is a cut on the interim estimate (the predictive probability rises "
        "with it), found by bisection. Its operating characteristics come in closed form "
        "from the bivariate normal law of the interim and final estimates (Owen's T "
        "function), at fixed effects and averaged over the design prior. Expected sizes "
        "assume patients (or events) accrue in proportion to information.",
    ]


def _provenance(plan: Any, versions: str, date: str) -> dict[str, Any]:
    rows: list[tuple[str, str]] = []
    for label, source in (("Interim file", plan.source), ("Design file", plan.design_source)):
        if source is None:
            rows.append((label, "none (the look was made in Python)"))
        else:
            rows.append((label, str(source.path)))
            rows.append((f"SHA-256 of the {label.lower()}",
                         hashlib.sha256(source.content).hexdigest()))
    rows.append(("Made by", plan.made_by or "not recorded"))
    rows.append(("Computed (UTC)", plan.created or "not recorded"))
    rows.append(("Memo written", date))
    rows.append(("Method", "normal approximation; closed forms (no Monte Carlo, no seed)"))
    return {"rows": rows, "versions": versions}


def interim_memo_html(plan: Any, *, rendered: Mapping[str, bytes] | None = None,
                      figures: bool = True,
                      cautions: Sequence[str] = DEFAULT_CAUTIONS + INTERIM_CAUTIONS,
                      versions: str | None = None,
                      date: _dt.date | str | None = None) -> str:
    """The interim memo of ``plan`` as one HTML page.

    Parameters
    ----------
    plan
        An :class:`~assurance.InterimPlan` (anything with its ``look``, ``title``,
        ``source``, ``design_source``, ``made_by`` and ``created``).
    rendered
        PNG bytes of the figures by name (``interim_predictive``, ``interim_operating``);
        drawn here when missing.
    figures
        Whether to include the figures.
    cautions, versions, date
        The cautions listed, the versions text (default: this installation's) and the date
        shown.

    Returns
    -------
    str

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> from assurance.interim_plan import interim_look
    >>> from assurance.program.interim import InterimData
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    >>> page = interim_memo_html(interim_look(d, InterimData(3.0, standard_error=2.0),
    ...                                       planned_total=200), figures=False, versions="-")
    >>> 'data-key="predictive">56%' in page
    True
    """
    from .interim_figures import plot_interim_operating, plot_interim_predictive

    look = plan.look
    versions = _versions_text() if versions is None else str(versions)
    predictive = operating = None
    if figures:
        predictive = _figure(
            "interim_predictive", rendered, lambda: plot_interim_predictive(look),
            "Predictive probability of final success against the interim estimate",
            "The chance of success at the final analysis for each interim estimate the "
            "trial could have seen, with the boundaries and the estimate it did see.")
        operating = _figure(
            "interim_operating", rendered, lambda: plot_interim_operating(look),
            "Operating characteristics of the boundaries by true effect",
            "Chances of stopping at this interim and of final success, by true effect, "
            "before the interim data are seen; the dashed line is the trial without the "
            "look.")
    recorded = plan.source.text() if plan.source is not None else None
    context = {
        "title": printable(str(plan.title)),
        "date": _date_text(date),
        "package": _package_version(),
        "decision": _decision(look),
        "found": _found(look, plan),
        "predictive_figure": predictive,
        "boundary_text": _boundary_text(look),
        "operating": _operating(look),
        "operating_note": "The highlighted row averages over the design prior. P(success) "
                          "counts a stop for efficacy as a success; at no effect it is the "
                          "two-stage trial's type I error.",
        "operating_figure": operating,
        "notes": list(look.notes),
        "method": _method(look),
        "provenance": _provenance(plan, versions, _date_text(date)),
        "versions": versions,
        "recorded": recorded,
        "cautions": [str(c) for c in cautions],
    }
    return _template("interim_memo.html").render(**context)


def _package_version() -> str:
    from .. import __version__

    return str(__version__)


def write_interim_memo(plan: Any, path: str | os.PathLike[str], *, overwrite: bool = False,
                       rendered: Mapping[str, bytes] | None = None, figures: bool = True,
                       cautions: Sequence[str] = DEFAULT_CAUTIONS + INTERIM_CAUTIONS,
                       versions: str | None = None,
                       date: _dt.date | str | None = None) -> Path:
    """Write :func:`interim_memo_html` to ``path``, atomically, never over an existing file
    unless ``overwrite`` is True."""
    page = interim_memo_html(plan, rendered=rendered, figures=figures, cautions=cautions,
                             versions=versions, date=date)
    return write_atomic(Path(path), page.encode("utf-8"), overwrite=overwrite,
                        owner="write_interim_memo")
