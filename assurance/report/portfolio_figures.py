"""Figures of a portfolio plan (:class:`assurance.PortfolioPlan`).

* ``"portfolio"``: the one a portfolio meeting reads in ten seconds: each trial's
  probability of success (with its Monte Carlo interval where it was simulated) beside the
  distribution of the number of successes and its expected value.
* ``"success_curves"``: every trial's probability of success against its size, the size
  counted marked.
* ``"net_value"`` (trials with value inputs): expected net value against the size, one
  panel per trial, with the best size, the flat range around it, the size counted and the
  size reaching the assurance target.

Every number drawn is read from the plan; nothing is recomputed. matplotlib is imported only
when a figure is drawn.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import AssuranceInputError
from ._files import printable
from .figures import (
    _BLACK,
    _BLUE,
    _GREEN,
    _GREY,
    _ORANGE,
    _PURPLE,
    _SIZE_LABEL,
    _SKY,
    _TEXT_BOX,
    _VERMILLION,
    _drawable,
    _style,
    _title,
)
from .wording import percent

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = ["plot_portfolio", "plot_success_curves", "plot_net_values",
           "portfolio_figure_makers"]

_TRIAL_COLOURS = (_BLUE, _VERMILLION, _GREEN, _ORANGE, _PURPLE, _SKY, _BLACK, _GREY)


def _check(plan: Any, owner: str) -> None:
    if not hasattr(plan, "trials") or not hasattr(plan, "results") or not plan.trials:
        raise AssuranceInputError(
            f"The 'plan' parameter of {owner} must be a PortfolioPlan. Got "
            f"{type(plan).__name__} instead.")


def _figure(size: tuple[float, float]) -> Figure:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _label(name: str, width: int = 24, lines: int = 2) -> str:
    text = _drawable(printable(str(name)))
    wrapped = textwrap.wrap(text, width) or [text]
    if len(wrapped) > lines:
        wrapped = wrapped[:lines]
        wrapped[-1] = wrapped[-1][:width - 1].rstrip() + "\u2026"
    return "\n".join(wrapped)


def _colour(i: int) -> str:
    return _TRIAL_COLOURS[i % len(_TRIAL_COLOURS)]


def plot_portfolio(plan: Any) -> Figure:
    """Each trial's probability of success, and the number of successes to expect.

    Left: one bar per trial at its counted size (an interval of two Monte Carlo standard
    errors where the probability was simulated; "exact" otherwise). Right: the probability
    of each number of successes (Poisson-binomial: trials independent given their priors),
    the expected number marked.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.portfolio_plan import plan_portfolio
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0), title="A")
    >>> fig = plot_portfolio(plan_portfolio([d], sizes=[200]))
    >>> len(fig.axes)
    2
    """
    _check(plan, "plot_portfolio")
    trials = plan.trials
    k = len(trials)
    fig = _figure((7.6, max(3.6, 1.2 + 0.55 * k)))
    grid = fig.add_gridspec(1, 2, width_ratios=(1.55, 1.0))
    left = fig.add_subplot(grid[0, 0])
    right = fig.add_subplot(grid[0, 1])
    y = np.arange(k)[::-1]
    pos = np.array([t.pos for t in trials])
    colours = [_BLUE if t.exact else _ORANGE for t in trials]
    left.barh(y, pos, color=colours, height=0.62, alpha=0.9)
    for yi, t in zip(y, trials, strict=True):
        lo, hi = t.interval
        if not t.exact:
            left.errorbar([t.pos], [yi], xerr=[[t.pos - lo], [hi - t.pos]], color=_BLACK,
                          capsize=3, linewidth=1.2)
        text = percent(t.pos) + ("" if t.exact else f" \u00b1{100 * (hi - t.pos):.1f}")
        left.text(max(hi, t.pos) + 0.02, yi, f"{text}   n = {t.n:,}", va="center",
                  ha="left", fontsize=9, color=_BLACK)
    left.set_yticks(y, [_label(t.name) for t in trials], fontsize=8.8)
    left.set_xlim(0, 1.34)  # room for the labels right of the bars
    left.set_xticks([0, 0.25, 0.5, 0.75, 1.0], ["0%", "25%", "50%", "75%", "100%"])
    left.set_xlabel("Probability of success at the size counted")
    _style(left)
    left.grid(axis="x", color="#DDDDDD", linewidth=0.7)
    left.grid(axis="y", visible=False)
    if not all(t.exact for t in trials):
        from matplotlib.patches import Patch

        legend = left.legend(handles=[Patch(color=_BLUE, label="exact"),
                                      Patch(color=_ORANGE, label="simulated (\u00b1 2 MC SE)")],
                             loc="lower center", bbox_to_anchor=(0.5, 1.0), ncol=2,
                             fontsize=8, frameon=False)
        legend.get_frame().set_edgecolor("#CCCCCC")

    q = plan.distribution
    counts = np.arange(q.size)
    expected = plan.expected_successes
    right.bar(counts, q, color=_SKY, edgecolor=_BLUE, width=0.7)
    for c, v in zip(counts, q, strict=True):
        if v >= 0.005:
            right.text(c, v + 0.01, percent(v), ha="center", va="bottom", fontsize=8)
    right.axvline(expected, color=_VERMILLION, linewidth=2.0, linestyle="--")
    top = float(q.max()) * 1.25 + 0.02
    right.set_ylim(0, top)
    right.text(expected, top * 0.97, f" expected {expected:.1f}", color=_VERMILLION,
               ha="left" if expected < q.size / 2 else "right", va="top", fontsize=9,
               fontweight="bold", bbox=_TEXT_BOX)
    right.set_xticks(counts)
    right.set_xlabel("Trials succeeding")
    right.set_ylabel("Probability")
    right.yaxis.set_major_formatter(lambda v, _: f"{100 * v:.0f}%")
    _style(right)
    at_least_one = 1.0 - float(q[0])
    what = (f"{expected:.1f} of {k} trials expected to succeed; at least one: "
            f"{percent(at_least_one, 1)}")
    fig.suptitle(_title(plan.title, what), fontsize=11)
    return fig


def plot_success_curves(plan: Any) -> Figure:
    """Every trial's probability of success against its total size; the size counted is a
    dot and the size reaching the assurance target a ring.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.portfolio_plan import plan_portfolio
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0), title="A")
    >>> plot_success_curves(plan_portfolio([d], sizes=[200])).axes[0].get_xlabel()
    'Total sample size (patients)'
    """
    _check(plan, "plot_success_curves")
    fig = _figure((7.6, 4.6))
    ax = fig.add_subplot()
    for i, t in enumerate(plan.trials):
        colour = _colour(i)
        ax.plot(t.curve_n, t.curve_pos, color=colour, linewidth=1.8,
                label=_label(t.name, 40, 1))
        if t.curve_mcse is not None:
            ax.fill_between(t.curve_n, np.clip(t.curve_pos - 2 * t.curve_mcse, 0, 1),
                            np.clip(t.curve_pos + 2 * t.curve_mcse, 0, 1), color=colour,
                            alpha=0.2, linewidth=0)
        ax.plot([t.n], [t.pos], "o", color=colour, markersize=7, markeredgecolor="white")
        if t.n_target is not None and t.n_target != t.n:
            j = np.flatnonzero(t.curve_n == t.n_target)
            if j.size:
                ax.plot([t.n_target], [t.curve_pos[j[0]]], "o", markerfacecolor="none",
                        markeredgecolor=colour, markersize=9)
    ax.set_ylim(0, 1)
    ax.yaxis.set_major_formatter(lambda v, _: f"{100 * v:.0f}%")
    ax.set_xlabel(_SIZE_LABEL)
    ax.set_ylabel("Probability of success")
    _style(ax)
    legend = ax.legend(loc="lower right", fontsize=8, frameon=True)
    legend.get_frame().set_edgecolor("#CCCCCC")
    for text in legend.get_texts():
        text.set_parse_math(False)
    ax.set_title(_title(plan.title, "probability of success by size (dot: size counted; "
                        "ring: size reaching the assurance target)"), fontsize=10)
    return fig


def plot_net_values(plan: Any) -> Figure:
    """Expected net value against the size, one panel per trial with value inputs.

    The best size is a large dot, the sizes within the flat share of the best value are
    shaded, the size counted is a small dot, and the size reaching the assurance target a
    dashed line.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.portfolio_plan import plan_portfolio
    >>> from assurance.program.portfolio import ValueInputs
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                     asr.Normal(4.0, 2.0), title="A")
    >>> p = plan_portfolio([d], sizes=[200], values=ValueInputs(100.0, 0.05))
    >>> len(plot_net_values(p).axes)
    1
    """
    _check(plan, "plot_net_values")
    valued = [(i, t) for i, t in enumerate(plan.trials) if t.best is not None]
    if not valued:
        raise AssuranceInputError(
            "The 'plan' parameter of plot_net_values must have value inputs for at least one "
            "trial. Got a portfolio without them instead.")
    m = len(valued)
    cols = 1 if m == 1 else 2
    rows = math.ceil(m / cols)
    fig = _figure((7.6, 1.0 + 2.5 * rows if m > 1 else 4.2))
    axes = fig.subplots(rows, cols, squeeze=False)
    unit = plan.settings.value_unit
    share = plan.settings.flat_share
    for (i, t), ax in zip(valued, axes.flat, strict=False):
        b = t.best
        net = t.net_values
        colour = _colour(i)
        ax.axvspan(b.n_low, b.n_high, color=colour, alpha=0.13, linewidth=0,
                   label=f"within {100 * share:g}% of the best")
        ax.axhline(0, color=_GREY, linewidth=0.9)
        ax.plot(t.curve_n, net, color=colour, linewidth=1.9)
        ax.plot([b.n_best], [b.value_best], "o", color=colour, markersize=8,
                markeredgecolor="white", label=f"best: {b.n_best:,}")
        at = t.net_value_at(t.n)
        if at is not None:
            ax.plot([t.n], [at], "s", color=_BLACK, markersize=5,
                    label=f"counted: {t.n:,}")
        if t.n_target is not None:
            ax.axvline(t.n_target, color=_BLACK, linestyle="--", linewidth=1.0,
                       label=f"assurance target: {t.n_target:,}")
        ax.set_title(_label(t.name, 46, 1), fontsize=9.5)
        ax.tick_params(labelsize=8)
        _style(ax)
        legend = ax.legend(fontsize=7, loc="lower center", frameon=True)
        legend.get_frame().set_edgecolor("#CCCCCC")
        legend.get_frame().set_alpha(0.9)
    for ax in list(axes.flat)[m:]:
        ax.set_visible(False)
    fig.supxlabel(_SIZE_LABEL, fontsize=9.5)
    fig.supylabel("Expected net value" + (f" ({_drawable(printable(unit))})" if unit else ""),
                  fontsize=9.5)
    fig.suptitle(_title(plan.title, "expected net value by size (the user's value inputs)"),
                 fontsize=10.5)
    return fig


def portfolio_figure_makers(plan: Any) -> dict[str, Callable[[], Figure]]:
    """Name -> a function drawing that figure, in the memo's order: ``"portfolio"``,
    ``"success_curves"`` and, with value inputs, ``"net_value"``."""
    makers: dict[str, Callable[[], Figure]] = {
        "portfolio": lambda: plot_portfolio(plan),
        "success_curves": lambda: plot_success_curves(plan),
    }
    if any(t.best is not None for t in plan.trials):
        makers["net_value"] = lambda: plot_net_values(plan)
    return makers
