"""Command line for the review loop: ``textkit review``, ``textkit sample``, ``textkit lexicon diff``.

Only click is imported here; the coding modules load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click

from .main import OUTPUT_FOLDER, steps

_WORKBOOK_NOTE = ("caution: the workbook shows answer text (contact details redacted); keep it within the "
                  "people allowed to read the answers.")


def _parse_groups(values: tuple[str, ...]) -> dict[str, str]:
    from ..errors import InputError

    groups = {}
    for value in values:
        column, sep, wanted = value.partition("=")
        if not sep or not column.strip():
            raise InputError(f"expected COLUMN=VALUE, found {value!r}", option="--group")
        groups[column.strip()] = wanted.strip()
    return groups


def _sheets_for_review(table, lexicon):
    from ..coding.review import empty_corrections, theme_definitions
    from ..io.workbook import Sheet

    text_width = {"text": 70, "terms": 40, "negated": 25}
    themes = {theme: 6 for theme in lexicon.ids}
    return [
        Sheet("review", table, widths={**text_width, **themes}, wrap=("text",)),
        Sheet("themes", theme_definitions(lexicon), widths={"description": 60, "terms": 80},
              wrap=("description", "terms")),
        Sheet("corrections", empty_corrections(), widths={"note": 40}, blank_rows=200),
    ]


@click.command("review")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_path", required=True, type=click.Path(path_type=Path),
              help="The review workbook to write (.xlsx).")
@click.option("--replace", is_flag=True, help="Replace the --out file if it exists.")
@click.option("--lexicon", "lexicon_path", type=click.Path(path_type=Path), default=None,
              help="Use this lexicon instead of the one the config names.")
@click.option("--theme", "themes", multiple=True, help="Only answers coded with this theme (repeatable).")
@click.option("--uncoded", is_flag=True, help="Only answers no theme matched.")
@click.option("--group", "groups", multiple=True, metavar="COLUMN=VALUE",
              help="Only answers with this group value (repeatable).")
@click.option("--wave", default=None, help="Only answers of this wave.")
@click.option("--question", default=None, help="Only answers to this question.")
@click.option("--sample", type=click.IntRange(min=1), default=None,
              help="Draw this many of the selected answers at random (seeded by --seed or the config's seed).")
@click.option("--limit", type=click.IntRange(min=1), default=None, help="At most this many rows.")
@click.option("--seed", type=int, default=None, help="Seed for --sample (default: the config's seed).")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def review_command(config: Path, out_path: Path, replace: bool, lexicon_path: Path | None,
                   themes: tuple[str, ...], uncoded: bool, groups: tuple[str, ...], wave: str | None,
                   question: str | None, sample: int | None, limit: int | None, seed: int | None, quiet: bool) -> None:
    """Write a review workbook: every answer with its codes, the terms that fired, and room for corrections.

    Corrections go in the 'corrections' sheet (or the correct_* columns of the review
    sheet); name the filled workbook (or a CSV of the same columns) as 'corrections:' in
    the survey config and every later run applies them.
    """
    from ..coding.review import review_table, select_for_review
    from ..errors import InputError
    from ..io.workbook import refuse_existing, workbook_writer, write_file
    from ..pipeline import code_survey

    if out_path.suffix.lower() != ".xlsx":
        raise InputError("the review workbook must end in .xlsx", source=out_path)
    refuse_existing(out_path, replace)  # before the work, not only after it
    with steps(6, quiet) as progress:
        survey = code_survey(config, lexicon=lexicon_path, progress=progress)
        if question is not None and question not in survey.config.questions:
            raise InputError(f"question '{question}' is not in the survey config; valid: "
                             f"{', '.join(survey.config.questions)}", option="--question")
        progress("building the review sheet")
        show = [c for c in (survey.config.wave, *survey.config.groups) if c]
        table = review_table(survey.coded, survey.texts.tolist(), survey.result.evidence, survey.lexicon,
                             survey.stream, show_columns=show)
        table = select_for_review(table, survey.themes, theme=themes, uncoded=uncoded,
                                  groups=_parse_groups(groups), wave=wave, wave_column=survey.config.wave,
                                  question=question, sample=sample, limit=limit,
                                  seed=survey.config.seed if seed is None else seed)
        inputs = [survey.config.path, survey.config.survey, survey.config.corrections, survey.lexicon.source]
        write_file(out_path, workbook_writer(_sheets_for_review(table, survey.lexicon)), inputs=inputs,
                   replace=replace)
    if quiet:
        return
    for note in survey.notes:
        click.echo(f"note: {note}", err=True)
    click.echo(f"wrote {len(table):,} answers to review to {out_path}")
    click.echo(_WORKBOOK_NOTE)


@click.command("sample")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--n", "size", required=True, type=click.IntRange(min=1), help="Answers to draw.")
@click.option("--out", "out_path", required=True, type=click.Path(path_type=Path),
              help="The hand-coding sheet to write (.xlsx, or .csv without the definitions sheet).")
@click.option("--replace", is_flag=True, help="Replace the --out file if it exists.")
@click.option("--stratify", "strata", multiple=True,
              help="Sample in proportion within each value of this column (wave or a group; repeatable).")
@click.option("--enrich", type=click.FloatRange(0, 1, max_open=True), default=0.0, show_default=True,
              help="Share drawn from answers the lexicon left uncoded or coded through a single term "
                   "(recorded in sample_weight, so agreement is re-weighted to the population).")
@click.option("--coders", default="", help="Names of the people who will code, comma-separated: each answer "
                                            "gets one row per coder.")
@click.option("--seed", type=int, default=None, help="Seed (default: the config's seed).")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def sample_command(config: Path, size: int, out_path: Path, replace: bool, strata: tuple[str, ...],
                   enrich: float, coders: str, seed: int | None, quiet: bool) -> None:
    """Draw a seeded sample of answers for hand-coding, with one empty 0/1 column per theme."""
    import pandas as pd

    from ..coding.review import theme_definitions
    from ..coding.sampling import draw_sample
    from ..errors import InputError
    from ..io.workbook import Sheet, csv_for_spreadsheets_writer, refuse_existing, workbook_writer, write_file
    from ..pipeline import code_survey

    suffix = out_path.suffix.lower()
    if suffix not in (".xlsx", ".csv"):
        raise InputError("the hand-coding sheet must end in .xlsx or .csv", source=out_path)
    refuse_existing(out_path, replace)  # before the work, not only after it
    names = [name.strip() for name in coders.split(",") if name.strip()]
    repeated = sorted({name for name in names if names.count(name) > 1})
    if repeated:
        raise InputError(f"coder '{repeated[0]}' is named twice; give each coder once", option="--coders")
    with steps(6, quiet) as progress:
        survey = code_survey(config, progress=progress, apply_corrections=False)
        progress("drawing the sample")
        chosen_seed = survey.config.seed if seed is None else seed
        sheet, design = draw_sample(survey.coded, survey.texts.tolist(), survey.themes, survey.result.evidence,
                                    n=size, seed=chosen_seed, strata=strata, enrich=enrich, coders=names)
        inputs = [survey.config.path, survey.config.survey, survey.config.corrections, survey.lexicon.source]
        if suffix == ".csv":
            writer = csv_for_spreadsheets_writer(sheet)
        else:
            cells = pd.DataFrame(design["cells"])
            writer = workbook_writer([
                Sheet("answers", sheet, widths={"text": 70, **{t: 6 for t in survey.themes}}, wrap=("text",)),
                Sheet("themes", theme_definitions(survey.lexicon), widths={"description": 60, "terms": 80},
                      wrap=("description", "terms")),
                Sheet("selection", cells),
            ])
        write_file(out_path, writer, inputs=inputs, replace=replace)
    if quiet:
        return
    enriched = f", {enrich:.0%} from uncoded or single-term answers" if enrich else ""
    click.echo(f"drew {design['n']:,} answers (seed {chosen_seed}{enriched}) into {out_path}; "
               "fill each theme column with 1 or 0 (blank = not coded), or none_applies = 1")
    click.echo("then: textkit agreement " + str(out_path) + " --survey " + str(config) + " --out DIR")
    click.echo(_WORKBOOK_NOTE)


@click.command("diff")
@click.argument("old_lexicon", type=click.Path(path_type=Path))
@click.argument("new_lexicon", type=click.Path(path_type=Path))
@click.option("--survey", "config", required=True, type=click.Path(path_type=Path),
              help="The survey to code with both lexicons.")
@click.option("--out", "out_dir", type=OUTPUT_FOLDER, default=None,
              help="Folder for lexicon_diff.csv and lexicon_diff_examples.csv (default: print only).")
@click.option("--examples", default=5, show_default=True, type=click.IntRange(0, 1000),
              help="Gained and lost answers shown per theme.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def lexicon_diff_command(old_lexicon: Path, new_lexicon: Path, config: Path, out_dir: Path | None, examples: int,
                         quiet: bool) -> None:
    """Show what editing OLD_LEXICON into NEW_LEXICON changes on a survey, theme by theme and wave by wave."""
    from ..coding.lexicon import load_lexicon
    from ..coding.lexicon_diff import lexicon_diff
    from ..io.output import csv_writer, file_sha256, write_outputs
    from ..pipeline import code_survey

    old, new = load_lexicon(old_lexicon), load_lexicon(new_lexicon)
    with steps(6, quiet) as progress:
        survey = code_survey(config, lexicon=old, progress=progress, apply_corrections=False)
        progress("coding with the new lexicon")
        weights = survey.coded[survey.config.weight].to_numpy(dtype=float) if survey.config.weight else None
        summary, shown = lexicon_diff(survey.stream, survey.texts.tolist(), survey.coded, old, new, weights=weights,
                                      wave_column=survey.config.wave, n_examples=examples, seed=survey.config.seed)
    if out_dir is not None:
        manifest = {"command": "lexicon diff", "config": {"path": str(config), "sha256": file_sha256(config)},
                    "old_lexicon": {"path": old.source, "sha256": old.sha256},
                    "new_lexicon": {"path": new.source, "sha256": new.sha256}, "seed": survey.config.seed}
        write_outputs(out_dir, {"lexicon_diff.csv": csv_writer(summary, float_format="%.6g"),
                                "lexicon_diff_examples.csv": csv_writer(shown)}, manifest,
                      inputs=[config, old.source, new.source, *survey.input_paths])
    moved = summary[(summary["gained"] > 0) | (summary["lost"] > 0) | (summary["status"] != "")]
    pooled = moved[moved["wave"] == "(all)"] if (moved["wave"] == "(all)").any() else moved
    if pooled.empty:
        click.echo("the two lexicons code this survey identically")
    for row in pooled.itertuples():
        status = f" [{row.status}]" if row.status else ""
        click.echo(f"{row.question} / {row.theme}{status}: +{row.gained} -{row.lost} answers, share "
                   f"{row.old_share:.1%} -> {row.new_share:.1%}"
                   + (f"; gained by {row.terms_gained}" if row.terms_gained else "")
                   + (f"; lost {row.terms_lost}" if row.terms_lost else ""))
    if out_dir is not None:
        click.echo(f"wrote lexicon_diff.csv and lexicon_diff_examples.csv to {out_dir}")
