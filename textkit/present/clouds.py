"""Word clouds with the ``wordcloud`` library: two-sided keyness clouds and plain frequency clouds.

Choices, where cloud tools often disappoint:

* **Phrases stay whole.** Terms are handed to the layout as they are (the
  space-joined phrases of :func:`textkit.text.document_term_matrix` or
  keyness.csv), never re-split into words.
* **Size is proportional to the stated measure.** ``relative_scaling=1``: a
  word's font size is the largest size times its measure over the largest
  measure (rounded; a word that does not fit is shrunk, and so are all smaller
  ones, so sizes stay monotone). Both sides of a keyness cloud share one scale.
  The caption names the measure.
* **Each side gets its fair share.** The two sides are laid out in their own
  column of equal size with the same number of candidate words
  (``words_per_side``), so the side with more key terms cannot take every slot.
* **Words used at similar rates by both sides** (|z| below ``neutral_below``)
  are not dropped nor given to a side: they are drawn in grey in a narrow middle
  column at the smallest size.
* **Same seed, same picture**: layout and colours come from ``seed`` alone.
* **Any script.** The default font is DejaVu Sans, which ships with matplotlib
  and covers Latin with accents, Greek and Cyrillic. For other scripts (Chinese,
  Arabic, Devanagari ...) pass ``font_path`` to a TrueType/OpenType font that
  covers them; wordcloud draws one font only, with no fallback per glyph.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ..errors import AnalysisError
from .charts import MEASURE_NAMES, _signed_measure, keyness_comparison
from .style import NEUTRAL_COLOUR, ChartText, category_colour, chart_style, default_font_path, frame_figure


@dataclass(frozen=True)
class CloudColumn:
    """One laid-out column of a cloud.

    Attributes
    ----------
    cloud : wordcloud.WordCloud
        The fitted cloud; ``cloud.layout_`` lists ``((term, relative size), font size,
        position, orientation, colour)`` for every word placed.
    colour : str
        The colour of every word of the column.
    name : str
        What the column stands for (a group, "similar rates").
    """

    cloud: Any
    colour: str
    name: str

    @property
    def placed(self) -> list[str]:
        return [entry[0][0] for entry in self.cloud.layout_]

    @property
    def font_sizes(self) -> dict[str, int]:
        return {entry[0][0]: int(entry[1]) for entry in self.cloud.layout_}


def _column(frequencies: Mapping[str, float], colour: str, name: str, *, width: int, height: int,
            max_font_size: int, seed: int, font_path: str | None, min_font_size: int) -> CloudColumn:
    from wordcloud import WordCloud

    cloud = WordCloud(font_path=font_path or default_font_path(), width=width, height=height, margin=4,
                      background_color="white", max_words=max(len(frequencies), 1), relative_scaling=1.0,
                      max_font_size=max(max_font_size, min_font_size), min_font_size=min_font_size,
                      prefer_horizontal=1.0, random_state=seed, color_func=lambda *args, **kwargs: colour,
                      normalize_plurals=False, collocations=False)
    if frequencies:
        cloud.generate_from_frequencies(dict(frequencies))
    else:
        cloud.layout_ = []
    return CloudColumn(cloud, colour, name)


def two_sided_columns(terms: Any, values: Any, neutral: Any, *, words_per_side: int = 40, seed: int = 0,
                      font_path: str | None = None, side_width: int = 800, height: int = 800,
                      max_font_size: int = 72, min_font_size: int = 9,
                      names: tuple[str, str] = ("group", "reference")) -> list[CloudColumn]:
    """Lay out the columns of a two-sided cloud.

    Parameters
    ----------
    terms : array of shape (n_terms,), str
    values : array of shape (n_terms,), float
        Signed measure: positive leans to the first side, negative to the second.
    neutral : array of shape (n_terms,), bool
        Terms used at similar rates by both sides (drawn grey, smallest size).
    words_per_side : int, default 40
        Candidate words per side (the largest by absolute measure).

    Returns
    -------
    list of CloudColumn
        First side, the neutral column (only when there are neutral terms), second side.
    """
    frame = pd.DataFrame({"term": np.asarray(terms, dtype=object).astype(str),
                          "value": np.asarray(values, dtype=float), "neutral": np.asarray(neutral, dtype=bool)})
    frame = frame[np.isfinite(frame["value"])]
    sided = frame[~frame["neutral"]]
    first = sided[sided["value"] > 0].nlargest(words_per_side, "value", keep="first")
    second = sided[sided["value"] < 0].nsmallest(words_per_side, "value", keep="first")
    scale = max(first["value"].abs().max() if len(first) else 0, second["value"].abs().max() if len(second) else 0)
    if scale <= 0 and not frame["neutral"].any():
        raise AnalysisError("no term leans to either side; nothing to draw in the cloud")
    columns = []
    for part, colour, name, seed_offset in ((first, category_colour(0), names[0], 0),
                                            (second, category_colour(1), names[1], 2)):
        top = part["value"].abs().max() if len(part) else 0.0
        size = int(round(max_font_size * top / scale)) if scale > 0 else min_font_size
        columns.append(_column(dict(zip(part["term"], part["value"].abs(), strict=True)), colour, name,
                               width=side_width, height=height, max_font_size=size, seed=seed + seed_offset,
                               font_path=font_path, min_font_size=min_font_size))
    columns = _fair_share(columns, (first, second), seed=seed, font_path=font_path, side_width=side_width,
                          height=height, min_font_size=min_font_size)
    middle = frame[frame["neutral"]].head(words_per_side)
    if len(middle):
        columns.insert(1, _column(dict.fromkeys(middle["term"], 1.0), NEUTRAL_COLOUR, "similar rates",
                                  width=max(side_width // 3, 120), height=height,
                                  max_font_size=max(min_font_size, int(max_font_size * 0.2)), seed=seed + 1,
                                  font_path=font_path, min_font_size=min_font_size))
    return columns


def _fair_share(columns: list[CloudColumn], parts: tuple[pd.DataFrame, pd.DataFrame], *, seed: int,
                font_path: str | None, side_width: int, height: int, min_font_size: int) -> list[CloudColumn]:
    """Lay the side that placed more words out again with as many words as the other placed.

    Applies when the side that placed fewer ran out of room (it had more key
    terms than it placed); a side that simply has fewer key terms does not
    shrink the other.
    """
    placed = [len(c.placed) for c in columns]
    fewer = int(np.argmin(placed))
    more = 1 - fewer
    if placed[more] - placed[fewer] <= 1 or len(parts[fewer]) <= placed[fewer]:
        return columns
    trimmed = parts[more].head(placed[fewer])
    old = columns[more]
    sizes = old.font_sizes
    redo = _column(dict(zip(trimmed["term"], trimmed["value"].abs(), strict=True)), old.colour, old.name,
                   width=side_width, height=height, max_font_size=max(sizes.values()) if sizes else min_font_size,
                   seed=seed + 2 * more, font_path=font_path, min_font_size=min_font_size)
    columns = list(columns)
    columns[more] = redo
    return columns


def _cloud_figure(columns: list[CloudColumn], text: ChartText) -> Any:
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch

    gap = np.full((columns[0].cloud.height, 12, 3), 255, dtype=np.uint8)
    pieces = []
    for index, column in enumerate(columns):
        if index:
            pieces.append(gap)
        pieces.append(column.cloud.to_array() if column.cloud.layout_ else
                      np.full((column.cloud.height, column.cloud.width, 3), 255, dtype=np.uint8))
    image = np.hstack(pieces)
    with chart_style():
        aspect = image.shape[0] / image.shape[1]
        figure = Figure(figsize=(8.5, 8.5 * aspect + 1.7), dpi=100)
        axes = figure.add_subplot(1, 1, 1)
        axes.imshow(image, interpolation="lanczos")
        axes.set_axis_off()
        handles = [Patch(color=c.colour, label=c.name) for c in columns]
        axes.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, 0.0), ncol=len(handles),
                    fontsize=8).set_gid("legend")
        frame_figure(figure, text)
        figure.subplots_adjust(left=0.01, right=0.99)
    return figure


def keyness_cloud(keyness: pd.DataFrame, *, question: str, group_var: str, group: str, reference: str = "(rest)",
                  measure: str = "z", words_per_side: int = 40, neutral_below: float = 1.96, seed: int = 0,
                  font_path: str | None = None, text: ChartText | None = None) -> tuple[Any, list[CloudColumn]]:
    """Two-sided keyness cloud of one comparison of keyness.csv.

    Parameters
    ----------
    measure : {'z', 'log_odds', 'log_ratio', 'g2'}, default 'z'
        Word size is proportional to its absolute value; the side is its sign.
    neutral_below : float, default 1.96
        Terms with ``|z|`` below this lean to neither side (grey, middle column).
    font_path : str, optional
        A TrueType/OpenType font for scripts DejaVu Sans lacks.

    Returns
    -------
    (Figure, list of CloudColumn)
        The figure, and the laid-out columns (what was placed, at which size).
    """
    rows = keyness_comparison(keyness, question=question, group_var=group_var, group=group, reference=reference)
    values = _signed_measure(rows, measure)
    z = rows["z"].to_numpy(dtype=float) if "z" in rows.columns else values
    reference_name = "the rest" if reference == "(rest)" else reference
    columns = two_sided_columns(rows["term"].to_numpy(), values, np.abs(z) < neutral_below,
                                words_per_side=words_per_side, seed=seed, font_path=font_path,
                                names=(f"more used by {group}", f"more used by {reference_name}"))
    caption = (f"Word size proportional to |{measure}|: {MEASURE_NAMES.get(measure, measure)}, one scale for "
               f"both sides; grey: |z| < {neutral_below:g} (similar rates).")
    title = text or ChartText(f"{group} and {reference_name}: the words that set them apart", question, caption)
    if text is not None and not text.caption:
        title = ChartText(text.title, text.subtitle, caption)
    return _cloud_figure(columns, title), columns


def frequency_cloud(frequencies: Mapping[str, float], *, seed: int = 0, font_path: str | None = None,
                    max_words: int = 80, width: int = 1200, height: int = 700, colour_index: int = 0,
                    measure: str = "answers using the term", text: ChartText | None = None
                    ) -> tuple[Any, CloudColumn]:
    """A plain cloud of one group's terms, size proportional to ``frequencies`` (e.g. answers using each term)."""
    top = pd.Series(dict(frequencies), dtype=float)
    top = top[top > 0].sort_values(ascending=False, kind="stable").head(max_words)
    if top.empty:
        raise AnalysisError("no term has a positive frequency; nothing to draw in the cloud")
    column = _column(top.to_dict(), category_colour(colour_index), measure, width=width, height=height,
                     max_font_size=110, seed=seed, font_path=font_path, min_font_size=9)
    caption = f"Word size proportional to the number of {measure}."
    frame = text or ChartText("Most frequent words and phrases", "", caption)
    return _cloud_figure([column], frame), column


def group_term_frequencies(matrix: Any, terms: Any, rows: Any) -> dict[str, float]:
    """Answers using each term among ``rows`` of a document-term matrix.

    Parameters
    ----------
    matrix : sparse matrix of shape (n_answers, n_terms)
        From :func:`textkit.text.document_term_matrix` (``binary=True`` counts answers).
    terms : array of shape (n_terms,)
    rows : boolean array of shape (n_answers,) or integer indices
    """
    counts = np.asarray(matrix[rows].sum(axis=0)).ravel()
    used = np.flatnonzero(counts)
    return dict(zip(np.asarray(terms, dtype=object)[used].astype(str), counts[used].astype(float), strict=True))
