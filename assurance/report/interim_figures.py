"""Figures of an interim look: the predictive probability against the interim estimate with
the boundaries, and the boundaries' operating characteristics by true effect.

Both take an :class:`~assurance.program.interim.InterimLook` (computed below this layer) and
draw on the endpoint's natural scale (a ratio on a log axis); they compute nothing new
beyond evaluating the look's own functions on a grid.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from .figures import (
    _BLUE,
    _GREEN,
    _GREY,
    _ORANGE,
    _VERMILLION,
    _axes,
    _effect_label,
    _legend,
    _style,
)

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes

__all__ = ["plot_interim_predictive", "plot_interim_operating", "interim_figure_makers",
           "interim_plan_figure_makers"]

_PRIOR_WORDS = {"analysis": "analysis prior", "design": "design prior"}


def _natural_axis(ax: Axes, look: Any, values: np.ndarray, prefix: str) -> np.ndarray:
    ep = look.design.endpoint
    x = np.asarray(ep.from_benefit(values), dtype=float)
    if ep.ratio_scale:
        ax.set_xscale("log")
    ax.set_xlabel(_effect_label(ep, prefix), fontsize=10.5, parse_math=False)
    return x


def _prior_name(look: Any, which: str) -> str:
    if which == "analysis" and look.design.analysis_prior is None:
        return "flat analysis prior"
    return _PRIOR_WORDS[which]


def plot_interim_predictive(look: Any, ax: Axes | None = None) -> Axes:
    """Predictive probability of final success against the interim estimate.

    Curves under the posterior from the boundaries' prior and from the other prior, and
    conditional power at the assumed effect; the futility and efficacy boundaries as
    horizontal lines and the interim estimates where they stand, and the estimate found.

    Parameters
    ----------
    look
        An :class:`~assurance.program.interim.InterimLook`.
    ax
        Axes to draw into (a new off-screen figure when None).

    Returns
    -------
    matplotlib.axes.Axes

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> from assurance.program.interim import InterimData, evaluate_interim
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    >>> ax = plot_interim_predictive(evaluate_interim(d, InterimData(3.0, standard_error=2.0),
    ...                                               planned_total=200))
    >>> len(ax.lines) >= 3
    True
    """
    ax = _axes(ax)
    marks = [look.estimate, look.threshold]
    marks += [v for v in (look.futility_cut, look.efficacy_cut) if v is not None]
    lo, hi = min(marks) - 3 * look.interim_se, max(marks) + 3 * look.interim_se
    grid = np.linspace(lo, hi, 161)
    x = _natural_axis(ax, look, grid, "Interim estimate: ")
    chosen = look.prediction_prior
    other = "design" if chosen == "analysis" else "analysis"
    ax.plot(x, look.predictive_at(grid, chosen), color=_BLUE, linewidth=2.2,
            label=f"predictive probability ({_prior_name(look, chosen)}; boundaries)")
    ax.plot(x, look.predictive_at(grid, other), color=_VERMILLION, linewidth=1.6,
            linestyle="--", label=f"predictive probability ({_prior_name(look, other)})")
    assumed = float(look.design.endpoint.to_benefit(look.design.assumed_effect))
    ax.plot(x, look.conditional_at(grid, assumed), color=_GREEN, linewidth=1.4,
            linestyle=":", label="conditional power at the assumed effect")
    if look.futility > 0:
        ax.axhline(look.futility, color=_ORANGE, linewidth=1.0, linestyle="-.")
    if look.efficacy < 1:
        ax.axhline(look.efficacy, color=_ORANGE, linewidth=1.0, linestyle="-.",
                   label="boundaries (predictive probability)")
    for cut, word in ((look.futility_cut, "futility"), (look.efficacy_cut, "efficacy")):
        if cut is not None:
            xc = look.natural(cut)
            ax.axvline(xc, color=_ORANGE, linewidth=0.8, linestyle=":")
            ax.annotate(f"{word}\n{xc:.3g}", (xc, 0.5), fontsize=8.5, color="#8A5A00",
                        ha="center", va="center",
                        bbox={"boxstyle": "round,pad=0.15", "facecolor": "white",
                              "edgecolor": "none", "alpha": 0.85})
    xe = look.natural(look.estimate)
    pe = look.predictive[chosen]
    ax.plot([xe], [pe], marker="o", color="black", markersize=7, linestyle="none",
            label=f"interim estimate {xe:.3g}")
    ax.set_ylim(-0.02, 1.02)
    ax.set_ylabel("Probability of success at the final analysis", fontsize=10.5)
    ax.set_title("What the interim estimate predicts", fontsize=11.5)
    _style(ax)
    _legend(ax, loc="best")
    return ax


def plot_interim_operating(look: Any, ax: Axes | None = None) -> Axes:
    """Operating characteristics of the boundaries by true effect.

    P(stop for futility), P(stop for efficacy) and P(success) with the boundaries, beside
    P(success) of the same trial without the interim look, before any interim data.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign
    >>> from assurance.program.interim import InterimData, evaluate_interim
    >>> d = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    >>> ax = plot_interim_operating(evaluate_interim(d, InterimData(3.0, standard_error=2.0),
    ...                                              planned_total=200))
    >>> len(ax.lines)
    6
    """
    ax = _axes(ax)
    curve = look.curve
    x = _natural_axis(ax, look, curve["effect"], "True ")
    ax.plot(x, curve["p_success"], color=_BLUE, linewidth=2.2,
            label="P(success) with the boundaries")
    ax.plot(x, curve["p_success_no_look"], color=_GREY, linewidth=1.4, linestyle="--",
            label="P(success) without the interim look")
    ax.plot(x, curve["p_futility"], color=_ORANGE, linewidth=1.6, linestyle="-.",
            label="P(stop for futility)")
    ax.plot(x, curve["p_efficacy"], color=_GREEN, linewidth=1.6, linestyle=":",
            label="P(stop for efficacy)")
    ep = look.design.endpoint
    for value, word in ((0.0, "no effect"),
                        (float(ep.to_benefit(look.design.assumed_effect)), "assumed")):
        xv = float(ep.from_benefit(value))
        ax.axvline(xv, color="#999999", linewidth=0.8)
        ax.annotate(word, (xv, 1.0), fontsize=8.5, color="#555555", ha="center",
                    va="bottom")
    ax.set_ylim(-0.02, 1.08)
    ax.set_ylabel("Probability", fontsize=10.5)
    ax.set_title(f"Boundaries at {100 * look.fraction:.0f}% of the information, by true "
                 "effect", fontsize=11.5)
    _style(ax)
    _legend(ax, loc="best")
    return ax


def interim_figure_makers() -> dict[str, Any]:
    """Figure name -> drawing function of a look, in the memo's order."""
    return {"interim_predictive": plot_interim_predictive,
            "interim_operating": plot_interim_operating}


def interim_plan_figure_makers(plan: Any) -> dict[str, Any]:
    """Figure name -> a function drawing that figure of an interim plan's look (the list
    :func:`~assurance.report.plan_figures.start_rendering` draws from)."""
    return {name: (lambda draw=draw: draw(plan.look).figure)
            for name, draw in interim_figure_makers().items()}
