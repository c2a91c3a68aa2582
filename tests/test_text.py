"""Tokeniser, normalisation, negation scopes and redaction (textkit.text)."""

from __future__ import annotations

import re
import unicodedata

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer

from textkit.text import tokens as text
from textkit.text.redact import REDACTION_LABELS, redact
from textkit.text.tokens import (
    DOCUMENT_SEPARATOR,
    NEGATION_CUES,
    TokenStream,
    default_stop_words,
    is_break_token,
    is_negation_cue,
    normalise,
    normalise_with_offsets,
    token_spans,
    tokenize,
    tokenize_corpus,
    word_tokens,
)

# Invented answers; several have characters whose normalisation changes length.
MIXED = [
    "The ﬁsh stall was closed…",  # ligature (1 -> 2 chars) and ellipsis (1 -> 3)
    "Ｑｕｅｕｅ at Ｍａｒｒｏｗ Ｐｏｉｎｔ, 40 mins",  # full-width letters
    "Cafe\u0301 staff didn\u2019t smile \u2014 rude",  # combining accent, curly apostrophe, em dash
    "½ price tickets for under-5s\u00a0on Tuesdays",  # vulgar fraction, NBSP
    "plain ascii: queue was long",
    None,
    "",
    "\u201cLovely\u201d views at Kestrel Cove \U0001F600\U0001F44D\U0001F3FD",
]


def stream_tokens(stream: TokenStream, document: int) -> list[str]:
    low, high = stream.doc_offsets[document], stream.doc_offsets[document + 1]
    return stream.vocabulary[stream.codes[low:high]].tolist()


def stream_spans(stream: TokenStream, document: int) -> list[tuple[int, int]]:
    low, high = stream.doc_offsets[document], stream.doc_offsets[document + 1]
    return list(zip(stream.starts[low:high].tolist(), stream.ends[low:high].tolist(), strict=True))


# --- normalise ------------------------------------------------------------------


def test_normalise_nfkc_and_lower_case_match_unicodedata():
    # Reference: Python's unicodedata (Unicode NFKC, UAX #15) followed by str.lower.
    samples = ["Ｆｕｌｌ ｗｉｄｔｈ", "ﬁne ﬂowers ﬀ", "Caf\u00e9 CAFE\u0301", "Ⅻ № ™ ㎏", "ÅNGSTRÖM Straße"]
    for sample in samples:
        assert normalise(sample) == unicodedata.normalize("NFKC", sample).lower()
    assert normalise("Ｆｕｌｌ") == "full"
    assert normalise("ﬁne") == "fine"
    assert normalise("CAFE\u0301") == "caf\u00e9"  # composed (NFKC), one character


def test_normalise_quotes_dashes_spaces_and_controls():
    assert normalise("didn\u2019t \u2018x\u2019 \u201cy\u201d \u201ez\u201f \u00abw\u00bb") == \
        "didn't 'x' \"y\" \"z\" \"w\""
    assert normalise("queue\u2014awful") == "queue,awful"  # em dash -> clause break
    assert normalise("a\u2013b") == "a,b"  # en dash
    assert normalise("wi\u2011fi \u2212 x") == "wi-fi - x"  # non-breaking hyphen, minus sign
    assert normalise("a\u00a0b\u2009c\u3000d\u200be\ufeff") == "a b c d e "
    # tab and line breaks stay: they are clause breaks; other controls become spaces
    assert normalise("a\tb\nc\x00d\x07e\x1ef\x7fg") == "a\tb\nc d e f g"
    assert normalise("a\u2028b\u2029c\u0085d") == "a\nb\nc\nd"
    assert normalise("ASCII Only 3.50") == "ascii only 3.50"
    assert normalise("ex\u00adpen\u2060sive") == "expensive"  # invisible soft hyphen, word joiner


def test_invisible_characters_do_not_split_words():
    sample = "Too ex\u00adpensive!"
    assert tokenize(sample) == ["too", "expensive", "!"]
    assert [sample[a:b] for a, b in token_spans(sample)] == ["Too", "ex\u00adpensive", "!"]
    stream = tokenize_corpus([sample])
    assert stream_tokens(stream, 0) == ["too", "expensive", "!"]
    assert stream_spans(stream, 0) == token_spans(sample)


