"""Topic model: NPMI and stability measures, planted-topic recovery, transform, determinism, the demo."""

from __future__ import annotations

import itertools
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from topic_fixtures import planted_answers, topic_digest

from textkit.discover.topics import (
    TopicModel,
    average_jaccard,
    choose_k,
    clause_mask,
    match_topics,
    matched_token_mask,
    npmi,
    ranking_agreement,
    topic_coherence,
)
from textkit.errors import AnalysisError
from textkit.text.tokens import tokenize_corpus

ROOT = Path(__file__).resolve().parents[1]

# --------------------------------------------------------------------------- measures


def test_npmi_anchors():
    # Bouma (2009): independence gives 0, complete co-occurrence gives 1 (anchors listed with the
    # NPMI definition in the project's reference notes: P(a)=P(b)=0.5, P(a,b)=0.25 -> 0; all 0.5 -> 1).
    assert npmi(0.5, 0.5, 0.25) == pytest.approx(0.0, abs=1e-12)
    assert npmi(0.5, 0.5, 0.5) == pytest.approx(1.0, abs=1e-12)
    # never together: -1 by the same definition's limit (Bouma 2009)
    assert npmi(0.5, 0.5, 0.0) == -1.0


def test_coherence_counts_probabilities_on_the_answers():
    import scipy.sparse as sp

    # four answers; a in {0,1}, b in {0,2}: P(a)=P(b)=0.5, P(a,b)=0.25 -> NPMI 0
    independent = sp.csr_matrix(np.array([[1, 1], [1, 0], [0, 1], [0, 0]]))
    assert topic_coherence(independent, np.array([[0, 1]]))[0] == pytest.approx(0.0, abs=1e-12)
    # a and b in the same two answers: all probabilities 0.5 -> NPMI 1
    together = sp.csr_matrix(np.array([[1, 1], [1, 1], [0, 0], [0, 0]]))
    assert topic_coherence(together, np.array([[0, 1]]))[0] == pytest.approx(1.0, abs=1e-12)


def test_average_jaccard_by_hand():
    # Greene, O'Callaghan & Cunningham (2014) average Jaccard over depths 1..t, worked by hand:
    # d=1 {a}/{a} = 1; d=2 {a,b}/{a,c} = 1/3; d=3 {a,b,c}/{a,c,b} = 1 -> mean 7/9
    assert average_jaccard(["a", "b", "c"], ["a", "c", "b"]) == pytest.approx(7 / 9)
    # disjoint lists agree nowhere
    assert average_jaccard(["a", "b"], ["c", "d"]) == 0.0


def test_ranking_agreement_matches_brute_force_over_permutations():
    # the Hungarian method (scipy linear_sum_assignment) must find the best one-to-one matching:
    # checked against trying every permutation
    rng = np.random.default_rng(3)
    words = list("abcdefghij")
    first = [list(rng.permutation(words)[:4]) for _ in range(4)]
    second = [list(rng.permutation(words)[:4]) for _ in range(4)]
    best = max(np.mean([average_jaccard(first[i], second[p[i]]) for i in range(4)])
               for p in itertools.permutations(range(4)))
    assert ranking_agreement(first, second) == pytest.approx(best)
    assert ranking_agreement(first, first[::-1]) == pytest.approx(1.0)


def test_choose_k_takes_the_peak_and_breaks_near_ties_by_coherence():
    # Greene et al. (2014): the k of peak stability. A k within one standard error of the peak is
    # a near-tie; among near-ties the larger mean NPMI wins, then the smaller k (our documented rule).
    table = pd.DataFrame({"k": [3, 4, 5, 6], "stability": [0.80, 0.78, 0.70, 0.79],
                          "stability_se": [0.03, 0.01, 0.01, 0.01], "coherence": [0.20, 0.30, 0.90, 0.25]})
    assert choose_k(table) == 4          # 4 and 6 are near-ties of the peak at 3; 5 is not, however coherent
    table["stability_se"] = 0.0
    assert choose_k(table) == 3          # no noise measured: the peak itself
    table["stability"] = [0.8, 0.8, 0.1, 0.1]
    table["coherence"] = [0.2, 0.2, 0.0, 0.0]
    assert choose_k(table) == 3          # exact tie in both: the smaller k


# --------------------------------------------------------------------------- planted topics

