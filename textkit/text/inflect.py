"""Word keys for matching: case and accent folding, lemmas (inflections), Snowball stems.

A lexicon word and an answer word match when their *keys* are equal. Keys are
computed on the (small) vocabulary, never token by token.

Folding
-------
:func:`fold` applies full Unicode case folding (``ß`` -> ``ss``, Greek final
sigma -> sigma, Turkish dotless ``ı`` -> ``i``) and, unless accents are kept,
removes combining accents (``café`` -> ``cafe``, an all-caps ``CAFE`` matches
``café``). Evidence still points at the original characters: folding only
changes how vocabulary entries are compared.

Inflection
----------
``inflect: true`` conflates the inflected forms of one word (queue, queues,
queued, queuing; child, children): two words match when they share a lemma.
Lemmas come from dictionaries that ship inside the wheels (no download):

* English: *lemminflect*, which knows each word's parts of speech. A word
  that is a noun, adjective or adverb in its own right keeps itself as its
  lemma, so "broken" is not "break", "outing" not "out", "lighting" not
  "light", "crowded" not "crowd", while "queued", "waiting", "children" and
  "went" reach their lemma. A word it does not know (a misspelling, a name)
  is its own lemma.
* Every other language in :data:`LEMMA_LANGUAGES`: *simplemma* (54
  languages, no parts of speech). For languages that capitalise nouns
  (German) a lower-cased word is read as written and capitalised.

A derived word keeps its own lemma (friendly is not friend, business is not
busy, apartment is not apart). The small per-language table
:data:`OWN_LEMMA` keeps apart the nouns in ``-ing`` that the dictionaries read
only as verb forms ("parking"). ``inflect: stem`` asks for
the older, looser Snowball stemmer (nltk; English and 14 other languages).
"""

from __future__ import annotations

import unicodedata
from collections.abc import Callable
from functools import cache, lru_cache

#: Languages the lemmatiser covers (ISO 639-1/3 codes of simplemma's dictionaries).
LEMMA_LANGUAGES = frozenset((
    "ar ast bg ca cs cy da de el en enm eo es et fa fi fr ga gd gl grc gv hbs he hi hu hy id is it ka "
    "la lb lt lv mk ml ms nb nl nn pl pt ro ru se sk sl sq sv sw tl tr uk").split())
#: Languages whose accents distinguish common words: accents are kept unless the lexicon folds them.
ACCENTS_KEPT_BY_DEFAULT = frozenset({"vi"})
#: Words that are nouns of their own although the lemmatiser reads them as verb forms
#: (common practice: "parking" is a place, not the act of parking). Language -> words.
OWN_LEMMA: dict[str, frozenset[str]] = {
    "en": frozenset("parking seating catering signage".split()),
}
#: Lexicon ``language`` codes with a Snowball stemmer in nltk (which needs no data download).
SNOWBALL_LANGUAGES = {
    "en": "english", "da": "danish", "de": "german", "es": "spanish", "fi": "finnish",
    "fr": "french", "hu": "hungarian", "it": "italian", "nb": "norwegian", "nl": "dutch",
    "no": "norwegian", "pt": "portuguese", "ro": "romanian", "ru": "russian", "sv": "swedish",
}
#: Every lexicon language textkit accepts: a lemmatiser or a stemmer for it.
SUPPORTED_LANGUAGES = tuple(sorted(LEMMA_LANGUAGES | set(SNOWBALL_LANGUAGES)))


def base_language(language: str) -> str:
    """``"en"`` for ``"en-GB"``, ``"en_gb"`` or ``"EN"``."""
    return language.split("-")[0].split("_")[0].lower()


def fold(word: str, keep_accents: bool = False) -> str:
    """Case-folded ``word``, accents removed unless ``keep_accents``."""
    if word.isascii():
        return word.lower()
    folded = word.casefold().replace("\u0131", "i")
    if keep_accents:
        return unicodedata.normalize("NFC", folded)
    decomposed = unicodedata.normalize("NFD", folded)
    return unicodedata.normalize("NFC", "".join(c for c in decomposed if not unicodedata.combining(c)))


@cache
def snowball_stemmer(language: str) -> Callable[[str], str] | None:
    """The Snowball ``stem`` function for a language code ("en", "de-AT"...), or None if nltk has none."""
    name = SNOWBALL_LANGUAGES.get(base_language(language))
    if name is None:
        return None
    from nltk.stem.snowball import SnowballStemmer  # imported late: nltk is slow to import

    return SnowballStemmer(name).stem


#: Languages that capitalise nouns: a lower-cased answer word is read both as written and
#: capitalised ("schlangen" is a form of "Schlange", not of "schlingen").
NOUNS_CAPITALISED = frozenset({"de", "lb"})


@cache
def lemmatiser(language: str) -> Callable[[str], tuple[str, ...]] | None:
    """A function word -> its possible lemmas for ``language`` (simplemma), or None if it has none."""
    code = base_language(language)
    if code not in LEMMA_LANGUAGES:
        return None
    from simplemma import is_known, lemmatize  # imported late: loads a dictionary

    own = OWN_LEMMA.get(code, frozenset())
    capitalised = code in NOUNS_CAPITALISED
    english = _english_lemmas() if code == "en" else None

    @lru_cache(maxsize=1 << 18)  # shared by every coder: a vocabulary is lemmatised once
    def lemmas(word: str) -> tuple[str, ...]:
        if word in own:
            return (word,)
        if english is not None:
            return english(word) or (word,)
        found = lemmatize(word, lang=code)
        noun = word[:1].upper() + word[1:]
        if capitalised and noun != word and is_known(noun, lang=code):
            return (found, lemmatize(noun, lang=code))
        return (found,)

    return lemmas


def _english_lemmas() -> Callable[[str], tuple[str, ...]]:
    """English lemmas by part of speech (lemminflect); () for a word it does not know."""
    from lemminflect import getAllLemmas  # imported late: loads its tables

    def lemmas(word: str) -> tuple[str, ...]:
        readings = getAllLemmas(word)
        if any(word in readings.get(part, ()) for part in ("NOUN", "ADJ", "ADV")):
            return (word,)  # a word in its own right: "broken", "outing", "lighting"
        return tuple(dict.fromkeys(lemma for found in readings.values() for lemma in found))

    return lemmas


def key_function(mode: bool | str, language: str, keep_accents: bool) -> Callable[[str], tuple[str, ...]]:
    """The keys of a word of an inflecting term: folded lemmas, a folded stem, or the folded word.

    ``mode`` is True (lemma), ``"stem"`` (Snowball) or False (the word itself).
    Two words match when their keys share an entry. A language without the
    tool asked for falls back to the word itself.
    """
    if mode == "stem":
        stem = snowball_stemmer(language)
        if stem is not None:
            return lambda word: (stem(fold(word, keep_accents)),)
    elif mode:
        lemmas = lemmatiser(language)
        if lemmas is not None:
            return lambda word: tuple(dict.fromkeys(fold(lemma, keep_accents) for lemma in lemmas(word)))
    return lambda word: (fold(word, keep_accents),)
