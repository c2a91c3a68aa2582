"""Tests of the theme lexicon: format, line-numbered errors, hierarchy, lint, starter lexicon."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse

from textkit.coding.lexicon import (
    LINT_COLUMNS,
    Lexicon,
    load_lexicon,
    parse_lexicon,
    term_words,
)
from textkit.coding.lint import format_lint, lint_lexicon
from textkit.errors import LexiconError

STARTER = Path(__file__).resolve().parents[1] / "lexicons" / "visitor_experience.yaml"

VALID = """\
lexicon: demo
version: 2026.10
language: en
settings:
  negation_window: 6
  inflect: false
themes:
  - id: cost_value
    label: Cost and value
    about: Prices.
    terms:
      - Expensive
      - rip off
      - expens*
      - {term: price, inflect: true}
      - EXPENSIVE
    exclude:
      - free parking
  - id: facilities
    label: Facilities
    negated: keep
    inflect: true
    terms: [bench, seat]
  - id: toilets
    label: Toilets
    parent: facilities
    negated: keep
    terms:
      - toilet
"""


def parse(text: str) -> Lexicon:
    return parse_lexicon(text, source="test.yaml")


def problem_of(text: str) -> LexiconError:
    with pytest.raises(LexiconError) as caught:
        parse(text)
    return caught.value


# --- a valid lexicon -----------------------------------------------------------------


def test_valid_lexicon_fields():
    lexicon = parse(VALID)
    assert (lexicon.name, lexicon.language, lexicon.negation_window) == ("demo", "en", 6)
    assert lexicon.version == "2026.10"  # taken as written, not as the float 2026.1
    assert lexicon.ids == ("cost_value", "facilities", "toilets")
    assert lexicon.source == "test.yaml"
    cost = lexicon.theme("cost_value")
    assert (cost.label, cost.about, cost.parent, cost.negated, cost.line) == (
        "Cost and value", "Prices.", None, "keep", 8)  # keep is the default
    # de-duplicated by words, first occurrence kept, file order kept
    assert [term.words for term in cost.terms] == [("expensive",), ("rip", "off"), ("expens*",), ("price",)]
    assert [term.line for term in cost.terms] == [12, 13, 14, 15]
    assert cost.terms[0].text == "Expensive"
    # settings.inflect: false is the default; a term mapping overrides it
    assert [term.inflect for term in cost.terms] == [False, False, False, True]
    assert cost.exclusions[0].words == ("free", "parking")
    assert cost.exclusions[0].line == 18
    facilities = lexicon.theme("facilities")
    assert facilities.negated == "keep" and all(term.inflect for term in facilities.terms)
    assert lexicon.theme("toilets").parent == "facilities"


def test_defaults_and_terms_as_written():
    lexicon = parse("lexicon: x\nthemes:\n  - id: a\n    label: yes\n"
                    "    terms: [yes, 3.50, 24/7, null word]\n")
    assert (lexicon.version, lexicon.language, lexicon.negation_window) == ("", "en", 4)
    theme = lexicon.themes[0]
    assert theme.label == "yes" and theme.negated == "keep"
    assert lexicon.keep_accents is False and lexicon.nothing_to_report is None
    assert [term.text for term in theme.terms] == ["yes", "3.50", "24/7", "null word"]
    assert [term.words for term in theme.terms] == [("yes",), ("3.50",), ("24", "7"), ("null", "word")]
    assert all(term.inflect for term in theme.terms)


def test_unknown_theme_lookup_suggests():
    lexicon = parse(VALID)
    with pytest.raises(LexiconError, match="did you mean 'toilets'"):
        lexicon.theme("toilet")


# --- term normalisation and wildcards ------------------------------------------------------


@pytest.mark.parametrize(("text", "words"), [
    ("Don\u2019t", ("don't",)),                # curly apostrophe, as text.normalise does
    ("QUEUE", ("queue",)),
    ("  long   Queu* ", ("long", "queu*")),
    ("Wi-Fi", ("wi-fi",)),
    ("\uff37\uff49\uff46\uff49", ("wifi",)),   # full-width letters (NFKC)
    ("queue\u2014awful", ("queue", "awful")),  # an em dash is a clause break, dropped in terms
    ("rip-off!", ("rip-off",)),
    ("self-serv*", ("self-serv*",)),
    ("car/park*", ("car", "park*")),
    ("caf\u00e9*", ("caf\u00e9*",)),
    ("exp*", ("exp*",)),
])
def test_term_words(text, words):
    assert term_words(text) == (words, None)


@pytest.mark.parametrize(("text", "message"), [
    ("*pens", "only end a word"),
    ("ex*ns", "only end a word"),
    ("queu**", "only end a word"),
    ("ab*", "at least 3 characters"),
    ("long ab*", "at least 3 characters"),
    ("**", "lone"),
    ("*", "lone"),
    ("self-*", "must follow the letters"),
    ("...", "no words"),
    ("!?", "no words"),
])
def test_term_words_malformed(text, message):
    words, problem = term_words(text)
    assert words == ()
    assert message in problem


# --- errors, each with its line -----------------------------------------------------------

THEME = "lexicon: x\nthemes:\n  - id: a\n    label: A\n"


@pytest.mark.parametrize(("text", "line", "message"), [
    ("lexicon: x\nthemes:\n  - id: a\n    label: [A\n", 5, "YAML syntax error"),
    ("lexicon: x\nthemes:\n\t- id: a\n", 3, "not tabs"),
    (THEME + "    terms:\n      - *pens\n", 6, "must be quoted"),
    ("lexicon: x\n---\nlexicon: y\n", 2, "one document"),
    ("", 1, "empty"),
    ("- a\n- b\n", 1, "top level must be a mapping"),
    ("just text\n", 1, "top level must be a mapping"),
    ("lexicon: x\nversion: '1'\nthemse:\n  - id: a\n", 3, "unknown key 'themse'"),
    ("themes:\n  - id: a\n    label: A\n    terms: [b]\n", 1, "missing key 'lexicon'"),
    ("lexicon: x\n", 1, "missing key 'themes'"),
    ("lexicon: x\nthemes: []\n", 2, "'themes' must be a list"),
    ("lexicon: x\nthemes:\n  - just a string\n", 3, "each theme must be a mapping"),
    ("lexicon: x\nlexicon: y\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 2,
     "is given twice at the top level (first at line 1)"),
    ("lexicon: x\nlanguage: english!\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 2, "language code"),
    (THEME + "    term: [b]\n", 5, "unknown key 'term' in theme 'a' (did you mean 'terms'?)"),
    (THEME + "    terms: [b]\n    colour: red\n", 6, "valid keys: id, label, about, parent"),
    ("lexicon: x\nthemes:\n  - label: A\n    terms: [b]\n", 3, "theme without 'id'"),
    ("lexicon: x\nthemes:\n  - id: a\n    terms: [b]\n", 3, "has no 'label'"),
    ("lexicon: x\nthemes:\n  - id: a\n    label:\n    terms: [b]\n", 4, "is empty"),
    ("lexicon: x\nthemes:\n  - id: Cost-Value\n    label: A\n    terms: [b]\n", 3, "theme id 'Cost-Value'"),
    ("lexicon: x\nthemes:\n  - id: 1st\n    label: A\n    terms: [b]\n", 3, "lower-case letter"),
    (THEME + "    terms: [b]\n  - id: a\n    label: B\n    terms: [c]\n", 6,
     "theme id 'a' is used twice (first at line 3)"),
    (THEME + "    parent: facilitis\n    terms: [b]\n  - {id: facilities, label: F, terms: [c]}\n", 5,
     "parent 'facilitis' of theme 'a' is not a theme id in this lexicon (did you mean 'facilities'?)"),
    (THEME + "    terms: [b]\n    negated: some times\n", 6, "must be 'keep'"),
    (THEME + "    terms: [b]\n    negated: elsewhere\n", 6, "not another theme"),
    (THEME + "    terms: [b]\n    negated: a\n", 6, "not another theme"),
    (THEME + "    terms: [b]\n    inflect: maybe\n", 6, "must be true, false or stem"),
    (THEME, 3, "theme 'a' has no 'terms'"),
    (THEME + "    terms: []\n", 5, "'terms' of theme 'a' is empty"),
    (THEME + "    terms:\n", 5, "'terms' of theme 'a' is empty"),
    (THEME + "    terms: expensive\n", 5, "must be a list"),
    (THEME + "    terms:\n      - b\n      -\n", 7, "empty term"),
    (THEME + "    terms:\n      - b\n      - ~\n", 7, "empty term"),
    (THEME + "    terms:\n      - b\n      - '  '\n", 7, "empty term"),
    (THEME + "    terms:\n      - b\n      - [c, d]\n", 7, "must be text, found a list"),
    (THEME + "    terms:\n      - b\n      - {term: [c]}\n", 7, "must be text"),
    (THEME + "    terms:\n      - b\n      - {inflect: false}\n", 7, "needs 'term: ...'"),
    (THEME + "    terms:\n      - b\n      - {term: c, inflect: 0}\n", 7, "must be true, false or stem"),
    (THEME + "    terms:\n      - b\n      - {term: c, stem: no}\n", 7, "unknown key 'stem'"),
    (THEME + "    terms:\n      - b\n      - '*pens'\n", 7, "term '*pens' in 'terms' of theme 'a'"),
    (THEME + "    terms:\n      - b\n      - ex*ns\n", 7, "only end a word"),
    (THEME + "    terms:\n      - b\n      - ab*\n", 7, "at least 3 characters"),
    (THEME + "    terms:\n      - b\n      - '**'\n", 7, "lone '*'"),
    (THEME + "    terms:\n      - b\n      - '*'\n", 7, "lone '*'"),
    (THEME + "    terms:\n      - b\n      - '?!'\n", 7, "no words once punctuation is removed"),
    (THEME + "    terms: [b]\n    exclude:\n      - 'x*y'\n", 7, "'exclude' of theme 'a'"),
    ("lexicon: x\nsettings:\n  negation_window: 0\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "from 1 to 10, found '0'"),
    ("lexicon: x\nsettings:\n  negation_window: 11\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "from 1 to 10"),
    ("lexicon: x\nsettings:\n  negation_window: four\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "whole number"),
    ("lexicon: x\nsettings:\n  negation_window: true\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "whole number"),
    ("lexicon: x\nsettings:\n  inflect: 1\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "true, false or stem"),
    ("lexicon: x\nsettings:\n  accents: strip\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "'accents' in 'settings' must be 'fold'"),
    ("lexicon: x\nlanguage: xx\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 2,
     "unsupported 'language' 'xx'; supported: ar, ast, bg"),
    ("lexicon: x\nsettings:\n  window: 3\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 3,
     "valid keys: negation_window, inflect"),
    ("lexicon: x\nsettings: [4]\nthemes:\n  - {id: a, label: A, terms: [b]}\n", 2,
     "'settings' must be a mapping"),
])
def test_errors_name_the_line(text, line, message):
    error = problem_of(text)
    assert error.line == line
    assert error.source == "test.yaml"
    assert message in error.message
    assert str(error).startswith(f"test.yaml:{line}: ")
    assert "\n" not in str(error)
    assert error.problems[0] == (line, error.message.split(" (and ")[0])


def test_circular_parents_name_the_cycle():
    text = """\
