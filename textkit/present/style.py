"""The look of textkit charts: palette, fonts, titles and captions.

One colour-blind-safe palette for categories (Okabe & Ito 2008, "Color
Universal Design"), viridis for sequential scales (perceptually uniform, legible
in greyscale), DejaVu Sans (ships inside matplotlib, covers Greek, Cyrillic and
accented Latin) for every text. The layout is our own: a left-aligned title in
bold, a subtitle holding the question's wording in grey beneath it, a light
horizontal grid only, no frame on the top and right, and a caption at the foot
that names the source, the base, the weighting and the interval method.

matplotlib is imported inside the functions, never at module import.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

#: Okabe-Ito colours in the order categories receive them (black last: it is
#: kept for text and reference lines).
CATEGORY_COLOURS = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000")
#: Names of the same colours, for legends and docs.
CATEGORY_NAMES = ("blue", "orange", "bluish green", "reddish purple", "sky blue", "vermillion", "yellow", "black")
#: The sequential colour map.
SEQUENTIAL_MAP = "viridis"
#: Neutral grey: words or cells that lean to no side.
NEUTRAL_COLOUR = "#8C8C8C"
#: Text colours.
INK = "#1A1A1A"
MUTED_INK = "#5A5A5A"
#: Font family used for every text; it ships with matplotlib.
FONT_FAMILY = "DejaVu Sans"

_RC = {
    "font.family": "sans-serif",
    "font.sans-serif": [FONT_FAMILY],
    "font.size": 9,
    "axes.edgecolor": MUTED_INK,
    "axes.labelcolor": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": False,
    "axes.titlesize": 10,
    "grid.color": "#DDDDDD",
    "grid.linewidth": 0.6,
    "xtick.color": MUTED_INK,
    "ytick.color": MUTED_INK,
    "legend.frameon": False,
    # glyph hinting helps at screen sizes only; at 200 dpi and above unhinted text looks the same and
    # renders about a fifth faster
    "text.hinting": "no_hinting",
    "svg.hashsalt": "textkit",
    "svg.fonttype": "path",
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
}


def category_colour(index: int) -> str:
    """The ``index``-th category colour (cycling after eight)."""
    return CATEGORY_COLOURS[index % len(CATEGORY_COLOURS)]


def default_font_path() -> str:
    """Path of the DejaVu Sans TrueType file that ships with matplotlib."""
    from matplotlib import font_manager

    return font_manager.findfont(font_manager.FontProperties(family=FONT_FAMILY), fallback_to_default=True)


@contextmanager
def chart_style() -> Iterator[None]:
    """matplotlib settings of textkit charts, active inside the ``with`` block only."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        yield


@dataclass(frozen=True)
class ChartText:
    """The words around a chart.

    Attributes
    ----------
    title : str
        What the chart shows, in one line.
    subtitle : str
        The question's wording (or its name when no wording is known).
    caption : str
        Source, base, weighting and interval method.
    """

    title: str
    subtitle: str = ""
    caption: str = ""


def new_figure(n_rows: int, *, width: float = 7.5, row_height: float = 0.28, min_height: float = 3.2,
               extra: float = 1.6) -> tuple[Any, Any]:
    """A figure with one axes, tall enough for ``n_rows`` category rows (inches)."""
    from matplotlib.figure import Figure

    height = max(min_height, n_rows * row_height + extra)
    figure = Figure(figsize=(width, height), dpi=100)
    axes = figure.add_subplot(1, 1, 1)
    return figure, axes


def frame_figure(figure: Any, text: ChartText) -> Any:
    """Place title, subtitle and caption on ``figure`` and leave room for them.

    The title and subtitle sit above the plotting area, left-aligned with the
    figure's edge; the caption sits at the foot in small grey type. Returns the
    figure.
    """
    height = figure.get_figheight()
    top_margin = (0.62 if text.subtitle else 0.40) / height
    caption_lines = text.caption.count("\n") + 1 if text.caption else 0
    bottom_margin = (0.48 + 0.15 * caption_lines) / height
    figure.text(0.012, 1 - 0.14 / height, text.title, ha="left", va="top", fontsize=12, fontweight="bold",
                color=INK)
    if text.subtitle:
        figure.text(0.012, 1 - 0.40 / height, text.subtitle, ha="left", va="top", fontsize=9, color=MUTED_INK,
                    style="italic")
    if text.caption:
        figure.text(0.012, 0.06 / height, text.caption, ha="left", va="bottom", fontsize=7, color=MUTED_INK,
                    linespacing=1.3)
    figure.subplots_adjust(top=1 - top_margin - 0.1 / height, bottom=bottom_margin + 0.25 / height)
    return figure