@pytest.mark.parametrize(("n_answers", "n_topics", "shared", "floor"), [
    (600, 4, 0.1, 0.85),
    (1500, 6, 0.1, 0.85),
    (1500, 6, 0.35, 0.75),
])
def test_planted_topics_are_recovered(n_answers, n_topics, shared, floor):
    # Measure: after Hungarian matching of recovered to planted topics (on average Jaccard of the
    # ranked lists), the mean share of each planted topic's 8 words found among the matched recovered
    # topic's top 8 terms (precision at 8). Floor 0.85 with little overlap, 0.75 when 35% of the
    # words are shared (common practice for this kind of check; the floors are ours).
    answers, own = planted_answers(n_answers, n_topics, shared, seed=n_answers + n_topics)
    model = TopicModel(n_topics, min_df=3, max_df=0.5, language=None, ngram_range=(1, 1),
                       random_state=7).fit(answers)
    recovered = [list(model.terms_[row]) for row in model.top_term_indices(8)]
    match, _ = match_topics(own, recovered)
    precision = np.mean([len(set(own[i]) & set(recovered[match[i]])) / 8 for i in range(n_topics)])
    assert precision >= floor


@pytest.mark.parametrize("scan_size", [5000, 400])
def test_stability_picks_the_planted_k(scan_size):
    # Greene et al. (2014): with well separated planted topics the stability peaks at the true k;
    # also when the scan uses a random half of the answers (and the terms that pass min_df in it)
    answers, _ = planted_answers(800, 5, 0.05, seed=11)
    model = TopicModel(k_range=(3, 8), min_df=3, max_df=0.5, language=None, ngram_range=(1, 1),
                       stability_runs=4, random_state=1, scan_size=scan_size).fit(answers)
    assert model.n_topics_ == 5
    table = model.k_selection_
    assert table.loc[table["chosen"], "k"].tolist() == [5]
    assert set(table.columns) == {"k", "stability", "stability_se", "coherence", "chosen"}


def test_transform_reproduces_the_fit_assignment():
    # NMF(init="nndsvda", solver="cd"): transform with the topics fixed must give the fit's own
    # dominant topic (a known pitfall for other solver/initialisation pairs)
    answers, _ = planted_answers(1000, 5, 0.2, seed=5)
    model = TopicModel(5, min_df=3, max_df=0.5, language=None, random_state=3).fit(answers)
    again = model.transform(answers)[model.fit_rows_]
    assert (again.argmax(axis=1) == model.fit_loadings_.argmax(axis=1)).mean() >= 0.99
    assert np.abs(again - model.fit_loadings_).max() < 1e-3


def test_duplicates_count_once_and_empty_answers_are_counted():
    answers, _ = planted_answers(400, 3, 0.1, seed=2)
    stock = ["going home"] * 300 + ["", "!!!", None]
    model = TopicModel(3, min_df=3, max_df=0.5, language=None, random_state=0).fit(answers + stock)
    assert "going home" not in set(model.terms_)  # one distinct answer: below min_df
    assert model.n_empty_ >= 303
    assert model.n_answers_ == 703


def test_too_small_for_k_is_refused_with_counts():
    answers, _ = planted_answers(40, 3, 0.1, seed=1)
    with pytest.raises(AnalysisError, match=r"40 answers .* support at most k=\d+.*k=30 refused"):
        TopicModel(30, min_df=2, language=None).fit(answers)


# --------------------------------------------------------------------------- determinism

def _digest_in_child(hash_seed: str, n_answers: int, high: int) -> str:
    script = (f"import sys; sys.path[:0] = [{str(ROOT)!r}, {str(ROOT / 'tests')!r}]; "
              f"from topic_fixtures import topic_digest; print(topic_digest({n_answers}, {high}))")
    done = subprocess.run([sys.executable, "-c", script], env={**os.environ, "PYTHONHASHSEED": hash_seed},
                          capture_output=True, text=True, timeout=300, check=True)
    return done.stdout.strip()


def test_same_topics_in_another_process_with_another_hash_seed():
    # fast version: this process and one child whose PYTHONHASHSEED differs from ours (a tiny corpus)
    other = "2" if os.environ.get("PYTHONHASHSEED") == "1" else "1"
    assert _digest_in_child(other, 120, 4) == topic_digest(120, 4)


@pytest.mark.slow
def test_same_topics_across_runs_and_hash_seeds():
    assert len({_digest_in_child(seed, 300, 5) for seed in ("1", "2")}) == 1


# --------------------------------------------------------------------------- masks

