"""Put text labels where they cover no marker, curve, legend or other label.

The figures ask for their labels here instead of drawing them at fixed offsets. Each label
names an anchor (a point in data or axes coordinates) and the offsets to try, in order of
preference. The placer lays the figure out once (``Figure.draw_without_rendering``, no
pixels), measures everything in display coordinates and takes, for each label in turn, the
first offset whose box stays inside the axes and touches nothing already there:

- markers, as squares of their drawn size plus a small margin;
- lines (curves, reference lines, drop lines), sampled every two pixels along their path;
- the legend inside the axes, and every text drawn earlier (including labels just placed).

A label that fits nowhere becomes a numbered footnote under the axes, with its number at
the anchor when the number itself fits. Adding footnotes changes the layout, so placement
is repeated until the set of footnotes stops changing (at most three rounds). Everything is
deterministic: the same figure gives the same positions.

:func:`overlaps` measures a drawn figure the same way; the tests use it to check that no
label covers a marker, a line or another label.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.text import Annotation

__all__ = ["Label", "around", "along", "place_labels", "obstacles", "overlaps",
           "label_boxes", "renderer_of"]

#: one candidate: (dx, dy) offset in points from the anchor, horizontal and vertical alignment
Candidate = tuple[float, float, str, str]

_STEP_PX = 2.0      # lines are sampled this often (display pixels)
_MARGIN_PX = 1.5    # free space kept around each label's box


@dataclass
class Label:
    """One label to place.

    ``xy`` is in the coordinates of ``transform`` (data coordinates by default; pass for
    example a blend of axes fraction and data for a label at the end of a horizontal line).
    ``candidates`` are tried in order; ``style`` goes to ``Axes.annotate`` (font size,
    colour, box). ``leader`` draws a thin line from the text to the anchor for offsets
    farther than ``leader_from`` points. ``note`` is the text of its footnote when it fits
    nowhere (by default the text on one line).
    """

    text: str
    xy: tuple[float, float]
    candidates: Sequence[Candidate]
    transform: Any = None
    style: dict[str, Any] = field(default_factory=dict)
    leader_from: float = 30.0
    footnote: bool = True
    note: str | None = None
    artist: Annotation | None = None
    placed: bool = False


def around(radii: Iterable[float] = (8, 14, 22, 32, 44, 58)) -> list[Candidate]:
    """Offsets around an anchor on a grid of the given distances (points), nearest first;
    among equally near ones right-below, right-above, left-above, left-below, then the
    sides. The text is aligned so that it grows away from the anchor."""
    steps = sorted({float(r) for r in radii})
    out: list[tuple[float, int, Candidate]] = []
    corner_rank = {(1, -1): 0, (1, 1): 1, (-1, 1): 2, (-1, -1): 3}
    for dx in [0.0] + steps:
        for dy in [0.0] + steps:
            if dx == 0 and dy == 0:
                continue
            for sx in ((1, -1) if dx else (0,)):
                for sy in ((-1, 1) if dy else (0,)):
                    ha = "left" if sx > 0 else "right" if sx < 0 else "center"
                    va = "top" if sy < 0 else "bottom" if sy > 0 else "center"
                    rank = corner_rank.get((sx, sy), 4)
                    out.append((math.hypot(dx, dy), rank, (sx * dx, sy * dy, ha, va)))
    out.sort(key=lambda item: (item[0], item[1]))
    return [cand for _, _, cand in out]


def along(side: str, steps: int = 24, step: float = 20.0, gap: float = 4.0) -> list[Candidate]:
    """Offsets along a horizontal line from its ``"left"`` or ``"right"`` end, above then below,
    moving inwards ``step`` points at a time (for labels of reference lines)."""
    sign = 1.0 if side == "left" else -1.0
    ha = "left" if side == "left" else "right"
    out: list[Candidate] = []
    for k in range(steps):
        dx = sign * (4.0 + k * step)
        out += [(dx, gap, ha, "bottom"), (dx, -gap, ha, "top")]
    return out


# ------------------------------------------------------------------------------------------
# measuring
# ------------------------------------------------------------------------------------------
def renderer_of(fig: Any) -> Any:
    """Lay the figure out (no pixels drawn) and return its renderer."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if fig.canvas is None or type(fig.canvas).__name__ == "FigureCanvasBase":
        FigureCanvasAgg(fig)
    fig.draw_without_rendering()
    getter = getattr(fig, "_get_renderer", None)
    return getter() if getter is not None else fig.canvas.get_renderer()


