"""Charts read back: points, whiskers, bars and labels come from the data; files are deterministic."""

from __future__ import annotations

import io
import json

import numpy as np
import pandas as pd
import pytest

from textkit.cli.main import main
from textkit.errors import AnalysisError
from textkit.io.output import render_figure
from textkit.present import charts
from textkit.present.style import row_label_texts

THEMES = ["queues", "cost_value", "toilets", "parking"]
GROUPS = ["Caldoria", "Tessary", "Vossland"]


def _prevalence() -> pd.DataFrame:
    rng = np.random.default_rng(4)
    rows = []
    overall = {"queues": 0.30, "cost_value": 0.20, "toilets": 0.10, "parking": 0.05}
    for theme in THEMES:
        rows.append(("low_point", theme, "(all)", "(all)", "(all)", 900, overall[theme], "ok"))
        for group in GROUPS:
            rows.append(("low_point", theme, "market", group, "(all)", 300, overall[theme] + rng.uniform(-.03, .03),
                         "ok"))
    frame = pd.DataFrame(rows, columns=["question", "theme", "group_var", "group", "wave", "n", "estimate", "flag"])
    frame["ci_low"] = frame["estimate"] - 0.03
    frame["ci_high"] = frame["estimate"] + 0.03
    frame.loc[(frame["theme"] == "parking") & (frame["group"] == "Tessary"), "flag"] = "suppress"
    frame.loc[(frame["theme"] == "toilets") & (frame["group"] == "Vossland"), "flag"] = "caution"
    return frame


def _collections(figure, prefix):
    axes = figure.axes[0]
    return [c for c in axes.collections if (c.get_gid() or "").startswith(prefix)]


def test_prevalence_chart_draws_one_point_and_whisker_per_shown_row():
    table = _prevalence()
    figure = charts.prevalence_chart(table, question="low_point", group_var="market")
    shown = table[(table["group_var"] == "market") & (table["flag"] != "suppress")]
    points = sum(len(c.get_offsets()) for c in _collections(figure, "points:") + _collections(figure, "hollow:"))
    whiskers = sum(len(c.get_segments()) for c in _collections(figure, "whiskers:"))
    assert points == whiskers == len(shown) == 11
    hollow = sum(len(c.get_offsets()) for c in _collections(figure, "hollow:"))
    assert hollow == 1  # the caution cell
    # the suppressed cell: a marker, and no whisker at its height
    suppressed_y = _collections(figure, "suppressed")[0].get_offsets()[:, 1]
    assert len(suppressed_y) == 1
    whisker_y = np.concatenate([[seg[0][1] for seg in c.get_segments()] for c in _collections(figure, "whiskers:")])
    assert not np.isclose(whisker_y, suppressed_y[0]).any()
    # ticks from the data, highest overall prevalence at the top
    ticks = row_label_texts(figure.axes[0])
    assert ticks == ["parking", "toilets", "cost_value", "queues"]
    legend = [t.get_text() for t in figure.axes[0].get_legend().get_texts()]
    assert [entry.split(" (n=")[0] for entry in legend[:3]] == GROUPS
    assert "(n=300)" in legend[0]


def test_prevalence_chart_uses_labels_when_the_table_has_them():
    table = _prevalence().assign(label=lambda f: f["theme"].str.replace("_", " ").str.title())
    figure = charts.prevalence_chart(table, question="low_point", group_var="market")
    assert row_label_texts(figure.axes[0])[-1] == "Queues"


def _dense_prevalence(n_themes: int = 30, n_groups: int = 7, seed: int = 9) -> pd.DataFrame:
    """Many themes, many groups, overlapping intervals: labels must compete for room."""
    rng = np.random.default_rng(seed)
    rows = []
    for t in range(n_themes):
        level = rng.uniform(0.01, 0.4)
        rows.append(("low_point", f"theme_{t:02d}", "(all)", "(all)", 2000, level))
        rows += [("low_point", f"theme_{t:02d}", "region", f"Region {g}", 300, max(0.0, level + rng.normal(0, 0.02)))
                 for g in range(n_groups)]
    frame = pd.DataFrame(rows, columns=["question", "theme", "group_var", "group", "n", "estimate"])
    half = rng.uniform(0.005, 0.06, len(frame))
    return frame.assign(wave="(all)", ci_low=(frame["estimate"] - half).clip(0), ci_high=frame["estimate"] + half,
                        flag="ok")


