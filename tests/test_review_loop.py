"""The researcher's review loop: review workbook, corrections that persist, lexicon diff, hand-coding samples."""

from __future__ import annotations

import hashlib
import json

import numpy as np
import openpyxl
import pandas as pd
import pytest

from textkit.cli import main
from textkit.coding.sampling import allocate

LEXICON_V1 = """lexicon: park
version: '1'
language: en
themes:
  - id: facilities
    label: Facilities
    about: Benches, bins and other amenities.
    terms: [bench]
  - id: toilets
    label: Toilets
    parent: facilities
    negated: keep
    terms: [toilet]
  - id: cost
    label: Cost
    about: Prices.
    terms: [expensive, pricey]
  - id: queues
    label: Queues
    terms: [queue]
"""
# v2: 'pricey' leaves cost, 'wait' joins queues, a new theme 'parking'
LEXICON_V2 = LEXICON_V1.replace("[expensive, pricey]", "[expensive]").replace("[queue]", "[queue, wait]") + \
    "  - id: parking\n    label: Parking\n    terms: [car park]\n"

ANSWERS = [  # response_id, wave, weight, answer
    ("a1", 2025, 1.0, "The queue was long"),
    ("a2", 2025, 2.0, "Too pricey for a family"),
    ("a3", 2025, 1.0, "Had to wait ages at the car park"),
    ("a4", 2025, 1.0, "no toilets anywhere"),
    ("a5", 2026, 1.0, "Expensive and a long wait"),
    ("a6", 2026, 3.0, "pricey snacks, broken bench"),
    ("a7", 2026, 1.0, "lovely day =HYPERLINK(\"http://x\")"),
    ("a8", 2026, 1.0, "n/a"),
]


@pytest.fixture()
def park(tmp_path):
    pd.DataFrame(ANSWERS, columns=["rid", "wave", "weight", "low"]).assign(market="Tessary").to_csv(
        tmp_path / "survey.csv", index=False)
    (tmp_path / "v1.yaml").write_text(LEXICON_V1, encoding="utf-8")
    (tmp_path / "v2.yaml").write_text(LEXICON_V2, encoding="utf-8")
    config = tmp_path / "survey.yaml"
    config.write_text("survey: survey.csv\nid: rid\nquestions: {low_point: low}\nweight: weight\nwave: wave\n"
                      "groups: [market]\nlexicon: v1.yaml\nseed: 7\n", encoding="utf-8")
    return tmp_path, config


def run(args, capsys):
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _sheet(path, name):
    book = openpyxl.load_workbook(path)
    rows = list(book[name].iter_rows(values_only=True))
    return book, pd.DataFrame(rows[1:], columns=rows[0])


def test_review_workbook_shows_codes_terms_negation_and_is_formula_safe(park, capsys):
    folder, config = park
    code, _, err = run(["review", config, "--out", folder / "review.xlsx", "--quiet"], capsys)
    assert code == 0, err
    book, review = _sheet(folder / "review.xlsx", "review")
    assert book.sheetnames == ["review", "themes", "corrections"]
    assert book["review"].freeze_panes == "A2" and book["review"].auto_filter.ref.startswith("A1:")
    assert len(review) == 7  # the non-answer a8 is left out
    row = review.set_index("response_id").loc["a4"]
    assert row.toilets == 1 and row.facilities == 1 and row.terms == "toilets: toilet"
    assert row.negated == "toilets: toilet"  # "no toilets" counts (negated: keep) but is marked
    # a text cell that starts like a formula is stored as text, never as a formula
    cells = [c for c in book["review"]["E"] if isinstance(c.value, str) and "HYPERLINK" in c.value]
    assert cells and all(c.data_type == "s" for c in cells)
    definitions = pd.DataFrame(list(book["themes"].values)[1:], columns=list(book["themes"].values)[0])
    assert definitions.set_index("theme").loc["cost", "description"] == "Prices."
    assert [c.value for c in book["corrections"][1]] == ["response_id", "question", "theme", "code", "note", "who",
                                                        "when"]
    first = hashlib.sha256((folder / "review.xlsx").read_bytes()).hexdigest()
    run(["review", config, "--out", folder / "review.xlsx", "--quiet"], capsys)
    assert hashlib.sha256((folder / "review.xlsx").read_bytes()).hexdigest() == first  # same bytes out


def test_review_filters(park, capsys):
    folder, config = park
    code, _, err = run(["review", config, "--out", folder / "r.xlsx", "--theme", "cost", "--wave", "2026",
                        "--quiet"], capsys)
    assert code == 0, err
    _, review = _sheet(folder / "r.xlsx", "review")
    assert review["response_id"].tolist() == ["a5", "a6"]
    run(["review", config, "--out", folder / "u.xlsx", "--uncoded", "--quiet"], capsys)
    assert _sheet(folder / "u.xlsx", "review")[1]["response_id"].tolist() == ["a3", "a7"]
    code, _, err = run(["review", config, "--out", folder / "x.xlsx", "--theme", "nope", "--quiet"], capsys)
    assert code == 2 and "unknown theme 'nope'" in err
    assert "option --theme:" in err and "column" not in err  # an option is named as an option


