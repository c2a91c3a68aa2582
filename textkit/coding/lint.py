"""Lexicon lint: shared, redundant, vetoed and unused terms, themes with no hits."""

from __future__ import annotations

import bisect
from collections.abc import Mapping
from functools import lru_cache

import pandas as pd

from ..text.inflect import fold, key_function
from ..text.tokens import is_negation_cue
from .lexicon import INFLECT_STEM, LINT_COLUMNS, LINT_KINDS, Lexicon, Term


class _Keys:
    """How lint keys a word, the way the coder matches it (folded; lemma or stem when inflecting)."""

    def __init__(self, lexicon: Lexicon) -> None:
        self.keep_accents = lexicon.keep_accents
        self.functions = {kind: lru_cache(maxsize=None)(key_function(mode, lexicon.language,
                                                                     lexicon.keep_accents))
                          for kind, mode in (("lemma", True), ("stem", INFLECT_STEM))}

    def of(self, kind: str, word: str) -> str:
        """The (first) key of ``word`` under ``kind`` ("lemma" or "stem")."""
        return self.functions[kind](word)[0]

    def words(self, term: Term) -> tuple[tuple[str, str], ...]:
        """How each word matches: ("prefix", p), ("lemma", k), ("stem", k) or ("exact", w)."""
        keys = []
        for word in term.words:
            if word.endswith("*"):
                keys.append(("prefix", fold(word[:-1], self.keep_accents)))
            elif term.inflect:
                kind = "stem" if term.inflect == INFLECT_STEM else "lemma"
                keys.append((kind, self.of(kind, word)))
            else:
                keys.append(("exact", fold(word, self.keep_accents)))
        return tuple(keys)


def _covers(a: tuple[tuple[str, str], ...], b: tuple[tuple[str, str], ...], b_words, keys: _Keys) -> bool:
    """Does every text matched by term ``a`` include the texts matched by term ``b``?"""
    if len(a) != len(b):
        return False
    for (kind_a, value_a), (kind_b, value_b), word_b in zip(a, b, b_words, strict=True):
        if kind_a == "prefix":
            if kind_b == "prefix":
                ok = value_b.startswith(value_a)
            else:  # for a lemma or stem, the word as written (its other forms mostly share the prefix)
                ok = (fold(word_b, keys.keep_accents) if kind_b in ("lemma", "stem") else value_b
                      ).startswith(value_a)
        elif kind_a in ("lemma", "stem"):
            ok = (kind_b == kind_a and value_b == value_a) or (kind_b == "exact"
                                                                and keys.of(kind_a, value_b) == value_a)
        else:
            ok = kind_b == "exact" and value_a == value_b
        if not ok:
            return False
    return True


