"""Lexicon suggestions: candidate terms per theme, candidate new themes, a draft YAML."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..errors import AnalysisError
from ..text.ngrams import phrase_parts
from .keyness import (
    DEFAULT_MIN_RESPONDENTS,
    DEFAULT_PRIOR_STRENGTH,
    SUGGESTION_COLUMNS,
    _class_sums,
    _Counts,
    _labels,
    _Options,
    _options,
    _prepare,
    _score,
    _sides,
)


def suggest_terms(
    matrix: sp.spmatrix,
    terms: np.ndarray,
    n_words: np.ndarray,
    theme_matrix: sp.spmatrix,
    themes: Sequence[str],
    *,
    answered: np.ndarray | None = None,
    weights: np.ndarray | None = None,
    covered: Callable[[np.ndarray], Any] | None = None,
    waves: np.ndarray | None = None,
    max_terms: int = 15,
    max_new_terms: int = 40,
    min_respondents: int = DEFAULT_MIN_RESPONDENTS,
    min_share: float = 0.5,
    alpha: float = 0.05,
    prior_strength: float = DEFAULT_PRIOR_STRENGTH,
    link: float = 0.2,
    generic_share: float = 0.5,
    exclude: np.ndarray | None = None,
) -> pd.DataFrame:
    """Candidate lexicon terms from keyness (nothing is changed anywhere).

    * ``kind="term"``, for each theme: terms key (z > 0, ``q_value <= alpha``)
      for answers coded with the theme against answered ones not coded with
      it, that the lexicon does not already cover, that occur in at least one
      answer the theme misses (adding them would reach new answers) and of
      whose answers at least ``min_share`` are already coded with the theme
      (so the term is specific to it, not a common word). Ranked by z.
    * ``kind="new_theme"``: terms key for answered but uncoded answers against
      coded ones, covered by no theme, with at least ``min_share`` of their
      answers uncoded.
    * ``kind="emerging_theme"`` (when ``waves`` is given): terms covered by no
      theme that are key for the latest wave against the one before it (a
      new topic often shares answers with known themes, so it need not show
      among the uncoded answers).

    New and emerging candidates are grouped into draft themes in rank order:
    a term joins the first (best) earlier term whose answers overlap its own
    with a Jaccard index >= ``link``, otherwise it starts a draft theme named
    after itself.

    Parameters
    ----------
    matrix : sparse matrix of shape (n_documents, n_terms)
    terms, n_words : ndarray of shape (n_terms,)
    theme_matrix : sparse matrix of shape (n_documents, n_themes), 0/1
    themes : sequence of str, length n_themes
    answered : bool ndarray of shape (n_documents,), optional
        Non-blank answers (default: every document).
    weights : ndarray of shape (n_documents,), optional
    covered : callable, optional
        ``covered(terms) -> (len(terms), n_themes)`` array-like, true where a
        term would already be coded with the theme by the lexicon (for
        instance ``ThemeCoder(lexicon).fit(terms).transform(terms)``).
    waves : ndarray of shape (n_documents,), optional
        Wave of each answer (sortable values; missing = none).
    max_terms : int, default 15
        Candidates per existing theme.
    max_new_terms : int, default 40
        Candidate terms for new (and for emerging) themes, before grouping.
    min_respondents, alpha, prior_strength
        As for :func:`keyness`.
    min_share : float, default 0.5
        See above.
    link : float, default 0.2
        Jaccard threshold that joins a term to a draft theme.
    generic_share : float, default 0.5
        A term key (z > 0, q <= alpha) for at least this share of the themes
        (and for two or more) is generic - an evaluative word such as "good"
        or "great" - and is proposed for none of them.
    exclude : bool ndarray of shape (n_documents,), optional
        Answers left out entirely (for instance "nothing to report" replies).

    Returns
    -------
    DataFrame
        :data:`SUGGESTION_COLUMNS`; ``respondents_group`` counts answers on the
        side the term is key for (coded with the theme / uncoded / latest
        wave), ``respondents_reference`` the other side (for ``"term"``: the
        answers it would newly reach).
    """
    options = _options(prior_strength, min_respondents, None, "z", alpha, "collapse")
    if not 0 <= min_share <= 1:
        raise AnalysisError(f"min_share must lie between 0 and 1, got {min_share!r}")
    matrix = sp.csr_matrix(matrix)
    terms = np.asarray(terms, dtype=object)
    n_words = np.asarray(n_words)
    themes = list(themes)
    n_documents = matrix.shape[0]
    theme_matrix = sp.csr_matrix(theme_matrix)
    if theme_matrix.shape != (n_documents, len(themes)):
        raise AnalysisError(f"theme_matrix must have shape ({n_documents}, {len(themes)}), "
                            f"got {theme_matrix.shape}")
    answered = np.ones(n_documents, bool) if answered is None else np.asarray(answered, dtype=bool)
    if exclude is not None:
        answered = answered & ~np.asarray(exclude, dtype=bool)
    mats = _prepare(matrix, n_words, weights, True, True, None)
    in_scope = np.asarray(answered.astype(float) @ mats.binary).ravel()
    columns = np.flatnonzero(in_scope >= options.min_respondents)
    sub_terms, sub_words = terms[columns], n_words[columns]
    parts = phrase_parts(sub_terms, sub_words)
    if covered is not None and len(columns):
        known = np.asarray(sp.csr_matrix(covered(sub_terms)).toarray(), dtype=bool)
        if known.shape != (len(columns), len(themes)):
            raise AnalysisError(f"covered() must return shape ({len(columns)}, {len(themes)}), "
                                f"got {known.shape}")
    else:
        known = np.zeros((len(columns), len(themes)), dtype=bool)

    def ranked(counts: _Counts, group: int, reference: int, limit: int, eligible: np.ndarray) -> pd.DataFrame:
        sides = _sides(counts, group, reference)
        resp_g, resp_r = sides[2], sides[3]
        share = resp_g / np.maximum(resp_g + resp_r, 1)
        chosen = _Options(options.prior_strength, options.min_respondents, int(limit), "z", alpha, "collapse")
        frame, _ = _score(sub_terms, sub_words, *sides, chosen, parts,
                          eligible=eligible & (share >= min_share))
        return frame[(frame["z"] > 0) & (frame["q_value"] <= alpha)].reset_index(drop=True)

    frames = []
    coded = (theme_matrix != 0).tocsc()
    per_theme = []
    key_for = np.zeros(len(columns), dtype=np.int64)
    for t, theme in enumerate(themes):
        with_theme = np.zeros(n_documents, bool)
        with_theme[coded[:, t].indices] = True
        classes = np.where(answered, np.where(with_theme, 0, 1), -1)
        counts = _class_sums(mats, classes, 2, columns)
        if counts.documents.min() == 0:
            continue
        per_theme.append((t, theme, counts))
        key_for += _key_terms(counts, sub_terms, sub_words, options)
    # a word key for half the themes or more ("good", "great") is specific to none of them
    generic = key_for >= max(2.0, generic_share * len(per_theme))
    for t, theme, counts in per_theme:
        frame = ranked(counts, 0, 1, max_terms, ~known[:, t] & (counts.respondents[1] > 0) & ~generic)
        frames.append(frame.assign(kind="term", theme=theme))

    no_theme = np.diff(theme_matrix.indptr) == 0
    classes = np.where(answered, np.where(no_theme, 0, 1), -1)
    counts = _class_sums(mats, classes, 2, columns)
    if counts.documents.min() > 0:
        frame = ranked(counts, 0, 1, max_new_terms, ~known.any(axis=1))
        if len(frame):
            frame["theme"] = _draft_themes(frame, mats.binary, answered & no_theme, sub_terms, columns, link)
            frames.append(frame.assign(kind="new_theme"))

    if waves is not None:
        codes, values = _labels(np.asarray(waves, dtype=object))
        classes = np.where(answered, codes, -1)
        counts = _class_sums(mats, classes, len(values), columns)
        present = np.flatnonzero(counts.documents > 0)
        if len(present) >= 2:
            latest, previous = int(present[-1]), int(present[-2])
            frame = ranked(counts, latest, previous, max_new_terms, ~known.any(axis=1))
            if len(frame):
                frame["theme"] = _draft_themes(frame, mats.binary, answered & (codes == latest), sub_terms,
                                               columns, link, prefix="emerging_")
                frames.append(frame.assign(kind="emerging_theme"))
    if not frames:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in SUGGESTION_COLUMNS})
    return pd.concat(frames, ignore_index=True)[SUGGESTION_COLUMNS]


def _key_terms(counts: _Counts, sub_terms: np.ndarray, sub_words: np.ndarray, options: _Options) -> np.ndarray:
    """1 where a term is key (z > 0, q <= alpha) for class 0 against class 1, over ``sub_terms``."""
    every = _Options(options.prior_strength, options.min_respondents, None, "z", options.alpha, "keep")
    frame, _ = _score(sub_terms, sub_words, *_sides(counts, 0, 1), every, None)
    key = frame.loc[(frame["z"] > 0) & (frame["q_value"] <= options.alpha), "term"].to_numpy(dtype=object)
    return np.isin(sub_terms, key).astype(np.int64)


def _draft_themes(frame: pd.DataFrame, binary: sp.csr_matrix, documents: np.ndarray, sub_terms: np.ndarray,
                  columns: np.ndarray, link: float, prefix: str = "draft_") -> np.ndarray:
    """Draft theme id per candidate row (rows in rank order): leader grouping by answer overlap."""
    position = pd.Index(sub_terms).get_indexer(frame["term"].to_numpy(dtype=object))
    chosen = binary[np.flatnonzero(documents)][:, columns[position]]
    overlap = (chosen.T @ chosen).toarray()
    size = np.diag(overlap)
    jaccard = overlap / np.maximum(size[:, None] + size[None, :] - overlap, 1)
    leader = np.arange(len(frame))
    for row in range(1, len(frame)):  # at most max_new_terms rows
        leaders = np.flatnonzero(leader[:row] == np.arange(row))
        joined = leaders[jaccard[row, leaders] >= link]
        if len(joined):
            leader[row] = joined[0]
    names: dict[int, str] = {}
    for row in np.unique(leader):
        term = str(frame["term"].iloc[row])
        slug = "_".join("".join(ch if ch.isascii() and ch.isalnum() else " " for ch in term).split()).lower()
        name = f"{prefix}{slug or f'theme_{len(names) + 1}'}"
        while name in names.values():
            name += "_"
        names[int(row)] = name
    return np.array([names[int(r)] for r in leader], dtype=object)


def _yaml_string(text: str) -> str:
    import json

    return json.dumps(str(text), ensure_ascii=False)  # a JSON string is a valid YAML double-quoted scalar


def render_suggestions_yaml(suggestions: pd.DataFrame, *, labels: Mapping[str, str] | None = None,
                            source: str | None = None) -> str:
    """A commented YAML draft of :func:`suggest_terms` for a researcher to review.

    Parameters
    ----------
    suggestions : DataFrame
        :func:`suggest_terms` output.
    labels : mapping of theme id -> label, optional
        Shown beside existing themes.
    source : str, optional
        Named in the header (e.g. the survey config).

    Returns
    -------
    str
        Valid YAML with ``draft: true``; comments carry the evidence. It is a
        snippet to copy from by hand, never applied automatically.
    """
    labels = dict(labels or {})
    lines = [
        "# DRAFT lexicon suggestions from textkit keyness - review every line before use.",
        "# Nothing here has been added to your lexicon. Copy the terms you agree with",
        "# into your lexicon file by hand, then check it with `textkit lexicon check`.",
        "# Evidence per term: z = log-odds z-score (Monroe et al. 2008 prior), LR = Log Ratio",
        "# (log2 of the rate ratio), and the number of answers involved.",
    ]
    if source:
        lines.append(f"# Source: {source}")
    lines += ["draft: true", ""]

    def entry(row, indent: str, what: str) -> str:
        return (f"{indent}- {_yaml_string(row.term)}  # z {row.z:.2f}, LR {row.log_ratio:.2f}, "
                f"q {row.q_value:.2g}; {what.format(g=row.respondents_group, r=row.respondents_reference)}")

    existing = suggestions[suggestions["kind"] == "term"]
    lines += ["# 1. Candidate terms for existing themes: add the ones you keep to the theme's `terms:`.",
              "#    'new' = answers with the term that the theme does not code yet."]
    if len(existing):
        lines.append("candidate_terms:")
        for theme, rows in existing.groupby("theme", sort=False):
            label = labels.get(theme)
            lines.append(f"  {theme}:" + (f"  # {label}" if label else ""))
            lines += [entry(row, "    ", "{g} coded, {r} new answers") for row in rows.itertuples()]
    else:
        lines.append("candidate_terms: {}  # none passed the thresholds")
    lines.append("")
    new = suggestions[suggestions["kind"] == "new_theme"]
    lines += ["# 2. Candidate new themes from answers no theme codes. Each entry has the shape of a",
              "#    lexicon theme: rename the id and label, prune the terms, then add it under `themes:`.",
              "#    Terms were grouped because the same answers use them; check that they belong together."]
    if len(new):
        lines.append("candidate_themes:")
        for theme, rows in new.groupby("theme", sort=False):
            lines += [f"  - id: {theme}",
                      f"    label: {_yaml_string('Draft: ' + str(rows['term'].iloc[0]))}",
                      "    negated: keep  # decide: drop if negated mentions should not count",
                      "    terms:"]
            lines += [entry(row, "      ", "{g} uncoded, {r} coded answers") for row in rows.itertuples()]
    else:
        lines.append("candidate_themes: []  # none passed the thresholds")
    emerging = suggestions[suggestions["kind"] == "emerging_theme"]
    if len(emerging):
        lines += ["", "# 3. Emerging topics: terms no theme covers that rose in the latest wave against the",
                  "#    previous one (they may share answers with known themes). Same shape as above.",
                  "emerging_themes:"]
        for theme, rows in emerging.groupby("theme", sort=False):
            lines += [f"  - id: {theme}",
                      f"    label: {_yaml_string('Draft: ' + str(rows['term'].iloc[0]))}",
                      "    negated: keep  # decide: drop if negated mentions should not count",
                      "    terms:"]
            lines += [entry(row, "      ", "{g} answers in the latest wave, {r} in the one before")
                      for row in rows.itertuples()]
    return "\n".join(lines) + "\n"
