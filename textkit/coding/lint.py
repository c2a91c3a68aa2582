"""Lexicon lint: shared, redundant, vetoed and unused terms, themes with no hits."""

from __future__ import annotations

from collections.abc import Mapping
from functools import lru_cache

import pandas as pd

from ..text.inflect import fold, key_function
from ..text.tokens import is_negation_cue
from .lexicon import LINT_COLUMNS, LINT_KINDS, Lexicon, Term


@lru_cache(maxsize=8)
def _stemmer(language: str, keep_accents: bool = False):
    """Cached word -> inflection key (the folded lemma, as the coder matches) for ``language``.

    Lint keys every inflecting word by its lemma, also for terms with ``inflect: stem``
    (an approximation: their Snowball stems are looser).
    """
    key = key_function(True, language, keep_accents)
    return lru_cache(maxsize=None)(lambda word: key(word)[0])


def _word_keys(term: Term, stem, keep_accents: bool = False) -> tuple[tuple[str, str], ...]:
    """How each word matches: ("prefix", p), ("stem", inflection key) or ("exact", w), folded."""
    keys = []
    for word in term.words:
        if word.endswith("*"):
            keys.append(("prefix", fold(word[:-1], keep_accents)))
        elif term.inflect and stem is not None:
            keys.append(("stem", stem(word)))
        else:
            keys.append(("exact", fold(word, keep_accents)))
    return tuple(keys)


def _covers(a: tuple[tuple[str, str], ...], b: tuple[tuple[str, str], ...], b_words, stem) -> bool:
    """Does every text matched by term ``a`` include the texts matched by term ``b``?"""
    if len(a) != len(b):
        return False
    for (kind_a, value_a), (kind_b, value_b), word_b in zip(a, b, b_words, strict=True):
        if kind_a == "prefix":
            if kind_b == "prefix":
                ok = value_b.startswith(value_a)
            else:  # for a stem, the word as written (its other forms mostly share the prefix)
                ok = (word_b if kind_b == "stem" else value_b).startswith(value_a)
        elif kind_a == "stem":
            ok = kind_b != "prefix" and (value_b if kind_b == "stem" else stem(value_b)) == value_a
        else:
            ok = kind_b == "exact" and value_a == value_b
        if not ok:
            return False
    return True


Keys = tuple[tuple[str, str], ...]


def _normal(key: tuple[str, str], stem) -> str:
    """What a stem or exact word key must equal to be covered: its stem (or the word without a stemmer)."""
    kind, value = key
    return stem(value) if kind == "exact" and stem is not None else value


class _CoverIndex:
    """Terms indexed so that those able to cover a run of words are found without a scan.

    A term with no wildcard can only cover words with the same stems (the ``whole`` table);
    one starting with a wildcard, words starting with its prefix (``prefixed``, looked up
    once per prefix length in use); one with a later wildcard, words with the same first
    stem (``mixed``). Lookups are exact, so lint stays near-linear in the number of terms.
    """

    def __init__(self, items: list[Keys], stem) -> None:
        self.stem = stem
        self.whole: dict[tuple[str, ...], list[int]] = {}
        self.mixed: dict[tuple[int, str], list[int]] = {}
        self.prefixed: dict[tuple[int, str], list[int]] = {}
        self.prefix_lengths: list[int] = []
        for position, keys in enumerate(items):
            kind, value = keys[0]
            if kind == "prefix":
                self.prefixed.setdefault((len(keys), value), []).append(position)
            elif any(k == "prefix" for k, _ in keys):
                self.mixed.setdefault((len(keys), _normal(keys[0], stem)), []).append(position)
            else:
                self.whole.setdefault(tuple(_normal(key, stem) for key in keys), []).append(position)
        self.prefix_lengths = sorted({len(value) for _, value in self.prefixed})

    def candidates(self, keys: Keys, words: tuple[str, ...]) -> list[int]:
        """Positions of the items that may cover ``keys`` (same length; check with ``_covers``)."""
        kind, value = keys[0]
        found: list[int] = []
        if kind != "prefix":
            if not any(k == "prefix" for k, _ in keys):
                found += self.whole.get(tuple(_normal(key, self.stem) for key in keys), [])
            found += self.mixed.get((len(keys), _normal(keys[0], self.stem)), [])
        text = words[0] if kind == "stem" else value
        for length in self.prefix_lengths:
            if length > len(text):
                break
            found += self.prefixed.get((len(keys), text[:length]), [])
        return found


