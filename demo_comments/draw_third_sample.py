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

from draw_second_sample import write_draft

HERE = Path(__file__).resolve().parent
SEED = 20261206
EARLIER_SAMPLES = ("hand_coded.csv", "hand_coded_second.csv")


def main(out: str | Path | None = None) -> Path:
    """Write the third sample's draft and return its path."""
    path = Path(out) if out is not None else HERE / "hand_coded_third_draft.csv"
    return write_draft(path, EARLIER_SAMPLES, SEED)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description="Draw the third validation sample of the demo survey.")
    parser.add_argument("--out", default=None,
                        help="draft file (default demo_comments/hand_coded_third_draft.csv)")
    print(main(parser.parse_args().out))
