"""The survey report: sections assembled from result tables and figures, rendered to one HTML file.

A report is a list of :class:`Section` built from :class:`ReportInputs` (the
tidy tables of the stages below, the charts drawn from them, the topics of the
uncoded answers and the picked quotes). A piece a run could not make (no topics
in too few uncoded answers) becomes a note in its section saying why, never an
empty stand-in.

Safety: every value that reaches the page goes through jinja2 with
autoescaping on; figures are embedded as ``data:`` image URIs (a script inside
an image never runs); the page carries a Content-Security-Policy that allows
only its own inline script and style (by hash) and ``data:`` images, so it
loads nothing from the network. Sorting and filtering are a few lines of
inline script; with scripts off every row is shown.
"""

from __future__ import annotations

import base64
import hashlib
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

#: What each column of the report's tables holds (the notes sheet of tables.xlsx).
COLUMN_NOTES: dict[str, str] = {
    "question": "Open question the answers belong to.",
    "theme": "Theme id from the lexicon (or a topic id).",
    "label": "Theme label from the lexicon.",
    "question_text": "Wording of the question, from the survey config.",
    "theme_label": "Theme label from the lexicon (or a net's or topic's label).",
    "n_raising": "Unweighted respondents in the base raising the theme (the numerator).",
    "flag_reason": "The publishing rule that set the flag (base, effective n, interval width, relative SE, df).",
    "family": "The set of tests over which Benjamini-Hochberg q-values are computed.",
    "total": "Estimated number of people raising the theme (weights summing to the population).",
    "total_se": "Standard error of the estimated total.",
    "total_ci_low": "Lower end of the confidence interval of the total.",
    "total_ci_high": "Upper end of the confidence interval of the total.",
    "kind": "theme (from the lexicon) or topic (from the topic model).",
    "group_var": "Group variable ('(all)': the whole sample).",
    "group": "Group of the group variable ('(all)': every group).",
    "wave": "Survey wave ('(all)': waves pooled).",
    "n": "Unweighted base: respondents who answered the question in this domain.",
    "weighted_n": "Sum of survey weights of the base.",
    "n_eff": "Effective sample size (the n behind the interval, after the design effect).",
    "estimate": "Weighted share of the base raising the theme (shown as a percentage).",
    "se": "Standard error of the estimate (Taylor linearisation over the design).",
    "ci_low": "Lower end of the confidence interval.",
    "ci_high": "Upper end of the confidence interval.",
    "df": "Design degrees of freedom (PSUs minus strata).",
    "deff": "Design effect: variance over the variance of a simple random sample of the same size.",
    "method": "Confidence interval method.",
    "flag": "Publishing flag: ok, caution (unstable: read with care) or suppress (too small a base to show).",
    "group_a": "First side of the comparison.",
    "group_b": "Second side ('(rest)': everyone else of the group variable).",
    "wave_a": "Wave of the first side.",
    "wave_b": "Wave of the second side.",
    "estimate_a": "Estimate of the first side.",
    "estimate_b": "Estimate of the second side.",
    "difference": "estimate_a minus estimate_b (percentage points when shown as a percentage).",
    "p_value": "Two-sided p-value of the difference.",
    "q_value": "Benjamini-Hochberg adjusted p-value (false discovery rate) within its family.",
    "test": "Test used (design-t: one design with covariance; independent-t: independent waves).",
    "n_groups": "Number of groups in the test.",
    "pearson_chi2": "Pearson chi-squared of the weighted table rescaled to n.",
    "mean_deff": "Mean generalised design effect (Rao-Scott first order).",
    "f_statistic": "Rao-Scott second-order F statistic.",
    "f_df_num": "Numerator degrees of freedom of the F test.",
    "f_df_den": "Denominator degrees of freedom of the F test.",
    "f_p_value": "p-value of the F test.",
    "f_q_value": "Benjamini-Hochberg q-value of the F test.",
    "chi2_first_order": "Rao-Scott first-order corrected chi-squared.",
    "chi2_df": "Degrees of freedom of the first-order test.",
    "chi2_p_value": "p-value of the first-order test.",
    "chi2_q_value": "Benjamini-Hochberg q-value of the first-order test.",
    "reference": "What the group is compared with ('(rest)': everyone else).",
    "term": "Word or phrase (1-3 words) from the answers.",
    "respondents_group": "Unweighted answers of the group using the term.",
    "respondents_reference": "Unweighted answers of the reference using the term.",
    "rate_group": "Weighted share of the group's answers using the term.",
    "rate_reference": "Weighted share of the reference's answers using the term.",
    "log_odds": "Log-odds ratio with an informative Dirichlet prior (Monroe, Colaresi & Quinn 2008).",
    "z": "z-score of the log-odds ratio (positive: key for the group).",
    "g2": "Log-likelihood G-squared on the 2x2 table (Dunning 1993).",
    "log_ratio": "Log Ratio effect size: log2 of the ratio of the two rates (Hardie 2014).",
    "count_group": "Weighted answers of the group using the term (weights averaging 1).",
    "count_reference": "Weighted answers of the reference using the term (weights averaging 1).",
    "within_theme": "Comparison restricted to the answers coded with this theme (blank: all answers).",
    "in_lexicon": "Whether the theme is in the lexicon (false: a hand code the lexicon lacks).",
    "hand": "Answers coded with the theme by hand.",
    "machine": "Answers coded with the theme by the lexicon.",
    "both": "Answers coded with the theme by both.",
    "precision": "Share of machine codes the hand coder agrees with.",
    "prevalence": "Share of the hand-coded answers the hand coder gave the theme.",
    "precision_low": "Lower end of the bootstrap interval of precision (blank: not computed).",
    "precision_high": "Upper end of the bootstrap interval of precision (blank: not computed).",
    "recall_low": "Lower end of the bootstrap interval of recall (blank: not computed).",
    "recall_high": "Upper end of the bootstrap interval of recall (blank: not computed).",
    "f1_low": "Lower end of the bootstrap interval of F1 (blank: not computed).",
    "f1_high": "Upper end of the bootstrap interval of F1 (blank: not computed).",
    "kappa_low": "Lower end of the bootstrap interval of kappa (blank: not computed).",
    "kappa_high": "Upper end of the bootstrap interval of kappa (blank: not computed).",
    "recall": "Share of hand codes the machine found.",
    "f1": "Harmonic mean of precision and recall.",
    "kappa": "Cohen's kappa: agreement beyond chance on the yes/no decision.",
    "parent": "Parent theme in the lexicon hierarchy.",
    "responses_coded": "Answers coded with the theme.",
    "answered": "Answers to the question (the base).",
    "share": "Unweighted share of the answers coded with the theme.",
    "weighted_share": "Weighted share of the answers coded with the theme (for a topic: of the question's answers).",
    "rank": "Order within its list (1 = first: the most typical quote, the heaviest term of a topic).",
    "response_id": "Respondent id of the quoted answer.",
    "quote": "The answer as quoted: redacted (contact details, links, long digit runs, likely names).",
    "n_words": "Number of words in the term, or in the quoted answer.",
    "typicality": "How typical the answer is of the theme (cosine to the theme's TF-IDF centre, 0-1).",
    "evidence": "The text that matched the theme in the answer (redacted like the quote).",
    "evidence_start": "Character offset where the theme's first match starts in the answer (-1: none).",
    "evidence_end": "Character offset where the theme's last match ends in the answer (-1: none).",
    "redactions": "Number of pieces of the answer replaced by redaction.",
    "scope": "The answers the topics were found in (uncoded: answers no theme codes).",
    "topic": "Topic id (numbered across questions).",
    "n_answers": "Answers of the pool coded with the topic (its loading at least half the answer's largest).",
    "coherence": "NPMI coherence of the topic's top terms (Bouma 2009; -1 to 1, higher: terms occur together).",
    "stability": "Agreement of the top terms across refits on subsamples (average Jaccard, 0-1; Greene et al. 2014).",
    "stability_se": "Standard error of the stability over the subsample refits (k within one SE of the peak ties).",
    "top_theme": "Lexicon theme whose answers overlap the topic most.",
    "top_theme_overlap": "Share of the topic's answers also coded with that theme.",
    "top_group_var": "Group variable of the group most over-represented in the topic.",
    "top_group": "Group most over-represented in the topic.",
    "top_group_z": "z-score of that over-representation (log-odds with a Dirichlet prior).",
    "weight": "Weight of the term in the topic (NMF component).",
    "k": "Number of topics tried.",
    "chosen": "Whether this k was chosen (peak stability).",
}