def _first_cover(index: _CoverIndex, items: list[Keys], keys: Keys, words: tuple[str, ...], stem,
                 shorter: bool, negation_blocks: bool) -> int | None:
    """The first item (in ``items`` order) that covers a run of words inside ``keys``.

    ``shorter``: only runs shorter than the whole; ``negation_blocks``: a run preceded
    by a negation cue inside ``keys`` does not count.
    """
    best = None
    for size in range(1, len(keys) + (0 if shorter else 1)):
        for offset in range(len(keys) - size + 1):
            if negation_blocks and any(is_negation_cue(word) for word in words[:offset]):
                break
            run, run_words = keys[offset:offset + size], words[offset:offset + size]
            for position in index.candidates(run, run_words):
                if (best is None or position < best) and _covers(items[position], run, run_words, stem):
                    best = position
    return best


def lint_lexicon(lexicon: Lexicon, term_hits: Mapping[tuple[str, str], int] | None = None,
                 theme_hits: Mapping[str, int] | None = None) -> pd.DataFrame:
    """Notes on a valid lexicon that are worth a researcher's look (not errors).

    Kinds
    -----
    shared_term
        A term matches the same words as a term of another theme, and neither
        theme is an ancestor of the other (one answer would count for both).
        Inflection twins (``queue`` / ``queues`` with ``inflect``, by the
        lemmas of the lexicon's language) and wildcards covering a
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

    stem = _stemmer(lexicon.language, lexicon.keep_accents)
    rows: list[tuple[str, str, str, int, str]] = []
    entries = [(theme, term, _word_keys(term, stem, lexicon.keep_accents))
               for theme in lexicon.themes for term in theme.terms]
    related = {theme.id: {theme.id, *lexicon.ancestors(theme.id)} for theme in lexicon.themes}

    # Pairs (covering, covered): each term asks an index for the terms that can cover it.
    index = _CoverIndex([keys for _, _, keys in entries], stem)
    pairs: set[tuple[int, int]] = set()
    for b, (_, term, keys) in enumerate(entries):
        pairs.update((a, b) for a in index.candidates(keys, term.words)
                     if a != b and _covers(entries[a][2], keys, term.words, stem))

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
        term_keys = [entries[position[id(term)]][2] for term in theme.terms]
        theme_index = _CoverIndex(term_keys, stem)
        for phrase in theme.terms:
            if not phrase.is_phrase or position[id(phrase)] in reported:
                continue
            phrase_keys = entries[position[id(phrase)]][2]
            first = _first_cover(theme_index, term_keys, phrase_keys, phrase.words, stem, shorter=True,
                                 negation_blocks=theme.negated != "keep")
            if first is not None:
                term = theme.terms[first]
                rows.append(("redundant", theme.id, phrase.text, phrase.line,
                             f"always contains a match of '{term.text}' (line {term.line})"))
                reported.add(position[id(phrase)])

    # An exclusion that is part of every match of a term vetoes that term for good.
    for theme in lexicon.themes:
        exclusion_keys = [_word_keys(exclusion, stem, lexicon.keep_accents) for exclusion in theme.exclusions]
        exclusion_index = _CoverIndex(exclusion_keys, stem)
        for term in theme.terms:
            if position[id(term)] in reported:
                continue
            first = _first_cover(exclusion_index, exclusion_keys, entries[position[id(term)]][2], term.words,
                                 stem, shorter=False, negation_blocks=False)
            if first is not None:
                exclusion = theme.exclusions[first]
                rows.append(("vetoed_term", theme.id, term.text, term.line,
                             f"every match is vetoed by the exclusion '{exclusion.text}' "
                             f"(line {exclusion.line}); remove one or set inflect: false on it"))

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
