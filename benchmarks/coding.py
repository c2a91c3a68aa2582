"""Benchmark: coding answers with a 50-theme x 40-term lexicon.

Generates N synthetic answers (mean about 25 words, Zipf-like word use) and a
lexicon of 50 themes x 40 terms (single words, two- and three-word phrases,
trailing wildcards, a few exclusions), then times in one run:

* baseline  - one ``re.findall(r"\\w+", text.lower())`` pass over the answers;
* textkit   - tokenise once + ThemeCoder.fit + code (with evidence, and
  matrix only);
* earlier   - the same engine with the defaults coding had before lemmas and
  kept negations (``inflect: stem``, ``negated: drop``), to show what the new
  defaults cost;
* naive     - one regular-expression search per theme with pandas
  ``Series.str.contains`` (on a subsample of at most 100,000 answers, scaled
  linearly to N; the script says so).

Peak memory is the peak resident set size of a fresh child process that
generates the answers and codes them (so it includes holding the texts),
next to a child that only generates them.

    python benchmarks/coding.py            # N = 1,000,000
    python benchmarks/coding.py --n 200000
    python benchmarks/coding.py --naive-n 0   # skip the (slow) naive approach
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import re
import resource
import subprocess
import sys
import time

import numpy as np

SYLLABLES = ["ka", "lo", "mi", "ren", "tas", "vo", "dri", "pel", "sun", "or", "ith", "bar", "que", "nol",
             "fen", "wa", "tri", "gos", "hal", "em"]


def make_vocabulary(n_words: int, rng: np.random.Generator) -> list[str]:
    words: set[str] = set()
    while len(words) < n_words:
        parts = rng.integers(0, len(SYLLABLES), size=rng.integers(2, 5))
        words.add("".join(SYLLABLES[i] for i in parts))
    return sorted(words)


def make_lexicon_yaml(vocabulary: list[str], rng: np.random.Generator, n_themes: int = 50,
                      n_terms: int = 40) -> str:
    lines = ["lexicon: benchmark", 'version: "1"', "language: en", "themes:"]
    # Lexicon words are content words: drawn from below the 300 commonest, so that
    # (as in real answers) a few tokens per answer match, not most of them.
    pool = [vocabulary[i] for i in rng.permutation(np.arange(300, len(vocabulary)))[:8000]]
    for theme in range(n_themes):
        lines += [f"  - id: theme_{theme:02d}", f"    label: Theme {theme}", "    terms:"]
        terms: set[str] = set()
        while len(terms) < n_terms:
            kind = rng.random()
            if kind < 0.55:
                term = pool[rng.integers(len(pool))]
            elif kind < 0.75:
                term = f"{pool[rng.integers(len(pool))]} {pool[rng.integers(len(pool))]}"
            elif kind < 0.85:
                term = " ".join(pool[i] for i in rng.integers(len(pool), size=3))
            else:
                word = pool[rng.integers(len(pool))]
                if len(word) < 7:
                    continue
                term = word[:-2] + "*"  # like expens*: a stem plus its endings
            terms.add(term)
        lines += [f'      - "{t}"' for t in sorted(terms)]
        lines += ["    exclude:", f'      - "{pool[rng.integers(len(pool))]} {pool[rng.integers(len(pool))]}"']
    return "\n".join(lines) + "\n"


def make_answers(n: int, seed: int = 7) -> tuple[list[str], str]:
    rng = np.random.default_rng(seed)
    vocabulary = list(rng.permutation(make_vocabulary(30_000, rng)))  # frequency rank order
    extras = ["the", "was", "and", "not", "no", "but", "very", "we", "it", "too", "never", "didn't"]
    words = np.array(extras + vocabulary, dtype=object)
    ranks = np.arange(1, len(words) + 1)
    probability = 1.0 / ranks**1.05
    probability /= probability.sum()
    lengths = np.clip(rng.poisson(24, size=n), 1, None)
    drawn = words[rng.choice(len(words), size=int(lengths.sum()), p=probability)]
    punctuation = rng.random(len(drawn)) < 0.06
    drawn[punctuation] = drawn[punctuation] + ","
    bounds = np.concatenate([[0], np.cumsum(lengths)])
    answers = [" ".join(drawn[bounds[i]:bounds[i + 1]]) + "." for i in range(n)]
    return answers, make_lexicon_yaml(vocabulary, np.random.default_rng(seed + 1))


def coding_steps(answers: list[str], lexicon):
    """The two timed codings: tokenise once + fit + code with evidence, and with the 0/1 matrix only."""
    from textkit.coding.coder import ThemeCoder
    from textkit.text.tokens import tokenize_corpus

    def with_evidence():
        stream = tokenize_corpus(answers)
        return ThemeCoder(lexicon).fit(stream).code(stream, texts=answers)

    def matrix_only():
        stream = tokenize_corpus(answers, offsets=False)
        return ThemeCoder(lexicon).fit(stream).transform(stream)

    return with_evidence, matrix_only


def earlier_defaults(lexicon):
    """``lexicon`` with the defaults coding had before lemmas and kept negations: Snowball stems,
    negated mentions dropped (the same engine, so the ratio isolates what the new defaults cost)."""
    themes = tuple(dataclasses.replace(
        theme, negated="drop",
        terms=tuple(dataclasses.replace(term, inflect="stem" if term.inflect else term.inflect)
                    for term in theme.terms),
        exclusions=tuple(dataclasses.replace(term, inflect="stem" if term.inflect else term.inflect)
                         for term in theme.exclusions))
        for theme in lexicon.themes)
    return dataclasses.replace(lexicon, themes=themes)


def peak_rss_mib() -> float:
    """Peak resident memory of this process (VmHWM; ru_maxrss would carry the parent's over exec)."""
    with open("/proc/self/status", encoding="ascii") as status:
        for line in status:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def child(n: int, mode: str) -> None:
    """Run in a fresh process: generate, optionally code, print peak RSS."""
    answers, lexicon_text = make_answers(n)
    if mode == "code":
        from textkit.coding.coder import ThemeCoder
        from textkit.coding.lexicon import parse_lexicon
        from textkit.text.tokens import tokenize_corpus

        stream = tokenize_corpus(answers)
        coder = ThemeCoder(parse_lexicon(lexicon_text)).fit(stream)
        result = coder.code(stream, texts=answers)
        assert result.matrix.shape == (n, 50)
    print(json.dumps({"peak_rss_mib": peak_rss_mib()}))


def time_it(function) -> tuple[float, object]:
    start = time.perf_counter()
    value = function()
    return time.perf_counter() - start, value


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--n", type=int, default=1_000_000, help="number of answers (default 1,000,000)")
    parser.add_argument("--naive-n", type=int, default=100_000,
                        help="subsample for the naive approach (0: skip it)")
    parser.add_argument("--child", choices=["generate", "code"], help=argparse.SUPPRESS)
    options = parser.parse_args()
    if options.child:
        child(options.n, options.child)
        return

    import pandas as pd

    from textkit.coding.coder import ThemeCoder
    from textkit.coding.lexicon import parse_lexicon
    from textkit.text.tokens import tokenize_corpus

    n = options.n
    answers, lexicon_text = make_answers(n)
    lexicon = parse_lexicon(lexicon_text)
    n_words = sum(len(a.split()) for a in answers[:100_000]) / min(n, 100_000)
    print(f"{n:,} answers, mean {n_words:.1f} words; lexicon {len(lexicon.themes)} themes x "
          f"{len(lexicon.themes[0].terms)} terms")

    # warm-up on a few answers, so one-off imports (lemmatiser tables, nltk's stemmer) are not timed
    for warm in (lexicon, earlier_defaults(lexicon)):
        ThemeCoder(warm).fit(answers[:50]).code(answers[:50])
    baseline_kept, _ = time_it(lambda: [re.findall(r"\w+", text.lower()) for text in answers])

    def findall_discarding():
        for text in answers:
            re.findall(r"\w+", text.lower())

    # Keeping 24 M token strings makes Python's garbage collector work hard at 1 M answers, so the
    # pass that throws each answer's tokens away is faster: the stricter baseline is the faster one.
    baseline_discarded, _ = time_it(findall_discarding)
    baseline = min(baseline_kept, baseline_discarded)

    code_with_evidence, code_matrix_only = coding_steps(answers, lexicon)
    full, result = time_it(code_with_evidence)
    matrix_only, _ = time_it(code_matrix_only)
    earlier = earlier_defaults(lexicon)

    def code_with_earlier_defaults():
        stream = tokenize_corpus(answers)
        return ThemeCoder(earlier).fit(stream).code(stream, texts=answers)

    earlier_full, _ = time_it(code_with_earlier_defaults)

    sample = pd.Series(answers[: min(n, options.naive_n)])

    def naive():
        columns = {}
        for theme in lexicon.themes:
            alternatives = []
            for term in theme.terms:
                words = [re.escape(w.rstrip("*")) + (r"\w*" if w.endswith("*") else "") for w in term.words]
                alternatives.append(r"\s+".join(words))
            pattern = r"\b(?:" + "|".join(alternatives) + r")\b"
            columns[theme.id] = sample.str.contains(pattern, case=False, regex=True)
        return columns

    naive_sample, _ = time_it(naive) if len(sample) else (float("nan"), None)
    naive_scaled = naive_sample * n / max(len(sample), 1)

    memory = {}
    for mode in ("generate", "code"):
        output = subprocess.run([sys.executable, __file__, "--n", str(n), "--child", mode],
                                capture_output=True, text=True, check=True).stdout
        memory[mode] = json.loads(output.strip().splitlines()[-1])["peak_rss_mib"]

    coded_share = float((result.matrix.getnnz(axis=1) > 0).mean())
    print(f"answers with at least one theme: {coded_share:.1%}; counted matches per answer: "
          f"{len(result.evidence) / n:.2f}; dropped {result.dropped}")
    print(f"baseline re.findall, tokens kept      {baseline_kept:8.2f} s")
    print(f"baseline re.findall, tokens discarded {baseline_discarded:8.2f} s   (the faster is the baseline)")
    print(f"textkit code (with evidence)    {full:8.2f} s   ({n / full:,.0f} answers/s)  "
          f"ratio to baseline {full / baseline:.2f}x")
    print(f"textkit code (matrix only)      {matrix_only:8.2f} s   ({n / matrix_only:,.0f} answers/s)  "
          f"ratio to baseline {matrix_only / baseline:.2f}x")
    print(f"textkit code, earlier defaults  {earlier_full:8.2f} s   (inflect: stem, negated: drop; "
          f"the new defaults take {full / earlier_full:.2f}x its time)")
    scaled_note = "" if len(sample) == n else f" (timed on {len(sample):,}, scaled linearly to {n:,})"
    if len(sample):
        print(f"naive str.contains per theme    {naive_scaled:8.2f} s{scaled_note}  "
              f"textkit is {naive_scaled / full:.1f}x faster")
    print(f"peak RSS: generating only {memory['generate']:,.0f} MiB; generating + coding "
          f"{memory['code']:,.0f} MiB")


if __name__ == "__main__":
    main()
