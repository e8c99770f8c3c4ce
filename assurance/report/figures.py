"""Figures for a planning memo: the design prior, and power beside assurance by sample size.

Every function draws into a given matplotlib ``Axes`` or, without one, into a new figure
on the off-screen Agg canvas (no window is ever opened and the global backend is left
alone). matplotlib is imported only when a figure is drawn, so importing this module is
cheap.

Colours come from the Okabe-Ito palette, which stays distinguishable for the common forms
of colour blindness; line styles differ as well, so the figures also read in grey.
"""

from __future__ import annotations

import functools
import io
import json
import math
import os
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import AssuranceInputError
from ._files import check_target, printable, write_atomic

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from ..design import TrialDesign
    from ..planning import SampleSizeAnswer

__all__ = [
    "plot_interval_width",
    "plot_prior",
    "plot_power_and_assurance",
    "plot_decomposition",
    "save_figure",
    "figure_bytes",
    "passable_probability",
    "plot_fit",
    "plot_zones",
    "plot_zone_characteristic",
    "plot_sensitivity_map",
]

# Okabe-Ito colours
_BLACK = "#000000"
_ORANGE = "#E69F00"
_SKY = "#56B4E9"
_GREEN = "#009E73"
_BLUE = "#0072B2"
_VERMILLION = "#D55E00"
_PURPLE = "#CC79A7"
_GREY = "#7F7F7F"
_LIGHT = "#E6E6E6"

_QUANTITY_COLOUR = {"power": _BLUE, "assurance": _VERMILLION, "conditional_assurance": _GREEN}
_QUANTITY_NAME = {
    "power": "classical power",
    "assurance": "assurance",
    "conditional_assurance": "conditional assurance",
}

_FIGSIZE = (7.6, 4.6)
_TEXT_BOX = {"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none",
             "alpha": 0.85}
_DPI = 150


# ------------------------------------------------------------------------------------------
# shared helpers
# ------------------------------------------------------------------------------------------
def _axes(ax: Axes | None, figsize: tuple[float, float] = _FIGSIZE) -> Axes:
    """``ax`` itself, or the axes of a new off-screen figure."""
    if ax is not None:
        return ax
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    FigureCanvasAgg(fig)
    return fig.add_subplot()


def _style(ax: Axes) -> None:
    """Plain look: light horizontal grid, no top or right frame, readable sizes."""
    ax.spines[["top", "right"]].set_visible(False)
    ax.spines[["left", "bottom"]].set_color("#4D4D4D")
    ax.tick_params(labelsize=9.5, colors="#333333")
    ax.grid(axis="y", color="#DDDDDD", linewidth=0.7)
    ax.set_axisbelow(True)


def _legend(ax: Axes, **kwargs: Any) -> Any:
    kwargs.setdefault("fontsize", 8.8)
    kwargs.setdefault("frameon", True)
    legend = ax.legend(**kwargs)
    for text in legend.get_texts():  # labels are plain text: a "$" is a dollar sign
        text.set_parse_math(False)
    frame = legend.get_frame()
    frame.set_edgecolor("#CCCCCC")
    frame.set_facecolor("white")
    frame.set_alpha(0.92)
    return legend


def _legend_below(ax: Axes) -> None:
    """Legend in two columns under the plot, for a figure this module made itself."""
    handles, labels = ax.get_legend_handles_labels()
    legend = ax.figure.legend(handles, labels, loc="outside lower center", ncol=2, fontsize=8.8,
                              frameon=False)
    for text in legend.get_texts():
        text.set_parse_math(False)


_TITLE_WIDTH = 78
_TITLE_LINES = 3


def _title(title: str, what: str) -> str:
    """``title: what`` as plain text that fits the figure.

    Control characters are shown escaped, characters the font cannot draw become ``?``, and
    the text is wrapped to at most three lines (the last ending in an ellipsis when cut), so a
    long trial name neither leaves the figure nor squeezes the plot away.
    """
    import textwrap

    title = _drawable(printable(str(title)))
    text = f"{title}: {what}" if title else what[:1].upper() + what[1:]
    lines = textwrap.wrap(text, _TITLE_WIDTH) or [text]
    if len(lines) > _TITLE_LINES:
        lines = lines[:_TITLE_LINES]
        lines[-1] = lines[-1][:_TITLE_WIDTH - 1].rstrip() + "\u2026"
    return "\n".join(lines)


def _drawable(text: str) -> str:
    """``text`` with each character the figure font has no glyph for replaced by ``?``."""
    if text.isascii():
        return text
    known = _font_characters()
    if known is None:
        return text
    return "".join(ch if ord(ch) in known or ch.isspace() else "?" for ch in text)


def _font_characters() -> frozenset[int] | None:
    """Code points of the font figures are drawn with (None when it cannot be read)."""
    from matplotlib import font_manager, rcParams

    try:
        path = font_manager.findfont(font_manager.FontProperties(family=rcParams["font.family"]))
    except (ValueError, RuntimeError, OSError):  # pragma: no cover - broken font setup
        return None
    return _charmap(path)


@functools.lru_cache(maxsize=8)
def _charmap(path: str) -> frozenset[int] | None:
    from matplotlib import ft2font

    try:
        return frozenset(ft2font.FT2Font(path).get_charmap())
    except (OSError, RuntimeError, ValueError):  # pragma: no cover - unreadable font file
        return None


def _design_dict(ds: Any) -> dict[str, Any]:
    try:
        return json.loads(ds.attrs["design"])
    except (KeyError, TypeError, ValueError):
        return {}


def _assumed_words(info: dict[str, Any]) -> str:
    """"assumed hazard ratio (0.75)", "assumed effect (3 metres)": the effect classical power
    is computed at, from a dataset's design record."""
    endpoint = info.get("endpoint", {})
    assumed = info.get("assumed_effect")
    name, _, unit = _effect_scale(endpoint) if endpoint else ("effect", "", "")
    if unit != "ratio":
        name = "effect"
    if not isinstance(assumed, int | float):
        return f"assumed {name}"
    if unit == "percentage points":
        return f"assumed {name} ({100 * assumed:.4g} percentage points)"
    if unit in ("ratio", "units of the outcome", ""):
        return f"assumed {name} ({assumed:g})"
    return f"assumed {name} ({assumed:g} {unit})"


def _legend_value(design: TrialDesign, value: float) -> str:
    """An effect as the prior figure's axis shows it: percentage points for rates, with the
    outcome's unit when it has one ("0.15" -> "15 percentage points", "22 metres")."""
    unit = _effect_scale(design.endpoint)[2]
    if unit == "percentage points":
        return f"{100 * value:.4g} percentage points"
    if unit in ("ratio", "units of the outcome", ""):
        return f"{value:g}"
    return f"{value:g} {unit}"


def _check_dataset(ds: Any, owner: str, needed: Sequence[str] = ("power", "assurance")) -> None:
    missing = [name for name in needed if not hasattr(ds, "data_vars") or name not in ds]
    if missing or "n" not in getattr(ds, "dims", ()):
        raise AssuranceInputError(
            f"The 'ds' parameter of {owner} must be the dataset returned by "
            f"assurance.evaluate (dimension 'n' and variables {', '.join(needed)}). "
            f"Got {type(ds).__name__} instead."
        )


def _endpoint_dict(endpoint: dict[str, Any] | Any) -> dict[str, Any]:
    if isinstance(endpoint, dict):
        return endpoint
    try:
        return dict(endpoint.to_dict())
    except (AttributeError, TypeError, ValueError):
        return {}


_RATIO_NAMES = {"time_to_event": "hazard ratio", "counts": "rate ratio"}
_BINARY_NAMES = {"risk_ratio": "risk ratio", "odds_ratio": "odds ratio"}


