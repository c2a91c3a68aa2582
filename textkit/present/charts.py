"""Charts over the tidy result tables: prevalence, differences, keyness, co-occurrence, topics.

Every function takes tables as ``textkit prevalence``, ``textkit keyness``,
``textkit code`` (and the topic step) write them, and returns a matplotlib
``Figure`` without saving it (the writers in :mod:`textkit.io.output` do).
Only the columns those commands write today are needed; optional columns are
used when present (``label`` for theme labels, ``flag`` for publishing flags).

Artists that tests and notebooks may want to find carry a ``gid``:
``points:<group>``, ``hollow:<group>``, ``whiskers:<group>``, ``suppressed``,
``bars:<side>``, ``zero-line``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from ..errors import AnalysisError
from .style import (
    CATEGORY_COLOURS,
    INK,
    MUTED_INK,
    NEUTRAL_COLOUR,
    SEQUENTIAL_MAP,
    ChartText,
    category_colour,
    chart_style,
    fit_side_margins,
    frame_figure,
    new_figure,
    percent_axis,
    row_labels,
)

ALL = "(all)"
#: Axis names of the keyness measures in keyness.csv.
MEASURE_NAMES = {
    "z": "z-score of the weighted log-odds ratio (informative Dirichlet prior)",
    "log_odds": "weighted log-odds ratio (informative Dirichlet prior)",
    "log_ratio": "Log Ratio (log2 of the ratio of relative frequencies)",
    "g2": "Dunning's log-likelihood G²",
}


def _require(frame: pd.DataFrame, columns: Sequence[str], table: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise AnalysisError(f"{table} has no column {', '.join(map(repr, missing))}; "
                            f"it was not written by the command that makes {table}")


def _choose(frame: pd.DataFrame, column: str, value: Any, table: str) -> pd.DataFrame:
    """Rows where ``column == value`` (compared as text), or a one-line error listing the valid values."""
    values = frame[column]
    if not pd.api.types.is_string_dtype(values):
        values = values.astype(str)
    chosen = frame[values == str(value)]
    if chosen.empty:
        valid = ", ".join(sorted(values.unique()))
        raise AnalysisError(f"{column} '{value}' is not in {table}; valid values: {valid}")
    return chosen


def _theme_labels(frame: pd.DataFrame, labels: Mapping[str, str] | None) -> dict[str, str]:
    """Theme id -> label: the table's ``theme_label`` (or ``label``) column, overridden by ``labels``."""
    found: dict[str, Any] = {}
    for column in ("label", "theme_label"):
        if column in frame.columns:
            pairs = frame[["theme", column]].drop_duplicates("theme")
            found.update(zip(pairs["theme"].tolist(), pairs[column].tolist(), strict=True))
    found.update(labels or {})
    return {str(k): str(v) for k, v in found.items() if isinstance(v, str) and v}


def question_wording(frame: pd.DataFrame, question: str) -> str:
    """The wording of ``question`` from a ``question_text`` column ('' when the table has none)."""
    if "question_text" not in frame.columns:
        return ""
    texts = frame.loc[frame["question"].astype(str) == str(question), "question_text"].dropna().astype(str)
    return texts.iloc[0] if len(texts) else ""


def _flags(frame: pd.DataFrame) -> np.ndarray:
    return frame["flag"].astype(str).to_numpy() if "flag" in frame.columns else np.full(len(frame), "ok")


