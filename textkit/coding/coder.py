"""Coding answers with a theme lexicon.

:class:`ThemeCoder` follows the scikit-learn estimator contract: the
constructor stores settings, :meth:`ThemeCoder.fit` compiles the lexicon
against a vocabulary, :meth:`ThemeCoder.transform` returns the
``(n_documents, n_themes)`` 0/1 matrix and :meth:`ThemeCoder.code` returns it
together with hit counts and evidence.

How a term matches
------------------
* Every distinct lexicon word becomes a *word pattern*: an exact word, a
  prefix (``expens*``), or, when the term is inflection-insensitive, every
  vocabulary word with the same Snowball stem (``queues`` ~ ``queue``).
  Patterns are resolved once per vocabulary into a sparse
  ``(n_vocabulary, n_patterns)`` matrix.
* Token positions whose word matches any pattern are gathered in one sparse
  row selection; a term's first word is joined to those positions with a
  sparse product, and each further word of a phrase is checked with a sorted
  key lookup at ``start + k``. Phrases never cross documents or break tokens
  (punctuation), because break tokens match no pattern.
* Within one theme, a match contained in a longer match of the same theme is
  dropped ("long wait" wins over "wait"), so hit counts are not inflated.
* A match whose first token lies in a negation scope (see
  :mod:`textkit.text`) is dropped for themes with ``negated: drop``.
* A match of a theme that overlaps a match of one of that theme's exclusion
  phrases is vetoed ("free parking" vetoes a cost hit on "parking").
* Parents: a child's hit counts for every ancestor (roll-up matrix).

The vocabulary of ``transform`` documents is resolved afresh, so words first
seen in a new wave (a new misspelling caught by a wildcard) still match;
``fit`` records what the lexicon resolved to on the fitted documents
(``term_table_``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp
from sklearn.base import BaseEstimator

from ..errors import InputError
from ..text.inflect import NOUNS_CAPITALISED, base_language, fold, key_function
from ..text.tokens import TokenStream, default_stop_words, tokenize_corpus
from .lexicon import Lexicon
from .nothing import builtin_phrases, nothing_to_report_mask

_MAX_CODEPOINT = "\U0010ffff"
#: Columns of ``CodingResult.evidence``.
EVIDENCE_FIELDS = ["document", "theme", "term", "start", "end", "negated", "matched_text"]


@dataclass(frozen=True, eq=False)
class CodingResult:
    """What coding a set of documents produced.

    Attributes
    ----------
    themes : tuple of str, length n_themes
        Theme ids in lexicon order; columns of the matrices.
    matrix : csr_matrix of shape (n_documents, n_themes), int8
        1 where the document raises the theme (parents rolled up).
    hits : csr_matrix of shape (n_documents, n_themes), int32
        Number of counted matches per theme (a parent counts its children's).
    direct : csr_matrix of shape (n_documents, n_themes), int32
        Matches of each theme's own terms, before the roll-up to parents.
    evidence : DataFrame
        One row per counted match (:data:`EVIDENCE_FIELDS`): ``document`` (row
        number), ``theme`` (the theme the match counts for; ancestors inherit
        it), ``term`` (the lexicon term that matched, as written), ``start``,
        ``end`` (character span in the original text), ``negated`` (the match
        lies in a negation scope) and ``matched_text``.
    term_hits : Series
        Counted matches per (theme, term), every lexicon term listed (zeros
        included) - the input of the lexicon lint.
    dropped : dict
        Matches not counted: ``negated`` (themes with ``negated: drop``),
        ``excluded``, ``contained``, ``nothing_to_report``.
    stream : TokenStream
        The tokenised documents.
    negated : csr_matrix of shape (n_documents, n_themes), int32
        Counted matches that are negated, rolled up like ``hits``.
    nothing_to_report : ndarray of shape (n_documents,), bool
        Documents that say there is nothing to report (see
        :mod:`textkit.coding.nothing`); they raise no theme.
    """

    themes: tuple[str, ...]
    matrix: sp.csr_matrix
    hits: sp.csr_matrix
    direct: sp.csr_matrix
    evidence: pd.DataFrame
    term_hits: pd.Series
    dropped: dict[str, int]
    stream: TokenStream
    negated: sp.csr_matrix | None = None
    nothing_to_report: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class _CompiledLexicon:
    """Lexicon flattened into arrays (terms then exclusions)."""

    patterns: tuple[tuple[str, bool, bool | str], ...]  # (word, is_prefix, inflect mode)
    pattern_is_prefix: np.ndarray  # (n_patterns,) bool
    term_patterns: np.ndarray  # (n_terms, max_words) pattern ids, -1 padded
    term_lengths: np.ndarray  # (n_terms,)
    term_theme: np.ndarray  # (n_terms,) theme index
    term_is_exclusion: np.ndarray  # (n_terms,) bool
    term_text: tuple[str, ...]
    term_source: np.ndarray  # (n_terms,) index of the lexicon term a spelling row comes from
    theme_drops_negated: np.ndarray  # (n_themes,) bool
    theme_negated_target: np.ndarray  # (n_themes,) theme a negated match counts for (itself by default)
    rollup: sp.csr_matrix  # (n_themes, n_themes)


def _spellings(words: tuple[str, ...]) -> list[tuple[str, ...]]:
    """A term's word sequence plus its hyphen variants.

    "rip off" also matches the single token "rip-off", and "self-service"
    also matches "self service" (wildcard terms are left as written).
    """
    spellings = [words]
    if any(word.endswith("*") for word in words):
        return spellings
    if len(words) > 1:
        spellings.append(("-".join(words),))
    elif "-" in words[0]:
        spellings.append(tuple(part for part in words[0].split("-") if part))
    return spellings


def _compile(lexicon: Lexicon) -> _CompiledLexicon:
    pattern_ids: dict[tuple[str, bool, bool], int] = {}
    rows: list[list[int]] = []
    themes: list[int] = []
    exclusion: list[bool] = []
    texts: list[str] = []
    sources: list[int] = []
    n_sources = 0
    for theme_index, theme in enumerate(lexicon.themes):
        for is_exclusion, terms in ((False, theme.terms), (True, theme.exclusions)):
            for term in terms:
                for words in _spellings(term.words):
                    ids = []
                    for word in words:
                        prefix = word.endswith("*")
                        key = (word.rstrip("*"), prefix, False if prefix else term.inflect)
                        ids.append(pattern_ids.setdefault(key, len(pattern_ids)))
                    rows.append(ids)
                    themes.append(theme_index)
                    exclusion.append(is_exclusion)
                    texts.append(term.text)
                    sources.append(n_sources)
                n_sources += 1
    width = max((len(r) for r in rows), default=1)
    term_patterns = np.full((len(rows), width), -1, dtype=np.int64)
    for index, ids in enumerate(rows):
        term_patterns[index, : len(ids)] = ids
    return _CompiledLexicon(
        patterns=tuple(pattern_ids),
        pattern_is_prefix=np.array([prefix for _word, prefix, _mode in pattern_ids], dtype=bool),
        term_patterns=term_patterns,
        term_lengths=np.array([len(r) for r in rows], dtype=np.int64),
        term_theme=np.array(themes, dtype=np.int64),
        term_is_exclusion=np.array(exclusion, dtype=bool),
        term_text=tuple(texts),
        term_source=np.array(sources, dtype=np.int64),
        theme_drops_negated=np.array([t.negated == "drop" for t in lexicon.themes], dtype=bool),
        theme_negated_target=np.array([lexicon.ids.index(t.negated) if t.negated in lexicon.ids else i
                                       for i, t in enumerate(lexicon.themes)], dtype=np.int64),
        rollup=sp.csr_matrix(lexicon.rollup_matrix(), dtype=np.int32),
    )


def _prefix_ranges(vocab: np.ndarray, prefixes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """[low, high) index ranges of the sorted ``vocab`` entries starting with each prefix."""
    return (np.searchsorted(vocab, prefixes, side="left"),
            np.searchsorted(vocab, np.char.add(prefixes, _MAX_CODEPOINT), side="left"))


def _resolve_patterns(compiled: _CompiledLexicon, vocabulary: np.ndarray,
                      key_cache: dict[bool | str, dict[str, tuple[str, ...]]], language: str,
                      keep_accents: bool) -> sp.csr_matrix:
    """Sparse (n_vocabulary, n_patterns) int8: 2 where vocabulary word v is pattern p as written
    (case and accents folded), 1 where it matches otherwise (prefix, inflection), else 0.

    Inflecting patterns compare the keys of :func:`textkit.text.inflect.key_function`
    (lemmas, or Snowball stems for ``inflect: stem``), computed once per
    vocabulary word and kept in ``key_cache`` across calls.
    """
    vocab_list = vocabulary.tolist()
    folded = np.array([fold(token, keep_accents) for token in vocab_list] or [""], dtype=str)[:len(vocab_list)]
    order = np.argsort(folded, kind="stable")
    sorted_folded = folded[order]
    vocab_rows: list[np.ndarray] = []
    pattern_cols: list[np.ndarray] = []
    values: list[np.ndarray] = []
    words = np.array([fold(p[0], keep_accents) for p in compiled.patterns] or [""], dtype=str)
    words = words[:len(compiled.patterns)]
    is_prefix = np.array([p[1] for p in compiled.patterns], dtype=bool)
    lows, prefix_highs = _prefix_ranges(sorted_folded, words)
    highs = np.where(is_prefix, prefix_highs, np.searchsorted(sorted_folded, words, side="right"))
    for pattern_id in range(len(compiled.patterns)):
        low, high = lows[pattern_id], highs[pattern_id]
        if high > low:
            vocab_rows.append(order[low:high])
            pattern_cols.append(np.full(high - low, pattern_id))
            values.append(np.full(high - low, 1 if is_prefix[pattern_id] else 2, dtype=np.int8))
    for mode in sorted({p[2] for p in compiled.patterns if p[2]}, key=str):
        key = key_function(mode, language, keep_accents)
        cache = key_cache.setdefault(mode, {})
        wanted: dict[str, list[int]] = {}
        for pattern_id, (word, _prefix, inflect) in enumerate(compiled.patterns):
            if inflect == mode:
                for word_key in key(word):
                    wanted.setdefault(word_key, []).append(pattern_id)
        for index, token in enumerate(vocab_list):
            keys = cache.get(token)
            if keys is None:
                keys = cache[token] = key(token)
            for word_key in keys:
                shared = wanted.get(word_key)
                if shared:
                    vocab_rows.append(np.full(len(shared), index))
                    pattern_cols.append(np.asarray(shared, dtype=np.int64))
                    values.append(np.ones(len(shared), dtype=np.int8))
    if vocab_rows:
        rows, cols, data = np.concatenate(vocab_rows), np.concatenate(pattern_cols), np.concatenate(values)
    else:
        rows = cols = np.zeros(0, dtype=np.int64)
        data = np.zeros(0, dtype=np.int8)
    matrix = sp.csr_matrix((data.astype(np.int32), (rows, cols)),
                           shape=(len(vocabulary), len(compiled.patterns)))
    matrix.sum_duplicates()
    matrix.data = np.where(matrix.data >= 2, 2, 1).astype(np.int8)
    return matrix


def _is_capitalised(word: str) -> bool:
    """"Sands", "McKay": a capital first letter and not all capitals ("B&B", "WIFI" are not)."""
    return len(word) > 1 and word[0].isupper() and not word.isupper()


def _capital_reader(stream: TokenStream, texts: Sequence[str | None], documents: np.ndarray):
    """A function (positions, their documents) -> is each word capitalised as written in ``texts``?

    The stream is lower-cased: capitals are read in ``texts`` at the tokens'
    offsets. A stream without offsets has ``documents`` (sorted, unique; every
    position asked must lie in one of them) re-tokenised once, with offsets.
    """
    if stream.starts is not None:
        starts, ends, base = stream.starts, stream.ends, None
    else:
        again = tokenize_corpus([texts[d] for d in documents], offsets=True)
        starts, ends, base = again.starts, again.ends, again.doc_offsets

    def capitalised(positions: np.ndarray, document: np.ndarray) -> np.ndarray:
        at = positions if base is None else (
            base[np.searchsorted(documents, document)] + positions - stream.doc_offsets[document])
        spans = zip(document.tolist(), starts[at].tolist(), ends[at].tolist(), strict=True)
        return np.array([_is_capitalised(texts[d][a:b]) for d, a, b in spans], dtype=bool)

    return capitalised


def _inside_names(stream: TokenStream, texts: Sequence[str | None], positions: np.ndarray) -> np.ndarray:
    """Per token position: part of a name of several capitalised words ("Pellin Sands", "Quillon Gardens").

    The word is written with a capital, does not open its clause (the start of the
    answer or any break token: "Beaches, Views" are list items), and its
    neighbour in the clause is capitalised too and not a stop word (so "The
    Beaches" and a lone "the Toilets" are ordinary words).
    """
    document = np.searchsorted(stream.doc_offsets, positions, side="right") - 1
    previous = np.maximum(positions - 1, 0)
    inside = (positions > stream.doc_offsets[document]) & ~stream.break_flags[stream.codes[previous]]
    candidates = np.flatnonzero(inside)
    if not len(candidates):
        return inside
    capitalised = _capital_reader(stream, texts, np.unique(document[candidates]))
    inside[candidates] = capitalised(positions[candidates], document[candidates])
    candidates = np.flatnonzero(inside)  # the few written with a capital: now their neighbours
    if not len(candidates):
        return inside
    here, own = positions[candidates], document[candidates]
    following = np.minimum(here + 1, stream.doc_offsets[own + 1] - 1)  # itself when it ends its answer
    stops = stream.vocabulary_flags(default_stop_words().__contains__) | stream.break_flags
    before_named = ~stops[stream.codes[here - 1]]
    after_named = (following > here) & ~stops[stream.codes[following]]
    capitals = capitalised(np.concatenate([here - 1, following]), np.concatenate([own, own])).reshape(2, -1)
    inside[candidates] = (before_named & capitals[0]) | (after_named & capitals[1])
    return inside


def _match_terms(stream: TokenStream, compiled: _CompiledLexicon, pattern_matrix: sp.csr_matrix,
                 texts: Sequence[str | None] | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All term matches: (start token position, term id, words matched as written), each (n_matches,).

    Sorted by start, then by words matched as written (most first), then term id.
    Given the original ``texts``, the words of a name (capitalised words side by
    side inside a clause: "Pellin Sands", "Quillon Gardens"; see
    :func:`_inside_names`) match only as written, never by inflection: names do
    not inflect.
    """
    n_patterns = max(len(compiled.patterns), 1)
    useful = np.diff(pattern_matrix.indptr) > 0
    positions = np.flatnonzero(useful[stream.codes])
    occurrences = pattern_matrix[stream.codes[positions]].tocoo()
    occurrence_position = positions[occurrences.row]
    occurrence_pattern = occurrences.col.astype(np.int64)
    occurrence_exact = (occurrences.data == 2).astype(np.int64)
    if texts is not None:
        name = (occurrence_exact == 0) & ~compiled.pattern_is_prefix[occurrence_pattern]
        name[name] = _inside_names(stream, texts, occurrence_position[name])
        occurrence_position, occurrence_pattern, occurrence_exact = (
            occurrence_position[~name], occurrence_pattern[~name], occurrence_exact[~name])
    keys = occurrence_position * n_patterns + occurrence_pattern
    key_order = np.argsort(keys, kind="stable")
    keys, key_exact = keys[key_order], occurrence_exact[key_order]

    n_terms = len(compiled.term_lengths)
    first = sp.csr_matrix((np.ones(n_terms, dtype=np.int8),
                           (compiled.term_patterns[:, 0], np.arange(n_terms))),
                          shape=(n_patterns, n_terms))
    candidates = first[occurrence_pattern].tocoo()
    start = occurrence_position[candidates.row]
    term = candidates.col.astype(np.int64)
    exact = occurrence_exact[candidates.row]
    length = compiled.term_lengths[term]
    if len(start) and length.max() > 1:
        document = np.searchsorted(stream.doc_offsets, start, side="right") - 1
        fits = start + length <= stream.doc_offsets[document + 1]
        start, term, length, exact = start[fits], term[fits], length[fits], exact[fits]
        for k in range(1, compiled.term_patterns.shape[1]):
            longer = np.flatnonzero(length > k)
            wanted = (start[longer] + k) * n_patterns + compiled.term_patterns[term[longer], k]
            found = np.minimum(np.searchsorted(keys, wanted), len(keys) - 1)
            present = keys[found] == wanted if len(keys) else np.zeros(len(wanted), bool)
            exact[longer[present]] += key_exact[found[present]]
            keep = np.ones(len(start), dtype=bool)
            keep[longer[~present]] = False
            start, term, length, exact = start[keep], term[keep], length[keep], exact[keep]
    order = np.lexsort((term, -exact, start))
    return start[order], term[order], exact[order]


def _covers(key_theme: np.ndarray, key_start: np.ndarray, key_length: np.ndarray, n_tokens: int,
            query_theme: np.ndarray, query_start: np.ndarray, query_length: np.ndarray) -> np.ndarray:
    """For each query span: does any key span of the same theme overlap it?"""
    if len(key_start) == 0 or len(query_start) == 0:
        return np.zeros(len(query_start), dtype=bool)
    width = int(key_length.max())
    covered = np.concatenate([
        key_theme[key_length > j] * (n_tokens + 1) + key_start[key_length > j] + j for j in range(width)
    ])
    covered = np.unique(covered)
    hit = np.zeros(len(query_start), dtype=bool)
    for j in range(int(query_length.max())):
        inside = query_length > j
        wanted = query_theme[inside] * (n_tokens + 1) + query_start[inside] + j
        found = np.minimum(np.searchsorted(covered, wanted), len(covered) - 1)
        hit[np.flatnonzero(inside)[covered[found] == wanted]] = True
    return hit


def _contained(theme: np.ndarray, start: np.ndarray, length: np.ndarray, n_tokens: int) -> np.ndarray:
    """True for matches inside a longer match of the same theme, or repeating one.

    Identical spans of one theme (e.g. "queue" and "queu*" on the same word)
    keep only the first match in input order.
    """
    width = int(length.max(initial=1))
    key = theme * (n_tokens + 1) + start
    combined = key * (width + 1) + length
    order = np.argsort(combined, kind="stable")
    sorted_combined = combined[order]
    repeat = np.zeros(len(order), dtype=bool)
    repeat[order[1:]] = sorted_combined[1:] == sorted_combined[:-1]
    sorted_key = key[order]
    group_last = np.append(sorted_key[1:] != sorted_key[:-1], True)
    unique_keys = sorted_key[group_last]
    longest_end = (sorted_key - theme[order] * (n_tokens + 1) + length[order])[group_last]
    end = start + length
    where = np.searchsorted(unique_keys, key)
    contained = longest_end[where] > end  # a longer match starts at the same token
    for back in range(1, width):
        wanted = key - back
        found = np.minimum(np.searchsorted(unique_keys, wanted), len(unique_keys) - 1)
        same = (unique_keys[found] == wanted) & (start - back >= 0)
        contained |= same & (longest_end[found] >= end)
    return contained | repeat


def _check_not_one_string(documents) -> None:
    if isinstance(documents, str):
        raise InputError("expected a list of answers, one text each, but got a single string; "
                         "wrap it in a list: [text]")


class ThemeCoder(BaseEstimator):
    """Code documents with a theme lexicon.

    A scikit-learn estimator (``get_params``, ``set_params`` and ``clone``
    come from :class:`sklearn.base.BaseEstimator`), usable as a step of a
    :class:`sklearn.pipeline.Pipeline`.

    Parameters
    ----------
    lexicon : Lexicon
        The theme lexicon (see :func:`textkit.lexicon.load_lexicon`).
    negation_window : int or None, default None
        Tokens after a negation cue that count as negated; None takes the
        lexicon's ``settings.negation_window``.

    Attributes
    ----------
    themes_ : tuple of str, length n_themes
        Theme ids, the columns of the output.
    vocabulary_ : ndarray of shape (n_vocabulary,)
        Sorted vocabulary of the fitted documents.
    term_table_ : DataFrame
        Per lexicon term: ``theme``, ``term``, ``exclusion``, ``words`` and
        ``vocabulary_matches`` (how many fitted vocabulary words each of its
        word patterns matched, summed) - to spot wildcards that match nothing
        or far too much.
    """

    def __init__(self, lexicon: Lexicon, *, negation_window: int | None = None) -> None:
        self.lexicon = lexicon
        self.negation_window = negation_window

    def __repr__(self, N_CHAR_MAX: int = 700) -> str:
        # scikit-learn's repr would print the whole lexicon, every term of it
        lexicon = self.lexicon
        about = (f"<lexicon {lexicon.name!r} version {lexicon.version!r}, {len(lexicon.themes)} themes>"
                 if isinstance(lexicon, Lexicon) else repr(lexicon))
        return f"ThemeCoder(lexicon={about}, negation_window={self.negation_window!r})"

    def fit(self, documents: Sequence[str | None] | TokenStream, y=None) -> ThemeCoder:
        """Compile the lexicon against the vocabulary of ``documents``."""
        _check_not_one_string(documents)
        stream = documents if isinstance(documents, TokenStream) else tokenize_corpus(documents, offsets=False)
        self._compiled = _compile(self.lexicon)
        self._key_cache: dict[bool | str, dict[str, tuple[str, ...]]] = {}
        pattern_matrix = _resolve_patterns(self._compiled, stream.vocabulary, self._key_cache,
                                           self.lexicon.language, self.lexicon.keep_accents)
        self._fitted_patterns = pattern_matrix
        per_pattern = np.asarray((pattern_matrix > 0).sum(axis=0)).ravel()
        compiled = self._compiled
        matches = [int(per_pattern[ids[ids >= 0]].sum()) for ids in compiled.term_patterns]
        table = pd.DataFrame({
            "source": compiled.term_source,
            "theme": [self.lexicon.themes[i].id for i in compiled.term_theme],
            "term": compiled.term_text,
            "exclusion": compiled.term_is_exclusion,
            "words": compiled.term_lengths,
            "vocabulary_matches": matches,
        })
        self.term_table_ = (table.groupby("source", sort=True)
                            .agg(theme=("theme", "first"), term=("term", "first"),
                                 exclusion=("exclusion", "first"), words=("words", "first"),
                                 vocabulary_matches=("vocabulary_matches", "sum"))
                            .reset_index(drop=True))
        self.themes_ = tuple(self.lexicon.ids)
        self.vocabulary_ = stream.vocabulary
        return self

    def transform(self, documents: Sequence[str | None] | TokenStream) -> sp.csr_matrix:
        """The (n_documents, n_themes) int8 0/1 theme matrix, parents rolled up."""
        return self.code(documents, evidence=False).matrix

    def fit_transform(self, documents, y=None) -> sp.csr_matrix:
        return self.fit(documents).transform(documents)

    def code(self, documents: Sequence[str | None] | TokenStream, *, evidence: bool = True,
             texts: Sequence[str | None] | None = None) -> CodingResult:
        """Code documents and keep the evidence.

        Parameters
        ----------
        documents : sequence of str (None for missing) or TokenStream
        evidence : bool, default True
            Build the evidence table (needs token offsets and the texts).
        texts : sequence of str, optional
            The original texts when ``documents`` is a TokenStream (for
            ``matched_text``), in stream order (taken by position).

        Raises
        ------
        InputError
            If ``documents`` is a single string, or ``texts`` does not have one
            entry per document of the stream.
        """
        if not hasattr(self, "_compiled"):
            raise RuntimeError("ThemeCoder is not fitted yet: call fit(documents) first")
        _check_not_one_string(documents)
        if isinstance(documents, TokenStream):
            stream = documents
            if texts is not None:
                texts = list(texts)  # by position: a Series would be read by its labels
                if len(texts) != stream.n_documents:
                    raise InputError(f"texts has {len(texts)} entries but the token stream has "
                                     f"{stream.n_documents} documents; pass the texts it was built from")
        else:
            texts = list(documents)
            stream = tokenize_corpus(texts, offsets=evidence)
        compiled = self._compiled
        if stream.vocabulary is self.vocabulary_:  # coding the fitted documents themselves
            pattern_matrix = self._fitted_patterns
        else:
            pattern_matrix = _resolve_patterns(compiled, stream.vocabulary, self._key_cache,
                                               self.lexicon.language, self.lexicon.keep_accents)
        nothing = self._nothing_to_report(stream)
        matches, dropped = self._counted_matches(stream, pattern_matrix, nothing, texts)
        start, term, theme, length, negated = matches
        document = (np.searchsorted(stream.doc_offsets, start, side="right") - 1).astype(np.int64)
        shape = (stream.n_documents, len(self.lexicon.themes))
        direct = sp.csr_matrix((np.ones(len(start), dtype=np.int32), (document, theme)), shape=shape)
        direct.sum_duplicates()
        hits = (direct @ compiled.rollup).tocsr()
        matrix = hits.copy()
        matrix.data = (matrix.data > 0).astype(np.int8)
        matrix.eliminate_zeros()
        negated_hits = sp.csr_matrix((np.ones(int(negated.sum()), dtype=np.int32),
                                      (document[negated], theme[negated])), shape=shape)
        negated_hits.sum_duplicates()
        table = self._evidence(stream, texts, document, theme, term, start, length, negated) if evidence \
            else pd.DataFrame(columns=EVIDENCE_FIELDS)
        return CodingResult(themes=tuple(self.lexicon.ids), matrix=matrix, hits=hits.astype(np.int32),
                            direct=direct, evidence=table, term_hits=self._term_hits(term),
                            dropped=dropped, stream=stream,
                            negated=(negated_hits @ compiled.rollup).tocsr().astype(np.int32),
                            nothing_to_report=nothing)

    def _nothing_to_report(self, stream: TokenStream) -> np.ndarray:
        phrases, fillers = builtin_phrases(self.lexicon.language)
        if self.lexicon.nothing_to_report is not None:
            phrases = self.lexicon.nothing_to_report
        return nothing_to_report_mask(stream, phrases, fillers)

    def _counted_matches(self, stream: TokenStream, pattern_matrix: sp.csr_matrix, nothing: np.ndarray,
                         texts: Sequence[str | None] | None = None):
        """Matches that count: ``(start, term, theme, length, negated)`` arrays and the dropped counts.

        Exclusions veto overlapping matches of their theme; negated matches are
        dropped (``negated: drop``), kept and marked, or moved to another theme;
        matches in "nothing to report" answers and matches inside a longer (or
        more literal, for the same span) match of the same theme do not count.
        """
        compiled = self._compiled
        names = texts if base_language(self.lexicon.language) not in NOUNS_CAPITALISED else None
        start, term, exact = _match_terms(stream, compiled, pattern_matrix, names)
        theme = compiled.term_theme[term]
        length = compiled.term_lengths[term]
        is_exclusion = compiled.term_is_exclusion[term]
        ex_theme, ex_start, ex_length = theme[is_exclusion], start[is_exclusion], length[is_exclusion]
        start, term, theme, length = (a[~is_exclusion] for a in (start, term, theme, length))
        n = stream.n_tokens
        window = self.negation_window if self.negation_window is not None else self.lexicon.negation_window
        in_scope = stream.negated_at(start, window)
        negated = in_scope & compiled.theme_drops_negated[theme]
        excluded = _covers(ex_theme, ex_start, ex_length, n, theme, start, length) & ~negated
        theme = np.where(in_scope, compiled.theme_negated_target[theme], theme)  # negated: <theme id>
        document = np.searchsorted(stream.doc_offsets, start, side="right") - 1
        nothing = nothing[document] & ~(negated | excluded)
        contained = np.zeros(len(start), dtype=bool)
        alive = ~(negated | excluded | nothing)
        if alive.any():
            contained[alive] = _contained(theme[alive], start[alive], length[alive], n)
        keep = alive & ~contained
        dropped = {"negated": int(negated.sum()), "excluded": int(excluded.sum()),
                   "contained": int(contained.sum()), "nothing_to_report": int(nothing.sum())}
        kept = np.flatnonzero(keep)
        kept = kept[np.lexsort((term[kept], start[kept]))]  # evidence order: position, then lexicon order
        return (start[kept], term[kept], theme[kept], length[kept], in_scope[kept]), dropped

    def _term_hits(self, term: np.ndarray) -> pd.Series:
        """Counted matches per (theme, term) of the lexicon, zeros included."""
        compiled = self._compiled
        n_sources = int(compiled.term_source.max(initial=-1)) + 1
        term_counts = np.bincount(compiled.term_source[term], minlength=n_sources)
        _, first_row = np.unique(compiled.term_source, return_index=True)
        mask = ~compiled.term_is_exclusion[first_row]
        index = pd.MultiIndex.from_arrays(
            [[self.lexicon.themes[i].id for i in compiled.term_theme[first_row][mask]],
             np.asarray(compiled.term_text, dtype=object)[first_row][mask]], names=["theme", "term"])
        return pd.Series(term_counts[mask], index=index, name="hits")

    def _evidence(self, stream: TokenStream, texts, document, theme, term, start, length,
                  negated) -> pd.DataFrame:
        if stream.starts is None:
            raise ValueError("evidence needs token offsets: tokenise with offsets=True")
        char_start = stream.starts[start].astype(np.int64)
        char_end = stream.ends[start + length - 1].astype(np.int64)
        ids = np.asarray(self.lexicon.ids, dtype=object)
        if texts is not None:
            matched = [texts[d][s:e] for d, s, e in zip(document.tolist(), char_start.tolist(),
                                                        char_end.tolist(), strict=True)]
        else:
            matched = [None] * len(document)
        frame = pd.DataFrame({
            "document": document,
            "theme": ids[theme],
            "term": np.asarray(self._compiled.term_text, dtype=object)[term],
            "start": char_start,
            "end": char_end,
            "negated": negated.astype(bool),
            "matched_text": matched,
        })
        return frame  # matches arrive sorted by token position, so by document and start
