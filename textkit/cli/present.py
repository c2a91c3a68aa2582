"""Command line for the report writer: ``textkit charts`` and ``textkit quotes``.

Only click is imported at module level; matplotlib, wordcloud, pandas and
scikit-learn load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click

from .main import OUTPUT_FOLDER


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
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
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
    write_outputs(out_dir, files, manifest, inputs=[*results_dirs, *results.paths.values()])
    if not quiet:
        click.echo(f"{len(specs)} charts ({len(files)} files) -> {out_dir}")
        if missing:
            click.echo(f"note: the font lacks some characters (drawn as boxes): {'; '.join(missing[:3])}; "
                       "pass --font-path to a font that has them", err=True)


@click.command("quotes")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for quotes.csv, quotes.md and manifest.json.")
@click.option("--theme", "themes", multiple=True, help="Only this theme (repeatable; default all).")
@click.option("--group-var", default=None, help="Pick quotes within each group of this variable.")
@click.option("--by-wave", is_flag=True, help="Pick quotes within each wave.")
@click.option("--per-theme", default=3, show_default=True, type=click.IntRange(min=1), help="Quotes per cell.")
@click.option("--min-words", default=6, show_default=True, type=click.IntRange(min=1), help="Shortest quote.")
@click.option("--max-words", default=60, show_default=True, type=click.IntRange(min=1), help="Longest quote.")
@click.option("--diversity", default=0.3, show_default=True, type=click.FloatRange(0, 1),
              help="Weight of the penalty for repeating an earlier pick (0: most typical only).")
@click.option("--typicality", type=click.Choice(["centroid", "evidence"]), default="centroid", show_default=True,
              help="Typical = near the theme's TF-IDF centroid, or dense in its evidence.")
@click.option("--mask-profanity", is_flag=True, help="Mask swear words (first letter kept).")
@click.option("--seed", default=None, type=int, help="Tie-break seed (default: the config's seed).")
@click.option("--quiet", is_flag=True, help="Print nothing on success.")
def quotes_command(config: Path, out_dir: Path, themes: tuple[str, ...], group_var: str | None, by_wave: bool,
                   per_theme: int, min_words: int, max_words: int, diversity: float, typicality: str,
                   mask_profanity: bool, seed: int | None, quiet: bool) -> None:
    """Typical, diverse, redacted quotes for each theme of a survey.

    CONFIG is the survey config (YAML); answers are coded first. Read every
    quote before publishing: redaction cannot catch everything.
    """
    from ..errors import AnalysisError
    from ..io.output import csv_writer, text_writer, write_outputs
    from ..pipeline import code_survey
    from ..present.quotes import choose_quotes, quotes_markdown
    from .main import steps

    with steps(5, quiet) as progress:
        survey = code_survey(config, progress=progress)
    chosen = list(themes) or list(survey.themes)
    unknown = [t for t in chosen if t not in survey.themes]
    if unknown:
        raise AnalysisError(f"theme '{unknown[0]}' is not in the lexicon; valid: {', '.join(survey.themes)}")
    if group_var is not None and group_var not in (survey.roles.get("groups") or []):
        valid = ", ".join(survey.roles.get("groups") or []) or "none (the config lists no groups)"
        raise AnalysisError(f"group variable '{group_var}' is not a group of the config; valid: {valid}")
    wave_var = survey.roles.get("wave")
    if by_wave and not wave_var:
        raise AnalysisError("--by-wave needs a 'wave:' column in the survey config")
    used_seed = seed if seed is not None else int(survey.config.seed or 0)
    labels = {t.id: t.label for t in survey.lexicon.themes}
    quotes = choose_quotes(survey.texts.tolist(), survey.stream, survey.coded, survey.evidence, chosen,
                           group_var=group_var, wave_var=wave_var, split_waves=by_wave, per_theme=per_theme,
                           min_words=min_words, max_words=max_words, diversity=diversity, typicality=typicality,
                           seed=used_seed, profanity=mask_profanity, labels=labels)
    manifest = {
        "command": "quotes",
        "config": survey.manifest.get("config"), "survey": survey.manifest.get("survey"),
        "lexicon": survey.manifest.get("lexicon"),
        "settings": {"themes": chosen, "group_var": group_var, "by_wave": by_wave, "per_theme": per_theme,
                     "min_words": min_words, "max_words": max_words, "diversity": diversity,
                     "typicality": typicality, "mask_profanity": mask_profanity, "seed": used_seed},
        "counts": {"quotes": len(quotes), "redactions": int(quotes["redactions"].sum())},
    }
    write_outputs(out_dir, {"quotes.csv": csv_writer(quotes), "quotes.md": text_writer(quotes_markdown(quotes))},
                  manifest, inputs=survey.input_paths)
    if not quiet:
        click.echo(f"{len(quotes)} quotes ({int(quotes['redactions'].sum())} redactions) -> {out_dir}")
        click.echo("caution: quotes can identify respondents; read every quote before publishing", err=True)
