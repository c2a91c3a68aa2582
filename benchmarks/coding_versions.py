"""Benchmark: coding speed of this checkout against an earlier commit, runs alternating.

Checks out ``--before`` (a commit, default 33e8e62: the code before lemmas, kept
negations, names and "nothing to report") into a temporary git worktree, then
times the same work with each version in fresh processes, alternating
before/after ``--runs`` times so that a change in the machine's load hits both:
tokenise + fit + code with evidence, and with the 0/1 matrix only, on the
synthetic answers and lexicon of ``benchmarks/coding.py``. Prints every run,
the medians and the ratio after/before of the medians and of the fastest runs.

    python benchmarks/coding_versions.py                 # 1,000,000 answers, 3 runs each
    python benchmarks/coding_versions.py --n 200000 --runs 5 --before HEAD~10
"""

from __future__ import annotations

import argparse
import gc
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def child(n: int) -> None:
    """Time both codings with whichever textkit comes first on the path; print two numbers."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from coding import coding_steps, make_answers

    from textkit.coding.coder import ThemeCoder
    from textkit.coding.lexicon import parse_lexicon

    answers, lexicon_text = make_answers(n)
    lexicon = parse_lexicon(lexicon_text)
    ThemeCoder(lexicon).fit(answers[:50]).code(answers[:50])  # one-off imports are not timed
    with_evidence, matrix_only = coding_steps(answers, lexicon)

    times = []
    for work in (with_evidence, matrix_only):
        gc.collect()
        start = time.perf_counter()
        result = work()
        times.append(time.perf_counter() - start)
        del result
    print(f"{times[0]:.3f} {times[1]:.3f}")


def run_version(source: Path, n: int) -> tuple[float, float]:
    environment = {**os.environ, "PYTHONPATH": str(source)}
    output = subprocess.run([sys.executable, __file__, "--child", "--n", str(n)], env=environment,
                            capture_output=True, text=True, check=True, cwd=source).stdout
    first, second = output.split()[-2:]
    return float(first), float(second)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--n", type=int, default=1_000_000, help="number of answers (default 1,000,000)")
    parser.add_argument("--runs", type=int, default=3, help="runs of each version (default 3)")
    parser.add_argument("--before", default="33e8e62", help="the earlier commit (default 33e8e62)")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    options = parser.parse_args()
    if options.child:
        child(options.n)
        return
    with tempfile.TemporaryDirectory(prefix="textkit-before-") as folder:
        earlier = Path(folder) / "checkout"
        subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", "--quiet", str(earlier),
                        options.before], check=True)
        try:
            times: dict[str, list[tuple[float, float]]] = {"before": [], "after": []}
            for run in range(options.runs):
                for name, source in (("before", earlier), ("after", ROOT)):
                    times[name].append(run_version(source, options.n))
                    evidence, matrix = times[name][-1]
                    print(f"run {run + 1} {name:6} with evidence {evidence:7.2f} s   matrix only {matrix:7.2f} s",
                          flush=True)
        finally:
            subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force", str(earlier)], check=False)
    print(f"{options.n:,} answers; before = {options.before}, after = this checkout")  # numpy's median:
    # benchmarks/statistics.py shadows the standard library's module of that name here
    for index, label in enumerate(("with evidence", "matrix only")):
        before = [t[index] for t in times["before"]]
        after = [t[index] for t in times["after"]]
        print(f"{label:14} median {np.median(before):6.2f} s -> {np.median(after):6.2f} s "
              f"({np.median(after) / np.median(before):.2f}x); fastest {min(before):6.2f} s -> "
              f"{min(after):6.2f} s ({min(after) / min(before):.2f}x)")


if __name__ == "__main__":
    main()