def prevalence_chart(prevalence: pd.DataFrame, *, question: str, group_var: str = ALL, wave: str = ALL,
                     themes: Sequence[str] | None = None, labels: Mapping[str, str] | None = None,
                     text: ChartText | None = None) -> Any:
    """Prevalence of each theme by group: a dot per group with its confidence interval.

    Parameters
    ----------
    prevalence : DataFrame
        ``prevalence.csv``: ``question, theme, group_var, group, wave, n, estimate,
        ci_low, ci_high`` and optionally ``flag`` (ok / caution / suppress) and ``label``.
    question, group_var, wave : str
        The slice drawn; ``group_var='(all)'`` draws the whole sample.
    themes : sequence of str, optional
        Themes to draw (default all), ordered by overall prevalence either way.
    labels : mapping theme -> label, optional
    text : ChartText, optional
        Title, subtitle and caption (a plain title by default).

    One row per theme, highest overall prevalence at the top; a dot per group,
    dodged vertically, with its interval as a whisker. ``caution`` estimates are
    hollow dots; ``suppress`` estimates draw neither dot nor whisker, only a
    small grey cross at the axis start (legend: "suppressed"). The legend
    (group name and unweighted base) sits outside the plotting area.
    """
    _require(prevalence, ["question", "theme", "group_var", "group", "wave", "n", "estimate", "ci_low",
                          "ci_high"], "prevalence.csv")
    rows = _choose(prevalence, "question", question, "prevalence.csv")
    rows = _choose(rows, "wave", wave, "prevalence.csv")
    overall = rows[rows["group_var"].astype(str) == ALL]
    rows = _choose(rows, "group_var", group_var, "prevalence.csv")
    if themes is not None:
        rows = rows[rows["theme"].isin(list(themes))]
        if rows.empty:
            raise AnalysisError(f"none of the themes {', '.join(themes)} is in prevalence.csv")
    order_source = overall if not overall.empty else rows
    ranking = order_source.groupby("theme")["estimate"].mean().reindex(rows["theme"].unique()).fillna(-1)
    theme_order = list(ranking.sort_values(ascending=True, kind="stable").index)  # bottom to top
    groups = sorted(rows["group"].astype(str).unique())
    names = _theme_labels(prevalence, labels)
    wording = question_wording(prevalence, question)
    frame = text or ChartText(f"{question}: theme prevalence" + ("" if group_var == ALL else f" by {group_var}"),
                              wording)
    frame = ChartText(frame.title, frame.subtitle, _join_lines(frame.caption, flag_note(rows)))
    with chart_style():
        figure, axes = new_figure(len(theme_order) * max(1, min(len(groups), 3) * 0.6),
                                  width=8.5 if len(groups) > 1 else 7.5)
        _draw_prevalence_dots(axes, rows, theme_order, groups)
        row_labels(axes, np.arange(len(theme_order)), [names.get(t, t) for t in theme_order])
        axes.set_ylim(-0.7, len(theme_order) - 0.3)
        top = float(np.nanmax(rows["ci_high"].to_numpy(dtype=float), initial=0.0))
        axes.set_xlim(0, max(top * 1.12, 0.01))  # room right of the longest whisker for its value label
        percent_axis(axes.xaxis)
        axes.xaxis.grid(True)
        axes.set_axisbelow(True)
        axes.set_xlabel("Share of respondents who answered (%), with 95% interval")
        legend = axes.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, handletextpad=0.3,
                             title=None if group_var == ALL else group_var, title_fontproperties={"size": 8})
        legend.set_gid("legend")
        frame_figure(figure, frame)
        fit_side_margins(figure, axes, legend=legend)
        _direct_labels(axes, rows, theme_order, groups)
    return figure


def _join_lines(*lines: str) -> str:
    return "\n".join(line for line in lines if line)


def flag_note(rows: pd.DataFrame) -> str:
    """One caption line naming why drawn estimates are hollow or left out (from ``flag_reason``)."""
    if "flag_reason" not in rows.columns or "flag" not in rows.columns:
        return ""
    parts = []
    for flag, marker in (("caution", "Hollow dots (use with caution)"), ("suppress", "× (not shown)")):
        reasons = rows.loc[rows["flag"].astype(str) == flag, "flag_reason"].dropna().astype(str)
        found = sorted({part.strip() for text in reasons for part in text.split(";") if part.strip()})
        if found:
            parts.append(f"{marker}: {'; '.join(found)}")
    return ". ".join(parts) + ("." if parts else "")


def _dodge(groups: list[str]) -> np.ndarray:
    """Vertical offsets of each group's dot within a theme's row (first group on top)."""
    spread = 0.7 if len(groups) > 1 else 0.0
    return np.linspace(spread / 2, -spread / 2, len(groups)) if len(groups) > 1 else np.zeros(1)


