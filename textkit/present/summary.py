"""One-page summaries for each stakeholder group (a market, region or site).

:func:`group_summaries` selects, for every group of one group variable, what
a stakeholder reads in two minutes: its base and flags, its top themes against
the rest with intervals, its differences that survive FDR control, what
changed since the previous wave for it, two or three of its quotes (from its
biggest themes) and the cautions. :func:`summary_pdf` lays that out on exactly
one A4 page with matplotlib's PDF backend (longer lists are cut to fit, and
say so); :func:`summary_html` renders the same content as HTML.
"""

from __future__ import annotations

import io
import re
import textwrap
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from .report import (
    ALL,
    CAUTIONS,
    percent,
    render_page,
    significant,
    versus_rest,
    wave_changes,
    waves_of,
)

A4_INCHES = (8.27, 11.69)


@dataclass
class GroupSummary:
    """What one group's page says. Rows are plain strings, ready to print."""

    group_var: str
    group: str
    title: str
    bases: list[str]
    flags: str
    top_themes: list[tuple[str, str, str, str, str]]
    differences: list[str]
    changes: list[str]
    quotes: list[tuple[str, str]] | None
    cautions: list[str] = field(default_factory=list)


def _top_rows(prevalence: pd.DataFrame, rest: pd.DataFrame, question: str, group_var: str, group: str,
              labels: dict, top: int) -> list[tuple[str, str, str, str, str]]:
    mine = prevalence[(prevalence["question"] == question) & (prevalence["group_var"] == group_var)
                      & (prevalence["group"] == group) & (prevalence["wave"] == ALL)
                      & (prevalence["flag"] != "suppress")]
    mine = mine.sort_values(["estimate", "theme"], ascending=[False, True], kind="stable").head(top)
    against = rest[rest["question"] == question].set_index("theme")
    rows = []
    for record in mine.to_dict("records"):
        theme = record["theme"]
        other = against.loc[theme] if theme in against.index else None
        marker = ""
        if other is not None and other["q_value"] < 0.05:
            marker = " higher*" if other["difference"] > 0 else " lower*"
        caution = " (caution)" if record["flag"] == "caution" else ""
        rows.append((f"{question}: {labels.get(theme, theme)}", percent(record["estimate"]) + caution,
                     f"{percent(record['ci_low'])}–{percent(record['ci_high'])}",
                     "" if other is None else percent(other["estimate_b"]), marker.strip()))
    return rows


def _difference_line(record: dict, labels: dict, kind: str) -> str:
    theme = labels.get(record["theme"], record["theme"])
    points = 100 * record["difference"]
    if kind == "rest":
        caution = " (caution: unstable group estimate)" if record.get("flag") == "caution" else ""
        return (f"{record['question']}: {theme} {percent(record['estimate_a'])} vs {percent(record['estimate_b'])} "
                f"for the rest ({points:+.1f} pts, q={record['q_value']:.3f}){caution}")
    return (f"{record['question']}: {theme} {percent(record['estimate_b'])} -> {percent(record['estimate_a'])} "
            f"({points:+.1f} pts, q={record['q_value']:.3f})")


def group_summaries(prevalence: pd.DataFrame, comparisons: pd.DataFrame, group_var: str, labels: dict,
                    questions: list[str], quotes: pd.DataFrame | None = None, top: int = 4,
                    survey_title: str = "", n_quotes: int = 3) -> list[GroupSummary]:
    """One :class:`GroupSummary` per group of ``group_var`` (sorted by group name).

    ``quotes`` (optional; :func:`textkit.present.quotes.choose_quotes` rows) needs
    ``question``, ``theme``, ``group_var``, ``group`` and ``quote``: each page shows up
    to ``n_quotes`` (quote, theme label) pairs of its group, one per theme, from the
    themes the group raises most. None: no quotes were picked, and the page says so.
    """
    groups = sorted(prevalence.loc[prevalence["group_var"] == group_var, "group"].astype(str).unique())
    waves = waves_of(prevalence)
    summaries = []
    for group in groups:
        mine = prevalence[(prevalence["group_var"] == group_var) & (prevalence["group"] == group)]
        bases = [f"{q}: {int(mine[(mine['question'] == q) & (mine['wave'] == ALL)]['n'].max()):,} answers"
                 for q in questions if not mine[mine["question"] == q].empty]
        flags = mine["flag"].value_counts()
        rest = versus_rest(comparisons, group_var, group, prevalence=prevalence)
        top_rows = [row for q in questions for row in _top_rows(prevalence, rest, q, group_var, group, labels, top)]
        differences = [_difference_line(r, labels, "rest") for r in significant(rest).head(5).to_dict("records")]
        changes = [_difference_line(r, labels, "wave")
                   for r in significant(wave_changes(comparisons, waves, group_var, group)).head(4).to_dict("records")]
        picked = None if quotes is None else _group_quotes(quotes, mine, group_var, group, labels, n_quotes)
        summaries.append(GroupSummary(
            group_var=group_var, group=group, title=f"{survey_title} — {group_var}: {group}".strip(" —"),
            bases=bases, flags=(f"{int(flags.get('ok', 0))} estimates ok, {int(flags.get('caution', 0))} caution, "
                                f"{int(flags.get('suppress', 0))} suppressed (not shown)"),
            top_themes=top_rows, differences=differences, changes=changes, quotes=picked,
            cautions=[f"{title}: {text}" for title, text in CAUTIONS]))
    return summaries


