"""What a lexicon edit changes: answers gained and lost per theme, and the shift in prevalence per wave.

Both lexicons code the same token stream, so every difference comes from the
edit. Per question, wave (and all waves pooled, wave ``(all)``) and theme,
:func:`lexicon_diff` reports the answers coded under each lexicon, those gained
and lost, and the weighted share of answered answers before and after (the
plain weighted proportion, as in ``coverage.csv``; ``textkit prevalence`` gives
design-based intervals). Examples name the answer and the terms responsible: for
a gained answer the new lexicon's terms that coded it, for a lost one the old
lexicon's. A theme only one lexicon has is ``added`` or ``removed``.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..text.redact import redact_all
from ..text.tokens import TokenStream
from .coder import CodingResult, ThemeCoder
from .lexicon import Lexicon
from .review import terms_by_answer

#: Columns of the per-theme summary and of the examples.
DIFF_COLUMNS = ["question", "wave", "theme", "status", "answered", "old_coded", "new_coded", "gained", "lost",
                "old_share", "new_share", "change", "terms_gained", "terms_lost"]
EXAMPLE_COLUMNS = ["theme", "change", "response_id", "question", "wave", "terms", "text"]


def _family_evidence(result: CodingResult, lexicon: Lexicon, theme: str) -> pd.DataFrame:
    """Evidence rows that code ``theme``: its own terms and those of its descendants."""
    family = {theme, *lexicon.descendants(theme)}
    return result.evidence[result.evidence["theme"].isin(family)]


def _columns(result: CodingResult, themes: Sequence[str], n: int) -> np.ndarray:
    """The result's 0/1 matrix laid out on ``themes`` (zeros for a theme it lacks), shape (n, len(themes))."""
    position = {theme: i for i, theme in enumerate(result.themes)}
    dense = result.matrix.toarray().astype(np.int8)
    out = np.zeros((n, len(themes)), dtype=np.int8)
    for column, theme in enumerate(themes):
        if theme in position:
            out[:, column] = dense[:, position[theme]]
    return out


def _term_counts(evidence: pd.DataFrame, documents: np.ndarray) -> str:
    rows = evidence[evidence["document"].isin(documents)].drop_duplicates(["document", "term"])
    counts = rows["term"].value_counts()
    counts = counts.sort_index(kind="stable").sort_values(ascending=False, kind="stable")
    return ", ".join(f"{term} ({count})" for term, count in counts.head(8).items())


