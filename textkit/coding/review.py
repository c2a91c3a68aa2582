"""The review table: every answer beside its codes, the terms that fired, and room for corrections.

:func:`review_table` lays out one row per answered answer: ``response_id``,
``question``, the wave and group values, the answer text (redacted), one 0/1
column per theme, ``terms`` (``theme: term`` for every counted match), ``negated``
(the counted matches that stand inside a negation scope, e.g. "no toilets" coded
``toilets`` because that theme keeps negated mentions: worth a second look), the
row's ``source`` when corrections were applied, and the empty correction columns
(``correct_theme``, ``correct_code``, ``correct_note``, ``corrected_by``,
``corrected_on``) that :mod:`textkit.coding.corrections` reads back.
:func:`select_for_review` filters it (theme, uncoded, group, wave) and draws a
seeded sample.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from ..errors import AnalysisError
from ..text.redact import redact_all
from ..text.tokens import TokenStream
from .corrections import CORRECTION_COLUMNS, REVIEW_CORRECTION_COLUMNS
from .lexicon import Lexicon


def terms_by_answer(evidence: pd.DataFrame, n_answers: int, mask: np.ndarray | None = None) -> list[str]:
    """``"theme: term; ..."`` per answer from an evidence table with a ``document`` column.

    ``mask`` (one bool per evidence row) keeps only some matches. Repeats are listed once.
    """
    if mask is not None:
        evidence = evidence[mask]
    out = [""] * n_answers
    if len(evidence) == 0:
        return out
    labels = (evidence["theme"].astype(str) + ": " + evidence["term"].astype(str)).to_numpy(dtype=object)
    joined = pd.Series(labels).groupby(evidence["document"].to_numpy(), sort=True).agg(
        lambda group: "; ".join(dict.fromkeys(group)))
    for document, text in joined.items():
        out[int(document)] = text
    return out


def evidence_negated(stream: TokenStream, evidence: pd.DataFrame, window: int) -> np.ndarray:
    """For each evidence row, whether its first token lies in a negation scope; shape (n_evidence,), bool."""
    if len(evidence) == 0 or stream.starts is None:
        return np.zeros(len(evidence), dtype=bool)
    stride = int(stream.starts.max(initial=0)) + 2
    token_keys = stream.document_index().astype(np.int64) * stride + stream.starts.astype(np.int64)
    match_keys = evidence["document"].to_numpy(dtype=np.int64) * stride + evidence["start"].to_numpy(dtype=np.int64)
    positions = np.searchsorted(token_keys, match_keys, side="left")
    return stream.negated_at(np.minimum(positions, stream.n_tokens - 1), window)


def review_table(coded: pd.DataFrame, texts: Sequence[str | None], evidence: pd.DataFrame, lexicon: Lexicon,
                 stream: TokenStream, *, show_columns: Sequence[str] = ()) -> pd.DataFrame:
    """One row per answered answer with its text, codes, terms and empty correction columns.

    Parameters
    ----------
    coded : DataFrame of shape (n_rows, ...)
        The coded table (``response_id``, ``question``, ``answered``, theme columns...).
    texts : sequence of str or None, length n_rows
        The answers, aligned with ``coded``.
    evidence : DataFrame
        The coder's evidence (``document``, ``theme``, ``term``, ``start``...), documents
        numbered like ``coded`` rows.
    lexicon : Lexicon
    stream : TokenStream
        Tokens of ``texts`` with offsets (for the negation mark).
    show_columns : sequence of str
        Wave and group columns to show after ``question``.
    """
    themes = list(lexicon.ids)
    n = len(coded)
    terms = terms_by_answer(evidence, n)
    negated = terms_by_answer(evidence, n, evidence_negated(stream, evidence, lexicon.negation_window))
    table = pd.DataFrame({"response_id": coded["response_id"].astype(str).to_numpy(),
                          "question": coded["question"].to_numpy()})
    for column in show_columns:
        if column not in table.columns:
            table[column] = coded[column].to_numpy()
    table["text"] = redact_all(list(texts))
    for theme in themes:
        table[theme] = coded[theme].to_numpy()
    table["terms"] = terms
    table["negated"] = negated
    if "source" in coded.columns:
        table["source"] = coded["source"].to_numpy()
        table["corrected_themes"] = coded["corrected_themes"].to_numpy()
    for column in REVIEW_CORRECTION_COLUMNS:
        table[column] = None
    return table[coded["answered"].to_numpy(dtype=bool)].reset_index(drop=True)


def select_for_review(table: pd.DataFrame, themes: Sequence[str], *, theme: Sequence[str] = (),
                      uncoded: bool = False, groups: Mapping[str, str] | None = None, wave: str | None = None,
                      wave_column: str | None = None, question: str | None = None, sample: int | None = None,
                      limit: int | None = None, seed: int = 0) -> pd.DataFrame:
    """Rows of a review table that pass every filter, then a seeded sample, then the first ``limit``.

    ``theme`` keeps answers coded with any of the named themes; ``uncoded`` those coded
    with none; ``groups`` maps a column to the value to keep (compared as text);
    ``sample`` draws that many rows at random without replacement (``seed``), kept in
    survey order. Raises :class:`AnalysisError` for an unknown theme or column.
    """
    keep = np.ones(len(table), dtype=bool)
    unknown = [t for t in theme if t not in themes]
    if unknown:
        raise AnalysisError(f"unknown theme '{unknown[0]}'; the lexicon's themes are {', '.join(themes)}",
                            option="--theme")
    if theme:
        keep &= table[list(theme)].to_numpy().astype(bool).any(axis=1)
    if uncoded:
        keep &= table[list(themes)].to_numpy().sum(axis=1) == 0
    filters = dict(groups or {})
    if wave is not None:
        if wave_column is None:
            raise AnalysisError("the survey config names no wave column", option="--wave")
        filters[wave_column] = wave
    if question is not None:
        filters["question"] = question
    for column, value in filters.items():
        if column not in table.columns:
            raise AnalysisError(f"no column '{column}' in the review table; the group and wave columns are "
                                "those the survey config names", column=column)
        keep &= (table[column].astype(str) == str(value)).to_numpy()
    selected = np.flatnonzero(keep)
    if sample is not None and sample < len(selected):
        selected = np.sort(np.random.default_rng(seed).choice(selected, size=sample, replace=False))
    if limit is not None:
        selected = selected[:limit]
    return table.iloc[selected].reset_index(drop=True)


def theme_definitions(lexicon: Lexicon, *, max_terms: int = 25) -> pd.DataFrame:
    """One row per theme: ``theme``, ``label``, ``parent``, ``description``, ``negated``, ``terms`` (the first
    ``max_terms``, then a count of the rest)."""
    rows = []
    for theme in lexicon.themes:
        terms = [t.text for t in theme.terms]
        listed = ", ".join(terms[:max_terms]) + (f" (+{len(terms) - max_terms} more)" if len(terms) > max_terms else "")
        rows.append({"theme": theme.id, "label": theme.label, "parent": theme.parent or "",
                     "description": theme.about, "negated": theme.negated, "terms": listed})
    return pd.DataFrame(rows, columns=["theme", "label", "parent", "description", "negated", "terms"])


def empty_corrections() -> pd.DataFrame:
    """The header of a corrections list (:data:`CORRECTION_COLUMNS`), no rows."""
    return pd.DataFrame(columns=CORRECTION_COLUMNS)
