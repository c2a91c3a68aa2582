"""The demo's planted truth against the reported confidence intervals.

The generator (demo_comments/generate.py) plants a population probability for
every question x theme x wave x group; feeding the planted labels (not the
lexicon's codes, so coding error stays out) through the estimator must put the
truth inside the 95% intervals at about the nominal rate.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from textkit.io.config import load_config
from textkit.io.readers import read_survey
from textkit.stats.design import SurveyDesign
from textkit.stats.estimate import prevalence

DEMO = Path(__file__).resolve().parents[1] / "demo_comments"
GROUPS = ["market", "age_band", "trip_purpose", "season", "site"]


@pytest.fixture(scope="module")
def planted_table() -> pd.DataFrame:
    frame = read_survey(load_config(DEMO / "survey.yaml")).frame
    labels = pd.read_csv(DEMO / "planted_labels.csv", keep_default_na=False, dtype=str)
    truth = pd.read_csv(DEMO / "truth.csv", dtype={"wave": str})
    themes = sorted(truth["theme"].unique())
    coded = labels.merge(frame[["response_id", "weight", "stratum", "psu", "wave", *GROUPS]], on="response_id")
    codes = coded["themes"].str.get_dummies(sep=";")
    for theme in themes:
        coded[theme] = codes.get(theme, 0)
    coded["answered"] = 1  # truth.csv's planted_probability has all respondents as its base
    design = SurveyDesign.from_frame(coded, weight="weight", strata="stratum", cluster="psu", wave="wave")
    table = prevalence(coded, themes, design, groups=GROUPS, wave="wave")
    rows = table[table["wave"] != "(all)"].rename(columns={"group": "group_value"})
    return rows.merge(truth, on=["question", "theme", "wave", "group_var", "group_value"], validate="1:1")


def test_every_truth_row_has_an_estimate(planted_table):
    assert len(planted_table) == len(pd.read_csv(DEMO / "truth.csv"))


def test_planted_truth_inside_intervals_at_about_nominal_rate(planted_table):
    shown = planted_table[planted_table["flag"] != "suppress"]
    inside = (shown["ci_low"] <= shown["planted_probability"]) & (shown["planted_probability"] <= shown["ci_high"])
    # 95% intervals (common practice). Korn-Graubard is conservative for rare themes, so the rate
    # may sit a little above 0.95; far below would mean wrong variances, 1.0 means useless width.
    assert 0.93 <= inside.mean() <= 0.99, inside.mean()
    big = shown[shown["planted_probability"] >= 0.05]
    inside_big = (big["ci_low"] <= big["planted_probability"]) & (big["planted_probability"] <= big["ci_high"])
    assert len(big) > 200
    assert 0.92 <= inside_big.mean() <= 0.985, inside_big.mean()
