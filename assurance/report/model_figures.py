"""Figures for a plan made with a general analysis model (a PyMC model planned by simulation).

Two figures, both against the total sample size: the probability of success (assurance) and
classical power with bands of two Monte Carlo standard errors, the targets and the planned
size; and the width of the posterior interval for the effect (mean, median, 90th centile).
Every number drawn comes from the result of :func:`assurance.general.simulate_general`;
nothing is recomputed. Labels go where they cover no marker, curve or other label
(:mod:`._label_placement`); matplotlib is imported only when a figure is drawn.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import AssuranceInputError
from .figures import (
    _BLACK,
    _BLUE,
    _GREY,
    _ORANGE,
    _SIZE_LABEL,
    _TEXT_BOX,
    _VERMILLION,
    _axes,
    _place_legend,
    _style,
    _title,
    _whole_size_ticks,
)

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = ["plot_model_success", "plot_model_widths", "model_figure_makers"]

_NAME = {"assurance": "assurance", "power": "classical power"}
_COLOUR = {"assurance": _VERMILLION, "power": _BLUE}


def _check(ds: Any, owner: str, needed: Sequence[str]) -> None:
    if not hasattr(ds, "data_vars") or "n" not in getattr(ds, "dims", {}) or \
            any(name not in ds for name in needed):
        raise AssuranceInputError(
            f"The 'ds' parameter of {owner} must be the dataset returned by "
            f"assurance.general.simulate_general (with {', '.join(needed)} over n). "
            f"Got {type(ds).__name__} instead.")


def _simulated(ds: Any, name: str) -> bool:
    return name in ds and bool(np.isfinite(np.asarray(ds[name].values, dtype=float)).any())


def _curve(ax: Axes, n: np.ndarray, ds: Any, name: str, label: str, colour: str,
           style: Any = "-") -> None:
    value = np.asarray(ds[name].values, dtype=float)
    ax.plot(n, value, color=colour, linewidth=2.0, linestyle=style, marker="o",
            markersize=3.5, label=label)
    se_name = f"{name}_mcse"
    if se_name in ds:
        se = np.asarray(ds[se_name].values, dtype=float)
        ok = np.isfinite(se) & np.isfinite(value)
        lo, hi = value - 2 * se, value + 2 * se
        if name in ("assurance", "power"):
            lo, hi = np.clip(lo, 0, 1), np.clip(hi, 0, 1)
        ax.fill_between(n[ok], lo[ok], hi[ok], color=colour, alpha=0.22, linewidth=0)


def plot_model_success(ds: Any, answers: Sequence[Any] = (), planned_n: int | None = None,
                       ax: Axes | None = None, *, title: str = "") -> Axes:
    """Probability of success and classical power against the total number of patients.

    Each curve joins the simulated sizes (dots) and carries a band of two Monte Carlo
    standard errors. Targets are dotted horizontal lines; each size that reaches a target
    (from :func:`assurance.general.solve_general_n`) is a large dot, and the planned size a
    vertical line. Classical power is left out when it was not simulated.

    Parameters
    ----------
    ds
        The dataset from :func:`assurance.general.simulate_general`.
    answers
        :class:`~assurance.general.GeneralSizeAnswer` objects to mark.
    planned_n
        The planned total size, marked by a vertical line (when inside the grid).
    ax
        Axes to draw into; a new off-screen figure when None.
    title
        The plan's title, put before the figure's own title.

    Returns
    -------
    matplotlib.axes.Axes
        The axes drawn into.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"assurance": ("n", [0.4, 0.55, 0.62]),
    ...                  "assurance_mcse": ("n", [0.02, 0.02, 0.02]),
    ...                  "power": ("n", [0.5, 0.8, 0.93]),
    ...                  "power_mcse": ("n", [0.02, 0.02, 0.01])}, coords={"n": [40, 80, 120]})
    >>> plot_model_success(ds, planned_n=80).get_xlabel()
    'Total sample size (patients)'
    """
    _check(ds, "plot_model_success", ("assurance", "assurance_mcse"))
    own = ax is None
    ax = _axes(ax)
    _style(ax)
    n = np.asarray(ds["n"].values, dtype=float)
    _curve(ax, n, ds, "assurance", "probability of success (assurance) \u00b1 2 MC SE",
           _VERMILLION)
    if _simulated(ds, "power"):
        _curve(ax, n, ds, "power", "classical power at the assumed values \u00b1 2 MC SE",
               _BLUE, (0, (6, 2)))

    from ._label_placement import Label, along, around, place_labels

    lo, hi = float(n.min()), float(n.max())
    lines: list[Label] = []
    targets: dict[float, list[str]] = {}
    for answer in answers:
        target = float(answer.target)
        if 0 < target < 1:
            name = _NAME.get(answer.quantity, str(answer.quantity))
            targets.setdefault(round(target, 6), []).append(
                name if answer.n is not None else f"{name}, not reached")
    for k, (value, names) in enumerate(sorted(targets.items())):
        ax.axhline(value, color="#595959", linewidth=1.0, linestyle=(0, (1, 2.5)), zorder=2,
                   label="target (dotted)" if k == 0 else None)
        lines.append(Label(f"target {100 * value:g}% ({', '.join(names)})", (0.0, value),
                           along("left"), ax.get_yaxis_transform(),
                           {"fontsize": 8.5, "color": "#333333", "bbox": _TEXT_BOX},
                           leader_from=1e9))
    labels: list[Label] = []
    for answer in answers:
        if answer.n is None or not lo <= answer.n <= hi:
            continue
        colour = _COLOUR.get(answer.quantity, _GREY)
        ax.plot([answer.n], [answer.value], marker="o", markersize=7, markerfacecolor=colour,
                markeredgecolor=_BLACK, zorder=5, linestyle="none")
        labels.append(Label(f"n = {answer.n}\n({_NAME.get(answer.quantity, '')} "
                            f"{100 * answer.target:g}%)", (answer.n, answer.value), around(),
                            style={"fontsize": 8.5, "bbox": _TEXT_BOX}))
    if planned_n is not None and lo <= planned_n <= hi:
        ax.axvline(planned_n, color=_BLACK, linewidth=1.0, linestyle=(0, (4, 2)), zorder=2,
                   label=f"planned size ({int(planned_n)} patients)")
        lines.append(Label(f"planned: {int(planned_n)}", (planned_n, 0.04),
                           around((6, 12, 20, 30)),
                           style={"fontsize": 8.5, "bbox": _TEXT_BOX}, leader_from=1e9))
    ax.set_ylim(0.0, 1.0)
    ax.set_xlim(lo, hi if hi > lo else lo + 1)
    _whole_size_ticks(ax)
    ax.set_xlabel(_SIZE_LABEL, fontsize=10.5, parse_math=False)
    ax.set_ylabel("Chance of success (probability)", fontsize=10.5, parse_math=False)
    ax.set_title(_title(title, "chance of success by sample size (simulated)"), fontsize=11.5,
                 loc="left", parse_math=False)
    _place_legend(ax, own)
    place_labels(ax, labels + lines)
    return ax


def plot_model_widths(ds: Any, ax: Axes | None = None, *, unit: str | None = None,
                      title: str = "") -> Axes:
    """Width of the posterior interval for the effect against the total number of patients:
    mean (with a band of two Monte Carlo standard errors), median and 90th centile over the
    simulated trials under the design prior.

    Parameters
    ----------
    ds
        The dataset from :func:`assurance.general.simulate_general`.
    ax
        Axes to draw into; a new off-screen figure when None.
    unit
        The effect's unit for the axis label; the effect's scale (``ds.attrs["effect_scale"]``)
        unless given.
    title
        The plan's title, put before the figure's own title.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"width_mean": ("n", [2.0, 1.4]), "width_mean_mcse": ("n", [.02, .01]),
    ...                  "width_median": ("n", [1.9, 1.4]), "width_q90": ("n", [2.6, 1.8])},
    ...                 coords={"n": [40, 80]}, attrs={"coverage": 0.95,
    ...                                                "effect_scale": "difference"})
    >>> plot_model_widths(ds, unit="mmHg").get_ylabel()
    'Width of the 95% posterior interval (mmHg)'
    """
    _check(ds, "plot_model_widths", ("width_mean", "width_median", "width_q90"))
    own = ax is None
    ax = _axes(ax)
    _style(ax)
    n = np.asarray(ds["n"].values, dtype=float)
    _curve(ax, n, ds, "width_mean", "mean width \u00b1 2 MC SE", _ORANGE)
    _curve(ax, n, ds, "width_median", "median width", _GREY, (0, (1, 1.5)))
    _curve(ax, n, ds, "width_q90", "90th centile of the width", _BLUE, (0, (5, 3)))
    share = float(ds.attrs.get("likely_share", 0.9))
    if "width_worst_likely" in ds and abs(share - 0.9) > 1e-12:
        _curve(ax, n, ds, "width_worst_likely", f"{100 * share:g}th centile of the width",
               _BLACK, (0, (3, 1, 1, 1)))
    length = ds.attrs.get("precision_length")
    if length is not None:
        ax.axhline(float(length), color="#595959", linewidth=1.0, linestyle=(0, (1, 2.5)),
                   zorder=2, label=f"target width {float(length):.3g}")
    ax.set_ylim(bottom=0.0)
    lo, hi = float(n.min()), float(n.max())
    ax.set_xlim(lo, hi if hi > lo else lo + 1)
    _whole_size_ticks(ax)
    ax.set_xlabel(_SIZE_LABEL, fontsize=10.5, parse_math=False)
    coverage = float(ds.attrs.get("coverage", 0.95))
    shown = unit or str(ds.attrs.get("effect_scale", "") or "units of the effect")
    ax.set_ylabel(f"Width of the {100 * coverage:g}% posterior interval ({shown})",
                  fontsize=10.5, parse_math=False)
    ax.set_title(_title(title, "how precisely the effect will be known (simulated)"),
                 fontsize=11.5, loc="left", parse_math=False)
    _place_legend(ax, own, ("upper right", "lower left", "center right"))
    return ax


def model_figure_makers(plan: Any) -> dict[str, Callable[[], Figure]]:
    """The figures of a model plan, by name, each a function drawing a new figure.

    ``"success_by_size"``: :func:`plot_model_success` with the plan's solved sizes and planned
    size; ``"interval_width"``: :func:`plot_model_widths` (only when the widths were
    simulated).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> import xarray as xr
    >>> ds = xr.Dataset({"assurance": ("n", [0.4, 0.6]), "assurance_mcse": ("n", [.02, .02])},
    ...                 coords={"n": [40, 80]})
    >>> plan = SimpleNamespace(results=ds, sample_sizes=(), planned_n=80, title="Demo",
    ...                        unit=None)
    >>> sorted(model_figure_makers(plan))
    ['success_by_size']
    """
    ds = plan.results
    title = str(getattr(plan, "title", "") or "")
    answers = tuple(getattr(plan, "sample_sizes", ()) or ())
    planned = getattr(plan, "planned_n", None)
    unit = getattr(plan, "unit", None)
    if "ratio" in str(ds.attrs.get("effect_scale", "")):
        unit = None  # a width on a log ratio has no outcome unit

    def success() -> Figure:
        return plot_model_success(ds, answers, planned, title=title).figure

    def widths() -> Figure:
        return plot_model_widths(ds, unit=unit, title=title).figure

    makers: dict[str, Callable[[], Figure]] = {"success_by_size": success}
    if all(name in ds for name in ("width_mean", "width_median", "width_q90")) and \
            _simulated(ds, "width_mean"):
        makers["interval_width"] = widths
    return makers
