"""Command line for survey statistics: ``textkit prevalence``.

Only click is imported at module level; pandas, scipy and statsmodels load inside
the command. Errors a user can cause are raised as
:class:`textkit.errors.TextkitError` and left to propagate: the group command in
``textkit/cli.py`` prints them as one line on stderr and exits with status 2.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from .main import OUTPUT_FOLDER


def _load_coded(source: Path, quiet: bool) -> tuple[Any, dict, list[str], dict]:
    """(coded frame, roles, themes, input record) from a coded folder, coded file or config."""
    if source.suffix.lower() in (".yaml", ".yml"):
        from ..pipeline import code_survey
        from .main import steps

        with steps(5, quiet) as progress:
            survey = code_survey(source, progress=progress)
        return survey.coded, survey.roles, list(survey.themes), {"config": str(source)}
    from ..io.output import file_sha256
    from ..pipeline import load_coded

    frame, manifest, data_path = load_coded(source)
    record = {"coded": {"path": str(data_path), "sha256": file_sha256(data_path)}}
    return frame, dict(manifest["roles"]), list(manifest["themes"]), record


def _inputs(source: Path, record: dict) -> list:
    """Every file and folder the result is read from (the writer refuses to replace any)."""
    found = [source, record.get("coded", {}).get("path")]
    if source.is_dir() or source.suffix.lower() not in (".yaml", ".yml"):
        folder = source if source.is_dir() else source.parent
        found.append(folder / "manifest.json")
    return found


@click.command("prevalence")
@click.argument("coded_or_config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for prevalence.csv, comparisons.csv, group_tests.csv and manifest.json.")
@click.option("--method", default=None, metavar="NAME",
              help="Interval method: korn-graubard (default, alias beta), logit or wilson.")
@click.option("--confidence", default=0.95, show_default=True,
              type=click.FloatRange(0, 1, min_open=True, max_open=True), help="Confidence level.")
@click.option("--rule", "rule_name", default=None, metavar="NAME",
              help="Publishing rule: nchs-like (default), abs-like or statcan-like.")
@click.option("--min-base", type=click.IntRange(min=0), default=None,
              help="Override the rule: unweighted base below this is suppressed.")
@click.option("--caution-rse", type=click.FloatRange(min=0, min_open=True), default=None,
              help="Override the rule: relative SE at or above this (e.g. 0.3) is flagged caution.")
@click.option("--quiet", is_flag=True, help="Print nothing on success.")
def prevalence_command(coded_or_config: Path, out_dir: Path, method: str | None, confidence: float,
                       rule_name: str | None, min_base: int | None, caution_rse: float | None,
                       quiet: bool) -> None:
    """Weighted theme prevalence by group and wave, with comparisons and tests.

    CODED_OR_CONFIG is a folder written by 'textkit code' (coded.parquet and
    manifest.json), its coded.parquet, or a survey config YAML (coded first).
    """
    import dataclasses

    from ..errors import AnalysisError
    from ..io.output import csv_writer, write_outputs
    from ..stats.design import SurveyDesign
    from ..stats.estimate import DEFAULT_METHOD, DEFAULT_RULE, RULES, analyse

    if rule_name is None:
        rule = DEFAULT_RULE
    elif rule_name in RULES:
        rule = RULES[rule_name]
    else:
        raise AnalysisError(f"unknown rule '{rule_name}'; choose one of {', '.join(RULES)}")
    if min_base is not None:
        rule = dataclasses.replace(rule, min_n=min_base)
    if caution_rse is not None:
        rule = dataclasses.replace(rule, caution_rse=caution_rse)

    coded, roles, themes, record = _load_coded(coded_or_config, quiet)
    source = str(record.get("coded", {}).get("path", coded_or_config))
    id_column = "response_id" if "response_id" in coded.columns else roles.get("id")
    design = SurveyDesign.from_frame(
        coded, roles.get("weight"), roles.get("strata"), roles.get("cluster"), roles.get("fpc"),
        roles.get("single_psu") or "error", wave=roles.get("wave"), id=id_column,
        nest=bool(roles.get("nest", False)), require_clusters=bool(roles.get("require_clusters", False)),
        source=source)
    analysis = analyse(coded, themes, design, groups=list(roles.get("groups") or []), wave=roles.get("wave"),
                       id_column=id_column, method=method or DEFAULT_METHOD, confidence=confidence, rule=rule)
    table = analysis.prevalence()
    comparisons = analysis.comparisons()
    tests = analysis.group_tests()
    manifest = {
        "command": "prevalence",
        "inputs": record,
        "roles": roles,
        "themes": themes,
        "settings": {"method": method or DEFAULT_METHOD, "confidence": confidence,
                     "rule": dataclasses.asdict(rule)},
        "design": {"strata": design.n_strata, "psus": design.n_psus, "df": design.df,
                   "single_psu": design.single_psu},
        "counts": {"prevalence": len(table), "comparisons": len(comparisons), "group_tests": len(tests)},
    }
    write_outputs(out_dir, {"prevalence.csv": csv_writer(table), "comparisons.csv": csv_writer(comparisons),
                            "group_tests.csv": csv_writer(tests)}, manifest, inputs=_inputs(coded_or_config, record))
    if not quiet:
        flags = table["flag"].value_counts()
        click.echo(f"{len(table)} estimates ({flags.get('ok', 0)} ok, {flags.get('caution', 0)} caution, "
                   f"{flags.get('suppress', 0)} suppress), {len(comparisons)} comparisons, "
                   f"{len(tests)} group tests -> {out_dir}")
