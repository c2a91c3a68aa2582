"""Keyness measures, comparisons, lexicon suggestions and the CLI (textkit.keyness, cli_keyness)."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
import yaml
from scipy import stats
from scipy.stats import chi2_contingency

from textkit.discover.keyness import (
    KEYNESS_COLUMNS,
    REST,
    TERM_COLUMNS,
    compare,
    g_squared,
    keyness,
    log_odds_dirichlet,
    log_ratio,
)
from textkit.discover.suggest import render_suggestions_yaml, suggest_terms
from textkit.errors import AnalysisError
from textkit.text.ngrams import document_term_matrix
from textkit.text.tokens import tokenize_corpus

FILLER = ["beach", "view", "ferry", "cafe", "harbour", "market", "walk", "sunset", "museum", "dinner", "boat"]


def planted_corpus(n: int = 900, seed: int = 7):
    """Invented answers: group A says "free wi-fi" and "overpriced tickets", group B "not clean"."""
    rng = np.random.default_rng(seed)
    group = rng.choice(np.array(["A", "B", "C"], dtype=object), size=n)
    texts = []
    for g in group:
        words = list(rng.choice(FILLER, size=rng.integers(3, 8)))
        if g == "A" and rng.random() < 0.35:
            words += ["no", "free", "wi-fi"]
        if g == "A" and rng.random() < 0.2:
            words += ["overpriced", "tickets"]
        if g == "B" and rng.random() < 0.3:
            words += ["not", "clean"]
        texts.append(" ".join(words))
    return texts, group


@pytest.fixture(scope="module")
def corpus():
    texts, group = planted_corpus()
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(texts))
    weights = np.random.default_rng(11).uniform(0.3, 3.0, size=len(texts))
    return matrix, terms, n_words, group, weights


# --------------------------------------------------------------------------- the measures

def test_monroe_hand_example():
    # Monroe, Colaresi & Quinn (2008) formula; hand check from REFERENCES.md [computed]:
    # y_i = (10, 5, 85), y_j = (2, 10, 88), alpha = (0.5, 0.5, 9) -> word 1
    # delta = ln(10.5/99.5) - ln(2.5/107.5) = 1.51242, sigma^2 = 0.495238, z = 2.14914
    delta, variance = log_odds_dirichlet(np.array([10, 5, 85]), np.array([2, 10, 88]), 100, 100,
                                         np.array([0.5, 0.5, 9.0]), 10.0)
    assert delta[0] == pytest.approx(1.51242, abs=5e-6)
    assert delta[0] == pytest.approx(np.log(10.5 / 99.5) - np.log(2.5 / 107.5), rel=1e-12)
    assert variance[0] == pytest.approx(0.495238, abs=5e-7)
    assert (delta / np.sqrt(variance))[0] == pytest.approx(2.14914, abs=5e-6)


def test_g2_matches_scipy_on_random_tables():
    # reference: scipy.stats.chi2_contingency(lambda_="log-likelihood", correction=False), to 1e-9
    rng = np.random.default_rng(2024)
    y_g = rng.integers(1, 300, size=200)
    y_r = rng.integers(1, 300, size=200)
    n_g = y_g + rng.integers(1, 5000, size=200)
    n_r = y_r + rng.integers(1, 5000, size=200)
    ours = g_squared(y_g, y_r, n_g, n_r)
    for i in range(200):
        table = [[y_g[i], y_r[i]], [n_g[i] - y_g[i], n_r[i] - y_r[i]]]
        expected, p_value, _, _ = chi2_contingency(table, lambda_="log-likelihood", correction=False)
        assert ours[i] == pytest.approx(expected, rel=1e-9, abs=1e-9)
        assert stats.chi2.sf(ours[i], 1) == pytest.approx(p_value, rel=1e-9, abs=1e-12)


def test_g2_reference_example_uses_the_four_cell_form():
    # REFERENCES.md [computed]: 52 in 50,000 vs 57 in 75,000 -> scipy 2.65406 (p 0.10329);
    # the two-cell shortcut would give 2.65171
    assert g_squared(52, 57, 50_000, 75_000) == pytest.approx(2.65406, abs=5e-6)
    assert stats.chi2.sf(g_squared(52, 57, 50_000, 75_000), 1) == pytest.approx(0.10329, abs=5e-6)


def test_g2_with_a_zero_cell_matches_scipy():
    # reference: scipy chi2_contingency; a term absent on one side (0 * ln 0 = 0)
    expected = chi2_contingency([[0, 12], [400, 588]], lambda_="log-likelihood", correction=False)[0]
    assert g_squared(0, 12, 400, 600) == pytest.approx(expected, rel=1e-9)


def test_log_ratio_hardie_example():
    # Hardie (2014): relative frequencies 0.0006 vs 0.0002 -> Log Ratio 1.585 [source]
    assert log_ratio(6, 2, 10_000, 10_000) == pytest.approx(1.585, abs=5e-4)
    # zero adjustment (documented choice): 0 -> 0.5, so 0 vs 4 in equal totals is log2(0.5/4) = -3
    assert log_ratio(0, 4, 100, 100) == pytest.approx(-3.0)


# --------------------------------------------------------------------------- keyness()

def test_keyness_columns_and_formulae(corpus):
    matrix, terms, n_words, group, _ = corpus
    table = keyness(matrix, terms, n_words, group == "A", group != "A", max_terms=None,
                    phrase_handling="keep")
    assert list(table.columns) == TERM_COLUMNS
    row = table.set_index("term").loc["overpriced tickets"]
    n_g, n_r = (group == "A").sum(), (group != "A").sum()
    y_g, y_r = row["respondents_group"], row["respondents_reference"]
    # the documented prior: a_w = 0.1 * pooled count, a_0 = 0.1 * pooled answers (Monroe et al. 2008)
    delta, variance = log_odds_dirichlet(y_g, y_r, n_g, n_r, 0.1 * (y_g + y_r), 0.1 * (n_g + n_r))
    assert row["log_odds"] == pytest.approx(delta, rel=1e-12)
    assert row["z"] == pytest.approx(delta / np.sqrt(variance), rel=1e-12)
    # scipy reference for G2 on the respondents table
    expected = chi2_contingency([[y_g, y_r], [n_g - y_g, n_r - y_r]], lambda_="log-likelihood",
                                correction=False)
    assert row["g2"] == pytest.approx(expected[0], rel=1e-9)
    assert row["p_value"] == pytest.approx(expected[1], rel=1e-9, abs=1e-300)
    assert row["rate_group"] == pytest.approx(y_g / n_g)


def test_q_values_are_benjamini_hochberg_over_tested_terms(corpus):
    # reference: scipy.stats.false_discovery_control (BH 1995) on every tested term's p-value
    matrix, terms, n_words, group, _ = corpus
    table = keyness(matrix, terms, n_words, group == "B", group != "B", max_terms=None,
                    phrase_handling="keep", min_respondents=3)
    summary = table.attrs["summary"]
    assert len(table) == summary["terms_tested"]  # nothing dropped, so every tested term is here
    assert np.allclose(table["q_value"], stats.false_discovery_control(table["p_value"]), rtol=1e-10)


def test_planted_terms_top_each_side(corpus):
    matrix, terms, n_words, group, weights = corpus
    for w in (None, weights):
        table = keyness(matrix, terms, n_words, group == "A", group == "B", w, max_terms=3)
        top_a = table[table["z"] > 0]["term"].tolist()
        top_b = table[table["z"] < 0]["term"].tolist()
        assert "no free wi-fi" in top_a and "overpriced tickets" in top_a
        assert top_b[0] == "not clean"


def test_swapping_sides_flips_signs(corpus):
    # invariance: swapping group and reference flips z, log-odds and Log Ratio, keeps G2
    matrix, terms, n_words, group, weights = corpus
    one = keyness(matrix, terms, n_words, group == "A", group == "C", weights, max_terms=None,
                  phrase_handling="keep").set_index("term").sort_index()
    two = keyness(matrix, terms, n_words, group == "C", group == "A", weights, max_terms=None,
                  phrase_handling="keep").set_index("term").sort_index()
    assert list(one.index) == list(two.index)
    for column in ("z", "log_odds", "log_ratio"):
        assert np.allclose(one[column], -two[column], rtol=1e-12, atol=1e-12)
    assert np.allclose(one["g2"], two["g2"], rtol=1e-12)
    assert np.array_equal(one["respondents_group"], two["respondents_reference"])
    assert np.allclose(one["rate_group"], two["rate_reference"])


def test_scaling_weights_changes_nothing(corpus):
    # invariance: weights are rescaled to average 1 within the comparison
    matrix, terms, n_words, group, weights = corpus
    one = keyness(matrix, terms, n_words, group == "A", group != "A", weights, max_terms=None)
    two = keyness(matrix, terms, n_words, group == "A", group != "A", weights * 4321.5, max_terms=None)
    assert one["term"].tolist() == two["term"].tolist()
    numeric = [c for c in TERM_COLUMNS if c != "term"]
    assert np.allclose(one[numeric].to_numpy(float), two[numeric].to_numpy(float), rtol=1e-9, atol=1e-12)


def test_integer_weights_give_the_rates_of_replicated_answers():
    # common practice: a weight of k stands for k identical respondents (shares are ratio estimates)
    texts, group = planted_corpus(300, seed=3)
    rng = np.random.default_rng(5)
    k = rng.integers(1, 4, size=len(texts))
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(texts))
    weighted = keyness(matrix, terms, n_words, group == "A", group != "A", k.astype(float),
                       max_terms=None, min_respondents=1, phrase_handling="keep").set_index("term")
    rows = np.repeat(np.arange(len(texts)), k)
    replicated = keyness(matrix[rows], terms, n_words, (group == "A")[rows], (group != "A")[rows],
                         max_terms=None, min_respondents=1, phrase_handling="keep").set_index("term")
    common = weighted.index.intersection(replicated.index)
    assert len(common) > 20
    for column in ("rate_group", "rate_reference"):
        assert np.allclose(weighted.loc[common, column], replicated.loc[common, column], rtol=1e-10)
    both = common[(weighted.loc[common, "count_group"] > 0) & (weighted.loc[common, "count_reference"] > 0)]
    assert len(both) > 20  # (a zero count gets the 0.5 adjustment, which is not replicated)
    assert np.allclose(weighted.loc[both, "log_ratio"], replicated.loc[both, "log_ratio"], rtol=1e-10)


def test_unweighted_switch_ignores_weights(corpus):
    matrix, terms, n_words, group, weights = corpus
    plain = keyness(matrix, terms, n_words, group == "A", group != "A")
    switched = keyness(matrix, terms, n_words, group == "A", group != "A", weights, weighted=False)
    pd.testing.assert_frame_equal(plain, switched)


def test_document_frequency_versus_token_counting():
    # one long answer repeating a word dominates token counts but counts once per respondent
    texts = ["queue queue queue queue queue queue queue queue queue queue"] + ["ferry beach"] * 9 \
        + ["queue beach"] * 2 + ["ferry view"] * 8
    in_group = np.array([True] * 10 + [False] * 10)
    stream = tokenize_corpus(texts)
    counts, terms, n_words = document_term_matrix(stream, ngram_range=(1, 1), binary=False)
    by_answer = keyness(counts, terms, n_words, in_group, ~in_group, min_respondents=1,
                        max_terms=None).set_index("term")
    by_token = keyness(counts, terms, n_words, in_group, ~in_group, min_respondents=1, max_terms=None,
                       document_frequency=False).set_index("term")
    assert by_answer.loc["queue", "count_group"] == 1 and by_answer.loc["queue", "z"] < 0
    assert by_answer.loc["queue", "rate_group"] == pytest.approx(0.1)
    assert by_token.loc["queue", "count_group"] == 10 and by_token.loc["queue", "z"] > 0
    # token rates are per word: 10 of the group's 28 words, 2 of the reference's 20
    assert by_token.loc["queue", "rate_group"] == pytest.approx(10 / 28)
    assert by_token.loc["queue", "rate_reference"] == pytest.approx(2 / 20)
    assert by_token.loc["queue", "respondents_group"] == 1  # respondents stay respondents


def test_min_respondents_max_terms_and_summary(corpus):
    matrix, terms, n_words, group, _ = corpus
    table = keyness(matrix, terms, n_words, group == "A", group != "A", min_respondents=40, max_terms=4)
    summary = table.attrs["summary"]
    assert (table["respondents_group"] + table["respondents_reference"] >= 40).all()
    assert summary["below_min_respondents"] > 0
    assert summary["terms_tested"] + summary["below_min_respondents"] == summary["terms_present"]
    assert len(table) == summary["returned"] <= 8
    assert (table["z"] > 0).sum() <= 4 and (table["z"] < 0).sum() <= 4
    group_side = table[table["z"] > 0]["z"].to_numpy()
    assert np.all(np.diff(group_side) <= 0)  # ranked by z


def test_rank_by_log_ratio_keeps_significant_terms_only(corpus):
    matrix, terms, n_words, group, _ = corpus
    table = keyness(matrix, terms, n_words, group == "A", group != "A", rank_by="log_ratio", max_terms=None)
    assert len(table) and (table["q_value"] <= 0.05).all()
    assert table.attrs["summary"]["not_significant"] > 0
    side = table[table["z"] > 0]["log_ratio"].abs().to_numpy()
    assert np.all(np.diff(side) <= 0)


def test_phrase_explains_its_words():
    # "free" and "wi-fi" are key only through "free wi-fi"; "shuttle" is key on its own as well
    texts, group = [], []
    rng = np.random.default_rng(9)
    for i in range(200):
        in_a = i < 100
        words = list(rng.choice(FILLER, size=3))
        if in_a and i % 2 == 0:
            words += ["free", "wi-fi"]
        if in_a and i % 3 == 0:
            words += ["shuttle", "late"]
        if in_a and i % 2 == 1:
            words += ["shuttle"]
        texts.append(" ".join(words))
        group.append("A" if in_a else "B")
    group = np.array(group)
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(texts))
    collapsed = keyness(matrix, terms, n_words, group == "A", group == "B", max_terms=None)
    kept = keyness(matrix, terms, n_words, group == "A", group == "B", max_terms=None, phrase_handling="keep")
    assert {"free", "wi-fi", "free wi-fi"} <= set(kept["term"])
    assert "free wi-fi" in set(collapsed["term"])
    assert not {"free", "wi-fi"} & set(collapsed["term"])
    assert {"shuttle", "shuttle late"} <= set(collapsed["term"])
    assert collapsed.attrs["summary"]["explained_by_phrase"] >= 2


@pytest.mark.parametrize("kwargs, message", [
    ({"in_group": np.zeros(4, bool), "in_reference": np.array([1, 1, 0, 0], bool)}, "group has no answers"),
    ({"in_group": np.array([1, 1, 0, 0], bool), "in_reference": np.array([1, 1, 0, 0], bool)},
     "compared with itself"),
    ({"in_group": np.array([1, 0, 0, 0], bool), "in_reference": np.zeros(4, bool)}, "reference has no"),
    ({"in_group": np.array([1, 1, 0, 0], bool), "in_reference": np.array([0, 0, 1, 1], bool),
      "rank_by": "chi"}, "rank_by"),
    ({"in_group": np.array([1, 1, 0, 0], bool), "in_reference": np.array([0, 0, 1, 1], bool),
      "weights": np.array([1.0, -1.0, 1.0, 1.0])}, "negative"),
    ({"in_group": np.array([1, 1, 0], bool), "in_reference": np.array([0, 0, 1], bool)}, "one value per"),
])
def test_keyness_bad_input(kwargs, message):
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(["ferry late", "ferry", "beach", "beach"]))
    with pytest.raises(AnalysisError, match=message):
        keyness(matrix, terms, n_words, **kwargs)


# --------------------------------------------------------------------------- compare()

def test_compare_group_vs_rest_matches_keyness(corpus):
    matrix, terms, n_words, group, weights = corpus
    frame = pd.DataFrame({"market": group})
    table = compare(matrix, terms, n_words, frame, weights=weights, question="low_point", max_terms=5)
    assert list(table.columns) == KEYNESS_COLUMNS
    assert sorted(table["group"].unique()) == ["A", "B", "C"]
    assert set(table["reference"]) == {REST} and set(table["question"]) == {"low_point"}
    for value in ("A", "C"):
        direct = keyness(matrix, terms, n_words, group == value, group != value, weights, max_terms=5)
        part = table[table["group"] == value].reset_index(drop=True)
        assert part["term"].tolist() == direct["term"].tolist()
        assert np.allclose(part["z"], direct["z"], rtol=1e-12)
    assert table.attrs["summary"]["comparisons"] == 3


def test_compare_waves_pairs_and_themes(corpus):
    matrix, terms, n_words, group, _ = corpus
    n = len(group)
    wave = np.where(np.arange(n) % 3 == 0, 2024, np.where(np.arange(n) % 3 == 1, 2025, 2026))
    frame = pd.DataFrame({"market": group, "wave": wave})
    mentions_wifi = np.asarray(matrix[:, list(terms).index("wi-fi")].toarray()).ravel() > 0
    theme_matrix = sp.csr_matrix(np.stack([mentions_wifi, ~mentions_wifi], axis=1).astype(np.int8))
    table = compare(matrix, terms, n_words, frame, wave="wave", rest=False, pairs=[("market", "A", "B")],
                    theme_matrix=theme_matrix, themes=["connectivity", "other"],
                    within_themes=["connectivity"], max_terms=3, min_respondents=2)
    comparisons = set(zip(table["group_var"], table["group"], table["reference"], table["within_theme"],
                          strict=True))
    expected = {("wave", "2025", "2024", ""), ("wave", "2026", "2025", ""), ("market", "A", "B", "")}
    assert expected <= comparisons
    assert ("wave", "2026", "2024", "") not in comparisons
    inside = table[table["within_theme"] == "connectivity"]
    assert len(inside)
    # within the theme only the answers mentioning wi-fi count
    assert (inside["respondents_group"] + inside["respondents_reference"] <= mentions_wifi.sum()).all()


@pytest.mark.parametrize("kwargs, message", [
    ({"by": ["age_band"]}, "no group variable 'age_band'"),
    ({"pairs": [("market", "A", "A")]}, "compared with itself"),
    ({"pairs": [("market", "A", "Z")]}, "no group 'Z'"),
    ({"within_themes": ["weather"], "theme_matrix": sp.csr_matrix((4, 1)), "themes": ["queues"]},
     "unknown theme"),
])
def test_compare_bad_input(kwargs, message):
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(["ferry late", "ferry", "beach", "beach"]))
    frame = pd.DataFrame({"market": ["A", "A", "B", "B"]})
    with pytest.raises(AnalysisError, match=message):
        compare(matrix, terms, n_words, frame, **kwargs)


def test_compare_group_without_answers():
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(["ferry late", "ferry", "beach", ""]))
    frame = pd.DataFrame({"market": ["A", "A", "B", "C"]})
    answered = np.array([True, True, True, False])
    with pytest.raises(AnalysisError, match="'C' of 'market' has no answers"):
        compare(matrix, terms, n_words, frame, answered=answered, pairs=[("market", "A", "C")], rest=False)
    table = compare(matrix, terms, n_words, frame, answered=answered, min_respondents=1)
    assert table.attrs["skipped"] == ["market=C: no answers"]
    with pytest.raises(AnalysisError, match="at least two"):
        compare(matrix, terms, n_words, frame, answered=np.array([True, True, False, False]))


# --------------------------------------------------------------------------- suggestions

def suggestion_corpus():
    """Invented answers: a "queues" theme coded on "queue"; "waited ages" also appears uncoded."""
    rng = np.random.default_rng(17)
    texts, coded = [], []
    for i in range(400):
        words = list(rng.choice(FILLER, size=4))
        theme = i % 4 == 0
        if theme:
            words += ["queue"] + (["waited", "ages"] if rng.random() < 0.6 else [])
            if i >= 200 and rng.random() < 0.7:
                words += ["kite", "surfers"]     # new in the second wave, inside coded answers
        elif i % 4 == 1 and rng.random() < 0.25:
            words += ["waited", "ages"]          # the lexicon misses these
        elif i % 4 == 2 and rng.random() < 0.5:
            words += ["drones", "buzzing"]       # nothing in the lexicon
        texts.append(" ".join(words))
        coded.append(theme)
    theme_matrix = sp.csr_matrix(np.array(coded, dtype=np.int8)[:, None])
    return texts, theme_matrix


def test_suggest_terms_and_yaml_draft():
    texts, theme_matrix = suggestion_corpus()
    matrix, terms, n_words = document_term_matrix(tokenize_corpus(texts))

    def covered(candidates):
        return np.array([["queue" in c.split()] for c in candidates])

    waves = np.where(np.arange(len(texts)) < 200, "2025", "2026")
    table = suggest_terms(matrix, terms, n_words, theme_matrix, ["queues"], covered=covered, waves=waves)
    for_queues = table[table["kind"] == "term"]
    assert "waited ages" in set(for_queues["term"])
    assert not any("queue" in t.split() for t in for_queues["term"])          # covered terms left out
    assert (for_queues["respondents_reference"] > 0).all()                  # each reaches new answers
    new = table[table["kind"] == "new_theme"]
    assert {"drones buzzing"} <= set(new["term"])
    assert new["theme"].str.startswith("draft_").all()
    assert "kite surfers" not in set(new["term"])  # mostly in coded answers: not a new theme...
    emerging = table[table["kind"] == "emerging_theme"]
    assert "kite surfers" in set(emerging["term"])  # ...but it rose in the latest wave

    text = render_suggestions_yaml(table, labels={"queues": "Queues and waiting"}, source="survey.yaml")
    parsed = yaml.safe_load(text)  # valid YAML
    assert parsed["draft"] is True
    assert "waited ages" in parsed["candidate_terms"]["queues"]
    draft_terms = [t for theme in parsed["candidate_themes"] for t in theme["terms"]]
    assert "drones buzzing" in draft_terms
    assert "kite surfers" in [t for theme in parsed["emerging_themes"] for t in theme["terms"]]
    assert text.startswith("# DRAFT")


def test_yaml_draft_quotes_awkward_terms():
    table = pd.DataFrame({"kind": ["term", "new_theme"], "theme": ["cost_value", "draft_x"],
                          "term": ['yes: "no" #1', "£3.50 🙂"], "n_words": [3, 2], "z": [3.0, 4.0],
                          "log_ratio": [1.0, 2.0], "q_value": [0.01, 0.001],
                          "respondents_group": [5, 6], "respondents_reference": [2, 1]})
    parsed = yaml.safe_load(render_suggestions_yaml(table))
    assert parsed["candidate_terms"]["cost_value"] == ['yes: "no" #1']
    assert parsed["candidate_themes"][0]["terms"] == ["£3.50 🙂"]


# --------------------------------------------------------------------------- CLI

PIPELINE = importlib.util.find_spec("textkit.pipeline") is not None


def write_mini_survey(folder: Path) -> Path:
    """An invented two-market, two-wave survey with a one-theme lexicon."""
    rng = np.random.default_rng(23)
    rows = []
    for i in range(240):
        market = "Northvale" if i % 2 else "Southmere"
        wave = "2025" if i < 120 else "2026"
        words = list(rng.choice(FILLER, size=4))
        if market == "Northvale" and rng.random() < 0.5:
            words += ["no", "free", "wi-fi"]
        if i % 5 == 0:
            words += ["long", "queue"]
        if wave == "2026" and i % 5 != 0 and rng.random() < 0.5:  # a new topic, no lexicon theme
            words += ["drones", "buzzing"]
        rows.append({"response_id": f"R{i:03d}", "wave": wave, "market": market,
                     "weight": round(float(rng.uniform(0.5, 2.0)), 3), "low_point": " ".join(words)})
    pd.DataFrame(rows).to_csv(folder / "survey.csv", index=False)
    (folder / "lexicon.yaml").write_text(
        "lexicon: mini\nversion: '1'\nlanguage: en\nthemes:\n"
        "  - id: queues\n    label: Queues\n    negated: drop\n    terms: [queue]\n", encoding="utf-8")
    config = folder / "survey.yaml"
    config.write_text("survey: survey.csv\nid: response_id\nquestions:\n  low_point: low_point\n"
                      "weight: weight\nwave: wave\ngroups: [market]\nlexicon: lexicon.yaml\n",
                      encoding="utf-8")
    return config


@pytest.mark.skipif(not PIPELINE, reason="textkit.pipeline not available yet")
def test_cli_keyness_and_suggest(tmp_path, capsys):
    from textkit.cli.main import main

    config = write_mini_survey(tmp_path)
    out = tmp_path / "out"
    assert main(["keyness", str(config), "--out", str(out), "--max-terms", "5", "--theme", "queues"]) == 0
    table = pd.read_csv(out / "keyness.csv", keep_default_na=False, dtype={"group": str, "reference": str})
    assert list(table.columns) == KEYNESS_COLUMNS
    north = table[(table["group"] == "Northvale") & (table["reference"] == REST)
                  & (table["within_theme"] == "")]
    assert north[north["z"] > 0]["term"].iloc[0] == "no free wi-fi"
    waves = table[(table["group_var"] == "wave") & (table["group"] == "2026")
                  & (table["reference"] == "2025")]
    assert "drones buzzing" in set(waves[waves["z"] > 0]["term"])
    assert "terms below 5 answers" in capsys.readouterr().out
    assert (out / "manifest.json").exists()

    out = tmp_path / "suggest"  # a folder of its own: one command's result per folder
    assert main(["suggest", str(config), "--out", str(out), "--quiet"]) == 0
    draft = yaml.safe_load((out / "lexicon-suggestions.yaml").read_text(encoding="utf-8"))
    assert draft["draft"] is True
    assert any("drones buzzing" in theme["terms"] for theme in draft["candidate_themes"])
    suggested = [t for terms in (draft.get("candidate_terms") or {}).values() for t in terms]
    assert not any("queue" in t.split() for t in suggested)  # the lexicon already has it
    assert "drone" not in (tmp_path / "lexicon.yaml").read_text(encoding="utf-8")  # lexicon untouched


@pytest.mark.skipif(not PIPELINE, reason="textkit.pipeline not available yet")
@pytest.mark.parametrize("extra, message", [
    (["--by", "age_band"], "no group variable 'age_band'"),
    (["--pair", "Northvale", "Northvale"], "compared with itself"),
    (["--pair", "Atlantis", "Northvale"], "has a group 'Atlantis'"),
    (["--question", "best_part"], "no question 'best_part'"),
])
def test_cli_bad_input_is_one_line_exit_2(tmp_path, capsys, extra, message):
    from textkit.cli.main import main

    config = write_mini_survey(tmp_path)
    assert main(["keyness", str(config), "--out", str(tmp_path / "out"), "--quiet", *extra]) == 2
    error = capsys.readouterr().err.strip()
    assert message in error and "\n" not in error
    assert not (tmp_path / "out" / "keyness.csv").exists()


# --------------------------------------------------------------------------- demo survey

DEMO = Path(__file__).resolve().parents[1] / "demo_comments" / "survey.yaml"


@pytest.mark.skipif(not (PIPELINE and DEMO.exists()), reason="demo survey config or pipeline not available")
def test_demo_planted_differences_rank_high():
    # demo_comments/generate.py plants: language problems for Estrelia (x16), cost for Vossland (x2.2),
    # drones only in wave 2026
    from textkit.pipeline import code_survey

    survey = code_survey(DEMO)
    coded = survey.coded
    matrix, terms, n_words = document_term_matrix(survey.stream)
    answered = coded["answered"].to_numpy(bool) & (coded["question"] == "low_point").to_numpy()
    weight = survey.roles["weight"]
    weights = coded[weight].to_numpy(float) if weight else None
    wave = survey.roles["wave"]
    table = compare(matrix, terms, n_words, coded[["market", wave]], weights=weights, answered=answered,
                    wave=wave, max_terms=10)

    def top(group_var, group, reference=REST):
        part = table[(table["group_var"] == group_var) & (table["group"] == group)
                     & (table["reference"] == reference)]
        return " | ".join(part[part["z"] > 0]["term"])

    assert "estrelian" in top("market", "Estrelia")
    assert "drone" in top(wave, "2026", "2025")
