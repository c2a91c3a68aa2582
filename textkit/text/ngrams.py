"""Sparse document-term matrices with phrases, built from a :class:`~textkit.text.TokenStream`.

A *term* is a unigram or a phrase of up to three consecutive tokens of one
document. Everything is computed on the integer token codes of the stream:
shifted views of the code array give the n-gram windows, each window becomes
one int64 key, and ``np.unique`` turns keys into term ids and (document, term)
pairs. No Python loop runs over tokens or documents.

Which windows become terms
--------------------------
* Break tokens (clause punctuation, see :func:`textkit.text.is_break_token`)
  are never terms, and no phrase spans a break token or two documents.
* Stop words: a unigram that is a stop word is dropped; a phrase may hold
  stop words *inside* ("waste of money", "lack of parking") but may not start
  or end with one ("the queue", "queue was" are not terms, the unigram
  "queue" covers them).
* Negation cues (``not``, ``no``, ``never``, ``n't`` forms..., see
  :func:`textkit.text.is_negation_cue`) are never treated as stop words, even
  when the list given contains them: "not", "no parking" and "never again"
  survive as terms.

Term order
----------
Terms are sorted by their token sequence, shorter sequences first on a tie
("queue" < "queue long" < "queues"). Because the vocabulary is sorted and a
space sorts before any character a token can hold, this is exactly the
Python string order of the space-joined terms (the order scikit-learn's
``CountVectorizer`` gives its vocabulary).
"""

from __future__ import annotations

from collections.abc import Collection

import numpy as np
import scipy.sparse as sp

from .tokens import TokenStream, default_stop_words, is_break_token, is_negation_cue

_INT64_MAX = np.iinfo(np.int64).max


def _extend_keys(keys: np.ndarray, next_codes: np.ndarray, base: int) -> np.ndarray:
    """Append one token code to each n-gram key (order preserving, overflow safe)."""
    if len(keys) and int(keys.max()) >= _INT64_MAX // base - 1:
        keys = np.unique(keys, return_inverse=True)[1].astype(np.int64)  # ranks keep the order
    return keys * base + next_codes


