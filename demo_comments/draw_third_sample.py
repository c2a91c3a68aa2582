"""Draw the answers for the third hand-coded validation sample of the demo survey.

Run from the repository root::

    python demo_comments/draw_third_sample.py   # writes demo_comments/hand_coded_third_draft.csv

The same design as the second sample (:mod:`draw_second_sample`: per question and wave a
simple random sample of 80 answered answers, shuffled) with its own seed (20261206), and
every response id of ``hand_coded.csv`` and ``hand_coded_second.csv`` excluded, so the
three samples share no respondent. This sample was drawn and coded after the coding
defaults and the lexicon's inflection review were fixed: it is the held-out check.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import pandas as pd
from draw_second_sample import draw

HERE = Path(__file__).resolve().parent
SEED = 20261206
EARLIER_SAMPLES = ("hand_coded.csv", "hand_coded_second.csv")


def main(out: str | Path | None = None) -> Path:
    """Write the draft (with empty ``themes`` and ``coder_note`` columns) and return its path."""
    survey = pd.read_csv(HERE / "survey.csv", dtype=str, keep_default_na=False, encoding="utf-8")
    exclude: set[str] = set()
    for name in EARLIER_SAMPLES:
        ids = pd.read_csv(HERE / name, dtype=str, usecols=["response_id"], keep_default_na=False)
        exclude |= set(ids["response_id"])
    sample = draw(survey, exclude, seed=SEED).assign(themes="", coder_note="")
    path = Path(out) if out is not None else HERE / "hand_coded_third_draft.csv"
    path.write_bytes(sample.to_csv(index=False, lineterminator="\n").encode("utf-8"))
    return path


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description="Draw the third validation sample of the demo survey.")
    parser.add_argument("--out", default=None,
                        help="draft file (default demo_comments/hand_coded_third_draft.csv)")
    print(main(parser.parse_args().out))