def lint_lexicon(lexicon: Lexicon, term_hits: Mapping[tuple[str, str], int] | None = None,
                 theme_hits: Mapping[str, int] | None = None) -> pd.DataFrame:
    """Notes on a valid lexicon that are worth a researcher's look (not errors).

    Kinds
    -----
    shared_term
        A term matches the same words as a term of another theme, and neither
        theme is an ancestor of the other (one answer would count for both).
        Inflection twins (``queue`` / ``queues`` with ``inflect``, by the
        lemmatiser of the lexicon's language, or its Snowball stemmer for
        ``inflect: stem``) and wildcards covering a
        whole term (``toilet*`` / ``toilets``) count as the same.
    redundant
        Within one theme, every match of a term is already a match of another
        term: a wildcard or an inflection twin covers it, or a phrase always
        contains another term (unless, for ``negated: drop``, a negation cue
        in the phrase precedes that term: "not clean" is needed beside
        "clean*"). A term of a theme that is also matched by a term of its
        descendant is redundant too (the child's hits roll up).
    vetoed_term
        An exclusion of the theme matches inside every match of a term, so the
        term can never count (often an exclusion that inflects: "books" also
        vetoes "booked").
    unused_term
        With ``term_hits``: terms with no hits (missing counts as 0).
    no_hits
        With ``theme_hits``: themes that coded no response.

    Parameters
    ----------
    lexicon : Lexicon
    term_hits : mapping of (theme_id, term_text) to int, optional
        Hits per term, e.g. from the coding engine's evidence; ``term_text`` is
        ``Term.text``.
    theme_hits : mapping of theme_id to int, optional
        Responses coded per theme.

    Returns
    -------
    pandas.DataFrame
        Columns ``kind, theme, term, line, detail``; one row per note, sorted
        by kind (in :data:`LINT_KINDS` order) then line. ``term`` is "" for
        ``no_hits``.
    """
    import pandas as pd

    stem = _Keys(lexicon)
    rows: list[tuple[str, str, str, int, str]] = []
    entries = [(theme, term, stem.words(term)) for theme in lexicon.themes for term in theme.terms]
    related = {theme.id: {theme.id, *lexicon.ancestors(theme.id)} for theme in lexicon.themes}

    # Candidate pairs (covering, covered): same length and a first word that can match the same
    # tokens (the same stem, or starting with a wildcard's prefix).
    def first_key(keys: tuple[tuple[str, str], ...]) -> tuple[str, str]:
        kind, value = keys[0]
        return ("lemma", stem.of("lemma", value)) if kind == "exact" else (kind, value)

    by_first: dict[tuple[int, tuple[str, str]], list[int]] = {}
    for index, (_, term, keys) in enumerate(entries):
        by_first.setdefault((len(term.words), first_key(keys)), []).append(index)
    first_words = sorted((term.words[0].rstrip("*"), index) for index, (_, term, _) in enumerate(entries))
    pairs: set[tuple[int, int]] = set()
    for a, (_, term, keys) in enumerate(entries):
        if keys[0][0] == "prefix":
            start = bisect.bisect_left(first_words, (keys[0][1], -1))
            candidates = []
            for word, b in first_words[start:]:
                if not word.startswith(keys[0][1]):
                    break
                candidates.append(b)
        else:
            candidates = by_first.get((len(term.words), first_key(keys)), [])
        pairs.update((a, b) for b in candidates
                     if b != a and _covers(keys, entries[b][2], entries[b][1].words, stem))

    reported: set[int] = set()
    for a, b in sorted(pairs, key=lambda pair: (entries[pair[1]][1].line, pair[1], entries[pair[0]][1].line,
                                                 pair[0])):
        (theme_a, term_a, _), (theme_b, term_b, _) = entries[a], entries[b]
        hierarchy = theme_a.id != theme_b.id and (theme_b.id in related[theme_a.id]
                                                  or theme_a.id in related[theme_b.id])
        if b in reported or (not hierarchy and (b, a) in pairs and (term_b.line, b) < (term_a.line, a)):
            continue  # the same match set in both: note the later term only
        if theme_a.id == theme_b.id:
            detail = f"already matched by '{term_a.text}' (line {term_a.line})"
        elif theme_b.id in related[theme_a.id]:  # a hit of the descendant counts for theme_b anyway
            detail = (f"already matched by '{term_a.text}' (line {term_a.line}) in theme "
                      f"'{theme_a.id}', whose hits count for '{theme_b.id}'")
        elif theme_a.id in related[theme_b.id]:
            continue  # the child repeats a parent's term to attribute it: intended
        else:
            where = f"'{term_a.text}' in theme '{theme_a.id}' (line {term_a.line})"
            how = (f"also a term of theme '{theme_a.id}' (line {term_a.line})" if term_a.words == term_b.words
                   else f"same as {where} once inflections match" if (b, a) in pairs
                   else f"also matched by {where}")
            rows.append(("shared_term", theme_b.id, term_b.text, term_b.line,
                         f"{how}; neither theme is an ancestor of the other"))
            reported.add(b)
            continue
        rows.append(("redundant", theme_b.id, term_b.text, term_b.line, detail))
        reported.add(b)

    # A phrase of a theme that always contains a match of another term of the same theme adds
    # nothing, unless (negated: drop) a negation cue inside the phrase precedes that term.
    position = {id(term): index for index, (_, term, _) in enumerate(entries)}
    for theme in lexicon.themes:
        for phrase in theme.terms:
            if not phrase.is_phrase or position[id(phrase)] in reported:
                continue
            phrase_keys = entries[position[id(phrase)]][2]
            for term in theme.terms:
                size = len(term.words)
                if size >= len(phrase.words):
                    continue
                keys = entries[position[id(term)]][2]
                hit = next((offset for offset in range(len(phrase.words) - size + 1)
                            if _covers(keys, phrase_keys[offset:offset + size],
                                       phrase.words[offset:offset + size], stem)
                            and (theme.negated != "drop"
                                 or not any(is_negation_cue(word) for word in phrase.words[:offset]))),
                           None)
                if hit is not None:
                    rows.append(("redundant", theme.id, phrase.text, phrase.line,
                                 f"always contains a match of '{term.text}' (line {term.line})"))
                    reported.add(position[id(phrase)])
                    break

    # An exclusion that is part of every match of a term vetoes that term for good.
    for theme in lexicon.themes:
        exclusion_keys = [(exclusion, stem.words(exclusion)) for exclusion in theme.exclusions]
        for term in theme.terms:
            if position[id(term)] in reported:
                continue
            term_keys = entries[position[id(term)]][2]
            for exclusion, keys in exclusion_keys:
                size = len(keys)
                if any(_covers(keys, term_keys[offset:offset + size], term.words[offset:offset + size], stem)
                       for offset in range(len(term.words) - size + 1)):
                    rows.append(("vetoed_term", theme.id, term.text, term.line,
                                 f"every match is vetoed by the exclusion '{exclusion.text}' "
                                 f"(line {exclusion.line}); remove one or set inflect: false on it"))
                    break

    if term_hits is not None:
        for theme, term, _ in entries:
            if not term_hits.get((theme.id, term.text), 0):
                rows.append(("unused_term", theme.id, term.text, term.line, "no hits"))
    if theme_hits is not None:
        for theme in lexicon.themes:
            if not theme_hits.get(theme.id, 0):
                rows.append(("no_hits", theme.id, "", theme.line, "coded no response"))

    frame = pd.DataFrame(rows, columns=list(LINT_COLUMNS))
    frame = frame.astype({"kind": "object", "theme": "object", "term": "object", "line": "int64",
                          "detail": "object"})
    order = frame["kind"].map({kind: i for i, kind in enumerate(LINT_KINDS)})
    frame = frame.assign(_order=order).sort_values(["_order", "line", "theme", "term"], kind="stable")
    return frame.drop(columns="_order").reset_index(drop=True)


_KIND_TITLES = {
    "shared_term": "Terms shared by unrelated themes",
    "redundant": "Redundant terms (already matched by another term of the theme)",
    "vetoed_term": "Terms that an exclusion of their own theme always vetoes",
    "unused_term": "Terms that matched no answer",
    "no_hits": "Themes that coded no response",
}


def format_lint(frame: pd.DataFrame) -> str:
    """Human-readable report of :func:`lint_lexicon`'s table (ends with a newline)."""
    if frame.empty:
        return "Lexicon lint: nothing to report.\n"
    lines = [f"Lexicon lint: {len(frame)} note{'s' if len(frame) != 1 else ''}."]
    known = [kind for kind in LINT_KINDS if kind in set(frame["kind"])]
    others = sorted(set(frame["kind"]) - set(known))
    for kind in known + others:
        part = frame[frame["kind"] == kind]
        lines.append("")
        lines.append(f"{_KIND_TITLES.get(kind, kind)} ({len(part)}):")
        for row in part.itertuples(index=False):
            what = f"{row.theme}: '{row.term}'" if row.term else row.theme
            lines.append(f"  line {row.line:>4}  {what} - {row.detail}")
    return "\n".join(lines) + "\n"
