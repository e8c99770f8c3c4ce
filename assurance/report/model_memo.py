"""The self-contained HTML decision memo for a plan made with a general analysis model.

Same look and rules as the trial memo (:mod:`.memo`): one file, styles inline, figures as
embedded PNG data, no scripts; one jinja2 template (``templates/model_memo.html``) with
autoescaping, so text from the user (title, model name, design file path) is escaped and its
control characters shown as escapes. Numbers reach the page through :mod:`.wording`;
quantities that were not simulated read "not simulated", never as a missing number.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np

from ..errors import AssuranceInputError
from . import wording as wd
from ._files import check_target, printable, write_atomic
from .memo import (
    DEFAULT_CAUTIONS,
    _date_text,
    _figure,
    _nearest,
    _seed_text,
    _template,
    _versions_text,
)

__all__ = ["model_memo_html", "write_model_memo"]

#: the NUTS check fails when the paired difference exceeds this many Monte Carlo SE
#: (the engine's limit)
AGREEMENT_LIMIT = 3.0

_QUANTITY = {"assurance": "probability of success (assurance)", "power": "classical power"}
_NOT_SIMULATED = "not simulated"


# ------------------------------------------------------------------------------------------
# small helpers
# ------------------------------------------------------------------------------------------
def _setting(settings: Any, name: str, default: Any = None) -> Any:
    if settings is None:
        return default
    if isinstance(settings, Mapping):
        return settings.get(name, default)
    return getattr(settings, name, default)


def _finite(value: Any) -> bool:
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def _at(ds: Any, name: str, j: int) -> float:
    return float(ds[name].values[j]) if name in ds else math.nan


def _pct_se(value: float, se: float, times: float = 1.0) -> str:
    """``72.4% ± 2.8`` (``times`` MC SE in percentage points), or 'not simulated'."""
    if not _finite(value):
        return _NOT_SIMULATED
    text = wd.percent(value, 1)
    if _finite(se):
        spread = 100 * times * se
        text += " \u00b1 <0.1" if spread < 0.05 else f" \u00b1 {spread:.1f}"
    return text


def _effect_words(model: Any, unit: str | None) -> SimpleNamespace:
    """A stand-in endpoint so :mod:`.wording` describes the effect on its natural scale:
    log ratios as ratios, differences with the outcome's unit."""
    scale = str(getattr(model, "effect_scale", "") or "")
    low = scale.lower()
    if low.startswith("log ") and "ratio" in low:
        return SimpleNamespace(ratio_scale=True, effect_name=scale[4:], unit=None,
                               to_dict=lambda: {"kind": "general"})
    return SimpleNamespace(ratio_scale=False, effect_name="effect",
                           unit=unit if "ratio" not in low else None,
                           to_dict=lambda: {"kind": "general"})


_PLAIN = SimpleNamespace(ratio_scale=False, effect_name="value", unit=None,
                         to_dict=lambda: {"kind": "general"})


def _prior_words(prior: Any, endpoint: Any) -> str:
    try:
        return wd.prior_text(prior, endpoint)
    except Exception:  # a family wording does not know: its own description, no code
        describe = getattr(prior, "describe", None)
        return wd._no_code(str(describe())) if callable(describe) else "as given in the design"


def _name(key: str) -> str:
    return str(key).replace("_", " ")


