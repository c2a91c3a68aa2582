"""Small survey projects generated on the fly, for the reliability and bad-input tests."""

from __future__ import annotations

import csv
import hashlib
import os
import random
import stat
from pathlib import Path

LEXICON = """lexicon: hostile-tests
version: "1"
language: en
themes:
  - id: queues
    label: Queues
    negated: drop
    terms: [queue, long wait, waiting]
  - id: cost
    label: Cost
    negated: drop
    terms: [expensive, overpriced, price*]
  - id: staff
    label: Staff
    negated: keep
    terms: [staff, rude, helpful]
"""

WORDS = ("queue long wait waiting expensive overpriced prices staff rude helpful ferry beach view "
         "toilets lovely harbour market crowded quiet boat lunch walk").split()
MARKETS = ("Northvale", "Eastmere", "Southport", "Westholm")


def answer(rng: random.Random) -> str:
    return " ".join(rng.choice(WORDS) for _ in range(rng.randint(3, 12))).capitalize() + "."


def write_survey(path: Path, n: int, seed: int = 7, rows: list[dict] | None = None) -> None:
    """A CSV survey of ``n`` generated responses (plus ``rows`` as given), two waves, four markets."""
    rng = random.Random(seed)
    fields = ["response_id", "low_point", "high_point", "weight", "wave", "market"]
    with open(path, "w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=fields)
        writer.writeheader()
        for i in range(n):
            writer.writerow({"response_id": f"R{i:06d}", "low_point": answer(rng), "high_point": answer(rng),
                             "weight": f"{rng.uniform(0.5, 2.0):.3f}", "wave": str(2025 + i % 2),
                             "market": MARKETS[i % len(MARKETS)]})
        for row in rows or []:
            writer.writerow({field: row.get(field, "") for field in fields})


def config_text(survey: str = "survey.csv", lexicon: str = "lexicon.yaml") -> str:
    return (f"survey: {survey}\nid: response_id\nquestions:\n  low_point: low_point\n  high_point: high_point\n"
            f"weight: weight\nwave: wave\ngroups: [market]\nlexicon: {lexicon}\nseed: 1\n")


def make_project(folder: Path, n: int = 80, seed: int = 7, rows: list[dict] | None = None) -> Path:
    """survey.csv, survey.yaml, lexicon.yaml and hand.csv in ``folder``; returns the config path."""
    folder.mkdir(parents=True, exist_ok=True)
    write_survey(folder / "survey.csv", n, seed, rows)
    (folder / "lexicon.yaml").write_text(LEXICON, encoding="utf-8")
    (folder / "survey.yaml").write_text(config_text(), encoding="utf-8")
    rng = random.Random(seed + 1)
    with open(folder / "hand.csv", "w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["response_id", "question", "text", "themes"])
        for i in range(30):
            text = answer(rng)
            codes = [t for t, words in (("queues", ("queue", "wait")), ("cost", ("expensive", "price")),
                                        ("staff", ("staff", "rude"))) if any(w in text.lower() for w in words)]
            writer.writerow([f"H{i:03d}", "low_point", text, ";".join(codes)])
    return folder / "survey.yaml"


def snapshot(folder: Path) -> dict[str, str]:
    """Every entry under ``folder`` (hidden ones too): SHA-256 of files, the kind of anything else."""
    found = {}
    for root, dirs, files in os.walk(folder):
        for name in dirs:
            found[os.path.relpath(os.path.join(root, name), folder)] = "folder"
        for name in files:
            path = os.path.join(root, name)
            mode = os.lstat(path).st_mode
            if stat.S_ISREG(mode):
                found[os.path.relpath(path, folder)] = hashlib.sha256(Path(path).read_bytes()).hexdigest()
            else:
                found[os.path.relpath(path, folder)] = f"mode {stat.S_IFMT(mode):o}"
    return found
