"""Command line for coding: ``textkit code``, ``textkit lexicon check``, ``textkit agreement``.

Only click is imported here; the coding modules load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click

from .main import OUTPUT_FOLDER, SuggestingGroup, steps


@click.command("code")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for coded.csv, coded.parquet, evidence.csv, coverage.csv, manifest.json.")
@click.option("--lexicon", "lexicon_path", type=click.Path(path_type=Path), default=None,
              help="Use this lexicon instead of the one the config names.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def code_command(config: Path, out_dir: Path, lexicon_path: Path | None, quiet: bool) -> None:
    """Code every answer of the survey described by CONFIG with its theme lexicon."""
    from ..pipeline import code_survey, write_coded

    with steps(6, quiet) as progress:
        survey = code_survey(config, lexicon=lexicon_path, progress=progress)
        progress("writing")
        paths = write_coded(survey, out_dir)
    if quiet:
        return
    for note in survey.notes:
        click.echo(f"note: {note}", err=True)
    counts = survey.manifest["counts"]
    click.echo(f"coded {counts['rows']:,} answers ({counts['responses']:,} responses x "
               f"{len(survey.config.questions)} questions; {counts['answered']:,} answered) "
               f"with {len(survey.themes)} themes of '{survey.lexicon.name}'")
    coverage = survey.coverage
    for question, rows in coverage.groupby("question", sort=False):
        uncoded = rows.loc[rows["theme"] == "(uncoded)", "share"].iloc[0]
        top = rows[rows["theme"] != "(uncoded)"].nlargest(3, "weighted_share")
        listed = ", ".join(f"{r.theme} {r.weighted_share:.0%}" for r in top.itertuples())
        click.echo(f"  {question}: top themes {listed}; answered but uncoded {uncoded:.0%}")
    click.echo(f"wrote {', '.join(p.name for p in paths)} to {out_dir}")
    click.echo("caution: automated coding is an estimate - check the lexicon against a hand-coded "
               "sample before reporting.")


@click.group("lexicon", cls=SuggestingGroup)
def lexicon_group() -> None:
    """Check and inspect theme lexicons."""


@lexicon_group.command("check")
@click.argument("lexicon", type=click.Path(path_type=Path))
@click.option("--survey", "config", type=click.Path(path_type=Path), default=None,
              help="Also code this survey and list terms that never matched and themes with no hits.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def lexicon_check_command(lexicon: Path, config: Path | None, quiet: bool) -> None:
    """Validate LEXICON and print its lint report."""
    from ..coding.lexicon import load_lexicon
    from ..coding.lint import format_lint, lint_lexicon
    from ..errors import LexiconError

    try:
        lex = load_lexicon(lexicon)
    except LexiconError as error:
        problems = getattr(error, "problems", None) or []
        for line, message in problems[1:]:
            where = f"{error.source}:{line}" if line else str(error.source)
            click.echo(f"{where}: {message}", err=True)
        raise
    term_hits = theme_hits = None
    if config is not None:
        from ..pipeline import code_survey

        with steps(5, quiet) as progress:
            survey = code_survey(config, lexicon=lex, progress=progress)
        term_hits = survey.result.term_hits.to_dict()
        theme_hits = dict(zip(survey.themes, map(int, survey.theme_matrix.sum(axis=0).A1), strict=True))
    n_terms = sum(len(t.terms) for t in lex.themes)
    click.echo(f"{lexicon}: valid - {len(lex.themes)} themes, {n_terms} terms (sha256 {lex.sha256[:12]})")
    click.echo(format_lint(lint_lexicon(lex, term_hits=term_hits, theme_hits=theme_hits)))


@click.command("agreement")
@click.argument("hand_coded", type=click.Path(path_type=Path))
@click.option("--lexicon", "lexicon_path", required=True, type=click.Path(path_type=Path),
              help="The lexicon to check.")
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for agreement.csv and disagreements.csv.")
@click.option("--text-column", default="text", show_default=True, help="Column holding the answers.")
@click.option("--codes-column", default="themes", show_default=True,
              help="Column holding the hand codes (theme ids separated by ';').")
@click.option("--quiet", is_flag=True, help="No summary.")
def agreement_command(hand_coded: Path, lexicon_path: Path, out_dir: Path, text_column: str,
                      codes_column: str, quiet: bool) -> None:
    """Compare the lexicon's codes with HAND_CODED answers (precision, recall, F1, kappa)."""
    from ..coding.agreement import compare_with_hand_codes
    from ..coding.lexicon import load_lexicon
    from ..io.output import csv_writer, file_sha256, write_outputs
    from ..io.readers import read_hand_codes

    lexicon = load_lexicon(lexicon_path)
    frame, notes = read_hand_codes(hand_coded, text_column, codes_column, lexicon.ids)
    table, disagreements = compare_with_hand_codes(frame[text_column].tolist(), frame[codes_column].tolist(),
                                                   lexicon, source=str(hand_coded))
    manifest = {"command": "agreement",
                "hand_coded": {"path": str(hand_coded), "sha256": file_sha256(hand_coded)},
                "lexicon": {"path": lexicon.source, "sha256": lexicon.sha256}, "notes": notes}
    write_outputs(out_dir, {"agreement.csv": csv_writer(table, float_format="%.4f"),
                            "disagreements.csv": csv_writer(disagreements)}, manifest,
                  inputs=[hand_coded, lexicon_path])
    if quiet:
        return
    overall = table.iloc[-1]
    click.echo(f"{len(frame)} hand-coded answers: precision {overall.precision:.2f}, recall "
               f"{overall.recall:.2f}, F1 {overall.f1:.2f}, kappa {overall.kappa:.2f} over all theme decisions")
    weak = table[(table["theme"] != "(all)") & (table["hand"] >= 5) & (table["f1"].fillna(0) < 0.7)]
    for row in weak.itertuples():
        click.echo(f"  weak: {row.theme} (hand {row.hand}, machine {row.machine}, F1 {row.f1:.2f})")
    click.echo(f"wrote agreement.csv and disagreements.csv ({len(disagreements)} answers differ) to {out_dir}")
