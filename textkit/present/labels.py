"""Direct labels without overlaps: a small, deterministic placement step.

Each label asks for one of a few anchor positions (right of a whisker, left of
it, ...), in order of preference. Labels are placed one by one in the order
given: a label takes its first position whose box, measured with the figure's
renderer, neither overlaps a label already placed nor an obstacle (dots,
whiskers); a label no position fits is dropped. The result depends only on the
inputs, so the same chart always gets the same labels.

Boxes are computed from the text's measured width and height at the figure's
dpi, with a small padding, so that rendering at a higher dpi (PNG) or with
the viewer's own text engine (SVG) still leaves a gap.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .style import renderer_of


@dataclass(frozen=True)
class LabelRequest:
    """One label and where it may go.

    Attributes
    ----------
    text : str
    anchors : sequence of (x, y, side)
        Data coordinates of each candidate anchor, most preferred first; ``side``
        is ``'right'`` (text starts right of the anchor) or ``'left'`` (ends left of it).
    gid : str
        The ``gid`` the placed Text artist gets (tests and notebooks find it by it).
    colour : str
    weight : str
        Font weight (``'normal'`` or ``'bold'``).
    """

    text: str
    anchors: Sequence[tuple[float, float, str]]
    gid: str
    colour: str
    weight: str = "normal"


def _overlaps(box: np.ndarray, boxes: np.ndarray) -> bool:
    if not len(boxes):
        return False
    return bool(np.any((box[0] < boxes[:, 2]) & (boxes[:, 0] < box[2]) & (box[1] < boxes[:, 3])
                       & (boxes[:, 1] < box[3])))


def place_labels(axes: Any, requests: Sequence[LabelRequest], *, obstacles: np.ndarray | None = None,
                 fontsize: float = 6.5, gap_points: float = 3.0, pad_points: float = 0.8) -> list[Any]:
    """Place ``requests`` on ``axes`` without overlaps; returns the Text artists placed.

    Parameters
    ----------
    axes : matplotlib Axes
        Its figure's layout (margins, limits) must be final: boxes are measured in display units.
    requests : sequence of LabelRequest
        In priority order (earlier labels win a contested spot).
    obstacles : ndarray of shape (n, 4), optional
        Display-unit boxes ``x0, y0, x1, y1`` no label may cover.
    fontsize : float, default 6.5
        Points.
    gap_points, pad_points : float
        Distance from anchor to text, and padding added around every box (points).

    A label must lie inside the axes horizontally and vertically; labels whose
    every anchor collides are dropped (a dense chart keeps fewer labels, never overlapping ones).
    """
    from matplotlib.font_manager import FontProperties

    figure = axes.figure
    renderer = renderer_of(figure)
    to_pixels = figure.dpi / 72.0
    gap, pad = gap_points * to_pixels, pad_points * to_pixels
    frame = axes.bbox
    taken = np.asarray(obstacles if obstacles is not None else np.empty((0, 4)), dtype=float).reshape(-1, 4)
    placed: list[np.ndarray] = []
    artists = []
    sizes: dict[tuple[str, str], tuple[float, float]] = {}
    for request in requests:
        key = (request.text, request.weight)
        if key not in sizes:
            prop = FontProperties(size=fontsize, weight=request.weight)
            width, height, _ = renderer.get_text_width_height_descent(request.text, prop, ismath=False)
            sizes[key] = (width, height)
        width, height = sizes[key]
        for x, y, side in request.anchors:
            px, py = axes.transData.transform((x, y))
            x0 = px + gap if side == "right" else px - gap - width
            box = np.array([x0 - pad, py - height / 2 - pad, x0 + width + pad, py + height / 2 + pad])
            if box[0] < frame.x0 or box[2] > frame.x1 or box[1] < frame.y0 or box[3] > frame.y1:
                continue
            if _overlaps(box, taken) or _overlaps(box, np.asarray(placed).reshape(-1, 4)):
                continue
            placed.append(box)
            offset = (gap_points if side == "right" else -gap_points, 0)
            artists.append(axes.annotate(request.text, (x, y), xytext=offset, textcoords="offset points",
                                         ha="left" if side == "right" else "right", va="center", fontsize=fontsize,
                                         fontweight=request.weight, color=request.colour, gid=request.gid,
                                         annotation_clip=False))
            break
    return artists


def segment_boxes(axes: Any, x_low: np.ndarray, x_high: np.ndarray, y: np.ndarray,
                  half_height_points: float) -> np.ndarray:
    """Display-unit boxes of horizontal segments (whiskers, dots) of the given half height, shape (n, 4)."""
    if not len(y):
        return np.empty((0, 4))
    low = axes.transData.transform(np.column_stack([x_low, y]))
    high = axes.transData.transform(np.column_stack([x_high, y]))
    half = half_height_points * axes.figure.dpi / 72.0
    return np.column_stack([np.minimum(low[:, 0], high[:, 0]) - half, low[:, 1] - half,
                            np.maximum(low[:, 0], high[:, 0]) + half, low[:, 1] + half])
