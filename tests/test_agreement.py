"""Agreement of machine codes with hand codes, and of the starter lexicon with the demo gold sample."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score, f1_score, precision_score, recall_score

from textkit.coding.agreement import agreement_table, codes_to_matrix, compare_with_hand_codes
from textkit.coding.lexicon import load_lexicon, parse_lexicon
from textkit.errors import InputError

ROOT = Path(__file__).resolve().parents[1]


def test_table_matches_scikit_learn_per_theme_and_micro():
    rng = np.random.default_rng(3)
    hand = (rng.random((200, 4)) < 0.3).astype(np.int8)
    machine = np.where(rng.random((200, 4)) < 0.8, hand, 1 - hand).astype(np.int8)
    table = agreement_table(hand, machine, ["a", "b", "c", "d"])
    for column, theme in enumerate("abcd"):
        row = table.set_index("theme").loc[theme]
        # reference: scikit-learn's binary metrics on the same column
        assert row.precision == pytest.approx(precision_score(hand[:, column], machine[:, column]))
        assert row.recall == pytest.approx(recall_score(hand[:, column], machine[:, column]))
        assert row.f1 == pytest.approx(f1_score(hand[:, column], machine[:, column]))
        assert row.kappa == pytest.approx(cohen_kappa_score(hand[:, column], machine[:, column]))
    micro = table.set_index("theme").loc["(micro)"]
    assert micro.f1 == pytest.approx(f1_score(hand.ravel(), machine.ravel()))


def test_kappa_of_a_two_by_two_table():
    # 2x2 table [[20, 5], [10, 15]] -> kappa 0.40 (from memory; also what scikit-learn gives)
    hand = np.array([1] * 25 + [0] * 25)
    machine = np.array([1] * 20 + [0] * 5 + [1] * 10 + [0] * 15)
    table = agreement_table(hand[:, None], machine[:, None], ["x"])
    assert table.loc[0, "kappa"] == pytest.approx(0.40)


def test_codes_roll_up_and_unknown_ids_name_the_row():
    lexicon = parse_lexicon(
        "lexicon: t\nversion: '1'\nlanguage: en\nthemes:\n"
        "  - id: facilities\n    label: F\n    terms: [bench]\n"
        "  - id: toilets\n    label: T\n    parent: facilities\n    terms: [toilet]\n")
    matrix = codes_to_matrix(["toilets", "", None, "facilities; toilets"], ["facilities", "toilets"],
                             lexicon=lexicon)
    assert matrix.tolist() == [[1, 1], [0, 0], [0, 0], [1, 1]]
    with pytest.raises(InputError, match=r"row 2.*unknown theme id 'loos'"):
        codes_to_matrix(["toilets", "loos"], ["facilities", "toilets"], source="gold.csv")


@pytest.fixture(scope="module")
def gold_agreement():
    gold = pd.read_csv(ROOT / "demo_comments" / "hand_coded.csv", keep_default_na=False, dtype=str)
    lexicon = load_lexicon(ROOT / "lexicons" / "visitor_experience.yaml")
    table, disagreements = compare_with_hand_codes(gold["text"].tolist(), gold["themes"].tolist(), lexicon)
    return gold, table.set_index("theme"), disagreements


def test_starter_lexicon_agrees_with_the_hand_coded_demo_sample(gold_agreement):
    gold, table, _ = gold_agreement
    assert len(gold) >= 300
    overall = table.loc["(micro)"]
    # Floors. Kappa >= 0.80 over all theme decisions is Krippendorff's usual bar for relying on a
    # coding (Krippendorff 2004, Content Analysis, ch. 11; from memory); it is also what we ask of
    # two human coders. Precision and recall floors sit a little below what the starter lexicon
    # reaches today (0.85 / 0.87, see README) so that a lexicon edit that loses ground fails here.
    assert overall.kappa >= 0.80
    assert overall.precision >= 0.78
    assert overall.recall >= 0.83
    # every theme with at least 10 hand codes is caught more often than missed and is mostly right
    frequent = table[(table["hand"] >= 10) & table["in_lexicon"]]
    assert len(frequent) >= 10
    assert (frequent["f1"] >= 0.6).all(), frequent[frequent["f1"] < 0.6]


def test_the_emerging_theme_is_reported_as_missed(gold_agreement):
    _, table, disagreements = gold_agreement
    drones = table.loc["drones"]
    assert not drones.in_lexicon and drones.hand >= 1 and drones.machine == 0 and drones.recall == 0
    assert disagreements["missed"].str.contains("drones").sum() == drones.hand


def _exact(lexicon):
    """The lexicon as a plain matcher: every word as written, negated mentions counted."""
    import dataclasses

    def as_written(terms):
        return tuple(dataclasses.replace(term, inflect=False) for term in terms)

    return dataclasses.replace(lexicon, themes=tuple(
        dataclasses.replace(theme, negated="keep", terms=as_written(theme.terms),
                            exclusions=as_written(theme.exclusions)) for theme in lexicon.themes))


@pytest.mark.parametrize("sample", ["hand_coded.csv", "hand_coded_second.csv", "hand_coded_third.csv"])
def test_defaults_are_as_precise_as_exact_matching_and_score_higher(sample):
    # The coding defaults (lemmas, negated mentions kept) must cost no precision and gain F1 against
    # exact matching of the same lexicon, on every hand-coded sample (the third was held out: drawn
    # and coded after the defaults and the lexicon's inflection review were settled). A lexicon edit
    # that lets an inflection stray outside its theme fails here; `textkit lexicon forms` lists them.
    gold = pd.read_csv(ROOT / "demo_comments" / sample, keep_default_na=False, dtype=str)
    lexicon = load_lexicon(ROOT / "lexicons" / "visitor_experience.yaml")
    texts, codes = gold["text"].tolist(), gold["themes"].tolist()
    defaults = compare_with_hand_codes(texts, codes, lexicon)[0].set_index("theme").loc["(micro)"]
    exact = compare_with_hand_codes(texts, codes, _exact(lexicon))[0].set_index("theme").loc["(micro)"]
    assert defaults.precision >= exact.precision, (defaults.precision, exact.precision)
    assert defaults.f1 >= exact.f1 + 0.02, (defaults.f1, exact.f1)


# --------------------------------------------------------------------------- reference checks (issue 14)

from itertools import combinations  # noqa: E402

import openpyxl  # noqa: E402
from sklearn.metrics import precision_recall_fscore_support  # noqa: E402

from textkit.cli import main  # noqa: E402
from textkit.coding.agreement import (  # noqa: E402
    between_coders,
    consensus,
    evaluate_hand_codes,
    krippendorff_alpha_nominal,
)
from textkit.coding.handcodes import wide_hand_codes  # noqa: E402

NAN = np.nan


def test_krippendorff_alpha_of_the_published_worked_example():
    # Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability", nominal example: 4 coders x 12
    # units, '.' missing -> alpha = 0.743 (published to three decimals)
    data = np.array([
        [1, 2, 3, 3, 2, 1, 4, 1, 2, NAN, NAN, NAN],
        [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, NAN, 3],
        [NAN, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, NAN],
        [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, NAN],
    ])
    assert krippendorff_alpha_nominal(data) == pytest.approx(0.743, abs=5e-4)


def test_alpha_of_the_three_category_table():
    # Artstein & Poesio (2008) table as used in nltk's agreement doctest: [[46,0,0],[6,32,6],[0,0,10]] between
    # two coders -> alpha 0.8005346 (and Cohen's kappa 0.8013245, which scikit-learn reproduces)
    from sklearn.metrics import cohen_kappa_score

    table = np.array([[46, 0, 0], [6, 32, 6], [0, 0, 10]])
    first, second = [], []
    for a in range(3):
        for b in range(3):
            first += [a] * table[a, b]
            second += [b] * table[a, b]
    assert krippendorff_alpha_nominal(np.array([first, second], dtype=float)) == pytest.approx(0.8005346, abs=1e-6)
    assert cohen_kappa_score(first, second) == pytest.approx(0.8013245, abs=1e-6)


def test_alpha_matches_krippendorff_package_and_nltk_on_random_data():
    import krippendorff
    from nltk.metrics.agreement import AnnotationTask

    rng = np.random.default_rng(11)
    for trial in range(5):
        data = rng.integers(0, 2 + trial % 3, size=(3 + trial % 2, 40)).astype(float)
        data[rng.random(data.shape) < 0.2] = NAN
        ours = krippendorff_alpha_nominal(data)
        # reference: the `krippendorff` package (test-only), nominal level
        assert ours == pytest.approx(krippendorff.alpha(reliability_data=data, level_of_measurement="nominal"))
        # reference: nltk's AnnotationTask (binary distance = nominal), on units every coder coded
        complete = data[:, np.isfinite(data).all(axis=0)]
        triples = [(f"c{c}", f"u{u}", str(int(complete[c, u]))) for c in range(complete.shape[0])
                   for u in range(complete.shape[1])]
        assert krippendorff_alpha_nominal(complete) == pytest.approx(AnnotationTask(data=triples).alpha())


def test_weighted_and_partly_blank_figures_match_scikit_learn():
    rng = np.random.default_rng(5)
    hand = (rng.random((150, 3)) < 0.3).astype(float)
    machine = np.where(rng.random((150, 3)) < 0.85, hand, 1 - hand).astype(np.int8)
    hand[rng.random(hand.shape) < 0.1] = NAN  # not coded: left out, never read as 0
    weights = rng.uniform(0.5, 3, 150)
    table = agreement_table(hand, machine, ["a", "b", "c"], weights=weights).set_index("theme")
    for column, theme in enumerate("abc"):
        keep = np.isfinite(hand[:, column])
        y, p, w = hand[keep, column], machine[keep, column], weights[keep]
        precision, recall, f1, _ = precision_recall_fscore_support(y, p, sample_weight=w, average="binary")
        # reference: scikit-learn's weighted binary metrics and kappa on the coded cells only
        assert table.loc[theme, "precision"] == pytest.approx(precision)
        assert table.loc[theme, "recall"] == pytest.approx(recall)
        assert table.loc[theme, "f1"] == pytest.approx(f1)
        assert table.loc[theme, "kappa"] == pytest.approx(cohen_kappa_score(y, p, sample_weight=w))
        assert table.loc[theme, "n"] == keep.sum()
    macro = table.loc[["a", "b", "c"], "f1"].mean()
    assert table.loc["(macro)", "f1"] == pytest.approx(macro)


def test_bootstrap_interval_is_scipys_percentile_interval():
    from scipy.stats import bootstrap

    rng = np.random.default_rng(8)
    hand = (rng.random((120, 1)) < 0.4).astype(float)
    machine = np.where(rng.random((120, 1)) < 0.8, hand, 1 - hand).astype(np.int8)
    table = agreement_table(hand, machine, ["x"], n_resamples=300, seed=4).set_index("theme")

    def f1_of(rows, axis=-1):  # reference statistic: scikit-learn's F1 on each resample
        rows = np.atleast_2d(rows)
        values = [f1_score(hand[r, 0], machine[r, 0]) for r in rows]
        return np.asarray(values) if rows.shape[0] > 1 else values[0]

    # reference: scipy.stats.bootstrap percentile interval with the same resamples (same generator and batches)
    reference = bootstrap((np.arange(120),), f1_of, vectorized=True, n_resamples=300, batch=250,
                          method="percentile", rng=np.random.default_rng(4)).confidence_interval
    assert table.loc["x", "f1_low"] == pytest.approx(reference.low)
    assert table.loc["x", "f1_high"] == pytest.approx(reference.high)


def _two_coder_hand(lexicon, rng, n=60):
    rows = []
    for unit in range(n):
        truth = (rng.random(len(lexicon.ids)) < 0.3).astype(int)
        for coder in ("ana", "ben", "cleo"):
            flip = rng.random(len(truth)) < 0.1
            rows.append({"response_id": f"r{unit}", "question": "q", "coder": coder, "text": "x",
                         **dict(zip(lexicon.ids, np.where(flip, 1 - truth, truth), strict=True))})
    return pd.DataFrame(rows)


TWO_THEMES = parse_lexicon("lexicon: t\nversion: '1'\nlanguage: en\nthemes:\n"
                           "  - id: queues\n    label: Q\n    terms: [queue]\n"
                           "  - id: cost\n    label: C\n    terms: [expensive]\n")


def test_pairwise_kappa_alpha_and_majority_between_coders():
    from sklearn.metrics import cohen_kappa_score as kappa

    frame = _two_coder_hand(TWO_THEMES, np.random.default_rng(2))
    frame.loc[frame.index[5], "cost"] = None  # one blank cell: that coder did not code it
    hand = wide_hand_codes(frame, TWO_THEMES, "codes.xlsx [sheet 'answers']")
    alpha, pairs = between_coders(hand)
    cube = {c: frame[frame.coder == c].set_index("response_id") for c in ("ana", "ben", "cleo")}
    for a, b in combinations(("ana", "ben", "cleo"), 2):
        for theme in TWO_THEMES.ids:
            x, y = cube[a][theme].astype(float), cube[b][theme].astype(float)
            keep = x.notna() & y.notna()
            row = pairs[(pairs.coder_a == a) & (pairs.coder_b == b) & (pairs.theme == theme)].iloc[0]
            # reference: scikit-learn's Cohen's kappa on the answers both coded
            assert row.kappa == pytest.approx(kappa(x[keep], y[keep])) and row.n == keep.sum()
    import krippendorff

    for theme in TWO_THEMES.ids:
        data = np.array([cube[c][theme].astype(float).to_numpy() for c in ("ana", "ben", "cleo")])
        expected = krippendorff.alpha(reliability_data=data, level_of_measurement="nominal")  # reference package
        assert alpha.set_index("theme").loc[theme, "alpha"] == pytest.approx(expected)
    agreed = consensus(hand)
    votes = np.array([cube[c]["queues"].to_numpy(dtype=float) for c in ("ana", "ben", "cleo")])
    assert agreed.values[:, 0].tolist() == (np.nansum(votes, axis=0) >= 2).astype(float).tolist()


def test_wide_sheet_blanks_are_not_zero_and_none_applies_is_a_decision():
    frame = pd.DataFrame({"response_id": ["1", "2", "3", "4"], "question": "q",
                          "text": ["long queue", "too expensive", "lovely", "queue"],
                          "queues": [1, None, None, None], "cost": [0, 1, None, None],
                          "none_applies": [None, None, 1, None]})
    hand = wide_hand_codes(frame, TWO_THEMES, "s.csv")
    # row 4 is wholly blank (not coded); row 3 says no theme applies, so its blanks are 0
    assert np.isnan(hand.values[3]).all() and hand.values[2].tolist() == [0, 0]
    report = evaluate_hand_codes(hand, TWO_THEMES, n_resamples=0)
    table = report.table.set_index("theme")
    assert table.loc["queues", "n"] == 2 and table.loc["cost", "n"] == 3
    assert table.loc["(no theme)", "hand"] == 1 and table.loc["(no theme)", "n"] == 3


@pytest.mark.parametrize("change, message", [
    (lambda f: f.assign(cost=["yes", 0, 0]),
     r"sample\.xlsx \[sheet 'answers'\] \(row 1, column 'cost'\): expected 0, 1"),
    (lambda f: f.drop(columns="cost"), r"column 'cost'\): the sheet has no column for the lexicon's theme"),
    (lambda f: f.assign(response_id=["1", "2", "zz"]),
     r"row 3, column 'response_id'\): response_id zz is not in"),
])
def test_bad_hand_code_sheets_give_one_line_and_exit_2(tmp_path, capsys, change, message):
    survey = pd.DataFrame({"rid": ["1", "2", "3"], "q": ["long queue", "too expensive", "fine"]})
    survey.to_csv(tmp_path / "s.csv", index=False)
    (tmp_path / "lex.yaml").write_text("lexicon: t\nversion: '1'\nlanguage: en\nthemes:\n"
                                       "  - id: queues\n    label: Q\n    terms: [queue]\n"
                                       "  - id: cost\n    label: C\n    terms: [expensive]\n", encoding="utf-8")
    (tmp_path / "s.yaml").write_text("survey: s.csv\nid: rid\nquestions: {q: q}\nlexicon: lex.yaml\n", encoding="utf-8")
    sheet = change(pd.DataFrame({"response_id": ["1", "2", "3"], "question": "q", "queues": [1, 0, 0],
                                 "cost": [0, 1, 0]}))
    book = openpyxl.Workbook()
    book.active.title = "answers"
    book.active.append(list(sheet.columns))
    for row in sheet.itertuples(index=False):
        book.active.append(list(row))
    book.save(tmp_path / "sample.xlsx")
    code = main(["agreement", str(tmp_path / "sample.xlsx"), "--survey", str(tmp_path / "s.yaml"),
                 "--out", str(tmp_path / "out"), "--quiet"])
    stderr = capsys.readouterr().err
    assert code == 2 and len(stderr.strip().splitlines()) == 1
    assert re.search(message, stderr), stderr
    assert not (tmp_path / "out").exists()