def _label_boxes(figure, prefix):
    from textkit.present.style import renderer_of

    renderer = renderer_of(figure)
    texts = [t for t in figure.axes[0].texts if (t.get_gid() or "").startswith(prefix)]
    return texts, [t.get_window_extent(renderer) for t in texts]


def test_direct_labels_never_overlap_on_a_dense_chart():
    table = _dense_prevalence()
    figure = charts.prevalence_chart(table, question="low_point", group_var="region")
    texts, boxes = _label_boxes(figure, ("value-label:", "label:group:"))
    values = [t for t in texts if t.get_gid().startswith("value-label:")]
    names = [t for t in texts if t.get_gid().startswith("label:group:")]
    assert len(values) > 20  # the step keeps labels where there is room...
    assert len(values) < (table["group_var"] == "region").sum()  # ...and drops some on this crowded chart
    assert names and {t.get_text() for t in names} <= {f"Region {g}" for g in range(7)}
    overlapping = [(a.get_text(), b.get_text()) for i, (a, box_a) in enumerate(zip(texts, boxes, strict=True))
                   for b, box_b in zip(texts[i + 1:], boxes[i + 1:], strict=True) if box_a.overlaps(box_b)]
    assert overlapping == []
    axes_box = figure.axes[0].bbox
    assert all(axes_box.x0 <= box.x0 and box.x1 <= axes_box.x1 for box in boxes)
    # no label covers a dot
    drawn = _collections(figure, "points:") + _collections(figure, "hollow:")
    dots = np.vstack([figure.axes[0].transData.transform(c.get_offsets()) for c in drawn if len(c.get_offsets())])
    assert not any(box.contains(x, y) for box in boxes for x, y in dots)
    # every value label says the value of a dot of its own group, and sits beside that dot's whisker
    shown = table[table["group_var"] == "region"]
    for text in values:
        group = text.get_gid().split(":", 1)[1]
        x, y = text.xy
        mine = shown[(shown["group"] == group) & (np.isclose(shown["ci_high"], x) | np.isclose(shown["ci_low"], x))]
        assert f"{mine['estimate'].iloc[0] * 100:.0f}%" == text.get_text()


def test_every_dot_gets_its_value_when_there_is_room():
    table = _prevalence()
    figure = charts.prevalence_chart(table, question="low_point", group_var="market")
    texts, boxes = _label_boxes(figure, "value-label:")
    shown = table[(table["group_var"] == "market") & (table["flag"] != "suppress")]
    assert sorted(t.get_text() for t in texts) == sorted(f"{v * 100:.0f}%" for v in shown["estimate"])
    assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])


def test_the_placement_step_drops_a_label_that_would_collide():
    from matplotlib.figure import Figure

    from textkit.present.labels import LabelRequest, place_labels

    figure = Figure(figsize=(4, 2), dpi=100)
    axes = figure.add_subplot()
    axes.set_xlim(0, 1)
    axes.set_ylim(0, 1)
    same_spot = [LabelRequest("first", [(0.3, 0.5, "right")], "a", "black"),
                 LabelRequest("second", [(0.3, 0.5, "right")], "b", "black"),
                 LabelRequest("third", [(0.3, 0.5, "right"), (0.3, 0.5, "left")], "c", "black")]
    placed = place_labels(axes, same_spot)
    assert [t.get_text() for t in placed] == ["first", "third"]  # second dropped, third moved left
    assert placed[1].get_horizontalalignment() == "right"


def test_reshaped_tables_give_wording_labels_and_flag_reasons():
    table = _prevalence().assign(
        question_text="What was the low point of your visit?",
        theme_label=lambda f: f["theme"].map({"queues": "Queues and waiting", "cost_value": "Cost and value",
                                              "toilets": "Toilets", "parking": "Parking"}),
        flag_reason=lambda f: np.where(f["flag"] == "caution", "relative SE 30% or more",
                                       np.where(f["flag"] == "suppress", "base below 30", None)))
    figure = charts.prevalence_chart(table, question="low_point", group_var="market")
    texts = [t.get_text() for t in figure.texts]
    assert "What was the low point of your visit?" in texts
    assert row_label_texts(figure.axes[0])[-1] == "Queues and waiting"
    caption = [t for t in texts if "Hollow dots" in t]
    assert caption and "relative SE 30% or more" in caption[0] and "base below 30" in caption[0]


def test_a_filter_value_not_in_the_data_lists_the_valid_ones():
    with pytest.raises(AnalysisError, match="group_var 'region' is not in prevalence.csv; valid values: .*market"):
        charts.prevalence_chart(_prevalence(), question="low_point", group_var="region")