lexicon: x
themes:
  - id: a
    label: A
    parent: c
    terms: [p]
  - id: b
    label: B
    parent: a
    terms: [q]
  - id: c
    label: C
    parent: b
    terms: [r]
  - id: d
    label: D
    parent: d
    terms: [s]
"""
    error = problem_of(text)
    assert error.line == 5
    assert "circular parents: a -> c -> b -> a" in error.message
    assert [line for line, _ in error.problems] == [5, 17]
    assert "d -> d" in error.problems[1][1]


def test_all_problems_collected_in_file_order():
    text = """\
lexicon: x
settings:
  negation_window: 20
themes:
  - id: Bad
    label: A
    terms: [b]
  - id: b
    label: B
    negated: never
    terms:
      - ok
      - ab*
      - ''
  - id: c
    lable: C
    terms: [c]
"""
    error = problem_of(text)
    # the misspelt 'lable' (line 16) is reported, not also a missing 'label' at line 15
    assert [line for line, _ in error.problems] == [3, 5, 10, 13, 14, 16]
    assert error.line == 3
    assert "(and 5 more problems in this file)" in error.message


# --- loading files ------------------------------------------------------------------


def test_load_lexicon_hash_and_bom(tmp_path):
    path = tmp_path / "lex.yaml"
    data = ("\ufeff" + VALID).encode("utf-8")
    path.write_bytes(data)
    lexicon = load_lexicon(path)
    assert lexicon.source == str(path)
    # common practice: the content hash is SHA-256 of the file's bytes (hashlib as reference)
    assert lexicon.sha256 == hashlib.sha256(data).hexdigest()
    assert lexicon.ids == parse(VALID).ids
    path.write_bytes(data + b"# a comment changes the hash\n")
    assert load_lexicon(path).sha256 != lexicon.sha256
    assert parse_lexicon(VALID).sha256 == hashlib.sha256(VALID.encode("utf-8")).hexdigest()
    assert parse_lexicon(VALID + " ").sha256 != parse_lexicon(VALID).sha256


def test_load_errors_name_the_file(tmp_path):
    path = tmp_path / "bad.yaml"
    path.write_text(VALID.replace("label: Toilets", "labl: Toilets"), encoding="utf-8")
    with pytest.raises(LexiconError) as caught:
        load_lexicon(path)
    assert caught.value.source == str(path) and caught.value.line == 25
    assert "unknown key 'labl' in theme 'toilets' (did you mean 'label'?)" in caught.value.message
    assert str(caught.value).startswith(f"{path}:25: ")
    path.write_bytes(b"lexicon: x\nthemes:\n  - id: caf\xe9\n")
    with pytest.raises(LexiconError, match="not UTF-8") as caught:
        load_lexicon(path)
    assert caught.value.line == 3
    with pytest.raises(LexiconError, match="cannot read"):
        load_lexicon(tmp_path / "missing.yaml")


# --- hierarchy -------------------------------------------------------------------------

CHAIN = """\
lexicon: chain
themes:
  - {id: leaf, label: Leaf, parent: middle, terms: [l]}
  - {id: other, label: Other, terms: [o]}
  - {id: top, label: Top, terms: [t]}
  - {id: middle, label: Middle, parent: top, terms: [m]}
