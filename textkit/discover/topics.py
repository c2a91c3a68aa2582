"""Emerging topics: NMF on TF-IDF of the answers, k chosen by stability.

The topic model reads the project's own token stream (:mod:`textkit.text`) and
n-gram matrix (:func:`textkit.text.ngrams.document_term_matrix`): no second
tokeniser. It is a scikit-learn transformer (:class:`TopicModel`): ``fit``
learns the vocabulary, the IDF and the topics, ``transform`` gives each
answer's topic loadings.

Terms
-----
Unigrams and two-word phrases; stop words are dropped exactly as in keyness (a
phrase may not start or end with one; negation cues are kept). A term must
occur in at least ``min_df`` (default 5) distinct answers of the pool and in at
most ``max_df`` (default 0.2 = 20%) of them.

Stock replies
-------------
Pools of unexplained answers hold stock replies repeated word for word by many
respondents ("going home", "hard to pick"). With ``collapse_duplicates=True``
(default) answers whose filtered term rows are identical enter the fit *once*,
so document frequencies (``min_df``, ``max_df``, the IDF) count distinct
answers and a reply given by 300 people weighs as one answer: a subject shows
up because many answers phrase it in different words, not because one phrase
is repeated. The ``max_df`` cap then removes words that fill the pool anyway.
Every answer, duplicates included, is still scored by ``transform``.

Fit and assignment
------------------
``NMF(init="nndsvda", solver="cd")`` (Frobenius loss) with one ``random_state``.
``transform`` solves each answer's loadings with the topics fixed; for this
solver/initialisation pair it reproduces the fit's own assignment (tested:
``tests/test_topics.py``); the loadings reported for the fitted answers are
``transform``'s, so a saved model scores old and new answers alike.
An answer *has* topic j when its loading on j is at least
``loading_threshold`` (default 0.5) times its largest loading (and above
zero); its *dominant* topic is the largest.

Choosing k (Greene, O'Callaghan & Cunningham 2014)
--------------------------------------------------
For each k of ``k_range`` (default 3-15): one reference model on the scan set
and ``stability_runs`` (default 5) models on random subsamples of
``subsample`` (80%) of it; the top ``n_top_terms`` (10) terms of the topics of
two models are matched by the Hungarian method
(``scipy.optimize.linear_sum_assignment``) on the average Jaccard of the top-d
lists over depths d = 1..t, and the agreement is the mean over matched
topics. Stability is the mean agreement of the subsample models with the
reference, with its standard error over the runs. NPMI coherence (Bouma 2009;
mean over pairs of top terms, Lau, Newman & Baldwin 2014) on the pool's
answers is computed beside it. The chosen k (:func:`choose_k`) has the peak
stability, except that among the k within one standard error of the peak
(near-ties the criterion cannot tell apart) the most coherent one wins.

The scan is cheap by design: it uses at most ``scan_size`` (5,000) distinct
answers drawn at random, keeps the terms that pass ``min_df`` in them, and fits
with ``scan_max_iter`` (200) and ``scan_tol`` (1e-4, scikit-learn's default)
instead of the final fit's 500 and 1e-5. Its fits start from NNDSVDa like the
final fit, not from the reference model's topics: a warm start would make the
subsample models resemble the reference by construction and inflate the
stability. The final model is fitted on every distinct answer. On the planted
tests, the demo and the benchmark the cheap scan picks the same k as the slow
one (up to 20,000 answers, 500 iterations, tolerance 1e-5):
``tests/test_topics.py`` (slow set) and ``benchmarks/topics.py --compare-slow``.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp
from sklearn.base import BaseEstimator, TransformerMixin

from ..errors import AnalysisError
from ..text.ngrams import document_term_matrix
from ..text.tokens import CONTRAST_WORDS, TokenStream, is_break_token, is_negation_cue, tokenize_corpus

#: Default range of numbers of topics scanned.
DEFAULT_K_RANGE = (3, 15)
#: Least answers per topic, and terms per topic, the data must offer for a k.
ANSWERS_PER_TOPIC = 5
TERMS_PER_TOPIC = 3
#: Columns of the k scan (``k_selection.csv`` without question and scope).
K_COLUMNS = ["k", "stability", "stability_se", "coherence", "chosen"]


# --------------------------------------------------------------------------- measures

def npmi(p_a, p_b, p_ab) -> np.ndarray:
    """Normalised PMI (Bouma 2009): ln[P(a,b) / (P(a) P(b))] / -ln P(a,b).

    Arguments broadcast. ``P(a,b) = 0`` gives -1 (never together), ``P(a,b) = 1`` gives 1.
    """
    p_a, p_b, p_ab = (np.asarray(v, dtype=float) for v in (p_a, p_b, p_ab))
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.log(p_ab / (p_a * p_b)) / -np.log(p_ab)
    value = np.where(p_ab <= 0, -1.0, value)
    return np.where(p_ab >= 1, 1.0, value)


def topic_coherence(binary: sp.spmatrix, top_terms: np.ndarray) -> np.ndarray:
    """Mean NPMI over the pairs of each topic's top terms.

    Parameters
    ----------
    binary : sparse matrix of shape (n_answers, n_terms)
        Term presence in the answers the probabilities are counted on.
    top_terms : int ndarray of shape (n_topics, t)
        Column indices of each topic's top terms.

    Returns
    -------
    ndarray of shape (n_topics,)
    """
    binary = sp.csc_matrix(binary)
    binary.data = np.ones_like(binary.data, dtype=np.float64)
    n = max(binary.shape[0], 1)
    scores = np.zeros(len(top_terms))
    for topic, columns in enumerate(top_terms):  # n_topics small matrices, no loop over answers
        sub = binary[:, columns]
        together = (sub.T @ sub).toarray() / n
        single = np.diag(together)
        upper = np.triu_indices(len(columns), 1)
        scores[topic] = npmi(single[upper[0]], single[upper[1]], together[upper]).mean() if len(upper[0]) else 0.0
    return scores


def average_jaccard(first: Sequence, second: Sequence) -> float:
    """Mean Jaccard index of the top-d prefixes of two ranked lists, d = 1..t."""
    depth = min(len(first), len(second))
    if depth == 0:
        return 0.0
    total = 0.0
    for d in range(1, depth + 1):
        a, b = set(first[:d]), set(second[:d])
        total += len(a & b) / len(a | b)
    return total / depth


def ranking_agreement(first: Sequence[Sequence], second: Sequence[Sequence]) -> float:
    """Agreement of two topic models (Greene et al. 2014): Hungarian-matched mean average Jaccard."""
    from scipy.optimize import linear_sum_assignment

    scores = np.array([[average_jaccard(a, b) for b in second] for a in first])
    rows, cols = linear_sum_assignment(scores, maximize=True)
    return float(scores[rows, cols].sum() / max(len(first), 1))


def match_topics(first: Sequence[Sequence], second: Sequence[Sequence]) -> tuple[np.ndarray, np.ndarray]:
    """Hungarian matching on average Jaccard: for each list of ``first``, its match in ``second`` and the score."""
    from scipy.optimize import linear_sum_assignment

    scores = np.array([[average_jaccard(a, b) for b in second] for a in first])
    rows, cols = linear_sum_assignment(scores, maximize=True)
    return cols[np.argsort(rows)], scores[rows, cols][np.argsort(rows)]


def choose_k(table: pd.DataFrame) -> int:
    """The k a stability scan picks: peak stability, NPMI coherence among the near-ties.

    ``table`` has one row per k with ``stability`` (mean agreement over the
    subsample runs), ``stability_se`` (its standard error over the runs) and
    ``coherence`` (mean NPMI). Greene et al. (2014) pick the k of peak
    stability. A k whose stability lies within one standard error of the peak
    is not told apart from the peak by that criterion (on real pools the curve
    often has a plateau, and which k of it comes out highest depends on the
    subsamples drawn); among those k we take the most coherent one, NPMI being
    the other published measure of topic quality (Lau, Newman & Baldwin 2014).
    Remaining ties go to the smaller k.
    """
    stability = table["stability"].to_numpy(dtype=float)
    peak = int(np.argmax(stability))
    tolerance = float(table["stability_se"].to_numpy(dtype=float)[peak]) + 1e-12
    near = np.flatnonzero(stability >= stability[peak] - tolerance)
    coherence = table["coherence"].to_numpy(dtype=float)[near]
    best = near[coherence >= coherence.max() - 1e-12]
    return int(table["k"].to_numpy()[best].min())


# --------------------------------------------------------------------------- streams

def matched_token_mask(stream: TokenStream, documents, starts, ends) -> np.ndarray:
    """Tokens inside matched character spans, shape (n_tokens,), bool.

    ``documents``, ``starts``, ``ends``: one entry per match (the coder's
    evidence: document row and character span in the original text).
    """
    if stream.starts is None:
        raise AnalysisError("the token stream has no character offsets; tokenise with offsets=True")
    documents = np.asarray(documents, dtype=np.int64)
    starts, ends = np.asarray(starts, dtype=np.int64), np.asarray(ends, dtype=np.int64)
    span = int(max(stream.ends.max(initial=0), np.max(ends, initial=0))) + 1
    token_keys = stream.document_index().astype(np.int64) * span + stream.starts
    first = np.searchsorted(token_keys, documents * span + starts, side="left")
    stop = np.searchsorted(token_keys, documents * span + ends, side="left")
    change = np.zeros(stream.n_tokens + 1, dtype=np.int64)
    np.add.at(change, first, 1)
    np.add.at(change, stop, -1)
    return np.cumsum(change)[:-1] > 0


def clause_mask(stream: TokenStream, mask: np.ndarray) -> np.ndarray:
    """Widen a token mask to whole clauses, shape (n_tokens,), bool.

    A clause runs between break tokens (clause punctuation), contrast words
    ("but", "although"...) and document starts; every token of a clause that
    holds a masked token is masked.
    """
    mask = np.asarray(mask, dtype=bool)
    boundary = stream.vocabulary_flags(lambda t: is_break_token(t) or t in CONTRAST_WORDS)[stream.codes]
    starts_document = np.zeros(stream.n_tokens, dtype=bool)
    starts_document[stream.doc_offsets[:-1][np.diff(stream.doc_offsets) > 0]] = True
    clause = np.cumsum(boundary | starts_document)
    touched = np.bincount(clause, weights=mask.astype(np.float64), minlength=int(clause.max(initial=0)) + 1) > 0
    return touched[clause] & ~boundary


def merge_inflections(stream: TokenStream, language: str = "en",
                      forms: dict[str, str] | None = None) -> tuple[TokenStream, dict[str, str]]:
    """Replace every word by the most frequent word of the stream with the same Snowball stem.

    "drones" and "drone" become one term, spelled as the commoner of the two,
    so that a subject is not split over its inflections. ``forms`` (token ->
    shown form), when given, is applied instead of being learned (a fitted
    model applies its own to new answers). Returns the new stream and the map.
    """
    from ..text.tokens import snowball_stemmer

    stem = snowball_stemmer(language)
    vocabulary = stream.vocabulary
    if forms is None:
        forms = {}
        if stem is not None:
            counts = np.bincount(stream.codes, minlength=len(vocabulary))
            stems = np.array([stem(str(t)) if str(t).isalpha() else str(t) for t in vocabulary], dtype=object)
            order = np.lexsort((np.arange(len(vocabulary)), -counts, stems))  # per stem: commonest first
            first = np.ones(len(order), dtype=bool)
            first[1:] = stems[order][1:] != stems[order][:-1]
            leader = np.cumsum(first) - 1
            shown = vocabulary[order][first][leader]
            forms = {str(t): str(f) for t, f in zip(vocabulary[order], shown, strict=True) if t != f}
    if not forms:
        return stream, forms
    renamed = np.array([forms.get(str(t), str(t)) for t in vocabulary], dtype=object)
    new_vocabulary, codes_of = np.unique(renamed, return_inverse=True)
    codes = codes_of.astype(stream.codes.dtype)[stream.codes]
    return TokenStream(codes=codes, doc_offsets=stream.doc_offsets, vocabulary=new_vocabulary.astype(object),
                       starts=stream.starts, ends=stream.ends), forms


def mask_tokens(stream: TokenStream, mask: np.ndarray) -> TokenStream:
    """A copy of ``stream`` with the masked tokens replaced by a break token.

    The words are gone from every term, and no phrase joins the words on
    either side of a removed one.
    """
    mask = np.asarray(mask, dtype=bool)
    vocabulary = stream.vocabulary
    breaks = np.flatnonzero(stream.vocabulary_flags(is_break_token))
    codes = stream.codes
    if len(breaks):
        filler = int(breaks[0])
    else:
        vocabulary = np.array(sorted([*vocabulary.tolist(), "."]), dtype=object)
        codes = np.searchsorted(vocabulary, stream.vocabulary)[codes].astype(stream.codes.dtype)
        filler = int(np.searchsorted(vocabulary, "."))
    codes = np.where(mask, filler, codes).astype(stream.codes.dtype)
    return TokenStream(codes=codes, doc_offsets=stream.doc_offsets, vocabulary=vocabulary,
                       starts=stream.starts, ends=stream.ends)


def select_documents(stream: TokenStream, rows: np.ndarray) -> TokenStream:
    """The documents ``rows`` of a stream, in that order (vocabulary kept), without offsets."""
    rows = np.asarray(rows, dtype=np.int64)
    lengths = np.diff(stream.doc_offsets)[rows]
    offsets = np.zeros(len(rows) + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    index = np.repeat(stream.doc_offsets[:-1][rows] - offsets[:-1], lengths) + np.arange(offsets[-1])
    return TokenStream(codes=stream.codes[index], doc_offsets=offsets, vocabulary=stream.vocabulary)


def _as_stream(documents) -> TokenStream:
    if isinstance(documents, TokenStream):
        return documents
    if isinstance(documents, str):
        raise AnalysisError("pass a list of answers, not one string")
    return tokenize_corpus(list(documents), offsets=False)


def _content_terms(terms: np.ndarray, n_words: np.ndarray) -> np.ndarray:
    """Terms that can name a subject (bool): no lone negation cue, and a letter or digit somewhere.

    "no", "not" and emoji say how a thing was said, not what it was about; as
    topic terms they gather every answer that uses them. Phrases that hold a
    cue ("no parking") stay; phrases with an emoji word go.
    """
    has_word = np.fromiter((all(any(ch.isalnum() for ch in word) for word in str(t).split(" ")) for t in terms),
                           dtype=bool, count=len(terms))
    lone_cue = (np.asarray(n_words) == 1) & np.fromiter((is_negation_cue(str(t)) for t in terms), dtype=bool,
                                                        count=len(terms))
    return has_word & ~lone_cue


def _distinct_rows(matrix: sp.csr_matrix) -> tuple[np.ndarray, np.ndarray]:
    """(first row of each distinct row, distinct index of every row) of a sparse matrix.

    Rows are keyed by two fixed random projections of their values (a
    collision needs two different rows equal on both: not a practical risk).
    """
    projections = np.random.default_rng(20260101).random((matrix.shape[1], 2))
    keys = np.round(matrix @ projections, 9)
    _, first, inverse = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")  # distinct rows in order of first appearance
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order))
    return first[order], rank[np.asarray(inverse).ravel()]


# --------------------------------------------------------------------------- model

def _no_progress(step: str) -> None:
    """The default progress hook: report nothing."""


@dataclass(frozen=True)
class _Scan:
    table: pd.DataFrame
    chosen: int
    reference: list[list[int]]   # top-term lists of the chosen k's reference model
    per_topic: np.ndarray        # (chosen,) mean matched average Jaccard of each reference topic


class TopicModel(TransformerMixin, BaseEstimator):
    """NMF topics on TF-IDF of answers (see the module docstring for every choice).

    Parameters
    ----------
    n_topics : int or None, default None
        The number of topics k; None chooses it by stability over ``k_range``.
    k_range : (int, int), default (3, 15)
        Smallest and largest k scanned (inclusive).
    min_df : int, default 5
        Least distinct answers a term must occur in.
    max_df : float, default 0.2
        Largest share of the distinct answers a term may occur in.
    ngram_range : (int, int), default (1, 2)
    stop_words : collection of str, optional
        Default: textkit's stop words, as in keyness.
    collapse_duplicates : bool, default True
        Identical answers (same filtered terms) enter the fit once.
    n_top_terms : int, default 10
        Depth t of the stability and coherence measures.
    stability_runs : int, default 5
    subsample : float, default 0.8
    scan_size : int, default 5000
        Most distinct answers the k scan uses (drawn at random).
    scan_max_iter, scan_tol : int, float, default 200, 1e-4
        NMF iteration cap and tolerance of the scan's fits.
    loading_threshold : float, default 0.5
        Share of an answer's largest loading a topic needs to be coded.
    language : str or None, default "en"
        Snowball language whose stems merge inflections (:func:`merge_inflections`);
        None keeps every spelling apart.
    random_state : int, default 0
    max_iter : int, default 500
    tol : float, default 1e-5
        NMF iteration cap and tolerance of the final fit.

    Attributes
    ----------
    terms_ : ndarray of shape (n_terms,)
        The vocabulary (sorted).
    components_ : ndarray of shape (n_topics, n_terms)
        Topic-term weights (NMF ``H``).
    idf_ : ndarray of shape (n_terms,)
    n_topics_ : int
    k_selection_ : DataFrame or None
        ``K_COLUMNS`` when k was chosen, else None.
    stability_ : float or None
        Stability of the chosen k (None when ``n_topics`` was given).
    topic_stability_ : ndarray of shape (n_topics,)
        Each topic's mean matched average Jaccard over the subsample models
        (NaN when ``n_topics`` was given).
    coherence_ : ndarray of shape (n_topics,)
        NPMI coherence of each topic on the fitted answers.
    n_answers_, n_empty_, n_distinct_ : int
        Answers given to fit, those with no term left after filtering
        (skipped), and distinct non-empty answers the model was fitted on.
    fit_rows_ : ndarray of shape (n_distinct_,)
        The answer (row of ``X``) that stands for each distinct answer in the fit.
    fit_loadings_ : ndarray of shape (n_distinct_, n_topics)
        The NMF's own ``W`` for those answers (kept to check ``transform``).
    """

    def __init__(self, n_topics: int | None = None, *, k_range: tuple[int, int] = DEFAULT_K_RANGE,
                 min_df: int = 5, max_df: float = 0.2, ngram_range: tuple[int, int] = (1, 2),
                 stop_words=None, collapse_duplicates: bool = True, n_top_terms: int = 10,
                 stability_runs: int = 5, subsample: float = 0.8, scan_size: int = 5000,
                 scan_max_iter: int = 200, scan_tol: float = 1e-4, loading_threshold: float = 0.5,
                 language: str | None = "en", random_state: int = 0, max_iter: int = 500,
                 tol: float = 1e-5) -> None:
        self.n_topics = n_topics
        self.k_range = k_range
        self.min_df = min_df
        self.max_df = max_df
        self.ngram_range = ngram_range
        self.stop_words = stop_words
        self.collapse_duplicates = collapse_duplicates
        self.n_top_terms = n_top_terms
        self.stability_runs = stability_runs
        self.subsample = subsample
        self.scan_size = scan_size
        self.scan_max_iter = scan_max_iter
        self.scan_tol = scan_tol
        self.loading_threshold = loading_threshold
        self.language = language
        self.random_state = random_state
        self.max_iter = max_iter
        self.tol = tol

    # ------------------------------------------------------------------ fit
    def fit(self, X, y=None, *, where: str = "the answers",
            progress: Callable[[str], None] | None = None) -> TopicModel:
        """Learn the vocabulary, the IDF, k (unless given) and the topics.

        Parameters
        ----------
        X : sequence of str (None for blank) or TokenStream, n_answers documents
        where : str
            Names the pool in error messages ("low_point (unexplained)").
        progress : callable, optional
            Called with the name of each step as it starts ("terms", "k scan: k=3"
            ..., "final fit"); a benchmark or a progress bar hooks in here.

        Raises
        ------
        AnalysisError
            Too few answers or terms for the requested k, or invalid settings.
        """
        import warnings

        from sklearn.exceptions import ConvergenceWarning

        self._check_settings()
        self._progress = progress or _no_progress  # dropped below: the fitted model stays picklable
        try:
            self._progress("terms")
            tfidf, binary = self._prepare(X)
            self._check_capacity(where)
            with warnings.catch_warnings():  # max_iter caps a slow fit; the loadings are still usable
                warnings.simplefilter("ignore", ConvergenceWarning)
                self._fit_topics(tfidf, binary)
        finally:
            del self._progress
        self.coherence_ = topic_coherence(binary, self.top_term_indices())
        return self

    def _prepare(self, X) -> tuple[sp.csr_matrix, sp.csr_matrix]:
        """Learn the vocabulary and the IDF; (TF-IDF, term presence) of the distinct answers fitted."""
        stream = _as_stream(X)
        self.forms_ = {}
        if self.language:
            stream, self.forms_ = merge_inflections(stream, self.language)
        counts, terms = self._counts(stream)
        self.n_answers_ = counts.shape[0]
        keep = self._frequent_terms(counts)
        self.terms_ = terms[keep]
        filtered = counts[:, keep]
        non_empty = np.flatnonzero(np.diff(filtered.indptr) > 0)
        self.n_empty_ = int(self.n_answers_ - len(non_empty))
        first = _distinct_rows(filtered[non_empty])[0] if self.collapse_duplicates else np.arange(len(non_empty))
        self.fit_rows_ = non_empty[first]
        distinct = filtered[self.fit_rows_]
        self.n_distinct_ = distinct.shape[0]
        self.idf_ = np.log((1 + distinct.shape[0]) / (1 + np.bincount(distinct.indices,
                                                                     minlength=distinct.shape[1]))) + 1
        return self._tfidf(distinct), (distinct > 0).astype(np.float64)

    def _fit_topics(self, tfidf: sp.csr_matrix, binary: sp.csr_matrix) -> None:
        scan = self._scan(tfidf, binary) if self.n_topics is None else None
        if scan is not None:
            self.k_selection_, self.n_topics_ = scan.table, scan.chosen
            self.stability_ = float(scan.table.loc[scan.table["chosen"], "stability"].iloc[0])
        else:
            self.k_selection_, self.n_topics_, self.stability_ = None, int(self.n_topics), None
        self._progress("final fit")
        model = self._nmf(self.n_topics_, self.random_state)
        self.fit_loadings_ = model.fit_transform(tfidf)
        self.components_ = model.components_
        self._nmf_model = model
        self.topic_stability_ = np.full(self.n_topics_, np.nan)
        if scan is not None:  # the final model is the scan's reference when the scan used every answer
            match, _ = match_topics(self._top_lists(self.components_), scan.reference)
            self.topic_stability_ = scan.per_topic[match]

    def _check_settings(self) -> None:
        low, high = (int(v) for v in self.k_range)
        if not 1 <= low <= high:
            raise AnalysisError(f"k_range must satisfy 1 <= low <= high, got {self.k_range!r}")
        if self.n_topics is not None and int(self.n_topics) < 1:
            raise AnalysisError(f"the number of topics must be at least 1, got {self.n_topics!r}")
        if not 0 < self.max_df <= 1:
            raise AnalysisError(f"max_df must be a share in (0, 1], got {self.max_df!r}")
        if int(self.min_df) < 1:
            raise AnalysisError(f"min_df must be at least 1, got {self.min_df!r}")
        if not 0 < self.loading_threshold <= 1:
            raise AnalysisError(f"loading_threshold must lie in (0, 1], got {self.loading_threshold!r}")
        if not 0 < self.subsample < 1:
            raise AnalysisError(f"subsample must lie strictly between 0 and 1, got {self.subsample!r}")

    def _frequent_terms(self, counts: sp.csr_matrix) -> np.ndarray:
        """Columns with ``min_df`` <= document frequency <= ``max_df`` share, over distinct answers."""
        rows = np.flatnonzero(np.diff(counts.indptr) > 0)
        distinct = counts[rows]
        if self.collapse_duplicates and len(rows):
            distinct = distinct[_distinct_rows(distinct)[0]]
        frequency = np.bincount(distinct.indices, minlength=counts.shape[1])
        return np.flatnonzero((frequency >= self.min_df) & (frequency <= self.max_df * max(distinct.shape[0], 1)))

    def _counts(self, stream: TokenStream) -> tuple[sp.csr_matrix, np.ndarray]:
        matrix, terms, n_words = document_term_matrix(stream, ngram_range=tuple(self.ngram_range),
                                                      stop_words=self.stop_words, binary=False)
        usable = np.flatnonzero(_content_terms(terms, n_words))
        return matrix[:, usable].astype(np.float64), terms[usable]

    def _tfidf(self, counts: sp.csr_matrix) -> sp.csr_matrix:
        """Sublinear TF x IDF, rows scaled to unit length (scikit-learn's TfidfTransformer formulas)."""
        from sklearn.preprocessing import normalize

        if 0 in counts.shape:  # no answer or no term left: the capacity check says so
            return sp.csr_matrix(counts.shape, dtype=np.float64)
        tf = counts.astype(np.float64, copy=True)
        tf.data = 1.0 + np.log(tf.data)
        return normalize(tf @ sp.diags(self.idf_), norm="l2", copy=False).tocsr()

    def max_supported_k(self) -> int:
        """Largest k the fitted pool supports: 5 distinct answers and 3 terms per topic."""
        return min(self.n_distinct_ // ANSWERS_PER_TOPIC, len(self.terms_) // TERMS_PER_TOPIC)

    def _check_capacity(self, where: str) -> None:
        supported = self.max_supported_k()
        found = (f"{where}: {self.n_answers_:,} answers ({self.n_distinct_:,} distinct with terms, "
                 f"{self.n_empty_:,} empty after filtering) and {len(self.terms_):,} terms")
        fix = f"lower min_df (now {self.min_df}), widen the scope, or add answers"
        if self.n_topics is not None and int(self.n_topics) > supported:
            raise AnalysisError(f"{found} support at most k={supported} ({ANSWERS_PER_TOPIC} distinct answers "
                                f"and {TERMS_PER_TOPIC} terms per topic); k={self.n_topics} refused: lower "
                                f"--k or {fix}")
        if self.n_topics is None and supported < int(self.k_range[0]):
            raise AnalysisError(f"{found} support at most k={supported} ({ANSWERS_PER_TOPIC} distinct answers "
                                f"and {TERMS_PER_TOPIC} terms per topic), below the range's smallest "
                                f"k={self.k_range[0]}: lower the range or {fix}")

    def _nmf(self, k: int, seed: int):
        from sklearn.decomposition import NMF

        return NMF(n_components=k, init="nndsvda", solver="cd", beta_loss="frobenius", max_iter=self.max_iter,
                   tol=self.tol, random_state=seed)

    # ------------------------------------------------------------------ k
    def _top_lists(self, components: np.ndarray) -> list[list[int]]:
        depth = min(self.n_top_terms, components.shape[1])
        order = np.lexsort((np.broadcast_to(np.arange(components.shape[1]), components.shape), -components))
        return [row[:depth].tolist() for row in order]

    def _scan(self, tfidf: sp.csr_matrix, binary: sp.csr_matrix) -> _Scan:
        """Stability and coherence for every supported k of the range (Greene et al. 2014)."""
        rng = np.random.default_rng(self.random_state)
        n = tfidf.shape[0]
        scan_rows = np.sort(rng.choice(n, self.scan_size, replace=False)) if n > self.scan_size else np.arange(n)
        scan_tfidf = tfidf[scan_rows]
        # A scan set drawn from a larger pool keeps the terms that pass min_df in it (the pool's own
        # rule); a pool within scan_size keeps every term.
        high = min(int(self.k_range[1]), self.max_supported_k())
        frequency = np.bincount(scan_tfidf.indices, minlength=tfidf.shape[1])
        present = np.flatnonzero(frequency >= (self.min_df if n > self.scan_size else 1))
        if len(present) < TERMS_PER_TOPIC * high:  # too few for the largest k: keep every term seen
            present = np.flatnonzero(frequency > 0)
        scan_tfidf = scan_tfidf[:, present]
        size = max(int(round(self.subsample * len(scan_rows))), 1)
        samples = [np.sort(rng.choice(len(scan_rows), size, replace=False)) for _ in range(self.stability_runs)]
        rows = []
        per_topic: dict[int, tuple[list[list[int]], np.ndarray]] = {}
        for k in range(int(self.k_range[0]), high + 1):
            self._progress(f"k scan: k={k}")
            reference_lists = self._scan_lists(scan_tfidf, k, self.random_state)
            scores = np.array([match_topics(reference_lists,
                                            self._scan_lists(scan_tfidf[sample], k, self.random_state + run + 1))[1]
                               for run, sample in enumerate(samples)]).reshape(len(samples), k)
            reference_lists = [present[row].tolist() for row in reference_lists]
            per_topic[k] = (reference_lists, scores.mean(axis=0) if len(samples) else np.ones(k))
            run_means = scores.mean(axis=1)
            rows.append({"k": k, "stability": float(run_means.mean()) if len(samples) else 1.0,
                         "stability_se": float(run_means.std(ddof=1) / np.sqrt(len(samples)))
                         if len(samples) > 1 else 0.0,
                         "coherence": float(topic_coherence(binary, np.asarray(reference_lists)).mean())})
        table = pd.DataFrame(rows)
        chosen = choose_k(table)
        table["chosen"] = table["k"] == chosen
        return _Scan(table=table[K_COLUMNS], chosen=chosen, reference=per_topic[chosen][0],
                     per_topic=per_topic[chosen][1])

    def _scan_lists(self, tfidf: sp.csr_matrix, k: int, seed: int) -> list[list[int]]:
        """Top-term lists of one scan model (looser ``scan_max_iter``/``scan_tol`` than the final fit)."""
        model = self._nmf(k, seed).set_params(max_iter=self.scan_max_iter, tol=self.scan_tol)
        return self._top_lists(model.fit(tfidf).components_)

    # ------------------------------------------------------------------ use
    def _check_fitted(self) -> None:
        if not hasattr(self, "components_"):
            raise RuntimeError("TopicModel is not fitted yet: call fit(answers) first")

    def transform(self, X) -> np.ndarray:
        """Topic loadings of answers, ndarray of shape (n_answers, n_topics) (0 rows: no known term)."""
        self._check_fitted()
        stream = _as_stream(X)
        if self.forms_:
            stream, _ = merge_inflections(stream, forms=self.forms_)
        counts, terms = self._counts(stream)
        position = pd.Index(self.terms_).get_indexer(terms)
        known = np.flatnonzero(position >= 0)
        remap = sp.csr_matrix((np.ones(len(known)), (known, position[known])),
                              shape=(len(terms), len(self.terms_)))
        return self.transform_counts((counts @ remap).tocsr())

    def transform_counts(self, counts: sp.csr_matrix) -> np.ndarray:
        """:meth:`transform` from term counts already in ``terms_`` order, shape (n_answers, n_terms)."""
        self._check_fitted()
        loadings = np.zeros((counts.shape[0], self.n_topics_))
        rows = np.flatnonzero(np.diff(counts.indptr) > 0)
        if len(rows):
            import warnings

            from sklearn.exceptions import ConvergenceWarning

            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ConvergenceWarning)
                loadings[rows] = self._nmf_model.transform(self._tfidf(counts[rows]))
        return loadings

    def codes(self, loadings: np.ndarray) -> np.ndarray:
        """0/1 topic codes, int8 array of the loadings' shape (see ``loading_threshold``)."""
        loadings = np.asarray(loadings, dtype=float)
        largest = loadings.max(axis=1, keepdims=True) if loadings.size else np.zeros((len(loadings), 1))
        return ((loadings > 0) & (loadings >= self.loading_threshold * largest)).astype(np.int8)

    def top_term_indices(self, depth: int | None = None) -> np.ndarray:
        """Columns of each topic's top terms, int array of shape (n_topics, depth); ties alphabetical."""
        self._check_fitted()
        lists = self._top_lists(self.components_)
        return np.asarray([row[: depth or self.n_top_terms] for row in lists], dtype=np.int64)
