"""The learned coder, lexicon repair from hand codes, and prevalence corrected for the coder's error."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from textkit.cli import main
from textkit.coding.handcodes import long_hand_codes
from textkit.coding.learned import LearnedCoder, ThemeModel
from textkit.coding.lexicon import load_lexicon, parse_lexicon
from textkit.coding.repair import repair_lexicon

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_comments"
LEXICON = ROOT / "lexicons" / "visitor_experience.yaml"


def run(args, capsys):
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture(scope="module")
def demo_hand():
    lexicon = load_lexicon(LEXICON)
    frame = pd.read_csv(DEMO / "hand_coded.csv", dtype=str, keep_default_na=False)
    hand = long_hand_codes(frame, lexicon, "hand_coded.csv")
    texts = [t or None for t in hand.texts]
    return lexicon, texts, hand.values[:, : len(lexicon.ids)]


@pytest.fixture(scope="module")
def demo_coder(demo_hand):
    lexicon, texts, values = demo_hand
    return LearnedCoder(lexicon, random_state=5, min_positive=20).fit(texts, values)


def test_cross_validated_figures_are_deterministic_with_the_seed(demo_hand, demo_coder):
    lexicon, texts, values = demo_hand
    again = LearnedCoder(lexicon, random_state=5, min_positive=20).fit(texts, values)
    pd.testing.assert_frame_equal(demo_coder.report_, again.report_)
    assert demo_coder.combined_ == again.combined_


def test_scikit_learns_own_cross_validation_reproduces_the_figures(demo_hand, demo_coder):
    # reference: sklearn.model_selection.cross_val_score / cross_val_predict with the same folds and seed
    from sklearn.metrics import cohen_kappa_score, f1_score, precision_score, recall_score
    from sklearn.model_selection import StratifiedKFold, cross_val_predict, cross_val_score

    lexicon, texts, values = demo_hand
    X = demo_coder.features(texts)
    report = demo_coder.report_.set_index("theme")
    checked = 0
    for theme in ("cost_value", "nature_wildlife", "transport", "food_drink"):
        column = lexicon.ids.index(theme)
        y = values[:, column].astype(int)
        cv = StratifiedKFold(5, shuffle=True, random_state=5)
        model = ThemeModel(random_state=5)
        fold_f1 = cross_val_score(model, X, y, cv=cv, scoring="f1")
        assert report.loc[theme, "model_f1_fold_mean"] == pytest.approx(fold_f1.mean(), abs=1e-12)
        predicted = cross_val_predict(model, X, y, cv=cv)
        assert report.loc[theme, "model_f1"] == pytest.approx(f1_score(y, predicted), abs=1e-12)
        assert report.loc[theme, "model_precision"] == pytest.approx(precision_score(y, predicted), abs=1e-12)
        assert report.loc[theme, "model_recall"] == pytest.approx(recall_score(y, predicted), abs=1e-12)
        assert report.loc[theme, "model_kappa"] == pytest.approx(cohen_kappa_score(y, predicted), abs=1e-12)
        checked += 1
    assert checked == 4


def test_lexicon_figures_match_scikit_learn(demo_hand, demo_coder):
    from sklearn.metrics import f1_score

    from textkit.coding.coder import ThemeCoder

    lexicon, texts, values = demo_hand
    machine = ThemeCoder(lexicon).fit(texts).transform(texts).toarray()
    column = lexicon.ids.index("transport")
    assert demo_coder.report_.set_index("theme").loc["transport", "lexicon_f1"] == pytest.approx(
        f1_score(values[:, column].astype(int), machine[:, column]))


def test_themes_with_too_few_positive_codes_keep_the_lexicon(demo_coder):
    report = demo_coder.report_.set_index("theme")
    assert report.loc["payment", "hand"] < 20
    assert report.loc["payment", "status"].startswith("keeps the lexicon")
    assert np.isnan(report.loc["payment", "model_f1"])
    assert demo_coder.models_[demo_coder.themes_.index("payment")] is None
    assert any(note.startswith("payment: keeps the lexicon") for note in demo_coder.notes_)
    codes = demo_coder.code(["paid by card at the till"], mode="model")
    assert codes.decided_by[demo_coder.themes_.index("payment")] == "lexicon"


def test_codes_modes_roll_up_and_blank_answers_stay_empty(demo_coder):
    answers = ["the car park was full and no parking anywhere", None, "", "lovely beach, seals and puffins"]
    lexicon_mode = demo_coder.code(answers, mode="lexicon")
    assert (lexicon_mode.matrix != lexicon_mode.lexicon).nnz == 0
    model = demo_coder.code(answers, mode="model")
    dense = model.matrix.toarray()
    assert dense[1].sum() == 0 and dense[2].sum() == 0
    themes = demo_coder.themes_
    parking, transport = themes.index("parking"), themes.index("transport")
    if dense[0, parking]:
        assert dense[0, transport] == 1  # the child's code counts for its parent
    assert dense[3, themes.index("nature_wildlife")] == 1
    evidence = demo_coder.top_features(model.features_of(np.array([3])), np.array([0]), "nature_wildlife")
    assert np.allclose(demo_coder.decision_function(demo_coder.features(answers)), model.scores, equal_nan=True)
    assert evidence[0] and "+" in evidence[0]


def test_threshold_is_between_scores_and_maximises_f1():
    from textkit.coding.learned import _best_threshold

    scores = np.array([0.9, 0.8, 0.3, 0.2, -0.5])
    labels = np.array([1, 1, 0, 1, 0])
    cut = _best_threshold(scores, labels)
    assert 0.2 > cut > -0.5  # all three positives above the cut: F1 = 6/7, the best available


SMALL_LEXICON = """lexicon: tiny
version: '1'
themes:
  - id: cost
    label: Cost
    terms: [expensive, price]
  - id: food
    label: Food
    terms: [lunch]