def lexicon_diff(stream: TokenStream, texts: Sequence[str | None], rows: pd.DataFrame, old: Lexicon, new: Lexicon,
                 *, weights: np.ndarray | None = None, wave_column: str | None = None, n_examples: int = 5,
                 seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Compare the codes of two lexicons on one survey.

    Parameters
    ----------
    stream : TokenStream
        Tokens (with offsets) of ``texts``.
    texts : sequence of str or None, length n
    rows : DataFrame of shape (n, ...)
        ``response_id``, ``question``, ``answered`` and the wave column, aligned with ``texts``.
    old, new : Lexicon
    weights : array of shape (n,), optional
        Survey weights (default 1).
    wave_column : str, optional
    n_examples : int, default 5
        Gained and lost answers shown per theme (a seeded random pick).

    Returns
    -------
    summary : DataFrame (:data:`DIFF_COLUMNS`)
        One row per question x wave x theme where anything is coded under either lexicon.
    examples : DataFrame (:data:`EXAMPLE_COLUMNS`), text redacted
    """
    n = len(rows)
    texts = list(texts)
    before = ThemeCoder(old).fit(stream).code(stream, texts=texts)
    after = ThemeCoder(new).fit(stream).code(stream, texts=texts)
    themes = list(new.ids) + [t for t in old.ids if t not in new.ids]
    answered = rows["answered"].to_numpy(dtype=bool)
    old_codes = _columns(before, themes, n) * answered[:, None]
    new_codes = _columns(after, themes, n) * answered[:, None]
    weights = np.ones(n) if weights is None else np.asarray(weights, dtype=float)
    waves = rows[wave_column].astype(str).to_numpy() if wave_column else np.full(n, "(all)", dtype=object)
    summary = _summary(rows, themes, old, new, old_codes, new_codes, answered, weights, waves, before, after)
    examples = _examples(rows, texts, themes, old, new, old_codes, new_codes, waves, before, after, n_examples, seed)
    return summary, examples


def _summary(rows, themes, old, new, old_codes, new_codes, answered, weights, waves, before, after) -> pd.DataFrame:
    questions = rows["question"].astype(str).to_numpy()
    frames = []
    for pooled in (False, True):
        labels = np.char.add(np.char.add(questions.astype(str), "\x1f"),
                             np.full(len(rows), "(all)") if pooled else waves.astype(str))
        groups, group_of_row = np.unique(labels, return_inverse=True)
        if pooled and len(np.unique(waves)) == 1 and waves[0] == "(all)":
            continue
        indicator = sp.csr_matrix((np.ones(len(rows)), (group_of_row, np.arange(len(rows)))),
                                  shape=(len(groups), len(rows)))
        weighted = indicator.multiply(weights[None, :]).tocsr()
        base = weighted @ answered.astype(float)
        with np.errstate(invalid="ignore", divide="ignore"):
            old_share = (weighted @ old_codes) / base[:, None]
            new_share = (weighted @ new_codes) / base[:, None]
        counts = {name: indicator @ values for name, values in (
            ("old_coded", old_codes), ("new_coded", new_codes),
            ("gained", new_codes & (1 - old_codes)), ("lost", old_codes & (1 - new_codes)))}
        parts = np.array([g.split("\x1f") for g in groups], dtype=object).reshape(-1, 2)
        for column, theme in enumerate(themes):
            frames.append(pd.DataFrame({
                "question": parts[:, 0], "wave": parts[:, 1], "theme": theme,
                "status": "added" if theme not in old.ids else ("removed" if theme not in new.ids else ""),
                "answered": (indicator @ answered.astype(np.int64)).astype(np.int64),
                **{name: values[:, column].astype(np.int64) for name, values in counts.items()},
                "old_share": old_share[:, column], "new_share": new_share[:, column],
                "change": new_share[:, column] - old_share[:, column]}))
    table = pd.concat(frames, ignore_index=True)
    table = table[(table["old_coded"] > 0) | (table["new_coded"] > 0) | (table["status"] != "")]
    gained_terms, lost_terms = {}, {}
    for column, theme in enumerate(themes):
        gained_docs = np.flatnonzero(new_codes[:, column] & (1 - old_codes[:, column]))
        lost_docs = np.flatnonzero(old_codes[:, column] & (1 - new_codes[:, column]))
        gained_terms[theme] = _term_counts(_family_evidence(after, new, theme), gained_docs) if theme in new.ids else ""
        lost_terms[theme] = _term_counts(_family_evidence(before, old, theme), lost_docs) if theme in old.ids else ""
    table["terms_gained"] = table["theme"].map(gained_terms)
    table["terms_lost"] = table["theme"].map(lost_terms)
    order = {theme: i for i, theme in enumerate(themes)}
    table = table.assign(_order=table["theme"].map(order), _pooled=table["wave"] == "(all)")
    table = table.sort_values(["question", "_order", "_pooled", "wave"], kind="stable")
    return table[DIFF_COLUMNS].reset_index(drop=True)


def _examples(rows, texts, themes, old, new, old_codes, new_codes, waves, before, after, n_examples,
              seed) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    frames = []
    for column, theme in enumerate(themes):
        for change, codes_now, codes_then, result, lexicon in (
                ("gained", new_codes, old_codes, after, new), ("lost", old_codes, new_codes, before, old)):
            documents = np.flatnonzero(codes_now[:, column] & (1 - codes_then[:, column]))
            if len(documents) == 0:
                continue
            if len(documents) > n_examples:
                documents = np.sort(rng.choice(documents, size=n_examples, replace=False))
            evidence = _family_evidence(result, lexicon, theme)
            evidence = evidence[evidence["document"].isin(documents)]
            terms = terms_by_answer(evidence.assign(document=np.searchsorted(documents, evidence["document"])),
                                    len(documents))
            frames.append(pd.DataFrame({
                "theme": theme, "change": change,
                "response_id": rows["response_id"].astype(str).to_numpy()[documents],
                "question": rows["question"].to_numpy()[documents], "wave": waves[documents],
                "terms": terms,
                "text": redact_all([texts[d] for d in documents])}))
    if not frames:
        return pd.DataFrame(columns=EXAMPLE_COLUMNS)
    return pd.concat(frames, ignore_index=True)[EXAMPLE_COLUMNS]