def renderer_of(figure: Any) -> Any:
    """An Agg renderer for ``figure`` (attaching an Agg canvas when it has none), to measure text."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = figure.canvas if isinstance(figure.canvas, FigureCanvasAgg) else FigureCanvasAgg(figure)
    return canvas.get_renderer()


def row_labels(axes: Any, positions: Sequence[float], labels: Sequence[str], *, fontsize: float = 9,
               colour: str = MUTED_INK) -> list[Any]:
    """Category names left of ``axes``, one Text per row at y = ``positions`` (data units).

    Drawn as plain texts (``gid='row-label'``) rather than tick labels: a chart
    with many rows then builds no tick objects, which are the costliest part of
    drawing it; the y axis carries no ticks.
    """
    from matplotlib.transforms import offset_copy

    axes.set_yticks([])
    transform = offset_copy(axes.get_yaxis_transform(), axes.figure, x=-4, y=0, units="points")
    return [axes.text(0, y, str(label), transform=transform, ha="right", va="center", fontsize=fontsize,
                      color=colour, gid="row-label") for y, label in zip(positions, labels, strict=True)]


def row_label_texts(axes: Any) -> list[str]:
    """The row labels of ``axes`` bottom to top (as :func:`row_labels` drew them)."""
    texts = [t for t in axes.texts if t.get_gid() == "row-label"]
    return [t.get_text() for t in sorted(texts, key=lambda t: t.get_position()[1])]


def fit_side_margins(figure: Any, axes: Any, *, legend: Any = None, min_left: float = 0.12,
                     max_left: float = 0.5) -> None:
    """Set the left margin to the widest y tick label and the right one to the legend's width.

    Measures the texts once with the figure's renderer (cheaper than a full
    tight layout, and it leaves the title block and caption where
    :func:`frame_figure` put them).
    """
    renderer = renderer_of(figure)
    width = figure.get_figwidth() * figure.dpi
    texts = [t for t in axes.texts if t.get_gid() == "row-label"] or list(axes.get_yticklabels())
    # the widest label is among the longest strings: measure only those (text layout is the costly part)
    longest = sorted((t for t in texts if t.get_text()), key=lambda t: len(t.get_text()), reverse=True)[:6]
    labels = [t.get_window_extent(renderer).width for t in longest]
    # tick length and padding, plus a little air
    left = min(max_left, max(min_left, (max(labels, default=0) + 0.16 * figure.dpi) / width))
    right = 0.97
    if legend is not None:
        right = 1 - (legend.get_window_extent(renderer).width + 0.2 * figure.dpi) / width
    figure.subplots_adjust(left=left, right=max(right, left + 0.25))


def caption_text(*, source: str = "", base: str = "", weighting: str = "", interval: str = "",
                 extra: Sequence[str] = ()) -> str:
    """A caption from its parts: 'Source: ... Base: ... Weighting: ... Intervals: ...'."""
    parts = [f"Source: {source}" if source else "", f"Base: {base}" if base else "",
             f"Weighting: {weighting}" if weighting else "", f"Intervals: {interval}" if interval else ""]
    first = " · ".join(p for p in parts[:2] if p)
    second = " · ".join(p for p in parts[2:] if p)
    return "\n".join(line for line in (first, second, *extra) if line)


def percent_axis(axis: Any) -> None:
    """Format an axis holding proportions (0-1) as whole percentages."""
    from matplotlib.ticker import FuncFormatter

    axis.set_major_formatter(FuncFormatter(lambda value, _: f"{value * 100:.0f}%"))