# ------------------------------------------------------------------------------------------
# sections
# ------------------------------------------------------------------------------------------
def _agreement(ds: Any) -> dict[str, Any]:
    """The fast-fit check: NUTS against the Laplace approximation on the same trials."""
    method = str(ds.attrs.get("method", ""))
    if method.startswith("NUTS on every trial"):
        return {"value": "not needed", "failed": False,
                "note": "every trial was fitted by NUTS",
                "sentence": "Every simulated trial was fitted by NUTS (full posterior "
                            "sampling), so no approximation needs checking."}
    z = np.asarray(ds["nuts_agreement"].values, dtype=float) if "nuts_agreement" in ds \
        else np.array([])
    k = np.asarray(ds["nuts_trials"].values, dtype=int) if "nuts_trials" in ds \
        else np.zeros(z.shape, int)
    run = ~np.isnan(z)
    if not run.any():
        return {"value": "not run", "failed": False,
                "note": "no trial was also fitted by NUTS",
                "sentence": "The fast fits (Laplace approximation) were not checked against "
                            "NUTS in this run; every trial can be fitted by NUTS instead, at "
                            "a higher cost in time."}
    n = np.asarray(ds["n"].values)
    worst = float(np.max(np.abs(z[run])))
    bad = [int(v) for v, a in zip(n[run], np.abs(z[run]), strict=True)
           if a > AGREEMENT_LIMIT]
    trials = int(np.max(k)) if k.size else 0
    shown = "more than 10" if not math.isfinite(worst) or worst > 10 else f"{worst:.1f}"
    if bad:
        where = ", ".join(map(str, bad))
        return {"value": "fails", "failed": True,
                "note": f"differs by {shown} Monte Carlo SE (limit {AGREEMENT_LIMIT:g})",
                "sentence": f"The check failed: on {trials} trials per size fitted both ways, "
                            f"NUTS and the fast fit (Laplace approximation) disagree by more "
                            f"than {AGREEMENT_LIMIT:g} Monte Carlo standard errors at "
                            f"{where} patients. The probabilities above may be off. Every "
                            "trial can be fitted by NUTS instead (slower); do that before "
                            "relying on these numbers."}
    return {"value": "passes", "failed": False,
            "note": f"largest difference {shown} Monte Carlo SE (limit {AGREEMENT_LIMIT:g})",
            "sentence": f"The fast fit (Laplace approximation at the posterior mode) agreed "
                        f"with NUTS on {trials} trials per size fitted both ways: the largest "
                        f"difference in the chance of success was {shown} Monte Carlo "
                        "standard errors. Every trial can also be fitted by NUTS, at a "
                        "higher cost in time."}


def _decision(plan: Any, ds: Any, j: int, exact: bool) -> dict[str, Any]:
    n_shown = int(ds["n"].values[j])
    p, p_se = _at(ds, "assurance", j), _at(ds, "assurance_mcse", j)
    q, q_se = _at(ds, "power", j), _at(ds, "power_mcse", j)
    check = _agreement(ds)
    tiles = [
        {"key": "assurance", "label": "Probability of success", "lead": True,
         "value": wd.percent(p, 1),
         "note": f"at {n_shown} patients; \u00b1 "
                 f"{_se_points(p_se)} points (2 Monte Carlo SE)"},
        {"key": "power", "label": "Classical power",
         "value": wd.percent(q, 1) if _finite(q) else _NOT_SIMULATED,
         "note": (f"at the assumed values; \u00b1 {_se_points(q_se)} points (2 Monte Carlo SE)"
                  if _finite(q) else "the assumed values were not simulated")},
        {"key": "gap", "label": "Gap",
         "value": (wd.points(q - p).replace("percentage point", "point") if _finite(q)
                   else _NOT_SIMULATED),
         "note": "classical power minus probability of success"},
        {"key": "check", "label": "Fast-fit check (NUTS)", "value": check["value"],
         "note": check["note"], "failed": check["failed"]},
    ]
    arms = (f"{int(ds['n_treatment'].values[j])} on treatment, "
            f"{int(ds['n_control'].values[j])} on control")
    reason = str(getattr(plan, "planned_reason", "") or "the size the plan was asked to report")
    planned = f"Planned size: {n_shown} patients ({arms}), {reason}."
    if not exact:
        planned += (f" ({int(plan.planned_n)} patients was not simulated; the nearest size "
                    f"simulated, {n_shown}, is shown.)")
    sentences = [planned]
    if _finite(q):
        sentences.append(
            f"If the true values were exactly the assumed ones, the trial would succeed with "
            f"probability {_pct_se(q, q_se, 2)}; averaged over the design prior the chance "
            f"is {_pct_se(p, p_se, 2)} (\u00b1 two Monte Carlo standard errors).")
    lead = []
    warning = ds.attrs.get("warning")
    if warning:
        lead.append(("warning", "Warning from the simulation: "
                     + wd._no_code(printable(str(warning)))))
    if check["failed"]:
        lead.append(("check-failed", check["sentence"]))
    else:
        sentences.append(check["sentence"])
    return {"lead": lead, "tiles": tiles, "sentences": sentences, "n": n_shown,
            "caution": "These figures rest on the design prior and on the analysis model; a "
                       "statistician should review both."}


def _se_points(se: float) -> str:
    if not _finite(se):
        return _NOT_SIMULATED
    spread = 200 * se
    return "<0.1" if spread < 0.05 else f"{spread:.1f}"