#: Columns holding proportions (0-1): percentages in the report and the workbook.
PERCENT_COLUMNS = frozenset({"estimate", "se", "ci_low", "ci_high", "estimate_a", "estimate_b", "difference",
                             "rate_group", "rate_reference", "share", "weighted_share"})

ALL = "(all)"
REST = "(rest)"
#: q-value below which a difference is reported as surviving the false discovery rate control.
FDR_LEVEL = 0.05

CAUTIONS = (
    ("Automated coding is an estimate",
     "Themes were assigned by matching a lexicon, not by reading each answer. Validate the codes against a "
     "hand-coded sample of your own answers before reporting, and report the weak themes."),
    ("Small bases", "Estimates from few respondents are unstable. Estimates flagged 'caution' should be read "
     "with care; estimates flagged 'suppress' are not shown. Follow your own organisation's publishing rules."),
    ("Respondent privacy", "Verbatim answers can identify respondents. Quotes pass through automatic redaction "
     "(e-mail addresses, links, phone numbers, long digit runs), which cannot catch everything: read every "
     "quote before publishing and follow your own privacy rules."),
)


@dataclass(frozen=True)
class Figure:
    """A drawn chart: ``svg`` and ``png`` bytes, a file stem and the words around it."""

    name: str
    title: str
    caption: str
    svg: bytes
    png: bytes = b""
    section: str = "prevalence"
    question: str = ""

    @property
    def data_uri(self) -> str:
        return "data:image/svg+xml;base64," + base64.b64encode(self.svg).decode("ascii")