def _px(points: float, fig: Any) -> float:
    return points * fig.dpi / 72.0


def _has_marker(line: Any) -> bool:
    marker = line.get_marker()
    return marker not in (None, "None", "none", "", " ") and line.get_markersize() > 0


def _has_line(line: Any) -> bool:
    style = line.get_linestyle()
    return style not in ("None", "none", "", " ") and line.get_linewidth() > 0


def _sample(xy: np.ndarray, step: float = _STEP_PX) -> np.ndarray:
    """Points every ``step`` pixels along a polyline (segments with a NaN end are skipped)."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    if len(xy) == 0:
        return np.empty((0, 2))
    if len(xy) == 1:
        return xy[np.isfinite(xy).all(axis=1)]
    a, b = xy[:-1], xy[1:]
    ok = np.isfinite(a).all(axis=1) & np.isfinite(b).all(axis=1)
    a, b = a[ok], b[ok]
    if len(a) == 0:
        return np.empty((0, 2))
    seg = b - a
    length = np.hypot(seg[:, 0], seg[:, 1])
    k = np.clip(np.ceil(length / step), 1, 5000).astype(int)
    idx = np.repeat(np.arange(len(a)), k)
    start = np.repeat(np.cumsum(k) - k, k)
    t = (np.arange(k.sum()) - start) / np.repeat(k, k)
    return np.vstack([a[idx] + seg[idx] * t[:, None], b[-1:]])


@dataclass
class Obstacles:
    """What a label must not touch, in display pixels."""

    points: np.ndarray                 # sampled line points, (k, 2)
    point_pad: np.ndarray              # half the line width at each point
    markers: list[tuple[float, float, float, float]]
    boxes: list[tuple[float, float, float, float]]   # legends and texts
    soft_points: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))
    soft_pad: np.ndarray = field(default_factory=lambda: np.empty(0))
    leaders: list[np.ndarray] = field(default_factory=list)

    def blocks(self, box: tuple[float, float, float, float], soft: bool = True) -> bool:
        """True when ``box`` touches anything; guide lines (``soft``) only when asked."""
        if _hit(self.points, self.point_pad, box) or \
                (soft and _hit(self.soft_points, self.soft_pad, box)):
            return True
        return any(_touch(box, other) for other in self.markers) or \
            any(_touch(box, other) for other in self.boxes)


def _hit(points: np.ndarray, pad: np.ndarray, box: Sequence[float]) -> bool:
    if not points.size:
        return False
    x0, y0, x1, y1 = box
    return bool(np.any((points[:, 0] >= x0 - pad) & (points[:, 0] <= x1 + pad)
                       & (points[:, 1] >= y0 - pad) & (points[:, 1] <= y1 + pad)))


def _touch(a: Sequence[float], b: Sequence[float]) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def _marker_boxes(line: Any, fig: Any, inside: Any) -> list[tuple[float, float, float, float]]:
    xy = line.get_transform().transform(np.asarray(line.get_xydata(), dtype=float))
    xy = xy[np.isfinite(xy).all(axis=1)]
    half = _px(line.get_markersize() / 2.0 + line.get_markeredgewidth() / 2.0, fig) + 1.0
    return [(x - half, y - half, x + half, y + half) for x, y in xy
            if inside.x0 - half <= x <= inside.x1 + half and
            inside.y0 - half <= y <= inside.y1 + half]


def obstacles(ax: Axes, renderer: Any, skip: Iterable[Any] = ()) -> Obstacles:
    """Markers, sampled lines, the legend and the texts of ``ax`` (those in ``skip`` aside).

    Line collections (the dotted drop lines under solved sizes) are guide lines: a label
    avoids them when it can, and may cross them when nothing else fits.
    """
    from matplotlib.collections import LineCollection

    fig = ax.figure
    skip_ids = {id(a) for a in skip}
    inside = ax.bbox
    chunks, pads, soft_chunks, soft_pads = [], [], [], []
    markers: list[tuple[float, float, float, float]] = []
    for line in ax.get_lines():
        if not line.get_visible() or id(line) in skip_ids:
            continue
        xy = line.get_transform().transform(np.asarray(line.get_xydata(), dtype=float))
        if _has_line(line):
            pts = _sample(xy)
            chunks.append(pts)
            pads.append(np.full(len(pts), _px(line.get_linewidth() / 2.0, fig)))
        if _has_marker(line):
            markers += _marker_boxes(line, fig, inside)
    for coll in ax.collections:
        if not isinstance(coll, LineCollection) or not coll.get_visible():
            continue
        widths = np.atleast_1d(coll.get_linewidth())
        transform = coll.get_transform()
        for k, path in enumerate(coll.get_paths()):
            pts = _sample(transform.transform(path.vertices))
            soft_chunks.append(pts)
            soft_pads.append(np.full(len(pts), _px(float(widths[k % len(widths)]) / 2.0, fig)))
    boxes = []
    legend = ax.get_legend()
    if legend is not None and legend.get_visible():
        boxes.append(tuple(legend.get_window_extent(renderer).extents))
    for text in ax.texts:
        if id(text) in skip_ids or not text.get_visible() or not text.get_text():
            continue
        boxes.append(_text_box(text, renderer))
    points, point_pad = _within(chunks, pads, inside)
    soft_points, soft_pad = _within(soft_chunks, soft_pads, inside)
    return Obstacles(points, point_pad, markers, boxes, soft_points, soft_pad)


def _within(chunks: list[np.ndarray], pads: list[np.ndarray],
            inside: Any) -> tuple[np.ndarray, np.ndarray]:
    if not chunks:
        return np.empty((0, 2)), np.empty(0)
    points, pad = np.vstack(chunks), np.concatenate(pads)
    keep = ((points[:, 0] >= inside.x0 - 2) & (points[:, 0] <= inside.x1 + 2)
            & (points[:, 1] >= inside.y0 - 2) & (points[:, 1] <= inside.y1 + 2))
    return points[keep], pad[keep]


def _text_box(text: Any, renderer: Any) -> tuple[float, float, float, float]:
    """Window extent of a text with its background box, if any (not its leader line)."""
    from matplotlib.text import Annotation, Text

    if isinstance(text, Annotation):
        text.update_positions(renderer)
    box = Text.get_window_extent(text, renderer)
    patch = text.get_bbox_patch()
    if patch is not None:
        text.update_bbox_position_size(renderer)
        box = type(box).union([box, patch.get_window_extent(renderer)])
    return tuple(box.extents)


# ------------------------------------------------------------------------------------------
# placing
# ------------------------------------------------------------------------------------------
def _size(ann: Any, renderer: Any) -> tuple[float, float, float]:
    """Width and height of a label's text in pixels, and the padding of its box."""
    ann.set_position((0.0, 0.0))
    ann.set_horizontalalignment("left")
    ann.set_verticalalignment("bottom")
    box = ann.get_window_extent(renderer)
    pad = 0.0
    patch = ann.get_bbox_patch()
    if patch is not None:
        pad = _px(ann.get_fontsize() * 0.2, ann.figure)  # covers the round box's pad
    return box.width, box.height, pad


