"""Agreement of machine codes with hand codes, and of the starter lexicon with the demo gold sample."""

from __future__ import annotations

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
    micro = table.set_index("theme").loc["(all)"]
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
    overall = table.loc["(all)"]
    # Floors. Kappa >= 0.80 over all theme decisions is Krippendorff's usual bar for relying on a
    # coding (Krippendorff 2004, Content Analysis, ch. 11; from memory); it is also what we ask of
    # two human coders. Precision and recall floors sit a little below what the starter lexicon
    # reaches today (0.83 / 0.88, see README) so that a lexicon edit that loses ground fails here.
    assert overall.kappa >= 0.80
    assert overall.precision >= 0.78
    assert overall.recall >= 0.83
    # every theme with at least 10 hand codes is caught more often than missed and is mostly right;
    # transport, which the README reports as over-coded (parking rolls up to it; "travelled" in
    # passing), sits just under that bar since inflections are lemmas (0.596) and has a floor of its own
    frequent = table[(table["hand"] >= 10) & table["in_lexicon"]]
    assert len(frequent) >= 10
    floors = np.where(frequent.index == "transport", 0.55, 0.6)
    assert (frequent["f1"] >= floors).all(), frequent[frequent["f1"] < floors]


def test_the_emerging_theme_is_reported_as_missed(gold_agreement):
    _, table, disagreements = gold_agreement
    drones = table.loc["drones"]
    assert not drones.in_lexicon and drones.hand >= 1 and drones.machine == 0 and drones.recall == 0
    assert disagreements["missed"].str.contains("drones").sum() == drones.hand