#: Report section of each chart kind of :mod:`textkit.present.catalogue`.
CHART_SECTIONS = {"prevalence": "prevalence", "cooccurrence": "prevalence", "differences": "comparisons",
                  "keyness": "keyness", "keyness_panels": "keyness", "keyness_cloud": "keyness",
                  "topic_terms": "topics", "k_selection": "topics"}


def figure_from_spec(spec: Any, text: Any, rendered: dict[str, bytes]) -> Figure:
    """The :class:`Figure` of a drawn chart (``spec`` a ChartSpec, ``text`` its ChartText,
    ``rendered`` the file name -> bytes of :func:`textkit.present.catalogue.render_charts`)."""
    return Figure(name=spec.stem, title=text.title, caption=text.caption, svg=rendered[f"{spec.stem}.svg"],
                  png=rendered.get(f"{spec.stem}.png", b""), section=CHART_SECTIONS[spec.kind],
                  question=str(spec.arguments.get("question", "")))


@dataclass
class TableView:
    """A table as the page shows it: column labels, rows of (text, sort key) cells, a group per row."""

    id: str
    title: str
    columns: list[str]
    rows: list[dict]
    note: str = ""

    @property
    def groups(self) -> list[str]:
        return sorted({row["group"] for row in self.rows if row["group"]})


@dataclass
class Section:
    """One part of the report: blocks in reading order, each ``(kind, payload)``.

    kinds: ``text`` (str), ``items`` (list of str), ``table`` (TableView), ``figure`` (Figure),
    ``missing`` (str: a piece this run could not make, and why).
    """

    id: str
    title: str
    blocks: list[tuple[str, Any]] = field(default_factory=list)

    def add(self, kind: str, payload: Any) -> Section:
        self.blocks.append((kind, payload))
        return self

    @property
    def tables(self) -> list[TableView]:
        return [payload for kind, payload in self.blocks if kind == "table"]

    @property
    def available(self) -> bool:
        return not any(kind == "missing" for kind, _ in self.blocks)


@dataclass
class ReportInputs:
    """The result tables a report is built from; optional pieces may be None.

    prevalence, comparisons, group_tests : DataFrame
        From :func:`textkit.stats.analyse` (tidy, proportions 0-1).
    keyness : DataFrame or None
        From :func:`textkit.discover.keyness.compare`.
    labels : dict
        Theme id -> label.
    agreement : DataFrame or None
        :func:`textkit.coding.agreement.compare_with_hand_codes` on a hand-coded sample.
    topics, topic_terms, k_selection : DataFrame or None
        :class:`textkit.discover.topic_tables.TopicResult` ``summary``, ``terms`` and
        ``k_selection`` of the uncoded answers (None when they support no topics).
    quotes : DataFrame or None
        :func:`textkit.present.quotes.choose_quotes` rows (``QUOTE_COLUMNS``).
    figures : list of Figure
    missing : dict
        Piece -> why this run could not make it.
    """

    title: str
    questions: list[str]
    prevalence: pd.DataFrame
    comparisons: pd.DataFrame
    group_tests: pd.DataFrame
    labels: dict
    keyness: pd.DataFrame | None = None
    agreement: pd.DataFrame | None = None
    agreement_source: str = ""
    topics: pd.DataFrame | None = None
    topic_terms: pd.DataFrame | None = None
    k_selection: pd.DataFrame | None = None
    quotes: pd.DataFrame | None = None
    figures: list[Figure] = field(default_factory=list)
    missing: dict = field(default_factory=dict)
    facts: dict = field(default_factory=dict)


