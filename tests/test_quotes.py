"""Quotes: typical, not near-duplicates, inside the length window, redacted, same seed same picks."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from textkit.present.quotes import choose_quotes, hide_names, mask_profanity, maximal_marginal_relevance, safe_quote
from textkit.text.tokens import tokenize_corpus

TEXTS = [
    "We waited ages in the queue at the ferry entrance and the queue barely moved",
    "We waited ages in the queue at the ferry entrance and the queue barely moved at all",  # near-duplicate
    "We waited ages in the queue at the ferry entrance, the queue barely moved!",  # near-duplicate
    "Long queue for the cable car, forty minutes standing in the sun",
    "The queue for tickets was slow because only one till was open",
    "Queue",  # too short
    "Queue at the cafe, email me at visitor.one@example.org or call 0712 345 678 about it please",
    "Our guide Mirela made us queue twice for the boat, then Vesna sorted it out quickly",
    "queue " + "very long words " * 30,  # too long
    "The harbour views were lovely and calm in the evening light over Halvessa",
]


def _survey(texts=TEXTS):
    stream = tokenize_corpus(texts, offsets=True)
    has_queue = np.array(["queue" in t.lower() for t in texts], dtype=int)
    coded = pd.DataFrame({"response_id": [f"R{i:02d}" for i in range(len(texts))], "question": "low_point",
                          "answered": 1, "wave": [("2025", "2026")[i % 2] for i in range(len(texts))],
                          "queues": has_queue})
    evidence = pd.DataFrame({"response_id": coded["response_id"][has_queue == 1], "question": "low_point",
                             "theme": "queues", "term": "queue", "start": 0, "end": 5, "matched_text": "queue"})
    return texts, stream, coded, evidence


def test_picks_are_typical_distinct_inside_the_window_and_redacted():
    texts, stream, coded, evidence = _survey()
    quotes = choose_quotes(texts, stream, coded, evidence, ["queues"], wave_var="wave", per_theme=4, min_words=4,
                           max_words=25, seed=1)
    picked = quotes["response_id"].tolist()
    assert picked[0] in {"R00", "R01", "R02"}  # the most typical answer comes from the dense cluster
    assert len({"R00", "R01", "R02"} & set(picked)) == 1  # and its near-duplicates are not picked again
    assert "R05" not in picked and "R08" not in picked  # outside the length window
    assert quotes["n_words"].between(4, 25).all()
    assert set(quotes.columns) >= {"response_id", "question", "group", "wave", "evidence", "evidence_start"}
    assert quotes["wave"].isin(["2025", "2026"]).all()
    text = " ".join(quotes["quote"])
    assert "example.org" not in text and "345" not in text
    if "R07" in picked:
        quote = quotes.loc[quotes["response_id"] == "R07", "quote"].iloc[0]
        assert "Mirela" not in quote and "Vesna" not in quote


def test_same_seed_same_picks():
    texts, stream, coded, evidence = _survey()
    first = choose_quotes(texts, stream, coded, evidence, ["queues"], per_theme=3, min_words=4, seed=9)
    second = choose_quotes(texts, stream, coded, evidence, ["queues"], per_theme=3, min_words=4, seed=9)
    pd.testing.assert_frame_equal(first, second)


def test_mmr_follows_the_published_rule():
    # Carbonell & Goldstein (1998): next = argmax lambda*sim(d, centre) - (1 - lambda)*max sim(d, picked)
    vectors = np.array([[1.0, 0.0], [0.995, 0.0998749], [0.6, 0.8]])
    relevance = np.array([0.9, 0.89, 0.5])
    assert maximal_marginal_relevance(vectors, relevance, 2, diversity=0.0, duplicate_above=1.1) == [0, 1]
    # with diversity 0.5: d1 scores 0.5*0.89 - 0.5*0.995 = -0.0525, d2 scores 0.5*0.5 - 0.5*0.6 = -0.05
    assert maximal_marginal_relevance(vectors, relevance, 2, diversity=0.5, duplicate_above=1.1) == [0, 2]
    assert maximal_marginal_relevance(vectors, relevance, 3, diversity=0.0, duplicate_above=0.9) == [0, 2]


@pytest.mark.parametrize("text, hidden", [
    ("Hello Marek, thanks for the tour", "Marek"),
    ("A lovely woman named Ilse Varga helped us", "Ilse Varga"),
    ("our tour guide Teodora knew everything", "Teodora"),
    ("Radek the driver was rude", "Radek"),
    ("Captain Ossian steered us home", "Ossian"),
])
def test_name_rules_after_a_greeting_or_next_to_a_job_title(text, hidden):
    safe, count = hide_names(text)
    assert hidden not in safe and "[name]" in safe and count >= 1


def test_redact_runs_first_and_ordinary_words_survive():
    safe, count = safe_quote("The guide was great. Mail me at a.b@example.com", extra_names=["Vesna"])
    assert safe == "The guide was great. Mail me at [email]" and count == 1
    assert hide_names("The guide was great and so was the ferry")[1] == 0


def test_rare_capitalised_words_are_hidden_but_common_places_are_not():
    texts = [f"The views at Halvessa harbour were great {i}" for i in range(6)] + \
        ["The queue was fine but Jorunn at the desk was slow, and the queue at Halvessa too"]
    texts, stream, coded, evidence = _survey(texts)
    quotes = choose_quotes(texts, stream, coded, evidence, ["queues"], min_words=3, per_theme=1)
    assert "Jorunn" not in quotes["quote"].iloc[0] and "Halvessa" in quotes["quote"].iloc[0]


def test_profanity_mask_keeps_the_first_letter():
    assert mask_profanity("What a bloody shambles, total crap") == "What a b***** shambles, total c***"


def test_quotes_command_on_the_demo(tmp_path, capsys):
    from pathlib import Path

    from textkit.cli.main import main

    config = Path(__file__).resolve().parents[1] / "demo_comments" / "survey.yaml"
    out = tmp_path / "quotes"
    assert main(["quotes", str(config), "--out", str(out), "--theme", "queues", "--quiet"]) == 0
    quotes = pd.read_csv(out / "quotes.csv")
    assert set(quotes["theme"]) == {"queues"} and quotes["n_words"].between(6, 60).all()
    assert "read every quote before you publish" in (out / "quotes.md").read_text(encoding="utf-8")
    assert main(["quotes", str(config), "--out", str(tmp_path / "bad"), "--theme", "nope"]) == 2
    message = capsys.readouterr().err.strip()
    assert "\n" not in message and "valid:" in message and not (tmp_path / "bad").exists()