def _draw_prevalence_dots(axes: Any, rows: pd.DataFrame, theme_order: list[str], groups: list[str]) -> None:
    position = {theme: index for index, theme in enumerate(theme_order)}
    offsets = _dodge(groups)
    flags = _flags(rows)
    suppressed_y: list[float] = []
    for index, group in enumerate(groups):
        mine = (rows["group"].astype(str) == group).to_numpy()
        part = rows[mine]
        y = part["theme"].map(position).to_numpy(dtype=float) + offsets[index]
        flag = flags[mine]
        shown = flag != "suppress"
        hollow = flag == "caution"
        colour = category_colour(index)
        base = int(part["n"].max()) if len(part) else 0
        label = "All respondents" if group == ALL else group
        axes.hlines(y[shown], part["ci_low"].to_numpy()[shown], part["ci_high"].to_numpy()[shown], color=colour,
                    linewidth=1.3, gid=f"whiskers:{group}")
        filled = shown & ~hollow
        axes.scatter(part["estimate"].to_numpy()[filled], y[filled], s=26, color=colour, zorder=3,
                     label=f"{label} (n={base:,})", gid=f"points:{group}")
        axes.scatter(part["estimate"].to_numpy()[shown & hollow], y[shown & hollow], s=26, facecolor="white",
                     edgecolor=colour, linewidth=1.2, zorder=3, gid=f"hollow:{group}")
        suppressed_y.extend(y[~shown])
    axes.scatter([], [], s=26, facecolor="white", edgecolor=MUTED_INK, linewidth=1.2,
                 label="hollow: caution")
    axes.scatter(np.zeros(len(suppressed_y)), suppressed_y, marker="x", s=14, color=NEUTRAL_COLOUR, zorder=3,
                 clip_on=False, gid="suppressed", label="× suppressed")


def _direct_labels(axes: Any, rows: pd.DataFrame, theme_order: list[str], groups: list[str]) -> list[Any]:
    """Group names beside the top row's dots (several groups), then each dot's value; no two overlap.

    Labels go right of the whisker, else left of it, else are dropped (see
    :func:`textkit.present.labels.place_labels`). Artists: ``gid`` ``label:group:<g>``
    and ``value-label:<g>``.
    """
    from .labels import LabelRequest, place_labels, segment_boxes

    position = {theme: index for index, theme in enumerate(theme_order)}
    offsets = dict(zip(groups, _dodge(groups), strict=True))
    shown = rows[_flags(rows) != "suppress"]
    y = shown["theme"].map(position).to_numpy(dtype=float) + shown["group"].astype(str).map(offsets).to_numpy(float)
    low, high, estimate = (shown[c].to_numpy(dtype=float) for c in ("ci_low", "ci_high", "estimate"))
    obstacles = np.vstack([segment_boxes(axes, low, high, y, 1.0), segment_boxes(axes, estimate, estimate, y, 2.8)])
    order = np.lexsort((shown["group"].astype(str).map({g: i for i, g in enumerate(groups)}).to_numpy(), -y))
    requests = []
    group_of = shown["group"].astype(str).to_numpy()
    is_top = shown["theme"].to_numpy() == theme_order[-1] if theme_order else np.zeros(len(shown), bool)
    if len(groups) > 1:
        colour = {g: category_colour(i) for i, g in enumerate(groups)}
        requests += [LabelRequest(group_of[i], [(high[i], y[i], "right"), (low[i], y[i], "left")],
                                  f"label:group:{group_of[i]}", colour[group_of[i]], "bold")
                     for i in order if is_top[i]]
    requests += [LabelRequest(f"{estimate[i] * 100:.0f}%", [(high[i], y[i], "right"), (low[i], y[i], "left")],
                              f"value-label:{group_of[i]}", MUTED_INK) for i in order]
    return place_labels(axes, requests, obstacles=obstacles)


