"""Lexicon repair from hand codes: which terms to drop, fence in, or add, and what each is worth.

On a hand-coded sample we know, for every theme, which answers the lexicon
codes wrongly and which it misses. This module turns that into a reviewable
draft:

* **per term**: its hits on the hand-coded answers, its precision (share of
  those answers the people coded with the theme), and the hand-coded answers
  it alone catches (no other term of the theme fired);
* **candidate removals**: terms with at least ``min_hits`` hits and precision
  below ``max_precision``; with, where one exists, an **exclusion phrase** (a
  2-3 word phrase holding the term, found in two or more of its false hits
  and in none of its true ones);
* **candidate additions**: words and two-word phrases found in at least
  ``min_missed`` answers the theme misses, with precision at least
  ``min_precision`` among the coded answers holding them; a wildcard form
  (``overcharg*``) when several inflections of one stem appear. Generic
  evaluative words (:data:`GENERIC_WORDS`: "good", "great", "nice"...) are only
  proposed when the hand codes show them specific to the theme (precision at
  least ``generic_precision`` over at least ``generic_min_answers`` answers).

Each candidate carries the theme's F1 before, the apparent change (the edit
applied to the whole sample) and the **cross-validated** change: in each of
``folds`` folds the rules above are re-run on the other folds, and the edit is
applied to the held-out fold only when it would have been proposed there; the
pooled held-out codes give the F1 change. A term picked because it fits the
sample gains nothing here unless it also predicts answers it was not picked on.
Effects are computed on the token stream, not by re-coding with an edited
lexicon: an added term counts wherever its words appear (negation and
exclusions not applied), an exclusion removes the term's hits in answers
holding the phrase.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..text.ngrams import document_term_matrix
from ..text.tokens import snowball_stemmer, tokenize_corpus
from .coder import ThemeCoder
from .lexicon import Lexicon

#: Evaluative words that say how much, not about what; proposed only when the hand codes show them specific.
GENERIC_WORDS = frozenset(
    "good great nice lovely amazing awesome excellent fantastic wonderful brilliant perfect beautiful fine ok "
    "okay best better worst worse bad poor terrible awful horrible dreadful disappointing disappointed "
    "love loved like liked enjoyed enjoy hate hated really very so much lot lots little bit quite pretty "
    "super top ".split())
#: Columns of the term table and of the candidates table.
TERM_COLUMNS = ["theme", "term", "hits", "true_hits", "precision", "alone_catches"]
CANDIDATE_COLUMNS = ["theme", "action", "term", "wildcard", "answers", "precision", "missed_caught",
                     "false_hits_removed", "true_hits_lost", "f1_before", "f1_change_apparent", "f1_change_cv"]


@dataclass(frozen=True, eq=False)
class RepairReport:
    """What :func:`repair_lexicon` found: ``terms`` (:data:`TERM_COLUMNS`), ``candidates``
    (:data:`CANDIDATE_COLUMNS`, best cross-validated change first) and ``notes``."""

    terms: pd.DataFrame
    candidates: pd.DataFrame
    notes: list


def _f1(hand: np.ndarray, codes: np.ndarray) -> float:
    tp = float((hand & codes).sum())
    wrong = float((hand != codes).sum())
    return 2 * tp / (2 * tp + wrong) if tp + wrong else float("nan")


def _term_table(evidence: pd.DataFrame, hand: np.ndarray, themes: list[str]) -> pd.DataFrame:
    fired = evidence[["document", "theme", "term"]].drop_duplicates()
    column = pd.Index(themes).get_indexer(fired["theme"])
    fired = fired.assign(truth=hand[fired["document"].to_numpy(), column])
    fired = fired[np.isfinite(fired["truth"])]
    per_answer = fired.groupby(["document", "theme"])["term"].transform("size")
    fired = fired.assign(alone=(per_answer == 1) & (fired["truth"] == 1))
    table = (fired.groupby(["theme", "term"], sort=False)
             .agg(hits=("truth", "size"), true_hits=("truth", "sum"), alone_catches=("alone", "sum")).reset_index())
    table["precision"] = table["true_hits"] / table["hits"]
    table["true_hits"] = table["true_hits"].astype(int)
    table["alone_catches"] = table["alone_catches"].astype(int)
    return table[TERM_COLUMNS]


@dataclass
class _Candidate:
    theme: int
    action: str
    term: str
    fires: np.ndarray  # (n,) bool: answers where the term (or phrase) is present / fired
    effect: np.ndarray  # (n,) bool: the theme's codes with the edit applied
    generic: bool
    wildcard: str = ""


def repair_lexicon(texts, hand: np.ndarray, lexicon: Lexicon, *, folds: int = 5, seed: int = 0, min_hits: int = 3,
                   max_precision: float = 0.5, min_missed: int = 2, min_precision: float = 0.6,
                   generic_precision: float = 0.9, generic_min_answers: int = 5) -> RepairReport:
    """Propose lexicon edits from hand codes (see the module docstring).

    Parameters
    ----------
    texts : sequence of str (None for blank), length n
    hand : array of shape (n, n_themes)
        Hand codes in lexicon theme order: 1, 0 or NaN (not coded), parents rolled up.
    lexicon : Lexicon
    folds, seed : cross-validation of the F1 changes (seeded fold split).
    """
    texts = [t if isinstance(t, str) else None for t in texts]
    hand = np.asarray(hand, dtype=float)
    themes = list(lexicon.ids)
    stream = tokenize_corpus(texts, offsets=True)
    result = ThemeCoder(lexicon).fit(stream).code(stream, texts=texts)
    base = result.matrix.toarray().astype(bool)
    terms = _term_table(result.evidence, hand, themes)
    rules = dict(min_hits=min_hits, max_precision=max_precision, min_missed=min_missed, min_precision=min_precision,
                 generic_precision=generic_precision, generic_min_answers=generic_min_answers)
    candidates = _removals(result, base, hand, themes, lexicon, terms, stream, rules)
    candidates += _additions(stream, base, hand, themes, lexicon, rules)
    rows = []
    fold_of = np.random.default_rng(seed).permutation(len(texts)) % max(folds, 2)
    for candidate in candidates:
        t = candidate.theme
        coded = np.isfinite(hand[:, t])
        truth = hand[:, t] == 1
        before = _f1(truth[coded], base[coded, t])
        pooled = base[:, t].copy()
        for fold in range(max(folds, 2)):
            training = coded & (fold_of != fold)
            if _passes(candidate, truth, base[:, t], training, rules):
                held_out = fold_of == fold
                pooled[held_out] = candidate.effect[held_out]
        stats = _stats(candidate, truth, base[:, t], coded)
        rows.append({"theme": themes[t], "action": candidate.action, "term": candidate.term,
                     "wildcard": candidate.wildcard, **stats, "f1_before": before,
                     "f1_change_apparent": _f1(truth[coded], candidate.effect[coded]) - before,
                     "f1_change_cv": _f1(truth[coded], pooled[coded]) - before})
    table = pd.DataFrame(rows, columns=CANDIDATE_COLUMNS)
    table = table.sort_values(["f1_change_cv", "theme", "action", "term"], ascending=[False, True, True, True],
                              kind="stable").reset_index(drop=True)
    notes = [f"{len(table)} candidate edits over {int(np.isfinite(hand).any(axis=1).sum())} hand-coded answers; "
             f"{int((table['f1_change_cv'] > 0).sum())} raise F1 under cross-validation"]
    return RepairReport(terms=terms, candidates=table, notes=notes)


def _stats(candidate: _Candidate, truth: np.ndarray, base: np.ndarray, rows: np.ndarray) -> dict:
    fires = candidate.fires & rows
    answers = int(fires.sum())
    return {"answers": answers, "precision": float((fires & truth).sum() / answers) if answers else np.nan,
            "missed_caught": int((candidate.effect & ~base & truth & rows).sum()),
            "false_hits_removed": int((~candidate.effect & base & ~truth & rows).sum()),
            "true_hits_lost": int((~candidate.effect & base & truth & rows).sum())}


def _passes(candidate: _Candidate, truth: np.ndarray, base: np.ndarray, rows: np.ndarray, rules: dict) -> bool:
    """Would the rules propose ``candidate`` from ``rows`` alone?"""
    stats = _stats(candidate, truth, base, rows)
    precision = stats["precision"]
    if not np.isfinite(precision):
        return False
    if candidate.action == "add":
        if candidate.generic and (precision < rules["generic_precision"]
                                  or stats["answers"] < rules["generic_min_answers"]):
            return False
        return stats["missed_caught"] >= rules["min_missed"] and precision >= rules["min_precision"]
    if candidate.action == "remove":
        return stats["answers"] >= rules["min_hits"] and precision < rules["max_precision"]
    return stats["false_hits_removed"] >= 2 and stats["true_hits_lost"] == 0  # exclusion


def _removals(result, base, hand, themes, lexicon, terms, stream, rules) -> list[_Candidate]:
    evidence = result.evidence[["document", "theme", "term", "start", "end"]]
    n = len(base)
    direct = result.direct.toarray() > 0
    rollup = lexicon.rollup_matrix().toarray() > 0
    out = []
    weak = terms[(terms["hits"] >= rules["min_hits"]) & (terms["precision"] < rules["max_precision"])]
    phrases, phrase_terms, _ = document_term_matrix(stream, (2, 3), binary=True)
    phrases = phrases.tocsc()
    for row in weak.itertuples():
        t = themes.index(row.theme)
        mine = evidence[(evidence["theme"] == row.theme) & (evidence["term"] == row.term)]
        fires = np.zeros(n, dtype=bool)
        fires[mine["document"].to_numpy()] = True
        others = evidence[(evidence["theme"] == row.theme) & (evidence["term"] != row.term)]
        other_fires = np.zeros(n, dtype=bool)
        other_fires[others["document"].to_numpy()] = True
        # the theme stays coded through its other terms or through a child theme's own terms
        children = direct[:, [i for i in range(len(themes)) if rollup[i, t] and i != t]].any(axis=1)
        kept = other_fires | children
        out.append(_Candidate(t, "remove", row.term, fires, base[:, t] & (~fires | kept), generic=False))
        truth = hand[:, t] == 1
        false_hits, true_hits = fires & (hand[:, t] == 0), fires & truth
        words = row.term.lower()
        holding = [j for j, p in enumerate(phrase_terms) if f" {words} " in f" {p} " and p != words]
        best = None
        for j in holding:
            present = np.zeros(n, dtype=bool)
            present[phrases[:, j].indices] = True
            fenced = (present & false_hits).sum()
            if fenced >= 2 and not (present & true_hits).any() and (best is None or fenced > best[1].sum()):
                best = (phrase_terms[j], present & fires)
        if best is not None:
            out.append(_Candidate(t, "exclude", best[0], best[1], base[:, t] & (~best[1] | kept), generic=False,
                                  wildcard=f"(for '{row.term}')"))
    return out


def _additions(stream, base, hand, themes, lexicon, rules) -> list[_Candidate]:
    matrix, terms, n_words = document_term_matrix(stream, (1, 2), binary=True)
    matrix = matrix.tocsc().astype(bool)
    stem = snowball_stemmer(lexicon.language)
    out = []
    for t, theme in enumerate(themes):
        coded = np.isfinite(hand[:, t])
        truth = (hand[:, t] == 1) & coded
        missed = truth & ~base[:, t]
        if missed.sum() < rules["min_missed"]:
            continue
        in_missed = np.asarray(matrix[missed].sum(axis=0)).ravel()
        in_coded = np.asarray(matrix[coded].sum(axis=0)).ravel()
        in_true = np.asarray(matrix[truth].sum(axis=0)).ravel()
        with np.errstate(divide="ignore", invalid="ignore"):
            precision = in_true / in_coded
        written = {term.text.lower() for term in lexicon.theme(theme).terms}
        picked = np.flatnonzero((in_missed >= rules["min_missed"]) & (precision >= rules["min_precision"]))
        by_stem: dict[str, list[int]] = {}
        for j in picked:
            if terms[j] in written:
                continue
            generic = all(word in GENERIC_WORDS for word in terms[j].split())
            fires = sp.csc_matrix(matrix[:, j]).toarray().ravel()
            out.append(_Candidate(t, "add", str(terms[j]), fires, base[:, t] | fires, generic=generic))
            if n_words[j] == 1 and stem is not None:
                by_stem.setdefault(stem(terms[j]), []).append(len(out) - 1)
        for members in by_stem.values():
            words = sorted(out[i].term for i in members)
            prefix = _common_prefix(words)
            if len(words) > 1 and len(prefix) >= 4:
                for i in members:
                    out[i].wildcard = prefix + "*"
    return out


def _common_prefix(words: list[str]) -> str:
    first, last = min(words), max(words)
    size = 0
    while size < min(len(first), len(last)) and first[size] == last[size]:
        size += 1
    return first[:size]


def _yaml_text(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def render_repair_yaml(report: RepairReport, lexicon: Lexicon, *, source: str = "hand codes") -> str:
    """The candidates as a commented draft in the lexicon's own format (never applied by textkit).

    Edits that raise F1 under cross-validation are written as list entries ready to copy;
    the others stay comments with their figures.
    """
    lines = [f"# Lexicon repair draft for '{lexicon.name}' version '{lexicon.version}' from {source}.",
             "# Nothing here is applied. Read each line, then copy what you accept into the lexicon;",
             "# F1 changes are on the hand-coded sample ('cv': cross-validated, what to expect on new answers).",
             "themes:"]
    for theme, rows in report.candidates.groupby("theme", sort=False):
        lines += [f"  - id: {theme}", f"    # F1 now {rows['f1_before'].iloc[0]:.2f} on the hand codes"]
        for action, key in (("add", "terms"), ("exclude", "exclude")):
            chosen = rows[rows["action"] == action]
            if not len(chosen):
                continue
            lines.append(f"    {key}:")
            for row in chosen.itertuples():
                figures = (f"{row.answers} answers, precision {row.precision:.2f}, F1 {row.f1_change_cv:+.3f} cv "
                           f"({row.f1_change_apparent:+.3f} apparent)")
                entry = _yaml_text(row.term) + (f"  # or {row.wildcard}" if row.wildcard.endswith("*") else "")
                if row.f1_change_cv > 0:
                    lines.append(f"      - {entry}  # {figures}")
                else:
                    lines.append(f"      # - {row.term}  ({figures}: not recommended)")
        for row in rows[rows["action"] == "remove"].itertuples():
            verdict = "consider removing" if row.f1_change_cv > 0 else "keep (removing does not help)"
            lines.append(f"    # remove {_yaml_text(row.term)}? {verdict}: {row.answers} hits, precision "
                         f"{row.precision:.2f}, F1 {row.f1_change_cv:+.3f} cv")
    return "\n".join(lines) + "\n"
