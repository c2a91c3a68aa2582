"""Command line for the report writer: ``textkit charts`` and ``textkit quotes``.

Only click is imported at module level; matplotlib, wordcloud, pandas and
scikit-learn load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click


def _wording(pairs: tuple[str, ...]) -> dict[str, str]:
    from ..errors import InputError

    wording = {}
    for pair in pairs:
        name, sep, text = pair.partition("=")
        if not sep or not name.strip() or not text.strip():
            raise InputError(f"--question-text expects NAME=WORDING, got '{pair}'")
        wording[name.strip()] = text.strip()
    return wording


@click.command("charts")
@click.argument("results_dirs", nargs=-1, required=True, type=click.Path(path_type=Path), metavar="RESULTS_DIR...")
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Folder for the charts (PNG and SVG) and manifest.json.")
@click.option("--group-var", default=None, help="Only this group variable.")
@click.option("--theme", default=None, help="Only this theme (differences become every pair of groups).")
@click.option("--wave", default=None, help="Only this wave (default: waves pooled).")
@click.option("--clouds", is_flag=True, help="Also draw a two-sided word cloud per keyness comparison.")
@click.option("--question-text", "question_text", multiple=True, metavar="NAME=WORDING",
              help="The wording of a question, shown as the subtitle (repeatable).")
@click.option("--format", "formats", default="png,svg", show_default=True, help="File formats: png, svg or both.")
@click.option("--dpi", default=200, show_default=True, type=click.IntRange(min=200), help="PNG resolution.")
@click.option("--font-path", type=click.Path(exists=True, dir_okay=False), default=None,
              help="A TrueType/OpenType font for word clouds in scripts DejaVu Sans lacks.")
@click.option("--seed", default=0, show_default=True, type=int, help="Seed of the word-cloud layouts.")
@click.option("--jobs", default=0, type=click.IntRange(min=0),
              help="Worker processes (default: up to 2); the files do not depend on it.")
@click.option("--quiet", is_flag=True, help="Print nothing on success.")
def charts_command(results_dirs: tuple[Path, ...], out_dir: Path, group_var: str | None, theme: str | None,
                   wave: str | None, clouds: bool, question_text: tuple[str, ...], formats: str, dpi: int,
                   font_path: str | None, seed: int, jobs: int, quiet: bool) -> None:
    """Draw every chart the result tables in RESULTS_DIR support.

    RESULTS_DIR is one or more folders written by 'textkit prevalence',
    'textkit keyness', 'textkit code' (co-occurrence) or the topic step. File
    names say what each chart shows.
    """
    import os

    from ..errors import InputError
    from ..io.output import bytes_writer, write_outputs
    from ..present.catalogue import chart_text, load_results, plan_charts, render_charts

    chosen = [f.strip().lower() for f in formats.split(",") if f.strip()]
    if not chosen or set(chosen) - {"png", "svg"}:
        raise InputError(f"--format takes png, svg or png,svg; got '{formats}'")
    wording = _wording(question_text)
    results = load_results(results_dirs)
    specs = plan_charts(results, group_var=group_var, theme=theme, wave=wave, clouds=clouds)
    if not specs:
        raise InputError("the tables found support no chart with these filters", source=str(results_dirs[0]))
    texts = [chart_text(results, spec, wording) for spec in specs]
    rendered, missing = render_charts(results, specs, texts, formats=chosen, dpi=dpi, seed=seed,
                                      font_path=font_path, jobs=jobs or min(2, os.cpu_count() or 1))
    files = {name: bytes_writer(data) for name, data in sorted(rendered.items())}
    manifest = {
        "command": "charts",
        "inputs": {name: str(path) for name, path in sorted(results.paths.items())},
        "settings": {"group_var": group_var, "theme": theme, "wave": wave, "clouds": clouds, "dpi": dpi,
                     "formats": chosen, "seed": seed, "font_path": font_path, "question_text": wording},
        "charts": [{"file": spec.stem, "kind": spec.kind, **{k: v for k, v in spec.arguments.items() if v}}
                   for spec in specs],
    }
    write_outputs(out_dir, files, manifest)
    if not quiet:
        click.echo(f"{len(specs)} charts ({len(files)} files) -> {out_dir}")
        if missing:
            click.echo(f"note: the font lacks some characters (drawn as boxes): {'; '.join(missing[:3])}; "
                       "pass --font-path to a font that has them", err=True)