def test_corrections_round_trip_survive_a_changed_lexicon(park, capsys):
    folder, config = park
    run(["review", config, "--out", folder / "review.xlsx", "--quiet"], capsys)
    book, review = _sheet(folder / "review.xlsx", "review")
    # the researcher corrects in the workbook: two rows in the corrections sheet, one on the review sheet
    sheet = book["corrections"]
    sheet.append(["a2", "low_point", "cost", 0, "'pricey' about a family ticket? no", "ana", "2026-05-01"])
    sheet.append(["a7", "low_point", "toilets", 1, "", "ana", "2026-05-01"])
    sheet.append(["gone1", "low_point", "cost", 1, "answer since deleted", "ana", "2026-05-01"])
    sheet.append(["a1", "low_point", "cost", None, "undecided", "ana", ""])
    columns = [c.value for c in book["review"][1]]
    a3_row = review.index[review["response_id"] == "a3"][0] + 2
    book["review"].cell(a3_row, columns.index("correct_theme") + 1, "queues")
    book["review"].cell(a3_row, columns.index("correct_code") + 1, 0)
    book.save(folder / "review.xlsx")
    before = (folder / "review.xlsx").read_bytes()
    config.write_text(config.read_text() + "corrections: review.xlsx\n", encoding="utf-8")

    for lexicon in ("v1.yaml", "v2.yaml"):  # re-coding with a changed lexicon keeps every correction
        out = folder / f"out-{lexicon}"
        code, _, err = run(["code", config, "--lexicon", folder / lexicon, "--out", out], capsys)
        assert code == 0, err
        coded = pd.read_csv(out / "coded.csv").set_index("response_id")
        assert coded.loc["a2", "cost"] == 0 and coded.loc["a2", "source"] == "correction"
        assert coded.loc["a7", "toilets"] == 1 and coded.loc["a7", "facilities"] == 1  # parent implied
        assert coded.loc["a7", "uncoded"] == 0
        assert coded.loc["a3", "queues"] == 0  # v2 codes 'wait' as queues; the correction still wins
        assert coded.loc["a1", "source"] == "lexicon"  # a blank code is not a decision
        manifest = json.loads((out / "manifest.json").read_text())
        record = manifest["corrections"]
        assert record["sha256"] == hashlib.sha256(before).hexdigest()
        assert record["unmatched"] == 1 and record["undecided"] == 1
        unmatched = pd.read_csv(out / "corrections_unmatched.csv")
        assert unmatched["response_id"].tolist() == ["gone1"]  # a vanished id is reported, not dropped
        assert "fit no answered response (gone1" in err
    # v1: a2 cost 1->0, a7 toilets and facilities 0->1; a3 queues was already 0: 3 codes changed
    assert json.loads((folder / "out-v1.yaml" / "manifest.json").read_text())["corrections"]["codes_changed"] == 3
    # v2: a3 queues would be 1 through 'wait', the correction takes it back to 0; a2 'pricey' no longer codes cost
    assert json.loads((folder / "out-v2.yaml" / "manifest.json").read_text())["corrections"]["codes_changed"] == 3
    assert (folder / "review.xlsx").read_bytes() == before  # the input is never changed
    code, _, err = run(["review", config, "--out", folder / "review.xlsx", "--quiet"], capsys)
    assert code == 2 and "already exists" in err
    code, _, err = run(["review", config, "--out", folder / "review.xlsx", "--quiet", "--replace"], capsys)
    assert code == 2 and "overwrite an input" in err  # --replace never reaches an input


@pytest.mark.parametrize("row, message", [
    (["a2", "low_point", "costs", 0], r"corrections\.csv \(row 1, column 'theme'\): 'costs' is not a lexicon theme"),
    (["a2", "low_point", "cost", "yes"], r"corrections\.csv \(row 1, column 'code'\): expected 0, 1 or blank"),
    (["a2", "high_point", "cost", 1], r"corrections\.csv \(row 1, column 'question'\): 'high_point' is not a"),
])
def test_bad_corrections_give_one_line_and_exit_2(park, capsys, row, message):
    import re

    folder, config = park
    pd.DataFrame([row], columns=["response_id", "question", "theme", "code"]).to_csv(folder / "corrections.csv",
                                                                                    index=False)
    config.write_text(config.read_text() + "corrections: corrections.csv\n", encoding="utf-8")
    code, _, err = run(["code", config, "--out", folder / "out", "--quiet"], capsys)
    assert code == 2 and len(err.strip().splitlines()) == 1 and re.search(message, err), err
    assert not (folder / "out").exists()