def _assumed(plan: Any, ds: Any) -> list[tuple[str, str]]:
    model = plan.model
    unit = getattr(plan, "unit", None)
    effect_ep = _effect_words(model, unit)
    better = "lower" if getattr(model, "better", "higher") == "lower" else "higher"
    rows: list[tuple[str, str]] = [
        ("Analysis model", wd._no_code(printable(str(model.name)))),
        ("Treatment effect", f"{wd._no_code(str(model.effect_scale))}, on the analysis "
                             f"scale; {better} values are better"
                             + (f"; outcome measured in {unit}" if unit else "")),
    ]
    allocation = float(getattr(model, "allocation", 1.0))
    rows.append(("Allocation", "equal (1 treatment : 1 control)" if allocation == 1 else
                 f"{wd.number(allocation)} treatment patients per control patient"))
    for key, prior in model.design_prior.items():
        endpoint = effect_ep if key == getattr(model, "effect", "effect") or key == "effect" \
            else _PLAIN
        label = "Design prior for the treatment effect" if key == "effect" else \
            f"Design prior for {_name(key)}"
        rows.append((label, _prior_words(prior, endpoint)))
    values = []
    for key, value in model.assumed.items():
        if key == "effect":
            if effect_ep.ratio_scale:
                shown = f"{effect_ep.effect_name} {wd.ratio(math.exp(value))}"
            else:
                shown = wd.effect_text(effect_ep, value)
            values.insert(0, f"treatment effect {shown}")
        else:
            values.append(f"{_name(key)} {wd.number(value)}")
    rows.append(("Assumed values (classical power)", "; ".join(values)))
    rows.append(("Success", wd.rule_text(plan.rule, effect_ep)))
    return rows


def _sizes_table(plan: Any, ds: Any, planned_row: int) -> dict[str, Any]:
    n = ds["n"].values
    marks: dict[int, list[str]] = {}
    for answer in plan.sample_sizes or ():
        if answer.n is not None:
            j = _nearest(ds, int(answer.n))
            marks.setdefault(j, []).append(
                f"first to reach {_QUANTITY.get(answer.quantity, answer.quantity).split(' (')[0]}"
                f" {wd.percent(answer.target)}")
    coverage = float(ds.attrs.get("coverage", 0.95))
    unit = getattr(plan, "unit", None)
    if "ratio" in str(getattr(plan.model, "effect_scale", "")):
        unit = None
    unit = unit or str(getattr(plan.model, "effect_scale", "") or "")
    head = ["Total patients", "Treatment / control", "Probability of success",
            "Classical power", f"Mean width of the {wd.percent(coverage)} interval"
            + (f" ({unit})" if unit else ""), "Note"]
    rows = []
    for j in range(n.size):
        width = _at(ds, "width_mean", j)
        width_se = _at(ds, "width_mean_mcse", j)
        width_text = _width_text(width, width_se)
        notes = list(marks.get(j, []))
        if j == planned_row:
            notes.insert(0, "planned")
        failed = int(_at(ds, "not_converged", j)) if _finite(_at(ds, "not_converged", j)) \
            else 0
        if failed:
            notes.append(f"{failed} fast fit(s) found no posterior mode")
        rows.append({"marked": j == planned_row, "cells": [
            f"{int(n[j]):,}",
            f"{int(ds['n_treatment'].values[j])} / {int(ds['n_control'].values[j])}",
            _pct_se(_at(ds, "assurance", j), _at(ds, "assurance_mcse", j)),
            _pct_se(_at(ds, "power", j), _at(ds, "power_mcse", j)),
            width_text, "; ".join(notes)]})
    return {"head": head, "rows": rows}


def _width_text(width: float, se: float) -> str:
    """``2.83 ± 0.03``: the width to the decimal place of its one-figure MC SE."""
    if not _finite(width):
        return _NOT_SIMULATED
    if not _finite(se) or se <= 1e-6 * abs(width):  # no Monte Carlo error worth a digit
        return wd.number(width)
    decimals = max(0, -math.floor(math.log10(se)))
    return f"{width:,.{decimals}f} \u00b1 {se:.{decimals}f}"


