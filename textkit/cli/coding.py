"""Command line for coding: ``textkit code``, ``textkit lexicon check``/``forms``, ``textkit agreement``.

Only click is imported here; the coding modules load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click

from .main import OUTPUT_FOLDER, SuggestingGroup, steps
from .review import lexicon_diff_command


@click.command("code")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for coded.csv, coded.parquet, evidence.csv, coverage.csv, manifest.json.")
@click.option("--lexicon", "lexicon_path", type=click.Path(path_type=Path), default=None,
              help="Use this lexicon instead of the one the config names.")
@click.option("--topics", "topics", is_flag=True,
              help="Also add NMF topic columns (topic_01 ...) found in what the lexicon leaves unexplained.")
@click.option("--coder", "coder_path", type=click.Path(path_type=Path), default=None,
              help="A coder written by 'textkit train': code with it (see --mode).")
@click.option("--mode", type=click.Choice(["combined", "model", "lexicon"]), default="combined", show_default=True,
              help="With --coder: per theme the better of lexicon, model or their union (combined), the model "
                   "wherever it has one, or the lexicon alone.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def code_command(config: Path, out_dir: Path, lexicon_path: Path | None, topics: bool, coder_path: Path | None,
                 mode: str, quiet: bool) -> None:
    """Code every answer of the survey described by CONFIG with its theme lexicon (or a trained coder)."""
    from ..pipeline import code_survey, find_survey_topics, with_topics, write_coded

    with steps(7 if topics else 6, quiet) as progress:
        # coding uses no weight or design column: one the data lacks is a warning here
        survey = (code_survey(config, lexicon=lexicon_path, progress=progress, missing_design="drop")
                  if coder_path is None else _code_with_coder(config, lexicon_path, coder_path, mode, progress))
        if topics:
            progress("finding topics")
            survey = with_topics(survey, find_survey_topics(survey))
        progress("writing")
        paths = write_coded(survey, out_dir)
    for note in survey.notes:
        if note.startswith("warning: "):
            click.echo(note, err=True)
    if quiet:
        return
    for note in survey.notes:
        if not note.startswith("warning: "):
            click.echo(f"note: {note}", err=True)
    counts = survey.manifest["counts"]
    click.echo(f"coded {counts['rows']:,} answers ({counts['responses']:,} responses x "
               f"{len(survey.config.questions)} questions; {counts['answered']:,} answered) "
               f"with {len(survey.themes)} themes of '{survey.lexicon.name}'")
    coverage = survey.coverage
    for question, rows in coverage.groupby("question", sort=False):
        uncoded = rows.loc[rows["theme"] == "(uncoded)", "share"].iloc[0]
        nothing = rows.loc[rows["theme"] == "(nothing to report)", "share"].iloc[0]
        top = rows[~rows["theme"].str.startswith("(")].nlargest(3, "weighted_share")
        listed = ", ".join(f"{r.theme} {r.weighted_share:.0%}" for r in top.itertuples())
        click.echo(f"  {question}: top themes {listed}; nothing to report {nothing:.0%}; "
                   f"answered but uncoded {uncoded:.0%}")
    click.echo(f"wrote {', '.join(p.name for p in paths)} to {out_dir}")
    click.echo("caution: automated coding is an estimate - check the lexicon against a hand-coded "
               "sample before reporting.")


def _code_with_coder(config: Path, lexicon_path: Path | None, coder_path: Path, mode: str, progress):
    from ..errors import InputError
    from ..pipeline import code_survey_with_coder

    if lexicon_path is not None:
        raise InputError("--lexicon and --coder cannot be combined: a coder is tied to the lexicon it was "
                         "trained with", option="--coder")
    return code_survey_with_coder(config, coder_path, mode=mode, progress=progress)


@click.group("lexicon", cls=SuggestingGroup)
def lexicon_group() -> None:
    """Check and inspect theme lexicons."""


lexicon_group.add_command(lexicon_diff_command)


@lexicon_group.command("check")
@click.argument("lexicon", type=click.Path(path_type=Path))
@click.option("--survey", "config", type=click.Path(path_type=Path), default=None,
              help="Also code this survey: summary of terms and themes that matched nothing.")
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=None,
              help="With --survey: folder for term-hits.csv (per term: hits, answers, example matches).")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def lexicon_check_command(lexicon: Path, config: Path | None, out_dir: Path | None, quiet: bool) -> None:
    """Validate LEXICON and print its lint report."""
    from ..coding.lexicon import load_lexicon
    from ..coding.lint import format_lint, lint_lexicon
    from ..errors import InputError, LexiconError

    if out_dir is not None and config is None:
        raise InputError("--out needs --survey: the per-term table counts matches in a survey")
    try:
        lex = load_lexicon(lexicon)
    except LexiconError as error:
        problems = getattr(error, "problems", None) or []
        for line, message in problems[1:]:
            where = f"{error.source}:{line}" if line else str(error.source)
            click.echo(f"{where}: {message}", err=True)
        raise
    n_terms = sum(len(t.terms) for t in lex.themes)
    click.echo(f"{lexicon}: valid - {len(lex.themes)} themes, {n_terms} terms (sha256 {lex.sha256[:12]})")
    if config is None:
        click.echo(format_lint(lint_lexicon(lex)))
        return
    from ..pipeline import code_survey, term_hit_table

    with steps(5, quiet) as progress:
        survey = code_survey(config, lexicon=lex, progress=progress)
    table = term_hit_table(survey)
    theme_hits = dict(zip(survey.themes, map(int, survey.theme_matrix.sum(axis=0).A1), strict=True))
    lint = lint_lexicon(lex, theme_hits=theme_hits)
    unused = int((table["hits"] == 0).sum())
    click.echo(f"on {config}: {n_terms - unused:,} of {n_terms:,} terms matched at least one answer; "
               f"{unused:,} matched none; {sum(1 for v in theme_hits.values() if not v)} themes coded "
               "no response")
    if out_dir is not None:
        from ..io.output import csv_writer, write_outputs

        manifest = {"command": "lexicon check", "lexicon": survey.manifest.get("lexicon"),
                    "config": survey.manifest.get("config"), "survey": survey.manifest.get("survey")}
        write_outputs(out_dir, {"term-hits.csv": csv_writer(table)}, manifest)
        click.echo(f"wrote term-hits.csv (every term: hits, answers, example matches) to {out_dir}")
    else:
        click.echo("add --out DIR to write every term's hits, answers and example matches to a table")
    click.echo(format_lint(lint))


@lexicon_group.command("forms")
@click.argument("lexicon", type=click.Path(path_type=Path))
@click.option("--survey", "config", type=click.Path(path_type=Path), default=None,
              help="List the forms that occur in this survey's answers instead of the dictionary's "
                   "(needed for languages other than English and for 'inflect: stem' terms).")
@click.option("--out", "out_path", type=click.Path(path_type=Path), default=None,
              help="Write the table (theme, term, line, exclusion, word, form) to this .csv file.")
@click.option("--quiet", is_flag=True, help="No progress bar and no listing.")
def lexicon_forms_command(lexicon: Path, config: Path | None, out_path: Path | None, quiet: bool) -> None:
    """List the other word forms each term of LEXICON matches through inflection.

    Read it term by term: a form whose sense lies outside the theme ("parks" under a
    parking theme) is a reason to write the term as {term: X, inflect: false}.
    """
    from ..coding.forms import inflected_forms
    from ..coding.lexicon import load_lexicon
    from ..errors import InputError
    from ..text.inflect import base_language

    if out_path is not None and out_path.suffix.lower() != ".csv":
        raise InputError("the forms table is written as CSV; give a file name ending in .csv", source=out_path,
                         option="--out")
    lex = load_lexicon(lexicon)
    inputs = [lexicon, config]
    vocabulary = None
    if config is not None:
        from ..pipeline import code_survey

        with steps(5, quiet) as progress:
            survey = code_survey(config, lexicon=lex, progress=progress, apply_corrections=False,
                                 missing_design="drop")
        vocabulary = survey.stream.vocabulary.tolist()
        inputs += survey.input_paths
    table = inflected_forms(lex, vocabulary)
    if out_path is not None:
        from ..io.output import csv_writer
        from ..io.workbook import write_file

        write_file(out_path, csv_writer(table), inputs=inputs)
    for note in _forms_notes(lex, config is not None, base_language(lex.language)):
        click.echo(f"note: {note}", err=True)
    if quiet:
        return
    if out_path is None:
        for (theme, term, exclusion), rows in table.groupby(["theme", "term", "exclusion"], sort=False):
            listed = "; ".join(f"{word}: {', '.join(group['form'])}"
                               for word, group in rows.groupby("word", sort=False))
            mark = " (exclusion)" if exclusion else ""
            click.echo(f"{theme} / {term}{mark} [line {rows['line'].iloc[0]}]: {listed}")
    where = f"in {config}" if config is not None else "in the dictionary"
    terms = table[["theme", "term", "exclusion"]].drop_duplicates()
    click.echo(f"{len(table):,} forms {where} for {len(terms):,} terms of '{lex.name}'"
               + (f"; wrote {out_path}" if out_path is not None else ""))


def _forms_notes(lex, from_survey: bool, language: str) -> list[str]:
    """What the forms listing leaves out, one note a reason."""
    notes = []
    if not from_survey and language != "en":
        notes.append(f"forms of '{language}' words cannot be generated from the dictionary; "
                     "add --survey CONFIG to list those in its answers")
    n_stem = sum(term.inflect == "stem" for theme in lex.themes for term in (*theme.terms, *theme.exclusions))
    if n_stem and not from_survey:
        notes.append(f"{n_stem} 'inflect: stem' terms are not listed (a stem also matches derived words); "
                     "add --survey CONFIG to list the forms in its answers")
    return notes


@click.command("agreement")
@click.argument("hand_coded", type=click.Path(path_type=Path))
@click.option("--lexicon", "lexicon_path", type=click.Path(path_type=Path), default=None,
              help="The lexicon to check (default: the one the --survey config names).")
@click.option("--survey", "config", type=click.Path(path_type=Path), default=None,
              help="Survey config: check every hand-coded id is in it and take the answers' text from it.")
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for agreement.csv, disagreements.csv (and coder_alpha.csv, coder_pairs.csv).")
@click.option("--sheet", default=None, help="Workbook sheet holding the codes (default: the first).")
@click.option("--text-column", default="text", show_default=True, help="Column holding the answers.")
@click.option("--codes-column", default="themes", show_default=True,
              help="Long form: column holding the hand codes (theme ids separated by ';').")
@click.option("--resamples", default=1000, show_default=True, type=click.IntRange(0, 100_000),
              help="Bootstrap resamples for the 95% intervals (0: none).")
@click.option("--seed", default=0, show_default=True, type=int, help="Seed of the bootstrap.")
@click.option("--quiet", is_flag=True, help="No summary.")
def agreement_command(hand_coded: Path, lexicon_path: Path | None, config: Path | None, out_dir: Path,
                      sheet: str | None, text_column: str, codes_column: str, resamples: int, seed: int,
                      quiet: bool) -> None:
    """Compare the lexicon's codes with HAND_CODED answers, and hand coders with each other.

    HAND_CODED is a CSV or workbook: the wide sheet 'textkit sample' writes (one 0/1 column
    per theme, blank = not coded) or the long form (theme ids joined by ';' in one column).
    """
    from ..coding.agreement import evaluate_hand_codes
    from ..coding.handcodes import check_ids_in_survey, hand_codes_from_frame
    from ..coding.lexicon import load_lexicon
    from ..errors import InputError
    from ..io.output import csv_writer, file_sha256, write_outputs
    from ..io.readers import check_hand_code_ids
    from ..io.workbook import read_coding_file

    if lexicon_path is None and config is None:
        raise InputError("give --lexicon or --survey (whose config names the lexicon)", option="--lexicon")
    part = read_coding_file(hand_coded, sheets=[sheet] if sheet else ())[0]
    check_hand_code_ids(part.frame, codes_column, part.place)
    texts = None
    if config is not None:
        from ..pipeline import code_survey

        survey = code_survey(config, lexicon=lexicon_path, apply_corrections=False)
        lexicon = survey.lexicon
        hand = hand_codes_from_frame(part.frame, lexicon, part.place, codes_column=codes_column,
                                     text_column=text_column)
        check_ids_in_survey(hand, survey.coded, part.place)
        texts = survey.text_lookup(hand.keys)
    else:
        lexicon = load_lexicon(lexicon_path)
        hand = hand_codes_from_frame(part.frame, lexicon, part.place, codes_column=codes_column,
                                     text_column=text_column)
        if text_column not in part.frame.columns:
            raise InputError(f"no column '{text_column}' with the answers; add it or give --survey",
                             source=part.place, column=text_column)
    report = evaluate_hand_codes(hand, lexicon, texts=texts, n_resamples=resamples, seed=seed)
    files = {"agreement.csv": csv_writer(report.table, float_format="%.4f"),
             "disagreements.csv": csv_writer(report.disagreements)}
    if len(report.coders) > 1:
        files["coder_alpha.csv"] = csv_writer(report.alpha, float_format="%.4f")
        files["coder_pairs.csv"] = csv_writer(report.pairs, float_format="%.4f")
    manifest = {"command": "agreement",
                "hand_coded": {"path": str(hand_coded), "sha256": file_sha256(hand_coded), "sheet": part.sheet},
                "lexicon": {"path": lexicon.source, "sha256": lexicon.sha256},
                "settings": {"resamples": resamples, "seed": seed}, "coders": report.coders,
                "notes": report.notes}
    write_outputs(out_dir, files, manifest, inputs=[hand_coded, lexicon_path, config, lexicon.source])
    if quiet:
        return
    for note in report.notes:
        click.echo(f"note: {note}", err=True)
    micro = report.table.set_index("theme").loc["(micro)"]
    click.echo(f"{len(hand.keys)} hand-coded rows: precision {micro.precision:.2f}, recall {micro.recall:.2f}, "
               f"F1 {micro.f1:.2f}, kappa {micro.kappa:.2f} over all theme decisions")
    themes = report.table[~report.table["theme"].str.startswith("(")]
    weak = themes[(themes["hand"] >= 5) & (themes["f1"].fillna(0) < 0.7)]
    for row in weak.itertuples():
        click.echo(f"  weak: {row.theme} (hand {row.hand}, machine {row.machine}, F1 {row.f1:.2f})")
    for row in report.alpha.itertuples():
        if row.units and row.alpha == row.alpha and row.alpha < 0.667:
            click.echo(f"  coders disagree on {row.theme}: alpha {row.alpha:.2f} over {row.units} answers")
    click.echo(f"wrote {', '.join(sorted(files))} ({len(report.disagreements)} answers differ) to {out_dir}")
