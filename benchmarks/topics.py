"""Topic-model benchmark: 200,000 synthetic answers, about 20,000 terms after filtering.

Times each step as it runs (tokenising; terms, duplicates and TF-IDF; the k scan over 3-15, one
line per k; the final fit; scoring every answer) and, in the same run, a plain scikit-learn
``TfidfVectorizer + NMF`` fit at the chosen k on the raw answers: the baseline. Prints the ratio of
textkit's scan and fit to it, the peak resident memory and the load average (the machine is shared:
read the times beside it).

    python benchmarks/topics.py                  # 200,000 answers
    python benchmarks/topics.py --n 20000 --compare-slow

``--compare-slow`` also runs the k scan with the earlier, slow settings (up to 20,000 answers in
the scan, 500 iterations at tolerance 1e-5 per fit) on the same answers and prints both choices of
k, to show whether the cheap scan picks the same k.
"""

from __future__ import annotations

import argparse
import os
import resource
import time

import numpy as np

#: Function words mixed into the answers (all in textkit's stop-word list), as real answers have them.
FUNCTION_WORDS = "the a and was to of it in we at for is".split()


def synthetic_answers(n: int, seed: int = 0, n_topics: int = 12) -> list[str]:
    """Answers of 5-16 words from ``n_topics`` planted subjects.

    Each word is, independently: a function word (40%), else a word of the answer's subject (60%; 100
    words per subject, Zipf-like), a word shared by all subjects (30%; 1,000 words, Zipf-like) or a
    rare word (10%; 80,000 words, uniform). With 200,000 answers this leaves about 20,000 one- and
    two-word terms after textkit's frequency filter (5 answers to 20% of them).
    """
    rng = np.random.default_rng(seed)

    def zipf(size: int) -> np.ndarray:
        p = 1 / np.arange(1, size + 1)
        return p / p.sum()

    subject_words, shared_words, rare_words = 100, 1000, 80_000
    subject_vocabulary = np.array([f"s{t}w{j}" for t in range(n_topics) for j in range(subject_words)], dtype=object)
    shared = np.array([f"c{j}" for j in range(shared_words)], dtype=object)
    rare = np.array([f"r{j}" for j in range(rare_words)], dtype=object)
    lengths = rng.integers(5, 17, n)
    total = int(lengths.sum())
    subject = np.repeat(rng.integers(n_topics, size=n), lengths)
    source = rng.random(total)
    words = np.empty(total, dtype=object)
    own, common = source < 0.6, (source >= 0.6) & (source < 0.9)
    words[own] = subject_vocabulary[subject[own] * subject_words
                                    + rng.choice(subject_words, int(own.sum()), p=zipf(subject_words))]
    words[common] = shared[rng.choice(shared_words, int(common.sum()), p=zipf(shared_words))]
    words[~(own | common)] = rare[rng.integers(rare_words, size=int((~(own | common)).sum()))]
    function = rng.random(total) < 0.4
    words[function] = np.array(FUNCTION_WORDS, dtype=object)[rng.integers(len(FUNCTION_WORDS),
                                                                          size=int(function.sum()))]
    ends = np.cumsum(lengths)
    return [" ".join(words[end - length:end]) for end, length in zip(ends, lengths, strict=True)]


class StepClock:
    """Prints each step's time when the next one starts (``progress`` hook of ``TopicModel.fit``)."""

    def __init__(self) -> None:
        self.times: dict[str, float] = {}
        self._step: str | None = None
        self._started = 0.0

    def __call__(self, step: str | None) -> None:
        now = time.perf_counter()
        if self._step is not None:
            self.times[self._step] = now - self._started
            print(f"  {self._step:<36} {self.times[self._step]:7.1f} s", flush=True)
        self._step, self._started = step, now

    def total(self, prefix: str) -> float:
        return sum(t for step, t in self.times.items() if step.startswith(prefix))


def _peak_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--n", type=int, default=200_000)
    parser.add_argument("--compare-slow", action="store_true", help="also run the slow k scan and compare")
    args = parser.parse_args()
    import warnings

    from sklearn.decomposition import NMF
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.feature_extraction.text import TfidfVectorizer

    from textkit.discover.topics import TopicModel
    from textkit.text.tokens import tokenize_corpus

    warnings.simplefilter("ignore", ConvergenceWarning)
    print(f"load average at start (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())} "
          f"on {os.cpu_count()} cores", flush=True)
    answers = synthetic_answers(args.n)
    clock = StepClock()
    clock("tokenise")
    stream = tokenize_corpus(answers, offsets=False)
    model = TopicModel(language=None, random_state=1).fit(stream, progress=clock)
    clock("transform all answers")
    model.transform(stream)
    clock(None)
    textkit_memory = _peak_mib()
    print(f"answers {args.n:,}; terms after filtering {len(model.terms_):,}; distinct answers fitted "
          f"{model.n_distinct_:,}; chosen k {model.n_topics_}", flush=True)
    print(model.k_selection_.round(4).to_string(index=False), flush=True)

    baseline = StepClock()
    baseline("baseline TfidfVectorizer")
    vectoriser = TfidfVectorizer(ngram_range=(1, 2), min_df=5, max_df=0.2, sublinear_tf=True)
    matrix = vectoriser.fit_transform(answers)
    baseline(f"baseline NMF(k={model.n_topics_})")
    NMF(n_components=model.n_topics_, init="nndsvda", solver="cd", random_state=1, max_iter=500,
        tol=1e-5).fit(matrix)
    baseline(None)
    base = sum(baseline.times.values())
    ours = sum(clock.times.values())
    scan = clock.total("k scan")
    print(f"baseline terms {matrix.shape[1]:,}")
    print(f"k scan (all k)                         {scan:7.1f} s")
    print(f"textkit total (tokenise .. transform)  {ours:7.1f} s   target < 180 s")
    print(f"baseline total (one fit at chosen k)   {base:7.1f} s")
    print(f"ratio textkit total / baseline         {ours / base:7.2f}x")
    print(f"ratio textkit without scan / baseline  {(ours - scan) / base:7.2f}x")
    print(f"peak resident memory                   {max(textkit_memory, _peak_mib()):7.0f} MiB   "
          f"(after textkit steps {textkit_memory:.0f} MiB)   target < 4096 MiB")
    if args.compare_slow:
        slow_clock = StepClock()
        slow = TopicModel(language=None, random_state=1, scan_size=20_000, scan_max_iter=500,
                          scan_tol=1e-5).fit(stream, progress=slow_clock)
        slow_clock(None)
        print(f"slow scan {slow_clock.total('k scan'):.1f} s, chosen k {slow.n_topics_} "
              f"(cheap scan {scan:.1f} s, chosen k {model.n_topics_})")
        print(slow.k_selection_.round(4).to_string(index=False))
    print(f"load average at end (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())}")


if __name__ == "__main__":
    main()