def _targets(plan: Any, ds: Any) -> list[dict[str, str]]:
    n = [int(v) for v in ds["n"].values]
    out = []
    for answer in plan.sample_sizes or ():
        name = f"{_QUANTITY.get(answer.quantity, answer.quantity)} {wd.percent(answer.target)}"
        if answer.n is None:
            out.append({"name": name, "reached": False, "n": "", "arms": "",
                        "value": f"highest {_pct_se(answer.value, answer.mcse)}",
                        "comment": f"No size up to {n[-1]:,} patients reaches this target; "
                                   "simulate larger sizes."})
            continue
        i = n.index(int(answer.n)) if int(answer.n) in n else _nearest(ds, int(answer.n))
        below = ("it is the smallest size simulated, so a smaller trial may also reach it"
                 if i == 0 else f"the smallest size reaching it lies above {n[i - 1]:,} and "
                 f"at most {n[i]:,} patients")
        comment = f"The grid of sizes bounds the answer: {below}."
        if abs(answer.value - answer.target) <= 2 * answer.mcse:
            comment += (" The estimate is within 2 Monte Carlo standard errors of the target, "
                        "so more simulated trials could move the answer to a neighbouring "
                        "size.")
        out.append({"name": name, "reached": True, "n": f"{int(answer.n):,}",
                    "arms": f"{int(ds['n_treatment'].values[i])} / "
                            f"{int(ds['n_control'].values[i])}",
                    "value": _pct_se(answer.value, answer.mcse), "comment": comment})
    return out


_CRITERION_WORDS = {
    "ALC": "Average width (ALC)",
    "ACC": "Average coverage of an interval of the target width (ACC)",
    "MWOC": "Width in the {share} of trials with the narrowest intervals (MWOC, simulated)",
}


def _precision_rows(plan: Any, ds: Any) -> dict[str, Any] | None:
    """The precision criteria of the plan: the size reaching each, or None without them."""
    precision = getattr(plan, "precision", None)
    answers = getattr(plan, "precision_answers", ()) or ()
    if precision is None or not answers:
        return None
    n = [int(v) for v in ds["n"].values]
    share = wd.percent(float(precision.likely_share))
    rows = []
    for a in answers:
        name = _CRITERION_WORDS.get(a.quantity, a.quantity).format(share=share)
        coverage_like = a.quantity == "ACC"
        target = wd.percent(a.target) if coverage_like else wd.number(a.target)
        value = (_pct_se(a.value, a.mcse) if coverage_like
                 else _width_text(a.value, a.mcse) if _finite(a.mcse) else wd.number(a.value))
        if a.n is None:
            rows.append({"name": name, "target": target, "reached": False,
                         "value": f"best {value}", "comment": "No size simulated reaches it; "
                         "simulate larger sizes."})
            continue
        i = n.index(int(a.n))
        below = ("the smallest size simulated" if i == 0
                 else f"above {n[i - 1]:,} and at most {n[i]:,} patients")
        rows.append({"name": name, "target": target, "reached": True, "n": f"{int(a.n):,}",
                     "value": value, "comment": f"The grid bounds the answer: {below}."})
    interval = ("highest-density" if precision.interval == "highest_density"
                else "equal-tailed")
    return {"rows": rows, "length": wd.number(precision.length),
            "coverage": wd.percent(precision.coverage), "interval": interval}


def _method(plan: Any, ds: Any) -> list[str]:
    settings = getattr(plan, "settings", None)
    trials = int(ds.attrs.get("trials", _setting(settings, "trials", 0)) or 0)
    chunk = int(ds.attrs.get("chunk", _setting(settings, "chunk", 0)) or 0)
    seed = ds.attrs.get("seed", _setting(settings, "seed"))
    nuts = int(_setting(settings, "nuts_check", 0) or 0)
    if not nuts and "nuts_trials" in ds:
        nuts = int(np.max(ds["nuts_trials"].values))
    every = bool(_setting(settings, "nuts_every", False)) or \
        str(ds.attrs.get("method", "")).startswith("NUTS on every trial")
    out = [f"Simulation: at each size, {trials:,} trials with the true values drawn from the "
           "design prior (the probability of success) and, separately, "
           + (f"{trials:,} trials with the true values fixed at the assumed ones (classical "
              "power)." if _simulated(ds, "power") else
              "classical power was not simulated.")]
    out.append(f"Random numbers: the trials are run in batches of {chunk:,}, each with its own "
               f"random stream derived from the seed {_seed_text(seed)}, so the same seed "
               "gives the same numbers however many workers share the work.")
    if every:
        out.append("Fitting: every trial's analysis model was fitted by NUTS (full posterior "
                   "sampling).")
    else:
        out.append("Fitting: each trial's analysis model is fitted by a Laplace (normal) "
                   "approximation at the posterior mode; the success rule and the interval "
                   f"are read from it. As a check, {nuts} trials per size are also fitted by "
                   "NUTS (full posterior sampling) and both fits' decisions compared on the "
                   "same trials, in units of their Monte Carlo standard error.")
    coverage = float(ds.attrs.get("coverage", 0.95))
    out.append(f"Precision: the width of the {wd.percent(coverage)} posterior interval for the "
               "treatment effect, over the trials drawn from the design prior.")
    out.append("Every \u00b1 is Monte Carlo error: one standard error in the tables, two in "
               "the decision box and the figures' bands.")
    workers = _setting(settings, "workers")
    scheduler = _setting(settings, "scheduler")
    if scheduler:
        out.append("The trials were spread over a cluster of workers "
                   f"({printable(str(scheduler))}).")
    elif workers and str(workers) not in ("1", "0", "None"):
        out.append(f"The trials were spread over {printable(str(workers))} local worker "
                   "processes.")
    return out