def _effect_scale(endpoint: dict[str, Any] | Any) -> tuple[str, str, str]:
    """(name, what it compares, unit) of an endpoint's effect, in plain words.

    ``unit`` is ``"ratio"`` for ratio effects (drawn on a log axis labelled with ratios),
    ``"percentage points"`` for differences in rates (ticks multiplied by 100), the outcome's
    unit when the endpoint names one, and ``"units of the outcome"`` otherwise.
    """
    info = _endpoint_dict(endpoint)
    kind = info.get("kind")
    single = info.get("layout") == "single_arm"
    if kind in _RATIO_NAMES or (kind == "binary" and info.get("scale") in _BINARY_NAMES):
        name = _RATIO_NAMES.get(kind) or _BINARY_NAMES[info["scale"]]
        return name, ("single arm / reference" if single else "treatment / control"), "ratio"
    if kind == "binary":
        if single:
            return "response rate minus the reference rate", "", "percentage points"
        return "difference in response rates", "treatment minus control", "percentage points"
    unit = info.get("unit") or getattr(endpoint, "unit", None)
    unit = _drawable(printable(str(unit))) if unit else "units of the outcome"
    if kind not in (None, "continuous"):  # an endpoint this module does not know by name
        name = str(getattr(endpoint, "effect_name", None) or "effect")
        return name, "", "ratio" if getattr(endpoint, "ratio_scale", False) else unit
    if single:
        return "mean change", "", unit
    return "difference in means", "treatment minus control", unit


def _effect_label(endpoint: dict[str, Any] | Any, prefix: str = "True ") -> str:
    """Axis label of an effect on its natural scale, with its unit and direction."""
    info = _endpoint_dict(endpoint)
    name, compares, unit = _effect_scale(endpoint)
    notes = ["log scale" if unit == "ratio" else unit]
    if info.get("better", getattr(endpoint, "better", None)) == "lower":
        notes.append("lower is better")
    head = prefix + name if prefix else name[:1].upper() + name[1:]
    if compares:
        head += f", {compares}"
    return f"{head} ({'; '.join(notes)})"


def _effect_word(endpoint: dict[str, Any] | Any) -> str:
    """The x label of the prior figure (kept for callers of the old name)."""
    return _effect_label(endpoint)


def _ratio_ticks(ax: Axes, lo: float, hi: float, axis: str = "x") -> None:
    """Label a log-ratio axis with ratios (0.5, 0.8, 1, 1.25, ...)."""
    from matplotlib.ticker import FixedLocator, FuncFormatter

    nice = np.array([0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0, 1.1, 1.25,
                     1.5, 2.0, 3.0, 5.0, 10.0, 20.0])
    ticks = np.log(nice[(np.log(nice) >= lo) & (np.log(nice) <= hi)])
    if ticks.size > 9:
        ticks = ticks[:: math.ceil(ticks.size / 9)]
    target = ax.xaxis if axis == "x" else ax.yaxis
    if ticks.size >= 2:
        target.set_major_locator(FixedLocator(ticks))
    target.set_major_formatter(FuncFormatter(lambda v, _pos: f"{math.exp(v):.3g}"))


def _percent_ticks(ax: Axes, axis: str = "x") -> None:
    """Show proportions on an axis as percentage points (0.15 -> 15)."""
    from matplotlib.ticker import FuncFormatter

    target = ax.xaxis if axis == "x" else ax.yaxis
    target.set_major_formatter(FuncFormatter(lambda v, _pos: f"{100 * v:.4g}"))


def _effect_axis(ax: Axes, endpoint: dict[str, Any] | Any, lo: float, hi: float,
                 prefix: str = "True ", axis: str = "x") -> None:
    """Label an axis of effects (log scale for ratios) with the effect's name and unit."""
    unit = _effect_scale(endpoint)[2]
    if unit == "ratio":
        _ratio_ticks(ax, lo, hi, axis)
    elif unit == "percentage points":
        _percent_ticks(ax, axis)
    setter = ax.set_xlabel if axis == "x" else ax.set_ylabel
    setter(_effect_label(endpoint, prefix), fontsize=10.5, parse_math=False)


_SIZE_LABEL = "Total sample size (patients)"


def _whole_size_ticks(ax: Axes) -> None:
    """Ticks of a size axis at whole numbers of patients only (no 32.5 patients)."""
    from matplotlib.ticker import MaxNLocator

    ax.xaxis.set_major_locator(MaxNLocator(nbins="auto", steps=[1, 2, 2.5, 5, 10],
                                           integer=True))


def _size_axis(ax: Axes, ds: Any, lo: float, hi: float) -> None:
    """The x axis of a figure over sizes: its label, and expected events on top when known."""
    ax.set_xlim(lo, hi if hi > lo else lo + 1)
    _whole_size_ticks(ax)
    ax.set_xlabel(_SIZE_LABEL, fontsize=10.5, parse_math=False)
    _events_axis(ax, ds)


def _events_axis(ax: Axes, ds: Any) -> Any:
    """A secondary x axis on top with the expected number of events at each size.

    Uses the coordinate ``expected_events`` over ``n`` (time-to-event plans); sizes between
    the computed ones are interpolated linearly. Returns the secondary axis or None.
    """
    if "expected_events" not in getattr(ds, "coords", {}) or "n" not in ds.dims:
        return None
    n = np.asarray(ds["n"].values, dtype=float)
    events = np.asarray(ds["expected_events"].values, dtype=float).reshape(-1)
    if events.shape != n.shape:
        return None
    ok = np.isfinite(n) & np.isfinite(events)
    n, events = n[ok], events[ok]
    if n.size < 2:
        return None
    order = np.argsort(n)
    n, events = n[order], events[order]
    keep = np.concatenate([[True], np.diff(events) > 0]) & np.concatenate(
        [[True], np.diff(n) > 0])
    n, events = n[keep], events[keep]
    if n.size < 2:
        return None

    def to_events(x: Any) -> Any:
        return np.interp(x, n, events, left=np.nan, right=np.nan)

    def to_size(e: Any) -> Any:
        return np.interp(e, events, n, left=np.nan, right=np.nan)

    top = ax.secondary_xaxis("top", functions=(to_events, to_size))
    top.tick_params(labelsize=9, colors="#333333")
    top.set_xlabel("Expected events (at the assumed effect)", fontsize=9.5, parse_math=False,
                   color="#333333")
    return top


def _place_legend(ax: Axes, own: bool, locs: Sequence[str] = (
        "lower right", "upper left", "lower left", "upper right", "center right",
        "center left"), **kwargs: Any) -> None:
    """The legend inside the axes where it covers no curve or marker; otherwise outside.

    Outside means under the figure (a figure this module made) or to the right of the axes
    (axes the caller gave).
    """
    from ._label_placement import obstacles, renderer_of

    handles, _ = ax.get_legend_handles_labels()
    if not handles:
        return
    renderer = renderer_of(ax.figure)
    obs = obstacles(ax, renderer)
    inside = ax.bbox
    for loc in locs:
        legend = _legend(ax, loc=loc, **kwargs)
        box = tuple(legend.get_window_extent(renderer).extents)
        if box[0] >= inside.x0 and box[2] <= inside.x1 and box[1] >= inside.y0 and \
                box[3] <= inside.y1 and not obs.blocks(box):
            return
    legend.remove()
    if own:
        _legend_below(ax)
    else:
        _legend(ax, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)


