"""TF-IDF alone against TF-IDF + sentence embeddings in the learned coder (needs ``pip install 'textkit[semantic]'``).

Cross-validated on each of the demo's hand-coded samples with the same folds and seed (5 folds, the demo
config's seed): per-theme model F1 for the themes with a model, and micro F1 over all decisions (the model
where a theme has one, the lexicon elsewhere; and the combined choice). Then the time to embed 10,000 of the
demo survey's answers against the time to build their TF-IDF features, in the same run.

    python benchmarks/semantic_table.py
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from learned_table import FIRST, LEXICON, SECOND, cross_validated  # noqa: E402

SAMPLES = {"1st": FIRST, "2nd": SECOND}
FEATURE_SETS = ("tfidf", "tfidf+embeddings")


def timed(path: Path, feature_set: str) -> tuple[pd.DataFrame, float, float, float]:
    """(report, micro F1 of learned, micro F1 of combined, seconds to fit) for one sample and feature set."""
    started = time.perf_counter()
    report, (_, learned, combined) = cross_validated(path, feature_set)
    return report, learned, combined, time.perf_counter() - started


def accuracy_table() -> None:
    results = {(name, fs): timed(path, fs) for name, path in SAMPLES.items() for fs in FEATURE_SETS}
    header = ["theme"] + [f"{name}: {label}" for name in SAMPLES
                          for label in ("hand", "TF-IDF", "+ embeddings")]
    print("| " + " | ".join(header) + " |")
    print("|" + "---|" * len(header))
    for theme in LEXICON.ids:
        cells, shown = [theme], False
        for name in SAMPLES:
            tfidf, embedded = results[(name, "tfidf")][0].loc[theme], results[(name, "tfidf+embeddings")][0].loc[theme]
            cells.append(str(tfidf.hand))
            if tfidf.status == "model":
                shown = True
                cells += [f"{tfidf.model_f1:.2f}", f"{embedded.model_f1:.2f}"]
            else:
                cells += ["(lexicon)", "(lexicon)"]
        if shown:
            print("| " + " | ".join(cells) + " |")
    for row, index in (("micro F1, learned (lexicon where no model)", 1), ("micro F1, combined", 2)):
        cells = [row]
        for name in SAMPLES:
            cells += ["", *(f"{results[(name, fs)][index]:.3f}" for fs in FEATURE_SETS)]
        print("| " + " | ".join(cells) + " |")
    for name in SAMPLES:
        seconds = ", ".join(f"{fs} {results[(name, fs)][3]:.1f} s" for fs in FEATURE_SETS)
        print(f"fit (and score) on the {name} sample: {seconds}")


def embedding_speed(n_answers: int = 10_000) -> None:
    from textkit.text.embeddings import embed_texts, load_sentence_model
    from textkit.text.ngrams import document_term_matrix
    from textkit.text.tokens import tokenize_corpus

    survey = pd.read_csv(ROOT / "demo_comments" / "survey.csv", dtype=str, keep_default_na=False)
    answers = [t for t in pd.concat([survey["low_point"], survey["high_point"]]).tolist() if t.strip()][:n_answers]
    started = time.perf_counter()
    document_term_matrix(tokenize_corpus(answers, offsets=False), (1, 2), binary=False)
    tfidf_seconds = time.perf_counter() - started
    started = time.perf_counter()
    load_sentence_model()
    load_seconds = time.perf_counter() - started
    started = time.perf_counter()
    vectors = embed_texts(answers)
    embed_seconds = time.perf_counter() - started
    print(f"{len(answers)} answers ({len(set(answers))} distinct, {np.mean([len(a) for a in answers]):.0f} characters "
          f"on average): embeddings {embed_seconds:.1f} s ({len(set(answers)) / embed_seconds:.0f} distinct answers/s; "
          f"model load {load_seconds:.1f} s), tokens + n-gram counts {tfidf_seconds:.2f} s; ratio "
          f"{embed_seconds / tfidf_seconds:.0f}x; shape {vectors.shape}")


if __name__ == "__main__":
    accuracy_table()
    embedding_speed()