def test_normalise_with_offsets_identity_and_map():
    assert normalise_with_offsets("Plain text")[1] is None
    assert normalise_with_offsets("didn\u2019t")[1] is None  # one-to-one translation keeps identity
    normalised, origin = normalise_with_offsets("aﬁb")
    assert normalised == "afib"
    assert origin.tolist() == [0, 1, 1, 2, 3]  # both letters of "fi" come from index 1
    assert len(origin) == len(normalised) + 1


# --- tokenize -------------------------------------------------------------------


def test_tokenize_keeps_contractions_hyphens_numbers():
    assert tokenize("We didn\u2019t go; I DON'T know") == ["we", "didn't", "go", ";", "i", "don't", "know"]
    assert tokenize("Self-service tills, no wi-fi!") == ["self-service", "tills", ",", "no", "wi-fi", "!"]
    assert tokenize("£3.50 at 10:30 and 1,200 people in 2026") == \
        ["£", "3.50", "at", "10:30", "and", "1,200", "people", "in", "2026"]
    assert tokenize("€5 or $7 or ¥300") == ["€", "5", "or", "$", "7", "or", "¥", "300"]
    assert tokenize("we didn`t mind") == ["we", "didn't", "mind"]  # backtick as apostrophe
    # ... and the same in the corpus tokeniser, whose ASCII texts take a fast path
    ascii_stream = tokenize_corpus(["we didn`t mind", "caf\u00e9 didn`t"])
    assert stream_tokens(ascii_stream, 0) == ["we", "didn't", "mind"]
    assert stream_tokens(ascii_stream, 1) == ["caf\u00e9", "didn't"]


def test_tokenize_emoji_and_break_tokens():
    assert tokenize("great \U0001F600\U0001F44D\U0001F3FD!") == ["great", "\U0001F600", "\U0001F44D\U0001F3FD", "!"]
    assert tokenize("love \u2764\ufe0f it") == ["love", "\u2764\ufe0f", "it"]
    tokens = tokenize('queue (long) - "awful" [sic]. Why?')
    assert tokens == ["queue", "(", "long", ")", "-", '"', "awful", '"', "[", "sic", "]", ".", "why", "?"]
    assert [t for t in tokens if is_break_token(t)] == ["(", ")", "-", '"', '"', "[", "]", ".", "?"]
    assert not is_break_token("self-service") and not is_break_token("3.50") and not is_break_token("£")
    assert tokenize("queue\u2014awful") == ["queue", ",", "awful"]
    assert word_tokens("Long queue, again!") == ["long", "queue", "again"]


def test_tokenize_keeps_words_with_combining_marks_whole():
    # Marks NFKC cannot compose are not \w in Python; a word must not fall apart at them.
    assert tokenize("q\u0303uiet") == ["q\u0303uiet"]
    assert tokenize("नमस्ते दोस्त") == ["नमस्ते", "दोस्त"]  # Devanagari vowel signs and virama
    assert tokenize("İzmir trip") == ["izmir", "trip"]  # dotted capital I lower-cases to plain i
    assert [s[a:b] for s in ["İzmir"] for a, b in token_spans(s)] == ["İzmir"]


def test_word_tokens_match_regex_reference_on_plain_ascii():
    # Common practice: for ASCII letters-only words, tokens are the lower-cased runs of letters.
    sample = "The Harbour at Gull Bay was Lovely. Staff were kind, parking easy!  Toilets OK?"
    expected = re.findall(r"[^\W\d_]+", sample.lower())
    assert word_tokens(sample) == expected