# ------------------------------------------------------------------------------------------
# the design prior
# ------------------------------------------------------------------------------------------
def _quantile(prior: Any, q: float) -> float | None:
    """``prior.ppf(q)``, or bisection on the cdf where ``ppf`` cannot answer."""
    try:
        value = float(prior.ppf(q))
        return value if math.isfinite(value) else None
    except (ArithmeticError, ValueError, RuntimeError):
        pass
    try:
        lo, hi = -1.0, 1.0
        for _ in range(200):
            if float(prior.cdf(lo)) < q:
                break
            lo *= 2
        for _ in range(200):
            if float(prior.cdf(hi)) >= q:
                break
            hi *= 2
        for _ in range(200):
            mid = (lo + hi) / 2
            if float(prior.cdf(mid)) >= q:
                hi = mid
            else:
                lo = mid
        return hi if math.isfinite(hi) else None
    except (ArithmeticError, ValueError, RuntimeError):
        return None


def _plot_range(design: TrialDesign, marks: Sequence[float]) -> tuple[float, float]:
    """x range: central 99.8% of the prior (heavy tails trimmed), widened to the marks."""
    prior = design.design_prior
    lo, hi = _quantile(prior, 0.001), _quantile(prior, 0.999)
    if lo is None or hi is None:  # e.g. a mixture whose mean is undefined: use the parts
        ends = [(_quantile(c, 0.001), _quantile(c, 0.999)) for _, c in prior.parts()]
        lows = [a for a, _ in ends if a is not None]
        highs = [b for _, b in ends if b is not None]
        lo = min(lows) if lows else min(marks)
        hi = max(highs) if highs else max(marks)
    q1, q3 = _quantile(prior, 0.25), _quantile(prior, 0.75)
    if q1 is not None and q3 is not None and q3 > q1:
        lo, hi = max(lo, q1 - 6 * (q3 - q1)), min(hi, q3 + 6 * (q3 - q1))
    lo, hi = min(lo, *marks), max(hi, *marks)
    span = hi - lo
    if span <= 0:
        span = max(1.0, abs(lo))
        lo, hi = lo - span / 2, hi + span / 2
    return lo - 0.06 * span, hi + 0.06 * span


def passable_probability(design: TrialDesign) -> float:
    """Prior probability of the effects at which the rule can be passed with enough patients.

    This is the ceiling of assurance except for a point mass exactly at the edge of that
    region (typically "no effect" in a superiority trial), whose false positives the
    ceiling also counts.

    Examples
    --------
    >>> import assurance as asr
    >>> prior = asr.Mixture([asr.PointMass(0.0), asr.Normal(4.0, 2.5)], [0.25, 0.75])
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), prior)
    >>> round(passable_probability(design), 4), round(design.ceiling(), 4)
    (0.7089, 0.7152)
    """
    return design.benefit_prior.prob_above(design.benefit_rule.lowest_passable_effect())


def _margin(design: TrialDesign) -> tuple[float, str] | None:
    """Where the rule's null value lies on the prior's axis, and its label, when it is not
    "no effect": the non-inferiority margin of a test, or the effect a posterior rule must
    beat. None for a superiority rule against no effect."""
    from ..rules.significance import Significance

    rule = design.rule
    try:
        null = float(design.benefit_rule.null_value)
    except (AttributeError, TypeError, ValueError):
        return None
    if not math.isfinite(null) or abs(null) < 1e-12:
        return None
    position = design.endpoint.sign * null + 0.0
    ratio = bool(getattr(design.endpoint, "ratio_scale", False))
    shown = f"{math.exp(position):.3g}" if ratio else f"{position:g}"
    if isinstance(rule, Significance) and rule.margin > 0:
        return position, f"non-inferiority margin ({shown}: the test's null value)"
    if type(rule).__name__ == "PosteriorProbability":
        return position, f"effect the posterior must beat ({shown})"
    return None


def plot_prior(design: TrialDesign, ax: Axes | None = None) -> Axes:
    """Draw the design prior over the true effect, with the values the plan depends on.

    The continuous part is drawn as a density; each point mass as a vertical spike labelled
    with its probability (spike heights are proportional to probability but, next to a
    density, not on the density's scale). Vertical lines mark the assumed effect, the
    clinically relevant effect (if any) and no effect. The shaded side holds the effects at
    which the success rule can be passed once the trial is large enough; its prior
    probability is the ceiling of assurance. A non-inferiority margin (or the effect a
    posterior rule must beat, when it is not "no effect") is marked too.

    Parameters
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`). Effects are shown on their natural
        scale; for an endpoint where lower is better the shaded side is on the left.
    ax
        Axes to draw into. Without one, a new figure is made on the off-screen canvas.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into (``ax.figure`` is the figure).

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import plot_prior
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0),
    ...                          asr.Mixture([asr.PointMass(0.0), asr.Normal(4.0, 2.5)],
    ...                                      [0.25, 0.75]), relevant_effect=3.0)
    >>> ax = plot_prior(design)
    >>> ax.get_xlabel()
    'True difference in means, treatment minus control (units of the outcome)'
    """
    from ..design import TrialDesign

    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of plot_prior must be a TrialDesign. Got {design!r} "
            "instead."
        )
    own = ax is None
    ax = _axes(ax, (7.6, 5.6))
    _style(ax)
    prior = design.design_prior
    sign = design.endpoint.sign
    ratio = bool(getattr(design.endpoint, "ratio_scale", False))

    def on_axis(value: float) -> float:  # natural effect -> the prior's scale (log for ratios)
        return math.log(value) if ratio else float(value)

    def shown(value: float) -> str:  # a position on the axis, in the natural unit
        return f"{math.exp(value):.3g}" if ratio else f"{value:g}"

    threshold = sign * design.benefit_rule.lowest_passable_effect() + 0.0  # no -0
    ceiling = design.ceiling()
    atoms = [(loc, p) for loc, p in prior.atoms() if p > 0]
    assumed = on_axis(design.assumed_effect)
    relevant = None if design.relevant_effect is None else on_axis(design.relevant_effect)
    marks = [0.0, assumed, threshold, *(loc for loc, _ in atoms)]
    if relevant is not None:
        marks.append(relevant)
    lo, hi = _plot_range(design, marks)

    continuous_weight = 1.0 - sum(p for _, p in atoms)
    region = passable_probability(design)
    if abs(region - ceiling) < 5e-4:
        region_label = f"(prior probability {region:.3f} = ceiling of assurance)"
    else:
        region_label = (f"(prior probability {region:.3f}; ceiling of assurance {ceiling:.3f},\n"
                        f"which adds false positives at exactly {shown(threshold)})")
    side = (threshold, hi) if sign > 0 else (lo, threshold)
    region_label = "effects the rule can pass with enough patients\n" + region_label
    x = np.union1d(np.linspace(lo, hi, 801), [threshold])
    dens = np.nan_to_num(np.asarray(prior.pdf(x), dtype=float), nan=0.0, posinf=0.0)
    peak = float(dens.max()) if continuous_weight > 1e-12 and dens.size else 0.0
    ax.axvspan(*side, color=_SKY, alpha=0.13 if peak > 0 else 0.22, linewidth=0, zorder=0,
               label=None if peak > 0 else region_label)
    if peak > 0:
        ax.plot(x, dens, color="#333333", linewidth=1.6, label="design prior (density)")
        yes = x >= threshold if sign > 0 else x <= threshold
        ax.fill_between(x[yes], dens[yes], color=_SKY, alpha=0.55, linewidth=0,
                        label=region_label)
        ax.fill_between(x[~yes | (x == threshold)], dens[~yes | (x == threshold)],
                        color=_LIGHT, alpha=0.9, linewidth=0)
        ax.set_ylabel("Prior density (probability per unit of the log ratio)" if ratio else
                      "Prior density (probability per unit of effect)", fontsize=10.5,
                      parse_math=False)
    else:
        ax.set_ylabel("Prior probability (probability)", fontsize=10.5, parse_math=False)

    atom_labels = []
    if atoms:
        from ._label_placement import Label, around

        biggest = max(p for _, p in atoms)
        scale = 0.8 * peak / biggest if peak > 0 else 1.0
        for k, (loc, p) in enumerate(atoms):
            h = p * scale
            colour = _PURPLE
            ax.vlines(loc, 0, h, color=colour, linewidth=3.0, zorder=4,
                      label="point mass (labelled with its probability)" if k == 0 else None)
            ax.plot([loc], [h], marker="o", markersize=6, color=colour, zorder=5)
            atom_labels.append(Label(f"P = {p:.3g}", (loc, h), around((4, 10, 18, 28)),
                                     style={"fontsize": 9, "bbox": _TEXT_BOX}))
        top = max(peak, biggest * scale)
    else:
        top = peak
    top = top if top > 0 else 1.0

    ax.axvline(0.0, color=_BLACK, linewidth=1.0, zorder=3,
               label="no effect (ratio 1)" if ratio else "no effect (0)")
    same = relevant is not None and math.isclose(relevant, assumed, rel_tol=1e-9,
                                                 abs_tol=1e-12)
    # when the two coincide, their dashes interleave so both colours stay visible
    ax.axvline(assumed, color=_BLUE, linewidth=1.6,
               linestyle=(0, (4, 4)) if same else (0, (5, 3)), zorder=3,
               label="assumed effect for classical power "
                     f"({_legend_value(design, design.assumed_effect)})")
    if relevant is not None:
        ax.axvline(relevant, color=_GREEN, linewidth=1.6,
                   linestyle=(4, (4, 4)) if same else (0, (6, 2, 1.5, 2)), zorder=3,
                   label=f"clinically relevant effect "
                         f"({_legend_value(design, design.relevant_effect)})")

    margin = _margin(design)
    if margin is not None:
        position, text = margin
        ax.axvline(position, color=_ORANGE, linewidth=1.8, linestyle=(0, (1.5, 1.5)),
                   zorder=3, label=text)

    ax.set_xlim(lo, hi)
    _effect_axis(ax, design.endpoint, lo, hi)
    ax.set_title(_title(design.title, "design prior for the true effect"), fontsize=11.5,
                 loc="left", parse_math=False)
    if own:
        ax.set_ylim(0, top * 1.12)
        _legend_below(ax)
    else:
        ax.set_ylim(0, top * 1.6)  # head room for the legend
        _place_legend(ax, own, ("upper left", "upper right") if sign > 0 else
                      ("upper right", "upper left"), ncol=1)
    if atom_labels:
        from ._label_placement import place_labels

        place_labels(ax, atom_labels)
    return ax


