"""Keyness at scale: every group-vs-rest table for synthetic answers.

Usage::

    python benchmarks/keyness.py                 # 1,000,000 answers, 10 groups
    python benchmarks/keyness.py --n 100000 --groups 5

Builds invented answers (~25 words each, Zipf-distributed vocabulary of
8,000 words plus the shipped stop words, each group with a few planted
phrases), tokenises them once, builds the one sparse document-term matrix
(unigrams to trigrams, document frequency) and computes all group-vs-rest
tables with :func:`textkit.discover.keyness.compare` (weighted). Prints the time of
each stage, the peak resident memory of the process, and whether the planted
phrases rank first for their group.

Target (issue 4): all group-vs-rest tables in under 30 s, peak under 4 GB.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from textkit.discover.keyness import compare  # noqa: E402
from textkit.text.ngrams import document_term_matrix  # noqa: E402
from textkit.text.tokens import default_stop_words, tokenize_corpus  # noqa: E402


def peak_rss_gb() -> float:
    """Peak resident set size of this process so far, GB (Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024 ** 2


def synthetic_answers(n: int, n_groups: int,
                      seed: int = 20260401) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Invented answers, their group labels and survey weights."""
    rng = np.random.default_rng(seed)
    content = np.array([f"w{i:04d}" for i in range(8000)], dtype=object)
    stops = np.array(sorted(default_stop_words()), dtype=object)
    words = np.concatenate([content, stops])
    probability = 1.0 / np.arange(1, len(words) + 1) ** 1.05
    probability[len(content):] *= 40  # stop words are frequent
    probability /= probability.sum()
    lengths = rng.integers(15, 36, size=n)
    tokens = words[rng.choice(len(words), size=int(lengths.sum()), p=probability)]
    group = rng.integers(0, n_groups, size=n)
    planted = [f"planted{g} phrase{g}" for g in range(n_groups)]
    ends = np.cumsum(lengths)
    starts = ends - lengths
    texts = [" ".join(tokens[s:e]) for s, e in zip(starts.tolist(), ends.tolist(), strict=True)]
    lucky = np.flatnonzero(rng.random(n) < 0.05)  # 5% of each group say the group's phrase
    for i in lucky.tolist():
        texts[i] = texts[i] + ". " + planted[group[i]] + "!"
    labels = np.array([f"group{g:02d}" for g in range(n_groups)], dtype=object)[group]
    weights = rng.lognormal(0.0, 0.4, size=n)
    return texts, labels, weights


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--n", type=int, default=1_000_000, help="number of answers")
    parser.add_argument("--groups", type=int, default=10, help="number of groups")
    parser.add_argument("--min-respondents", type=int, default=5)
    args = parser.parse_args(argv)

    started = time.perf_counter()
    texts, labels, weights = synthetic_answers(args.n, args.groups)
    generated = time.perf_counter()
    rss_data = peak_rss_gb()

    stream = tokenize_corpus(texts, offsets=False)
    del texts
    tokenised = time.perf_counter()

    matrix, terms, n_words = document_term_matrix(stream, min_df=args.min_respondents)
    built = time.perf_counter()

    table = compare(matrix, terms, n_words, pd.DataFrame({"group": labels}), weights=weights,
                    min_respondents=args.min_respondents, max_terms=50)
    compared = time.perf_counter()

    top = table[table["z"] > 0].groupby("group", sort=True)["term"].first()
    planted_first = sum(top[f"group{g:02d}"] in (f"planted{g} phrase{g}",) for g in range(args.groups))
    summary = table.attrs["summary"]
    keyness_seconds = compared - tokenised
    print(f"answers {args.n:,}, groups {args.groups}, tokens {stream.n_tokens:,}, "
          f"vocabulary {len(stream.vocabulary):,}")
    print(f"terms (>= {args.min_respondents} answers) {len(terms):,}, matrix nnz {matrix.nnz:,}")
    print(f"generate texts        {generated - started:7.2f} s")
    print(f"tokenise (text.tokens) {tokenised - generated:7.2f} s")
    print(f"document-term matrix  {built - tokenised:7.2f} s")
    print(f"all group-vs-rest     {compared - built:7.2f} s  ({summary['comparisons']} comparisons, "
          f"{len(table):,} rows)")
    print(f"matrix + tables       {keyness_seconds:7.2f} s  (target < 30 s)")
    print(f"peak RSS              {peak_rss_gb():7.2f} GB (after generating texts: {rss_data:.2f} GB; "
          "target < 4 GB)")
    print(f"planted phrase ranked first for {planted_first} of {args.groups} groups")
    return 0


if __name__ == "__main__":
    sys.exit(main())