def test_vocabulary_matches_sklearn_countvectorizer():
    # Reference: scikit-learn CountVectorizer with the letters-only token pattern, on texts
    # without hyphens, apostrophes or digits; its vocabulary_ is sorted like ours.
    texts = ["Queue at the Tern Gate was long", "the cafe, the shop. The PIER!", "", "Zebra crossing near Alder Quay"]
    vectorizer = CountVectorizer(token_pattern=r"[^\W\d_]+", lowercase=True).fit(texts)
    stream = tokenize_corpus(texts)
    words = [t for t in stream.vocabulary.tolist() if not is_break_token(t)]
    assert words == sorted(vectorizer.vocabulary_)
    counts = vectorizer.transform(texts).toarray()
    ours = np.zeros_like(counts)
    word_index = {w: vectorizer.vocabulary_[w] for w in words}
    for document in range(len(texts)):
        for token in stream_tokens(stream, document):
            if token in word_index:
                ours[document, word_index[token]] += 1
    np.testing.assert_array_equal(ours, counts)


# --- spans into the original text -------------------------------------------------


@pytest.mark.parametrize("sample", [t for t in MIXED if t])
def test_token_spans_point_at_original_text(sample):
    tokens = tokenize(sample)
    spans = token_spans(sample)
    assert len(spans) == len(tokens)
    for token, (start, end) in zip(tokens, spans, strict=True):
        assert 0 <= start < end <= len(sample)
        assert token in normalise(sample[start:end])  # the span holds what the token came from


def test_token_spans_of_expanding_characters():
    sample = "The ﬁsh stall was closed…"
    spans = dict(zip(tokenize(sample), token_spans(sample), strict=False))
    assert sample[slice(*spans["fish"])] == "ﬁsh"
    assert sample[slice(*spans["closed"])] == "closed"
    # "…" becomes three full stops: each points at the ellipsis, none is an empty span
    dots = [s for t, s in zip(tokenize(sample), token_spans(sample), strict=True) if t == "."]
    assert [sample[a:b] for a, b in dots] == ["…", "…", "…"]
    half = "½ off"
    assert tokenize(half) == ["1", "2", "off"]  # NFKC: 1 FRACTION SLASH 2
    assert [half[a:b] for a, b in token_spans(half)] == ["½", "½", "off"]
    accent = "Cafe\u0301 staff"
    assert [accent[a:b] for a, b in token_spans(accent)] == ["Cafe\u0301", "staff"]
    wide = "Ｑｕｅｕｅ long"
    assert [wide[a:b] for a, b in token_spans(wide)] == ["Ｑｕｅｕｅ", "long"]


def test_stream_offsets_equal_token_spans_per_document():
    stream = tokenize_corpus(MIXED)
    assert stream.n_documents == len(MIXED)
    for document, sample in enumerate(MIXED):
        if not sample:
            assert stream_tokens(stream, document) == []
            continue
        assert stream_tokens(stream, document) == tokenize(sample)
        assert stream_spans(stream, document) == token_spans(sample)
    plain = MIXED.index("plain ascii: queue was long")
    spans = stream_spans(stream, plain)
    assert [MIXED[plain][a:b] for a, b in spans] == ["plain", "ascii", ":", "queue", "was", "long"]


def test_batched_stream_equals_unbatched(monkeypatch):
    corpus = [MIXED[i % len(MIXED)] for i in range(23)] + ["new word zzyzx at the end"]
    whole = tokenize_corpus(corpus)
    monkeypatch.setattr(text, "BATCH_SIZE", 3)
    batched = tokenize_corpus(corpus)
    assert len(range(0, len(corpus), text.BATCH_SIZE)) > 5  # really several batches
    np.testing.assert_array_equal(batched.vocabulary, whole.vocabulary)
    np.testing.assert_array_equal(batched.codes, whole.codes)
    np.testing.assert_array_equal(batched.doc_offsets, whole.doc_offsets)
    np.testing.assert_array_equal(batched.starts, whole.starts)
    np.testing.assert_array_equal(batched.ends, whole.ends)
    for document, sample in enumerate(corpus):
        if sample:
            assert stream_spans(batched, document) == token_spans(sample)
    unspanned = tokenize_corpus(corpus, offsets=False)
    assert unspanned.starts is None and unspanned.ends is None
    np.testing.assert_array_equal(unspanned.codes, whole.codes)


