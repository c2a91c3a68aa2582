"""Word clouds: phrases whole, sizes monotone in the measure, fair sides, neutral words, any glyph, same seed."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from textkit.present.clouds import keyness_cloud, two_sided_columns
from textkit.present.style import NEUTRAL_COLOUR, default_font_path


def _table(n_per_side: int = 30) -> pd.DataFrame:
    rng = np.random.default_rng(7)
    left = [f"left {i}" for i in range(n_per_side)] + ["rude car park", "θάλασσα ήσυχη"]
    right = [f"right {i}" for i in range(n_per_side)] + ["café crème", "waited ages"]
    z = np.concatenate([rng.uniform(2.0, 6.0, len(left)), -rng.uniform(2.0, 6.0, len(right)), [0.1, -0.2]])
    return pd.DataFrame({"question": "q", "group_var": "market", "group": "Caldoria", "reference": "(rest)",
                         "term": left + right + ["same rate", "also even"], "z": z})


def test_phrases_whole_sizes_monotone_sides_fair_and_neutral_words_grey():
    table = _table()
    _, columns = keyness_cloud(table, question="q", group_var="market", group="Caldoria", words_per_side=25, seed=3)
    first, middle, second = columns
    placed = set(first.placed) | set(second.placed)
    assert "rude car park" in placed or "waited ages" in placed  # phrases are kept as phrases
    assert not any(word in placed for word in ("rude", "car", "park", "waited", "ages"))
    z = dict(zip(table["term"], table["z"], strict=True))
    for column in (first, second):
        order = sorted(column.placed, key=lambda t: -abs(z[t]))
        sizes = [column.font_sizes[t] for t in order]
        assert sizes == sorted(sizes, reverse=True)  # monotone non-increasing in |z|
        assert all(entry[4] == column.colour for entry in column.cloud.layout_)
    assert abs(len(first.placed) - len(second.placed)) <= 1
    assert set(middle.placed) == {"same rate", "also even"}
    assert all(entry[4] == NEUTRAL_COLOUR for entry in middle.cloud.layout_)


def test_one_side_with_many_more_terms_does_not_take_the_slots():
    table = _table()
    table = table[~table["term"].str.startswith("right 1")]  # the reference side keeps fewer terms
    _, columns = keyness_cloud(table, question="q", group_var="market", group="Caldoria", words_per_side=15)
    assert len(columns[0].placed) == 15 and len(columns[-1].placed) == 15


def test_greek_and_accented_words_render_with_their_glyphs():
    from fontTools.ttLib import TTFont

    table = _table(5)
    _, columns = keyness_cloud(table, question="q", group_var="market", group="Caldoria", words_per_side=40)
    placed = {word for column in columns for word in column.placed}
    assert {"θάλασσα ήσυχη", "café crème"} <= placed
    cmap = TTFont(default_font_path()).getBestCmap()
    assert all(ord(ch) in cmap for ch in "θάλασσαήσυχηcafécrème" if not ch.isspace())
    # the word's box holds ink in the word's colour (not an empty or .notdef box)
    column = next(c for c in columns if "θάλασσα ήσυχη" in c.placed)
    entry = next(e for e in column.cloud.layout_ if e[0][0] == "θάλασσα ήσυχη")
    (row, col), image = entry[2], column.cloud.to_array()
    box = image[row:row + entry[1], col:col + entry[1] * 4]
    assert (np.abs(box.astype(int) - 255).sum(axis=2) > 100).sum() > 20


def test_same_seed_same_layout_other_seed_other_layout():
    table = _table()
    layout = [c.cloud.layout_ for c in two_sided_columns(table["term"], table["z"], np.abs(table["z"]) < 1, seed=5)]
    again = [c.cloud.layout_ for c in two_sided_columns(table["term"], table["z"], np.abs(table["z"]) < 1, seed=5)]
    other = [c.cloud.layout_ for c in two_sided_columns(table["term"], table["z"], np.abs(table["z"]) < 1, seed=6)]
    assert layout == again
    assert layout != other


def test_no_term_leaning_anywhere_is_one_clear_error():
    from textkit.errors import AnalysisError

    with pytest.raises(AnalysisError, match="nothing to draw"):
        two_sided_columns(["a"], [0.0], [False])