def difference_rows(comparisons: pd.DataFrame, *, question: str, kind: str, group_var: str | None = None,
                    group: str | None = None, theme: str | None = None, wave: str = ALL,
                    themes: Sequence[str] | None = None, labels: Mapping[str, str] | None = None) -> pd.DataFrame:
    """The comparisons one difference chart shows, with a ``row_label`` column.

    Themes are named by ``labels``, else the table's ``theme_label`` column, else their id;
    ``themes`` (optional) keeps only those themes.

    kind : {'waves', 'vs_rest', 'pairs'}
        ``waves``: wave against wave for the whole sample, one row per theme;
        ``vs_rest``: ``group`` of ``group_var`` against the rest within ``wave``, one row per theme
        (every group, one row per group x theme, when ``group`` is None);
        ``pairs``: every comparison of ``group_var`` (pairs and vs rest) for ``theme`` within ``wave``.
    """
    _require(comparisons, ["question", "theme", "group_var", "group_a", "group_b", "wave_a", "wave_b",
                           "difference", "ci_low", "ci_high"], "comparisons.csv")
    rows = _choose(comparisons, "question", question, "comparisons.csv")
    if themes is not None:
        rows = rows[rows["theme"].astype(str).isin([str(t) for t in themes]) | (rows["theme"].astype(str) == theme)]
    lookup = _theme_labels(comparisons, labels)
    rows = rows.assign(_name=rows["theme"].astype(str).map(lambda t: lookup.get(t, t)))
    if kind == "waves":
        rows = rows[(rows["group_var"].astype(str) == ALL) & (rows["wave_a"].astype(str) != rows["wave_b"].astype(str))]
        if rows.empty:
            raise AnalysisError("comparisons.csv has no wave-against-wave rows (only one wave was analysed)")
        return rows.assign(row_label=rows["_name"])
    if kind not in ("vs_rest", "pairs"):
        raise AnalysisError(f"unknown difference kind '{kind}'; choose waves, vs_rest or pairs")
    rows = _choose(rows, "group_var", group_var, "comparisons.csv")
    rows = _choose(rows[rows["wave_a"].astype(str) == rows["wave_b"].astype(str)], "wave_a", wave, "comparisons.csv")
    if kind == "vs_rest":
        rows = rows[rows["group_b"].astype(str) == "(rest)"]
        if group is None:
            return rows.assign(row_label=rows["group_a"].astype(str) + " · " + rows["_name"])
        rows = _choose(rows, "group_a", group, "comparisons.csv")
        return rows.assign(row_label=rows["_name"])
    rows = _choose(rows, "theme", theme, "comparisons.csv")
    other = rows["group_b"].astype(str).replace("(rest)", "the rest")
    return rows.assign(row_label=rows["group_a"].astype(str) + " vs " + other)


def largest_differences(rows: pd.DataFrame, max_rows: int = 25, alpha: float = 0.05) -> pd.DataFrame:
    """The ``max_rows`` rows with the largest absolute difference, significant ones (q <= alpha) first."""
    significant = rows["q_value"].to_numpy(dtype=float) <= alpha if "q_value" in rows.columns \
        else np.zeros(len(rows), bool)
    ranked = rows.assign(_significant=significant, _size=rows["difference"].abs())
    ranked = ranked.sort_values(["_significant", "_size"], ascending=False, kind="stable").head(max_rows)
    return ranked.drop(columns=["_significant", "_size"])


def differences_chart(rows: pd.DataFrame, *, alpha: float = 0.05, labels: Mapping[str, str] | None = None,
                      text: ChartText | None = None) -> Any:
    """Horizontal differences with their intervals, sorted by size, zero line drawn.

    Parameters
    ----------
    rows : DataFrame
        Comparisons with ``row_label, difference, ci_low, ci_high`` and optionally
        ``q_value`` (see :func:`difference_rows`).
    alpha : float, default 0.05
        Rows with ``q_value <= alpha`` (Benjamini-Hochberg) are drawn as filled
        dark dots with a thick whisker; the others as hollow grey dots.
    """
    _require(rows, ["row_label", "difference", "ci_low", "ci_high"], "the comparison rows")
    ordered = rows.sort_values("difference", kind="stable").reset_index(drop=True)
    significant = (ordered["q_value"].to_numpy(dtype=float) <= alpha) if "q_value" in ordered.columns \
        else np.zeros(len(ordered), bool)
    y = np.arange(len(ordered), dtype=float)
    names = labels or {}
    with chart_style():
        figure, axes = new_figure(len(ordered), width=7.5)
        axes.axvline(0, color=INK, linewidth=0.9, gid="zero-line", zorder=1)
        for chosen, colour, gid, label in ((significant, CATEGORY_COLOURS[0], "significant",
                                            f"significant after FDR (q ≤ {alpha:g})"),
                                           (~significant, NEUTRAL_COLOUR, "not-significant", "not significant")):
            axes.hlines(y[chosen], ordered["ci_low"].to_numpy()[chosen], ordered["ci_high"].to_numpy()[chosen],
                        color=colour, linewidth=2.0 if gid == "significant" else 1.1, gid=f"whiskers:{gid}")
            axes.scatter(ordered["difference"].to_numpy()[chosen], y[chosen], s=28, zorder=3,
                         facecolor=colour if gid == "significant" else "white", edgecolor=colour, linewidth=1.2,
                         gid=f"points:{gid}", label=label)
        row_labels(axes, y, [names.get(label, label) for label in ordered["row_label"]])
        axes.set_ylim(-0.7, len(ordered) - 0.3)
        axes.xaxis.set_major_formatter(_points_formatter())
        axes.xaxis.grid(True)
        axes.set_axisbelow(True)
        axes.set_xlabel("Difference in percentage points, with 95% interval")
        legend = axes.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8)
        legend.set_gid("legend")
        frame_figure(figure, text or ChartText("Differences in theme prevalence"))
        fit_side_margins(figure, axes, legend=legend)
    return figure


