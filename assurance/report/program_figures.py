"""Figures of a development program (phase 2, a go decision, then phase 3).

Three figures, each drawn from what the program plan holds (nothing is recomputed): the
chances of a go, of phase 3 success and of both against the true effect, over the design
prior; the program's probability of success, expected patients and false-go rate against
the phase 2 size, one line per go rule; and the re-planned phase 3 size against the
observed phase 2 estimate. matplotlib is imported only when a figure is drawn.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import numpy as np

from . import wording as wd
from .figures import (
    _BLACK,
    _BLUE,
    _GREEN,
    _GREY,
    _LIGHT,
    _ORANGE,
    _PURPLE,
    _SKY,
    _VERMILLION,
    _axes,
    _place_legend,
    _style,
    _title,
)

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = ["program_figure_makers", "plot_program_by_effect", "plot_program_grid",
           "plot_replan"]

_LINES = (_BLUE, _VERMILLION, _GREEN, _ORANGE, _PURPLE, _SKY, _BLACK)
_DASHES = ("-", (0, (5, 2)), (0, (1, 1.5)), (0, (6, 2, 1, 2)), "-", (0, (3, 1)), "-")


def _effect_label(design: Any) -> str:
    ep = design.endpoint
    unit = wd.effect_unit(ep)
    name = str(getattr(ep, "effect_name", "effect"))
    return f"True {name} in phase 3" + (f" ({unit})" if unit else "")


def plot_program_by_effect(plan: Any) -> Figure:
    """P(go), P(phase 3 success) and P(both) against the true effect, with the prior."""
    c = plan.curves
    program = plan.program
    ax = _axes(None)
    _style(ax)
    x = np.asarray(c["effect"], dtype=float)
    density = np.asarray(c["density"], dtype=float)
    if density.max() > 0:
        ax.fill_between(x, 0, density / density.max() * 0.35, color=_LIGHT, lw=0,
                        label="design prior (continuous part, scaled)")
    for loc, mass in program.prior.atoms():
        at = float(program.phase3.endpoint.from_benefit(program.phase3.endpoint.sign * loc))
        ax.vlines(at, 0, mass, color=_GREY, lw=4, alpha=0.6,
                  label=f"prior point mass ({wd.percent(mass)}) at {wd.number(at)}")
    fixed = "re-planned" if program.replan is not None else f"{program.n3:,} patients"
    ax.plot(x, c["go"], color=_BLUE, lw=2, label=f"go after phase 2 ({program.n2:,} patients)")
    ax.plot(x, c["success"], color=_GREEN, lw=1.6, ls=(0, (5, 2)),
            label=f"phase 3 success alone ({program.n3:,} patients)")
    ax.plot(x, c["both"], color=_VERMILLION, lw=2.4,
            label=f"go, then phase 3 success (phase 3 {fixed})")
    ax.set_ylim(0, 1.02)
    ax.set_xlabel(_effect_label(program.phase3), fontsize=10)
    ax.set_ylabel("Probability", fontsize=10)
    ax.set_title(_title(program.title, "chances by true effect"), fontsize=10.5)
    _place_legend(ax, True)
    return ax.figure


def plot_program_grid(plan: Any) -> Figure:
    """Program PoS, expected patients and false-go rate against the phase 2 size."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure as _Figure

    g = plan.grid
    fig = _Figure(figsize=(9.6, 3.9), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(1, 3)
    n = np.asarray(g.phase2_n.values, dtype=float)
    word = "at most" if plan.program.phase2.endpoint.better == "lower" else "at least"
    panels = (("pos", "Program probability of success", True),
              ("expected_patients", "Expected patients (both phases)", False),
              ("false_go", "False-go rate: P(go | no benefit)", True))
    for ax, (name, label, share) in zip(axes, panels, strict=True):
        _style(ax)
        for j, rule in enumerate(g.go_rule.values):
            rule = str(rule)
            text = "go rule as designed" if rule == "as designed" else \
                f"go if estimate {word} {wd.effect_text(plan.program.phase2.endpoint, float(rule))}"
            values = np.asarray(g[name].values[:, j], dtype=float)
            ax.plot(n, 100 * values if share else values, color=_LINES[j % len(_LINES)],
                    ls=_DASHES[j % len(_DASHES)], lw=1.8, marker="o", ms=3.5, label=text)
        ax.axvline(plan.program.n2, color=_GREY, lw=0.8, ls=":")
        ax.set_xlabel("Phase 2 patients", fontsize=9.5)
        ax.set_title(label, fontsize=9.5)
        if share:
            ax.set_ylabel("%", fontsize=9.5)
            ax.set_ylim(bottom=0)
    handles, labels = axes[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=min(3, len(labels)),
               fontsize=8.5, frameon=False)
    fig.suptitle(_title(plan.title, f"by phase 2 size (phase 3 with {plan.program.n3:,} patients)"),
                 fontsize=10.5)
    return fig


def plot_replan(plan: Any) -> Figure | None:
    """The re-planned phase 3 size against the observed phase 2 estimate."""
    t = plan.replan
    if t is None:
        return None
    program = plan.program
    ax = _axes(None)
    _style(ax)
    est = np.asarray(t["estimate"], dtype=float)
    n3 = np.asarray(t["n3"], dtype=float)
    ax.step(est, n3, where="post", color=_VERMILLION, lw=2,
            label="phase 3 size after a go")
    missed = ~np.asarray(t["reached"], dtype=bool)
    if missed.any():
        ax.plot(est[missed], n3[missed], "o", color=_BLACK, ms=3.5,
                label=f"assurance target out of reach: capped at {program.replan.max_n:,}")
    ax.axvline(est[0], color=_BLUE, lw=1, ls=(0, (5, 2)), label="go threshold")
    ax.axhline(program.n3, color=_GREY, lw=1, ls=":", label=f"fixed size ({program.n3:,})")
    ep = program.phase2.endpoint
    unit = wd.effect_unit(ep)
    ax.set_xlabel("Observed phase 2 estimate" + (f" ({unit})" if unit else ""), fontsize=10)
    ax.set_ylabel("Phase 3 patients", fontsize=10)
    ax.set_ylim(0, max(n3.max(), program.n3) * 1.08)
    # the table runs six SDs past the go threshold; show where the size still changes
    # (estimates run down the axis when lower is better)
    settled = int(np.flatnonzero(n3 != n3[-1])[-1]) + 1 if (n3 != n3[-1]).any() else 0
    span = est[settled] - est[0]
    if span != 0 and abs(1.3 * span) < abs(est[-1] - est[0]):
        ax.set_xlim(*sorted((est[0] - 0.05 * span, est[settled] + 0.3 * span)))
    ax.set_title(_title(program.title, "phase 3 size re-planned from phase 2"),
                 fontsize=10.5)
    _place_legend(ax, True)
    return ax.figure


def program_figure_makers(plan: Any) -> dict[str, Callable[[], Figure]]:
    """Name -> function drawing that figure, for the figures this plan has."""
    makers: dict[str, Callable[[], Any]] = {
        "by_effect": lambda: plot_program_by_effect(plan),
        "grid": lambda: plot_program_grid(plan),
    }
    if plan.replan is not None:
        makers["replan"] = lambda: plot_replan(plan)
    return makers
