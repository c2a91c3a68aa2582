"""A small invented survey for fast topic tests: two questions, two waves, two markets.

Answers are drawn from a few subjects of invented words (none of them lexicon terms), so every
answer lands in the topic pools; the subject "skyglider" appears only in wave 2026.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
LEXICON = ROOT / "lexicons" / "visitor_experience.yaml"

SUBJECTS = {
    "wrack": "wrackheap brinemat saltrot tidewort kelpling drumweed sandmire fogwort".split(),
    "quay": "quaylamp hoverbarge tollpike mooringbell capstan gullwick bollard pierhook".split(),
    "lantern": "lanternwalk tapersong wickfair candleboat emberhall glimmerlane torchbell duskdrum".split(),
    "skyglider": "skyglider windsail cliffrunner updraught glidermast kitewhine ridgelift thermalkite".split(),
}


def _answers(rng: np.random.Generator, n: int, subjects: list[str]) -> list[str]:
    texts = []
    for _ in range(n):
        words = SUBJECTS[subjects[rng.integers(len(subjects))]]
        texts.append(" ".join(words[i] for i in rng.choice(len(words), rng.integers(3, 6), replace=False)))
    return texts


def write_small_survey(folder: Path, n_per_wave: int = 150, seed: int = 5) -> Path:
    """Write answers.csv and survey.yaml into ``folder``; return the config's path."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    rows = []
    for wave, subjects in (("2025", ["wrack", "quay", "lantern"]), ("2026", ["wrack", "quay", "lantern", "skyglider"])):
        first = _answers(rng, n_per_wave, subjects)
        second = _answers(rng, n_per_wave, ["wrack", "quay", "lantern"])
        for i in range(n_per_wave):
            rows.append({"rid": f"{wave}-{i:04d}", "wave": wave, "market": "north" if i % 2 else "south",
                         "w": 1.0 + (i % 3) / 2, "low": first[i], "high": second[i]})
    folder.mkdir(parents=True, exist_ok=True)
    pd.DataFrame(rows).to_csv(folder / "answers.csv", index=False)
    config = folder / "survey.yaml"
    config.write_text("survey: answers.csv\nid: rid\nquestions: [low, high]\nweight: w\nwave: wave\n"
                      f"groups: [market]\nlexicon: {LEXICON}\nseed: 3\n", encoding="utf-8")
    return config


def planted_answers(n_answers: int, n_topics: int, shared: int, seed: int) -> tuple[list[str], list[list[str]]]:
    """Answers drawn from known topic-word distributions.

    Each topic owns 8 words (weights falling 8..1) and shares ``shared`` of its draws with a pool of
    common words every topic uses. An answer takes one topic (70%) or two, and 5-10 words.
    """
    rng = np.random.default_rng(seed)
    own = [[f"t{t}word{j}" for j in range(8)] for t in range(n_topics)]
    common = [f"common{j}" for j in range(12)]
    weights = np.arange(8, 0, -1) / np.arange(8, 0, -1).sum()
    answers = []
    for _ in range(n_answers):
        topics = rng.choice(n_topics, 1 if rng.random() < 0.7 else 2, replace=False)
        words = []
        for _ in range(rng.integers(5, 11)):
            if rng.random() < shared:
                words.append(common[rng.integers(len(common))])
            else:
                words.append(own[int(rng.choice(topics))][rng.choice(8, p=weights)])
        answers.append(" ".join(words))
    return answers, own


def topic_digest(n_answers: int, high: int) -> str:
    """SHA-256 of the vocabulary, topics and k scan of a seeded fit on planted answers."""
    import hashlib

    from textkit.discover.topics import TopicModel

    answers, _ = planted_answers(n_answers, 4, 0.2, seed=9)
    model = TopicModel(k_range=(3, high), min_df=3, stability_runs=2, random_state=4).fit(answers)
    payload = repr((model.terms_.tolist(), model.components_.round(12).tolist(), model.k_selection_.to_csv()))
    return hashlib.sha256(payload.encode()).hexdigest()
