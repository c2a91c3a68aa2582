"""Benchmark: every chart the demo's result tables support, against a bare-figure baseline.

Run from the repository root::

    python benchmarks/charts.py              # jobs = up to 2, PNG + SVG at 200 dpi
    python benchmarks/charts.py --jobs 1

Builds the demo's coded, prevalence and keyness tables once (not timed), then
times :func:`textkit.present.catalogue.render_charts` over every planned chart
and, in the same run, a baseline that saves the same number of empty figures
of the same size to the same formats (the fixed cost of matplotlib's PNG and
SVG writers). Prints both times and their ratio; the target is all charts for
the demo in under 15 s on a 2-core machine.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def build_results(folder: Path) -> list[Path]:
    """Write the demo's coded, prevalence and keyness folders under ``folder``."""
    from textkit.cli.main import main

    config = str(ROOT / "demo_comments" / "survey.yaml")
    for argv in (["code", config, "--out", str(folder / "coded"), "--quiet"],
                 ["prevalence", str(folder / "coded"), "--out", str(folder / "stats"), "--quiet"],
                 ["keyness", config, "--out", str(folder / "keyness"), "--quiet"]):
        if main(argv) != 0:
            raise SystemExit(f"setup step failed: {' '.join(argv)}")
    return [folder / "stats", folder / "keyness", folder / "coded"]


def bare_figures(sizes: list[tuple[float, float]], formats: tuple[str, ...], dpi: int) -> float:
    """Seconds to save one empty figure of each size in each format."""
    import io

    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    start = time.perf_counter()
    for size in sizes:
        figure = Figure(figsize=size)
        figure.add_subplot()
        for fmt in formats:
            figure.savefig(io.BytesIO(), format=fmt, dpi=dpi)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=min(2, os.cpu_count() or 1))
    parser.add_argument("--dpi", type=int, default=200)
    args = parser.parse_args()
    from textkit.present.catalogue import chart_text, draw_chart, load_results, plan_charts, render_charts

    formats = ("png", "svg")
    with tempfile.TemporaryDirectory() as tmp:
        results = load_results(build_results(Path(tmp)))
        specs = plan_charts(results)
        texts = [chart_text(results, spec) for spec in specs]
        start = time.perf_counter()
        files, _ = render_charts(results, specs, texts, formats=formats, dpi=args.dpi, jobs=args.jobs)
        ours = time.perf_counter() - start
        sizes = [tuple(draw_chart(results, spec, text=text).get_size_inches()) for spec, text in zip(specs, texts,
                                                                                                     strict=True)]
    baseline = bare_figures(sizes, formats, args.dpi)
    print(f"charts: {len(specs)} ({len(files)} files), jobs={args.jobs}, dpi={args.dpi}")
    print(f"textkit render_charts   {ours:7.2f} s   (target < 15 s)")
    print(f"baseline bare figures   {baseline:7.2f} s   (one process, same sizes and formats)")
    print(f"ratio                   {ours / baseline:7.2f}x")


if __name__ == "__main__":
    main()