def _window_pairs(codes: np.ndarray, start: np.ndarray, n: int, base: int, document: np.ndarray,
                  n_documents: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Distinct n-grams starting at ``start`` and their (document, n-gram) occurrence counts.

    Returns
    -------
    term_codes : (n_unique, n) int64, token codes of each distinct n-gram, in token-sequence order
    pair_document, pair_term, pair_count : (n_pairs,) arrays, sorted by term then document
    """
    if base ** n <= _INT64_MAX // max(n_documents, 1):
        # fast path: one int64 key per (n-gram, document), one in-place sort
        combined = codes[start]
        for k in range(1, n):
            combined = combined * base + codes[start + k]
        combined = combined * n_documents + document[start]
        combined.sort()
        first = np.empty(len(combined), dtype=bool)
        first[0] = True
        np.not_equal(combined[1:], combined[:-1], out=first[1:])
        pair_start = np.flatnonzero(first)
        del first
        pair_count = np.diff(np.append(pair_start, len(combined)))
        pair_key = combined[pair_start]
        del combined, pair_start
        term_key, pair_document = np.divmod(pair_key, n_documents)
        del pair_key
        new_term = np.empty(len(term_key), dtype=bool)
        new_term[0] = True
        np.not_equal(term_key[1:], term_key[:-1], out=new_term[1:])
        pair_term = np.cumsum(new_term) - 1
        unique_key = term_key[new_term]
        term_codes = np.empty((len(unique_key), n), dtype=np.int64)
        for k in range(n):
            term_codes[:, k] = unique_key // base ** (n - 1 - k) % base
        return term_codes, pair_document, pair_term, pair_count
    keys = codes[start]
    for k in range(1, n):
        keys = _extend_keys(keys, codes[start + k], base)
    unique_keys, term_of_window = np.unique(keys, return_inverse=True)
    del keys
    n_unique = len(unique_keys)
    representative = np.empty(n_unique, dtype=np.int64)
    representative[term_of_window] = start  # any occurrence carries the term's codes
    pairs, pair_count = np.unique(document[start].astype(np.int64) * n_unique + term_of_window,
                                  return_counts=True)
    pair_document, pair_term = np.divmod(pairs, n_unique)
    order = np.lexsort((pair_document, pair_term))
    term_codes = np.stack([codes[representative + k] for k in range(n)], axis=1)
    return term_codes, pair_document[order], pair_term[order], pair_count[order]


def document_term_matrix(
    stream: TokenStream,
    ngram_range: tuple[int, int] = (1, 3),
    stop_words: Collection[str] | None = None,
    binary: bool = True,
    min_df: int = 1,
) -> tuple[sp.csr_matrix, np.ndarray, np.ndarray]:
    """Count unigrams and phrases per document.

    Parameters
    ----------
    stream : TokenStream
        The tokenised documents (``n_documents`` rows of the result).
    ngram_range : (int, int), default (1, 3)
        Smallest and largest number of words in a term.
    stop_words : collection of str, optional
        Words that may not be a unigram nor start or end a phrase. Default
        (None): :func:`textkit.text.default_stop_words`. Pass ``()`` for none.
        Negation cues are removed from the list whatever it holds.
    binary : bool, default True
        True: 1 if the document contains the term (document frequency);
        False: number of occurrences in the document.
    min_df : int, default 1
        Keep terms found in at least this many documents.

    Returns
    -------
    matrix : csr_matrix of shape (n_documents, n_terms), int32
        Sorted indices, no explicit zeros.
    terms : ndarray of shape (n_terms,), object
        Space-joined tokens of each term, sorted (see the module docstring).
    n_words : ndarray of shape (n_terms,), int64
        Number of tokens in each term.
    """
    low, high = (int(v) for v in ngram_range)
    if not 1 <= low <= high:
        raise ValueError(f"ngram_range must satisfy 1 <= low <= high, got {ngram_range!r}")
    if min_df < 1:
        raise ValueError(f"min_df must be at least 1, got {min_df}")
    stops = default_stop_words() if stop_words is None else frozenset(stop_words)
    vocabulary = stream.vocabulary
    base = max(len(vocabulary), 1)
    is_break = stream.vocabulary_flags(is_break_token)
    is_stop = stream.vocabulary_flags(lambda t: t in stops and not is_negation_cue(t)) & ~is_break

    codes = stream.codes.astype(np.int64)
    n_tokens, n_documents = stream.n_tokens, stream.n_documents
    document = stream.document_index()
    token_break = is_break[codes]
    edge_ok = ~(token_break | is_stop[codes])  # may start or end a term
    breaks_before = np.concatenate([[0], np.cumsum(token_break, dtype=np.int64)])

    term_codes: list[np.ndarray] = []  # per n: (n_kept, high) codes, -1 padded
    pair_documents: list[np.ndarray] = []
    pair_terms: list[np.ndarray] = []  # local term id within its n
    pair_counts: list[np.ndarray] = []
    for n in range(low, high + 1):
        m = n_tokens - n + 1
        if m <= 0:
            continue
        valid = edge_ok[:m] & edge_ok[n - 1:]
        if n > 1:
            valid &= (document[n - 1:] == document[:m]) & (breaks_before[n:] - breaks_before[:m] == 0)
        start = np.flatnonzero(valid)
        if not len(start):
            continue
        block, pair_doc, pair_term, counts = _window_pairs(codes, start, n, base, document, n_documents)
        del start
        n_unique = len(block)
        document_frequency = np.bincount(pair_term, minlength=n_unique)
        kept = document_frequency >= min_df
        local_id = np.cumsum(kept) - 1
        pair_kept = kept[pair_term]
        pair_documents.append(pair_doc[pair_kept].astype(np.int32))
        pair_terms.append(local_id[pair_term[pair_kept]].astype(np.int32))
        pair_counts.append(counts[pair_kept].astype(np.int32))
        del pair_doc, pair_term, counts, pair_kept
        padded = np.full((int(kept.sum()), high), -1, dtype=np.int64)
        padded[:, :n] = block[kept]
        term_codes.append(padded)

    if not term_codes:
        empty = np.zeros(0, dtype=object)
        return (sp.csr_matrix((n_documents, 0), dtype=np.int32), empty, np.zeros(0, dtype=np.int64))
    all_codes = np.concatenate(term_codes)
    order = np.lexsort(all_codes.T[::-1])  # -1 padding sorts shorter terms first
    global_id = np.empty(len(order), dtype=np.int64)
    global_id[order] = np.arange(len(order))
    offsets = np.cumsum([0] + [len(b) for b in term_codes[:-1]])
    global_id = global_id.astype(np.int32)
    rows = np.concatenate(pair_documents)
    del pair_documents
    cols = np.concatenate([global_id[t + off] for t, off in zip(pair_terms, offsets, strict=True)])
    del pair_terms
    data = np.ones(len(rows), np.int32) if binary else np.concatenate(pair_counts)
    del pair_counts
    matrix = sp.coo_matrix((data, (rows, cols)), shape=(n_documents, len(order))).tocsr()
    del rows, cols, data
    matrix.sort_indices()

    sorted_codes = all_codes[order]
    n_words = (sorted_codes >= 0).sum(axis=1).astype(np.int64)
    terms = vocabulary[sorted_codes[:, 0]].astype(object)
    for k in range(1, high):
        longer = sorted_codes[:, k] >= 0
        terms[longer] = terms[longer] + " " + vocabulary[sorted_codes[longer, k]]
    return matrix, terms, n_words


def phrase_parts(terms: np.ndarray, n_words: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Every (phrase, shorter term inside it) pair among ``terms``.

    A part is a contiguous run of the phrase's words that is itself one of
    ``terms`` ("free wi-fi" holds "free" and "wi-fi"; "no free wi-fi" holds
    those and "free wi-fi"; "waste of money" holds "waste" and "money", since
    "of", "waste of" and "of money" are not terms).

    Parameters
    ----------
    terms : ndarray of shape (n_terms,)
        Space-joined terms, sorted as :func:`document_term_matrix` returns them.
    n_words : ndarray of shape (n_terms,)

    Returns
    -------
    phrase, part : ndarray of shape (n_pairs,), int64
        Indices into ``terms``; sorted by phrase then part.
    """
    import pandas as pd

    terms = np.asarray(terms, dtype=object)
    n_words = np.asarray(n_words)
    phrase_index = np.flatnonzero(n_words >= 2)
    if not len(phrase_index):
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    words = pd.Series(terms[phrase_index]).str.split(" ", expand=True)
    width = words.shape[1]
    words = words.fillna("").to_numpy(dtype=object)
    owners, candidates = [], []
    for size in range(1, width):
        for offset in range(0, width - size + 1):
            piece = words[:, offset]
            for k in range(1, size):
                piece = piece + " " + words[:, offset + k]
            inside = (n_words[phrase_index] >= offset + size) & (n_words[phrase_index] > size)
            owners.append(phrase_index[inside])
            candidates.append(piece[inside])
    owner = np.concatenate(owners)
    found = pd.Index(terms).get_indexer(np.concatenate(candidates).astype(object))
    hit = found >= 0
    pairs = np.unique(np.stack([owner[hit], found[hit].astype(np.int64)], axis=1), axis=0)
    return pairs[:, 0], pairs[:, 1]