"""


def test_repair_finds_a_weak_term_a_missing_term_with_its_wildcard_and_skips_generic_words():
    lexicon = parse_lexicon(SMALL_LEXICON)
    texts = (["overcharged for everything"] * 3 + ["we were overcharging tourists, great"] * 2
             + ["expensive lunch"] * 4 + ["the price of entry is on the sign, great view"] * 4
             + ["great lunch"] * 6 + ["a great day"] * 3 + ["lunch was ok"] * 4)
    cost = [1] * 5 + [1] * 4 + [0] * 4 + [0] * 6 + [0] * 3 + [0] * 4
    food = [0] * 5 + [1] * 4 + [0] * 4 + [1] * 6 + [0] * 3 + [1] * 4
    hand = np.column_stack([cost, food]).astype(float)
    report = repair_lexicon(texts, hand, lexicon, folds=3, seed=1)
    terms = report.terms.set_index(["theme", "term"])
    assert terms.loc[("cost", "price"), "precision"] == 0.0
    assert terms.loc[("cost", "expensive"), "alone_catches"] == 4
    found = report.candidates.set_index(["theme", "action", "term"])
    assert ("cost", "remove", "price") in found.index
    assert found.loc[("cost", "remove", "price"), "f1_change_cv"] > 0
    added = found.loc[("cost", "add", "overcharged")]
    assert added["missed_caught"] == 3 and added["wildcard"] == "overcharg*"
    # "great" appears in cost answers but also in food answers and in answers with no theme: not specific
    assert ("cost", "add", "great") not in found.index


def test_train_code_and_correct_end_to_end(tmp_path, capsys):
    coder = tmp_path / "coder.joblib"
    code, _, err = run(["train", DEMO / "hand_coded.csv", "--survey", DEMO / "survey.yaml", "--out", coder,
                        "--quiet"], capsys)
    assert code == 2 and err.count("\n") == 1 and "drones" in err and "--leave-out" in err
    assert not coder.exists()
    code, out, _ = run(["train", DEMO / "hand_coded.csv", "--survey", DEMO / "survey.yaml", "--out", coder,
                        "--leave-out", "drones", "--min-positive", "20"], capsys)
    assert code == 0 and coder.exists() and (tmp_path / "coder.cv.csv").exists()
    assert "keep the lexicon" in out
    code, _, _ = run(["code", DEMO / "survey.yaml", "--coder", coder, "--out", tmp_path / "coded", "--quiet"],
                     capsys)
    assert code == 0
    coded = pd.read_parquet(tmp_path / "coded" / "coded.parquet")
    assert set(coded["source"]) <= {"lexicon", "model", "correction"} and (coded["source"] == "model").any()
    changed = coded[coded["source"] == "model"]
    assert ((changed["model_added"] != "") | (changed["model_removed"] != "")).all()
    evidence = pd.read_csv(tmp_path / "coded" / "model_evidence.csv")
    assert len(evidence) and evidence["top_features"].notna().all()
    code, _, err = run(["prevalence", tmp_path / "coded", "--out", tmp_path / "stats", "--quiet", "--by", "market",
                        "--theme", "cost_value", "--theme", "transport", "--theme", "safety",
                        "--coder-error-from", DEMO / "hand_coded_second.csv"], capsys)
    assert code == 0, err
    raw = pd.read_csv(tmp_path / "stats" / "prevalence.csv", encoding="utf-8-sig")
    corrected = pd.read_csv(tmp_path / "stats" / "coder_corrected.csv", encoding="utf-8-sig")
    keys = ["question", "theme", "group_var", "group", "wave"]
    both = corrected.merge(raw, on=keys, suffixes=("", "_raw"))
    assert len(both) == len(corrected) > 0
    assert np.allclose(both["estimate"], both["estimate_raw"])   # the raw prevalence stands beside the corrected
    ok = both["correction_note"].isna()
    assert ok.any() and (both.loc[ok, "corrected_ci_low"] <= both.loc[ok, "corrected_estimate"]).all()


def test_a_coder_is_refused_for_another_lexicon_version(tmp_path, capsys):
    import joblib

    from textkit.pipeline import CODER_FORMAT

    coder = tmp_path / "coder.joblib"
    joblib.dump({"format": CODER_FORMAT, "coder": None,
                 "manifest": {"lexicon": {"sha256": "0" * 64, "name": "visitor-experience", "version": "old"}}},
                coder)
    before = hashlib.sha256(coder.read_bytes()).hexdigest()
    code, _, err = run(["code", DEMO / "survey.yaml", "--coder", coder, "--out", tmp_path / "out", "--quiet"],
                       capsys)
    assert code == 2 and err.count("\n") == 1 and "retrain" in err and "version 'old'" in err
    assert not (tmp_path / "out").exists()
    assert hashlib.sha256(coder.read_bytes()).hexdigest() == before


def test_mend_writes_a_commented_draft(tmp_path, capsys):
    code, out, _ = run(["mend", DEMO / "hand_coded_second.csv", "--survey", DEMO / "survey.yaml",
                        "--out", tmp_path], capsys)
    assert code == 0
    draft = (tmp_path / "lexicon-repair.yaml").read_text(encoding="utf-8")
    assert draft.startswith("# Lexicon repair draft") and "themes:" in draft and "cv" in draft
    import yaml

    assert isinstance(yaml.safe_load(draft)["themes"], list)
    candidates = pd.read_csv(tmp_path / "repair_candidates.csv")
    assert {"f1_change_cv", "f1_change_apparent", "action"} <= set(candidates.columns)
