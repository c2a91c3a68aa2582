"""Representative, diverse and safe quotes for each theme.

For each question x theme (optionally within each group and wave) the answers
coded with the theme are candidates. A candidate is

* **typical** when its TF-IDF vector (the project's document-term matrix of
  :mod:`textkit.text.ngrams` weighted by scikit-learn's ``TfidfTransformer``, fitted
  on all answers of the question) is close (cosine) to the centroid of the
  theme's answers, or, with ``typicality='evidence'``, when the theme's evidence
  is dense in it (matches per word);
* picked by **maximal marginal relevance** (Carbonell & Goldstein 1998): next is
  the answer maximising ``(1 - diversity) * typicality - diversity * max similarity
  to those already picked``; answers at or above ``duplicate_above`` cosine
  similarity to a pick are never picked (near-duplicates);
* **inside the length window** (``min_words``..``max_words`` words, punctuation
  not counted);
* **made safe**: :func:`textkit.text.redact` first (contact details, links, long
  digit runs, and whatever else it covers), then the quote rules of this module
  for personal names -- a capitalised name after a greeting or "named"/"called",
  a capitalised name next to a job title ("our guide Mirela", "Tomasz the
  driver"), and capitalised words that the survey's answers never use in lower
  case and that few answers use at all -- and optionally a profanity mask.

Ties are broken by a permutation drawn from ``seed``: the same seed gives the
same picks. Redaction is a safety net, not a guarantee (see the README).
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..errors import AnalysisError
from ..text.ngrams import document_term_matrix
from ..text.redact import redact
from ..text.tokens import TokenStream, default_stop_words, is_break_token

ALL = "(all)"
NAME_LABEL = "[name]"
QUOTE_COLUMNS = ["question", "theme", "theme_label", "group_var", "group", "wave", "rank", "response_id", "quote",
                 "n_words", "typicality", "evidence", "evidence_start", "evidence_end", "redactions"]

_NAME = r"[A-Z][a-zà-ÿ'’-]+(?:\s+[A-Z][a-zà-ÿ'’-]+)?"
_GREETING = re.compile(r"(?i:\b(?:hi|hello|hey|dear|thanks(?:\s+to)?|thank\s+you|cheers|named|called|"
                       r"name\s+is|name\s+was|name's))[,:]?\s+(" + _NAME + ")")
JOB_TITLES = ("guide", "tour guide", "driver", "bus driver", "waiter", "waitress", "receptionist", "manager",
              "ranger", "host", "hostess", "captain", "skipper", "chef", "bartender", "barman", "attendant",
              "steward", "stewardess", "warden", "instructor", "porter", "concierge", "cashier", "lifeguard",
              "staff member", "guard", "server", "housekeeper", "cleaner", "owner", "lady", "man", "guy")
_TITLES = "|".join(sorted((t.replace(" ", r"\s+") for t in JOB_TITLES), key=len, reverse=True))
_TITLE_THEN_NAME = re.compile(r"(?i:\b(?:" + _TITLES + r"))\b,?\s+(" + _NAME + ")")
_NAME_THEN_TITLE = re.compile(r"\b(" + _NAME + r"),?\s+\(?(?i:(?:was\s+)?(?:the|our|a|my)\s+(?:" + _TITLES + r"))\b")
#: A short built-in list; pass ``profanity_words`` for your own.
PROFANITY = ("fuck", "fucking", "fucked", "shit", "shite", "shitty", "bullshit", "crap", "crappy", "bastard",
             "bastards", "bollocks", "arse", "arsehole", "ass", "asshole", "bitch", "damn", "bloody", "piss",
             "pissed", "wanker", "twat", "cock", "dick", "prick")


def _replace_group(pattern: re.Pattern, text: str, keep: frozenset[str]) -> tuple[str, int]:
    count = 0

    def swap(match: re.Match) -> str:
        nonlocal count
        name = match.group(1)
        if name.split()[0].lower() in keep:
            return match.group(0)
        count += 1
        start, end = match.span(1)
        whole = match.group(0)
        offset = match.start(0)
        return whole[:start - offset] + NAME_LABEL + whole[end - offset:]

    return pattern.sub(swap, text), count


def hide_names(text: str, extra_names: Iterable[str] = ()) -> tuple[str, int]:
    """Apply the quote rules for personal names to already redacted ``text``.

    Returns the text and the number of names hidden. ``extra_names`` are words
    to hide wherever they occur (whole words, as written).
    """
    keep = default_stop_words() | {"i"}
    count = 0
    for pattern in (_GREETING, _TITLE_THEN_NAME, _NAME_THEN_TITLE):
        text, found = _replace_group(pattern, text, keep)
        count += found
    words = sorted({w for w in extra_names if w}, key=len, reverse=True)
    if words:
        text, found = re.subn(r"(?<![\w\[])(?:" + "|".join(map(re.escape, words)) + r")(?![\w\]])", NAME_LABEL, text)
        count += found
    return text, count


def mask_profanity(text: str, words: Iterable[str] = PROFANITY) -> str:
    """Replace each listed word (whole word, any case) by its first letter and asterisks."""
    listed = sorted({w.lower() for w in words if w}, key=len, reverse=True)
    if not listed:
        return text
    pattern = re.compile(r"\b(?:" + "|".join(map(re.escape, listed)) + r")\b", re.IGNORECASE)
    return pattern.sub(lambda m: m.group(0)[0] + "*" * (len(m.group(0)) - 1), text)


def safe_quote(text: str, *, extra_names: Iterable[str] = (), profanity: bool = False,
               profanity_words: Iterable[str] = PROFANITY) -> tuple[str, int]:
    """``redact`` then the quote name rules, then (optionally) the profanity mask: (text, redactions)."""
    redacted = redact(text)
    placeholders = len(re.findall(r"\[[a-z]+\]", redacted)) - len(re.findall(r"\[[a-z]+\]", text))
    redacted, names = hide_names(redacted, extra_names)
    if profanity:
        redacted = mask_profanity(redacted, profanity_words)
    return redacted, max(placeholders, 0) + names


@dataclass(frozen=True)
class NameEvidence:
    """Per vocabulary entry: never written in lower case, and how many answers capitalise it."""

    never_lower: np.ndarray
    capital_answers: np.ndarray
    capital_occurrence: np.ndarray


def name_evidence(texts: Sequence[str | None], stream: TokenStream) -> NameEvidence:
    """Case facts of every token of ``stream`` read from the original ``texts`` (vectorised).

    ``capital_occurrence`` (n_tokens,) marks tokens written Capitalised (upper
    then lower case letter, two letters or more).
    """
    if stream.starts is None:
        raise AnalysisError("the token stream has no character offsets; tokenise with offsets=True")
    strings = [t if isinstance(t, str) else "" for t in texts]
    lengths = np.fromiter((len(t) for t in strings), dtype=np.int64, count=len(strings))
    characters = np.frombuffer("".join(strings).encode("utf-32-le"), dtype=np.uint32)
    document = stream.document_index()
    first = np.concatenate([[0], np.cumsum(lengths)[:-1]])[document] + stream.starts
    long_enough = (stream.ends - stream.starts) >= 2
    first_char = characters[first] if len(characters) else np.zeros(0, np.uint32)
    second_char = characters[np.minimum(first + 1, max(len(characters) - 1, 0))] if len(characters) else first_char
    codepoints = np.unique(np.concatenate([first_char, second_char]))
    upper = np.isin(first_char, [c for c in codepoints if chr(c).isupper()])
    lower_first = np.isin(first_char, [c for c in codepoints if chr(c).islower()])
    lower_second = np.isin(second_char, [c for c in codepoints if chr(c).islower()])
    capitalised = upper & lower_second & long_enough
    n_vocabulary = len(stream.vocabulary)
    never_lower = np.bincount(stream.codes[lower_first], minlength=n_vocabulary) == 0
    pairs = np.unique(stream.codes[capitalised].astype(np.int64) * max(stream.n_documents, 1) + document[capitalised])
    capital_answers = np.bincount(pairs // max(stream.n_documents, 1), minlength=n_vocabulary)
    return NameEvidence(never_lower, capital_answers, capitalised)


def _rare_capitalised(text: str, stream: TokenStream, evidence: NameEvidence, document: int,
                      max_answers: int) -> list[str]:
    low, high = stream.doc_offsets[document], stream.doc_offsets[document + 1]
    codes = stream.codes[low:high]
    hit = evidence.capital_occurrence[low:high] & evidence.never_lower[codes] \
        & (evidence.capital_answers[codes] <= max_answers)
    return [text[s:e] for s, e in zip(stream.starts[low:high][hit], stream.ends[low:high][hit], strict=True)]


def maximal_marginal_relevance(vectors: Any, relevance: np.ndarray, k: int, *, diversity: float = 0.3,
                               duplicate_above: float = 0.8, seed: int = 0) -> list[int]:
    """Pick up to ``k`` rows by maximal marginal relevance (Carbonell & Goldstein 1998).

    Parameters
    ----------
    vectors : sparse matrix of shape (n_candidates, n_terms), rows L2-normalised
    relevance : ndarray of shape (n_candidates,)
    diversity : float in [0, 1], default 0.3
        Weight of the redundancy penalty (0: typicality only).
    duplicate_above : float, default 0.8
        Candidates with cosine similarity at or above this to a pick are skipped.

    Returns
    -------
    list of int
        Row indices in pick order. Ties go to the earlier row of a permutation drawn from ``seed``.
    """
    n = len(relevance)
    if n == 0 or k <= 0:
        return []
    order = np.random.default_rng(seed).permutation(n)
    similarity = np.asarray((vectors @ vectors.T).todense()) if sp.issparse(vectors) else vectors @ vectors.T
    redundancy = np.full(n, -np.inf)
    available = np.ones(n, bool)
    picks: list[int] = []
    while len(picks) < k and available.any():
        penalty = np.where(np.isfinite(redundancy), redundancy, 0.0)
        score = np.where(available, (1 - diversity) * relevance - diversity * penalty, -np.inf)
        best = int(order[np.argmax(score[order])])
        picks.append(best)
        available[best] = False
        redundancy = np.maximum(redundancy, similarity[:, best])
        available &= redundancy < duplicate_above
    return picks


def _tfidf_by_question(stream: TokenStream, questions: np.ndarray) -> sp.csr_matrix:
    from sklearn.feature_extraction.text import TfidfTransformer

    counts, _, _ = document_term_matrix(stream, ngram_range=(1, 1), binary=False)
    blocks = []
    index = []
    for question in pd.unique(questions):
        rows = np.flatnonzero(questions == question)
        blocks.append(TfidfTransformer(sublinear_tf=True).fit_transform(counts[rows]))
        index.append(rows)
    stacked = sp.vstack(blocks).tocsr()
    inverse = np.empty(len(questions), dtype=np.int64)
    inverse[np.concatenate(index)] = np.arange(len(questions))
    return stacked[inverse]


def _word_counts(stream: TokenStream) -> np.ndarray:
    is_break = stream.vocabulary_flags(is_break_token)
    words = ~is_break[stream.codes]
    return np.bincount(stream.document_index()[words], minlength=stream.n_documents)


def _evidence_index(evidence: pd.DataFrame, theme: str) -> pd.DataFrame:
    mine = evidence[evidence["theme"] == theme]
    return mine.groupby(["response_id", "question"], sort=False).agg(
        evidence=("matched_text", lambda s: "; ".join(dict.fromkeys(map(str, s)))),
        evidence_start=("start", "min"), evidence_end=("end", "max"), hits=("term", "size"))


def choose_quotes(texts: Sequence[str | None], stream: TokenStream, coded: pd.DataFrame, evidence: pd.DataFrame,
                  themes: Sequence[str], *, group_var: str | None = None, wave_var: str | None = None,
                  split_waves: bool = False, per_theme: int = 3, min_words: int = 6, max_words: int = 60,
                  diversity: float = 0.3, duplicate_above: float = 0.8, typicality: str = "centroid",
                  seed: int = 0, profanity: bool = False, max_name_answers: int = 3,
                  labels: Mapping[str, str] | None = None) -> pd.DataFrame:
    """Pick typical, diverse, safe quotes for every question x theme (x group x wave).

    Parameters
    ----------
    texts : sequence of str or None, length n_rows
        Original answer texts aligned with ``coded`` rows (``CodedSurvey.texts``).
    stream : TokenStream
        Their tokens, with character offsets (``CodedSurvey.stream``).
    coded : DataFrame
        ``response_id, question, answered`` and one 0/1 column per theme.
    evidence : DataFrame
        ``response_id, question, theme, term, start, end, matched_text``.
    group_var : str, optional
        Pick within each group of this column.
    wave_var : str, optional
        The wave column: every quote carries its wave; with ``split_waves`` picks are made within each wave.
    per_theme : int, default 3
    min_words, max_words : int, default 6 and 60
        Length window in words (punctuation not counted).
    diversity : float, default 0.3
        MMR weight of redundancy; ``duplicate_above`` skips near-duplicates outright.
    typicality : {'centroid', 'evidence'}
    seed : int
    profanity : bool, default False
        Mask the words of :data:`PROFANITY`.
    max_name_answers : int, default 3
        A capitalised word never written in lower case is hidden as a name when at most this many answers use it.

    Returns
    -------
    DataFrame
        ``QUOTE_COLUMNS``, one row per quote, in question, theme, group, wave, rank order.
    """
    if typicality not in ("centroid", "evidence"):
        raise AnalysisError(f"unknown typicality '{typicality}'; choose centroid or evidence")
    if not 0 <= diversity <= 1:
        raise AnalysisError(f"diversity must be between 0 and 1, got {diversity}")
    if min_words > max_words:
        raise AnalysisError(f"the length window is empty: min_words {min_words} > max_words {max_words}")
    for column in [c for c in (group_var, wave_var) if c]:
        if column not in coded.columns:
            raise AnalysisError(f"no column '{column}' in the coded table; valid: {', '.join(map(str, coded.columns))}")
    questions = coded["question"].astype(str).to_numpy()
    tfidf = _tfidf_by_question(stream, questions)
    n_words = _word_counts(stream)
    facts = name_evidence(texts, stream)
    answered = coded["answered"].to_numpy(dtype=float) > 0 if "answered" in coded.columns else np.ones(len(coded), bool)
    in_window = (n_words >= min_words) & (n_words <= max_words)
    groups = coded[group_var].astype(str).to_numpy() if group_var else np.full(len(coded), ALL, dtype=object)
    waves = coded[wave_var].astype(str).to_numpy() if wave_var else np.full(len(coded), ALL, dtype=object)
    cell_waves = waves if split_waves and wave_var else np.full(len(coded), ALL, dtype=object)
    ids = coded["response_id"].astype(str).to_numpy()
    rows_out = []
    for theme in themes:
        has_theme = coded[theme].to_numpy(dtype=float) > 0
        spans = _evidence_index(evidence, theme)
        cells = pd.DataFrame({"q": questions, "g": groups, "w": cell_waves})[has_theme & answered]
        for (question, group, _wave), members in cells.groupby(["q", "g", "w"], sort=True).groups.items():
            members = np.asarray(members)
            picks = _pick_cell(members, tfidf, spans, ids, questions, n_words, in_window, typicality, per_theme,
                               diversity, duplicate_above, seed)
            for rank, (row, score) in enumerate(picks, start=1):
                rows_out.append(_quote_row(row, rank, score, theme, question, group, group_var, waves, texts, stream,
                                           facts, spans, ids, n_words, profanity, max_name_answers, labels))
    return pd.DataFrame(rows_out, columns=QUOTE_COLUMNS)


def _pick_cell(members: np.ndarray, tfidf: sp.csr_matrix, spans: pd.DataFrame, ids: np.ndarray,
               questions: np.ndarray, n_words: np.ndarray, in_window: np.ndarray, typicality: str, k: int,
               diversity: float, duplicate_above: float, seed: int) -> list[tuple[int, float]]:
    vectors = tfidf[members]
    if typicality == "centroid":
        centre = np.asarray(vectors.mean(axis=0)).ravel()
        norm = np.linalg.norm(centre)
        relevance = vectors @ (centre / norm) if norm > 0 else np.zeros(len(members))
    else:
        keys = pd.MultiIndex.from_arrays([ids[members], questions[members]])
        hits = spans["hits"].reindex(keys).fillna(0).to_numpy(dtype=float)
        relevance = hits / np.maximum(n_words[members], 1)
        relevance = relevance / relevance.max() if relevance.max() > 0 else relevance
    eligible = in_window[members]
    chosen = maximal_marginal_relevance(vectors[eligible], np.asarray(relevance)[eligible], k, diversity=diversity,
                                        duplicate_above=duplicate_above, seed=seed)
    rows = members[eligible]
    scores = np.asarray(relevance)[eligible]
    return [(int(rows[i]), float(scores[i])) for i in chosen]


def _quote_row(row: int, rank: int, score: float, theme: str, question: str, group: str, group_var: str | None,
               waves: np.ndarray, texts: Sequence[str | None], stream: TokenStream, facts: NameEvidence,
               spans: pd.DataFrame, ids: np.ndarray, n_words: np.ndarray, profanity: bool, max_name_answers: int,
               labels: Mapping[str, str] | None) -> list:
    text = texts[row] or ""
    names = _rare_capitalised(text, stream, facts, row, max_name_answers)
    quote, redactions = safe_quote(text, extra_names=names, profanity=profanity)
    key = (ids[row], question)
    span = spans.loc[key] if key in spans.index else None
    evidence_text = safe_quote(str(span["evidence"]), extra_names=names)[0] if span is not None else ""
    return [question, theme, (labels or {}).get(theme, theme), group_var or ALL, group, waves[row], rank, ids[row],
            quote, int(n_words[row]), round(score, 6), evidence_text,
            int(span["evidence_start"]) if span is not None else -1,
            int(span["evidence_end"]) if span is not None else -1, redactions]


def quotes_markdown(quotes: pd.DataFrame, *, title: str = "Quotes by theme") -> str:
    """quotes.md: a caution, then per question and theme the quotes with their evidence in bold."""
    lines = [f"# {title}", "",
             "> Verbatim answers can identify the people who wrote them. Contact details and some names were "
             "redacted automatically; read every quote before you publish it.", ""]
    for (question, _theme), part in quotes.groupby(["question", "theme"], sort=False):
        label = part["theme_label"].iloc[0]
        lines += [f"## {question} · {label}", ""]
        for row in part.itertuples(index=False):
            quote = _bold_evidence(str(row.quote), str(row.evidence))
            where = [f"response {row.response_id}"]
            if row.group_var != ALL:
                where.append(f"{row.group_var}: {row.group}")
            if row.wave != ALL:
                where.append(f"wave {row.wave}")
            if row.evidence:
                where.append(f"evidence: “{row.evidence}”")
            lines += [f"> {quote}", ">", f"> — {' · '.join(where)}", ""]
    return "\n".join(lines).rstrip() + "\n"


def _bold_evidence(quote: str, evidence: str) -> str:
    quote = quote.replace("*", "\\*").replace("\n", " ")
    for piece in sorted({p.strip() for p in evidence.split(";") if p.strip()}, key=len, reverse=True):
        quote = re.sub(r"(?<![\w*])(" + re.escape(piece) + r")(?![\w*])", r"**\1**", quote, count=1,
                       flags=re.IGNORECASE)
    return quote