# ------------------------------------------------------------------------------------------
# power and assurance against n
# ------------------------------------------------------------------------------------------
def _band(ax: Axes, n: np.ndarray, value: np.ndarray, se: np.ndarray, colour: str,
          label: str | None) -> None:
    ax.fill_between(n, np.clip(value - 2 * se, 0, 1), np.clip(value + 2 * se, 0, 1),
                    color=colour, alpha=0.25, linewidth=0, label=label)


def plot_power_and_assurance(
    ds: Any,
    ax: Axes | None = None,
    *,
    answers: Sequence[SampleSizeAnswer] | None = (),
) -> Axes:
    """Draw classical power and assurance against the total number of patients.

    Also drawn: conditional assurance (when the design has a relevant effect), a band of
    two Monte Carlo standard errors around assurance (when sigma has a prior), and the
    ceiling that assurance cannot pass, as a dashed line labelled with its value. Labels
    are placed where they cover no curve, marker or other label (a label that fits nowhere
    becomes a numbered footnote under the axes); for a time-to-event design a second axis on
    top gives the expected number of events.

    Parameters
    ----------
    ds
        The dataset from :func:`assurance.evaluate`.
    ax
        Axes to draw into. Without one, a new figure is made on the off-screen canvas.
    answers
        Solved sample sizes (:class:`~assurance.SampleSizeAnswer`) to mark; those not
        reached, or outside the range of ``ds``, are left out. Each target is drawn as a
        dotted line, labelled from the left (the ceiling's label is placed from the right).

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import plot_power_and_assurance
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5))
    >>> ds = asr.evaluate(design, range(20, 401, 20))
    >>> answer = asr.solve_sample_size(design, 0.5)
    >>> ax = plot_power_and_assurance(ds, answers=[answer])
    >>> [float(v) for v in ax.get_ylim()]
    [0.0, 1.0]
    """
    _check_dataset(ds, "plot_power_and_assurance")
    own = ax is None
    ax = _axes(ax)
    _style(ax)
    info = _design_dict(ds)
    n = np.asarray(ds["n"].values, dtype=float)
    power_label = "classical power at the " + _assumed_words(info)

    # markers show which sizes were computed where there are few of them (a line of one or
    # two points needs them; between a dozen sizes the straight segments are only a guide,
    # and response-rate power is not even monotone in n)
    dot = "o" if n.size <= 12 else None
    size = 6.0 if n.size < 4 else 3.5
    ax.plot(n, ds["power"].values, color=_BLUE, linewidth=2.0, marker=dot, markersize=size,
            label=power_label)
    ax.plot(n, ds["assurance"].values, color=_VERMILLION, linewidth=2.4, marker=dot,
            markersize=size, label="assurance (averaged over the design prior)")
    if "assurance_mcse" in ds:
        _band(ax, n, ds["assurance"].values, ds["assurance_mcse"].values, _VERMILLION,
              "assurance \u00b1 2 Monte Carlo standard errors")
    if "conditional_assurance" in ds:
        relevant = info.get("relevant_effect")
        lower = info.get("endpoint", {}).get("better") == "lower"
        sign_text = "\u2264" if lower else "\u2265"
        given = (f"an effect {sign_text} {relevant:g}"
                 if isinstance(relevant, int | float) else "a relevant effect")
        ax.plot(n, ds["conditional_assurance"].values, color=_GREEN, linewidth=1.9,
                linestyle=(0, (6, 2, 1.5, 2)), label=f"conditional assurance (given {given})")
        if "conditional_assurance_mcse" in ds:
            _band(ax, n, ds["conditional_assurance"].values,
                  ds["conditional_assurance_mcse"].values, _GREEN, None)

    ceiling = float(ds["ceiling"])
    ax.axhline(ceiling, color=_BLACK, linewidth=1.3, linestyle=(0, (5, 3)), zorder=2,
               label=f"ceiling of assurance ({ceiling:.3f})")

    from ._label_placement import Label, along, around, place_labels

    lines = [Label(f"ceiling {ceiling:.3f}", (1.0, ceiling), along("right"),
                   ax.get_yaxis_transform(), {"fontsize": 9, "color": _BLACK,
                                              "bbox": _TEXT_BOX}, leader_from=1e9,
                   footnote=False)]  # the legend gives the ceiling's value too
    # targets: a dotted grey line each, labelled from the left end (the ceiling's label
    # starts from the right end, so a target at the ceiling's height stays readable)
    targets: dict[float, list[str]] = {}
    for answer in answers or ():
        if answer.target is not None and 0.0 < float(answer.target) < 1.0:
            name = _QUANTITY_NAME.get(answer.quantity, answer.quantity)
            if not answer.reached:
                name += " not reached"
            targets.setdefault(round(float(answer.target), 6), []).append(name)
    for k, (value, names) in enumerate(sorted(targets.items())):
        ax.axhline(value, color="#595959", linewidth=1.0, linestyle=(0, (1, 2.5)), zorder=2,
                   label="target (dotted)" if k == 0 else None)
        lines.append(Label(f"target {value:g} ({', '.join(names)})", (0.0, value),
                            along("left"), ax.get_yaxis_transform(),
                            {"fontsize": 8.5, "color": "#333333", "bbox": _TEXT_BOX},
                            leader_from=1e9))

    lo, hi = float(n.min()), float(n.max())
    labels = []  # the solved sizes' labels first: they must stay near their markers
    shown = sorted((a for a in answers or () if a.reached and a.n_total is not None
                    and a.achieved is not None and lo <= a.n_total <= hi),
                   key=lambda a: a.n_total)
    groups: list[list[Any]] = []  # sizes almost at the same point share one label
    for answer in shown:
        last = groups[-1][-1] if groups else None
        if last is not None and answer.n_total - last.n_total <= 0.04 * (hi - lo) and \
                abs(answer.achieved - last.achieved) <= 0.03:
            groups[-1].append(answer)
        else:
            groups.append([answer])
    for group in groups:
        for answer in group:
            colour = _QUANTITY_COLOUR.get(answer.quantity, _GREY)
            ax.vlines(answer.n_total, 0, answer.achieved, color=colour, linewidth=1.0,
                      linestyle=":", zorder=3)
            ax.plot([answer.n_total], [answer.achieved], marker="o", markersize=7,
                    markerfacecolor=colour, markeredgecolor=_BLACK, zorder=5,
                    linestyle="none")
        text = "\n".join(f"n = {a.n_total} "
                         f"({_QUANTITY_NAME.get(a.quantity, a.quantity)} {a.target:g})"
                         for a in group)
        if len(group) == 1:
            text = text.replace(" (", "\n(", 1)
        first = group[0]
        labels.append(Label(text, (first.n_total, first.achieved), around(),
                            style={"fontsize": 8.5, "bbox": _TEXT_BOX},
                            note="; ".join(" ".join(line.split())
                                           for line in text.split("\n")) if len(group) > 1
                            else None))

    ax.set_ylim(0.0, 1.0)
    _size_axis(ax, ds, lo, hi)
    ax.set_ylabel("Chance of success (probability)", fontsize=10.5, parse_math=False)
    title = ds.attrs.get("title", "")
    ax.set_title(_title(title, "chance of success by sample size"), fontsize=11.5, loc="left",
                 parse_math=False)
    _place_legend(ax, own)
    place_labels(ax, labels + lines)
    return ax


