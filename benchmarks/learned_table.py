"""The README's side-by-side table: lexicon, learned and combined coders per theme on the demo's hand codes.

Cross-validated on each hand-coded sample (5 folds, the demo config's seed), and trained on the first
sample then scored on the second (coded independently, under slightly different rules).

    python benchmarks/learned_table.py
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from textkit.coding.coder import ThemeCoder  # noqa: E402
from textkit.coding.handcodes import long_hand_codes  # noqa: E402
from textkit.coding.learned import LearnedCoder  # noqa: E402
from textkit.coding.lexicon import load_lexicon  # noqa: E402

SEED = 20261202  # the demo config's seed
LEXICON = load_lexicon(ROOT / "lexicons" / "visitor_experience.yaml")
FIRST, SECOND = ROOT / "demo_comments" / "hand_coded.csv", ROOT / "demo_comments" / "hand_coded_second.csv"


def load(path: Path) -> tuple[list, np.ndarray]:
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    hand = long_hand_codes(frame, LEXICON, str(path))
    return [t or None for t in hand.texts], hand.values[:, : len(LEXICON.ids)]


def f1(truth: np.ndarray, codes: np.ndarray) -> float:
    tp = (truth & codes).sum()
    return 2 * tp / (2 * tp + (truth != codes).sum()) if (truth | codes).any() else float("nan")


def cross_validated(path: Path, feature_set: str = "tfidf") -> tuple[pd.DataFrame, list[float]]:
    """Per-theme report and the micro F1 (all decisions) of lexicon, learned and combined."""
    texts, values = load(path)
    coder = LearnedCoder(LEXICON, feature_set=feature_set, random_state=SEED).fit(texts, values)
    lexicon = ThemeCoder(LEXICON).fit(texts).transform(texts).toarray().astype(bool)
    truth = values == 1
    model = np.where(np.isnan(coder.cv_codes_), lexicon, coder.cv_codes_ == 1)
    union = model | lexicon
    combined = np.column_stack([{"lexicon": lexicon, "model": model, "union": union}[choice][:, i]
                                for i, choice in enumerate(coder.combined_)])
    return coder.report_.set_index("theme"), [f1(truth, lexicon), f1(truth, model), f1(truth, combined)]


def cells(report: pd.DataFrame, theme: str) -> list[str]:
    row = report.loc[theme]
    if row.status != "model":
        return [f"{row.hand}", f"{row.lexicon_f1:.2f}", "(lexicon)", f"{row.lexicon_f1:.2f}"]
    best = {"lexicon": row.lexicon_f1, "model": row.model_f1, "union": row.union_f1}[row.combined_choice]
    return [f"{row.hand}", f"{row.lexicon_f1:.2f}", f"{row.model_f1:.2f}", f"{best:.2f} ({row.combined_choice})"]


def main() -> None:
    first, first_micro = cross_validated(FIRST)
    second, second_micro = cross_validated(SECOND)
    train_texts, train_values = load(FIRST)
    test_texts, test_values = load(SECOND)
    coder = LearnedCoder(LEXICON, random_state=SEED).fit(train_texts, train_values)
    truth = test_values == 1
    scored = [ThemeCoder(LEXICON).fit(test_texts).transform(test_texts).toarray().astype(bool),
              coder.code(test_texts, mode="model").matrix.toarray().astype(bool),
              coder.code(test_texts, mode="combined").matrix.toarray().astype(bool)]
    header = ["theme", "hand (1st)", "lexicon", "learned", "combined", "hand (2nd)", "lexicon", "learned",
              "combined", "lexicon", "learned", "combined"]
    print("| " + " | ".join(header) + " |")
    print("|" + "---|" * len(header))
    for i, theme in enumerate(LEXICON.ids):
        external = [f"{f1(truth[:, i], codes[:, i]):.2f}" for codes in scored]
        print("| " + " | ".join([theme, *cells(first, theme), *cells(second, theme), *external]) + " |")
    micro = [*(f"{v:.2f}" for v in first_micro), *(f"{v:.2f}" for v in second_micro),
             *(f"{f1(truth, codes):.2f}" for codes in scored)]
    print("| (micro: all decisions) | | " + " | ".join(micro[:3]) + " | | " + " | ".join(micro[3:]) + " |")


if __name__ == "__main__":
    main()