def test_matched_clause_is_removed_and_the_rest_kept():
    texts = ["the queue snaked round the block, drones everywhere", "drones again"]
    stream = tokenize_corpus(texts, offsets=True)
    start = texts[0].index("queue")
    matched = matched_token_mask(stream, [0], [start], [start + len("queue")])
    words = stream.vocabulary[stream.codes]
    assert words[matched].tolist() == ["queue"]
    widened = clause_mask(stream, matched)
    assert words[widened].tolist() == ["the", "queue", "snaked", "round", "the", "block"]


# --------------------------------------------------------------------------- surveys: small (fast) and the demo (slow)

@pytest.fixture(scope="module")
def small_topics(tmp_path_factory):
    from topic_fixtures import write_small_survey

    from textkit.pipeline import code_survey, find_survey_topics, with_topics

    survey = code_survey(write_small_survey(tmp_path_factory.mktemp("small")))
    topics = find_survey_topics(survey, ["low"], k_range=(3, 5), stability_runs=3)
    return survey, topics, with_topics(survey, topics)


@pytest.fixture(scope="module")
def demo_topics():
    from textkit.pipeline import code_survey, find_survey_topics, with_topics

    survey = code_survey(ROOT / "demo_comments" / "survey.yaml")
    topics = find_survey_topics(survey, ["low_point"])
    return survey, topics, with_topics(survey, topics)


def assert_subject_rises(prepared, question: str, marker: str) -> None:
    """A topic with ``marker`` among its top 10 terms; its 2026-vs-2025 difference CI excludes zero."""
    from textkit.stats.design import SurveyDesign
    from textkit.stats.estimate import analyse

    survey, topics, with_codes = prepared
    top = topics.terms[topics.terms["rank"] <= 10]
    holders = top.loc[top["term"].str.contains(marker), "topic"].unique()
    assert len(holders) >= 1
    roles = survey.roles
    coded = with_codes.coded
    design = SurveyDesign.from_roles(coded, roles, id="response_id", source="test")
    comparisons = analyse(coded, list(holders), design, groups=[], wave=roles["wave"],
                          id_column="response_id").comparisons()
    rise = comparisons[(comparisons["question"] == question) & (comparisons["wave_a"].astype(str) == "2026")
                       & (comparisons["wave_b"].astype(str) == "2025")]
    assert len(rise)
    assert (rise["ci_low"] > 0).any()


def assert_codes_beside_themes(prepared, other_question: str) -> None:
    survey, topics, with_codes = prepared
    coded = with_codes.coded
    ids = topics.topic_ids
    assert ids[0] == "topic_01" and set(ids) <= set(coded.columns)
    columns = list(coded.columns)
    assert columns.index(survey.themes[-1]) < columns.index(ids[0]) < columns.index("n_themes")
    assert with_codes.manifest["themes"][-len(ids):] == ids
    kinds = {c["id"]: c["kind"] for c in with_codes.manifest["codes"]}
    assert kinds[ids[0]] == "topic" and kinds[survey.themes[0]] == "theme"
    assert set(with_codes.coverage["kind"]) == {"theme", "topic"}
    # codes equal the answers listed in topic_answers.csv
    listed = topics.answers.groupby("topic").size()
    assert all(int(coded[t].sum()) == int(listed.get(t, 0)) for t in ids)
    # the other question's rows never carry this question's topics
    assert int(coded.loc[coded["question"] == other_question, ids].to_numpy().sum()) == 0
    summary = topics.summary
    assert summary["weighted_share"].between(0, 1).all()
    assert (summary["top_theme_overlap"].between(0, 1)).all()
    assert topics.examples["text"].str.len().max() <= 200


def test_small_survey_emerging_subject_rises_between_waves(small_topics):
    # the invented wave-2026 subject ("skyglider") gets a topic whose rise has a CI above zero
    assert_subject_rises(small_topics, "low", "skyglider")
    # and the scan finds the four planted subjects of that question
    assert small_topics[1].models["low"].n_topics_ == 4


def test_small_survey_topics_are_codes_beside_the_themes(small_topics):
    assert_codes_beside_themes(small_topics, "high")


