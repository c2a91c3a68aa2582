"""Topic-model benchmark: 200,000 synthetic answers, about 20,000 terms after filtering.

Prints the time of each step (tokenising, k scan over 3-15, final fit, transform) and the ratio
against a plain scikit-learn ``TfidfVectorizer + NMF`` fit at the chosen k, measured in the same
run, plus the peak resident memory. Run once: ``python benchmarks/topics.py`` (``--n`` to resize).
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np


def synthetic_answers(n: int, seed: int = 0) -> list[str]:
    """Answers from 12 planted topics of 60 words each plus a long tail of rare words."""
    rng = np.random.default_rng(seed)
    topics = [[f"topic{t}word{j}" for j in range(60)] for t in range(12)]
    tail = [f"rare{j}" for j in range(60000)]
    zipf = 1 / np.arange(1, 61)
    zipf /= zipf.sum()
    answers = []
    for _ in range(n):
        topic = topics[rng.integers(12)]
        words = [topic[i] for i in rng.choice(60, rng.integers(4, 10), p=zipf)]
        words += [tail[i] for i in rng.integers(0, len(tail), rng.integers(1, 4))]
        answers.append(" ".join(words))
    return answers


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--n", type=int, default=200_000)
    args = parser.parse_args()
    from sklearn.decomposition import NMF
    from sklearn.feature_extraction.text import TfidfVectorizer

    from textkit.discover.topics import TopicModel
    from textkit.text.tokens import tokenize_corpus

    answers = synthetic_answers(args.n)
    started = time.perf_counter()
    stream = tokenize_corpus(answers, offsets=False)
    tokenise = time.perf_counter() - started

    started = time.perf_counter()
    model = TopicModel(language=None, random_state=1).fit(stream)
    fit = time.perf_counter() - started
    started = time.perf_counter()
    model.transform(stream)
    transform = time.perf_counter() - started

    started = time.perf_counter()
    vectoriser = TfidfVectorizer(ngram_range=(1, 2), min_df=5, max_df=0.2, sublinear_tf=True)
    matrix = vectoriser.fit_transform(answers)
    NMF(n_components=model.n_topics_, init="nndsvda", solver="cd", random_state=1, max_iter=500,
        tol=1e-5).fit(matrix)
    baseline = time.perf_counter() - started
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    print(f"answers {args.n:,}; terms after filtering {len(model.terms_):,} (baseline {matrix.shape[1]:,}); "
          f"distinct answers fitted {model.n_distinct_:,}; chosen k {model.n_topics_}")
    print(model.k_selection_.to_string(index=False))
    print(f"tokenise                          {tokenise:7.1f} s")
    print(f"k scan 3-15 + final fit           {fit:7.1f} s")
    print(f"transform all answers             {transform:7.1f} s")
    print(f"baseline TfidfVectorizer + NMF(k) {baseline:7.1f} s")
    print(f"ratio (tokenise + fit) / baseline {(tokenise + fit) / baseline:7.2f}x")
    print(f"peak resident memory              {peak:7.0f} MiB")


if __name__ == "__main__":
    main()
