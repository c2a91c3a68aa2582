"""Keyness: the terms one group of respondents uses far more than another.

Every statistic is computed for all terms at once from one sparse
document-term matrix (:func:`textkit.ngrams.document_term_matrix`): the
counts of each side are one sparse product of a (sides x documents)
indicator with the matrix, and the measures are numpy expressions over the
resulting arrays.

What is counted
---------------
* ``document_frequency=True`` (default): a term counts once per respondent
  (answer), so one long answer cannot dominate. The side totals ``n`` are the
  numbers of answers on each side, and a rate is the share of answers that
  use the term.
* ``document_frequency=False``: occurrences are counted (the matrix must hold
  counts, ``binary=False``) and the totals are the numbers of word tokens
  (``doc_lengths``; by default the unigram occurrences) on each side; a rate
  is per word.
* ``weighted=True`` (default) with ``weights`` given: each answer counts with
  its survey weight, rescaled so the weights of the answers *in the
  comparison* average 1. Counts stay on the respondent scale, so multiplying
  all weights by a constant changes nothing. Weighted G² p-values treat the
  weighted table as counts and ignore the design effect: read them as a
  ranking aid, not as design-based tests.
* ``respondents_group`` / ``respondents_reference`` are always unweighted
  numbers of answers containing the term; ``min_respondents`` applies to
  their sum.

Measures
--------
Log-odds ratio with an informative Dirichlet prior (Monroe, Colaresi & Quinn
2008, *Political Analysis* 16, eqs. 16 and 18)::

    delta_w = ln[(y_wg + a_w) / (n_g + a_0 - y_wg - a_w)]
            - ln[(y_wr + a_w) / (n_r + a_0 - y_wr - a_w)]
    var_w  ~= 1 / (y_wg + a_w) + 1 / (y_wr + a_w),     z_w = delta_w / sqrt(var_w)

**The prior is built from the pooled answers of the comparison** (group plus
reference): ``a_w = a_0 * pi_w`` where ``pi_w = (y_wg + y_wr) / (n_g + n_r)``
is the pooled rate of the term, and **its strength is**
``a_0 = prior_strength * (n_g + n_r)``, i.e. the prior is a pseudo-sample worth
``prior_strength`` (default 0.1 = 10%) of the compared answers, added to each
side, with the pooled rates. Rare terms are pulled towards "no difference",
and a term absent from one side gets a large variance instead of an infinite
log-odds. In document-frequency mode each term is its own yes/no outcome
(``a_w`` pseudo-answers of ``a_0`` use the term), so ``sum(a_w)`` need not be
``a_0``.

Log-likelihood G² (Dunning 1993; Rayson & Garside 2000) is computed on the
full 2 x 2 table ``[[y_g, y_r], [n_g - y_g, n_r - y_r]]`` (term vs the rest,
group vs reference): ``G² = 2 sum O ln(O / E)`` over the four cells, exactly
what ``scipy.stats.chi2_contingency(table, lambda_="log-likelihood",
correction=False)`` returns, and *not* the two-cell corpus-linguistics
shortcut. Its p-value is from chi-squared with 1 degree of freedom, and
``q_value`` is the Benjamini-Hochberg adjusted p-value over all terms tested
in that comparison (statsmodels ``multipletests(method="fdr_bh")``).

Log Ratio (Hardie 2014) is ``log2`` of the ratio of the two rates, the
effect size: 1 means twice as common in the group. A zero count is replaced
by 0.5 (in the same units as the counts) before the ratio is taken, so the
Log Ratio stays finite.

Ranking and phrases
-------------------
Terms with ``z > 0`` are key for the group, ``z < 0`` for the reference.
``rank_by="z"`` (default) orders each side by ``|z|``; ``rank_by="log_ratio"``
keeps only terms with ``q_value <= alpha`` and orders them by ``|Log Ratio|``.
``max_terms`` is per side; ties break alphabetically.

``phrase_handling="collapse"`` (default) avoids reporting a word only because
a phrase holding it is key: a shorter term is dropped when some phrase that
contains it leans to the same side (and passes the same filters) and the
shorter term's *remaining* counts (its counts minus the phrase's: with
document frequencies exactly the answers that use the word but not the phrase;
the prior of that test is built from the remaining counts) are no longer
significant (``z`` below ``z_{1 - alpha/2}`` on that side). The phrase stays. Words that are key
on their own as well keep their place. ``"keep"`` reports every term.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy import special, stats

from ..errors import AnalysisError
from ..text.ngrams import phrase_parts

#: Default strength of the Dirichlet prior, as a share of the compared answers.
DEFAULT_PRIOR_STRENGTH = 0.1
#: Default minimum number of answers (both sides together) a term needs.
DEFAULT_MIN_RESPONDENTS = 5
#: Default number of terms returned per side.
DEFAULT_MAX_TERMS = 50
#: Value of ``reference`` for "the rest of the group variable".
REST = "(rest)"
#: Zero counts are replaced by this before the Log Ratio is taken (Hardie 2014).
LOG_RATIO_ZERO = 0.5
#: Columns of :func:`keyness`.
TERM_COLUMNS = ["term", "n_words", "respondents_group", "respondents_reference", "rate_group",
                "rate_reference", "log_odds", "z", "g2", "p_value", "q_value", "log_ratio",
                "count_group", "count_reference"]
#: Columns of :func:`compare` (``keyness.csv``): the issue's columns, then extras.
KEYNESS_COLUMNS = ["question", "group_var", "group", "reference", *TERM_COLUMNS[:12],
                   "count_group", "count_reference", "within_theme"]
#: Columns of :func:`suggest_terms`.
SUGGESTION_COLUMNS = ["kind", "theme", "term", "n_words", "z", "log_ratio", "q_value",
                      "respondents_group", "respondents_reference"]
RANK_CHOICES = ("z", "log_ratio")
PHRASE_CHOICES = ("collapse", "keep")
#: Summary counters of a comparison (DataFrame.attrs["summary"]).
SUMMARY_KEYS = ("terms_present", "terms_tested", "below_min_respondents", "explained_by_phrase",
                "not_significant", "beyond_max_terms", "returned")


# --------------------------------------------------------------------------- measures

def log_odds_dirichlet(y_group, y_reference, n_group, n_reference, alpha_w, alpha_0
                       ) -> tuple[np.ndarray, np.ndarray]:
    """Monroe et al. (2008) log-odds ratio with a Dirichlet prior and its variance.

    All arguments broadcast (numpy); counts may be weighted (non-integer).

    Parameters
    ----------
    y_group, y_reference : array_like
        Counts of the term in the group and in the reference.
    n_group, n_reference : array_like
        Totals of each side (answers, or word tokens).
    alpha_w : array_like
        Prior pseudo-count of the term.
    alpha_0 : array_like
        Prior total.

    Returns
    -------
    delta : ndarray
        ``delta_w`` (natural log units; > 0 means more common in the group).
    variance : ndarray
        Its approximate variance; ``z = delta / sqrt(variance)``.
    """
    y_group, y_reference = np.asarray(y_group, float), np.asarray(y_reference, float)
    a_group = y_group + alpha_w
    a_reference = y_reference + alpha_w
    rest_group = np.asarray(n_group, float) + alpha_0 - a_group
    rest_reference = np.asarray(n_reference, float) + alpha_0 - a_reference
    with np.errstate(divide="ignore", invalid="ignore"):
        delta = np.log(a_group) - np.log(rest_group) - np.log(a_reference) + np.log(rest_reference)
        # a term in every answer of both sides has no "other" outcome left: no difference
        delta = np.where((rest_group <= 0) & (rest_reference <= 0), 0.0, delta)
        return delta, 1.0 / a_group + 1.0 / a_reference


def g_squared(y_group, y_reference, n_group, n_reference) -> np.ndarray:
    """Log-likelihood G² on the 2 x 2 table [[y_g, y_r], [n_g - y_g, n_r - y_r]].

    Equals ``scipy.stats.chi2_contingency(table, lambda_="log-likelihood",
    correction=False)[0]`` (all four cells, not the two-cell shortcut).
    Arguments broadcast; cells with zero observed count contribute 0.
    """
    a = np.asarray(y_group, float)
    b = np.asarray(y_reference, float)
    n_g = np.asarray(n_group, float)
    n_r = np.asarray(n_reference, float)
    c, d = n_g - a, n_r - b
    total = n_g + n_r
    present = a + b
    absent = total - present
    cells = ((a, present * n_g), (b, present * n_r), (c, absent * n_g), (d, absent * n_r))
    with np.errstate(divide="ignore", invalid="ignore"):
        g2 = sum(special.xlogy(observed, np.where(observed > 0, observed * total / expected_times_total, 1.0))
                 for observed, expected_times_total in cells)
    return np.maximum(2.0 * g2, 0.0)


def log_ratio(y_group, y_reference, n_group, n_reference, zero: float = LOG_RATIO_ZERO) -> np.ndarray:
    """Hardie's (2014) Log Ratio: log2(rate_group / rate_reference).

    A count of exactly 0 is replaced by ``zero`` (default 0.5) first, but by no more
    than half the count the other side's rate would give it: with a tiny side (a
    group of one answer, or a small weighted total) 0.5 alone can make the zero
    side's rate the larger one and flip the sign. So the sign always follows the
    rates: a side with a count of 0 gets a Log Ratio of at most -1 against a side
    with a positive count, and two zero counts give 0.
    """
    y_g, y_r = np.asarray(y_group, float), np.asarray(y_reference, float)
    n_g, n_r = np.asarray(n_group, float), np.asarray(n_reference, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        adjusted_g = np.where(y_g == 0, np.minimum(zero, 0.5 * (y_r / n_r) * n_g), y_g)
        adjusted_r = np.where(y_r == 0, np.minimum(zero, 0.5 * (y_g / n_g) * n_r), y_r)
        ratio = np.log2((adjusted_g / n_g) / (adjusted_r / n_r))
    return np.where((y_g == 0) & (y_r == 0), 0.0, ratio)[()]


# --------------------------------------------------------------------------- options

@dataclass(frozen=True)
class _Options:
    prior_strength: float
    min_respondents: int
    max_terms: int | None
    rank_by: str
    alpha: float
    phrase_handling: str


def _options(prior_strength, min_respondents, max_terms, rank_by, alpha, phrase_handling) -> _Options:
    if not (np.isfinite(prior_strength) and prior_strength > 0):
        raise AnalysisError(f"prior_strength must be a positive number, got {prior_strength!r}")
    if int(min_respondents) < 1:
        raise AnalysisError(f"min_respondents must be at least 1, got {min_respondents!r}")
    if max_terms is not None and int(max_terms) < 1:
        raise AnalysisError(f"max_terms must be at least 1 (or None for all), got {max_terms!r}")
    if rank_by not in RANK_CHOICES:
        raise AnalysisError(f"rank_by must be one of {', '.join(RANK_CHOICES)}, got {rank_by!r}")
    if not 0 < alpha < 1:
        raise AnalysisError(f"alpha must lie between 0 and 1, got {alpha!r}")
    if phrase_handling not in PHRASE_CHOICES:
        raise AnalysisError(f"phrase_handling must be one of {', '.join(PHRASE_CHOICES)}, "
                            f"got {phrase_handling!r}")
    return _Options(float(prior_strength), int(min_respondents),
                    None if max_terms is None else int(max_terms), rank_by, float(alpha), phrase_handling)


# --------------------------------------------------------------------------- counting

@dataclass
class _Counts:
    """Per-class sums over documents; classes are rows."""

    weighted: np.ndarray     # (n_classes, n_terms) weighted counts (raw weights)
    respondents: np.ndarray  # (n_classes, n_terms) unweighted answers containing the term
    totals: np.ndarray       # (n_classes,) weighted side totals (answers or words)
    weight_sums: np.ndarray  # (n_classes,) sum of raw weights
    documents: np.ndarray    # (n_classes,) number of answers


@dataclass
class _Matrices:
    binary: sp.csr_matrix
    counted: sp.csr_matrix           # binary (DF mode) or counts
    unit_size: np.ndarray            # per document: 1 (DF mode) or its number of words
    weights: np.ndarray              # per document, raw (ones when unweighted)


def _prepare(matrix, n_words, weights, document_frequency: bool, weighted: bool,
             doc_lengths) -> _Matrices:
    matrix = sp.csr_matrix(matrix)
    n_documents = matrix.shape[0]
    if np.all(matrix.data == 1):
        binary = matrix  # already 0/1 (the default matrix): no copy of a large matrix
    else:
        binary = matrix.copy()
        binary.data = (binary.data != 0).astype(np.int32)
        binary.eliminate_zeros()
    if document_frequency:
        counted = binary
        unit = np.ones(n_documents)
    else:
        counted = matrix
        if doc_lengths is None:
            unigram = sp.diags((np.asarray(n_words) == 1).astype(np.float64))
            unit = np.asarray((matrix @ unigram).sum(axis=1), dtype=float).ravel()
        else:
            unit = np.asarray(doc_lengths, dtype=float)
            if unit.shape != (n_documents,):
                raise AnalysisError(f"doc_lengths must have one value per document ({n_documents}), "
                                    f"got shape {unit.shape}")
    if weights is None or not weighted:
        w = np.ones(n_documents)
    else:
        w = np.asarray(weights, dtype=float)
        if w.shape != (n_documents,):
            raise AnalysisError(f"weights must have one value per document ({n_documents}), "
                                f"got shape {w.shape}")
        if not np.all(np.isfinite(w)) or np.any(w < 0):
            raise AnalysisError("weights must be finite and not negative; fix or drop the rows with "
                                "missing or negative weights")
    return _Matrices(binary=binary, counted=counted, unit_size=unit, weights=w)


def _class_sums(mats: _Matrices, classes: np.ndarray, n_classes: int, columns: np.ndarray | None = None
                ) -> _Counts:
    """Sum every term over the documents of each class (class -1 = not counted)."""
    inside = np.flatnonzero(classes >= 0)
    codes = classes[inside]
    shape = (n_classes, len(classes))
    indicator = sp.csr_matrix((np.ones(len(inside)), (codes, inside)), shape=shape)
    weighted_indicator = sp.csr_matrix((mats.weights[inside], (codes, inside)), shape=shape)
    respondents = indicator @ mats.binary
    weighted = weighted_indicator @ mats.counted
    if columns is not None:
        respondents = respondents[:, columns]
        weighted = weighted[:, columns]
    return _Counts(
        weighted=weighted.toarray(),
        respondents=np.rint(respondents.toarray()).astype(np.int64),
        totals=np.bincount(codes, weights=mats.weights[inside] * mats.unit_size[inside], minlength=n_classes),
        weight_sums=np.bincount(codes, weights=mats.weights[inside], minlength=n_classes),
        documents=np.bincount(codes, minlength=n_classes).astype(np.int64),
    )


# --------------------------------------------------------------------------- scoring

def _collapse(parts: tuple[np.ndarray, np.ndarray], tested: np.ndarray, z: np.ndarray, y_g, y_r,
              n_g, n_r, strength: float, z_critical: float) -> np.ndarray:
    """Terms whose keyness a phrase on the same side explains (bool, n_terms).

    ``tested`` marks the terms that may be reported; only those can explain others.
    """
    phrase, part = parts
    side = np.sign(z)
    usable = tested[phrase] & tested[part] & (side[phrase] == side[part]) & (side[phrase] != 0)
    phrase, part = phrase[usable], part[usable]
    rest_g = np.maximum(y_g[part] - y_g[phrase], 0.0)
    rest_r = np.maximum(y_r[part] - y_r[phrase], 0.0)
    # the prior follows the remaining counts, so equal remaining rates give z = 0
    alpha_w = strength * (rest_g + rest_r)
    nothing_left = alpha_w <= 0
    with np.errstate(divide="ignore", invalid="ignore"):
        delta, variance = log_odds_dirichlet(rest_g, rest_r, n_g, n_r, alpha_w, strength * (n_g + n_r))
        explained = nothing_left | (side[part] * delta / np.sqrt(variance) < z_critical)
    dropped = np.zeros(len(z), dtype=bool)
    dropped[part[explained]] = True
    return dropped


def _score(terms: np.ndarray, n_words: np.ndarray, y_g: np.ndarray, y_r: np.ndarray,
           resp_g: np.ndarray, resp_r: np.ndarray, n_g: float, n_r: float, options: _Options,
           parts: tuple[np.ndarray, np.ndarray] | None, eligible: np.ndarray | None = None
           ) -> tuple[pd.DataFrame, dict[str, int]]:
    """All measures for one comparison, filtered and ranked (arrays over terms)."""
    respondents = resp_g + resp_r
    present = respondents > 0
    tested = respondents >= options.min_respondents
    summary = dict.fromkeys(SUMMARY_KEYS, 0)
    summary["terms_present"] = int(present.sum())
    summary["terms_tested"] = int(tested.sum())
    summary["below_min_respondents"] = int((present & ~tested).sum())
    index = np.flatnonzero(tested)
    strength = options.prior_strength
    z = np.zeros(len(terms))
    delta, variance = log_odds_dirichlet(y_g[index], y_r[index], n_g, n_r,
                                         strength * (y_g[index] + y_r[index]), strength * (n_g + n_r))
    z[index] = delta / np.sqrt(variance)
    g2 = g_squared(y_g[index], y_r[index], n_g, n_r)
    p_value = special.erfc(np.sqrt(g2 / 2))  # chi-squared survival function with 1 df, exactly
    if len(index):
        from statsmodels.stats.multitest import multipletests

        q_value = multipletests(p_value, alpha=options.alpha, method="fdr_bh")[1]
    else:
        q_value = np.zeros(0)
    ratio = log_ratio(y_g[index], y_r[index], n_g, n_r)

    keep = np.ones(len(index), dtype=bool)
    if options.phrase_handling == "collapse" and parts is not None and len(parts[0]):
        z_critical = float(stats.norm.ppf(1 - options.alpha / 2))
        reportable = tested if eligible is None else tested & eligible
        explained = _collapse(parts, reportable, z, y_g, y_r, n_g, n_r, strength, z_critical)[index]
        summary["explained_by_phrase"] = int(explained.sum())
        keep &= ~explained
    if eligible is not None:
        keep &= eligible[index]
    if options.rank_by == "log_ratio":
        significant = q_value <= options.alpha
        summary["not_significant"] = int((keep & ~significant).sum())
        keep &= significant
        score = np.abs(ratio)
    else:
        score = np.abs(z[index])
    chosen: list[np.ndarray] = []
    for sign in (1, -1):
        on_side = np.flatnonzero(keep & (np.sign(z[index]) == sign))
        ranked = on_side[np.lexsort((on_side, -score[on_side]))]  # index order = alphabetical ties
        if options.max_terms is not None:
            summary["beyond_max_terms"] += max(len(ranked) - options.max_terms, 0)
            ranked = ranked[: options.max_terms]
        chosen.append(ranked)
    pick = np.concatenate(chosen)
    rows = index[pick]
    summary["returned"] = len(rows)
    with np.errstate(divide="ignore", invalid="ignore"):
        frame = pd.DataFrame({
            "term": terms[rows].astype(object),
            "n_words": n_words[rows].astype(np.int64),
            "respondents_group": resp_g[rows].astype(np.int64),
            "respondents_reference": resp_r[rows].astype(np.int64),
            "rate_group": y_g[rows] / n_g,
            "rate_reference": y_r[rows] / n_r,
            "log_odds": delta[pick],
            "z": z[rows],
            "g2": g2[pick],
            "p_value": p_value[pick],
            "q_value": q_value[pick],
            "log_ratio": ratio[pick],
            "count_group": y_g[rows],
            "count_reference": y_r[rows],
        })
    return frame, summary


def _sides(counts: _Counts, group: int, reference: int | None) -> tuple:
    """(y_g, y_r, resp_g, resp_r, n_g, n_r) for class ``group`` vs class ``reference`` (None: rest)."""
    if reference is None:
        y_r = counts.weighted.sum(axis=0) - counts.weighted[group]
        resp_r = counts.respondents.sum(axis=0) - counts.respondents[group]
        total_r = counts.totals.sum() - counts.totals[group]
        weight_r = counts.weight_sums.sum() - counts.weight_sums[group]
        docs_r = counts.documents.sum() - counts.documents[group]
    else:
        y_r, resp_r = counts.weighted[reference], counts.respondents[reference]
        total_r, weight_r = counts.totals[reference], counts.weight_sums[reference]
        docs_r = counts.documents[reference]
    weight_all = counts.weight_sums[group] + weight_r
    if weight_all <= 0 or counts.totals[group] <= 0 or total_r <= 0:
        raise AnalysisError("the weights (or word counts) of one side of the comparison sum to zero; "
                            "check the weight column or run unweighted")
    scale = (counts.documents[group] + docs_r) / weight_all  # weights average 1 in the comparison
    return (counts.weighted[group] * scale, np.maximum(y_r * scale, 0.0), counts.respondents[group],
            resp_r, counts.totals[group] * scale, total_r * scale)


# --------------------------------------------------------------------------- public API

def keyness(
    matrix: sp.spmatrix,
    terms: np.ndarray,
    n_words: np.ndarray,
    in_group: np.ndarray,
    in_reference: np.ndarray,
    weights: np.ndarray | None = None,
    *,
    document_frequency: bool = True,
    weighted: bool = True,
    doc_lengths: np.ndarray | None = None,
    prior_strength: float = DEFAULT_PRIOR_STRENGTH,
    min_respondents: int = DEFAULT_MIN_RESPONDENTS,
    max_terms: int | None = DEFAULT_MAX_TERMS,
    rank_by: str = "z",
    alpha: float = 0.05,
    phrase_handling: str = "collapse",
    parts: tuple[np.ndarray, np.ndarray] | None = None,
) -> pd.DataFrame:
    """Key terms of one group of answers against a reference group.

    Parameters
    ----------
    matrix : sparse matrix of shape (n_documents, n_terms)
        From :func:`textkit.ngrams.document_term_matrix`; must hold counts
        (``binary=False``) when ``document_frequency=False``.
    terms : ndarray of shape (n_terms,)
    n_words : ndarray of shape (n_terms,)
    in_group, in_reference : bool ndarray of shape (n_documents,)
        The answers on each side; they must not overlap and neither may be empty.
    weights : ndarray of shape (n_documents,), optional
        Survey weights (see the module docstring for how they are rescaled).
    document_frequency : bool, default True
        Count a term once per answer (True) or every occurrence (False).
    weighted : bool, default True
        Apply ``weights`` (ignored when ``weights`` is None).
    doc_lengths : ndarray of shape (n_documents,), optional
        Words per answer, the totals in token mode (default: unigram occurrences).
    prior_strength : float, default 0.1
        Prior total ``a_0`` as a multiple of the pooled side totals.
    min_respondents : int, default 5
        Minimum answers (both sides, unweighted) containing a term.
    max_terms : int or None, default 50
        Terms returned per side (None: all).
    rank_by : {"z", "log_ratio"}, default "z"
    alpha : float, default 0.05
        Level for BH significance (``rank_by="log_ratio"``) and phrase collapsing.
    phrase_handling : {"collapse", "keep"}, default "collapse"
    parts : (ndarray, ndarray), optional
        Precomputed :func:`textkit.ngrams.phrase_parts` of ``terms``.

    Returns
    -------
    DataFrame
        :data:`TERM_COLUMNS`; group-side terms first (``z > 0``), then
        reference-side terms, each in rank order. ``attrs["summary"]`` counts
        the terms dropped at each step (:data:`SUMMARY_KEYS`).

    Raises
    ------
    AnalysisError
        Empty or overlapping sides, misshapen inputs, invalid options.
    """
    options = _options(prior_strength, min_respondents, max_terms, rank_by, alpha, phrase_handling)
    matrix = sp.csr_matrix(matrix)
    terms = np.asarray(terms, dtype=object)
    n_words = np.asarray(n_words)
    n_documents = matrix.shape[0]
    group = np.asarray(in_group, dtype=bool)
    reference = np.asarray(in_reference, dtype=bool)
    for name, mask in (("in_group", group), ("in_reference", reference)):
        if mask.shape != (n_documents,):
            raise AnalysisError(f"{name} must have one value per document ({n_documents}), got {mask.shape}")
    if len(terms) != matrix.shape[1] or len(n_words) != matrix.shape[1]:
        raise AnalysisError("terms and n_words must have one entry per matrix column")
    overlap = int((group & reference).sum())
    if overlap:
        raise AnalysisError(f"the group and the reference share {overlap} answers; a group cannot be "
                            "compared with itself - choose two different groups")
    if not group.any():
        raise AnalysisError("the group has no answers; check the group value and the filters")
    if not reference.any():
        raise AnalysisError("the reference has no answers; check the group value and the filters")
    mats = _prepare(matrix, n_words, weights, document_frequency, weighted, doc_lengths)
    classes = np.full(n_documents, -1, dtype=np.int64)
    classes[group] = 0
    classes[reference] = 1
    counts = _class_sums(mats, classes, 2)
    if options.phrase_handling == "collapse" and parts is None:
        parts = phrase_parts(terms, n_words)
    frame, summary = _score(terms, n_words, *_sides(counts, 0, 1), options, parts)
    frame.attrs["summary"] = summary
    return frame


def _group_sizes(documents: np.ndarray, minimum: int) -> tuple[np.ndarray, np.ndarray]:
    """(groups large enough to compare, groups with answers but fewer than ``minimum``).

    A group of one or two answers has rates of 0 or 1 for every term; it is left out of
    the automatic comparisons (and named in the skipped notes) rather than reported.
    """
    return np.flatnonzero(documents >= minimum), np.flatnonzero((documents > 0) & (documents < minimum))


def _labels(values: Any) -> tuple[np.ndarray, np.ndarray]:
    """(codes with -1 for missing, sorted distinct values) of one group column."""
    codes, uniques = pd.factorize(pd.Series(values, dtype=object), sort=True)
    return codes.astype(np.int64), np.asarray(uniques, dtype=object)


def compare(
    matrix: sp.spmatrix,
    terms: np.ndarray,
    n_words: np.ndarray,
    groups: pd.DataFrame,
    *,
    weights: np.ndarray | None = None,
    answered: np.ndarray | None = None,
    by: Sequence[str] | None = None,
    wave: str | None = None,
    rest: bool = True,
    pairs: Iterable[tuple[str, Any, Any]] = (),
    theme_matrix: sp.spmatrix | None = None,
    themes: Sequence[str] | None = None,
    within_themes: Iterable[str] = (),
    question: str | None = None,
    document_frequency: bool = True,
    weighted: bool = True,
    doc_lengths: np.ndarray | None = None,
    prior_strength: float = DEFAULT_PRIOR_STRENGTH,
    min_respondents: int = DEFAULT_MIN_RESPONDENTS,
    max_terms: int | None = DEFAULT_MAX_TERMS,
    rank_by: str = "z",
    alpha: float = 0.05,
    phrase_handling: str = "collapse",
) -> pd.DataFrame:
    """The keyness table (``keyness.csv``) for a set of comparisons.

    For each variable in ``by``: every group against the rest of that
    variable (``rest=True``); for the ``wave`` variable also each wave against
    the one before it (sorted order); and every ``(variable, group,
    reference)`` of ``pairs``. The same comparisons are then repeated within
    the answers coded with each theme of ``within_themes``.

    Parameters
    ----------
    matrix, terms, n_words
        As for :func:`keyness` (n_documents rows).
    groups : DataFrame with n_documents rows
        One column per group variable (missing values: not in any group).
    weights : ndarray of shape (n_documents,), optional
    answered : bool ndarray of shape (n_documents,), optional
        Answers to use (e.g. one question's non-blank answers); default all.
    by : sequence of str, optional
        Group variables to compare; default every column of ``groups``.
    wave : str, optional
        The column of ``groups`` that holds the survey wave.
    rest : bool, default True
        Include each group against the rest of its variable.
    pairs : iterable of (variable, group, reference)
        Explicit group-vs-group comparisons.
    theme_matrix : sparse matrix of shape (n_documents, n_themes), optional
    themes : sequence of str, optional
        Theme ids, the columns of ``theme_matrix``.
    within_themes : iterable of str
        Themes within whose answers to repeat the comparisons.
    question : str, optional
        Written into the ``question`` column.
    document_frequency, weighted, doc_lengths, prior_strength, min_respondents,
    max_terms, rank_by, alpha, phrase_handling
        As for :func:`keyness`.

    Returns
    -------
    DataFrame
        :data:`KEYNESS_COLUMNS`. ``attrs["summary"]`` sums the counters of all
        comparisons (plus ``comparisons``), ``attrs["skipped"]`` lists groups
        left out because they had no answers there (an explicit pair with an
        empty side is an error, except within a theme, where it is skipped).

    Raises
    ------
    AnalysisError
        A variable the data lacks, a group value it lacks, a pair comparing a
        group with itself or with no answers, an unknown theme, or a variable
        with fewer than two groups that have answers.
    """
    options = _options(prior_strength, min_respondents, max_terms, rank_by, alpha, phrase_handling)
    matrix = sp.csr_matrix(matrix)
    terms = np.asarray(terms, dtype=object)
    n_words = np.asarray(n_words)
    n_documents = matrix.shape[0]
    by = list(groups.columns) if by is None else list(by)
    pairs = [tuple(p) for p in pairs]
    needed = _needed_variables(groups, n_documents, by, pairs, wave)
    answered = np.ones(n_documents, bool) if answered is None else np.asarray(answered, dtype=bool)
    restrictions = _restrictions(answered, theme_matrix, themes, list(within_themes))
    labels = {variable: _labels(groups[variable].to_numpy()) for variable in needed}
    _check_pairs(labels, pairs)

    mats = _prepare(matrix, n_words, weights, document_frequency, weighted, doc_lengths)
    columns, below_everywhere = _frequent_columns(mats, answered, options.min_respondents)
    sub_terms, sub_words = terms[columns], n_words[columns]
    parts = phrase_parts(sub_terms, sub_words) if options.phrase_handling == "collapse" else None

    frames: list[pd.DataFrame] = []
    totals = dict.fromkeys(SUMMARY_KEYS, 0)
    skipped: list[str] = []
    n_comparisons = 0
    for theme, scope in restrictions:
        for variable in needed:
            codes, values = labels[variable]
            counts = _class_sums(mats, np.where(scope, codes, -1), len(values), columns)
            jobs = _comparison_jobs(counts, variable, values, by, wave, rest, pairs, theme, skipped,
                                    options.min_respondents)
            for g, r in jobs:
                frame, summary = _score(sub_terms, sub_words, *_sides(counts, g, r), options, parts)
                n_comparisons += 1
                for key in SUMMARY_KEYS:
                    totals[key] += summary[key]
                frames.append(_label_comparison(frame, question, variable,
                                                values[g], None if r is None else values[r], theme))
    return _assemble_table(frames, totals, n_comparisons, below_everywhere, skipped)


def _needed_variables(groups: pd.DataFrame, n_documents: int, by: list[str], pairs: list[tuple],
                      wave: str | None) -> list[str]:
    """The group variables the comparisons use, in order; each must be a column of ``groups``."""
    if len(groups) != n_documents:
        raise AnalysisError(f"groups has {len(groups)} rows but the matrix has {n_documents} documents")
    needed = list(dict.fromkeys([*by, *(p[0] for p in pairs)] + ([wave] if wave in by else [])))
    for variable in needed:
        if variable not in groups.columns:
            available = ", ".join(map(str, groups.columns)) or "none"
            raise AnalysisError(f"the data has no group variable '{variable}' (available: {available})",
                                column=str(variable))
    return needed


def _restrictions(answered: np.ndarray, theme_matrix: sp.spmatrix | None, themes: Sequence[str] | None,
                  within_themes: list[str]) -> list[tuple[str, np.ndarray]]:
    """(theme id or "", answers in scope): all answered ones, then those coded with each theme."""
    restrictions: list[tuple[str, np.ndarray]] = [("", answered)]
    if not within_themes:
        return restrictions
    if theme_matrix is None or themes is None:
        raise AnalysisError("within-theme keyness needs the theme matrix and theme ids")
    theme_matrix = sp.csc_matrix(theme_matrix)
    theme_ids = list(themes)
    for theme in within_themes:
        if theme not in theme_ids:
            raise AnalysisError(f"unknown theme '{theme}' (themes: {', '.join(theme_ids)})")
        column = theme_matrix[:, theme_ids.index(theme)]
        mentions = np.zeros(len(answered), bool)
        mentions[column.indices[column.data != 0]] = True
        restrictions.append((theme, answered & mentions))
    return restrictions


def _check_pairs(labels: dict[str, tuple[np.ndarray, np.ndarray]], pairs: list[tuple]) -> None:
    """Every explicit pair names two different groups its variable has."""
    for variable, group, reference in pairs:
        values = [str(v) for v in labels[variable][1]]
        for value in (group, reference):
            if str(value) not in values:
                raise AnalysisError(f"group variable '{variable}' has no group '{value}' "
                                    f"(groups: {', '.join(values)})", column=str(variable))
        if str(group) == str(reference):
            raise AnalysisError(f"'{group}' cannot be compared with itself; choose two different groups "
                                f"of '{variable}'", column=str(variable))


def _frequent_columns(mats: _Matrices, answered: np.ndarray, min_respondents: int) -> tuple[np.ndarray, int]:
    """Columns of terms in at least ``min_respondents`` compared answers, and how many fell short.

    Terms too rare among all compared answers can pass no comparison: they are dropped once.
    """
    in_scope = np.asarray(np.asarray(answered, dtype=np.float64) @ mats.binary).ravel()
    columns = np.flatnonzero(in_scope >= min_respondents)
    below_everywhere = int(((in_scope > 0) & (in_scope < min_respondents)).sum())
    return columns, below_everywhere


def _comparison_jobs(counts: _Counts, variable: str, values: np.ndarray, by: list[str], wave: str | None,
                     rest: bool, pairs: list[tuple], theme: str, skipped: list[str], minimum: int = 1
                     ) -> list[tuple[int, int | None]]:
    """(group, reference or None for the rest) class pairs to score for one variable and scope.

    Appends to ``skipped`` what is left out for want of answers; raises where that is an error.
    """
    where = f" within theme '{theme}'" if theme else ""
    jobs: list[tuple[int, int | None]] = []
    with_answers, too_small = _group_sizes(counts.documents, minimum)
    if variable in by and (rest or variable == wave):
        skipped.extend(f"{variable}={values[i]}{where}: {int(counts.documents[i])} answer(s), fewer than the "
                       f"minimum of {minimum}" for i in too_small)
        if len(with_answers) < 2:
            if theme:
                skipped.append(f"'{variable}'{where}: fewer than two groups with answers")
                return []
            raise AnalysisError(f"group variable '{variable}' has {len(with_answers)} group(s) with at least "
                                f"{minimum} answers; keyness needs at least two", column=str(variable))
        skipped.extend(f"{variable}={values[i]}{where}: no answers"
                       for i in np.flatnonzero(counts.documents == 0))
        if rest:
            jobs.extend((int(i), None) for i in with_answers)
        if variable == wave:
            jobs.extend((int(later), int(earlier))
                        for earlier, later in zip(with_answers[:-1], with_answers[1:], strict=True))
    value_index = {str(v): i for i, v in enumerate(values)}
    for pair_variable, group, reference in pairs:
        if pair_variable != variable:
            continue
        g, r = value_index[str(group)], value_index[str(reference)]
        empty = [value for value, index in ((group, g), (reference, r)) if counts.documents[index] == 0]
        if empty and theme:
            skipped.append(f"{variable}={empty[0]} vs {reference if empty[0] == group else group}"
                           f"{where}: no answers")
            continue
        if empty:
            raise AnalysisError(f"group '{empty[0]}' of '{variable}' has no answers; nothing to "
                                "compare", column=str(variable))
        jobs.append((g, r))
    return list(dict.fromkeys(jobs))


def _label_comparison(frame: pd.DataFrame, question: str | None, variable: str, group: Any,
                      reference: Any, theme: str) -> pd.DataFrame:
    """Put the comparison's identity (question, variable, group, reference, theme) on its rows."""
    frame.insert(0, "question", question)
    frame.insert(1, "group_var", str(variable))
    frame.insert(2, "group", str(group))
    frame.insert(3, "reference", REST if reference is None else str(reference))
    frame["within_theme"] = theme
    return frame


def _assemble_table(frames: list[pd.DataFrame], totals: dict[str, int], n_comparisons: int,
                    below_everywhere: int, skipped: list[str]) -> pd.DataFrame:
    """One table of every comparison, with the summary counters and skip notes in ``attrs``."""
    table = (pd.concat(frames, ignore_index=True) if frames
             else pd.DataFrame({c: pd.Series(dtype=object) for c in KEYNESS_COLUMNS}))[KEYNESS_COLUMNS]
    totals["comparisons"] = n_comparisons
    totals["below_min_respondents_everywhere"] = below_everywhere
    table.attrs["summary"] = totals
    table.attrs["skipped"] = skipped
    return table