def _candidate_box(anchor: np.ndarray, cand: Candidate, size: tuple[float, float, float],
                   fig: Any) -> tuple[float, float, float, float]:
    dx, dy, ha, va = cand
    w, h, pad = size
    x = anchor[0] + _px(dx, fig)
    y = anchor[1] + _px(dy, fig)
    x0 = x if ha == "left" else x - w if ha == "right" else x - w / 2
    y0 = y if va == "bottom" else y - h if va == "top" else y - h / 2
    m = pad + _MARGIN_PX
    return (x0 - m, y0 - m, x0 + w + m, y0 + h + m)


def _inside(box: Sequence[float], bbox: Any) -> bool:
    return box[0] >= bbox.x0 and box[2] <= bbox.x1 and box[1] >= bbox.y0 and box[3] <= bbox.y1


def _make(ax: Axes, label: Label, cand: Candidate | None = None) -> Annotation:
    """The label's annotation at ``cand`` (its first candidate by default), with a thin
    leader line to the anchor when the offset is long."""
    transform = ax.transData if label.transform is None else label.transform
    style = {"fontsize": 8.5, "color": "#222222", "zorder": 6, **label.style}
    dx, dy, ha, va = label.candidates[0] if cand is None else cand
    if math.hypot(dx, dy) > label.leader_from:
        style["arrowprops"] = {"arrowstyle": "-", "color": "#777777", "linewidth": 0.6,
                               "shrinkA": 1, "shrinkB": 3}
    return ax.annotate(label.text, label.xy, xycoords=transform, xytext=(dx, dy),
                       textcoords="offset points", ha=ha, va=va, annotation_clip=False,
                       parse_math=False, **style)