def _points_formatter() -> Any:
    from matplotlib.ticker import FuncFormatter

    return FuncFormatter(lambda value, _: f"{value * 100:+.0f}" if value else "0")


def keyness_chart(keyness: pd.DataFrame, *, question: str, group_var: str, group: str, reference: str = "(rest)",
                  measure: str = "z", top: int = 15, text: ChartText | None = None) -> Any:
    """Diverging horizontal bars: the terms that set ``group`` apart, and those of ``reference``.

    Parameters
    ----------
    keyness : DataFrame
        ``keyness.csv``: ``question, group_var, group, reference, term`` and the
        signed ``measure`` column (positive: key for ``group``).
    measure : {'z', 'log_odds', 'log_ratio', 'g2'}, default 'z'
        Bar length; named on the axis. ``g2`` is unsigned and takes the sign of ``z``.
    top : int, default 15
        Terms per side.
    """
    side = keyness_comparison(keyness, question=question, group_var=group_var, group=group, reference=reference)
    reference_name = "the rest" if reference == "(rest)" else reference
    signed = _signed_measure(side, measure)
    n_shown = int(min(top, (signed > 0).sum()) + min(top, (signed < 0).sum()))
    with chart_style():
        figure, axes = new_figure(n_shown, width=7.5, row_height=0.22)
        _draw_keyness_bars(axes, side, measure, top, (group, reference_name))
        axes.set_xlabel(f"{MEASURE_NAMES.get(measure, measure)}; ← {reference_name} · {group} →")
        legend = axes.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8)
        legend.set_gid("legend")
        frame_figure(figure, text or ChartText(f"Words and phrases that set {group} apart from {reference_name}",
                                               question))
        fit_side_margins(figure, axes, legend=legend)
    return figure


def _draw_keyness_bars(axes: Any, side: pd.DataFrame, measure: str, top: int, names: tuple[str, str],
                       fontsize: float = 9) -> None:
    values = _signed_measure(side, measure)
    side = side.assign(value=values)
    left = side[side["value"] < 0].nsmallest(top, "value")
    right = side[side["value"] > 0].nlargest(top, "value")
    shown = pd.concat([left.sort_values("value", ascending=False), right.sort_values("value")])
    y = np.arange(len(shown), dtype=float)
    positive = shown["value"].to_numpy() > 0
    for chosen, colour, name in ((positive, category_colour(0), names[0]), (~positive, category_colour(1), names[1])):
        horizontal_bars(axes, y[chosen], shown["value"].to_numpy()[chosen], colour=colour,
                        label=f"more used by {name}", gid=f"bars:{name}")
    axes.axvline(0, color=INK, linewidth=0.8, gid="zero-line")
    row_labels(axes, y, list(shown["term"].astype(str)), fontsize=fontsize)
    axes.set_ylim(-0.7, max(len(shown), 1) - 0.3)
    axes.xaxis.grid(True)
    axes.set_axisbelow(True)