def test_same_figure_gives_identical_svg_and_png_at_200_dpi():
    from PIL import Image

    first = render_figure(charts.prevalence_chart(_prevalence(), question="low_point", group_var="market"), "svg")
    second = render_figure(charts.prevalence_chart(_prevalence(), question="low_point", group_var="market"), "svg")
    assert first == second and len(first) > 1000
    figure = charts.prevalence_chart(_prevalence(), question="low_point")
    png = render_figure(figure, "png", dpi=200)
    image = Image.open(io.BytesIO(png))
    assert image.size == (round(figure.get_figwidth() * 200), round(figure.get_figheight() * 200))
    with pytest.raises(ValueError):
        render_figure(figure, "png", dpi=100)


def _comparisons() -> pd.DataFrame:
    return pd.DataFrame({
        "question": "low_point", "theme": ["queues", "cost_value", "toilets", "parking"], "group_var": "(all)",
        "group_a": "(all)", "group_b": "(all)", "wave_a": "2026", "wave_b": "2025",
        "difference": [0.05, -0.02, 0.01, -0.06], "ci_low": [0.02, -0.05, -0.01, -0.09],
        "ci_high": [0.08, 0.01, 0.03, -0.03], "q_value": [0.001, 0.3, 0.5, 0.01]})


def test_differences_sorted_with_significant_rows_distinct_and_a_zero_line():
    rows = charts.difference_rows(_comparisons(), question="low_point", kind="waves")
    figure = charts.differences_chart(rows)
    axes = figure.axes[0]
    assert row_label_texts(axes) == ["parking", "cost_value", "toilets", "queues"]
    significant = _collections(figure, "points:significant")[0].get_offsets()
    assert sorted(significant[:, 0]) == [-0.06, 0.05]
    assert len(_collections(figure, "points:not-significant")[0].get_offsets()) == 2
    assert any(line.get_gid() == "zero-line" for line in axes.lines)


def _keyness() -> pd.DataFrame:
    terms = [f"term {i}" for i in range(12)]
    z = np.array([5, 4, 3.5, 3, 2.5, 2.1, -2.2, -2.6, -3, -3.3, -4, -4.5])
    return pd.DataFrame({"question": "low_point", "group_var": "market", "group": "Caldoria",
                         "reference": "(rest)", "term": terms, "z": z, "g2": z ** 2})


def _bar_widths(axes) -> list[float]:
    """Signed length of every bar drawn (one path per bar in the 'bars:' collections)."""
    return [float(path.vertices[1, 0] - path.vertices[0, 0]) for c in axes.collections
            if (c.get_gid() or "").startswith("bars:") for path in c.get_paths()]


def test_keyness_bars_one_per_term_per_side_with_the_measure_named():
    figure = charts.keyness_chart(_keyness(), question="low_point", group_var="market", group="Caldoria", top=4)
    axes = figure.axes[0]
    widths = _bar_widths(axes)
    assert len(widths) == 8
    assert sum(w > 0 for w in widths) == 4
    assert set(row_label_texts(axes)) == {f"term {i}" for i in (0, 1, 2, 3, 8, 9, 10, 11)}
    assert "z-score" in axes.get_xlabel()
    g2 = charts.keyness_chart(_keyness(), question="low_point", group_var="market", group="Caldoria", measure="g2")
    assert sum(w < 0 for w in _bar_widths(g2.axes[0])) == 6  # G2 takes the side of z


def test_cooccurrence_matrix_matches_a_crosstab():
    rng = np.random.default_rng(1)
    matrix = (rng.random((200, 4)) < 0.3).astype(int)
    share = charts.cooccurrence_matrix(matrix)
    # independent check with pandas: P(B | A) from a crosstab of each pair (common practice)
    for a in range(4):
        for b in range(4):
            table = pd.crosstab(matrix[:, a], matrix[:, b])
            assert share[a, b] == pytest.approx(table.loc[1, 1] / table.loc[1].sum())


