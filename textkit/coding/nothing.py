""""Nothing to report": answers that say there is nothing to say ("Nothing", "All good").

Such an answer is an answer (it counts in the base of every share) but raises
no theme and is not a miss of the lexicon either, so it is reported in its own
column beside ``uncoded``. The phrases are per language
(``textkit/data/nothing-to-report.yaml``); a lexicon replaces them with its
own ``nothing_to_report:`` list.

An answer is "nothing to report" when its words, without the language's
filler words ("it", "was", "really"...), punctuation and emoji, are one of the
phrases or a run of them ("Nothing, it was all perfect!"). "Nothing was clean"
is not: "clean" is no part of any phrase.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import cache
from importlib import resources

import numpy as np

from ..text.inflect import base_language
from ..text.tokens import TokenStream, tokenize_corpus, word_tokens

#: Longest phrase, in words, after fillers are removed (bounds the segmentation).
_MAX_PHRASE_WORDS = 8


@cache
def builtin_phrases(language: str) -> tuple[tuple[str, ...], frozenset[str]]:
    """``(phrases, fillers)`` shipped for ``language`` (empty for a language without a list)."""
    import yaml

    raw = resources.files("textkit").joinpath("data/nothing-to-report.yaml").read_text(encoding="utf-8")
    entry = yaml.safe_load(raw).get(base_language(language), {})
    return tuple(entry.get("phrases", ())), frozenset(entry.get("fillers", ()))


def _is_word(token: str) -> bool:
    return any(character.isalnum() for character in token)


def _reduced(phrase: str, fillers: frozenset[str]) -> tuple[str, ...]:
    return tuple(word for word in word_tokens(phrase) if word not in fillers)


def nothing_to_report_mask(stream: TokenStream, phrases: Sequence[str], fillers: frozenset[str] = frozenset()
                           ) -> np.ndarray:
    """Which documents say there is nothing to report, shape (n_documents,), bool.

    Vectorised first: only documents whose every word is a phrase word, a
    filler, punctuation or an emoji are looked at further, and those are few
    and short.
    """
    keys = {_reduced(phrase, fillers) for phrase in phrases} - {()}
    result = np.zeros(stream.n_documents, dtype=bool)
    if not keys or not stream.n_tokens:
        return result
    phrase_words = {word for key in keys for word in key}
    vocabulary = stream.vocabulary
    is_phrase_word = stream.vocabulary_flags(lambda t: t in phrase_words)
    ignorable = stream.break_flags | stream.vocabulary_flags(lambda t: t in fillers or not _is_word(t))
    foreign = ~(is_phrase_word | ignorable)
    candidates = _any_per_document(stream, is_phrase_word) & ~_any_per_document(stream, foreign)
    for number in np.flatnonzero(candidates):
        codes = stream.codes[stream.doc_offsets[number]:stream.doc_offsets[number + 1]]
        words = tuple(vocabulary[code] for code in codes if is_phrase_word[code])
        result[number] = _segments(words, keys)
    return result


def _any_per_document(stream: TokenStream, flags: np.ndarray) -> np.ndarray:
    """Does any token of each document have its vocabulary flag set? shape (n_documents,), bool."""
    starts = stream.doc_offsets[:-1]
    filled = np.diff(stream.doc_offsets) > 0  # reduceat would give an empty document its neighbour's token
    result = np.zeros(stream.n_documents, dtype=bool)
    if filled.any():
        result[filled] = np.logical_or.reduceat(flags[stream.codes], starts[filled])
    return result


def _segments(words: tuple[str, ...], keys: set[tuple[str, ...]]) -> bool:
    """Can ``words`` be cut into a run of ``keys``? (dynamic programming over cut points)"""
    reachable = [True] + [False] * len(words)
    for end in range(1, len(words) + 1):
        reachable[end] = any(reachable[start] and words[start:end] in keys
                             for start in range(max(0, end - _MAX_PHRASE_WORDS), end))
    return reachable[-1]


def is_nothing_to_report(text: str, language: str = "en") -> bool:
    """One answer: does it say there is nothing to report (built-in phrases of ``language``)?"""
    phrases, fillers = builtin_phrases(language)
    return bool(nothing_to_report_mask(tokenize_corpus([text], offsets=False), phrases, fillers)[0])
