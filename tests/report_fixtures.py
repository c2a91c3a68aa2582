"""A crafted survey for the report tests: the demo's first rows with hostile group values and answers."""

from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_comments"

#: Group values that try every way into a page or a spreadsheet (the issue's list, common practice).
HOSTILE_GROUPS = [
    "<script>document.title='pwned'</script>",
    "<img id=injected src=x onerror=\"document.title='pwned'\">",
    "x\" onmouseover=\"document.title='pwned'\" data-x=\"",
    "javascript:document.title='pwned'",
    "=HYPERLINK(\"http://example.invalid\",\"click\")",
    "@SUM(1+1)",
]
#: Answers starting with each formula trigger, or carrying markup; each mentions the invented
#: 'zephyrgate', the only term of the crafted lexicon's 'gate' theme, so that every quote of that
#: theme is a hostile answer (quotes need 6 to 60 words).
HOSTILE_ANSWERS = [
    "=1+2 <script>document.title='pwned'</script> the zephyrgate queues were long and slow",
    "+cmd|' /C calc'!A0 the zephyrgate car park was far too expensive",
    "-2+3 <img id=injected src=x onerror=\"document.title='pwned'\"> zephyrgate had dirty toilets everywhere",
    "@SUM(A1) the beach by the zephyrgate was crowded all day",
    "\tTAB the staff at the zephyrgate were rude to us",
    "\rCR it rained all week at the zephyrgate camp",
    "<a href=\"javascript:document.title='pwned'\">click</a> the zephyrgate coast was lovely though",
    "x\" onmouseover=\"document.title='pwned'\" data-x=\" the zephyrgate path was closed",
]
#: Markup fragments of the hostile answers that must reach the page as text, never as elements.
HOSTILE_MARKUP = ["<script>document.title='pwned'</script>", "<img id=injected src=x",
                  "<a href=\"javascript:document.title='pwned'\">", "onmouseover=\"document.title='pwned'\""]


def write_crafted_survey(folder: Path, rows: int = 600) -> Path:
    """Write ``survey.csv`` and ``survey.yaml`` into ``folder``; returns the config path."""
    demo = pd.read_csv(DEMO / "survey.csv", dtype=str, keep_default_na=False)
    frame = pd.concat([demo.head(rows // 2), demo.tail(rows // 2)], ignore_index=True)  # both waves
    markets = sorted(frame["market"].unique())
    mapping = {market: HOSTILE_GROUPS[i % len(HOSTILE_GROUPS)] for i, market in enumerate(markets)}
    frame["market"] = frame["market"].map(mapping)
    for index in range(0, len(frame), 9):
        frame.loc[frame.index[index], "low_point"] = HOSTILE_ANSWERS[(index // 9) % len(HOSTILE_ANSWERS)]
    frame.to_csv(folder / "survey.csv", index=False, quoting=csv.QUOTE_ALL)
    lexicon = folder / "lexicon.yaml"  # a few themes keep the tables (and the tests) small
    lexicon.write_text(
        "lexicon: crafted\nversion: '1'\nlanguage: en\nthemes:\n"
        "  - id: queues\n    label: Queues <b>and</b> waiting\n    terms: [queue, wait*]\n"
        "  - id: cost_value\n    label: \"=Cost & value\"\n    terms: [expensive, price*, parking]\n"
        "  - id: toilets\n    label: Toilets\n    terms: [toilet*]\n"
        "  - id: weather\n    label: Weather\n    terms: [rain*, wind*]\n"
        "  - id: gate\n    label: The gate\n    terms: [zephyrgate]\n", encoding="utf-8")
    (folder / "survey.yaml").write_text(
        "survey: survey.csv\nid: response_id\nquestions:\n  low_point: low_point\n  high_point: high_point\n"
        f"weight: weight\nwave: wave\ngroups: [market]\nlexicon: {lexicon}\nseed: 7\n",
        encoding="utf-8")
    return folder / "survey.yaml"