def _simulated(ds: Any, name: str) -> bool:
    return name in ds and bool(np.isfinite(np.asarray(ds[name].values, dtype=float)).any())


def _provenance(plan: Any, ds: Any, date: str) -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = []
    source = getattr(plan, "source", None)
    if source is not None:
        rows.append(("Design file", str(source.path)))
        rows.append(("SHA-256 of the design file", hashlib.sha256(source.content).hexdigest()))
    else:
        rows.append(("Design file", "none (the plan was made in Python)"))
    rows.append(("Command (made by)", str(getattr(plan, "made_by", "") or "not recorded")))
    rows.append(("Computed (UTC)", str(getattr(plan, "created", "") or "not recorded")))
    rows.append(("Memo written", date))
    seed = ds.attrs.get("seed", _setting(getattr(plan, "settings", None), "seed"))
    rows.append(("Seed", _seed_text(seed)))
    rows.append(("Method", wd._no_code(str(ds.attrs.get("method", "")))))
    return rows


# ------------------------------------------------------------------------------------------
# the page
# ------------------------------------------------------------------------------------------
def _check_plan(plan: Any, owner: str) -> None:
    needed = ("model", "rule", "results", "sample_sizes")
    ds = getattr(plan, "results", None)
    if any(not hasattr(plan, name) for name in needed) or not hasattr(ds, "data_vars") or \
            "assurance" not in ds or "n" not in ds.dims:
        raise AssuranceInputError(
            f"The 'plan' parameter of {owner} must be a plan made with a general analysis "
            f"model (with its simulated results). Got {type(plan).__name__} instead.")


