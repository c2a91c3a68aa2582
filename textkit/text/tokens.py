"""Text processing: normalise, redact, tokenise once into a token stream.

The whole corpus is tokenised in one regular-expression pass and stored as a
:class:`TokenStream`: an integer code per token, the sorted vocabulary, and
the offsets of each document's tokens. Everything downstream (coding,
keyness, topics) works on those arrays with numpy and scipy.sparse.

Normalisation (what a token is built from)
------------------------------------------
* Unicode NFKC (full-width letters, ligatures, "…" become plain forms);
* curly quotes and primes become ``'`` or ``"``; hyphen and minus variants
  become ``-``; en and em dashes become ``,`` (a clause break, so
  "queue—awful" is two words and ends a negation scope);
* odd white space and control characters become spaces; soft hyphens and
  word joiners are deleted;
* lower case (``str.lower``).

Tokens
------
* words with inner apostrophes or hyphens stay whole: ``don't``,
  ``self-service``, ``wi-fi``;
* numbers keep their decimal or time separators: ``3.50``, ``10:30``;
* currency signs and emoji are tokens of their own;
* clause punctuation (``. , ; : ! ? ( ) [ ] "`` and lone dashes) are *break*
  tokens: they end negation scopes and are never part of a phrase.

Negation
--------
A cue (``not``, ``no``, ``never``, ``without``, ``nothing``, any ``n't``
word...) opens a scope over the next ``window`` tokens (default 4), closed
early by a break token or a contrast word (``but``, ``however``...).
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from functools import cached_property, lru_cache
from importlib import resources

import numpy as np

from .inflect import snowball_stemmer  # noqa: F401  (its home is text.inflect; kept importable here)

#: Separator placed between documents in the joined corpus; never a token.
DOCUMENT_SEPARATOR = "\x1e"


def _mark_class() -> str:
    """Regex class body of the combining marks (categories Mn, Mc, Me) of the BMP."""
    ranges: list[list[int]] = []
    for code in range(0x300, 0x10000):
        if unicodedata.category(chr(code))[0] == "M":
            if ranges and ranges[-1][1] == code - 1:
                ranges[-1][1] = code
            else:
                ranges.append([code, code])
    return "".join(chr(a) if a == b else f"{chr(a)}-{chr(b)}" for a, b in ranges)


# Combining marks that NFKC cannot compose (Devanagari or Thai vowel signs, Arabic
# vowel points) are not \w in Python: without them a word of those scripts would
# fall apart into fragments.
_LETTERS = f"[^\\W_]+(?:[{_mark_class()}]+[^\\W_]*)*"
_CURRENCY = r"[$€£¥₹]"
_EMOJI = (r"[\U0001F000-\U0001FAFF\u2600-\u27BF\u2B00-\u2BFF]"
          r"(?:[\uFE0F\u200D\U0001F3FB-\U0001F3FF][\U0001F000-\U0001FAFF\u2600-\u27BF]?)*")
# Clause breaks: punctuation, brackets, slash, ampersand, vertical bar, bullets, tab and
# line breaks (a blank line is two of them). "&" between letters stays inside a word ("b&b").
_BREAK = r"[.!?;:,()\[\]{}\"/&|\u2022\u2023\u25e6\u25aa\u25cf\t\n\r\x0b\x0c]|-+"
#: The one tokeniser pattern; documents and lexicon terms both go through it.
# Words come first (most tokens are words, so most matches succeed on the first branch);
# a digit run continues over ".", "," or ":" plus digits, so "3.50" and "10:30" stay whole.
_WORD_OR_NUMBER = f"{_LETTERS}(?:['\\-]{_LETTERS}|(?<=[^\\W\\d_])&(?=[^\\W\\d_]){_LETTERS}|(?<=\\d)[.,:]\\d+)*"
TOKEN_PATTERN = re.compile(
    f"{_WORD_OR_NUMBER}|{_CURRENCY}|{_EMOJI}|{_BREAK}|{DOCUMENT_SEPARATOR}"
)
_BREAK_PATTERN = re.compile(f"(?:{_BREAK})\\Z")

#: Tokens that open a negation scope (a token ending in "n't" does too).
NEGATION_CUES = frozenset(
    "not no never without nothing none nobody nowhere neither nor cannot "
    "cant dont didnt doesnt isnt wasnt arent werent couldnt wouldnt shouldnt "
    "wont hasnt havent hadnt lack lacked lacking".split()
)
#: Words that close a negation scope as punctuation does.
CONTRAST_WORDS = frozenset("but however although though yet except".split())
#: Phrases that hold a negation cue without negating anything: their cue opens no scope.
#: ("not only crowded but dirty" is about crowding; "can't wait to come back" is praise.)
NON_NEGATING_PHRASES = (
    "not only", "not just", "not to mention", "no doubt", "without doubt", "without a doubt",
    "no wonder", "nothing but", "can't wait", "cannot wait", "cant wait", "couldn't be happier",
    "could not be happier", "couldn't have been happier", "no problem at all", "no problems at all",
    "never fails to",
)

_DASHES_TO_BREAK = "\u2013\u2014\u2015\u2E3A\u2E3B"
_HYPHENS = "\u2010\u2011\u2012\u2212\uFE63\uFF0D"
_SINGLE_QUOTES = "\u2018\u2019\u201A\u201B\u2032\u02BC\u0060\u00B4"
_DOUBLE_QUOTES = "\u201C\u201D\u201E\u201F\u2033\u00AB\u00BB"
_SPACES = ("\u00A0\u1680\u2000\u2001\u2002\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200A\u200B"
           "\u202F\u205F\u3000\uFEFF")
#: Line and paragraph separators become line breaks (clause breaks, like "\n").
_LINE_BREAKS = "\u2028\u2029\u0085"
#: Control characters that stay as they are: tab and line breaks are clause breaks.
_KEPT_CONTROLS = "\t\n\r\x0b\x0c"


def _build_table() -> dict[int, str]:
    table: dict[int, str] = {}
    for chars, target in ((_DASHES_TO_BREAK, ","), (_HYPHENS, "-"), (_SINGLE_QUOTES, "'"),
                          (_DOUBLE_QUOTES, '"'), (_SPACES, " ")):
        table.update({ord(c): target for c in chars})
    for code in list(range(0x00, 0x20)) + [0x7F]:
        if chr(code) not in _KEPT_CONTROLS:
            table[code] = " "
    table.update({ord(c): "\n" for c in _LINE_BREAKS})
    return table


_TABLE = _build_table()
#: Invisible characters deleted inside words: soft hyphen, word joiner ("ex\u00adpensive").
_DELETED = {0x00AD: None, 0x2060: None}


def normalise(text: str) -> str:
    """Normalised, lower-cased form of ``text`` that the tokeniser reads.

    For ASCII text this is ``text.lower()`` with control characters as spaces
    and a backtick as an apostrophe.
    """
    return normalise_with_offsets(text)[0]


def normalise_with_offsets(text: str) -> tuple[str, np.ndarray | None]:
    """Normalise ``text`` and map each normalised character back to ``text``.

    Returns
    -------
    normalised : str
    origin : ndarray of shape (len(normalised) + 1,) or None
        ``origin[j]`` is the index in ``text`` where normalised character ``j``
        comes from; the last entry is ``len(text)``. ``None`` means the
        identity (every character maps to itself), the common case.
    """
    translated = text.translate(_TABLE)
    lowered = translated.lower()
    if (len(lowered) == len(text) and unicodedata.is_normalized("NFKC", translated)
            and "\u00ad" not in translated and "\u2060" not in translated):
        return lowered, None
    # Normalise base character + combining marks as one segment, so each output
    # character knows which input segment it came from.
    pieces: list[str] = []
    origin: list[int] = []
    start = 0
    for index in range(1, len(translated) + 1):
        if index < len(translated) and unicodedata.combining(translated[index]):
            continue
        piece = unicodedata.normalize("NFKC", translated[start:index]).lower().translate(_DELETED)
        if piece.startswith("i\u0307"):  # "İ".lower() keeps a combining dot: "İzmir" is "izmir"
            piece = "i" + piece[2:]
        pieces.append(piece)
        origin.extend([start] * len(piece))
        start = index
    origin.append(len(text))
    return "".join(pieces), np.asarray(origin, dtype=np.int64)


def is_break_token(token: str) -> bool:
    """True for clause punctuation tokens (they end scopes and phrases)."""
    return bool(_BREAK_PATTERN.match(token))


def is_negation_cue(token: str) -> bool:
    """True if ``token`` opens a negation scope."""
    return token in NEGATION_CUES or token.endswith("n't")


def tokenize(text: str) -> list[str]:
    """Tokens of one text (normalised), break tokens included."""
    return TOKEN_PATTERN.findall(normalise(text))


def word_tokens(text: str) -> list[str]:
    """Tokens of one text without break tokens (as used for lexicon terms)."""
    return [token for token in tokenize(text) if not is_break_token(token)]


def _end_origin(origin: np.ndarray) -> np.ndarray:
    """Map a normalised *end* position to the original text, shape (len(origin),).

    ``origin`` gives where each normalised character's segment starts; a token
    ending at normalised position ``e`` ends where the segment of character
    ``e - 1`` ends, even when that segment expanded ("…" -> "...", "½" -> "1⁄2").
    """
    segment_starts = np.unique(origin)
    end = np.empty(len(origin), dtype=np.int64)
    end[0] = 0
    end[1:] = segment_starts[np.searchsorted(segment_starts, origin[:-1], side="right")]
    return end


def token_spans(text: str) -> list[tuple[int, int]]:
    """Character spans in the *original* ``text`` of each token of ``tokenize(text)``."""
    normalised, origin = normalise_with_offsets(text)
    spans = [match.span() for match in TOKEN_PATTERN.finditer(normalised)]
    if origin is None:
        return spans
    end_origin = _end_origin(origin)
    return [(int(origin[start]), int(end_origin[end])) for start, end in spans]


@lru_cache(maxsize=1)
def default_stop_words() -> frozenset[str]:
    """The English stop-word list shipped in ``textkit/data`` (negations kept out)."""
    raw = resources.files("textkit").joinpath("data/stopwords-en.txt").read_text(encoding="utf-8")
    return frozenset(line.strip() for line in raw.splitlines()
                     if line.strip() and not line.startswith("#"))


@dataclass(frozen=True, eq=False)
class TokenStream:
    """A tokenised corpus.

    Attributes
    ----------
    codes : ndarray of shape (n_tokens,), int32
        Index of each token in ``vocabulary``; documents follow one another.
    doc_offsets : ndarray of shape (n_documents + 1,), int64
        Tokens of document ``i`` are ``codes[doc_offsets[i]:doc_offsets[i + 1]]``.
    vocabulary : ndarray of shape (n_vocabulary,), object
        Distinct tokens, sorted.
    starts, ends : ndarray of shape (n_tokens,), int32, or None
        Character span of each token in its document's *original* text
        (``text[starts[i]:ends[i]]``); None when built with ``offsets=False``.
    """

    codes: np.ndarray
    doc_offsets: np.ndarray
    vocabulary: np.ndarray
    starts: np.ndarray | None = None
    ends: np.ndarray | None = None

    @property
    def n_documents(self) -> int:
        return len(self.doc_offsets) - 1

    @property
    def n_tokens(self) -> int:
        return len(self.codes)

    def document_index(self) -> np.ndarray:
        """Document number of every token, shape (n_tokens,), int32."""
        lengths = np.diff(self.doc_offsets)
        return np.repeat(np.arange(self.n_documents, dtype=np.int32), lengths)

    def position_in_document(self) -> np.ndarray:
        """0-based position of every token within its document, shape (n_tokens,)."""
        return np.arange(self.n_tokens, dtype=np.int64) - np.repeat(
            self.doc_offsets[:-1], np.diff(self.doc_offsets))

    def vocabulary_flags(self, predicate) -> np.ndarray:
        """Boolean array over the vocabulary, ``predicate(token)`` per entry."""
        return np.fromiter((bool(predicate(token)) for token in self.vocabulary),
                           dtype=bool, count=len(self.vocabulary))

    @cached_property
    def break_flags(self) -> np.ndarray:
        """Per vocabulary entry: is it a break token? shape (n_vocabulary,), bool (computed once)."""
        return self.vocabulary_flags(is_break_token)

    def break_mask(self) -> np.ndarray:
        """Per token: is it a break token? shape (n_tokens,), bool."""
        return self.break_flags[self.codes]

    def negated_mask(self, window: int = 4) -> np.ndarray:
        """Per token: does it lie inside a negation scope? shape (n_tokens,), bool.

        A token is negated when a cue stands at most ``window`` tokens before
        it in the same document with no break token or contrast word between.
        The cue itself is not negated.
        """
        return self.negated_at(np.arange(self.n_tokens, dtype=np.int64), window)

    def phrase_starts_removed(self, positions: np.ndarray, phrases: Sequence[str]) -> np.ndarray:
        """``positions`` (sorted token positions) without those where one of ``phrases`` starts.

        A phrase must lie within one document, its words adjacent (a break
        token between them means no match).
        """
        if not len(positions):
            return positions
        index = {token: code for code, token in enumerate(self.vocabulary.tolist())}
        document_end = self.doc_offsets[np.searchsorted(self.doc_offsets, positions, side="right")]
        starts_phrase = np.zeros(len(positions), dtype=bool)
        for phrase in phrases:
            codes = [index.get(word, -1) for word in tokenize(phrase)]
            if min(codes) < 0:
                continue  # a word of the phrase never occurs
            match = positions + len(codes) <= document_end
            for offset, code in enumerate(codes):
                at = np.minimum(positions + offset, max(self.n_tokens - 1, 0))
                match &= self.codes[at] == code
            starts_phrase |= match
        return positions[~starts_phrase]

    def negated_at(self, positions: np.ndarray, window: int = 4) -> np.ndarray:
        """:meth:`negated_mask` at the given token positions only, shape (len(positions),).

        Looks up the nearest cue and the nearest scope end before each position
        in the (sparse) lists of cue and stop positions, so coding pays for the
        matches it checks rather than for every token of the corpus.
        """
        positions = np.asarray(positions, dtype=np.int64)
        cue_flags = self.vocabulary_flags(is_negation_cue)
        stop_flags = self.break_flags | self.vocabulary_flags(lambda t: t in CONTRAST_WORDS)
        cue_positions = self.phrase_starts_removed(np.flatnonzero(cue_flags[self.codes]),
                                                   NON_NEGATING_PHRASES)
        stops = stop_flags[self.codes]
        stops[self.doc_offsets[:-1][np.diff(self.doc_offsets) > 0]] = True  # a scope ends with its answer
        stop_positions = np.flatnonzero(stops)

        def last_at_or_before(sorted_positions: np.ndarray) -> np.ndarray:
            index = np.searchsorted(sorted_positions, positions, side="right") - 1
            return np.where(index >= 0, sorted_positions[np.maximum(index, 0)] if len(sorted_positions)
                            else -1, -1)

        last_cue = last_at_or_before(cue_positions)
        last_stop = last_at_or_before(stop_positions)
        codes = self.codes[positions]
        return ((last_cue >= last_stop) & (last_cue >= 0) & (positions - last_cue <= window)
                & ~cue_flags[codes] & ~stop_flags[codes])


def prepare_corpus(texts: Sequence[str | None]) -> tuple[str, dict[int, np.ndarray]]:
    """Normalise every text and join them with :data:`DOCUMENT_SEPARATOR`.

    Missing texts (None, NaN) are empty documents.

    Returns
    -------
    corpus : str
    origins : dict of document number -> ndarray
        For the (rare) documents whose normalisation moved characters, the map
        from normalised to original character positions (see
        :func:`normalise_with_offsets`).
    """
    parts = []
    origins: dict[int, np.ndarray] = {}
    for number, text in enumerate(texts):
        if not isinstance(text, str):
            parts.append("")
        elif text.isascii():
            # the one ASCII character normalisation changes (besides control characters,
            # which are never part of a token): a backtick used as an apostrophe
            parts.append(text.lower().replace("`", "'"))
        else:
            normalised, origin = normalise_with_offsets(text)
            parts.append(normalised)
            if origin is not None:
                origins[number] = origin
    corpus = DOCUMENT_SEPARATOR.join(parts)
    if corpus.count(DOCUMENT_SEPARATOR) != len(parts) - 1:  # a text held the separator itself
        corpus = DOCUMENT_SEPARATOR.join(p.replace(DOCUMENT_SEPARATOR, " ") for p in parts)
    return corpus, origins


_SPLIT_PATTERN = re.compile(f"({TOKEN_PATTERN.pattern})")


#: Documents tokenised per batch: bounds the memory held by Python token lists.
BATCH_SIZE = 20_000


def _tokenize_batch(texts: list, index: dict[str, int], offsets: bool):
    """Codes (first-seen numbering in ``index``, grown in place), token counts, spans."""
    corpus, origins = prepare_corpus(texts)
    if offsets:
        pieces = _SPLIT_PATTERN.split(corpus)  # gap, token, gap, token, ..., gap
        tokens = pieces[1::2]
    else:
        tokens = TOKEN_PATTERN.findall(corpus)
    # dict.fromkeys keeps first-seen order; map over a C method avoids a Python loop body
    for token in dict.fromkeys(tokens):
        if token not in index:
            index[token] = len(index)
    raw = np.fromiter(map(index.__getitem__, tokens), dtype=np.int32, count=len(tokens))
    del tokens
    separator = raw == 0
    doc_of_token = np.cumsum(separator, dtype=np.int64)
    keep = ~separator
    counts = np.bincount(doc_of_token[keep], minlength=len(texts))
    starts = ends = None
    if offsets:
        gap_lengths = np.fromiter(map(len, pieces[0::2]), dtype=np.int64, count=len(raw) + 1)
        del pieces
        token_lengths = np.fromiter(map(len, index), dtype=np.int64, count=len(index))[raw]
        corpus_starts = np.cumsum(gap_lengths[:-1]) + np.cumsum(token_lengths) - token_lengths
        doc_starts = np.concatenate([[0], corpus_starts[separator] + 1])
        starts = (corpus_starts - doc_starts[doc_of_token])[keep]
        ends = starts + token_lengths[keep]
        if origins:
            offsets_in_batch = np.concatenate([[0], np.cumsum(counts)])
            for number, origin in origins.items():
                span = slice(offsets_in_batch[number], offsets_in_batch[number + 1])
                starts[span] = origin[starts[span]]
                ends[span] = _end_origin(origin)[ends[span]]
        starts = starts.astype(np.int32)
        ends = ends.astype(np.int32)
    return raw[keep], counts, starts, ends


def tokenize_corpus(texts: Sequence[str | None] | Iterable[str | None], *,
                    offsets: bool = True) -> TokenStream:
    """Tokenise all ``texts`` (one regular-expression pass, in batches).

    Parameters
    ----------
    texts : sequence of str or None, length n_documents
    offsets : bool, default True
        Also record each token's character span in its original text
        (``TokenStream.starts`` / ``ends``), needed for evidence.

    Returns
    -------
    TokenStream
    """
    texts = list(texts)
    index: dict[str, int] = {DOCUMENT_SEPARATOR: 0}
    parts = [_tokenize_batch(texts[at:at + BATCH_SIZE], index, offsets)
             for at in range(0, len(texts), BATCH_SIZE)]
    raw = np.concatenate([p[0] for p in parts]) if parts else np.zeros(0, np.int32)
    counts = np.concatenate([p[1] for p in parts]) if parts else np.zeros(0, np.int64)
    doc_offsets = np.zeros(len(texts) + 1, dtype=np.int64)
    np.cumsum(counts, out=doc_offsets[1:])
    starts = ends = None
    if offsets:
        starts = np.concatenate([p[2] for p in parts]) if parts else np.zeros(0, np.int32)
        ends = np.concatenate([p[3] for p in parts]) if parts else np.zeros(0, np.int32)
    del parts
    first_seen = np.array(list(index), dtype=object)
    order = np.argsort(first_seen[1:], kind="stable")  # sorted vocabulary, separator dropped
    remap = np.empty(len(first_seen), dtype=np.int32)
    remap[0] = -1
    remap[1 + order] = np.arange(len(order), dtype=np.int32)
    return TokenStream(codes=remap[raw], doc_offsets=doc_offsets, vocabulary=first_seen[1:][order],
                       starts=starts, ends=ends)