def test_topic_charts_from_the_topic_tables():
    topics = pd.DataFrame([("low_point", "uncoded", t, f"label {t}", r, f"w{t}{r}", 1.0 / r)
                           for t in range(1, 4) for r in range(1, 7)],
                          columns=["question", "scope", "topic", "label", "rank", "term", "weight"])
    figure = charts.topic_terms_chart(topics, question="low_point", top=5)
    panels = [a for a in figure.axes if a.get_visible()]
    assert len(panels) == 3 and all(len(_bar_widths(a)) == 5 for a in panels)
    assert row_label_texts(panels[0])[-1] == "w11"
    k_table = pd.DataFrame({"question": "low_point", "scope": "uncoded", "k": [3, 4, 5, 6],
                            "stability": [0.6, 0.8, 0.7, 0.5], "coherence": [0.1, 0.2, 0.15, 0.1],
                            "chosen": [False, True, False, False]})
    figure = charts.k_selection_chart(k_table, question="low_point")
    chosen = [line for a in figure.axes for line in a.lines if line.get_gid() == "chosen-k"]
    assert chosen and all(line.get_xdata()[0] == 4 for line in chosen)


def _results_folder(tmp_path):
    folder = tmp_path / "stats"
    folder.mkdir()
    _prevalence().to_csv(folder / "prevalence.csv", index=False)
    _comparisons().to_csv(folder / "comparisons.csv", index=False)
    (folder / "manifest.json").write_text(json.dumps({"roles": {"weight": "weight"}, "settings": {
        "method": "korn-graubard", "confidence": 0.95, "rule": {"name": "nchs-like"}}}))
    return folder


def test_charts_command_writes_png_and_svg_named_for_what_they_show(tmp_path, capsys):
    folder = _results_folder(tmp_path)
    assert main(["charts", str(folder), "--out", str(tmp_path / "out"), "--jobs", "1", "--quiet"]) == 0
    written = sorted(p.name for p in (tmp_path / "out").iterdir())
    assert "prevalence__low_point__by-market__wave-all.png" in written
    assert "differences__low_point__waves.svg" in written
    assert all((tmp_path / "out" / name).stat().st_size > 0 for name in written)


def test_charts_command_bad_input_is_one_line(tmp_path, capsys):
    folder = _results_folder(tmp_path)
    empty = tmp_path / "empty"
    empty.mkdir()
    assert main(["charts", str(empty), "--out", str(tmp_path / "o1")]) == 2
    message = capsys.readouterr().err.strip()
    assert "\n" not in message and "prevalence.csv" in message and "textkit prevalence" in message
    assert main(["charts", str(folder), "--out", str(tmp_path / "o2"), "--group-var", "region"]) == 2
    message = capsys.readouterr().err.strip()
    assert "\n" not in message and "valid values" in message and "market" in message
    assert not (tmp_path / "o2").exists()
    blocker = tmp_path / "file"
    blocker.write_text("x")
    assert main(["charts", str(folder), "--out", str(blocker / "sub"), "--jobs", "1"]) == 2
    assert "\n" not in capsys.readouterr().err.strip()


def test_catalogue_draws_each_questions_own_topics_with_labels_and_wording(tmp_path):
    from textkit.present.catalogue import chart_text, draw_chart, load_results, plan_charts

    table = _prevalence()
    extra = []
    for code in ("topic_01", "topic_02", "money"):
        part = table[table["theme"] == "queues"].assign(theme=code)
        extra.append(part)
    table = pd.concat([table, *extra], ignore_index=True)
    table["theme_label"] = table["theme"].map({"topic_01": "ferry / late", "topic_02": "view / boat"}).fillna(
        table["theme"])
    table["question_text"] = "What was the low point of your visit?"
    stats, coded = tmp_path / "stats", tmp_path / "coded"
    stats.mkdir()
    coded.mkdir()
    table.to_csv(stats / "prevalence.csv", index=False)
    (stats / "manifest.json").write_text(json.dumps({"command": "prevalence", "nets": {"money": ["cost_value"]}}))
    codes = [{"id": t, "kind": "theme", "label": t, "question": None} for t in THEMES]
    codes += [{"id": "topic_01", "kind": "topic", "label": "ferry / late", "question": "low_point"},
              {"id": "topic_02", "kind": "topic", "label": "view / boat", "question": "high_point"}]
    (coded / "manifest.json").write_text(json.dumps({"command": "code", "codes": codes, "themes": THEMES}))
    pd.DataFrame({"question": ["low_point"], "answered": [1], **{t: [1] for t in THEMES}}).to_csv(
        coded / "coded.csv", index=False)
    results = load_results([stats, coded])
    spec = next(s for s in plan_charts(results) if s.kind == "prevalence" and s.arguments["group_var"] == "market")
    text = chart_text(results, spec)
    assert text.subtitle == "What was the low point of your visit?"
    rows = row_label_texts(draw_chart(results, spec, text=text).axes[0])
    assert "Topic: ferry / late" in rows and "Money (net)" in rows
    assert not any("view / boat" in r for r in rows)  # the other question's topic is left out