def _fit(ax: Axes, label: Label, renderer: Any, obs: Obstacles) -> Candidate | None:
    fig = ax.figure
    transform = ax.transData if label.transform is None else label.transform
    anchor = np.asarray(transform.transform(label.xy), dtype=float)
    if not np.isfinite(anchor).all():
        return None
    plain = _make(ax, label, (0.0, 0.0, "left", "bottom"))
    plain.set_visible(True)
    size = _size(plain, renderer)
    plain.remove()
    boxes = [(cand, _candidate_box(anchor, cand, size, fig)) for cand in label.candidates]
    for soft in (True, False):
        for cand, box in boxes:
            if _inside(box, ax.bbox) and not obs.blocks(box, soft) and \
                    _leader_clear(anchor, cand, box, label, obs, fig):
                obs.boxes.append(box)
                if obs.leaders and math.hypot(cand[0], cand[1]) > label.leader_from:
                    obs.points = np.vstack([obs.points, obs.leaders[-1]])
                    obs.point_pad = np.concatenate([obs.point_pad,
                                                    np.full(len(obs.leaders[-1]), 0.5)])
                return cand
    return None


def _leader_clear(anchor: np.ndarray, cand: Candidate, box: Sequence[float], label: Label,
                  obs: Obstacles, fig: Any) -> bool:
    """A leader line (for far offsets) must cross no curve, label, marker or other leader
    (near its own anchor, which sits on a curve, it may)."""
    if math.hypot(cand[0], cand[1]) <= label.leader_from:
        return True
    end = np.array([min(max(anchor[0], box[0]), box[2]), min(max(anchor[1], box[1]), box[3])])
    pts = _sample(np.vstack([anchor, end]))
    pts = pts[np.hypot(*(pts - anchor).T) > _px(8.0, fig)]
    if not len(pts):
        return True
    if obs.points.size:
        near = _px(1.0, fig)
        for p in pts:
            d = np.abs(obs.points - p)
            if np.any((d[:, 0] <= obs.point_pad + near) & (d[:, 1] <= obs.point_pad + near)):
                return False
    for other in [*obs.boxes, *obs.markers]:
        x0, y0, x1, y1 = other
        if np.any((pts[:, 0] >= x0) & (pts[:, 0] <= x1) & (pts[:, 1] >= y0)
                  & (pts[:, 1] <= y1)):
            return False
    for line in obs.leaders:
        d = np.hypot(pts[:, None, 0] - line[None, :, 0], pts[:, None, 1] - line[None, :, 1])
        if d.min() < 2.0:
            return False
    obs.leaders.append(pts)
    return True


def _apply(ax: Axes, label: Label, cand: Candidate) -> None:
    """Move the label's annotation to ``cand`` (made anew, so a leader line can come or go)."""
    visible = label.artist.get_visible()
    label.artist.remove()
    label.artist = _make(ax, label, cand)
    label.artist.set_visible(visible)


def place_labels(ax: Axes, labels: Sequence[Label], *, rounds: int = 4) -> list[Label]:
    """Draw ``labels`` on ``ax`` where they cover nothing; footnote the rest under the axes.

    Labels are placed in the order given (put those that must stay near their anchors
    first). A label with ``footnote=False`` that fits nowhere is left out (use it for text
    the legend repeats). Returns the labels; each has ``artist`` (its annotation, hidden
    when not placed) and ``placed``.
    """
    labels = [lab for lab in labels if lab.text]
    if not labels:
        return []
    fig = ax.figure
    for label in labels:
        label.artist = _make(ax, label)
    noted: list[int] = []       # footnoted, in the order they failed
    dropped: set[int] = set()
    extra: list[Any] = []       # footnote text and the numbers at the anchors
    for round_ in range(max(rounds, 1)):
        for artist in extra:
            artist.remove()
        extra = [_footnote_text(ax, [labels[k] for k in noted])] if noted else []
        renderer = renderer_of(fig)  # the layout, with the footnote text in it
        obs = obstacles(ax, renderer, skip=[lab.artist for lab in labels] + extra)
        failed = []
        for k, label in enumerate(labels):
            if k in noted or k in dropped:
                continue
            cand = _fit(ax, label, renderer, obs)
            if cand is None:
                failed.append(k)
            else:
                _apply(ax, label, cand)
                label.placed = True
        for number, k in enumerate(noted, start=1):
            tag = _footnote_tag(ax, labels[k], number, renderer, obs)
            if tag is not None:
                extra.append(tag)
        if not failed:
            break
        dropped |= {k for k in failed if not labels[k].footnote}
        noted += [k for k in failed if labels[k].footnote]
        if round_ == rounds - 1:  # out of rounds: the footnote text must still appear
            for artist in extra:
                artist.remove()
            extra = [_footnote_text(ax, [labels[k] for k in noted])]
    for k, label in enumerate(labels):
        if k in noted or k in dropped:
            label.placed = False
            label.artist.set_visible(False)
    return labels