def _group_quotes(quotes: pd.DataFrame, prevalence: pd.DataFrame, group_var: str, group: str, labels: dict,
                  n_quotes: int) -> list[tuple[str, str]]:
    """The group's first-ranked quotes of its most raised themes (one per theme), biggest theme first."""
    chosen = quotes[(quotes["group_var"] == group_var) & (quotes["group"].astype(str) == group)]
    if chosen.empty:
        return []
    share = prevalence[prevalence["wave"] == ALL].set_index(["question", "theme"])["estimate"]  # order only
    keys = pd.MultiIndex.from_frame(chosen[["question", "theme"]])
    chosen = chosen.assign(share=share.reindex(keys).to_numpy())
    chosen = chosen.sort_values(["share", "question", "theme", "rank"], ascending=[False, True, True, True],
                                kind="stable", na_position="last").drop_duplicates("theme")
    return [(str(q), labels.get(t, str(t))) for q, t in zip(chosen["quote"], chosen["theme"], strict=True)][:n_quotes]


def _block(figure: Any, y: float, heading: str, lines: list[str], *, width: int = 110, size: float = 8.5,
           floor: float = 0.05) -> float:
    """Write a heading and wrapped lines from height ``y`` down; stop (saying so) before ``floor``."""
    figure.text(0.06, y, heading, fontsize=10.5, fontweight="bold", color="#0b3d5c", parse_math=False)
    y -= 0.022
    step = size / 72 * 1.35 / A4_INCHES[1]
    for index, line in enumerate(lines):
        wrapped = textwrap.wrap(line, width) or [""]
        if y - step * len(wrapped) < floor:
            figure.text(0.07, y, f"... {len(lines) - index} more (see the full report)", fontsize=size,
                        style="italic", parse_math=False)
            return y - step
        for part in wrapped:
            figure.text(0.07, y, part, fontsize=size, parse_math=False)
            y -= step
    return y - 0.012


def summary_figure(summary: GroupSummary) -> Any:
    """The page as a matplotlib Figure (A4 portrait), without pyplot."""
    from matplotlib.figure import Figure

    figure = Figure(figsize=A4_INCHES)
    figure.text(0.06, 0.955, textwrap.shorten(summary.title, 80), fontsize=15, fontweight="bold", parse_math=False)
    figure.text(0.06, 0.935, f"One-page summary for {summary.group_var} = {summary.group}", fontsize=9,
                color="#444444", parse_math=False)
    y = _block(figure, 0.905, "Base and flags", ["; ".join(summary.bases), summary.flags])
    header = f"{'theme':<52}{'share':>16}{'95% CI':>16}{'rest':>8}  vs rest"
    rows = [header] + [f"{textwrap.shorten(t, 50):<52}{s:>16}{c:>16}{r:>8}  {m}"
                       for t, s, c, r, m in summary.top_themes]
    figure.text(0.06, y, "Top themes against the rest", fontsize=10.5, fontweight="bold", color="#0b3d5c")
    y -= 0.022
    for row in rows:
        figure.text(0.07, y, row, fontsize=7.5, family="monospace", parse_math=False)
        y -= 0.0135
    figure.text(0.07, y, "* the difference from the rest survives false discovery rate control (BH q < 0.05)",
                fontsize=7, style="italic", parse_math=False)
    y -= 0.03
    y = _block(figure, y, "Differences against the rest (BH q < 0.05)",
               summary.differences or ["None survive the false discovery rate control."], floor=0.42)
    y = _block(figure, y, "Changes since the previous wave (BH q < 0.05)",
               summary.changes or ["None survive the false discovery rate control (or one wave only)."], floor=0.34)
    quotes = [f"“{q}” ({theme})" for q, theme in summary.quotes] if summary.quotes else [
        "No quotes were picked." if summary.quotes is None else "No quotes for this group."]
    y = _block(figure, y, "In their words (redacted; read before publishing)", quotes, floor=0.22)
    _block(figure, min(y, 0.21), "Cautions", summary.cautions, width=120, size=7.5, floor=0.02)
    return figure


def summary_pdf(summary: GroupSummary) -> bytes:
    """The page as PDF bytes: exactly one A4 page, no creation date (same content, same bytes)."""
    import warnings

    figure = summary_figure(summary)
    buffer = io.BytesIO()
    with warnings.catch_warnings():  # a glyph the font lacks (an emoji in a quote) is drawn as a box
        warnings.filterwarnings("ignore", message="Glyph .* missing from font")
        figure.savefig(buffer, format="pdf", metadata={"CreationDate": None, "Title": summary.title,
                                                       "Creator": "textkit", "Producer": "textkit"})
    return buffer.getvalue()


def summary_html(summary: GroupSummary) -> str:
    """The page as a self-contained HTML document."""
    return render_page("summary.html.j2", s=summary)


def file_stems(groups: list[str]) -> dict[str, str]:
    """A safe, unique file stem for each group value (letters, digits, ``-``, ``_``, ``.``)."""
    stems: dict[str, str] = {}
    used: set[str] = set()
    for group in groups:
        stem = re.sub(r"[^\w.-]+", "_", group, flags=re.ASCII).strip("._") or "group"
        candidate, suffix = stem[:60], 2
        while candidate.lower() in used:
            candidate = f"{stem[:56]}_{suffix}"
            suffix += 1
        used.add(candidate.lower())
        stems[group] = candidate
    return stems