def horizontal_bars(axes: Any, y: np.ndarray, values: np.ndarray, *, colour: str, gid: str, label: str | None = None,
                    height: float = 0.7) -> Any:
    """Horizontal bars from 0 to ``values`` at ``y`` as one PolyCollection (``gid``; one path per bar).

    One collection instead of a Rectangle per bar: fewer artists to build and draw.
    """
    from matplotlib.collections import PolyCollection

    half = height / 2
    corners = [[(0.0, row - half), (value, row - half), (value, row + half), (0.0, row + half)]
               for row, value in zip(np.asarray(y, float), np.asarray(values, float), strict=True)]
    bars = PolyCollection(corners, facecolors=colour, edgecolors="none", gid=gid, label=label or "_nolegend_")
    axes.add_collection(bars, autolim=True)
    axes.autoscale_view()
    return bars


def keyness_panels(keyness: pd.DataFrame, *, question: str, group_var: str, measure: str = "z", top: int = 8,
                   text: ChartText | None = None) -> Any:
    """One diverging-bar panel per comparison of ``group_var`` (each group against its reference)."""
    _require(keyness, ["question", "group_var", "group", "reference", "term"], "keyness.csv")
    rows = _choose(_choose(keyness, "question", question, "keyness.csv"), "group_var", group_var, "keyness.csv")
    pairs = list(dict.fromkeys(zip(rows["group"].astype(str), rows["reference"].astype(str), strict=True)))
    n_columns = min(2, len(pairs))
    n_rows = int(np.ceil(len(pairs) / n_columns))
    with chart_style():
        from matplotlib.figure import Figure

        figure = Figure(figsize=(4.2 * n_columns + 0.4, n_rows * (0.2 * 2 * top + 0.9) + 1.8), dpi=100)
        grid = figure.subplots(n_rows, n_columns, squeeze=False)
        for index, (group, reference) in enumerate(pairs):
            axes = grid[index // n_columns][index % n_columns]
            side = rows[(rows["group"].astype(str) == group) & (rows["reference"].astype(str) == reference)]
            other = "the rest" if reference == "(rest)" else reference
            _draw_keyness_bars(axes, side, measure, top, (group, other), fontsize=7)
            axes.set_title(f"{group} (blue) vs {other} (orange)", loc="left", fontsize=8, color=INK)
            axes.tick_params(axis="x", labelsize=6)
        for index in range(len(pairs), n_rows * n_columns):
            grid[index // n_columns][index % n_columns].set_visible(False)
        frame = text or ChartText(f"Words and phrases that set each {group_var} group apart", question)
        frame_figure(figure, frame)
        bottom = figure.subplotpars.bottom  # the axis name goes under the last row's tick labels
        figure.supxlabel(MEASURE_NAMES.get(measure, measure), fontsize=8, y=bottom, va="bottom")
        figure.subplots_adjust(left=0.2, right=0.97, wspace=0.95, hspace=0.4,
                               bottom=bottom + 0.38 / figure.get_figheight())
    return figure


def keyness_comparison(keyness: pd.DataFrame, *, question: str, group_var: str, group: str,
                       reference: str = "(rest)") -> pd.DataFrame:
    """The keyness.csv rows of one comparison (one-line error listing valid values otherwise)."""
    _require(keyness, ["question", "group_var", "group", "reference", "term"], "keyness.csv")
    rows = _choose(keyness, "question", question, "keyness.csv")
    rows = _choose(rows, "group_var", group_var, "keyness.csv")
    rows = _choose(rows, "group", group, "keyness.csv")
    return _choose(rows, "reference", reference, "keyness.csv")


def _signed_measure(rows: pd.DataFrame, measure: str) -> np.ndarray:
    _require(rows, [measure], "keyness.csv")
    values = rows[measure].to_numpy(dtype=float)
    if measure == "g2" and "z" in rows.columns:
        values = np.abs(values) * np.sign(rows["z"].to_numpy(dtype=float))
    return values


def cooccurrence_matrix(theme_matrix: Any, weights: np.ndarray | None = None) -> np.ndarray:
    """Share of answers with theme A (row) that also have theme B (column).

    Parameters
    ----------
    theme_matrix : array or sparse matrix of shape (n_answers, n_themes), 0/1
    weights : ndarray of shape (n_answers,), optional

    Returns
    -------
    ndarray of shape (n_themes, n_themes)
        NaN on rows of themes no answer has.
    """
    import scipy.sparse as sp

    matrix = sp.csr_matrix(theme_matrix, dtype=float)
    weighted = matrix if weights is None else sp.diags(np.asarray(weights, dtype=float)) @ matrix
    joint = np.asarray((weighted.T @ matrix).todense())
    totals = np.diag(joint).copy()
    with np.errstate(invalid="ignore", divide="ignore"):
        return joint / totals[:, None]


def cooccurrence_chart(coded: pd.DataFrame, themes: Sequence[str], *, question: str, weight: str | None = None,
                       labels: Mapping[str, str] | None = None, text: ChartText | None = None) -> Any:
    """Heatmap of theme co-occurrence among the answers of ``question`` (viridis, diagonal left blank).

    ``coded`` is ``coded.csv``: one row per response x question with 0/1 theme
    columns; themes no answer has are left out.
    """
    _require(coded, ["question", *themes], "coded.csv")
    rows = _choose(coded, "question", question, "coded.csv")
    if "answered" in rows.columns:
        rows = rows[rows["answered"].to_numpy(dtype=float) > 0]
    values = rows[list(themes)].to_numpy(dtype=float)
    present = values.sum(axis=0) > 0
    kept = [t for t, p in zip(themes, present, strict=True) if p]
    weights = rows[weight].to_numpy(dtype=float) if weight and weight in rows.columns else None
    share = cooccurrence_matrix(values[:, present], weights)
    np.fill_diagonal(share, np.nan)
    names = [(labels or {}).get(t, t) for t in kept]
    with chart_style():
        size = max(4.5, 0.26 * len(kept) + 2.6)
        figure, axes = new_figure(0, width=size + 1.2, min_height=size + 0.8)
        image = axes.imshow(share, cmap=SEQUENTIAL_MAP, vmin=0, vmax=max(np.nanmax(share), 1e-9) if share.size else 1,
                            aspect="auto")
        axes.set_xticks(np.arange(len(kept)), names, rotation=60, ha="right", rotation_mode="anchor", fontsize=7)
        axes.set_yticks(np.arange(len(kept)), names, fontsize=7)
        axes.spines[:].set_visible(False)
        if len(kept) <= 12:
            for (i, j), value in np.ndenumerate(share):
                if np.isfinite(value):
                    axes.text(j, i, f"{value * 100:.0f}", ha="center", va="center", fontsize=6,
                              color="white" if value < 0.5 * np.nanmax(share) else INK)
        bar = figure.colorbar(image, ax=axes, fraction=0.04, pad=0.02)
        percent_axis(bar.ax.yaxis)
        bar.set_label("of answers with the row theme, share that also have the column theme", fontsize=7)
        frame_figure(figure, text or ChartText(f"{question}: which themes come up together", question))
        _fit_heatmap_margins(figure, axes)
    return figure


def _fit_heatmap_margins(figure: Any, axes: Any) -> None:
    """Room left of the heatmap for the row names and under it for the slanted column names."""
    from .style import renderer_of

    fit_side_margins(figure, axes, max_left=0.4)
    renderer = renderer_of(figure)
    names = sorted(axes.get_xticklabels(), key=lambda t: len(t.get_text()), reverse=True)[:6]
    height = max((t.get_window_extent(renderer).height for t in names), default=0.0)
    bottom = figure.subplotpars.bottom + (height + 0.1 * figure.dpi) / (figure.get_figheight() * figure.dpi)
    figure.subplots_adjust(bottom=min(bottom, 0.6), right=0.95)


def topic_terms_chart(topics: pd.DataFrame, *, question: str, scope: str | None = None, top: int = 8,
                      text: ChartText | None = None) -> Any:
    """Top terms of each topic as small horizontal bar panels (weight in the topic).

    ``topics`` has ``question, scope, topic, label, rank, term, weight`` (one row
    per topic x term); ``scope`` defaults to the first scope of the question.
    """
    _require(topics, ["question", "topic", "term", "weight"], "topics.csv")
    rows = _choose(topics, "question", question, "topics.csv")
    if "scope" in rows.columns:
        scope = str(rows["scope"].astype(str).iloc[0]) if scope is None else scope
        rows = _choose(rows, "scope", scope, "topics.csv")
    topic_ids = list(dict.fromkeys(rows["topic"]))
    n_columns = min(3, len(topic_ids))
    n_rows = int(np.ceil(len(topic_ids) / n_columns))
    with chart_style():
        from matplotlib.figure import Figure

        figure = Figure(figsize=(3.0 * n_columns + 0.6, 0.22 * top * n_rows + 1.0 * n_rows + 1.6), dpi=100)
        grid = figure.subplots(n_rows, n_columns, squeeze=False)
        for index, topic in enumerate(topic_ids):
            axes = grid[index // n_columns][index % n_columns]
            part = rows[rows["topic"] == topic]
            part = part.sort_values("rank") if "rank" in part.columns else part.sort_values("weight", ascending=False)
            part = part.head(top)[::-1]
            horizontal_bars(axes, np.arange(len(part)), part["weight"].to_numpy(dtype=float),
                            colour=category_colour(index), gid=f"bars:{topic}")
            row_labels(axes, np.arange(len(part)), list(part["term"].astype(str)), fontsize=7)
            label = str(part["label"].iloc[0]) if "label" in part.columns and len(part) else ""
            axes.set_title(f"{topic}: {label}" if label and label != str(topic) else str(topic), loc="left",
                           fontsize=8, color=INK)
            axes.tick_params(axis="x", labelsize=6)
        for index in range(len(topic_ids), n_rows * n_columns):
            grid[index // n_columns][index % n_columns].set_visible(False)
        frame_figure(figure, text or ChartText(f"{question}: topics and their top terms",
                                               f"scope: {scope}" if scope else ""))
        figure.subplots_adjust(left=0.12, right=0.97, wspace=0.9, hspace=0.6)
    return figure


def k_selection_chart(k_selection: pd.DataFrame, *, question: str, scope: str | None = None,
                      text: ChartText | None = None) -> Any:
    """Stability and coherence against the number of topics k, the chosen k marked.

    ``k_selection`` has ``question, scope, k, stability, coherence, chosen``.
    Two stacked panels sharing the k axis (the two scores have different ranges).
    """
    _require(k_selection, ["question", "k", "stability", "coherence"], "k_selection.csv")
    rows = _choose(k_selection, "question", question, "k_selection.csv")
    if "scope" in rows.columns:
        scope = str(rows["scope"].astype(str).iloc[0]) if scope is None else scope
        rows = _choose(rows, "scope", scope, "k_selection.csv")
    rows = rows.sort_values("k")
    chosen = rows[rows["chosen"].astype(str).str.lower().isin(["1", "true", "yes"])] if "chosen" in rows.columns \
        else rows.iloc[0:0]
    with chart_style():
        from matplotlib.figure import Figure

        figure = Figure(figsize=(6.5, 5.0), dpi=100)
        top_axes, bottom_axes = figure.subplots(2, 1, sharex=True)
        panels = ((top_axes, "stability", category_colour(0), "stability (top-term agreement)"),
                  (bottom_axes, "coherence", category_colour(1), "coherence (NPMI)"))
        for axes, column, colour, name in panels:
            axes.plot(rows["k"], rows[column], marker="o", color=colour, linewidth=1.5, markersize=4, gid=column)
            axes.set_ylabel(name, fontsize=8)
            axes.yaxis.grid(True)
            for k in chosen["k"]:
                axes.axvline(k, color=MUTED_INK, linestyle="--", linewidth=0.9, gid="chosen-k")
        for k in chosen["k"]:
            top_axes.annotate(f"chosen k = {int(k)}", (k, 1.0), xycoords=("data", "axes fraction"), xytext=(4, -2),
                              textcoords="offset points", va="top", fontsize=8, color=INK)
        bottom_axes.set_xlabel("number of topics k")
        bottom_axes.set_xticks(rows["k"].to_numpy())
        frame_figure(figure, text or ChartText(f"{question}: how many topics", f"scope: {scope}" if scope else ""))
    return figure