def _footnote_tag(ax: Axes, label: Label, number: int, renderer: Any,
                  obs: Obstacles) -> Any:
    """The footnote's number beside the label's anchor, where it fits (else None)."""
    tag = Label(f"[{number}]", label.xy, around((8, 12, 18)), label.transform,
                {"fontsize": 7.5, "color": "#333333"}, footnote=False)
    tag.artist = _make(ax, tag)
    cand = _fit(ax, tag, renderer, obs)
    if cand is None:
        tag.artist.remove()
        return None
    _apply(ax, tag, cand)
    return tag.artist


def _footnote_text(ax: Axes, labels: Sequence[Label]) -> Any:
    """The footnoted labels' texts, numbered, under the axes' x label."""
    lines = [f"[{number}] " + (label.note or " ".join(label.text.split()))
             for number, label in enumerate(labels, start=1)]
    return ax.annotate("\n".join(lines), (0.0, 0.0),
                       xycoords=("axes fraction", ax.xaxis.label), xytext=(0, -4),
                       textcoords="offset points", ha="left", va="top", fontsize=8,
                       color="#333333", annotation_clip=False, parse_math=False)


# ------------------------------------------------------------------------------------------
# checking a drawn figure
# ------------------------------------------------------------------------------------------
def label_boxes(ax: Axes, renderer: Any) -> list[tuple[str, tuple[float, float, float, float]]]:
    """(text, box) of each visible, non-empty text drawn inside ``ax``'s area."""
    out = []
    for text in ax.texts:
        if not text.get_visible() or not text.get_text().strip():
            continue
        box = _text_box(text, renderer)
        if _touch(box, tuple(ax.bbox.extents)):
            out.append((text.get_text(), box))
    return out


def overlaps(ax: Axes, *, lines: bool = True) -> list[str]:
    """Plain descriptions of every text in ``ax`` covering a marker, a line, the legend or
    another text (an empty list for a clean figure).

    A text's box is shrunk by one pixel before the test, so touching edges do not count.
    """
    renderer = renderer_of(ax.figure)
    found = []
    texts = label_boxes(ax, renderer)
    obs = obstacles(ax, renderer, skip=ax.texts)
    if not lines:
        obs.points = np.empty((0, 2))
        obs.point_pad = np.empty(0)
    shrunk = [(t, (b[0] + 1, b[1] + 1, b[2] - 1, b[3] - 1)) for t, b in texts]
    for k, (text, box) in enumerate(shrunk):
        name = " ".join(text.split())[:40]
        if any(_touch(box, m) for m in obs.markers):
            found.append(f"label {name!r} covers a marker")
        if obs.points.size and Obstacles(obs.points, obs.point_pad, [], []).blocks(box):
            found.append(f"label {name!r} covers a line")
        if any(_touch(box, b) for b in obs.boxes):
            found.append(f"label {name!r} overlaps the legend")
        for other, other_box in shrunk[k + 1:]:
            if _touch(box, other_box):
                found.append(f"label {name!r} overlaps label {' '.join(other.split())[:40]!r}")
    legend = ax.get_legend()
    if legend is not None and legend.get_visible():
        lb = tuple(legend.get_window_extent(renderer).extents)
        lb = (lb[0] + 1, lb[1] + 1, lb[2] - 1, lb[3] - 1)
        if any(_touch(lb, m) for m in obs.markers):
            found.append("the legend covers a marker")
    return found