# ------------------------------------------------------------------------------------------
# decomposition of success
# ------------------------------------------------------------------------------------------
def plot_decomposition(ds: Any, ax: Axes | None = None) -> Axes:
    """Split each trial size's outcomes by success and by whether the effect matters.

    Stacked from the bottom: success with a relevant effect; no success although the
    effect is relevant (the two together are the prior probability of a relevant effect,
    drawn as a line); success although the effect is not relevant. The rest is no success
    with an effect that is not relevant. A design without a relevant effect is split by
    "treatment truly better" instead.

    Parameters
    ----------
    ds
        The dataset from :func:`assurance.evaluate`.
    ax
        Axes to draw into. Without one, a new figure is made on the off-screen canvas.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import plot_decomposition
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5),
    ...                          relevant_effect=3.0)
    >>> ax = plot_decomposition(asr.evaluate(design, range(20, 401, 20)))
    >>> len(ax.collections) >= 3
    True
    """
    _check_dataset(ds, "plot_decomposition")
    own = ax is None
    ax = _axes(ax, (7.6, 5.4))
    _style(ax)
    n = np.asarray(ds["n"].values, dtype=float)
    success = np.asarray(ds["assurance"].values, dtype=float)
    if "prob_success_and_relevant" in ds and "prob_relevant" in ds:
        info = _design_dict(ds)
        rel = info.get("relevant_effect")
        lower = info.get("endpoint", {}).get("better") == "lower"
        sign_text = "\u2264" if lower else "\u2265"
        where = f" ({sign_text} {rel:g})" if isinstance(rel, int | float) else ""
        both = np.asarray(ds["prob_success_and_relevant"].values, dtype=float)
        p_good = float(ds["prob_relevant"])
        names = (f"success, and the effect is relevant{where}",
                 "no success, though the effect is relevant",
                 "success, but the effect is not relevant",
                 "no success, and the effect is not relevant")
        line_label = f"prior probability of a relevant effect ({p_good:.3f})"
    else:
        both = np.asarray(ds["prob_success_and_benefit"].values, dtype=float)
        p_good = float(ds["prob_benefit"])
        names = ("success, and the treatment is truly better",
                 "no success, though the treatment is better",
                 "success, but the treatment is not better",
                 "no success, and the treatment is not better")
        line_label = f"prior probability that the treatment is better ({p_good:.3f})"
    miss = np.clip(p_good - both, 0, 1)
    spurious = np.clip(success - both, 0, 1)
    layers = [both, both + miss, np.minimum(both + miss + spurious, 1.0)]
    colours = [_GREEN, _VERMILLION, _ORANGE]
    bottom = np.zeros_like(n)
    for top, colour, name in zip(layers, colours, names[:3], strict=True):
        ax.fill_between(n, bottom, top, color=colour, alpha=0.75, linewidth=0, label=name)
        bottom = top
    ax.fill_between(n, bottom, 1.0, color=_LIGHT, alpha=0.8, linewidth=0, label=names[3])
    ax.axhline(p_good, color=_BLACK, linewidth=1.1, linestyle=(0, (4, 3)), label=line_label)
    ax.set_ylim(0.0, 1.0)
    _size_axis(ax, ds, float(n.min()), float(n.max()))
    ax.set_ylabel("Share of trials (probability)", fontsize=10.5, parse_math=False)
    title = ds.attrs.get("title", "")
    ax.set_title(_title(title, "what a success or a failure would mean"), fontsize=11.5,
                 loc="left", parse_math=False)
    if own:
        _legend_below(ax)
    else:
        _legend(ax, loc="upper left")
    return ax


# ------------------------------------------------------------------------------------------
# go / consider / stop
# ------------------------------------------------------------------------------------------
_ZONE_STYLE = (("go", "go", _GREEN, "-"), ("consider", "consider", _ORANGE, (0, (5, 2))),
               ("stop", "stop", _VERMILLION, (0, (6, 2, 1.5, 2))))


