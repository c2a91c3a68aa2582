"""Benchmark: training the learned coder on 2,000 hand-coded answers and coding 1,000,000 answers with it.

The "hand codes" are the demo generator's **planted labels** (``demo_comments/planted_labels.csv``) of
2,000 answered demo answers drawn at random (seeded); the 1,000,000 answers to code are demo answers
drawn with replacement (seeded). Timed in one run:

* baseline - tokenise once + the lexicon coder (``ThemeCoder``), what ``textkit code`` does without a model;
* training - ``LearnedCoder.fit`` on the 2,000 answers (features, 5-fold cross-validation with an inner
  threshold search per theme, final fits);
* learned  - tokenise once + lexicon codes + the model's features and scores (combined mode) for the
  1,000,000 answers; printed as a ratio to the baseline.

Peak memory is the process's peak resident set size (it holds the 1,000,000 texts).

    python benchmarks/learned.py                 # 2,000 to train, 1,000,000 to code
    python benchmarks/learned.py --n 200000
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from textkit.coding.coder import ThemeCoder  # noqa: E402
from textkit.coding.learned import LearnedCoder  # noqa: E402
from textkit.coding.lexicon import load_lexicon  # noqa: E402
from textkit.text.tokens import tokenize_corpus  # noqa: E402


def demo_answers() -> pd.DataFrame:
    """Every answered demo answer with its planted themes: response_id, question, text, themes."""
    survey = pd.read_csv(ROOT / "demo_comments" / "survey.csv", dtype=str, keep_default_na=False)
    long = survey.melt(id_vars=["response_id"], value_vars=["low_point", "high_point"], var_name="question",
                       value_name="text")
    planted = pd.read_csv(ROOT / "demo_comments" / "planted_labels.csv", dtype=str, keep_default_na=False)
    answers = long.merge(planted, on=["response_id", "question"], how="inner")
    return answers[answers["text"].str.strip() != ""].sort_values(["response_id", "question"]).reset_index(drop=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--train", type=int, default=2000)
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    lexicon = load_lexicon(ROOT / "lexicons" / "visitor_experience.yaml")
    answers = demo_answers()
    train = answers.iloc[np.sort(rng.choice(len(answers), args.train, replace=False))]
    labels = np.zeros((len(train), len(lexicon.ids)))
    position = {t: i for i, t in enumerate(lexicon.ids)}
    for row, themes in enumerate(train["themes"].tolist()):
        for theme in filter(None, themes.split(";")):
            if theme in position:  # drones: not in the lexicon, left out
                labels[row, position[theme]] = 1
                for ancestor in lexicon.ancestors(theme):
                    labels[row, position[ancestor]] = 1
    start = time.perf_counter()
    coder = LearnedCoder(lexicon, random_state=args.seed).fit(train["text"].tolist(), labels)
    train_seconds = time.perf_counter() - start
    modelled = sum(m is not None for m in coder.models_)

    texts = answers["text"].to_numpy(dtype=object)[rng.integers(0, len(answers), args.n)].tolist()
    warm = tokenize_corpus(texts[:2000], offsets=False)  # imports and first-use caches, outside the timings
    coder.code(warm, lexicon_matrix=ThemeCoder(lexicon).fit(warm).transform(warm))
    start = time.perf_counter()
    stream = tokenize_corpus(texts, offsets=False)
    lexicon_matrix = ThemeCoder(lexicon).fit(stream).transform(stream)
    baseline_seconds = time.perf_counter() - start
    del stream, lexicon_matrix
    start = time.perf_counter()
    stream = tokenize_corpus(texts, offsets=False)
    lexicon_matrix = ThemeCoder(lexicon).fit(stream).transform(stream)
    codes = coder.code(stream, mode="combined", lexicon_matrix=lexicon_matrix)
    learned_seconds = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"training: {args.train:,} answers (planted labels), {len(coder.terms_):,} terms, a model for "
          f"{modelled} of {len(lexicon.ids)} themes: {train_seconds:.1f} s")
    print(f"baseline (tokenise + lexicon) on {args.n:,} answers: {baseline_seconds:.1f} s")
    print(f"learned (tokenise + lexicon + model, combined) on {args.n:,} answers: {learned_seconds:.1f} s "
          f"({learned_seconds / baseline_seconds:.2f}x the baseline); {int(codes.matrix.sum()):,} codes")
    total = train_seconds + learned_seconds
    print(f"training + coding: {total:.1f} s (target under 60 s: {'met' if total < 60 else 'NOT met'}); "
          f"peak resident memory {peak:,.0f} MiB (target under 3 GB: {'met' if peak < 3072 else 'NOT met'})")


if __name__ == "__main__":
    main()
