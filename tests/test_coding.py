"""Coding answers with a theme lexicon (textkit.coding.ThemeCoder)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from nltk.stem.snowball import SnowballStemmer
from sklearn.base import clone
from sklearn.feature_extraction.text import TfidfTransformer
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import FunctionTransformer

from textkit.coding.coder import CodingResult, ThemeCoder
from textkit.coding.lexicon import load_lexicon, parse_lexicon
from textkit.errors import InputError
from textkit.text.inflect import fold, key_function
from textkit.text.tokens import (
    NON_NEGATING_PHRASES,
    default_stop_words,
    is_break_token,
    is_negation_cue,
    token_spans,
    tokenize,
    tokenize_corpus,
)

STARTER = Path(__file__).resolve().parents[1] / "lexicons" / "visitor_experience.yaml"

# An invented lexicon exercising every matching rule; theme order = column order.
LEXICON = parse_lexicon("""\
lexicon: coding-tests
version: "t1"
settings:
  negation_window: 4
themes:
  - id: facilities
    label: Facilities
    negated: keep
    terms: [facilities]
  - id: toilets
    label: Toilets
    parent: facilities
    negated: keep
    terms: [toilet]
  - id: baby_change
    label: Baby changing
    parent: toilets
    negated: keep
    terms: [baby changing]
  - id: cost
    label: Cost
    negated: drop
    terms: [expens*, rip off, not cheap, value for money, price, free, steep, parking fee, "£"]
    exclude: [free parking, steep path]
  - id: parking
    label: Parking
    negated: keep
    terms: [parking, car park]
  - id: queues
    label: Queues
    negated: drop
    terms: [queue, long wait, wait, wait time, queu*, {term: lines, inflect: false}]
    exclude: [can't wait to]
  - id: service
    label: Service
    negated: drop
    terms: [self-service, staff, fish]
""", source="coding-tests.yaml")
THEMES = LEXICON.ids


def column(theme: str) -> int:
    return THEMES.index(theme)


def code(documents, lexicon=LEXICON, **kwargs) -> CodingResult:
    return ThemeCoder(lexicon, **kwargs).fit(documents).code(documents)


def coded(sample: str, lexicon=LEXICON, **kwargs) -> set[str]:
    """Themes that one answer raises."""
    result = code([sample], lexicon, **kwargs)
    return {result.themes[j] for j in result.matrix[0].indices}


def one_theme_lexicon(terms: str, negated: str = "drop", inflect: bool = True, exclude: str = "") -> str:
    extra = f"\n    exclude: [{exclude}]" if exclude else ""
    return (f"lexicon: small\nsettings: {{inflect: {str(inflect).lower()}}}\nthemes:\n"
            f"  - id: theme\n    label: Theme\n    negated: {negated}\n    terms: [{terms}]{extra}\n")


# --- single words, inflections, wildcards --------------------------------------------


def test_single_words_and_case():
    assert coded("The FACILITIES were great") == {"facilities"}
    assert coded("staff were kind") == {"service"}
    assert coded("nothing to report") == set()
    assert coded("staffroom") == set()  # a word is matched whole


# Inflection pairs that must match and derivation pairs that must not (common practice: English
# and German grammar; the first English rows are the cases listed in the issue that asked for this).
INFLECTION_TABLE = {
    "en": {
        "match": [("queue", "queues"), ("queue", "queued"), ("queue", "queuing"), ("queue", "queueing"),
                  ("child", "children"), ("wait", "waited"), ("wait", "waiting"), ("toilet", "toilets"),
                  ("price", "prices"), ("cheap", "cheaper"), ("go", "went"), ("ferry", "ferries"),
                  ("bus", "buses"), ("swim", "swam"), ("toilets", "toilet"), ("waiting", "wait")],
        "differ": [("friend", "friendly"), ("set", "setting"), ("light", "lighting"),
                   ("special", "specialize"), ("busy", "business"), ("park", "parking"),
                   ("apart", "apartment"), ("enjoyed", "enjoyable"), ("broken", "break"),
                   ("outing", "out"), ("queue", "queen"), ("fee", "feel")],
    },
    "de": {
        "match": [("schlange", "schlangen"), ("kind", "kinder"), ("kind", "kindern"), ("warten", "wartete"),
                  ("warten", "gewartet"), ("teuer", "teurer"), ("toilette", "toiletten"),
                  ("parkplatz", "parkplätze"), ("preis", "preise"), ("strand", "strände"), ("zug", "züge")],
        "differ": [("freundlich", "freund"), ("preis", "preiswert"), ("kind", "kindlich"),
                   ("sauber", "säubern"), ("parkplatz", "park"), ("laut", "lärm")],
    },
}


@pytest.mark.parametrize("language", sorted(INFLECTION_TABLE))
def test_inflections_match_and_derivations_do_not(language):
    for relation, pairs in INFLECTION_TABLE[language].items():
        for term, answer in pairs:
            lexicon = parse_lexicon(f"lexicon: x\nlanguage: {language}\nthemes:\n"
                                    f"  - {{id: t, label: T, terms: [{term}]}}\n")
            got = coded(f"the {answer} here", lexicon) == {"t"}
            assert got == (relation == "match"), (language, term, answer)


@pytest.mark.parametrize(("answer", "expected"), [
    ("the steps down to Pellin Sands", set()),  # capitalised words side by side: a name
    ("Pellin Sands was busy", set()), ("the Sands Hotel bar", set()),  # the name's other word before or after
    ("we walked to Quillon Gardens", {"t"}),  # a term written as the name has it still matches
    ("sands everywhere", {"t"}), ("Sands everywhere", {"t"}),  # the capital opens the answer
    ("Beaches, Sands, Views", {"t"}), ("beaches. Sands too", {"t"}),  # capitals after a break
    ("the Sands were lovely", {"t"}), ("The Sands were lovely", {"t"}),  # a lone capital, or after a stop word
    ("SANDS EVERYWHERE", {"t"}),  # all capitals are not a name
])
def test_names_match_only_as_written(answer, expected):
    # Names do not inflect (common practice): "Sands" in "Pellin Sands" is not sand.
    lexicon = parse_lexicon("lexicon: x\nthemes:\n  - {id: t, label: T, terms: [sand, gardens]}\n")
    assert coded(answer, lexicon) == expected
    assert ThemeCoder(lexicon).fit([answer]).transform([answer]).toarray()[0].sum() == len(expected)


def test_capitalised_nouns_inflect_in_languages_that_capitalise_them():
    lexicon = parse_lexicon("lexicon: x\nlanguage: de\nthemes:\n  - {id: t, label: T, terms: [strand]}\n")
    assert coded("wir waren am Strand und die Strände waren voll", lexicon) == {"t"}
    assert coded("die vielen Strände", lexicon) == {"t"}


def test_inflect_stem_follows_snowball_stemmer():
    # Reference: nltk's SnowballStemmer("english"): with inflect: stem a word matches "queue"/"try"
    # iff it has the same stem (or is the word itself).
    stem = SnowballStemmer("english").stem
    candidates = ["queue", "queues", "queued", "queuing", "queueing", "queen", "query",
                  "try", "tries", "tried", "trying", "trial", "die", "dies", "died", "dying", "diet",
                  "fly", "flies", "flying", "flyer", "toilet", "toilets", "toileting", "toiletries"]
    for base in ("queue", "try", "die", "fly", "toilet"):
        lexicon = parse_lexicon(one_theme_lexicon(f"{{term: {base}, inflect: stem}}"))
        result = code(candidates, lexicon)
        got = result.matrix.toarray()[:, 0].astype(bool)
        expected = np.array([word == base or stem(word) == stem(base) for word in candidates])
        np.testing.assert_array_equal(got, expected, err_msg=base)
        assert expected.sum() >= 3  # the check really involves other forms


def test_inflect_false_matches_only_the_written_form():
    lexicon = parse_lexicon(one_theme_lexicon("{term: lines, inflect: false}, wait", inflect=True))
    result = code(["two lines", "one line", "we waited", "lined up"], lexicon)
    assert result.matrix.toarray()[:, 0].tolist() == [1, 0, 1, 0]
    theme_off = parse_lexicon(one_theme_lexicon("wait", inflect=False))
    assert code(["we waited", "wait"], theme_off).matrix.toarray()[:, 0].tolist() == [0, 1]


def test_wildcard_prefix():
    lexicon = parse_lexicon(one_theme_lexicon("expens*", inflect=False))
    documents = ["expensive", "expenses", "expense", "expo", "inexpensive", "exp", "EXPENSIVELY priced"]
    assert code(documents, lexicon).matrix.toarray()[:, 0].tolist() == [1, 1, 1, 0, 0, 0, 1]


def test_fit_on_one_set_transform_another_catches_new_words():
    coder = ThemeCoder(LEXICON).fit(["the price was fine", "queue"])
    new = ["so expensivo", "queuers everywhere", "expo hall"]  # words unseen at fit time
    matrix = coder.transform(new).toarray()
    assert matrix[0, column("cost")] == 1  # expens* catches a new misspelling
    assert matrix[1, column("queues")] == 1  # queu*
    assert matrix[2].sum() == 0
    assert coder.vocabulary_.tolist() == ["fine", "price", "queue", "the", "was"]
    table = coder.term_table_.set_index(["theme", "term"])
    assert table.loc[("cost", "price"), "vocabulary_matches"] == 1
    assert table.loc[("cost", "expens*"), "vocabulary_matches"] == 0
    assert table.loc[("queues", "queu*"), "vocabulary_matches"] == 1
    assert bool(table.loc[("cost", "free parking"), "exclusion"])


# --- phrases and hyphen variants ---------------------------------------------------


def test_phrases_must_be_adjacent_in_one_clause_and_document():
    theme = column("cost")
    documents = ["good value for money", "value for your money", "value for. money", "value for, money",
                 "value (for) money", "money for value", "great value for", "money here", "value for money!"]
    result = code(documents)
    assert result.matrix.toarray()[:, theme].tolist() == [1, 0, 0, 0, 0, 0, 0, 0, 1]
    assert result.term_hits[("cost", "value for money")] == 2


def test_hyphen_variants():
    cost, service = column("cost"), column("service")
    result = code(["a rip-off", "a rip off", "rip, off", "self service tills", "self-service", "self, service"])
    matrix = result.matrix.toarray()
    assert matrix[:, cost].tolist() == [1, 1, 0, 0, 0, 0]
    assert matrix[:, service].tolist() == [0, 0, 0, 1, 1, 0]
    assert result.evidence["matched_text"].tolist() == ["rip-off", "rip off", "self service", "self-service"]


# --- exclusions ---------------------------------------------------------------------


def test_exclusion_vetoes_overlapping_hits_of_its_own_theme_only():
    cost, parking = column("cost"), column("parking")
    result = code(["free parking", "free parking but expensive food", "entry was free", "steep path down",
                   "steep prices", "parking fee"])
    matrix = result.matrix.toarray()
    assert matrix[:, cost].tolist() == [0, 1, 1, 0, 1, 1]
    assert matrix[:, parking].tolist() == [1, 1, 0, 0, 0, 1]  # another theme's hit is not vetoed
    assert result.dropped["excluded"] == 3  # "free" twice, "steep" once
    vetoed = result.evidence[(result.evidence.document == 1) & (result.evidence.theme == "cost")]
    assert vetoed["matched_text"].tolist() == ["expensive"]  # not the vetoed "free"


def test_exclusion_in_negated_scope_still_vetoes():
    queues = column("queues")
    result = code(["can't wait to come back", "can't wait to return, but the queue was long"])
    assert result.matrix.toarray()[:, queues].tolist() == [0, 1]
    assert result.evidence["matched_text"].tolist() == ["queue"]


# --- negation -----------------------------------------------------------------------


def test_negation_drop_versus_keep():
    assert coded("no queues at all") == set()
    assert coded("there were no toilets") == {"toilets", "facilities"}  # keep theme
    assert coded("not too expensive") == set()
    assert coded("no queues, but expensive") == {"cost"}
    assert coded("no queues but expensive") == {"cost"}
    assert coded("it was not cheap") == {"cost"}  # a term opening with a cue is not negated by it
    assert coded("never had to wait. long queue") == {"queues"}
    result = code(["no queues at all", "not too expensive"])
    assert result.dropped["negated"] == 3  # queue and queu* on "queues", expens*
    assert result.term_hits[("queues", "queue")] == 0


def test_negation_window_setting_and_override():
    assert coded("not really that expensive") == set()  # 3 tokens after "not"
    assert coded("not really that expensive", negation_window=2) == {"cost"}
    narrow = parse_lexicon(one_theme_lexicon("expens*").replace("settings: {", "settings: {negation_window: 1, "))
    assert narrow.negation_window == 1
    assert coded("not too expensive", narrow) == {"theme"}
    assert coded("not expensive", narrow) == set()


# --- contained matches and overlaps -------------------------------------------------


def test_contained_matches_dropped_within_a_theme():
    result = code(["a long wait", "a long wait time", "wait", "queue queue"])
    queues = column("queues")
    assert result.hits.toarray()[:, queues].tolist() == [1, 2, 1, 2]
    hits = result.term_hits
    assert hits[("queues", "long wait")] == 2
    assert hits[("queues", "wait time")] == 1  # overlaps "long wait" without being inside it
    assert hits[("queues", "wait")] == 1
    assert hits[("queues", "queue")] == 2 and hits[("queues", "queu*")] == 0  # same span kept once
    # "wait" inside "long wait" (documents 0 and 1), queu* repeating "queue" twice
    assert result.dropped["contained"] == 4


def test_overlapping_matches_in_two_themes_both_count():
    result = code(["the parking fee was steep"])
    assert result.hits.toarray()[0, column("parking")] == 1
    assert result.hits.toarray()[0, column("cost")] == 2  # "parking fee" and "steep"
    assert set(result.evidence["theme"]) == {"parking", "cost"}
    assert sorted(result.evidence["matched_text"]) == ["parking", "parking fee", "steep"]


# --- hierarchy --------------------------------------------------------------------


def test_hierarchy_rolls_up_three_levels():
    facilities, toilets, baby = column("facilities"), column("toilets"), column("baby_change")
    result = code(["baby changing was dirty", "toilets and facilities and baby changing", "facilities", "x"])
    matrix, hits, direct = result.matrix.toarray(), result.hits.toarray(), result.direct.toarray()
    assert matrix[:, [facilities, toilets, baby]].tolist() == [[1, 1, 1], [1, 1, 1], [1, 0, 0], [0, 0, 0]]
    assert direct[1, [facilities, toilets, baby]].tolist() == [1, 1, 1]
    assert hits[1, [facilities, toilets, baby]].tolist() == [3, 2, 1]
    assert hits[0, [facilities, toilets, baby]].tolist() == [1, 1, 1]
    # reference: roll-up is direct @ M with M from the lexicon (child row -> ancestors)
    np.testing.assert_array_equal(hits, direct @ LEXICON.rollup_matrix().toarray())
    assert result.evidence.loc[result.evidence.document == 0, "theme"].tolist() == ["baby_change"]


def test_matrix_types_and_shapes():
    result = code(["free wifi", "queue", None])
    assert sp.issparse(result.matrix) and result.matrix.shape == (3, len(THEMES))
    assert result.matrix.dtype == np.int8 and result.hits.dtype == np.int32
    assert set(np.unique(result.matrix.toarray())) <= {0, 1}
    assert result.themes == THEMES
    np.testing.assert_array_equal(result.matrix.toarray(), (result.hits.toarray() > 0).astype(np.int8))


# --- evidence, term hits, dropped ----------------------------------------------------


EVIDENCE_DOCUMENTS = [
    "The ＴＯＩＬＥＴＳ were closed\u2026 and a rip\u2011off at £4",
    "Cafe\u0301 staff \u2014 no queue, but a long wait",
    "ﬁsh was pricey; the price\u00a0was a rip off",
    None,
    "value for money",
]


def test_evidence_rows_point_at_the_original_text():
    result = code(EVIDENCE_DOCUMENTS)
    evidence = result.evidence
    assert list(evidence.columns) == ["document", "theme", "term", "start", "end", "negated", "matched_text"]
    for row in evidence.itertuples():
        assert EVIDENCE_DOCUMENTS[row.document][row.start:row.end] == row.matched_text
    rows = list(evidence[["document", "theme", "term", "matched_text"]].itertuples(index=False, name=None))
    assert rows == [
        (0, "toilets", "toilet", "ＴＯＩＬＥＴＳ"),
        (0, "cost", "rip off", "rip\u2011off"),
        (0, "cost", "£", "£"),
        (1, "service", "staff", "staff"),
        (1, "queues", "long wait", "long wait"),
        (2, "service", "fish", "ﬁsh"),
        (2, "cost", "price", "price"),
        (2, "cost", "rip off", "rip off"),
        (4, "cost", "value for money", "value for money"),
    ]
    assert evidence["document"].is_monotonic_increasing
    assert len(evidence) == int(result.direct.sum())


def test_evidence_from_a_token_stream_needs_texts():
    stream = tokenize_corpus(EVIDENCE_DOCUMENTS)
    coder = ThemeCoder(LEXICON).fit(stream)
    with_texts = coder.code(stream, texts=EVIDENCE_DOCUMENTS)
    direct = coder.code(EVIDENCE_DOCUMENTS)
    pd.testing.assert_frame_equal(with_texts.evidence, direct.evidence)
    assert coder.code(stream).evidence["matched_text"].isna().all()
    with pytest.raises(ValueError, match="offsets"):
        coder.code(tokenize_corpus(EVIDENCE_DOCUMENTS, offsets=False))


def test_texts_are_taken_by_position_and_checked():
    stream = tokenize_corpus(["long queue", "steep prices"])
    coder = ThemeCoder(LEXICON).fit(stream)
    labelled = pd.Series(["long queue", "steep prices"], index=[1, 0])  # labels are not positions
    assert coder.code(stream, texts=labelled).evidence["matched_text"].tolist() == ["queue", "steep", "prices"]
    with pytest.raises(InputError, match="2 documents"):
        coder.code(stream, texts=["long queue"])
    with pytest.raises(InputError, match="single string"):
        coder.code("long queue")
    with pytest.raises(InputError, match="single string"):
        ThemeCoder(LEXICON).fit("long queue")


def test_term_hits_list_every_term_with_zeros():
    result = code(["queue queue", "a long wait", "the price"])
    hits = result.term_hits
    assert hits.index.names == ["theme", "term"]
    expected_terms = [(theme.id, term.text) for theme in LEXICON.themes for term in theme.terms]
    assert list(hits.index) == expected_terms  # exclusions not listed
    assert hits[("queues", "queue")] == 2 and hits[("queues", "long wait")] == 1
    assert hits[("cost", "price")] == 1
    assert hits.drop([("queues", "queue"), ("queues", "long wait"), ("cost", "price")]).eq(0).all()
    assert int(hits.sum()) == len(result.evidence) == int(result.direct.sum())
    # queu* repeating "queue" twice, "wait" inside "long wait"
    assert result.dropped == {"negated": 0, "excluded": 0, "contained": 3, "nothing_to_report": 0}


# --- empty input, determinism, errors ------------------------------------------------


def test_empty_corpus_and_all_empty_documents():
    coder = ThemeCoder(LEXICON).fit([])
    assert coder.transform([]).shape == (0, len(THEMES))
    result = coder.code([None, "", "   ", float("nan")])
    assert result.matrix.shape == (4, len(THEMES)) and result.matrix.nnz == 0
    assert result.hits.shape == (4, len(THEMES)) and result.hits.nnz == 0
    assert result.evidence.empty and result.term_hits.eq(0).all()
    assert ThemeCoder(LEXICON).fit_transform(["", None]).toarray().tolist() == [[0] * len(THEMES)] * 2


def test_coding_is_deterministic():
    documents = EVIDENCE_DOCUMENTS * 3 + ["no queues, but expensive", "baby changing"]
    first, second = code(documents), code(list(reversed(documents)))
    again = code(documents)
    np.testing.assert_array_equal(first.matrix.toarray(), again.matrix.toarray())
    pd.testing.assert_frame_equal(first.evidence, again.evidence)
    pd.testing.assert_series_equal(first.term_hits, again.term_hits)
    # order of the documents changes nothing but the row order
    np.testing.assert_array_equal(first.matrix.toarray(), second.matrix.toarray()[::-1])


def test_code_before_fit_raises():
    with pytest.raises(RuntimeError, match="fit"):
        ThemeCoder(LEXICON).transform(["queue"])


# --- scikit-learn compatibility ----------------------------------------------------


def test_sklearn_clone_and_params():
    coder = ThemeCoder(LEXICON, negation_window=2)
    assert repr(coder) == "ThemeCoder(lexicon=<lexicon 'coding-tests' version 't1', 7 themes>, negation_window=2)"
    with pytest.raises(ValueError, match="Invalid parameter"):
        coder.set_params(window=3)
    assert coder.get_params() == {"lexicon": LEXICON, "negation_window": 2}
    copy = clone(coder)  # reference: scikit-learn's estimator contract
    assert copy is not coder and copy.get_params()["negation_window"] == 2
    assert copy.get_params()["lexicon"] == LEXICON
    assert not hasattr(copy, "themes_")  # clone is unfitted
    assert coder.set_params(negation_window=1) is coder and coder.negation_window == 1
    fitted = coder.fit(["x"])
    assert fitted.themes_ == THEMES


def test_sklearn_pipeline():
    documents = ["  Long queue  ", "free parking", "no queues"]
    pipeline = Pipeline([("strip", FunctionTransformer(lambda texts: [t.strip() for t in texts])),
                         ("code", ThemeCoder(LEXICON))])
    matrix = pipeline.fit_transform(documents)
    np.testing.assert_array_equal(matrix.toarray(), code(documents).matrix.toarray())
    assert clone(pipeline).fit(documents).transform(documents).shape == (3, len(THEMES))
    weighted = Pipeline([("code", ThemeCoder(LEXICON)), ("tfidf", TfidfTransformer())])
    assert weighted.fit_transform(documents).shape == (3, len(THEMES))


# --- invariant: adding a term never removes a match ----------------------------------

WORDS = ["queue", "wait", "long", "free", "park", "staff", "no", "not", "x", ",", "but"]


@settings(max_examples=60, deadline=None, suppress_health_check=list(HealthCheck))
@given(documents=st.lists(st.lists(st.sampled_from(WORDS), max_size=8).map(" ".join), min_size=1, max_size=6),
       extra=st.lists(st.sampled_from(WORDS[:8]), min_size=1, max_size=2).map(" ".join),
       wildcard=st.booleans(), theme_index=st.integers(0, 1))
# a new longer match that is negated (window edge) or vetoed must not swallow the old one
@example(documents=["not x x x long wait"], extra="long wait", wildcard=False, theme_index=0)
@example(documents=["wait free park"], extra="wait free", wildcard=False, theme_index=0)
def test_adding_a_term_never_removes_a_match(documents, extra, wildcard, theme_index):
    # The 0/1 matrix only: hit counts may fall when a new longer match contains older ones.
    base = ("lexicon: grow\nthemes:\n"
            "  - id: problems\n    label: P\n    negated: drop\n    terms: [{a}]\n    exclude: [free park]\n"
            "  - id: places\n    label: Q\n    negated: keep\n    terms: [{b}]\n    exclude: [no staff]\n")
    terms = ["queue, wait, free", "park, staff"]
    before = parse_lexicon(base.format(a=terms[0], b=terms[1]))
    word = extra + ("*" if wildcard and len(extra.split()[-1]) >= 3 else "")
    terms[theme_index] += f", '{word}'"
    after = parse_lexicon(base.format(a=terms[0], b=terms[1]))
    old = code(documents, before).matrix.toarray()
    new = code(documents, after).matrix.toarray()
    assert (new >= old).all()


# --- the starter lexicon ------------------------------------------------------------


def test_starter_lexicon_codes_obvious_answers():
    lexicon = load_lexicon(STARTER)
    answers = {
        "The queue for the ferry took ages": {"queues"},
        "Far too expensive for what it is": {"cost_value"},
        "No queues at all, lovely": {"queues"},  # negated mentions keep their topic
        "The toilets were filthy": {"toilets", "cleanliness"},
        "There were no toilets anywhere": {"toilets"},
    }
    result = ThemeCoder(lexicon).fit(list(answers)).code(list(answers))
    for row, (answer, expected) in enumerate(answers.items()):
        got = {result.themes[j] for j in result.matrix[row].indices}
        assert expected <= got, (answer, got)
        assert not {"queues", "cost_value"} & (got - expected), (answer, got)
    parking = result.themes.index("parking")
    free = ThemeCoder(lexicon).fit(["Free parking by the gate"]).code(["Free parking by the gate"])
    got = {free.themes[j] for j in free.matrix[0].indices}
    assert "parking" in got and "cost_value" not in got and parking >= 0
    facilities = result.themes.index("facilities")
    assert result.matrix[3, facilities] == 1  # toilets roll up to facilities


# --- differential check against a plain-Python reference -----------------------------


def reference_code(lexicon, documents, window):
    """Per-answer loops that apply the documented rules literally (lexicons/README.md).

    Independent of coding.py: tokens from ``tokenize``/``token_spans``, word keys
    (lemmas) from :func:`textkit.text.inflect.key_function` one token at a time, negation
    scopes and overlaps by brute force. Returns the hit counts (n_documents, n_themes)
    after roll-up and the evidence rows.
    """
    lemma_keys = key_function(True, lexicon.language, lexicon.keep_accents)
    stop_words = default_stop_words()
    non_negating = [tuple(tokenize(phrase)) for phrase in NON_NEGATING_PHRASES]
    stops = {",", ".", ";", ":", "!", "?", "(", ")", "[", "]", '"', "but", "however", "although",
             "though", "yet", "except"}

    def word_matches(word, token, inflect, in_name):
        if word.endswith("*"):
            return fold(token).startswith(fold(word[:-1]))
        return fold(token) == fold(word) or bool(inflect and not in_name
                                                 and set(lemma_keys(token)) & set(lemma_keys(word)))

    def literal(spelling, tokens, start):
        return sum(not w.endswith("*") and fold(tokens[start + k]) == fold(w) for k, w in enumerate(spelling))

    def spellings(words):
        if any(w.endswith("*") for w in words):
            return [words]
        if len(words) > 1:
            return [words, ("-".join(words),)]
        if "-" in words[0]:
            return [words, tuple(p for p in words[0].split("-") if p)]
        return [words]

    def spans_of(term, tokens, in_name):
        found = []
        for spelling in spellings(term.words):
            for i in range(len(tokens) - len(spelling) + 1):
                if all(word_matches(w, tokens[i + k], term.inflect, in_name[i + k]) for k, w in enumerate(spelling)):
                    found.append((i, i + len(spelling), literal(spelling, tokens, i)))
        return found

    n_themes = len(lexicon.themes)
    direct = np.zeros((len(documents), n_themes), dtype=int)
    evidence = []
    for d, document in enumerate(documents):
        tokens = tokenize(document) if isinstance(document, str) else []
        chars = token_spans(document) if tokens else []
        written = [document[a:b] for a, b in chars]  # capitalised words side by side in a clause: a name
        capital = [len(w) > 1 and w[0].isupper() and not w.isupper() for w in written]
        named = [capital[i] and t not in stop_words and not is_break_token(t) for i, t in enumerate(tokens)]
        in_name = [capital[i] and i > 0 and not is_break_token(tokens[i - 1])
                   and (named[i - 1] or (i + 1 < len(tokens) and named[i + 1])) for i in range(len(tokens))]
        cue = [is_negation_cue(t) and not any(tuple(tokens[i:i + len(p)]) == p for p in non_negating)
               for i, t in enumerate(tokens)]
        negated = []
        for i, token in enumerate(tokens):
            inside = False
            for p in range(max(0, i - window), i):
                if cue[p] and not any(tokens[q] in stops or is_break_token(tokens[q]) for q in range(p + 1, i + 1)):
                    inside = True
            negated.append(inside and not cue[i] and token not in stops and not is_break_token(token))
        for t, theme in enumerate(lexicon.themes):
            vetoes = [span[:2] for term in theme.exclusions for span in spans_of(term, tokens, in_name)]
            alive = []  # (start, end, (-words as written, term order), term text)
            for order, term in enumerate(theme.terms):
                for start, end, exact in spans_of(term, tokens, in_name):
                    if theme.negated == "drop" and negated[start]:
                        continue
                    if any(a < end and start < b for a, b in vetoes):
                        continue
                    alive.append((start, end, (-exact, order), term.text))
            kept = {}
            for start, end, rank, text in alive:
                inside = any(a <= start and end <= b and b - a > end - start for a, b, _, _ in alive)
                if not inside and ((start, end) not in kept or rank < kept[(start, end)][0]):
                    kept[(start, end)] = (rank, text)
            for (start, end), (_, text) in kept.items():
                direct[d, t] += 1
                evidence.append((d, theme.id, text, chars[start][0], chars[end - 1][1]))
    rollup = np.zeros((n_themes, n_themes), dtype=int)
    for i, theme in enumerate(lexicon.themes):
        for ancestor in (theme.id, *lexicon.ancestors(theme.id)):
            rollup[i, lexicon.ids.index(ancestor)] = 1
    return direct @ rollup, sorted(evidence)


POOL = ["queue", "queues", "queued", "wait", "waiting", "long", "free", "park", "parking", "rip-off",
        "rip", "off", "tries", "trying", "not", "no", "never", "but", ",", ".", "x", "ﬁsh", "Ｗａｉｔ",
        "only", "/", "&", "\n", "can't", "went", "go", "children", "child", "café", "CAFE", "Queues", "Waited",
        "Children", "Went", "Parks", "The", "Pellin"]
TERM_WORDS = ["queue", "wait", "long", "free", "park", "rip", "off", "rip-off", "try", "fish", "not", "no",
              "go", "child", "cafe"]


@st.composite
def lexicons(draw):
    lines = ["lexicon: random", f"settings: {{negation_window: {draw(st.integers(1, 4))}}}", "themes:"]
    n_themes = draw(st.integers(1, 3))
    for t in range(n_themes):
        def term(allow_star=True):
            words = draw(st.lists(st.sampled_from(TERM_WORDS), min_size=1, max_size=2))
            if allow_star and draw(st.booleans()) and len(words[-1]) >= 3 and "-" not in words[-1]:
                words[-1] = words[-1][:3] + "*"
            flag = draw(st.sampled_from(["", ", inflect: false", ", inflect: true"]))
            return f"{{term: '{' '.join(words)}'{flag}}}"
        terms = ", ".join(term() for _ in range(draw(st.integers(1, 3))))
        lines += [f"  - id: t{t}", f"    label: T{t}", f"    negated: {draw(st.sampled_from(['drop', 'keep']))}",
                  f"    terms: [{terms}]"]
        if t and draw(st.booleans()):
            lines.append(f"    parent: t{draw(st.integers(0, t - 1))}")
        if draw(st.booleans()):
            lines.append(f"    exclude: [{term(allow_star=False)}]")
    return parse_lexicon("\n".join(lines) + "\n")


@settings(max_examples=80, deadline=None, suppress_health_check=list(HealthCheck))
@given(lexicon=lexicons(),
       documents=st.lists(st.lists(st.sampled_from(POOL), max_size=9).map(" ".join), min_size=1, max_size=4))
@example(lexicon=LEXICON, documents=EVIDENCE_DOCUMENTS)
@example(lexicon=LEXICON, documents=["a long wait time", "queue queue, not too expensive", "free parking fee"])
def test_coder_agrees_with_plain_python_reference(lexicon, documents):
    result = ThemeCoder(lexicon).fit(documents).code(documents)
    hits, evidence = reference_code(lexicon, documents, lexicon.negation_window)
    np.testing.assert_array_equal(result.hits.toarray(), hits)
    np.testing.assert_array_equal(result.matrix.toarray(), (hits > 0).astype(int))
    ours = sorted(result.evidence[["document", "theme", "term", "start", "end"]].itertuples(index=False, name=None))
    assert ours == evidence


# --- clause boundaries, case and accents, negation that keeps the topic -----------------

SEPARATORS = [".", ",", ";", ":", "(", ")", "[", "]", "{", "}", "/", "&", "|", "\u2022", "\t", "\n",
              "\n\n", "\r\n", "\u2028", " - ", "\u2014"]


@pytest.mark.parametrize("separator", SEPARATORS)
def test_phrases_and_negation_scopes_stop_at_every_separator(separator):
    phrase = parse_lexicon(one_theme_lexicon("long wait"))
    dropped = parse_lexicon(one_theme_lexicon("toilet", negated="drop"))
    # "&" between two letters joins a word ("b&b"), so it is tested with spaces around it only
    for joined in ({f" {separator} "} if separator == "&" else {separator, f" {separator} "}):
        assert coded(f"long{joined}wait", phrase) == set()
        assert coded(f"no{joined}toilet", dropped) == {"theme"}  # the scope ended at the separator
    assert coded("long wait", phrase) == {"theme"}
    assert coded("no toilet", dropped) == set()


def test_ampersand_inside_a_word_keeps_it_whole():
    assert tokenize("B&B and AT&T") == ["b&b", "and", "at&t"]
    assert coded("the b&b was grim", parse_lexicon(one_theme_lexicon("b&b"))) == {"theme"}


@pytest.mark.parametrize(("term", "answer", "language"), [
    ("καφές", "ΚΑΦΕΣ", "el"),  # Greek all-caps without the tonos, final sigma folded
    ("ışık", "IŞIK", "tr"), ("izmir", "İZMİR", "tr"),  # Turkish dotless and dotted i
    ("straße", "STRASSE", "de"), ("strasse", "Straße", "de"),  # German ß (full case folding)
    ("café", "CAFE", "fr"), ("cafe", "café", "en"),  # accents folded by default
])
def test_case_folding_and_accents(term, answer, language):
    # Unicode full case folding (Unicode Standard, CaseFolding.txt; common practice)
    lexicon = parse_lexicon(f"lexicon: x\nlanguage: {language}\nsettings: {{inflect: false}}\n"
                            f"themes:\n  - {{id: t, label: T, terms: ['{term}']}}\n")
    result = code([f"un {answer} ici"], lexicon)
    assert result.matrix[0, 0] == 1, (term, answer)
    row = result.evidence.iloc[0]
    assert f"un {answer} ici"[row.start:row.end] == answer  # spans point at the original characters


def test_accents_keep_tells_words_apart():
    lexicon = parse_lexicon("lexicon: x\nlanguage: es\nsettings: {inflect: false, accents: keep}\n"
                            "themes:\n  - {id: t, label: T, terms: [año]}\n")
    assert code(["el año", "el ano"], lexicon).matrix.toarray()[:, 0].tolist() == [1, 0]


def test_negated_mentions_keep_their_topic_and_are_marked():
    lexicon = parse_lexicon("lexicon: x\nthemes:\n"
                            "  - {id: staff, label: S, terms: [guide, friendly]}\n"
                            "  - {id: cost, label: C, negated: value, terms: [expensive]}\n"
                            "  - {id: value, label: V, terms: [good value]}\n"
                            "  - {id: queues, label: Q, negated: drop, terms: [queue]}\n")
    result = code(["The guide was not friendly", "not expensive at all", "no queue", "expensive"], lexicon)
    evidence = result.evidence
    assert list(zip(evidence["document"], evidence["theme"], evidence["negated"], strict=True)) == [
        (0, "staff", False), (0, "staff", True), (1, "value", True), (3, "cost", False)]
    assert result.dropped["negated"] == 1  # "no queue" under negated: drop
    assert result.negated.toarray()[1].tolist() == [0, 0, 1, 0]


@pytest.mark.parametrize("answer", ["not only crowded but dirty", "not just crowded", "no doubt crowded",
                                    "nothing but crowded", "can't wait for the crowded beach",
                                    "couldn't be happier with the crowded beach"])
def test_non_negating_phrases_open_no_scope(answer):
    lexicon = parse_lexicon(one_theme_lexicon("crowded", negated="drop"))
    assert coded(answer, lexicon) == {"theme"}
    assert coded("not crowded", lexicon) == set()


def test_evidence_names_the_term_that_matched():
    lexicon = parse_lexicon(one_theme_lexicon("price, prices, pric*"))
    evidence = code(["the prices", "the price", "pricey"], lexicon).evidence
    assert evidence["term"].tolist() == ["prices", "price", "pric*"]


@pytest.mark.parametrize(("answer", "expected"), [
    ("Nothing", True), ("Nothing really.", True), ("No complaints at all 😊", True),
    ("Can't think of anything", True), ("All good", True), ("It was perfect!", True),
    ("Nothing, it was all perfect", True), ("nope", True), ("Not really", True),
    ("nothing was clean", False), ("no toilets", False), ("not good", False),
    ("nothing to report, but the staff were rude", False), ("The food was good", False),
    ("No problem with parking", False), ("", False),
])
def test_nothing_to_report_list(answer, expected):
    lexicon = load_lexicon(STARTER)
    result = ThemeCoder(lexicon).fit([answer]).code([answer])
    assert bool(result.nothing_to_report[0]) == expected
    if expected:
        assert result.matrix[0].nnz == 0


def test_nothing_to_report_is_configurable_per_lexicon():
    own = parse_lexicon("lexicon: x\nnothing_to_report: [rien]\nthemes:\n  - {id: t, label: T, terms: [x]}\n")
    off = parse_lexicon("lexicon: x\nnothing_to_report: []\nthemes:\n  - {id: t, label: T, terms: [x]}\n")
    assert code(["rien", "nothing"], own).nothing_to_report.tolist() == [True, False]
    assert code(["nothing"], off).nothing_to_report.tolist() == [False]