def test_bad_cell_in_the_review_workbook_names_file_sheet_row_and_column(park, capsys):
    folder, config = park
    run(["review", config, "--out", folder / "review.xlsx", "--quiet"], capsys)
    book = openpyxl.load_workbook(folder / "review.xlsx")
    book["corrections"].append(["a2", "low_point", "cost", "maybe"])
    book.save(folder / "review.xlsx")
    config.write_text(config.read_text() + "corrections: review.xlsx\n", encoding="utf-8")
    code, _, err = run(["code", config, "--out", folder / "out", "--quiet"], capsys)
    assert code == 2
    assert "review.xlsx [sheet 'corrections'] (row 1, column 'code'): expected 0, 1 or blank, found 'maybe'" in err


def test_lexicon_diff_against_a_hand_count(park, capsys):
    folder, config = park
    code, out, err = run(["lexicon", "diff", folder / "v1.yaml", folder / "v2.yaml", "--survey", config,
                          "--out", folder / "diff"], capsys)
    assert code == 0, err
    table = pd.read_csv(folder / "diff" / "lexicon_diff.csv", keep_default_na=False)
    row = table.set_index(["theme", "wave"])
    # hand count. v1 cost: a2 'pricey', a5 'expensive', a6 'pricey'; v2 cost: a5 only -> lost a2 (2025), a6 (2026)
    assert row.loc[("cost", "2025"), ["old_coded", "new_coded", "gained", "lost"]].tolist() == [1, 0, 0, 1]
    assert row.loc[("cost", "2026"), ["old_coded", "new_coded", "gained", "lost"]].tolist() == [2, 1, 0, 1]
    # weighted shares of answered answers: 2025 weights a1..a4 = 1,2,1,1 (a2 cost) -> 2/5 before, 0 after;
    # 2026 answered a5, a6, a7 (a8 is a non-answer) weights 1,3,1: before (1+3)/5, after 1/5
    assert row.loc[("cost", "2025"), "old_share"] == pytest.approx(2 / 5)
    assert row.loc[("cost", "2025"), "new_share"] == 0
    assert row.loc[("cost", "2026"), "change"] == pytest.approx(1 / 5 - 4 / 5)
    assert row.loc[("cost", "(all)"), "lost"] == 2 and row.loc[("cost", "(all)"), "terms_lost"] == "pricey (2)"
    # queues gains a3 ('wait ages'); a5 already had... no: a5 'long wait' has no 'queue' -> gained too
    assert row.loc[("queues", "(all)"), ["old_coded", "new_coded", "gained", "lost"]].tolist() == [1, 3, 2, 0]
    assert row.loc[("queues", "(all)"), "terms_gained"] == "wait (2)"
    assert row.loc[("parking", "(all)"), "status"] == "added" and row.loc[("parking", "(all)"), "gained"] == 1
    examples = pd.read_csv(folder / "diff" / "lexicon_diff_examples.csv")
    lost = examples[(examples.theme == "cost") & (examples.change == "lost")]
    assert sorted(lost.response_id) == ["a2", "a6"] and set(lost.terms) == {"cost: pricey"}
    assert "cost: +0 -2 answers" in out


def test_allocation_is_proportional_and_capped():
    assert allocate(np.array([50, 30, 20]), 10).tolist() == [5, 3, 2]
    assert allocate(np.array([1, 100]), 50).sum() == 50
    assert allocate(np.array([2, 2]), 10).tolist() == [2, 2]


def test_sample_is_seeded_stratified_enriched_and_weighted(park, capsys):
    folder, config = park
    args = ["sample", config, "--n", 4, "--stratify", "wave", "--enrich", 0.5, "--coders", "ana,ben", "--quiet"]
    code, _, err = run([*args, "--out", folder / "s1.xlsx"], capsys)
    assert code == 0, err
    run([*args, "--out", folder / "s2.xlsx"], capsys)
    assert (folder / "s1.xlsx").read_bytes() == (folder / "s2.xlsx").read_bytes()
    book, sheet = _sheet(folder / "s1.xlsx", "answers")
    assert book.sheetnames == ["answers", "themes", "selection"]
    assert len(sheet) == 8 and sorted(set(sheet.coder)) == ["ana", "ben"]
    assert {"facilities", "toilets", "cost", "queues", "none_applies"} <= set(sheet.columns)
    assert sheet[["cost", "none_applies"]].isna().all().all()  # empty for the coders
    once = sheet[sheet.coder == "ana"]
    # inverse selection probabilities add up to the answered answers of the cells drawn from
    _, cells = _sheet(folder / "s1.xlsx", "selection")
    drawn = cells[cells.drawn > 0]
    assert once["sample_weight"].sum() == pytest.approx(drawn["answers"].sum())
    # enriched pool = uncoded or a single matching term: a1-a4 (2025), a5 and a7 (2026); outside it only a6
    # (two terms). Half of 4 from the pool, the other half from outside it - which holds one answer, so the
    # shortfall comes from the pool: 3 enriched, 1 not
    assert (once["selection"].str.endswith("enriched")).sum() == 3
    assert once.set_index("response_id").loc["a6", "sample_weight"] == 1
    assert set(once["response_id"]) <= {f"a{i}" for i in range(1, 8)}
