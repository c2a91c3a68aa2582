"""The word forms each lexicon term will match through inflection.

With ``inflect: true`` a term word matches every answer word that shares a
lemma with it (:mod:`textkit.text.inflect`). That is usually what the
researcher means ("queue" should catch "queues" and "queued"), but a form can
carry a sense outside the theme (a noun term catching its verb, a plural-only
sense catching the singular). :func:`inflected_forms` lists those forms so a
lexicon can be read term by term before it is used, and so that a term whose
forms stray can be pinned with ``{term: ..., inflect: false}``.

Where the forms come from
-------------------------
* **English, from the dictionary** (no ``vocabulary``): the candidates are
  every inflection lemminflect knows of every lemma of the word (all parts of
  speech: a noun's verb forms too), and a candidate is kept only when its keys
  (:func:`textkit.text.inflect.key_function`, with the lexicon's language and
  accent setting) share one with the term word's keys, which is exactly the
  test the coder applies. So "broken" is not listed under "break" (it is an
  adjective in its own right and keeps its own lemma).
* **From a vocabulary** (any language): the words given, for instance every
  word of a survey's answers, each kept when its keys share one with the term
  word's. This lists the forms that actually occur. It is the only source for
  languages other than English: simplemma, their lemmatiser, maps a form to its
  lemma but cannot generate the forms of a lemma. It is also the only source
  for ``inflect: stem`` terms, whose Snowball stems conflate derived words no
  dictionary lists as inflections.

Wildcard words (``queu*``) match prefixes, not inflections, and words of
``inflect: false`` terms match as written: neither is listed. The forms are
those of lower-case answer words: a capitalised word inside a clause is read
as part of a name by the coder and matches only as written.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import TYPE_CHECKING

from ..text.inflect import base_language, fold, key_function
from .lexicon import INFLECT_STEM, Lexicon, Term

if TYPE_CHECKING:
    import pandas as pd

#: Columns of :func:`inflected_forms`'s table, in order.
FORM_COLUMNS = ("theme", "term", "line", "exclusion", "word", "form")

KeyFunction = Callable[[str], tuple[str, ...]]


def inflected_forms(lexicon: Lexicon, vocabulary: Iterable[str] | None = None, *,
                    exclusions: bool = True) -> pd.DataFrame:
    """Every other word form each inflecting term word of ``lexicon`` matches.

    Parameters
    ----------
    lexicon : Lexicon
        A parsed lexicon; its ``language`` and ``keep_accents`` decide the keys.
    vocabulary : iterable of str, optional
        Answer words to test (e.g. a survey's token vocabulary). When given, the
        forms are the words of ``vocabulary`` that the term word matches, in any
        language and for ``inflect: stem`` terms too. When omitted, English
        lexicons get the forms generated from the dictionary (lemminflect) for
        their ``inflect: true`` terms; other languages and stem terms get none.
    exclusions : bool, default True
        Also list the forms of the exclusions' words (an inflected exclusion
        vetoes more).

    Returns
    -------
    pandas.DataFrame
        One row per (term word, form): ``theme`` (id), ``term`` (as written),
        ``line`` (of the term in the lexicon file), ``exclusion`` (bool),
        ``word`` (the term word, normalised) and ``form`` (a case-folded
        form with its accents, never the word itself as the lexicon's accent
        setting compares them). Rows follow the
        lexicon's order of themes, terms (then exclusions) and words; forms are
        sorted. A term word with no other form has no row.
    """
    language, keep = lexicon.language, lexicon.keep_accents
    rows: list[tuple[str, str, int, bool, str, str]] = []
    if vocabulary is None and base_language(language) != "en":
        return _form_table(rows)  # simplemma maps forms to lemmas but cannot generate forms
    key_of = {mode: key_function(mode, language, keep) for mode in (True, INFLECT_STEM)}
    index = {mode: _key_index(vocabulary, key_of[mode]) for mode in key_of} if vocabulary is not None else None
    for theme in lexicon.themes:
        listed = [(term, False) for term in theme.terms]
        listed += [(term, True) for term in theme.exclusions] if exclusions else []
        for term, is_exclusion in listed:
            for word in _inflecting_words(term, from_vocabulary=index is not None):
                mode = term.inflect
                if index is not None:
                    forms = _forms_in_vocabulary(word, key_of[mode], index[mode], keep)
                else:
                    forms = _generated_forms(word, key_of[mode], keep)
                rows += [(theme.id, term.text, term.line, is_exclusion, word, form) for form in forms]
    return _form_table(rows)


def _form_table(rows: list[tuple[str, str, int, bool, str, str]]) -> pd.DataFrame:
    import pandas as pd

    return pd.DataFrame(rows, columns=list(FORM_COLUMNS)).astype({"line": "int64", "exclusion": bool})


def _inflecting_words(term: Term, from_vocabulary: bool) -> list[str]:
    """The words of ``term`` whose inflections it matches and can be listed (de-duplicated, in order).

    Stem terms are listed only from a vocabulary: a stem conflates derived words no dictionary lists.
    """
    if not term.inflect or (term.inflect == INFLECT_STEM and not from_vocabulary):
        return []
    return list(dict.fromkeys(word for word in term.words if not word.endswith("*")))


def _key_index(vocabulary: Iterable[str], key: KeyFunction) -> dict[str, list[str]]:
    """Key -> the case-folded vocabulary words having it (each word once, sorted)."""
    index: dict[str, set[str]] = {}
    for word in dict.fromkeys(vocabulary):
        if isinstance(word, str) and word.strip():
            form = fold(word, keep_accents=True)  # listed with its accents, whatever the matching
            for word_key in key(word):
                index.setdefault(word_key, set()).add(form)
    return {word_key: sorted(forms) for word_key, forms in index.items()}


def _forms_in_vocabulary(word: str, key: KeyFunction, index: dict[str, list[str]], keep_accents: bool) -> list[str]:
    """The vocabulary words other than ``word`` that share a key with it, sorted."""
    itself = fold(word, keep_accents)
    found = {form for word_key in key(word) for form in index.get(word_key, ())}
    return sorted(form for form in found if fold(form, keep_accents) != itself)


def _generated_forms(word: str, key: KeyFunction, keep_accents: bool) -> list[str]:
    """English inflections of every lemma of ``word`` that share a key with it, sorted."""
    from lemminflect import getAllInflections, getAllLemmas  # imported late: loads its tables

    lemmas = {word, *(lemma for found in getAllLemmas(word).values() for lemma in found)}
    candidates = {form for lemma in lemmas for found in getAllInflections(lemma).values() for form in found}
    wanted = set(key(word))
    itself = fold(word, keep_accents)
    forms = {fold(form, keep_accents=True) for form in candidates if wanted.intersection(key(form))}
    return sorted(form for form in forms if fold(form, keep_accents) != itself)