@settings(max_examples=150, deadline=None, suppress_health_check=list(HealthCheck))
@given(st.lists(st.lists(st.sampled_from(
    list("ab Z-'`.,:3\t\x1e") + ["\u2019", "\u201c", "\u2014", "ﬁ", "Ｑ", "e\u0301", "…", "½", "İ",
                                 "\u00a0", "\u200b", "\u00ad", "\U0001F600", "£", "ß"]),
    max_size=10).map("".join), max_size=4))
def test_stream_agrees_with_single_text_functions(texts):
    # Property: the one-pass corpus tokeniser equals tokenize()/token_spans() text by text.
    stream = tokenize_corpus(texts)
    for document, sample in enumerate(texts):
        assert stream_tokens(stream, document) == tokenize(sample)
        spans = stream_spans(stream, document)
        assert spans == token_spans(sample)
        for token, (start, end) in zip(tokenize(sample), spans, strict=True):
            assert 0 <= start < end <= len(sample) and token in normalise(sample[start:end])


def test_vocabulary_sorted_and_doc_offsets():
    stream = tokenize_corpus(["b a c", None, "", "a a", "c"])
    assert stream.vocabulary.tolist() == ["a", "b", "c"]
    assert stream.doc_offsets.tolist() == [0, 3, 3, 3, 5, 6]
    assert stream.codes.tolist() == [1, 0, 2, 0, 0, 2]
    assert stream.document_index().tolist() == [0, 0, 0, 3, 3, 4]
    assert stream.position_in_document().tolist() == [0, 1, 2, 0, 1, 0]
    assert stream.n_documents == 5 and stream.n_tokens == 6
    many = tokenize_corpus(["zeta Ärger alpha éclair 10:30 £ queue.", "Beta"])
    assert many.vocabulary.tolist() == sorted(many.vocabulary.tolist())


def test_empty_and_missing_documents():
    empty = tokenize_corpus([])
    assert empty.n_documents == 0 and empty.n_tokens == 0
    assert empty.doc_offsets.tolist() == [0] and len(empty.vocabulary) == 0
    assert empty.negated_mask().shape == (0,)
    blank = tokenize_corpus([None, "", float("nan"), "   "])
    assert blank.n_documents == 4 and blank.n_tokens == 0
    assert blank.doc_offsets.tolist() == [0, 0, 0, 0, 0]
    assert tokenize("") == [] and token_spans("") == []


def test_text_containing_the_document_separator():
    texts = [f"queue{DOCUMENT_SEPARATOR}long", "free wifi", f"caf\u00e9{DOCUMENT_SEPARATOR}shut"]
    stream = tokenize_corpus(texts)
    assert stream.n_documents == 3
    assert stream_tokens(stream, 0) == ["queue", "long"]
    assert stream_tokens(stream, 1) == ["free", "wifi"]
    assert stream_tokens(stream, 2) == ["caf\u00e9", "shut"]
    assert DOCUMENT_SEPARATOR not in stream.vocabulary.tolist()
    assert [texts[0][a:b] for a, b in stream_spans(stream, 0)] == ["queue", "long"]
    assert tokenize(texts[0]) == ["queue", "long"]


# --- negation -------------------------------------------------------------------


def negated_words(sample: str, window: int = 4) -> list[str]:
    stream = tokenize_corpus([sample])
    mask = stream.negated_mask(window)
    return [t for t, m in zip(stream_tokens(stream, 0), mask.tolist(), strict=True) if m]


def test_negation_window_and_cue_itself():
    assert negated_words("no queues at all today sadly") == ["queues", "at", "all", "today"]
    assert negated_words("no queues at all today sadly", window=2) == ["queues", "at"]
    assert negated_words("it was not too expensive") == ["too", "expensive"]
    assert negated_words("we didn't wait long") == ["wait", "long"]
    assert negated_words("never crowded") == ["crowded"]
    assert negated_words("lovely quiet beach") == []
    assert is_negation_cue("wouldn't") and is_negation_cue("without") and not is_negation_cue("note")