# ---------------------------------------------------------------------------
# Formatting
# ---------------------------------------------------------------------------
def percent(value: Any, digits: int = 1) -> str:
    """0.1234 -> '12.3%'; missing -> ''."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    return f"{100 * float(value):.{digits}f}%"


def _number(value: Any, digits: int = 2) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    if isinstance(value, int) or (isinstance(value, float) and float(value).is_integer() and abs(value) > 100):
        return f"{int(value):,}"
    return f"{float(value):.{digits}f}"


def _cell(value: Any, kind: str) -> tuple[str, str]:
    """(display text, sort key) of a value; numbers sort by their value."""
    if kind == "pct":
        return percent(value), "" if pd.isna(value) else repr(round(float(value), 8))
    if kind == "pp":
        text = "" if pd.isna(value) else f"{100 * float(value):+.1f} pts"
        return text, "" if pd.isna(value) else repr(round(float(value), 8))
    if kind == "num":
        return _number(value), "" if pd.isna(value) else repr(round(float(value), 8))
    if kind == "q":
        text = "" if pd.isna(value) else ("<0.001" if value < 0.001 else f"{float(value):.3f}")
        return text, "" if pd.isna(value) else repr(float(value))
    if kind == "int":
        return ("" if pd.isna(value) else f"{int(value):,}"), ("" if pd.isna(value) else str(int(value)))
    text = "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)
    return text, text


def table_view(frame: pd.DataFrame, id: str, title: str, spec: Sequence[tuple[str, str, str]],
               group: Any = None, note: str = "") -> TableView:
    """A :class:`TableView` of ``frame``.

    spec : sequence of (column, heading, kind)
        kind is ``pct``, ``pp`` (difference in points), ``num``, ``int`` or ``text``.
    group : callable(row) -> str, optional
        The value the page's filter uses for a row.
    Rows flagged ``suppress`` show no estimate or interval.
    """
    rows = []
    for record in frame.to_dict("records"):
        flag = str(record.get("flag", "") or "")
        cells = []
        for column, _, kind in spec:
            value = record.get(column)
            if flag == "suppress" and column in ("estimate", "ci_low", "ci_high", "se", "ci"):
                cells.append(("suppressed" if column == "estimate" else "", ""))
                continue
            cells.append(_cell(value, kind))
        rows.append({"cells": cells, "flag": flag, "group": group(record) if group else ""})
    return TableView(id=id, title=title, columns=[heading for _, heading, _ in spec], rows=rows, note=note)


def _with_labels(frame: pd.DataFrame, labels: dict, column: str = "theme") -> pd.DataFrame:
    out = frame.copy()
    out["label"] = out[column].map(lambda t: labels.get(t, t))
    return out


def _ci(frame: pd.DataFrame, low: str = "ci_low", high: str = "ci_high") -> pd.Series:
    text = [f"{percent(a)[:-1]}–{percent(b)}" if percent(a) and percent(b) else ""
            for a, b in zip(frame[low], frame[high], strict=True)]
    return pd.Series(text, index=frame.index, dtype=object)


def _group_of(record: dict) -> str:
    return f"{record['group_var']}: {record['group']}" if record.get("group_var") != ALL else ALL


# ---------------------------------------------------------------------------
# Selections shared by the report and the summaries
# ---------------------------------------------------------------------------
def waves_of(prevalence: pd.DataFrame) -> list[str]:
    """The wave labels in sorted order (without '(all)')."""
    return sorted(w for w in prevalence["wave"].astype(str).unique() if w != ALL)


def wave_changes(comparisons: pd.DataFrame, waves: Sequence[str], group_var: str = ALL,
                 group: str = ALL) -> pd.DataFrame:
    """Latest wave against the one before, for one group (default the whole sample), largest first."""
    if len(waves) < 2:
        return comparisons.iloc[0:0]
    latest, previous = waves[-1], waves[-2]
    rows = comparisons[(comparisons["group_var"] == group_var) & (comparisons["group_a"] == group)
                       & (comparisons["group_b"] == group) & (comparisons["wave_a"].astype(str) == latest)
                       & (comparisons["wave_b"].astype(str) == previous)]
    return rows.reindex(rows["difference"].abs().sort_values(ascending=False, kind="stable").index)


def versus_rest(comparisons: pd.DataFrame, group_var: str | None = None, group: str | None = None,
                prevalence: pd.DataFrame | None = None) -> pd.DataFrame:
    """Group-vs-rest contrasts over pooled waves, optionally for one group variable or group.

    With ``prevalence``, each row gets the group estimate's ``flag``, and rows whose
    group estimate is suppressed are left out (a difference is not shown when its
    group's share is not).
    """
    rows = comparisons[(comparisons["group_b"] == REST) & (comparisons["wave_a"] == ALL)]
    if group_var is not None:
        rows = rows[rows["group_var"] == group_var]
    if group is not None:
        rows = rows[rows["group_a"] == group]
    if prevalence is None:
        return rows
    flags = prevalence[prevalence["wave"] == ALL].set_index(["question", "theme", "group_var", "group"])["flag"]
    keys = pd.MultiIndex.from_frame(rows[["question", "theme", "group_var", "group_a"]])
    rows = rows.assign(flag=flags.reindex(keys).to_numpy())
    return rows[rows["flag"] != "suppress"]


def significant(frame: pd.DataFrame) -> pd.DataFrame:
    """Rows whose q-value is below :data:`FDR_LEVEL`, largest absolute difference first."""
    rows = frame[frame["q_value"] < FDR_LEVEL]
    return rows.reindex(rows["difference"].abs().sort_values(ascending=False, kind="stable").index)


def totals(prevalence: pd.DataFrame, question: str, wave: str = ALL) -> pd.DataFrame:
    """Whole-sample prevalence of every theme of a question, largest first."""
    rows = prevalence[(prevalence["question"] == question) & (prevalence["group_var"] == ALL)
                      & (prevalence["wave"].astype(str) == wave)]
    return rows.sort_values(["estimate", "theme"], ascending=[False, True], kind="stable")


# ---------------------------------------------------------------------------
# Sections
# ---------------------------------------------------------------------------
_PREVALENCE_SPEC = [("label", "Theme", "text"), ("group_var", "Group variable", "text"), ("group", "Group", "text"),
                    ("estimate", "Share", "pct"), ("ci", "95% CI", "text"), ("n", "Base n", "int"),
                    ("deff", "Design effect", "num"), ("flag", "Flag", "text")]
_DIFFERENCE_SPEC = [("question", "Question", "text"), ("label", "Theme", "text"),
                    ("group_var", "Group variable", "text"), ("group_a", "Group", "text"),
                    ("estimate_a", "Group share", "pct"),
                    ("estimate_b", "Rest", "pct"), ("difference", "Difference", "pp"), ("ci", "95% CI", "text"),
                    ("q_value", "q (BH)", "q")]
_CHANGE_SPEC = [("question", "Question", "text"), ("label", "Theme", "text"), ("estimate_b", "Previous wave", "pct"),
                ("estimate_a", "Latest wave", "pct"), ("difference", "Change", "pp"), ("ci", "95% CI", "text"),
                ("q_value", "q (BH)", "q")]


def _add_figures(section: Section, figures: Sequence[Figure]) -> None:
    for figure in figures:
        section.add("figure", figure)


def summary_section(inputs: ReportInputs) -> Section:
    """The summary first: biggest themes, differences that survive FDR, what changed since the last wave."""
    section = Section("summary", "Summary")
    facts = inputs.facts
    if facts:
        section.add("text", f"{facts.get('responses', 0):,} responses, {facts.get('answers', 0):,} answers to "
                    f"{len(inputs.questions)} open question(s); waves: {', '.join(facts.get('waves', [])) or 'one'}; "
                    f"weighted: {'yes' if facts.get('weighted') else 'no'}.")
    items = []
    for question in inputs.questions:
        top = totals(inputs.prevalence, question).head(5)
        listed = "; ".join(f"{inputs.labels.get(t, t)} {percent(e)}"
                           for t, e in zip(top["theme"], top["estimate"], strict=True))
        items.append(f"{question} — biggest themes: {listed}")
    section.add("items", items)
    differences = significant(versus_rest(inputs.comparisons, prevalence=inputs.prevalence))
    section.add("text", f"{len(differences)} group-versus-rest differences survive false discovery rate control "
                f"(Benjamini-Hochberg q < {FDR_LEVEL}); the largest:")
    shown = _with_labels(differences.head(10), inputs.labels)
    shown["ci"] = _ci(shown)
    section.add("table", table_view(shown, "summary-differences", "Largest differences against the rest",
                                    _DIFFERENCE_SPEC))
    waves = waves_of(inputs.prevalence)
    if len(waves) < 2:
        return section.add("text", "One wave only: no change since a previous wave to report.")
    changes = _with_labels(significant(wave_changes(inputs.comparisons, waves)), inputs.labels)
    changes["ci"] = _ci(changes)
    section.add("text", f"Since the previous wave ({waves[-2]} to {waves[-1]}), {len(changes)} theme shares of the "
                "whole sample changed beyond the false discovery rate control:")
    return section.add("table", table_view(changes, "summary-changes", f"Changes {waves[-2]} to {waves[-1]}",
                                           _CHANGE_SPEC))


def prevalence_section(inputs: ReportInputs, question: str) -> Section:
    """One question: its prevalence charts (when drawn) and table by group, waves pooled."""
    section = Section(f"prevalence-{question}", f"Question: {question}")
    _add_figures(section, [f for f in inputs.figures if f.section == "prevalence" and f.question == question])
    rows = inputs.prevalence[(inputs.prevalence["question"] == question) & (inputs.prevalence["wave"] == ALL)]
    rows = _with_labels(rows, inputs.labels)
    rows["ci"] = _ci(rows)
    section.add("text", "Weighted share of the respondents who answered the question, waves pooled; rows flagged "
                "caution are shaded, suppressed estimates are not shown. The table per wave is in tables.xlsx "
                "and prevalence.csv.")
    return section.add("table", table_view(rows, f"prevalence-{question}-table", f"Prevalence: {question}",
                                           _PREVALENCE_SPEC, group=_group_of))


def comparisons_section(inputs: ReportInputs) -> Section:
    """Group-vs-rest differences that survive FDR control, filterable by group."""
    section = Section("comparisons", "Comparisons between groups")
    rows = significant(versus_rest(inputs.comparisons, prevalence=inputs.prevalence))
    rows = _with_labels(rows, inputs.labels)
    rows["ci"] = _ci(rows)
    _add_figures(section, [f for f in inputs.figures if f.section == "comparisons"])
    section.add("text", f"Each group against the rest of its group variable; shown: the {len(rows)} differences "
                f"with Benjamini-Hochberg q < {FDR_LEVEL} whose group estimate is not suppressed (rows whose group "
                "estimate is flagged caution are shaded). Every comparison (pairs of groups, waves) is in "
                "comparisons.csv.")
    return section.add("table", table_view(rows, "comparisons-table", "Differences against the rest",
                                           _DIFFERENCE_SPEC, group=lambda r: f"{r['group_var']}: {r['group_a']}"))


def keyness_section(inputs: ReportInputs, per_side: int = 8) -> Section:
    """Key terms of each group against the rest (and wave against wave), with clouds when drawn."""
    section = Section("keyness", "Words that set groups apart")
    _add_figures(section, [f for f in inputs.figures if f.section == "keyness"])
    if inputs.keyness is None or inputs.keyness.empty:
        return section.add("text", "No group variable has two or more groups with answers: no key terms.")
    table = inputs.keyness
    table = table[(table["z"] > 0) & (table["q_value"] < FDR_LEVEL) & (table["within_theme"].fillna("") == "")]
    table = table.sort_values(["question", "group_var", "group", "z"], ascending=[True, True, True, False],
                              kind="stable").groupby(["question", "group_var", "group", "reference"],
                                                     sort=False).head(per_side)
    section.add("text", f"Up to {per_side} terms per group that its answers use more than the reference (log-odds "
                "z with an informative Dirichlet prior, counted once per answer, weighted; only terms with BH q < "
                f"{FDR_LEVEL}). The full table is keyness.csv.")
    spec = [("question", "Question", "text"), ("group_var", "Group variable", "text"), ("group", "Group", "text"),
            ("reference", "Against", "text"), ("term", "Term", "text"), ("respondents_group", "Answers", "int"),
            ("rate_group", "Group rate", "pct"), ("rate_reference", "Reference rate", "pct"), ("z", "z", "num"),
            ("log_ratio", "Log Ratio", "num")]
    return section.add("table", table_view(table, "keyness-table", "Key terms", spec,
                                           group=lambda r: f"{r['group_var']}: {r['group']}"))


def topics_section(inputs: ReportInputs, n_terms: int = 8) -> Section:
    """Topics of the answers no theme codes: size, top terms, coherence and stability, the k-selection charts."""
    section = Section("topics", "Emerging topics in the uncoded answers")
    if inputs.topics is None:
        return section.add("missing", inputs.missing.get("topics", "No topics were found in the uncoded answers."))
    section.add("text", "Topics found by NMF in the answers no lexicon theme codes; the number of topics k of each "
                "question is the one whose top terms are most stable across refits on subsamples. A topic is a "
                "candidate theme, not a finding: read its answers (topic_terms.csv, the topics sheet) before "
                "adding it to the lexicon.")
    summary = inputs.topics.copy()
    if inputs.topic_terms is not None and len(inputs.topic_terms):
        terms = inputs.topic_terms.sort_values(["topic", "rank"], kind="stable")
        top = terms.groupby("topic", sort=False)["term"].apply(lambda t: ", ".join(map(str, t.head(n_terms))))
        summary["top_terms"] = summary["topic"].map(top).fillna("")
    spec = [("question", "Question", "text"), ("topic", "Topic", "text"), ("top_terms", "Top terms", "text"),
            ("n_answers", "Answers", "int"), ("weighted_share", "Share of answers", "pct"),
            ("coherence", "Coherence", "num"), ("stability", "Stability", "num"),
            ("top_theme", "Nearest theme", "text")]
    section.add("table", table_view(summary, "topics-table", "Topics", [s for s in spec if s[0] in summary.columns],
                                    group=lambda r: str(r["question"])))
    _add_figures(section, [f for f in inputs.figures if f.section == "topics"])
    return section


def quotes_section(inputs: ReportInputs) -> Section:
    """Typical, varied, redacted answers for each question and theme (the whole sample)."""
    section = Section("quotes", "Quotes")
    quotes = inputs.quotes
    if quotes is None or quotes.empty:
        return section.add("text", "No answer of a theme was within the quotes' length window.")
    quotes = quotes[quotes["group_var"] == ALL]
    section.add("text", "Typical and varied answers for each theme (picked by maximal marginal relevance on "
                "TF-IDF), redacted: contact details, links, long digit runs and likely names are replaced. "
                "Redaction cannot catch everything: read every quote before publishing it. Quotes per group are "
                "in quotes.csv.")
    spec = [("question", "Question", "text"), ("theme_label", "Theme", "text"), ("quote", "Quote", "text"),
            ("evidence", "Matched", "text"), ("redactions", "Redactions", "int")]
    return section.add("table", table_view(quotes, "quotes-table", "Quotes by theme", spec,
                                           group=lambda r: str(r["theme_label"])))


def method_section(inputs: ReportInputs) -> Section:
    """How the numbers were made, and the cautions, with agreement figures when a hand-coded sample is given."""
    section = Section("method", "Method notes and cautions")
    facts = inputs.facts
    section.add("text",
                f"Answers were normalised, tokenised and coded with the lexicon '{facts.get('lexicon', '?')}' "
                f"(SHA-256 {str(facts.get('lexicon_sha256', ''))[:12]}). Shares are weighted ratio estimates over the "
                f"respondents who answered; standard errors by Taylor linearisation over the survey design "
                f"({facts.get('design', 'no design given')}); intervals: {facts.get('method', '')}; publishing "
                f"rule: {facts.get('rule', '')}. Differences are tested with design-based t tests; q-values control "
                "the false discovery rate (Benjamini-Hochberg) within each question and group variable.")
    flags = inputs.prevalence["flag"].value_counts()
    section.add("items", [f"{title}. {text}" for title, text in CAUTIONS] + [
        f"Flags in this report: {int(flags.get('ok', 0)):,} estimates ok, {int(flags.get('caution', 0)):,} "
        f"caution, {int(flags.get('suppress', 0)):,} suppressed."])
    if inputs.agreement is None:
        return section.add("text", "No hand-coded sample was given: the accuracy of the automated coding on these "
                           "answers is unknown. Code a random sample by hand and pass it with --hand-coded.")
    overall = overall_agreement(inputs.agreement)
    section.add("text",
                f"Agreement with the hand-coded sample ({inputs.agreement_source}): over all theme decisions "
                f"precision {overall['precision']:.2f}, recall {overall['recall']:.2f}, F1 {overall['f1']:.2f}, "
                f"Cohen's kappa {overall['kappa']:.2f}. Themes with F1 below 0.7 deserve a look before their "
                "numbers are used.")
    spec = [("theme", "Theme", "text"), ("hand", "Hand", "int"), ("machine", "Machine", "int"), ("both", "Both", "int"),
            ("precision", "Precision", "num"), ("recall", "Recall", "num"), ("f1", "F1", "num"),
            ("kappa", "Kappa", "num")]
    return section.add("table", table_view(inputs.agreement, "agreement-table", "Agreement with hand codes", spec))


def overall_agreement(table: pd.DataFrame) -> pd.Series:
    """The row that pools every theme decision (``(micro)``, or ``(all)`` in older tables)."""
    pooled = table[table["theme"].isin(["(micro)", ALL])]
    return pooled.iloc[0]


def build_sections(inputs: ReportInputs) -> list[Section]:
    """Every section of the report, in reading order."""
    sections = [summary_section(inputs)]
    sections += [prevalence_section(inputs, q) for q in inputs.questions]
    sections.append(comparisons_section(inputs))
    sections.append(keyness_section(inputs))
    sections.append(topics_section(inputs))
    sections.append(quotes_section(inputs))
    sections.append(method_section(inputs))
    return sections


# ---------------------------------------------------------------------------
# Rendering
# ---------------------------------------------------------------------------
def _environment() -> Any:
    import jinja2

    return jinja2.Environment(loader=jinja2.FileSystemLoader(str(Path(__file__).parent / "templates")),
                              autoescape=True, trim_blocks=True, lstrip_blocks=True,
                              undefined=jinja2.StrictUndefined)


def _asset(name: str) -> str:
    return (Path(__file__).parent / "templates" / name).read_text(encoding="utf-8")


def _csp_hash(text: str) -> str:
    return "'sha256-" + base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii") + "'"


def render_page(template: str, **context: Any) -> str:
    """Render one of the package's templates with the shared style, script and Content-Security-Policy."""
    from markupsafe import Markup

    style, script = _asset("report.css"), _asset("report.js")
    policy = (f"default-src 'none'; img-src data:; style-src {_csp_hash(style)}; script-src {_csp_hash(script)}; "
              "base-uri 'none'; form-action 'none'")
    return _environment().get_template(template).render(style=Markup(style), script=Markup(script),
                                                         policy=policy, **context)


def render_report(inputs: ReportInputs, sections: Sequence[Section] | None = None) -> str:
    """The report as one self-contained HTML document (str)."""
    sections = list(sections) if sections is not None else build_sections(inputs)
    return render_page("report.html.j2", title=inputs.title, sections=sections, facts=inputs.facts)


def report_tables(inputs: ReportInputs) -> dict[str, pd.DataFrame]:
    """The tables of the workbook and CSVs, by name (labels added beside theme ids)."""
    tables = {"prevalence": _with_labels(inputs.prevalence, inputs.labels),
              "comparisons": _with_labels(inputs.comparisons, inputs.labels),
              "group_tests": _with_labels(inputs.group_tests, inputs.labels)}
    if inputs.keyness is not None:
        tables["keyness"] = inputs.keyness
    if inputs.agreement is not None:
        tables["agreement"] = inputs.agreement
    for name, frame in (("topics", inputs.topics), ("topic_terms", inputs.topic_terms),
                        ("k_selection", inputs.k_selection), ("quotes", inputs.quotes)):
        if frame is not None:
            tables[name] = frame
    return tables


def column_notes(tables: dict[str, pd.DataFrame]) -> pd.DataFrame:
    """``sheet, column, meaning`` for every column of every table (unknown columns say so)."""
    rows = [(name, str(column), COLUMN_NOTES.get(str(column), "(no description yet)"))
            for name, frame in tables.items() for column in frame.columns]
    return pd.DataFrame(rows, columns=["sheet", "column", "meaning"])
