"""Document-term matrices with phrases (textkit.ngrams)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer

from textkit.text.ngrams import document_term_matrix, phrase_parts
from textkit.text.tokens import (
    TokenStream,
    default_stop_words,
    is_break_token,
    is_negation_cue,
    tokenize,
    tokenize_corpus,
)

TEXTS = [
    "No free wi-fi at the cafe. Not free!",
    "A waste of money, the queue was long",
    "long queue; long queue",
    None,
    "",
    "The ferry was never on time - never again",
    "Queue, queue, QUEUE!",
    "£3.50 for a coffee at 10:30 is not cheap",
    "didn't see a single sign; no signs at all",
    "\u201cBrilliant\u201d views \u2014 but the toilets were dirty",
]


def reference_analyzer(stop_words: frozenset[str], ngram_range=(1, 3)):
    """Straightforward per-text n-grams with the documented rules, for CountVectorizer.

    Independent of textkit.ngrams: splits at break tokens, slides windows,
    applies the stop-word edge rule in plain Python.
    """
    stops = {w for w in stop_words if not is_negation_cue(w)}

    def analyze(text: str) -> list[str]:
        segments: list[list[str]] = [[]]
        for token in tokenize(text):
            if is_break_token(token):
                segments.append([])
            else:
                segments[-1].append(token)
        grams = []
        for segment in segments:
            for n in range(ngram_range[0], ngram_range[1] + 1):
                for i in range(len(segment) - n + 1):
                    window = segment[i:i + n]
                    if window[0] in stops or window[-1] in stops:
                        continue
                    grams.append(" ".join(window))
        return grams

    return analyze


@pytest.mark.parametrize("binary", [False, True])
@pytest.mark.parametrize("ngram_range", [(1, 1), (1, 3), (2, 3)])
def test_matches_sklearn_countvectorizer(binary, ngram_range):
    # reference: scikit-learn CountVectorizer with a callable analyzer over textkit.text.tokenize
    texts = [t if isinstance(t, str) else "" for t in TEXTS]
    stops = default_stop_words()
    vectorizer = CountVectorizer(analyzer=reference_analyzer(stops, ngram_range), binary=binary)
    expected = vectorizer.fit_transform(texts)
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(TEXTS), ngram_range=ngram_range,
                                                  binary=binary)
    assert list(terms) == list(vectorizer.get_feature_names_out())  # same sorted vocabulary
    assert (matrix != expected).nnz == 0
    assert list(n_words) == [len(t.split(" ")) for t in terms]


def test_min_df_matches_sklearn():
    # reference: scikit-learn CountVectorizer(min_df=2) on the same analyzer
    texts = [t if isinstance(t, str) else "" for t in TEXTS] * 2 + ["queue ferry", "ferry queue"]
    vectorizer = CountVectorizer(analyzer=reference_analyzer(default_stop_words()), min_df=3)
    expected = vectorizer.fit_transform(texts)
    matrix, terms, _ = document_term_matrix(tokenize_corpus(texts), binary=False, min_df=3)
    assert list(terms) == list(vectorizer.get_feature_names_out())
    assert (matrix != expected).nnz == 0


def test_stop_word_rules_and_negations():
    matrix, terms, _ = document_term_matrix(tokenize_corpus(TEXTS))
    vocabulary = set(terms)
    assert {"not", "no", "never", "didn't"} <= vocabulary           # negations survive
    assert {"never on time", "no signs", "not free", "not cheap"} <= vocabulary
    assert "never again" not in vocabulary                         # ends with the stop word "again"
    assert "waste of money" in vocabulary                          # stop word inside a phrase
    assert not {"the", "at", "was", "the queue", "queue was", "waste of"} & vocabulary
    assert "cafe not" not in vocabulary and "free not" not in vocabulary  # never across a break
    assert "time never" not in vocabulary                           # the dash is a break
    assert not any(is_break_token(w) for t in terms for w in t.split(" "))
    assert matrix.shape == (len(TEXTS), len(terms))
    assert matrix[3].nnz == 0 and matrix[4].nnz == 0               # missing and blank answers


def test_negation_cue_in_given_stop_list_is_ignored():
    _, terms, _ = document_term_matrix(tokenize_corpus(["not good at all", "no way"]),
                                       stop_words={"not", "no", "at", "all", "way"})
    assert "not" in terms and "not good" in terms and "no" in terms
    assert "way" not in terms and "no way" not in terms


def test_phrases_do_not_cross_documents():
    stream = tokenize_corpus(["ferry", "queue", "ferry queue"])
    matrix, terms, _ = document_term_matrix(stream, stop_words=())
    column = list(terms).index("ferry queue")
    assert matrix[:, column].toarray().ravel().tolist() == [0, 0, 1]


def test_counts_versus_presence():
    stream = tokenize_corpus(["queue queue queue", "queue"])
    counts, terms, _ = document_term_matrix(stream, ngram_range=(1, 1), binary=False)
    presence, _, _ = document_term_matrix(stream, ngram_range=(1, 1), binary=True)
    assert counts.toarray().ravel().tolist() == [3, 1]
    assert presence.toarray().ravel().tolist() == [1, 1]


def test_empty_corpus_and_bad_range():
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(["", None, "the a"]))
    assert matrix.shape == (3, 0) and len(terms) == 0 and len(n_words) == 0
    with pytest.raises(ValueError):
        document_term_matrix(tokenize_corpus(["x"]), ngram_range=(2, 1))


def test_huge_vocabulary_keys_do_not_overflow():
    # 2.2 million words: vocabulary**3 exceeds int64, so trigram keys must be re-ranked
    n_vocabulary = 2_200_000
    vocabulary = np.array([f"w{i:07d}" for i in range(n_vocabulary)], dtype=object)  # already sorted
    rng = np.random.default_rng(3)
    codes = np.concatenate([rng.choice(n_vocabulary, size=40, replace=False),
                            [n_vocabulary - 1, n_vocabulary - 2, n_vocabulary - 1]]).astype(np.int32)
    stream = TokenStream(codes=codes, doc_offsets=np.array([0, 20, 43]), vocabulary=vocabulary)
    assert n_vocabulary ** 3 > np.iinfo(np.int64).max
    _, terms, _ = document_term_matrix(stream, stop_words=())
    expected = set()
    for document in (codes[:20], codes[20:]):
        tokens = list(vocabulary[document])
        for n in (1, 2, 3):
            expected.update(" ".join(tokens[i:i + n]) for i in range(len(tokens) - n + 1))
    assert list(terms) == sorted(expected)


def test_phrase_parts():
    terms = np.array(sorted(["free", "wi-fi", "free wi-fi", "no", "no free", "no free wi-fi",
                             "waste", "money", "waste of money"]), dtype=object)
    n_words = np.array([len(t.split()) for t in terms])
    phrase, part = phrase_parts(terms, n_words)
    found = {(terms[p], terms[q]) for p, q in zip(phrase, part, strict=True)}
    assert found == {
        ("free wi-fi", "free"), ("free wi-fi", "wi-fi"), ("no free", "no"), ("no free", "free"),
        ("no free wi-fi", "no"), ("no free wi-fi", "free"), ("no free wi-fi", "wi-fi"),
        ("no free wi-fi", "no free"), ("no free wi-fi", "free wi-fi"),
        ("waste of money", "waste"), ("waste of money", "money"),
    }