"""


def test_ancestors_and_descendants():
    lexicon = parse(CHAIN)
    assert lexicon.ancestors("leaf") == ("middle", "top")
    assert lexicon.ancestors("middle") == ("top",)
    assert lexicon.ancestors("top") == ()
    assert lexicon.descendants("top") == ("leaf", "middle")  # file order
    assert lexicon.descendants("middle") == ("leaf",)
    assert lexicon.descendants("other") == ()


def test_rollup_matrix_three_levels():
    lexicon = parse(CHAIN)
    matrix = lexicon.rollup_matrix()
    assert scipy.sparse.issparse(matrix) and matrix.format == "csr"
    # rows/columns in file order: leaf, other, top, middle; worked out by hand from the definition
    expected = np.array([
        [1, 0, 1, 1],   # leaf -> leaf, top, middle
        [0, 1, 0, 0],   # other
        [0, 0, 1, 0],   # top
        [0, 0, 1, 1],   # middle -> middle, top
    ])
    np.testing.assert_array_equal(matrix.toarray(), expected)
    direct = scipy.sparse.csr_matrix(np.array([[1, 0, 0, 0], [0, 1, 0, 1], [1, 0, 1, 0]]))
    rolled = (direct @ matrix).toarray() > 0
    np.testing.assert_array_equal(rolled, [[1, 0, 1, 1], [0, 1, 1, 1], [1, 0, 1, 1]])


# --- lint -------------------------------------------------------------------------------

LINT = """\
lexicon: lint
themes:
  - id: queues
    label: Queues
    terms:
      - queu*
      - queue
      - long queue
      - wait
      - waiting
  - id: staff
    label: Staff
    terms:
      - wait
      - queues
      - rude
  - id: facilities
    label: Facilities
    negated: keep
    terms: [toilet*, bench, no bench]
  - id: toilets
    label: Toilets
    parent: facilities
    negated: keep
    terms: [toilets]
  - id: cleanliness
    label: Cleanliness
    negated: drop
    terms: [clean*, not clean]
    exclude:
      - rude
  - id: booking
    label: Booking
    negated: keep
    terms: [book, rude]
    exclude:
      - books
