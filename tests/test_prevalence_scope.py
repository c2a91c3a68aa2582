"""Prevalence shaped to the question (crossed groups, nets, totals, scope) and its statistical edge cases."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from textkit.errors import AnalysisError, DesignError
from textkit.stats.design import SurveyDesign
from textkit.stats.estimate import ALL, REST, analyse, beta_interval, prevalence
from textkit.stats.rules import BASE_WIDTH_RULE

with warnings.catch_warnings():
    # samplics is archived and warns on import (FutureWarning): a test reference only
    warnings.simplefilter("ignore")
    from samplics.datasets import load_nhanes2
    from samplics.estimation import TaylorEstimator
    from samplics.utils.types import PopParam


@pytest.fixture(scope="module")
def nhanes() -> pd.DataFrame:
    data = load_nhanes2()["data"].copy()
    data["response_id"] = np.arange(len(data))
    data["race"] = data["race"].map({1: "white", 2: "black", 3: "other"})
    data["diabetes"] = data["diabetes"].fillna(0).astype(int)
    data["older"] = np.where(data["psuid"] == 1, "psu1", "psu2")   # a second variable to cross with race
    return data


@pytest.fixture(scope="module")
def nhanes_design(nhanes) -> SurveyDesign:
    return SurveyDesign.from_frame(nhanes, "finalwgt", "stratid", "psuid", id="response_id",
                                   cluster_ids_restart=True)


def simple(y: list[int], group: list[str], weight: list[float] | None = None, **extra: list) -> pd.DataFrame:
    frame = pd.DataFrame({"response_id": range(len(y)), "t": y, "g": group, "answered": 1, **extra})
    frame["w"] = 1.0 if weight is None else weight
    return frame


# ------------------------------------------------------------------ crossed groups, nets, totals
def test_crossed_groups_equal_a_manual_domain_of_the_cross(nhanes, nhanes_design):
    table = prevalence(nhanes, ["highbp"], nhanes_design, groups=["race*older"], answered_column=None)
    manual = nhanes.assign(cross=nhanes["race"] + " / " + nhanes["older"])
    reference = prevalence(manual, ["highbp"], nhanes_design, groups=["cross"], answered_column=None)
    crossed = table[table.group_var == "race*older"].set_index("group")
    by_hand = reference[reference.group_var == "cross"].set_index("group")
    assert sorted(crossed.index) == sorted(by_hand.index) and len(crossed) == 6
    for column in ("estimate", "se", "ci_low", "ci_high", "n", "n_raising"):
        assert np.allclose(crossed[column], by_hand.loc[crossed.index, column], atol=1e-12, rtol=0)


def test_a_net_equals_the_union_computed_by_hand(nhanes, nhanes_design):
    table = prevalence(nhanes, ["highbp"], nhanes_design, groups=["race"], answered_column=None,
                       nets={"either": ["highbp", "diabetes"]})
    union = nhanes.assign(either=((nhanes["highbp"] == 1) | (nhanes["diabetes"] == 1)).astype(int))
    reference = prevalence(union, ["either"], nhanes_design, groups=["race"], answered_column=None)
    net = table[table.theme == "either"].reset_index(drop=True)
    assert list(table.theme.unique()) == ["highbp", "either"]
    for column in ("estimate", "se", "ci_low", "ci_high", "n_raising"):
        assert np.allclose(net[column], reference[column], atol=1e-12, rtol=0)


def test_totals_match_sum_w_y_and_samplics_total(nhanes, nhanes_design):
    table = prevalence(nhanes, ["highbp"], nhanes_design, groups=["race"], answered_column=None, totals=True)
    overall = table[table.group_var == ALL].iloc[0]
    assert overall.total == pytest.approx((nhanes.finalwgt * nhanes.highbp).sum(), rel=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        estimator = TaylorEstimator(PopParam.total)     # samplics' total estimator, same design
        estimator.estimate(y=nhanes["highbp"], samp_weight=nhanes["finalwgt"], stratum=nhanes["stratid"],
                           psu=nhanes["psuid"], domain=nhanes["race"])
    for race in ("white", "black", "other"):
        row = table[table.group == race].iloc[0]
        in_race = nhanes.race == race
        assert row.total == pytest.approx((nhanes.finalwgt * nhanes.highbp)[in_race].sum(), rel=1e-12)
        assert row.total == pytest.approx(estimator.point_est[race], rel=1e-10)
        assert row.total_se == pytest.approx(estimator.stderror[race], rel=1e-10)


def test_numerator_is_the_unweighted_count_raising_the_theme(nhanes, nhanes_design):
    table = prevalence(nhanes, ["highbp"], nhanes_design, groups=["race"], answered_column=None)
    for race, count in nhanes.groupby("race")["highbp"].sum().items():
        assert table[table.group == race].n_raising.iloc[0] == count


def test_scope_by_question_wave_and_base():
    coded = pd.DataFrame({
        "response_id": np.repeat(np.arange(8), 2), "question": ["q1", "q2"] * 8,
        "wave": np.repeat(["2025"] * 4 + ["2026"] * 4, 2), "g": np.repeat(list("abababab"), 2),
        "answered": [1, 1, 1, 0, 1, 1, 0, 1, 1, 1, 1, 1, 1, 0, 1, 1], "t": [1, 0] * 8})
    design = SurveyDesign.from_frame(coded, wave="wave", id="response_id")
    table = prevalence(coded, ["t"], design, groups=["g"], wave="wave", questions=["q1"], waves=["2026"])
    assert set(table.question) == {"q1"} and set(table.wave) == {"2026"}      # one wave: no pooled rows
    # base "answered": q1 answered by respondents 0, 1, 3 of wave 2025 (respondent 2 did not) ...
    everyone = prevalence(coded, ["t"], design, wave="wave", questions=["q1"], base="all")
    answered = prevalence(coded, ["t"], design, wave="wave", questions=["q1"])
    assert everyone[everyone.wave == "2025"].n.iloc[0] == 4
    assert answered[answered.wave == "2025"].n.iloc[0] == 3
    with pytest.raises(AnalysisError, match="unknown wave '2030'"):
        prevalence(coded, ["t"], design, wave="wave", waves=["2030"])
    with pytest.raises(AnalysisError, match="unknown question 'q9'"):
        prevalence(coded, ["t"], design, wave="wave", questions=["q9"])


# ------------------------------------------------------------------ statistical edge cases
def test_an_empty_domain_has_no_se_and_is_suppressed():
    # group "c" holds two respondents whose weights are 0: p = 0/0 is undefined, so
    # its SE is undefined too (not 0) and the row is suppressed, whatever the rule
    frame = simple([1, 0, 1, 0, 1, 0], ["a", "a", "b", "b", "c", "c"], [1, 1, 1, 1, 0, 0])
    design = SurveyDesign.from_frame(frame, "w", id="response_id")
    row = prevalence(frame, ["t"], design, groups=["g"]).query("group == 'c'").iloc[0]
    assert row.n == 2 and row.weighted_n == 0
    assert np.isnan(row.estimate) and np.isnan(row.se) and np.isnan(row.ci_low)
    assert row.flag == "suppress" and "no weight in the domain" in row.flag_reason


def test_non_finite_figures_are_flagged_and_huge_weights_cannot_overflow():
    # weights of 1e200 would square to inf (n_eff = inf/inf = NaN) without internal rescaling;
    # by hand, rescaling by a power of two leaves every share, SE and interval as with weights 1
    y = [1, 0, 0, 1, 1, 0, 0, 0, 1, 0] * 4
    group = ["a"] * 20 + ["b"] * 20
    plain = simple(y, group)
    huge = simple(y, group, [1e200] * 40)
    one = prevalence(plain, ["t"], SurveyDesign.from_frame(plain, "w", id="response_id"), groups=["g"])
    big = prevalence(huge, ["t"], SurveyDesign.from_frame(huge, "w", id="response_id"), groups=["g"])
    for column in ("estimate", "se", "ci_low", "ci_high", "n_eff", "deff"):
        assert np.allclose(one[column], big[column], rtol=1e-12, atol=0), column
    assert np.allclose(big.weighted_n, one.weighted_n * 1e200, rtol=1e-12)
    # a non-finite SE or interval (from any source) is suppressed, never "ok"
    flags, reasons = BASE_WIDTH_RULE.flags_and_reasons([500, 500], [0.4, 0.4], [np.nan, 0.01], [0.3, np.nan],
                                                       [0.5, 0.5], [50, 50], [400, 400])
    assert list(flags) == ["suppress", "suppress"]
    assert all("not finite" in r for r in reasons)


def test_korn_graubard_df_factor_never_narrows_the_interval():
    # 101 respondents, no design: df = 100. Domain "d" has 5 respondents, 2 raising the theme.
    # By hand: p = 0.4; V = n/(n-1) * p(1-p)/n_d = 1.01 * 0.24 / 5 = 0.04848; design n =
    # p(1-p)/V = 4.9505; the factor (t_{4, .975} / t_{100, .975})^2 = (2.7764/1.9840)^2 = 1.958
    # would inflate n to 9.69 and narrow the interval; capped at 1, the interval is the
    # Clopper-Pearson (beta) interval on n = 4.9505, count 1.9802.
    y = [1, 1, 0, 0, 0] + [0] * 96
    frame = simple(y, ["d"] * 5 + ["e"] * 96)
    row = prevalence(frame, ["t"], groups=["g"]).query("group == 'd'").iloc[0]
    design_n = 0.24 / (101 / 100 * 0.24 / 5)
    assert design_n == pytest.approx(4.950495, abs=1e-6)
    low, high = beta_interval(0.4, design_n)
    assert (row.ci_low, row.ci_high) == pytest.approx((float(low), float(high)), abs=1e-12)
    factor = (stats.t.ppf(0.975, 4) / stats.t.ppf(0.975, 100)) ** 2
    narrow_low, _ = beta_interval(0.4, design_n * factor)
    assert factor > 1.9 and row.ci_low < float(narrow_low)


def test_a_group_at_0_against_a_group_at_1_gets_a_defined_test():
    # 10 respondents at 0 against 10 at 1, equal weights, no design: the design SE of the
    # difference is 0. Under "no difference" the pooled share is 0.5 and the Kish n 10 each:
    # SE = sqrt(0.5 * 0.5 * (1/10 + 1/10)) = 0.2236068; t = 1 / 0.2236068 = 4.472136 on
    # df = 19: p = 2 * t.sf(4.472136, 19) = 0.000264 (scipy).
    frame = simple([0] * 10 + [1] * 10, ["a"] * 10 + ["b"] * 10)
    row = analyse(frame, ["t"], groups=["g"]).group_comparisons().iloc[0]
    assert (row.group_a, row.group_b, row.difference) == ("a", "b", -1.0)
    assert row.se == pytest.approx(0.2236068, abs=1e-7)
    assert row.p_value == pytest.approx(2 * stats.t.sf(4.472136, 19), rel=1e-6)
    assert row.p_value == pytest.approx(0.000264, abs=5e-6)
    assert row.test == "pooled-null-t"


def test_a_missing_wave_is_refused_or_left_out_and_counted():
    frame = simple([1, 0, 1, 0, 1, 0], list("ababab"), wave=["2025", "2025", None, "2026", "2026", "2026"])
    with pytest.raises(AnalysisError, match=r"1 response\(s\) have no wave value, in rows 3"):
        analyse(frame, ["t"], groups=["g"], wave="wave")
    analysis = analyse(frame, ["t"], groups=["g"], wave="wave", missing_wave="drop")
    assert analysis.dropped_responses == 1
    table = analysis.prevalence()
    assert set(table.wave) == {ALL, "2025", "2026"} and table.query("wave == @ALL").n.max() == 5
    # the design refuses it too, naming the rows and the way out
    labelled = frame.assign(wave=frame["wave"].fillna("(missing)"))
    with pytest.raises(DesignError, match=r"rows 3; .*--drop-missing-wave"):
        SurveyDesign.from_frame(labelled, wave="wave")


def test_missing_group_values_count_alike_whether_blank_or_labelled():
    # blank (Python API) and "(missing)" (what the survey reader writes) are both "no group":
    # they count in the total and in "the rest", never as a group of their own
    blank = simple([1, 0, 1, 1, 0, 1], ["a", "a", "b", "b", None, None])
    labelled = blank.assign(g=blank["g"].fillna("(missing)"))
    one, two = prevalence(blank, ["t"], groups=["g"]), prevalence(labelled, ["t"], groups=["g"])
    assert set(two.group) == {ALL, "a", "b"}
    pd.testing.assert_frame_equal(one, two)


# ------------------------------------------------------------------ multiple-testing families
def test_families_structural_zeros_and_two_group_variables():
    # a theme nobody raised: every contrast is 0 with SE 0, left out of the family and marked
    frame = simple([1, 0, 1, 0, 0, 1, 1, 0, 1, 0, 0, 1], list("ababababcccc"), nobody=[0] * 12,
                   two=list("xyxyxyxyxyxy"))
    analysis = analyse(frame, ["t", "nobody"], groups=["g", "two"])
    table = analysis.comparisons()
    zero = table[table.theme == "nobody"]
    assert zero.p_value.isna().all() and zero.q_value.isna().all()
    assert set(zero.test) == {"none: both at 0 or both at 1"}
    # a variable with two groups gets the pair only, not the pair plus both "vs rest" rows
    two = table[(table.group_var == "two") & (table.theme == "t")]
    assert len(two) == 1 and REST not in set(two.group_b)
    # default family: per question x group variable; "table" pools them
    assert set(table.family) == {"(all) | g | groups", "(all) | two | groups"}
    pooled = analyse(frame, ["t", "nobody"], groups=["g", "two"], family="table").comparisons()
    assert set(pooled.family) == {"table"}
    g_rows = table.family == "(all) | g | groups"
    from statsmodels.stats.multitest import multipletests  # reference BH (statsmodels)
    known = g_rows & table.p_value.notna()
    assert np.allclose(table.q_value[known], multipletests(table.p_value[known], method="fdr_bh")[1])


# ------------------------------------------------------------------ Python construction
def test_design_from_config_and_short_reprs(tmp_path):
    from textkit.io.config import config_from_mapping

    frame = pd.DataFrame({"response_id": ["r1", "r2", "r3", "r4"], "text": ["a", "b", "c", "d"],
                          "w": [1.0, 2.0, 1.0, 2.0], "h": ["x", "x", "y", "y"]})
    config = config_from_mapping({"survey": "s.csv", "id": "response_id", "questions": ["text"], "weight": "w",
                                  "design": {"strata": "h"}}, tmp_path)
    design = SurveyDesign.from_config(config, frame)
    assert design.weights.tolist() == [1.0, 2.0, 1.0, 2.0] and design.n_strata == 2
    assert repr(design) == "<SurveyDesign: 4 responses, weighted, 2 strata, 4 PSUs, df 2>"
    coded = frame.assign(t=[1, 0, 1, 1], answered=1)
    assert repr(analyse(coded, ["t"], design)).startswith("<SurveyAnalysis: 1 question(s), 1 theme(s)")


# ------------------------------------------------------------------ CLI rough edges
def _coded_folder(tmp_path, roles: dict, coded: pd.DataFrame) -> str:
    folder = tmp_path / "coded"
    folder.mkdir()
    coded.to_parquet(folder / "coded.parquet")
    (folder / "manifest.json").write_text(json.dumps({"roles": roles, "themes": ["t"]}))
    return str(folder)


def _coded(n: int = 60) -> pd.DataFrame:
    rng = np.random.default_rng(5)
    return pd.DataFrame({"response_id": [f"r{i}" for i in range(n)], "question": "q", "answered": 1,
                         "t": rng.integers(0, 2, n), "g": rng.choice(["a", "b", "c"], n),
                         "h": rng.choice(["x", "y"], n), "wave": np.where(np.arange(n) < n // 2, "1", "2")})


def test_cli_prevalence_refuses_a_design_column_the_data_lacks(tmp_path):
    from textkit.cli.main import main

    folder = _coded_folder(tmp_path, {"id": "response_id", "weight": "weight", "groups": ["g"]}, _coded())
    assert main(["prevalence", folder, "--out", str(tmp_path / "out"), "--quiet"]) == 2
    assert not (tmp_path / "out").exists()


def test_cli_missing_wave_refused_then_left_out(tmp_path, capsys):
    from textkit.cli.main import main

    coded = _coded()
    coded.loc[3, "wave"] = None
    folder = _coded_folder(tmp_path, {"id": "response_id", "wave": "wave", "groups": ["g"]}, coded)
    assert main(["prevalence", folder, "--out", str(tmp_path / "a"), "--quiet"]) == 2
    assert "rows 4" in capsys.readouterr().err
    assert main(["prevalence", folder, "--out", str(tmp_path / "b"), "--quiet", "--drop-missing-wave"]) == 0
    manifest = json.loads((tmp_path / "b" / "manifest.json").read_text())
    assert manifest["dropped_responses_missing_wave"] == 1


def test_cli_scope_options_bom_and_rounding(tmp_path):
    from textkit.cli.main import main

    folder = _coded_folder(tmp_path, {"id": "response_id", "wave": "wave", "groups": ["g"]}, _coded())
    out = tmp_path / "out"
    assert main(["prevalence", folder, "--out", str(out), "--quiet", "--by", "g*h", "--wave", "2"]) == 0
    raw = (out / "prevalence.csv").read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")                          # UTF-8 with a BOM by default
    table = pd.read_csv(out / "prevalence.csv", encoding="utf-8-sig")
    assert set(table.group_var) == {ALL, "g*h"} and set(table.wave.astype(str)) == {"2"}
    assert (table.estimate.dropna().round(4) == table.estimate.dropna()).all()
    full = pd.read_parquet(out / "prevalence.parquet")
    assert not (full.estimate.dropna().round(4) == full.estimate.dropna()).all()   # full precision kept
    assert main(["prevalence", folder, "--out", str(tmp_path / "x"), "--quiet", "--encoding", "utf-8"]) == 0
    assert not (tmp_path / "x" / "prevalence.csv").read_bytes().startswith(b"\xef\xbb\xbf")


def test_config_names_the_new_name_of_a_renamed_design_option(tmp_path):
    from textkit.io.config import load_config

    path = tmp_path / "s.yaml"
    path.write_text("survey: s.csv\nid: id\nquestions: [text]\ndesign:\n  nest: true\n", encoding="utf-8")
    with pytest.raises(Exception, match="'nest' in 'design' is now called cluster_ids_restart"):
        load_config(path)