def plot_zones(ds: Any, ax: Axes | None = None, planned_n: int | None = None) -> Axes:
    """Draw the probabilities of go, consider and stop against the total sample size.

    The three probabilities (under the design prior) add up to one at each size; they are
    drawn as stacked bands, go at the bottom, with the boundaries between them as lines. A
    vertical line marks the planned size, labelled with the three probabilities there.

    Parameters
    ----------
    ds
        A dataset holding ``prob_go``, ``prob_consider`` and ``prob_stop`` over ``n`` (a
        plan's results with zones, or :func:`assurance.rules.zones.evaluate_zones`).
    ax
        Axes to draw into. Without one, a new figure is made on the off-screen canvas.
    planned_n
        The planned total size to mark (the nearest size in ``ds`` is labelled), or None.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.rules.zones import GoConsiderStop, evaluate_zones
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
    >>> ds = evaluate_zones(design, GoConsiderStop(2.0, 4.0), range(50, 401, 50))
    >>> plot_zones(ds, planned_n=200).get_ylabel()
    'Chance of each decision (probability)'
    """
    needed = ("prob_go", "prob_consider", "prob_stop")
    _check_dataset(ds, "plot_zones", needed)
    own = ax is None
    ax = _axes(ax)
    _style(ax)
    n = np.asarray(ds["n"].values, dtype=float)
    values = {name: np.clip(np.asarray(ds[f"prob_{name}"].values, dtype=float), 0, 1)
              for name in ("go", "consider", "stop")}
    bottom = np.zeros_like(n)
    for name, word, colour, style in _ZONE_STYLE:
        top = np.minimum(bottom + values[name], 1.0)
        ax.fill_between(n, bottom, top, color=colour, alpha=0.35, linewidth=0,
                        label=f"P({word})")
        if name != "stop":
            ax.plot(n, top, color=colour, linewidth=1.8, linestyle=style)
        bottom = top
    lo, hi = float(n.min()), float(n.max())
    labels = []
    if planned_n is not None:
        k = int(np.argmin(np.abs(n - float(planned_n))))
        at = float(n[k])
        ax.axvline(at, color=_BLACK, linewidth=1.2, linestyle=(0, (4, 3)), zorder=4)
        from ._label_placement import Label, around

        text = (f"planned n = {int(at)}\ngo {values['go'][k]:.0%}, consider "
                f"{values['consider'][k]:.0%}, stop {values['stop'][k]:.0%}")
        labels.append(Label(text, (at, 0.5), around((6, 14, 24, 40, 60, 90, 130)),
                            style={"fontsize": 8.5, "bbox": _TEXT_BOX}))
    ax.set_ylim(0.0, 1.0)
    _size_axis(ax, ds, lo, hi)
    ax.set_ylabel("Chance of each decision (probability)", fontsize=10.5, parse_math=False)
    ax.set_title(_title(ds.attrs.get("title", ""), "go, consider or stop by sample size"),
                 fontsize=11.5, loc="left", parse_math=False)
    if own:
        _legend_below(ax)
    else:
        _legend(ax, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    if labels:
        from ._label_placement import place_labels

        place_labels(ax, labels)
    return ax


def plot_zone_characteristic(ds: Any, n: int, ax: Axes | None = None) -> Axes:
    """Draw P(go), P(consider) and P(stop) at one size against the true effect.

    The operating characteristic of the go / consider / stop rule: for each fixed true
    effect (coordinate ``zone_effect``, natural scale), the probability of each decision at
    total size ``n`` (the nearest size in ``ds``).

    Parameters
    ----------
    ds
        A dataset holding ``oc_go``, ``oc_consider`` and ``oc_stop`` over ``n`` and
        ``zone_effect``.
    n
        The total sample size to show.
    ax
        Axes to draw into. Without one, a new figure is made on the off-screen canvas.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.rules.zones import GoConsiderStop, evaluate_zones
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
    >>> ds = evaluate_zones(design, GoConsiderStop(2.0, 4.0), [100, 200],
    ...                     effects=[0, 1, 2, 3, 4, 5, 6])
    >>> plot_zone_characteristic(ds, 200).get_ylabel()
    'Chance of the decision (probability)'
    """
    needed = ("oc_go", "oc_consider", "oc_stop")
    _check_dataset(ds, "plot_zone_characteristic", needed)
    if "zone_effect" not in ds.dims:
        raise AssuranceInputError(
            "The 'ds' parameter of plot_zone_characteristic must have the dimension "
            f"'zone_effect'. Got dimensions {tuple(ds.dims)} instead.")
    from .._validation import check_real

    size = check_real(n, "n", "plot_zone_characteristic", low=0, low_open=True)
    own = ax is None
    ax = _axes(ax)
    _style(ax)
    sizes = np.asarray(ds["n"].values, dtype=float)
    k = int(np.argmin(np.abs(sizes - size)))
    shown_n = int(sizes[k])
    info = _design_dict(ds)
    endpoint = info.get("endpoint", {})
    ratio = _effect_scale(endpoint)[2] == "ratio" if endpoint else False
    effects = np.asarray(ds["zone_effect"].values, dtype=float)
    order = np.argsort(effects)
    x = np.log(effects[order]) if ratio else effects[order]
    dot = "o" if x.size <= 12 else None
    for name, word, colour, style in _ZONE_STYLE:
        y = np.asarray(ds[f"oc_{name}"].isel(n=k).values, dtype=float)[order]
        ax.plot(x, y, color=colour, linewidth=2.0, linestyle=style, marker=dot,
                markersize=5, label=f"P({word})")
    lo, hi = float(x.min()), float(x.max())
    pad = 0.04 * (hi - lo) if hi > lo else 1.0
    ax.set_xlim(lo - pad, hi + pad)
    ax.set_ylim(-0.02, 1.02)
    if endpoint:
        _effect_axis(ax, endpoint, lo - pad, hi + pad)
    else:
        ax.set_xlabel("True effect (units of the outcome)", fontsize=10.5, parse_math=False)
    ax.set_ylabel("Chance of the decision (probability)", fontsize=10.5, parse_math=False)
    ax.set_title(_title(ds.attrs.get("title", ""),
                        f"decisions at n = {shown_n} by true effect"),
                 fontsize=11.5, loc="left", parse_math=False)
    _place_legend(ax, own, ("center right", "center left", "upper center", "lower center"))
    return ax


# ------------------------------------------------------------------------------------------
# sensitivity to the design prior
# ------------------------------------------------------------------------------------------
def plot_sensitivity_map(ds: Any, design: TrialDesign | None = None, ax: Axes | None = None,
                         *, target: float | None = None) -> Axes:
    """Draw assurance at the planned size over the design prior's centre and spread.

    Filled contours of ``sensitivity_map`` over ``map_centre`` x ``map_spread`` (the centre
    and SD of the prior's continuous part, on the prior's scale: the log ratio for ratio
    effects, shown to the reader as ratios); the elicited prior is marked, and the
    assurance target's contour is drawn and labelled when a target is given or known.

    Parameters
    ----------
    ds
        A dataset holding ``sensitivity_map`` (a plan's results, or
        :func:`assurance.sensitivity.prior_sensitivity`); points marked -1 (no prior of
        that centre and spread) are left blank.
    design
        The trial, for the effect's name and unit (else read from ``ds.attrs["design"]``).
    ax
        Axes to draw into. Without one, a new figure is made on the off-screen canvas.
    target
        The assurance target whose contour to draw; by default
        ``ds.attrs["sensitivity_target_assurance"]`` when present.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into (the colour bar is beside it).

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> c, s = np.linspace(0, 8, 9), np.linspace(1, 4, 7)
    >>> grid = 1 / (1 + np.exp(-(c[:, None] - 4) / s[None, :]))
    >>> ds = xr.Dataset({"sensitivity_map": (("map_centre", "map_spread"), grid),
    ...                  "sensitivity_planned_n": ((), 200)},
    ...                 coords={"map_centre": c, "map_spread": s},
    ...                 attrs={"sensitivity_elicited_centre": 4.0,
    ...                        "sensitivity_elicited_spread": 2.0})
    >>> ax = plot_sensitivity_map(ds, target=0.6)
    >>> ax.get_xlabel()
    'Prior centre: difference in means, treatment minus control (units of the outcome)'
    """
    if "sensitivity_map" not in getattr(ds, "data_vars", {}) or \
            not {"map_centre", "map_spread"} <= set(getattr(ds, "dims", ())):
        raise AssuranceInputError(
            "The 'ds' parameter of plot_sensitivity_map must hold 'sensitivity_map' over "
            "'map_centre' and 'map_spread' (a plan's results or prior_sensitivity). Got "
            f"{type(ds).__name__} instead.")
    if target is not None:
        from .._validation import check_real

        target = check_real(target, "target", "plot_sensitivity_map", low=0, high=1,
                            low_open=True, high_open=True)
    elif ds.attrs.get("sensitivity_target_assurance") is not None:
        target = float(ds.attrs["sensitivity_target_assurance"])
    from matplotlib.colors import BoundaryNorm

    ax = _axes(ax, (7.6, 5.2))
    grid = np.asarray(ds["sensitivity_map"].transpose("map_spread", "map_centre").values,
                      dtype=float)
    grid = np.ma.masked_less(grid, 0.0)
    centres = np.asarray(ds["map_centre"].values, dtype=float)
    spreads = np.asarray(ds["map_spread"].values, dtype=float)
    endpoint: Any = design.endpoint if design is not None else \
        _design_dict(ds).get("endpoint", {})
    name, compares, unit = _effect_scale(endpoint)
    levels = np.linspace(0.0, 1.0, 11)
    mesh = ax.contourf(centres, spreads, grid, levels=levels, cmap="cividis",
                       norm=BoundaryNorm(levels, 256), extend="neither")
    planned = ds.get("sensitivity_planned_n")
    at = f" at n = {int(planned)}" if planned is not None else " at the planned size"
    bar = ax.figure.colorbar(mesh, ax=ax, ticks=levels[::2])
    bar.set_label(f"Probability of success{at}", fontsize=10, parse_math=False)
    from ._label_placement import Label, around, place_labels

    labels = []
    if target is not None and grid.count() and grid.min() < target < grid.max():
        lines = ax.contour(centres, spreads, grid, levels=[target], colors=_BLACK,
                           linewidths=1.8, linestyles=[(0, (5, 2))])
        # the label goes at the contour's middle point, placed clear of the rest
        paths = [p for p in lines.get_paths() if len(p.vertices)]
        if paths:
            longest = max(paths, key=lambda p: len(p.vertices))
            mid = longest.vertices[len(longest.vertices) // 2]
            from matplotlib.lines import Line2D

            for path in paths:  # the contour as lines, so labels keep off it
                ax.add_line(Line2D(path.vertices[:, 0], path.vertices[:, 1], color=_BLACK,
                                   linewidth=1.8, alpha=0.0))
            labels.append(Label(f"target {target:g}", (float(mid[0]), float(mid[1])),
                                around(), style={"fontsize": 9, "bbox": _TEXT_BOX}))
    m = ds.attrs.get("sensitivity_elicited_centre")
    sd = ds.attrs.get("sensitivity_elicited_spread")
    if m is not None and sd is not None:
        ax.plot([float(m)], [float(sd)], marker="*", markersize=15, color="white",
                markeredgecolor=_BLACK, linestyle="none", zorder=5)
        labels.append(Label("elicited prior", (float(m), float(sd)), around(),
                            style={"fontsize": 9, "bbox": _TEXT_BOX}))
    holes = bool(np.ma.count_masked(grid))  # beta priors: not every centre and spread exists
    if holes:
        ax.patch.set_facecolor("white")
        ax.patch.set_hatch("////")
        ax.patch.set_edgecolor("#b8bec4")
    lo, hi = float(centres.min()), float(centres.max())
    ax.set_xlim(lo, hi)
    ax.set_ylim(float(spreads.min()), float(spreads.max()))
    if unit == "ratio":
        _ratio_ticks(ax, lo, hi)
        ax.set_xlabel(f"Prior centre: {name} (median, {compares}; log scale)",
                      fontsize=10.5, parse_math=False)
        ax.set_ylabel(f"Prior spread: SD (log {name})", fontsize=10.5, parse_math=False)
    else:
        if unit == "percentage points":
            _percent_ticks(ax)
            _percent_ticks(ax, "y")
        where = f", {compares}" if compares else ""
        ax.set_xlabel(f"Prior centre: {name}{where} ({unit})", fontsize=10.5,
                      parse_math=False)
        ax.set_ylabel(f"Prior spread: SD ({unit})", fontsize=10.5, parse_math=False)
    if holes:
        ax.set_xlabel(ax.get_xlabel() + "\nhatched: no beta prior on the treatment rate has "
                      "this centre and spread", fontsize=10.5, parse_math=False)
    ax.set_title(_title(ds.attrs.get("title", ""),
                        "how the chance of success moves with the prior"),
                 fontsize=11.5, loc="left", parse_math=False)
    place_labels(ax, labels)
    return ax


# ------------------------------------------------------------------------------------------
# saving
# ------------------------------------------------------------------------------------------
def figure_bytes(fig: Figure, fmt: str = "png", *, dpi: int = _DPI) -> bytes:
    """Render a figure to PNG or SVG bytes, without file-system side effects.

    Dates and software names are left out of the file, so the same figure gives the same
    bytes on every run.

    Parameters
    ----------
    fig
        A matplotlib figure (``ax.figure`` for the axes the plot functions return).
    fmt
        ``"png"`` or ``"svg"``.
    dpi
        Resolution of a PNG.

    Returns
    -------
    bytes
        The encoded image.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.report import figure_bytes, plot_prior
    >>> ax = plot_prior(asr.TrialDesign(asr.ContinuousEndpoint(sigma=1.0), asr.Normal(0.4, 0.2)))
    >>> figure_bytes(ax.figure, "png")[:4]
    b'\\x89PNG'
    """
    import matplotlib

    if fmt not in ("png", "svg"):
        raise AssuranceInputError(
            f"The 'fmt' parameter of figure_bytes must be one of 'png', 'svg'. Got {fmt!r} "
            "instead."
        )
    if fig.canvas is None or type(fig.canvas).__name__ == "FigureCanvasBase":
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    metadata: dict[str, Any] = {"Software": None} if fmt == "png" else {"Date": None}
    with matplotlib.rc_context({"svg.hashsalt": "assurance-report"}), \
            warnings.catch_warnings():
        # titles are cleaned of characters the font lacks; any other text (labels a user
        # added) is drawn with an empty box rather than a warning with a source line
        warnings.filterwarnings("ignore", message=r"Glyph \d+ .*missing from",
                                category=UserWarning)
        fig.savefig(buffer, format=fmt, dpi=dpi, metadata=metadata, facecolor="white")
    return buffer.getvalue()


def save_figure(
    fig: Figure,
    path_without_suffix: str | os.PathLike[str],
    overwrite: bool = False,
    *,
    dpi: int = _DPI,
    formats: Sequence[str] = ("png", "svg"),
) -> tuple[Path, ...]:
    """Write a figure as PNG and SVG (or the formats asked for) next to each other.

    Each file is written to a temporary file in the same folder and then moved into
    place, so a reader never sees half a file. Nothing is written when any of the files
    already exists and ``overwrite`` is False.

    Parameters
    ----------
    fig
        A matplotlib figure (``ax.figure`` for the axes the plot functions return).
    path_without_suffix
        Where to write, without suffix: ``out/prior`` gives ``out/prior.png`` and
        ``out/prior.svg``. A trailing ``.png`` or ``.svg`` is dropped. The folder must
        exist.
    overwrite
        Replace existing files. Off by default.
    dpi
        Resolution of the PNG.
    formats
        ``"png"``, ``"svg"`` or both (the default); SVG takes longer to write.

    Returns
    -------
    tuple of pathlib.Path
        The paths written, in the order of ``formats``.

    Raises
    ------
    AssuranceInputError
        When a file exists and ``overwrite`` is False, or the folder does not exist.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> import assurance as asr
    >>> from assurance.report import plot_prior, save_figure
    >>> ax = plot_prior(asr.TrialDesign(asr.ContinuousEndpoint(sigma=1.0), asr.Normal(0.4, 0.2)))
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     png, svg = save_figure(ax.figure, pathlib.Path(folder) / "prior")
    ...     print(png.name, svg.name, png.stat().st_size > 0)
    ...     (only,) = save_figure(ax.figure, pathlib.Path(folder) / "small", formats=["png"])
    prior.png prior.svg True
    """
    chosen = (formats,) if isinstance(formats, str) else formats
    if not isinstance(chosen, Sequence) or not chosen or \
            any(f not in ("png", "svg") for f in chosen):
        raise AssuranceInputError(
            "The 'formats' parameter of save_figure must be one or more of 'png', 'svg'. "
            f"Got {formats!r} instead.")
    base = Path(path_without_suffix)
    if base.suffix.lower() in (".png", ".svg"):
        base = base.with_suffix("")
    paths = [base.parent / f"{base.name}.{fmt}" for fmt in dict.fromkeys(chosen)]
    for path in paths:  # refuse before writing anything
        check_target(path, "save_figure", overwrite)
    for path in paths:
        write_atomic(path, figure_bytes(fig, path.suffix[1:], dpi=dpi), overwrite=overwrite,
                     owner="save_figure")
    return tuple(paths)


# ------------------------------------------------------------------------------------------
# posterior interval width against n
# ------------------------------------------------------------------------------------------
def plot_interval_width(ds: Any, answers: Sequence[Any] = (), ax: Axes | None = None) -> Axes:
    """Posterior interval width against total n, with the target length.

    Draws the mean width, the 90th centile and the worst width over the most likely data
    sets (with +-2 Monte Carlo standard error bands under simulation), the frequentist
    confidence interval width at the assumed values, the target length, and a marker at
    each criterion's solved n.

    Parameters
    ----------
    ds
        A dataset holding ``width_mean`` (from :func:`assurance.precision.interval_width_curve`,
        alone or merged into :func:`assurance.evaluate`'s results), with ``attrs["length"]``
        or ``answers`` giving the target length.
    answers
        :class:`~assurance.precision.PrecisionAnswer` objects to mark (others are skipped).
    ax
        Axes to draw into; a new off-screen figure when None.

    Examples
    --------
    >>> import assurance as asr
    >>> from assurance.precision import NormalMean, interval_width_curve
    >>> ds = interval_width_curve(NormalMean(10.0, asr.Normal(0, 20)), range(20, 401, 20),
    ...                           length=4.0)
    >>> plot_interval_width(ds).get_ylabel()
    'Width of the posterior interval (units of the effect)'
    """
    if "width_mean" not in getattr(ds, "data_vars", {}):
        raise AssuranceInputError(
            "The 'ds' parameter of plot_interval_width must hold 'width_mean' (from "
            f"assurance.precision.interval_width_curve). Got {type(ds).__name__} instead.")
    own = ax is None
    ax = _axes(ax)
    _style(ax)
    n = ds.n.values
    lines = (("width_mean", "average width", _ORANGE, "-"),
             ("width_q90", "90th centile of the width", _BLUE, (0, (5, 3))),
             ("width_worst_likely", "worst width over the most likely data", _PURPLE,
              (0, (1, 2))),
             ("frequentist_ci_width", "confidence interval width at the assumed values",
              _GREY, (0, (6, 2, 1.5, 2))))
    for name, label, colour, style in lines:
        if name not in ds:
            continue
        ax.plot(n, ds[name].values, color=colour, linestyle=style, linewidth=2.0, label=label)
        if f"{name}_mcse" in ds:
            _band(ax, n, ds[name].values, ds[f"{name}_mcse"].values, colour, None)
    length = [a.length for a in answers if hasattr(a, "length")]
    target = length[0] if length else ds.attrs.get("length")
    if target is not None:
        ax.axhline(float(target), color=_BLACK, linestyle=(0, (4, 3)), linewidth=1.2,
                   label=f"target length ({float(target):g})")
    marks: dict[int, list[Any]] = {}  # criteria solved at the same n share one label
    for answer in answers:
        if getattr(answer, "reached", False) and answer.n_total is not None and \
                n.min() <= answer.n_total <= n.max() and answer.criterion in ("ALC", "WOC",
                                                                                "MWOC"):
            marks.setdefault(int(answer.n_total), []).append(answer)
    from ._label_placement import Label, around, place_labels

    labels = []
    for size, group in marks.items():
        ax.plot([size], [group[0].achieved], marker="o", markersize=6,
                markeredgecolor=_BLACK, markerfacecolor=_GREEN, zorder=5, linestyle="none")
        labels.append(Label(" = ".join(a.criterion for a in group) + f": n = {size}",
                            (size, group[0].achieved), around(),
                            style={"fontsize": 8.5, "bbox": _TEXT_BOX}))
    ax.set_ylim(bottom=0.0)
    _size_axis(ax, ds, float(n.min()), float(n.max()))
    endpoint = _design_dict(ds).get("endpoint", {})
    unit = _effect_scale(endpoint)[2] if endpoint else "units of the effect"
    if unit == "ratio":
        unit = "log ratio"
    elif unit == "percentage points":
        unit = "proportion"
    ax.set_ylabel(f"Width of the posterior interval ({unit})", fontsize=10.5,
                  parse_math=False)
    ax.set_title(_title(ds.attrs.get("title", ""), "how precisely the effect will be known"),
                 fontsize=11.5, loc="left", parse_math=False)
    _place_legend(ax, own, ("upper right", "lower left", "center right"))
    place_labels(ax, labels)
    return ax


def plot_fit(result: Any, ax: Axes | None = None) -> Axes:
    """Draw the fitted distribution function with the elicited statements.

    Quantile statements appear as points ``(value, elicited probability)``; an interval
    statement ``P(lower < X <= upper) = p`` appears at ``upper`` as ``F(lower) + p``, the
    height the fitted curve would need there. A thin line joins each elicited point to the
    fitted curve, so the misses can be read off.

    Parameters
    ----------
    result
        A :class:`~assurance.PriorFit` from :func:`~assurance.fit_prior`.
    ax
        Axes to draw on; None draws on a new off-screen figure (no pyplot, no window).

    Returns
    -------
    matplotlib.axes.Axes

    Examples
    --------
    >>> from assurance import fit_prior
    >>> fit = fit_prior({0.8: 0.5, 1.0: 0.9}, family="lognormal")
    >>> ax = plot_fit(fit)
    >>> ax.get_ylabel()
    'P(X <= x)'
    """
    from ..priors.elicitation import Interval, PriorFit, Quantile

    if not isinstance(result, PriorFit):
        raise AssuranceInputError(
            f"The 'result' parameter of plot_fit must be a PriorFit from fit_prior. "
            f"Got {result!r} instead."
        )
    ax = _axes(ax, figsize=(6.4, 4.2))
    points = [s.value if isinstance(s, Quantile) else s.upper for s in result.statements]
    points += [s.lower for s in result.statements if isinstance(s, Interval)]
    lo = min(min(points), result.ppf(0.005))
    hi = max(max(points), result.ppf(0.995))
    pad = 0.05 * (hi - lo)
    if result.scale == "log" or result.family in ("gamma", "beta"):
        lo = max(lo - pad, 0.0)
    else:
        lo -= pad
    hi = hi + pad if result.family != "beta" else min(hi + pad, 1.0)
    x = np.linspace(lo, hi, 400)
    ax.plot(x, result.cdf(x), color=_BLUE, linewidth=2.0, label=f"fitted {result.family}")
    for k, s in enumerate(result.statements):
        if isinstance(s, Quantile):
            at, want = s.value, s.prob
        else:
            at, want = s.upper, float(result.cdf(s.lower)) + s.prob
        got = float(result.cdf(at))
        ax.plot([at, at], [want, got], color=_BLACK, linewidth=0.8)
        ax.plot([at], [want], "o", color=_VERMILLION, markersize=6,
                label="elicited" if k == 0 else None)
    ax.set_xlabel("x", parse_math=False)
    ax.set_ylabel("P(X <= x)", parse_math=False)
    ax.set_ylim(-0.02, 1.02)
    where = " of log x" if result.scale == "log" else ""
    ax.set_title(f"Prior fitted to {len(result.statements)} statements (largest miss "
                 f"{np.max(np.abs(result.misses)):.3f})\n{result.prior.describe()}{where}",
                 fontsize=9.5, parse_math=False)
    _style(ax)
    _legend(ax, loc="upper left")
    return ax
