"""The wide (crosstab) layout of prevalence: cells, blanks, marks and footnotes, in Python and the CLI."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from textkit.errors import AnalysisError
from textkit.stats.crosstab import BASE_ROW, CAUTION_MARK, HIGHER_MARK, LOWER_MARK, TOTAL_COLUMN, crosstab
from textkit.stats.estimate import ALL, REST, analyse


def _survey(seed: int = 11) -> pd.DataFrame:
    """Market "c" raises theme t far more often (0.6 against 0.2), "d" is a base of 12 (suppressed),
    and theme "rare" is rare everywhere (caution); "two" is a variable with two groups."""
    rng = np.random.default_rng(seed)
    market = np.repeat(["a", "b", "c", "d"], [200, 200, 200, 12])
    share = np.select([market == "c"], [0.6], 0.2)
    n = market.size
    return pd.DataFrame({"response_id": np.arange(n), "question": "q", "answered": 1, "g": market,
                         "two": rng.choice(["x", "y"], n), "t": (rng.random(n) < share).astype(int),
                         "rare": (rng.random(n) < 0.03).astype(int), "w": rng.uniform(0.5, 2.0, n)})


@pytest.fixture(scope="module")
def tables():
    from textkit.stats.design import SurveyDesign

    frame = _survey()
    design = SurveyDesign.from_frame(frame, "w", id="response_id")
    analysis = analyse(frame, ["t", "rare"], design, groups=["g", "two"])
    return analysis.prevalence(), analysis.comparisons()


def _cell(wide: pd.DataFrame, theme: str, column: str) -> str:
    return wide.loc[wide.theme == theme, column].iloc[0]


def test_cells_are_rounded_percentages_blank_when_suppressed_and_marked_when_caution(tables):
    prevalence, comparisons = tables
    wide = crosstab(prevalence, comparisons, decimals=1).table
    assert list(wide.columns[:6]) == ["question", "question_text", "wave", "theme", "theme_label", TOTAL_COLUMN]
    assert list(wide.columns[6:]) == ["g: a", "g: b", "g: c", "g: d", "two: x", "two: y"]
    assert list(wide.theme) == [BASE_ROW, "t", "rare"]
    for row in prevalence.itertuples():
        column = TOTAL_COLUMN if row.group_var == ALL else f"{row.group_var}: {row.group}"
        cell = _cell(wide, row.theme, column)
        if row.flag == "suppress":
            assert cell == ""
            continue
        assert cell.rstrip(HIGHER_MARK + LOWER_MARK + CAUTION_MARK) == f"{row.estimate * 100:.1f}"
        assert cell.endswith(CAUTION_MARK) == (row.flag == "caution")
    # the base row is the unweighted base n of each column; group d (12) is suppressed throughout
    assert _cell(wide, BASE_ROW, "g: d") == "12" and _cell(wide, "t", "g: d") == ""
    assert (prevalence.flag == "caution").any()          # the test exercised the caution mark


def test_marks_follow_the_q_values_against_the_rest_and_the_other_group(tables):
    prevalence, comparisons = tables
    wide = crosstab(prevalence, comparisons).table
    # expected marks worked from comparisons.csv directly: group vs the rest (g has 4 groups) ...
    rest = comparisons[(comparisons.group_var == "g") & (comparisons.group_b == REST)]
    for row in rest.itertuples():
        shown = prevalence[(prevalence.group == row.group_a) & (prevalence.theme == row.theme)].flag.iloc[0]
        expected = "" if shown == "suppress" or not row.q_value < 0.05 else \
            (HIGHER_MARK if row.difference > 0 else LOWER_MARK)
        cell = _cell(wide, row.theme, f"g: {row.group_a}").rstrip(CAUTION_MARK)
        mark = cell[-1:] if cell[-1:] in (HIGHER_MARK, LOWER_MARK) else ""
        assert mark == expected
    # planted: c raises t three times as often as the rest (0.6 against 0.2)
    assert _cell(wide, "t", "g: c").endswith(HIGHER_MARK)
    assert _cell(wide, "t", "g: a").endswith(LOWER_MARK)
    # ... and for a variable with two groups, the pair itself, opposite marks on the two sides
    pair = comparisons[(comparisons.group_var == "two") & (comparisons.theme == "t")].iloc[0]
    x, y = _cell(wide, "t", "two: x"), _cell(wide, "t", "two: y")
    if pair.q_value < 0.05:
        assert {x[-1], y[-1]} == {HIGHER_MARK, LOWER_MARK}
    else:
        assert not {x[-1:], y[-1:]} & {HIGHER_MARK, LOWER_MARK}


def test_a_reference_group_replaces_the_rest_and_is_checked(tables):
    prevalence, comparisons = tables
    result = crosstab(prevalence, comparisons, reference="c")
    wide = result.table
    assert "g: c (reference)" in wide.columns
    assert not _cell(wide, "t", "g: c (reference)").endswith((HIGHER_MARK, LOWER_MARK))
    # a and b are far below c for theme t: their pair rows (a, c) and (b, c) have q < 0.05, difference < 0
    for group in ("a", "b"):
        pair = comparisons[(comparisons.group_a == group) & (comparisons.group_b == "c")
                           & (comparisons.theme == "t")].iloc[0]
        assert pair.q_value < 0.05 and pair.difference < 0
        assert _cell(wide, "t", f"g: {group}").endswith(LOWER_MARK)
    assert any("g: c (reference)" in note for note in result.footnotes)
    assert crosstab(prevalence, comparisons, reference="g=c").table.equals(wide)
    with pytest.raises(AnalysisError, match="unknown reference group 'zz'.*g=a"):
        crosstab(prevalence, comparisons, reference="zz")


def test_csv_text_has_the_table_then_the_footnotes(tables):
    prevalence, comparisons = tables
    result = crosstab(prevalence, comparisons, rule_name="base-width")
    text = result.csv_text()
    head, _, notes = text.partition("\n\n")
    assert pd.read_csv(pd.io.common.StringIO(head), dtype=str).shape[0] == 3
    n_suppressed = int((prevalence.flag == "suppress").sum())
    assert f"'base-width' ({n_suppressed} cells" in notes
    assert notes.count("\n") == len(result.footnotes)


# ------------------------------------------------------------------ CLI
def test_cli_layout_wide_writes_prevalence_wide_csv(tmp_path, capsys):
    from textkit.cli.main import main

    folder = tmp_path / "coded"
    folder.mkdir()
    _survey().to_parquet(folder / "coded.parquet")
    (folder / "manifest.json").write_text(json.dumps({"roles": {"id": "response_id", "weight": "w",
                                                                "groups": ["g", "two"]},
                                                      "themes": ["t", "rare"]}))
    out = tmp_path / "out"
    assert main(["prevalence", str(folder), "--out", str(out), "--quiet", "--layout", "wide",
                 "--reference", "a"]) == 0
    raw = (out / "prevalence_wide.csv").read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")                      # UTF-8 with a BOM, like the other CSVs
    text = raw.decode("utf-8-sig")
    assert "g: a (reference)" in text.splitlines()[0] and "Blank cell: suppressed" in text
    assert (out / "prevalence.csv").exists()                     # the long table is still written
    assert json.loads((out / "manifest.json").read_text())["settings"]["reference"] == "a"
    # --reference without the wide layout, and an unknown reference: one line, exit 2, no folder
    assert main(["prevalence", str(folder), "--out", str(tmp_path / "x"), "--reference", "a"]) == 2
    assert main(["prevalence", str(folder), "--out", str(tmp_path / "y"), "--layout", "wide",
                 "--reference", "nowhere"]) == 2
    err = capsys.readouterr().err
    assert "add --layout wide" in err and "unknown reference group 'nowhere'" in err
    assert not (tmp_path / "x").exists() and not (tmp_path / "y").exists()
