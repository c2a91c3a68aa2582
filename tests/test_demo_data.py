"""Checks on the invented demo survey in demo_comments/ (generator, shipped data, gold sample)."""

from __future__ import annotations

import importlib.util
import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

DEMO = Path(__file__).resolve().parents[1] / "demo_comments"

# The fixed theme ids of the starter theme list (.helpers/THEMES.md) plus the emerging "drones".
THEME_IDS = frozenset({
    "cost_value", "crowding", "queues", "cleanliness", "facilities", "toilets", "connectivity", "staff",
    "information_signage", "weather", "transport", "parking", "accommodation", "food_drink",
    "accessibility", "safety", "noise", "nature_wildlife", "booking_tickets", "opening_hours", "shopping",
    "guides_tours", "language", "children_families", "activities_events", "maintenance",
    "sustainability", "payment", "history_culture", "drones",
})


def _load_generator():
    spec = importlib.util.spec_from_file_location("demo_generate", DEMO / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _read(name: str) -> pd.DataFrame:
    return pd.read_csv(DEMO / name, dtype=str, keep_default_na=False, encoding="utf-8")


@pytest.fixture(scope="module")
def generator():
    return _load_generator()


@pytest.fixture(scope="module")
def survey() -> pd.DataFrame:
    return _read("survey.csv")


@pytest.fixture(scope="module")
def planted() -> pd.DataFrame:
    return _read("planted_labels.csv")


def test_generator_is_deterministic(generator, tmp_path):
    first = generator.main(tmp_path / "a", scale=0.04)
    second = generator.main(tmp_path / "b", scale=0.04)
    for name in first:
        assert first[name].read_bytes() == second[name].read_bytes(), name
    third = generator.main(tmp_path / "c", scale=0.04, seed=generator.SEED + 1)
    assert third["survey"].read_bytes() != first["survey"].read_bytes()


@pytest.mark.slow
def test_shipped_files_are_what_the_generator_writes(generator, tmp_path):
    written = generator.main(tmp_path)
    for name, path in written.items():
        assert path.read_bytes() == (DEMO / path.name).read_bytes(), name


def test_theme_list_matches_the_starter_themes(generator):
    assert frozenset(generator.THEMES) == THEME_IDS


def test_kept_probability_matches_exact_enumeration(generator):
    # Reference: brute-force enumeration of all 2^K draw outcomes, each keeping a uniformly random
    # `cap` of the drawn themes (common practice: exact enumeration of a small discrete model).
    rng = np.random.default_rng(3)
    P = rng.uniform(0.05, 0.7, size=(3, 6))
    cap = 2
    expected = np.zeros_like(P)
    for row in range(P.shape[0]):
        for outcome in itertools.product([0, 1], repeat=P.shape[1]):
            drawn = np.array(outcome, dtype=bool)
            probability = np.prod(np.where(drawn, P[row], 1 - P[row]))
            count = drawn.sum()
            expected[row] += probability * drawn * (min(1.0, cap / count) if count else 0.0)
    np.testing.assert_allclose(generator.kept_probability(P, cap=cap), expected, rtol=1e-12)


def test_survey_shape_and_design(survey):
    assert len(survey) >= 6000
    assert survey["response_id"].is_unique
    assert sorted(survey["wave"].unique()) == ["2025", "2026"]
    assert (survey["wave"].value_counts() >= 3000).all()
    assert survey["market"].nunique() >= 5
    weight = survey["weight"].astype(float)
    assert (weight > 0).all() and weight.max() / weight.min() > 5
    psus_per_stratum = survey.groupby(["wave", "stratum"])["psu"].nunique()
    assert psus_per_stratum.min() >= 2
    assert survey.groupby("psu")["stratum"].nunique().max() == 1  # clusters nested in strata
    assert survey.groupby("psu")["wave"].nunique().max() == 1
    for question in ("low_point", "high_point"):
        blank = survey[question].str.strip().eq("")
        assert 0.02 < blank.mean() < 0.15


def test_text_has_material_for_redaction_and_normalisation(survey):
    text = pd.concat([survey["low_point"], survey["high_point"]])
    assert text.str.contains(r"@[\w-]+\.example", regex=True).any()
    assert text.str.contains(r"BK\d{11}", regex=True).any()
    assert text.str.contains("\u2019").any()
    assert (text.str.split().str.len() >= 200).sum() >= 10


def test_drones_only_in_wave_two(survey, planted):
    labels = planted.merge(survey[["response_id", "wave"]], on="response_id")
    has_drones = labels["themes"].str.split(";").map(lambda themes: "drones" in themes)
    assert not has_drones[labels["wave"] == "2025"].any()
    share = has_drones[(labels["wave"] == "2026") & (labels["question"] == "low_point")].mean()
    assert 0.03 < share < 0.09
    low_2025 = survey.loc[survey["wave"] == "2025", "low_point"].str.lower()
    assert not low_2025.str.contains(r"drone|quadcopter|\buav\b", regex=True).any()


def test_planted_labels_use_valid_ids(planted, survey):
    assert set(planted["question"]) == {"low_point", "high_point"}
    assert len(planted) == 2 * len(survey)
    used = {theme for themes in planted["themes"] for theme in themes.split(";") if theme}
    assert used <= THEME_IDS


def test_truth_table_agrees_with_the_sample():
    truth = _read("truth.csv")
    totals = truth[truth["group_var"] == "(all)"]
    planted = totals["planted_probability"].astype(float)
    realised = totals["realised_weighted_share"].astype(float)
    n = totals["n_respondents"].astype(int)
    # A design effect of 3 covers weighting and clustering (common practice for such designs).
    tolerance = 4 * np.sqrt(np.maximum(planted * (1 - planted), 1e-4) * 3 / n)
    assert ((planted - realised).abs() <= tolerance).all()
    vossland = truth[(truth["question"] == "low_point") & (truth["theme"] == "cost_value")
                     & (truth["group_value"] == "Vossland")].set_index("wave")["planted_probability"]
    assert float(vossland["2026"]) > float(vossland["2025"]) > 0.2
    drones_2025 = truth[(truth["theme"] == "drones") & (truth["wave"] == "2025")]
    assert (drones_2025["planted_probability"].astype(float) == 0).all()


def test_hand_coded_sample(survey):
    gold = _read("hand_coded.csv")
    assert list(gold.columns) == ["response_id", "question", "text", "themes", "coder_note"]
    assert len(gold) >= 300
    assert set(gold["question"]) == {"low_point", "high_point"}
    assert not gold.duplicated(["response_id", "question"]).any()
    used = {theme for themes in gold["themes"] for theme in themes.split(";") if theme}
    assert used <= THEME_IDS
    assert (gold["themes"] == "").any()
    # texts are verbatim copies of the survey answers
    answers = survey.melt(id_vars="response_id", value_vars=["low_point", "high_point"],
                          var_name="question", value_name="answer")
    joined = gold.merge(answers, on=["response_id", "question"], how="left", validate="one_to_one")
    assert (joined["text"] == joined["answer"]).all()
    waves = survey.set_index("response_id").loc[gold["response_id"], "wave"]
    assert set(waves) == {"2025", "2026"}


@pytest.mark.parametrize(("script", "sample"), [("draw_second_sample.py", "hand_coded_second.csv"),
                                                ("draw_third_sample.py", "hand_coded_third.csv")])
def test_validation_samples_are_the_seeded_draws_their_scripts_describe(script, sample, tmp_path, monkeypatch):
    # The hand-coded validation samples hold exactly the answers their seeded draw gives (same ids,
    # order and text), and no respondent appears in two samples.
    monkeypatch.syspath_prepend(str(DEMO))
    spec = importlib.util.spec_from_file_location(f"demo_{script[:-3]}", DEMO / script)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    drawn = pd.read_csv(module.main(tmp_path / "draft.csv"), dtype=str, keep_default_na=False)
    coded = pd.read_csv(DEMO / sample, dtype=str, keep_default_na=False)
    columns = ["response_id", "question", "wave", "text"]
    pd.testing.assert_frame_equal(drawn[columns], coded[columns])
    others = {name for name in ("hand_coded.csv", "hand_coded_second.csv", "hand_coded_third.csv") if name != sample}
    for other in others:
        earlier = set(pd.read_csv(DEMO / other, dtype=str, keep_default_na=False)["response_id"])
        assert not earlier & set(coded["response_id"]), other