def test_negation_closed_by_breaks_and_contrast_words():
    assert negated_words("no queues, but expensive") == ["queues"]
    assert negated_words("no queues but expensive") == ["queues"]
    assert negated_words("no queues. expensive") == ["queues"]
    assert negated_words("not crowded however loud") == ["crowded"]
    assert negated_words("not crowded \u2014 loud") == ["crowded"]  # em dash is a clause break
    assert negated_words("not (really) busy") == []


def test_negation_does_not_cross_documents():
    stream = tokenize_corpus(["toilets were not", "clean and tidy", "no", "", "queue"])
    assert not stream.negated_mask(4).any()
    stream = tokenize_corpus(["great day", "not busy"])
    assert stream.negated_mask(4).tolist() == [False, False, False, True]


def test_default_stop_words_keep_negations():
    stops = default_stop_words()
    assert {"the", "and", "a"} <= stops
    assert not any(is_negation_cue(word) for word in stops)
    assert not stops & (NEGATION_CUES | {"nor", "without", "never"})


# --- redaction ------------------------------------------------------------------


def test_redact_contact_details_and_references():
    sample = ("Mail jo.bloggs+trip@example-mail.com or see www.wrenhaven.org/visit and "
              "https://tickets.example.net/x?y=1, call +44 20 7946 0958 or (0161) 496-0000, "
              "booking BK20260412345 and order 98765432.")
    cleaned = redact(sample)
    for secret in ("jo.bloggs", "wrenhaven", "tickets.example", "7946", "496-0000", "BK2026", "98765432"):
        assert secret not in cleaned
    assert cleaned.count(REDACTION_LABELS["email"]) == 1
    assert cleaned.count(REDACTION_LABELS["url"]) == 2
    assert cleaned.count(REDACTION_LABELS["phone"]) >= 2
    assert REDACTION_LABELS["number"] in cleaned
    assert cleaned.startswith("Mail [email] or see [link] and [link]")


def test_redact_keeps_ordinary_numbers():
    sample = "Paid £3.50 at 10:30 in 2026 for 2 adults; open 9.30-17.00 and 10:00 - 16:30, 1,200 people"
    assert redact(sample) == sample


def test_redact_names_whole_words_only():
    cleaned = redact("Ranger Marla Quist was great, marla helped; Marlasson did not", names=["Marla", "Quist", " "])
    assert cleaned == "Ranger [name] [name] was great, [name] helped; Marlasson did not"
    assert redact(None) is None
    assert redact("no names here", names=[]) == "no names here"


def test_negated_at_matches_a_plain_scan_of_each_answer():
    # reference: the rule of the module docstring, written as a plain loop over each answer's tokens
    import random

    from textkit.text.tokens import CONTRAST_WORDS, is_break_token, is_negation_cue

    rng = random.Random(11)
    words = ["no", "not", "a", "b", "c", ".", ",", "but", "never", "x", "don't", "queue"]
    docs = [" ".join(rng.choice(words) for _ in range(rng.randint(0, 14))) for _ in range(600)]
    stream = tokenize_corpus(docs)
    tokens = stream.vocabulary[stream.codes]
    for window in (1, 3, 4):
        expected = []
        for d in range(stream.n_documents):
            last_cue = None
            for i in range(stream.doc_offsets[d], stream.doc_offsets[d + 1]):
                token = tokens[i]
                if is_break_token(token) or token in CONTRAST_WORDS:
                    last_cue = None
                    expected.append(False)
                elif is_negation_cue(token):
                    last_cue = i
                    expected.append(False)
                else:
                    expected.append(last_cue is not None and i - last_cue <= window)
        assert stream.negated_mask(window).tolist() == expected
        picks = np.sort(np.random.default_rng(window).choice(stream.n_tokens, size=50, replace=False))
        assert stream.negated_at(picks, window).tolist() == [expected[i] for i in picks]


def test_redact_all_equals_redact_on_each_text():
    from textkit.text.redact import redact, redact_all

    texts = ["queue", "mail me at ann@example.org", None, "call 07700 900123", "ref BK20260412345",
             "see www.halvessa-isles.example", "3.50 was fine", "plain words only"]
    # reference: redact() applied one text at a time
    assert redact_all(texts) == [redact(t) if t is not None else None for t in texts]