"""


def lint_rows(frame, kind):
    part = frame[frame["kind"] == kind]
    return sorted(zip(part["theme"], part["term"], strict=True))


def test_lint_kinds():
    lexicon = parse(LINT)
    frame = lint_lexicon(lexicon)
    assert tuple(frame.columns) == LINT_COLUMNS
    # "wait" and "queues" (covered by queu*) repeat in the unrelated theme staff; "rude" in booking
    assert lint_rows(frame, "shared_term") == [("booking", "rude"), ("staff", "queues"), ("staff", "wait")]
    redundant = lint_rows(frame, "redundant")
    # queue under queu*, long queue contains queu*, waiting = wait once inflected (Snowball, nltk),
    # toilet* in the parent is not flagged, but a phrase containing a term in a keep theme is.
    assert ("queues", "queue") in redundant and ("queues", "long queue") in redundant
    assert ("queues", "waiting") in redundant
    assert ("facilities", "no bench") in redundant
    # a negated-drop theme needs "not clean" beside "clean*": not redundant
    assert ("cleanliness", "not clean") not in redundant
    assert ("toilets", "toilets") not in redundant  # the child repeats the parent's wildcard on purpose
    # "books" inflects and vetoes "book"; "rude" excluded in its own theme
    assert lint_rows(frame, "vetoed_term") == [("booking", "book")]
    assert set(frame["kind"]) == {"shared_term", "redundant", "vetoed_term"}


def test_lint_hits():
    lexicon = parse(CHAIN)
    frame = lint_lexicon(lexicon, term_hits={("leaf", "l"): 3, ("top", "t"): 0},
                         theme_hits={"leaf": 3, "middle": 3, "top": 0})
    assert lint_rows(frame, "unused_term") == [("middle", "m"), ("other", "o"), ("top", "t")]
    assert lint_rows(frame, "no_hits") == [("other", ""), ("top", "")]
    assert frame.loc[frame["kind"] == "no_hits", "line"].tolist() == [4, 5]
    report = format_lint(frame)
    assert "Terms that matched no answer (3):" in report and "Themes that coded no response (2):" in report
    assert re.search(r"line\s+4\s+other", report)


def test_lint_clean_lexicon():
    frame = lint_lexicon(parse(CHAIN))
    assert frame.empty and tuple(frame.columns) == LINT_COLUMNS
    assert format_lint(frame) == "Lexicon lint: nothing to report.\n"


# --- the starter lexicon ------------------------------------------------------------------

# Copied from .helpers/THEMES.md (the fixed starter theme list): id -> (parent, negated).
THEMES_MD = {
    "cost_value": (None, "keep"), "crowding": (None, "keep"), "queues": (None, "keep"),
    "cleanliness": (None, "keep"), "facilities": (None, "keep"), "toilets": ("facilities", "keep"),
    "connectivity": ("facilities", "keep"), "staff": (None, "keep"),
    "information_signage": (None, "keep"), "weather": (None, "keep"), "transport": (None, "keep"),
    "parking": ("transport", "keep"), "accommodation": (None, "keep"), "food_drink": (None, "keep"),
    "accessibility": (None, "keep"), "safety": (None, "keep"), "noise": (None, "keep"),
    "nature_wildlife": (None, "keep"), "booking_tickets": (None, "keep"),
    "opening_hours": (None, "keep"), "shopping": (None, "keep"), "guides_tours": (None, "keep"),
    "language": (None, "keep"), "children_families": (None, "keep"),
    "activities_events": (None, "keep"), "maintenance": (None, "keep"),
    "sustainability": (None, "keep"), "payment": (None, "keep"), "history_culture": (None, "keep"),
}
THEMES_MD_LABELS = {
    "cost_value": "Cost and value", "queues": "Queues and waiting", "staff": "Staff and service",
    "transport": "Transport and getting around", "maintenance": "Upkeep and maintenance",
    "safety": "Safety and security", "information_signage": "Information and signage",
}


@pytest.fixture(scope="module")
def starter() -> Lexicon:
    return load_lexicon(STARTER)


def test_starter_matches_theme_list(starter):
    assert len(starter.themes) >= 25
    assert set(starter.ids) == set(THEMES_MD)
    for theme in starter.themes:
        assert (theme.parent, theme.negated) == THEMES_MD[theme.id], theme.id
        assert theme.about, theme.id
        assert len(theme.terms) >= 30, (theme.id, len(theme.terms))
    for theme_id, label in THEMES_MD_LABELS.items():
        assert starter.theme(theme_id).label == label
    assert starter.descendants("facilities") == ("toilets", "connectivity")
    assert starter.ancestors("parking") == ("transport",)


def test_starter_has_no_drone_terms(starter):
    pattern = re.compile(r"drone|quadcopter|quad copter|\buav|unmanned|multirotor|\bdji\b")
    for theme in starter.themes:
        for term in theme.terms + theme.exclusions:
            assert not pattern.search(" ".join(term.words)), (theme.id, term.text)
            assert not any("drone".startswith(word[:-1]) for word in term.words if word.endswith("*"))


def test_starter_lint_is_quiet(starter):
    frame = lint_lexicon(starter)
    assert set(frame["kind"]) <= {"shared_term"}
    # the shared terms kept on purpose are explained at the end of the file
    assert lint_rows(frame, "shared_term") == [
        ("accessibility", "radar key"), ("parking", "blue badge"), ("sustainability", "sewage")]


def test_starter_sample_terms(starter):
    cost = {term.words for term in starter.theme("cost_value").terms}
    assert {("value", "for", "money"), ("rip", "off"), ("expens*",)} <= cost
    assert ("free", "parking") in {term.words for term in starter.theme("cost_value").exclusions}
    queues = {term.words for term in starter.theme("queues").terms}
    assert {("queu*",), ("que",), ("qeue",)} <= queues
    parking = starter.theme("parking")
    assert not any(term.inflect for term in parking.terms)  # "parking" stems to "park" (Snowball)


def test_a_term_with_a_lone_surrogate_is_refused_with_its_line():
    # A YAML "\ud800" escape decodes to a lone surrogate: no answer can hold it, and writers
    # cannot encode it, so the parser refuses it (a traceback in the coder before).
    text = 'lexicon: x\nversion: "1"\nlanguage: en\nthemes:\n  - id: a\n    label: A\n    terms: ["\\ud800abc"]\n'
    with pytest.raises(LexiconError, match=r":7: .*lone surrogate"):
        parse_lexicon(text, source="lex.yaml")
