"""Draw the answers for the hand-coded gold sample of the demo survey (ids and text only).

Run from the repository root::

    python demo_comments/draw_gold_sample.py        # writes demo_comments/hand_coded_draft.csv

The draw never looks at the planted labels. Per question and wave it takes a
simple random sample of answers (blanks and "n/a" answers included, as they
come), then adds a few of the longest answers (150+ words) not already drawn,
because long answers are rare but are where coding is hardest. Rows are
written in a shuffled order so that the coder does not read them grouped by
wave or question.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
SEED = 20261203
#: (question, wave) -> (random answers, extra long answers)
PLAN = {
    ("low_point", "2025"): (80, 4), ("low_point", "2026"): (80, 4),
    ("high_point", "2025"): (68, 3), ("high_point", "2026"): (68, 3),
}
LONG_WORDS = 150


def draw(survey: pd.DataFrame, seed: int = SEED) -> pd.DataFrame:
    """Return the drawn rows: ``response_id, question, wave, draw, text``, in coding order."""
    rng = np.random.default_rng(seed)
    picks = []
    for (question, wave), (n_random, n_long) in PLAN.items():
        pool = survey.loc[survey["wave"] == wave, ["response_id", question]]
        pool = pool.rename(columns={question: "text"})
        pool = pool.sort_values("response_id").reset_index(drop=True)
        chosen = rng.choice(len(pool), size=n_random, replace=False)
        random_rows = pool.iloc[np.sort(chosen)].assign(draw="random")
        rest = pool.drop(index=chosen)
        long_pool = rest[rest["text"].str.split().str.len() >= LONG_WORDS]
        long_rows = long_pool.iloc[np.sort(rng.choice(len(long_pool), size=min(n_long, len(long_pool)),
                                                      replace=False))].assign(draw="long")
        picks.append(pd.concat([random_rows, long_rows]).assign(question=question, wave=wave))
    sample = pd.concat(picks, ignore_index=True)
    sample = sample.iloc[rng.permutation(len(sample))].reset_index(drop=True)
    return sample[["response_id", "question", "wave", "draw", "text"]]


def main(out: str | Path | None = None) -> Path:
    """Write the draft (with empty ``themes`` and ``coder_note`` columns) and return its path."""
    survey = pd.read_csv(HERE / "survey.csv", dtype=str, keep_default_na=False, encoding="utf-8")
    sample = draw(survey).assign(themes="", coder_note="")
    path = Path(out) if out is not None else HERE / "hand_coded_draft.csv"
    path.write_bytes(sample.to_csv(index=False, lineterminator="\n").encode("utf-8"))
    return path


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description="Draw the gold-sample answers of the demo survey.")
    parser.add_argument("--out", default=None, help="draft file (default demo_comments/hand_coded_draft.csv)")
    print(main(parser.parse_args().out))
