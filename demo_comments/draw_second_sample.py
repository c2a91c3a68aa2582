"""Draw the answers for the second hand-coded validation sample of the demo survey.

Run from the repository root::

    python demo_comments/draw_second_sample.py   # writes demo_comments/hand_coded_second_draft.csv

Per question (``low_point``, ``high_point``) and wave (2025, 2026) it takes a simple
random sample of 80 *answered* answers (seed 20261204): blank answers and non-answers
such as "n/a", "none", "nothing", "-", "no complaints", "idk" are left out of the pool
(see ``NON_ANSWERS``); off-topic answers ("lol", "test") stay in. Every response id
that appears in ``hand_coded.csv`` (the first gold sample) is excluded, so the two
samples share no respondent; only that file's ``response_id`` column is read. The
draw never looks at the planted labels. Rows are written in a shuffled order so that
the coder does not read them grouped by wave or question.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
SEED = 20261204
QUESTIONS = ("low_point", "high_point")
WAVES = ("2025", "2026")
PER_CELL = 80
#: Answers that say nothing, after lower-casing and dropping all but letters, digits, "/" and spaces.
NON_ANSWERS = frozenset({
    "", "n/a", "na", "x", "none", "nil", "nothing", "nothing really", "no low point",
    "no complaints", "no comment", "idk", "dunno", "not sure",
})


def is_answered(text: pd.Series) -> pd.Series:
    """True where ``text`` is a real answer (not blank, not an "n/a"-like non-answer)."""
    norm = text.str.lower().str.replace(r"[^a-z0-9/ ]", "", regex=True)
    norm = norm.str.split().str.join(" ")
    return ~norm.isin(NON_ANSWERS)


def draw(survey: pd.DataFrame, exclude: set[str], seed: int = SEED) -> pd.DataFrame:
    """Return the drawn rows ``response_id, question, wave, text`` in coding order."""
    rng = np.random.default_rng(seed)
    picks = []
    for question in QUESTIONS:
        for wave in WAVES:
            pool = survey.loc[survey["wave"] == wave, ["response_id", question]]
            pool = pool.rename(columns={question: "text"})
            pool = pool[is_answered(pool["text"]) & ~pool["response_id"].isin(exclude)]
            pool = pool.sort_values("response_id").reset_index(drop=True)
            chosen = np.sort(rng.choice(len(pool), size=PER_CELL, replace=False))
            picks.append(pool.iloc[chosen].assign(question=question, wave=wave))
    sample = pd.concat(picks, ignore_index=True)
    sample = sample.iloc[rng.permutation(len(sample))].reset_index(drop=True)
    return sample[["response_id", "question", "wave", "text"]]


def write_draft(path: Path, earlier_samples: tuple[str, ...], seed: int) -> Path:
    """Draw with ``seed``, leaving out the respondents of ``earlier_samples`` (files in this folder);
    write the draft (with empty ``themes`` and ``coder_note`` columns) to ``path``."""
    survey = pd.read_csv(HERE / "survey.csv", dtype=str, keep_default_na=False, encoding="utf-8")
    exclude: set[str] = set()
    for name in earlier_samples:
        ids = pd.read_csv(HERE / name, dtype=str, usecols=["response_id"], keep_default_na=False,
                          encoding="utf-8")
        exclude |= set(ids["response_id"])
    sample = draw(survey, exclude, seed=seed).assign(themes="", coder_note="")
    path.write_bytes(sample.to_csv(index=False, lineterminator="\n").encode("utf-8"))
    return path


def main(out: str | Path | None = None) -> Path:
    """Write the second sample's draft and return its path."""
    path = Path(out) if out is not None else HERE / "hand_coded_second_draft.csv"
    return write_draft(path, ("hand_coded.csv",), SEED)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description="Draw the second validation sample of the demo survey.")
    parser.add_argument("--out", default=None,
                        help="draft file (default demo_comments/hand_coded_second_draft.csv)")
    print(main(parser.parse_args().out))
