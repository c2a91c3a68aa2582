"""Prevalence, intervals, comparisons and tests checked against outside references."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from textkit.errors import AnalysisError, DesignError, TextkitError
from textkit.stats.design import SurveyDesign
from textkit.stats.estimate import (
    ALL,
    BASE_WIDTH_RULE,
    COMPARISON_COLUMNS,
    PREVALENCE_COLUMNS,
    REST,
    ReliabilityRule,
    add_q_values,
    analyse,
    beta_interval,
    confidence_interval,
    prevalence,
    wilson_interval,
)

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
    return data


@pytest.fixture(scope="module")
def nhanes_design(nhanes) -> SurveyDesign:
    return SurveyDesign.from_frame(nhanes, "finalwgt", "stratid", "psuid", id="response_id", cluster_ids_restart=True)


def samplics_prop(data, y, domain=None, fpc=1.0):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        estimator = TaylorEstimator(PopParam.prop, ciprop_method="logit")
        estimator.estimate(y=data[y], samp_weight=data["finalwgt"], stratum=data["stratid"],
                           psu=data["psuid"], domain=None if domain is None else data[domain], fpc=fpc)
    return estimator


# --------------------------------------------------------------------- samplics
def test_matches_samplics_overall_and_by_domain_on_nhanes2(nhanes, nhanes_design):
    table = prevalence(nhanes, ["highbp", "diabetes"], nhanes_design, groups=["race"], method="logit",
                       answered_column=None)
    assert list(table.columns) == PREVALENCE_COLUMNS
    for theme in ("highbp", "diabetes"):
        # samplics TaylorEstimator (proportion, stratum + psu), overall: to 1e-10
        overall = samplics_prop(nhanes, theme)
        row = table[(table.theme == theme) & (table.group_var == ALL)].iloc[0]
        assert row.estimate == pytest.approx(overall.point_est[1], abs=1e-10)
        assert row.se == pytest.approx(overall.stderror[1], abs=1e-10)
        assert row.ci_low == pytest.approx(overall.lower_ci[1], abs=1e-10)
        assert row.ci_high == pytest.approx(overall.upper_ci[1], abs=1e-10)
        assert row.df == overall.degree_of_freedom == 31
        # samplics by domain (race): zero weights outside the domain, full design
        by_race = samplics_prop(nhanes, theme, "race")
        for race in ("white", "black", "other"):
            row = table[(table.theme == theme) & (table.group == race)].iloc[0]
            assert row.estimate == pytest.approx(by_race.point_est[race][1], abs=1e-10)
            assert row.se == pytest.approx(by_race.stderror[race][1], abs=1e-10)
            assert row.ci_low == pytest.approx(by_race.lower_ci[race][1], abs=1e-10)
            assert row.ci_high == pytest.approx(by_race.upper_ci[race][1], abs=1e-10)


def test_matches_samplics_with_finite_population_correction(nhanes):
    data = nhanes.assign(population=nhanes["stratid"].map(lambda h: 4 + h % 5))
    design = SurveyDesign.from_frame(data, "finalwgt", "stratid", "psuid", "population",
                                     id="response_id", cluster_ids_restart=True)
    table = prevalence(data, ["highbp"], design, method="logit", answered_column=None)
    # samplics takes the fpc factor (1 - n_h/N_h) per stratum
    factor = {h: 1 - 2 / (4 + h % 5) for h in sorted(data["stratid"].unique())}
    reference = samplics_prop(data, "highbp", fpc=factor)
    assert table.se.iloc[0] == pytest.approx(reference.stderror[1], abs=1e-10)


def test_domain_difference_uses_the_covariance(nhanes, nhanes_design):
    analysis = analyse(nhanes, ["highbp"], nhanes_design, groups=["race"], answered_column=None)
    comparisons = analysis.group_comparisons()
    row = comparisons[(comparisons.group_a == "black") & (comparisons.group_b == "white")].iloc[0]
    # reference: the linearised score of p_black - p_white (Binder 1983), whose variance
    # samplics estimates as the variance of a total with weight 1 and the same design
    w, y = nhanes["finalwgt"].to_numpy(float), nhanes["highbp"].to_numpy(float)
    score = np.zeros(len(nhanes))
    for race, sign in (("black", 1), ("white", -1)):
        inside = (nhanes["race"] == race).to_numpy()
        p = (w * y * inside).sum() / (w * inside).sum()
        score += sign * inside * w * (y - p) / (w * inside).sum()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        total = TaylorEstimator(PopParam.total)
        total.estimate(y=score, samp_weight=np.ones(len(score)), stratum=nhanes["stratid"],
                       psu=nhanes["psuid"])
    assert row.se == pytest.approx(total.stderror, abs=1e-12)
    assert row.difference == pytest.approx(row.estimate_a - row.estimate_b)
    independent = np.sqrt(sum(analysis.prevalence().query("group in ['black', 'white']").se ** 2))
    assert row.se != pytest.approx(independent, rel=1e-3)   # the covariance matters
    # group against the rest of the sample is the same kind of difference
    rest = comparisons[(comparisons.group_a == "black") & (comparisons.group_b == REST)].iloc[0]
    others = nhanes["race"] != "black"
    p_rest = (w * y * others).sum() / (w * others).sum()
    assert rest.estimate_b == pytest.approx(p_rest, abs=1e-12)
    assert list(comparisons.columns) == COMPARISON_COLUMNS


# ------------------------------------------------------------ interval methods
def test_interval_formulas_match_statsmodels():
    from statsmodels.stats.proportion import proportion_confint

    # 18 of 20: Clopper-Pearson (0.6830173, 0.9876515), Wilson (0.6989664, 0.9721335)
    # [source: statsmodels' tests, values from R binom]
    low, high = beta_interval(0.9, 20)
    assert (low, high) == pytest.approx((0.6830173, 0.9876515), abs=1e-7)
    low, high = wilson_interval(0.9, 20, stats.norm.ppf(0.975))
    assert (low, high) == pytest.approx((0.6989664, 0.9721335), abs=1e-7)
    assert (low, high) == pytest.approx(proportion_confint(18, 20, method="wilson"), abs=1e-12)


def test_unweighted_no_design_relations_to_statsmodels():
    from statsmodels.stats.proportion import proportion_confint

    coded = pd.DataFrame({"response_id": range(20), "liked": [1] * 18 + [0] * 2})
    base = dict(design=None, answered_column=None)
    kg = prevalence(coded, ["liked"], method="korn-graubard", **base).iloc[0]
    wilson = prevalence(coded, ["liked"], method="wilson", **base).iloc[0]
    # V = p(1-p)/(n-1) without a design (REFERENCES: Lumley 2004), so the effective n is n - 1 = 19
    assert kg.se ** 2 == pytest.approx(0.9 * 0.1 / 19)
    assert kg.deff == pytest.approx(1.0)
    # Korn-Graubard with equal weights is Clopper-Pearson on n - 1 (df = n - 1: no t adjustment);
    # statsmodels' beta interval accepts the non-integer count 0.9 * 19
    assert (kg.ci_low, kg.ci_high) == pytest.approx(
        proportion_confint(0.9 * 19, 19, alpha=0.05, method="beta"), abs=1e-12)
    # Wilson on the effective n with the t_{19} critical value = statsmodels' Wilson at the
    # alpha whose normal quantile is t_{19, 0.975}
    alpha = 2 * stats.norm.sf(stats.t.ppf(0.975, 19))
    assert (wilson.ci_low, wilson.ci_high) == pytest.approx(
        proportion_confint(0.9 * 19, 19, alpha=alpha, method="wilson"), abs=1e-12)


@pytest.mark.parametrize("method", ["logit", "korn-graubard", "wilson"])
def test_estimates_at_zero_and_one_get_finite_intervals(method):
    coded = pd.DataFrame({"response_id": range(40), "never": 0, "always": 1})
    table = prevalence(coded, ["never", "always"], method=method, answered_column=None)
    assert np.isfinite(table[["ci_low", "ci_high"]].to_numpy()).all()
    never, always = table.iloc[0], table.iloc[1]
    assert never.ci_low == 0 and 0 < never.ci_high < 0.15
    assert always.ci_high == 1 and 0.85 < always.ci_low < 1
    if method != "wilson":
        # one-sided Clopper-Pearson end at 0 of 40: 1 - 0.025^(1/40) (common practice)
        assert never.ci_high == pytest.approx(1 - 0.025 ** (1 / 40), abs=1e-10)
    # default rule: 0 of 40 has an interval wider than 0.05 and an unbounded relative width
    assert never.flag == "suppress"
    plain = ReliabilityRule(name="plain", origin="test", min_n=30)
    table = prevalence(coded, ["never"], method=method, answered_column=None, rule=plain)
    assert table.flag.iloc[0] == "caution"   # 0 and 1 are flagged, their SE says nothing


def test_logit_matches_its_formula_and_rejects_unknown_method():
    low, high, used, _ = confidence_interval([0.3], [0.0004], [500], [500], [40], "logit")
    half = stats.t.ppf(0.975, 40) * 0.02 / 0.21
    expected = 1 / (1 + np.exp(-(np.log(0.3 / 0.7) + np.array([-half, half]))))
    assert (low[0], high[0]) == pytest.approx(tuple(expected), abs=1e-14)
    assert used[0] == "logit"
    with pytest.raises(AnalysisError, match="unknown interval method"):
        confidence_interval([0.3], [0.01], [5], [5], [4], "wald")


# ------------------------------------------------------------- Rao-Scott, BH
def test_rao_scott_reduces_to_pearson_with_equal_weights_and_no_design():
    rng = np.random.default_rng(7)
    n = 600
    group = rng.choice(["harbour", "old town", "hills"], n)
    share = {"harbour": 0.2, "old town": 0.35, "hills": 0.3}
    raised = (rng.random(n) < np.vectorize(share.get)(group)).astype(int)
    coded = pd.DataFrame({"response_id": range(n), "area": group, "crowds": raised})
    tests = analyse(coded, ["crowds"], groups=["area"], answered_column=None).group_tests().iloc[0]
    table = pd.crosstab(coded["area"], coded["crowds"]).to_numpy()
    chi2, p, dof, _ = stats.chi2_contingency(table, correction=False)   # scipy reference
    assert tests.pearson_chi2 == pytest.approx(chi2, rel=1e-10)
    # without a design V = n/(n-1) x multinomial, so every generalised design effect is n/(n-1)
    assert tests.mean_deff == pytest.approx(n / (n - 1), rel=1e-10)
    assert tests.chi2_first_order == pytest.approx(chi2 * (n - 1) / n, rel=1e-10)
    assert tests.chi2_df == dof == 2
    assert tests.f_df_num == pytest.approx(2, rel=1e-8)
    assert tests.f_statistic == pytest.approx(chi2 * (n - 1) / n / 2, rel=1e-10)
    assert tests.chi2_p_value == pytest.approx(stats.chi2.sf(chi2 * (n - 1) / n, 2), rel=1e-10)


def test_benjamini_hochberg_published_example():
    # Benjamini & Hochberg (1995) example, adjusted values from scipy's
    # false_discovery_control docstring; computed through statsmodels multipletests
    p = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262,
         0.5719, 0.6528, 0.7590, 1.000]
    expected = [0.0015, 0.003, 0.0095, 0.035625, 0.0603, 0.063857, 0.063857, 0.0645, 0.0765, 0.486,
                0.581182, 0.714875, 0.753231, 0.813214, 1]
    frame = add_q_values(pd.DataFrame({"p_value": p + [np.nan]}))
    assert frame["q_value"].iloc[:15].to_numpy() == pytest.approx(expected, abs=1e-6)
    assert (frame["q_value"] < 0.05).sum() == 4
    assert np.isnan(frame["q_value"].iloc[15])


# ------------------------------------------------------------------ invariances
def test_scaling_weights_changes_nothing(nhanes, nhanes_design):
    scaled = nhanes.assign(finalwgt=nhanes["finalwgt"] * 0.37)
    design = SurveyDesign.from_frame(scaled, "finalwgt", "stratid", "psuid", id="response_id", cluster_ids_restart=True)
    one = prevalence(nhanes, ["highbp"], nhanes_design, groups=["race"], answered_column=None)
    two = prevalence(scaled, ["highbp"], design, groups=["race"], answered_column=None)
    for column in ("estimate", "se", "ci_low", "ci_high", "n_eff", "deff"):
        assert two[column].to_numpy() == pytest.approx(one[column].to_numpy(), rel=1e-10)


def test_duplicating_every_psu_shrinks_the_variance_exactly(nhanes, nhanes_design):
    copy = nhanes.assign(psuid=nhanes["psuid"] + 2, response_id=nhanes["response_id"] + len(nhanes))
    doubled = pd.concat([nhanes, copy], ignore_index=True)
    design = SurveyDesign.from_frame(doubled, "finalwgt", "stratid", "psuid", id="response_id",
                                     cluster_ids_restart=True)
    one = prevalence(nhanes, ["highbp"], nhanes_design, groups=["race"], answered_column=None)
    two = prevalence(doubled, ["highbp"], design, groups=["race"], answered_column=None)
    # half the variance, up to the n_h/(n_h-1) factors: (n_h-1)/(2n_h-1) = 1/3 with n_h = 2
    assert (two.se ** 2).to_numpy() == pytest.approx((one.se ** 2).to_numpy() / 3, rel=1e-10)
    assert two.estimate.to_numpy() == pytest.approx(one.estimate.to_numpy(), rel=1e-12)


def test_group_variable_with_one_value_gives_the_total(nhanes, nhanes_design):
    data = nhanes.assign(country="everywhere")
    table = prevalence(data, ["highbp"], nhanes_design, groups=["country"], answered_column=None)
    total = table[table.group_var == ALL].iloc[0]
    group = table[table.group == "everywhere"].iloc[0]
    for column in ("estimate", "se", "ci_low", "ci_high", "n", "weighted_n", "deff"):
        assert group[column] == pytest.approx(total[column], rel=1e-12)


# ------------------------------------------------- questions, waves, bad input
def survey(seed: int = 3, n: int = 400) -> tuple[pd.DataFrame, SurveyDesign]:
    rng = np.random.default_rng(seed)
    responses = pd.DataFrame({
        "response_id": [f"v{i}" for i in range(n)],
        "weight": rng.uniform(0.5, 2.0, n),
        "zone": rng.choice(["coast", "inland"], n),
        "wave": rng.choice([2025, 2026], n),
        "market": rng.choice(["domestic", "nearby", "overseas"], n, p=[0.6, 0.35, 0.05]),
    })
    responses["site"] = responses["zone"] + (rng.integers(0, 6, n)).astype(str)
    rows = []
    for question in ("best", "worst"):
        part = responses.assign(question=question, answered=(rng.random(n) < 0.8).astype(int),
                                parking=(rng.random(n) < 0.15).astype(int),
                                staff=(rng.random(n) < 0.4).astype(int))
        rows.append(part)
    coded = pd.concat(rows, ignore_index=True)
    design = SurveyDesign.from_frame(coded, "weight", "zone", "site", wave="wave", id="response_id")
    return coded, design


def test_waves_are_independent_and_questions_use_their_answered_base():
    coded, design = survey()
    analysis = analyse(coded, ["parking", "staff"], design, groups=["market"], wave="wave")
    table = analysis.prevalence()
    best = coded[(coded.question == "best") & (coded.answered == 1)]
    total = table[(table.question == "best") & (table.group_var == ALL) & (table.wave == ALL)
                  & (table.theme == "staff")].iloc[0]
    assert total.n == len(best)
    assert total.estimate == pytest.approx(np.average(best.staff, weights=best.weight), rel=1e-12)
    waves = analysis.wave_comparisons()
    row = waves[(waves.question == "best") & (waves.group_var == ALL) & (waves.theme == "staff")].iloc[0]
    assert (row.wave_a, row.wave_b) == (2026, 2025)
    per_wave = table[(table.question == "best") & (table.group_var == ALL) & (table.theme == "staff")]
    late, early = (per_wave[per_wave.wave == w].iloc[0] for w in (2026, 2025))
    assert row.se == pytest.approx(np.hypot(late.se, early.se), rel=1e-12)
    assert row.difference == pytest.approx(late.estimate - early.estimate, rel=1e-12)
    # the stacked design gives exactly zero covariance between the waves
    block = analysis.blocks[0]
    i = block.target_wave.index(2026)
    j = block.target_wave.index(2025)
    assert np.abs(block.covariance[:, i, j]).max() < 1e-18
    everything = analysis.comparisons()
    assert everything["q_value"].notna().sum() == everything["p_value"].notna().sum()


def test_tiny_groups_are_flagged_not_crashing():
    coded, design = survey()
    table = prevalence(coded, ["parking"], design, groups=["market"], wave="wave")
    overseas = table[table.group == "overseas"]
    assert (overseas.flag == "suppress").all()
    assert set(table.flag) <= {"ok", "caution", "suppress"}


def test_reliability_rule_thresholds():
    rule = ReliabilityRule(name="test", origin="test", min_n=30, caution_rse=0.30)
    flags = rule.flags([20, 100, 100, 100], [0.5, 0.5, 0.05, 0.95], [0.05, 0.05, 0.02, 0.02],
                       [0.4, 0.4, 0.02, 0.9], [0.6, 0.6, 0.1, 0.98], [50] * 4, [20, 100, 100, 100])
    # RSE on the smaller share: 0.02 / 0.05 = 40% for both 0.05 and 0.95
    assert list(flags) == ["suppress", "ok", "caution", "caution"]
    # NCHS 2017 style: a 0.35-wide interval is suppressed; relative width 0.08/0.05 > 130% too
    nchs = BASE_WIDTH_RULE.flags([500, 500], [0.5, 0.05], [0.01, 0.01], [0.3, 0.02], [0.65, 0.1], [50, 50],
                           [500, 500])
    assert list(nchs) == ["suppress", "suppress"]


def test_bad_input_is_a_precise_error():
    coded, design = survey()
    with pytest.raises(AnalysisError, match="no column 'country'") as error:
        prevalence(coded, ["parking"], design, groups=["country"])
    assert error.value.column == "country"
    with pytest.raises(AnalysisError, match="no column 'season'"):
        prevalence(coded, ["parking"], design, wave="season")
    empty = coded.assign(market=pd.Categorical(coded["market"], categories=["domestic", "nearby",
                                                                             "overseas", "cruise"]))
    with pytest.raises(AnalysisError, match="group 'cruise' has no responses"):
        prevalence(empty, ["parking"], design, groups=["market"])
    bad = coded.copy()
    bad.loc[bad.response_id == "v3", "weight"] = -2.0
    with pytest.raises(DesignError, match="negative") as error:
        SurveyDesign.from_frame(bad, "weight", "zone", "site", id="response_id")
    assert error.value.row == 4 and error.value.column == "weight"
    bad.loc[bad.response_id == "v3", "weight"] = np.nan
    with pytest.raises(DesignError, match="missing"):
        SurveyDesign.from_frame(bad, "weight", "zone", "site", id="response_id")
    assert issubclass(AnalysisError, TextkitError)


def test_cli_writes_the_three_tables(tmp_path):
    import json

    from click.testing import CliRunner

    from textkit.cli.stats import prevalence_command

    coded, _ = survey()
    folder = tmp_path / "coded"
    folder.mkdir()
    coded.to_parquet(folder / "coded.parquet")
    roles = {"id": "response_id", "weight": "weight", "strata": "zone", "cluster": "site", "fpc": None,
             "single_psu": "error", "wave": "wave", "groups": ["market"]}  # a manifest from before the rename
    (folder / "manifest.json").write_text(json.dumps({"roles": roles, "themes": ["parking", "staff"]}))
    result = CliRunner().invoke(prevalence_command, [str(folder), "--out", str(tmp_path / "out"), "--quiet"])
    assert result.exit_code == 0, result.output
    table = pd.read_csv(tmp_path / "out" / "prevalence.csv")
    assert list(table.columns) == PREVALENCE_COLUMNS
    assert list(pd.read_csv(tmp_path / "out" / "comparisons.csv").columns) == COMPARISON_COLUMNS
    assert (tmp_path / "out" / "group_tests.csv").exists()
    assert set(table.method) == {"korn-graubard"}
    # a group column the data lacks: a TextkitError (the textkit CLI turns it into exit 2)
    roles["groups"] = ["country"]
    (folder / "manifest.json").write_text(json.dumps({"roles": roles, "themes": ["parking"]}))
    result = CliRunner().invoke(prevalence_command, [str(folder), "--out", str(tmp_path / "bad")])
    assert isinstance(result.exception, AnalysisError)
    assert not (tmp_path / "bad").exists()