def model_memo_html(
    plan: Any,
    *,
    figures: bool = True,
    rendered: Mapping[str, bytes] | None = None,
    cautions: Sequence[str] = DEFAULT_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
) -> str:
    """The decision memo of a plan made with a general analysis model, as one HTML string.

    In order: the decision box (probability of success at the planned size and classical
    power at the assumed values, each with two Monte Carlo standard errors, their gap, and
    the check of the fast fits against NUTS; the simulation's warning, when there is one,
    at the top of the box), what was assumed (model, design prior per parameter, assumed
    values, success rule), the main figure, one row per simulated size, the sizes for the
    targets, interval widths, method, provenance and cautions.

    Parameters
    ----------
    plan
        The plan: its ``model``, ``rule``, ``results`` (from
        :func:`assurance.general.simulate_general`), ``sample_sizes``, ``planned_n`` and
        provenance attributes.
    figures
        Embed the figures (as PNG data inside the file).
    rendered
        PNG bytes of figures already drawn, keyed ``"success_by_size"`` and
        ``"interval_width"``; the others are drawn here.
    cautions
        Sentences for the cautions section.
    versions
        Text for the provenance section; :func:`assurance.show_versions` unless given.
    date
        The date shown; today unless given.

    Returns
    -------
    str
        A complete HTML document.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> import xarray as xr
    >>> import assurance as asr
    >>> from assurance.general import GeneralModel
    >>> model = GeneralModel("invented: two arms", lambda *a: {}, lambda d: None,
    ...                      design_prior={"effect": asr.Normal(0.5, 0.5)},
    ...                      assumed={"effect": 0.5})
    >>> ds = xr.Dataset({"assurance": ("n", [0.5, 0.6]), "assurance_mcse": ("n", [.02, .02])},
    ...                 coords={"n": [40, 80], "n_treatment": ("n", [20, 40]),
    ...                         "n_control": ("n", [20, 40])}, attrs={"trials": 500})
    >>> plan = SimpleNamespace(model=model, rule=asr.PosteriorProbability(0.975), results=ds,
    ...                        sample_sizes=(), planned_n=80, title="Demo")
    >>> page = model_memo_html(plan, figures=False, date="2026-01-01", versions="-")
    >>> import re
    >>> page.startswith("<!DOCTYPE html>"), bool(re.search(r"\\bnan\\b", page, re.I))
    (True, False)
    >>> "not simulated" in page, "<script" in page
    (True, False)
    """
    _check_plan(plan, "model_memo_html")
    if isinstance(cautions, str):
        cautions = [cautions]
    cautions = [str(c) for c in cautions]
    versions = _versions_text() if versions is None else str(versions)
    ds = plan.results
    n = ds["n"].values
    planned = getattr(plan, "planned_n", None)
    planned = int(planned) if planned else int(np.max(n))
    j = _nearest(ds, planned)
    exact = int(n[j]) == planned
    title = printable(str(getattr(plan, "title", "") or "Plan with a general analysis model"))
    main = widths = None
    if figures:
        from .model_figures import model_figure_makers

        makers = model_figure_makers(plan)
        main = _figure("success_by_size", rendered,
                       lambda: makers["success_by_size"]().axes[0],
                       "Probability of success and classical power by total sample size",
                       "Simulated sizes are dots; bands show two Monte Carlo standard errors. "
                       "Classical power fixes the true values at the assumed ones; the "
                       "probability of success averages over the design prior.")
        if "interval_width" in makers:
            widths = _figure("interval_width", rendered,
                             lambda: makers["interval_width"]().axes[0],
                             "Posterior interval width by total sample size",
                             "Mean, median and 90th centile of the posterior interval's width "
                             "for the treatment effect over trials drawn from the design "
                             "prior.")
    record = plan.design_record() if callable(getattr(plan, "design_record", None)) else None
    date_text = _date_text(date)
    context = {
        "title": title,
        "date": date_text,
        "package": _package_version(),
        "decision": _decision(plan, ds, j, exact),
        "assumed": _assumed(plan, ds),
        "main_figure": main,
        "sizes": _sizes_table(plan, ds, j),
        "targets": _targets(plan, ds),
        "width_figure": widths,
        "precision": _precision_rows(plan, ds),
        "method": _method(plan, ds),
        "warning": wd._no_code(printable(str(ds.attrs.get("warning", "") or ""))),
        "provenance": _provenance(plan, ds, date_text),
        "versions": versions,
        "recorded": None if record is None else str(record),
        "cautions": cautions,
    }
    return _template("model_memo.html").render(**context)


def _package_version() -> str:
    from .. import __version__

    return str(__version__)


def write_model_memo(
    plan: Any,
    path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    rendered: Mapping[str, bytes] | None = None,
    figures: bool = True,
    cautions: Sequence[str] = DEFAULT_CAUTIONS,
    versions: str | None = None,
    date: _dt.date | str | None = None,
) -> Path:
    """Write :func:`model_memo_html` of ``plan`` to ``path``, atomically and never replacing
    an existing file unless ``overwrite`` is True.

    Raises
    ------
    AssuranceInputError
        When the file exists and ``overwrite`` is False, or its folder does not exist.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from types import SimpleNamespace
    >>> import xarray as xr
    >>> import assurance as asr
    >>> from assurance.general import GeneralModel
    >>> model = GeneralModel("invented", lambda *a: {}, lambda d: None,
    ...                      design_prior={"effect": asr.Normal(0.5, 0.5)},
    ...                      assumed={"effect": 0.5})
    >>> ds = xr.Dataset({"assurance": ("n", [0.5]), "assurance_mcse": ("n", [.02])},
    ...                 coords={"n": [40], "n_treatment": ("n", [20]), "n_control": ("n", [20])})
    >>> plan = SimpleNamespace(model=model, rule=asr.PosteriorProbability(0.975), results=ds,
    ...                        sample_sizes=(), planned_n=40, title="Demo")
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = write_model_memo(plan, pathlib.Path(folder) / "memo.html", figures=False,
    ...                             versions="-")
    ...     print(path.name, "ICH E9" in path.read_text(encoding="utf-8"))
    memo.html True
    """
    target = check_target(path, "write_model_memo", overwrite)
    page = model_memo_html(plan, figures=figures, rendered=rendered, cautions=cautions,
                           versions=versions, date=date)
    return write_atomic(target, page.encode("utf-8"), overwrite=overwrite,
                        owner="write_model_memo")