def test_nothing_to_report_answers_stay_out_of_the_topic_pool_by_default(small_topics):
    # Answers coded "nothing to report" are neither a theme nor a gap: by default they enter no
    # pool, get no topic code and are counted as excluded; exclude= can put them back.
    import dataclasses

    from textkit.pipeline import find_survey_topics

    survey = small_topics[0]
    coded = survey.coded
    flagged = ((coded["question"] == "low") & (np.arange(len(coded)) % 4 == 0)).to_numpy()
    marked = dataclasses.replace(survey, coded=coded.assign(nothing_to_report=flagged.astype(np.int8)))
    settings = {"n_topics": 4}
    default = find_survey_topics(marked, ["low"], **settings)
    assert default.codes.toarray()[flagged].sum() == 0
    assert not set(default.answers["response_id"]) & set(coded.loc[flagged, "response_id"])
    assert default.counts["excluded"] == int(flagged.sum())
    kept = find_survey_topics(marked, ["low"], exclude=np.zeros(len(coded), bool), **settings)
    assert kept.codes.toarray()[flagged].sum() > 0 and kept.counts["excluded"] == 0


@pytest.mark.slow
def test_demo_emerging_subject_rises_between_waves(demo_topics):
    # The demo's wave-2026 subject (drones, absent from the starter lexicon) must show among a
    # topic's top terms in the default scope, and that topic's 2026-vs-2025 prevalence difference
    # interval must exclude zero (design-based, independent waves).
    assert_subject_rises(demo_topics, "low_point", "drone")


@pytest.mark.slow
def test_demo_topics_are_codes_beside_the_themes(demo_topics):
    assert_codes_beside_themes(demo_topics, "high_point")


@pytest.mark.slow
@pytest.mark.parametrize(("n_answers", "n_topics", "shared"), [(800, 5, 0.05), (600, 4, 0.1), (1500, 6, 0.1),
                                                                (1500, 6, 0.35)])
def test_cheap_scan_picks_the_k_of_the_slow_scan(n_answers, n_topics, shared):
    # The default scan (looser NMF tolerance, fewer iterations) against the earlier slow settings
    # (500 iterations, tolerance 1e-5): same k, and it is the planted k.
    answers, _ = planted_answers(n_answers, n_topics, shared, seed=11 if n_answers == 800 else n_answers + n_topics)
    settings = {"k_range": (3, 8), "min_df": 3, "max_df": 0.5, "language": None, "ngram_range": (1, 1),
                "random_state": 1}
    cheap = TopicModel(**settings).fit(answers)
    slow = TopicModel(**settings, scan_size=20000, scan_max_iter=500, scan_tol=1e-5).fit(answers)
    assert cheap.n_topics_ == slow.n_topics_ == n_topics


def test_two_fits_give_the_same_topics():
    answers, _ = planted_answers(300, 4, 0.2, seed=9)
    first, second = (TopicModel(k_range=(3, 5), min_df=3, stability_runs=2, random_state=4).fit(answers)
                     for _ in range(2))
    assert np.array_equal(first.components_, second.components_)
    pd.testing.assert_frame_equal(first.k_selection_, second.k_selection_)


@pytest.mark.slow
def test_demo_topics_are_deterministic(demo_topics):
    from textkit.pipeline import find_survey_topics

    survey, topics, _ = demo_topics
    again = find_survey_topics(survey, ["low_point"])
    for name in ("terms", "summary", "answers", "k_selection"):
        pd.testing.assert_frame_equal(getattr(topics, name), getattr(again, name))


def test_generic_evaluative_words_are_proposed_for_no_theme():
    # "great" is key in the answers of every theme (and absent elsewhere), so it explains none of them;
    # each theme's own unmatched word stays a candidate.
    import scipy.sparse as sp

    from textkit.discover.suggest import suggest_terms
    from textkit.text.ngrams import document_term_matrix

    texts, rows = [], []
    for t in range(4):
        texts += [f"great theme{t} own{t}"] * 20 + [f"own{t} other"] * 2
        rows += [t] * 20 + [-1] * 2
    texts += ["plain words here"] * 40
    rows += [-1] * 40
    stream = tokenize_corpus(texts, offsets=False)
    matrix, terms, n_words = document_term_matrix(stream, ngram_range=(1, 1))
    coded = np.array(rows)
    theme_matrix = sp.csr_matrix((np.ones((coded >= 0).sum()), (np.flatnonzero(coded >= 0), coded[coded >= 0])),
                                 shape=(len(texts), 4))
    table = suggest_terms(matrix, terms, n_words, theme_matrix, [f"t{t}" for t in range(4)], min_share=0.0)
    proposed = set(table.loc[table["kind"] == "term", "term"])
    assert "great" not in proposed
    assert {"own0", "own1", "own2", "own3"} <= proposed
    with_generic = suggest_terms(matrix, terms, n_words, theme_matrix, [f"t{t}" for t in range(4)],
                                 min_share=0.0, generic_share=1.01)
    assert "great" in set(with_generic.loc[with_generic["kind"] == "term", "term"])
