"""Topics of a coded survey: pools by question and scope, topic codes, and the tables that describe them.

Scopes (``scope=``)
-------------------
* ``"unexplained"`` (default): every answer, with the clauses that hold a
  theme match removed (:func:`textkit.discover.topics.clause_mask`): what the
  lexicon leaves unexplained. A new subject still shows when its answers also
  raise a known theme. Whole clauses go, not only the matched words, because
  the words around a match ("snaked right round the block" around "queue")
  belong to the same mention and would otherwise form pseudo-topics.
* ``"uncoded"``: only answers no theme codes, whole.
* ``"all"``: every answer, whole.
* ``"theme"``: the answers coded with one theme (``theme=``), whole: sub-themes.

Answers flagged by ``exclude`` are left out of every pool; the survey-level
callers (:func:`textkit.pipeline.find_survey_topics`, ``textkit topics``) pass the
answers coded "nothing to report" ("Nothing", "All good") by default: they are
neither a theme nor a gap in the lexicon. Topics are fitted per question; their codes are
numbered across questions (``topic_01`` ...), each topic belonging to one
question (its code is 0 on the other questions' rows).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..errors import AnalysisError
from ..text.redact import redact_all
from ..text.tokens import TokenStream
from .keyness import log_odds_dirichlet
from .topics import TopicModel, clause_mask, mask_tokens, matched_token_mask, select_documents

SCOPES = ("unexplained", "uncoded", "all", "theme")
TERM_COLUMNS = ["question", "scope", "topic", "label", "rank", "term", "weight"]
SUMMARY_COLUMNS = ["question", "scope", "topic", "label", "n_answers", "weighted_share", "coherence",
                   "stability", "top_theme", "top_theme_overlap", "top_group_var", "top_group", "top_group_z"]
ANSWER_COLUMNS = ["response_id", "question", "topic", "loading"]
K_SELECTION_COLUMNS = ["question", "scope", "k", "stability", "stability_se", "coherence", "chosen"]
EXAMPLE_COLUMNS = ["question", "topic", "rank", "response_id", "loading", "text"]
#: Terms in a topic's short label, and characters kept of an example answer.
LABEL_TERMS = 3
EXAMPLE_CHARS = 200
EXAMPLES_PER_TOPIC = 3


@dataclass
class SurveyText:
    """What topic discovery needs from a coded survey (rows = answers, n_rows).

    ``evidence_*`` are one entry per theme match (row, character span).
    """

    stream: TokenStream
    texts: Sequence[str | None]
    response_ids: np.ndarray
    questions: np.ndarray
    answered: np.ndarray
    theme_matrix: sp.csr_matrix
    themes: Sequence[str]
    evidence_rows: np.ndarray
    evidence_starts: np.ndarray
    evidence_ends: np.ndarray
    weights: np.ndarray | None = None
    groups: pd.DataFrame | None = None


@dataclass
class TopicResult:
    """Topics of one scope over the chosen questions (see the module docstring)."""

    terms: pd.DataFrame
    summary: pd.DataFrame
    answers: pd.DataFrame
    k_selection: pd.DataFrame
    examples: pd.DataFrame
    codes: sp.csr_matrix                     # (n_rows, n_topics) int8
    topic_ids: list[str]
    topic_questions: list[str]
    labels: list[str]
    models: dict[str, TopicModel]
    scope: str
    counts: dict = field(default_factory=dict)


def find_topics(data: SurveyText, questions: Sequence[str], *, scope: str = "unexplained",
                theme: str | None = None, exclude: np.ndarray | None = None, **model_options) -> TopicResult:
    """Fit one :class:`TopicModel` per question on the scope's pool and describe its topics.

    Parameters
    ----------
    data : SurveyText
    questions : sequence of str
    scope : {"unexplained", "uncoded", "all", "theme"}
    theme : str, optional
        The theme whose answers form the pool (``scope="theme"``).
    exclude : bool ndarray of shape (n_rows,), optional
        Answers left out of every pool.
    **model_options
        Passed to :class:`TopicModel` (``n_topics``, ``k_range``, ``random_state`` ...).
    """
    pool_stream, in_scope = _scope(data, scope, theme)
    usable = np.asarray(data.answered, bool) & in_scope
    if exclude is not None:
        usable &= ~np.asarray(exclude, dtype=bool)
    n_rows = len(data.questions)
    parts: dict[str, list] = {"terms": [], "summary": [], "answers": [], "k": [], "examples": []}
    columns, ids, owners, labels, models = [], [], [], [], {}
    counts = {"answers": 0, "empty": 0,
              "excluded": int((np.asarray(data.answered, bool) & np.asarray(exclude, bool)).sum())
              if exclude is not None else 0}
    for question in questions:
        rows = np.flatnonzero(usable & (np.asarray(data.questions) == question))
        where = f"{question} ({scope if scope != 'theme' else 'theme ' + str(theme)})"
        model = TopicModel(**model_options).fit(select_documents(pool_stream, rows), where=where)
        loadings = model.transform(select_documents(pool_stream, rows))
        codes = model.codes(loadings)
        models[question] = model
        counts["answers"] += len(rows)
        counts["empty"] += model.n_empty_
        first = len(ids)
        topic_ids = [f"topic_{first + j + 1:02d}" for j in range(model.n_topics_)]
        topic_labels = _labels(model)
        ids += topic_ids
        owners += [question] * model.n_topics_
        labels += topic_labels
        for j in range(model.n_topics_):
            column = np.zeros(n_rows, dtype=np.int8)
            column[rows] = codes[:, j]
            columns.append(column)
        described = _Described(data, question, scope, rows, model, loadings, codes, topic_ids, topic_labels)
        parts["terms"].append(described.terms())
        parts["summary"].append(described.summary())
        parts["answers"].append(described.answers())
        parts["examples"].append(described.examples())
        if model.k_selection_ is not None:
            parts["k"].append(model.k_selection_.assign(question=question, scope=scope))
    code_matrix = sp.csr_matrix(np.column_stack(columns) if columns else np.zeros((n_rows, 0), np.int8))
    return TopicResult(
        terms=_concat(parts["terms"], TERM_COLUMNS), summary=_concat(parts["summary"], SUMMARY_COLUMNS),
        answers=_concat(parts["answers"], ANSWER_COLUMNS), k_selection=_concat(parts["k"], K_SELECTION_COLUMNS),
        examples=_concat(parts["examples"], EXAMPLE_COLUMNS), codes=code_matrix, topic_ids=ids,
        topic_questions=owners, labels=labels, models=models, scope=scope, counts=counts)


def nothing_to_report_rows(coded: pd.DataFrame) -> np.ndarray | None:
    """The ``exclude`` mask topics use by default: rows coded "nothing to report", shape (n_rows,), bool.

    None when the coded table has no ``nothing_to_report`` column.
    """
    if "nothing_to_report" not in coded.columns:
        return None
    return pd.to_numeric(coded["nothing_to_report"], errors="coerce").fillna(0).to_numpy() != 0


def _concat(frames: list[pd.DataFrame], columns: list[str]) -> pd.DataFrame:
    frames = [f for f in frames if len(f)]
    if not frames:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in columns})
    return pd.concat(frames, ignore_index=True)[columns]


def _scope(data: SurveyText, scope: str, theme: str | None) -> tuple[TokenStream, np.ndarray]:
    """(stream the pool is read from, rows in scope) for a scope."""
    n_rows = len(data.questions)
    if scope not in SCOPES:
        raise AnalysisError(f"unknown topic scope '{scope}' (scopes: {', '.join(SCOPES)})")
    if (scope == "theme") != (theme is not None):
        raise AnalysisError("a theme is needed with scope 'theme', and only with it")
    coded = np.diff(sp.csr_matrix(data.theme_matrix).indptr) > 0
    if scope == "unexplained":
        matched = matched_token_mask(data.stream, data.evidence_rows, data.evidence_starts, data.evidence_ends)
        return mask_tokens(data.stream, clause_mask(data.stream, matched)), np.ones(n_rows, bool)
    if scope == "uncoded":
        return data.stream, ~coded
    if scope == "all":
        return data.stream, np.ones(n_rows, bool)
    themes = list(data.themes)
    if theme not in themes:
        raise AnalysisError(f"unknown theme '{theme}' (themes: {', '.join(themes)})")
    column = sp.csc_matrix(data.theme_matrix)[:, themes.index(theme)]
    return data.stream, np.asarray(column.toarray()).ravel() != 0


def _labels(model: TopicModel) -> list[str]:
    """Short label per topic: its top terms, skipping a term inside (or holding) one already taken."""
    labels = []
    for row in model.top_term_indices():
        chosen: list[str] = []
        for term in model.terms_[row]:
            words = f" {term} "
            if any(words in f" {c} " or f" {c} " in words for c in chosen):
                continue
            chosen.append(str(term))
            if len(chosen) == LABEL_TERMS:
                break
        labels.append(" / ".join(chosen))
    return labels


@dataclass
class _Described:
    data: SurveyText
    question: str
    scope: str
    rows: np.ndarray          # pool rows (n_pool,)
    model: TopicModel
    loadings: np.ndarray      # (n_pool, k)
    codes: np.ndarray         # (n_pool, k) int8
    topic_ids: list[str]
    labels: list[str]

    def _head(self) -> dict:
        return {"question": self.question, "scope": self.scope}

    def terms(self) -> pd.DataFrame:
        top = self.model.top_term_indices()
        weights = self.model.components_ / np.maximum(self.model.components_.sum(axis=1, keepdims=True), 1e-300)
        k, depth = top.shape
        return pd.DataFrame({**self._head(), "topic": np.repeat(self.topic_ids, depth),
                             "label": np.repeat(self.labels, depth), "rank": np.tile(np.arange(1, depth + 1), k),
                             "term": self.model.terms_[top].ravel(),
                             "weight": np.take_along_axis(weights, top, axis=1).ravel()})

    def summary(self) -> pd.DataFrame:
        data, rows, codes = self.data, self.rows, self.codes.astype(np.float64)
        dominant = np.where(self.loadings.max(axis=1) > 0, self.loadings.argmax(axis=1), -1)
        weights = np.ones(len(data.questions)) if data.weights is None else np.asarray(data.weights, float)
        answered = np.asarray(data.answered, bool) & (np.asarray(data.questions) == self.question)
        share = (weights[rows] @ codes) / max(weights[answered].sum(), 1e-300)
        themes = np.asarray(list(data.themes), dtype=object)
        theme01 = (sp.csr_matrix(data.theme_matrix)[rows] != 0).astype(np.float64)
        overlap = np.asarray(theme01.T @ codes) / np.maximum(codes.sum(axis=0), 1)  # (n_themes, k)
        k = len(self.topic_ids)
        best = overlap.argmax(axis=0) if len(themes) else np.zeros(k, dtype=np.int64)
        frame = pd.DataFrame({
            **self._head(), "topic": self.topic_ids, "label": self.labels,
            "n_answers": np.bincount(dominant[dominant >= 0], minlength=len(self.topic_ids)).astype(np.int64),
            "weighted_share": share, "coherence": self.model.coherence_,
            "stability": self.model.topic_stability_,
            "top_theme": themes[best] if len(themes) else "",
            "top_theme_overlap": overlap[best, np.arange(k)] if len(themes) else np.nan})
        return pd.concat([frame, self._over_represented(weights)], axis=1)

    def _over_represented(self, weights: np.ndarray) -> pd.DataFrame:
        """Per topic, the group (any group variable) where it is most over-represented against the rest.

        The Monroe et al. (2008) log-odds z of keyness, on weighted answer counts
        (weights rescaled to average 1 in the pool), prior 10% of the pool at the pooled rate.
        """
        k = len(self.topic_ids)
        best = pd.DataFrame({"top_group_var": [""] * k, "top_group": [""] * k, "top_group_z": np.nan})
        groups = self.data.groups
        if groups is None or not len(groups.columns) or not len(self.rows):
            return best
        w = weights[self.rows] / max(weights[self.rows].mean(), 1e-300)
        for variable in groups.columns:
            codes_of, values = pd.factorize(groups[variable].to_numpy()[self.rows], sort=True)
            inside = codes_of >= 0
            member = sp.csr_matrix((w[inside], (codes_of[inside], np.flatnonzero(inside))),
                                   shape=(len(values), len(self.rows)))
            y = member @ self.codes.astype(np.float64)                 # (groups, k)
            n = np.asarray(member.sum(axis=1)).ravel()[:, None]        # (groups, 1)
            y_rest, n_rest = y.sum(axis=0) - y, n.sum() - n
            strength = 0.1
            delta, variance = log_odds_dirichlet(y, y_rest, n, n_rest, strength * (y + y_rest),
                                                 strength * (n + n_rest))
            z = np.where(variance > 0, delta / np.sqrt(variance), 0.0)
            top = z.argmax(axis=0)
            better = z[top, np.arange(k)] > best["top_group_z"].fillna(-np.inf).to_numpy()
            best.loc[better, "top_group_var"] = str(variable)
            best.loc[better, "top_group"] = [str(values[i]) for i in top[better]]
            best.loc[better, "top_group_z"] = z[top, np.arange(k)][better]
        return best

    def answers(self) -> pd.DataFrame:
        pool_row, topic = np.nonzero(self.codes)
        return pd.DataFrame({"response_id": np.asarray(self.data.response_ids)[self.rows[pool_row]],
                             "question": self.question, "topic": np.asarray(self.topic_ids, dtype=object)[topic],
                             "loading": self.loadings[pool_row, topic]})

    def examples(self) -> pd.DataFrame:
        """The answers that load highest on each topic (distinct texts, redacted, cut to EXAMPLE_CHARS)."""
        frames = []
        texts = pd.Series(self.data.texts).to_numpy(dtype=object)[self.rows]
        for j, topic in enumerate(self.topic_ids):
            order = np.lexsort((np.arange(len(self.rows)), -self.loadings[:, j]))
            order = order[self.codes[order, j] > 0]
            _, first = np.unique(texts[order].astype(str), return_index=True)
            picked = order[np.sort(first)][:EXAMPLES_PER_TOPIC]
            shown = [t if len(t) <= EXAMPLE_CHARS else t[: EXAMPLE_CHARS - 1].rstrip() + "…"
                     for t in redact_all([str(t) for t in texts[picked]])]
            frames.append(pd.DataFrame({"question": self.question, "topic": topic,
                                        "rank": np.arange(1, len(picked) + 1),
                                        "response_id": np.asarray(self.data.response_ids)[self.rows[picked]],
                                        "loading": self.loadings[picked, j], "text": shown}))
        return _concat(frames, EXAMPLE_COLUMNS)


def render_topic_drafts(result: TopicResult, n_terms: int = 8) -> list[str]:
    """YAML lines (section 4 of the suggestions draft): each topic as a draft lexicon theme."""
    import json

    lines = ["# 4. Topics found by NMF (scope: " + result.scope + "). Each has the shape of a lexicon theme:",
             "#    its top terms as terms and its most typical answers as comments. Keep only real subjects,",
             "#    rename them, prune the terms, then add them under `themes:`."]
    if not len(result.summary):
        return lines + ["topic_themes: []  # no topics"]
    lines.append("topic_themes:")
    for row in result.summary.itertuples():
        terms = result.terms[(result.terms["topic"] == row.topic)].head(n_terms)
        examples = result.examples[result.examples["topic"] == row.topic]
        lines += [f"  - id: {row.topic}_{row.question}",
                  f"    label: {json.dumps('Draft: ' + str(row.label), ensure_ascii=False)}",
                  f"    # {row.question}: {row.n_answers} answers mainly about it, weighted share "
                  f"{row.weighted_share:.3f}, coherence {row.coherence:.2f}, top theme {row.top_theme} "
                  f"({row.top_theme_overlap:.0%})"]
        lines += [f"    # e.g. {json.dumps(str(text), ensure_ascii=False)}" for text in examples["text"]]
        lines += ["    negated: keep  # decide: drop if negated mentions should not count", "    terms:"]
        lines += [f"      - {json.dumps(str(t.term), ensure_ascii=False)}  # weight {t.weight:.3f}"
                  for t in terms.itertuples()]
    return lines
