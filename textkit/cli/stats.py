"""Command line for survey statistics: ``textkit prevalence``.

Only click is imported at module level; pandas, scipy and statsmodels load inside
the command. Errors a user can cause are raised as
:class:`textkit.errors.TextkitError` and left to propagate: the group command in
``textkit/cli/main.py`` prints them as one line on stderr and exits with status 2.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from .main import OUTPUT_FOLDER

#: Decimals of shares, SEs and intervals in the CSV files (Parquet keeps full precision).
CSV_DECIMALS = 4


def _load_coded(source: Path, quiet: bool) -> tuple[Any, dict, list[str], dict, dict]:
    """(coded frame, roles, themes, input record, extras) from a coded folder, coded file or config.

    ``extras`` holds ``labels`` (theme -> label), ``nets`` and ``question_text`` when known.
    """
    if source.suffix.lower() in (".yaml", ".yml"):
        from ..pipeline import code_survey
        from .main import steps

        with steps(5, quiet) as progress:
            survey = code_survey(source, progress=progress)
        extras = {"labels": {t.id: t.label for t in survey.lexicon.themes},
                  "nets": dict(survey.config.nets), "question_text": dict(survey.config.question_text)}
        return survey.coded, survey.roles, list(survey.themes), {"config": str(source)}, extras
    from ..io.output import file_sha256
    from ..pipeline import load_coded

    frame, manifest, data_path = load_coded(source)
    record = {"coded": {"path": str(data_path), "sha256": file_sha256(data_path)}}
    roles = dict(manifest["roles"])
    extras = {"labels": dict(manifest.get("labels") or _labels_from_coverage(data_path.parent)),
              "nets": dict(roles.get("nets") or {}), "question_text": dict(roles.get("question_text") or {})}
    return frame, roles, list(manifest["themes"]), record, extras


def _labels_from_coverage(folder: Path) -> dict[str, str]:
    """Theme labels from the coverage.csv that ``textkit code`` writes beside the coded table."""
    import pandas as pd

    path = folder / "coverage.csv"
    if not path.exists():
        return {}
    coverage = pd.read_csv(path, usecols=["theme", "label"], dtype=str, encoding="utf-8-sig")
    return dict(zip(coverage["theme"], coverage["label"], strict=True))


def _choose(values: tuple[str, ...], known: list[str], what: str) -> list[str]:
    from ..errors import AnalysisError

    for value in values:
        if value not in known:
            raise AnalysisError(f"unknown {what} '{value}'; choose from: {', '.join(known)}")
    return list(values)


def _rounded(table: Any) -> Any:
    """The CSV view: shares, SEs and intervals to 4 decimals, counts and df as whole numbers."""
    import numpy as np

    table = table.copy()
    for column in table.columns:
        if column in ("n", "n_raising", "df", "n_groups", "chi2_df"):
            table[column] = table[column].round().astype("Int64")
        elif column in ("weighted_n", "n_eff", "total", "total_se", "total_ci_low", "total_ci_high"):
            table[column] = table[column].round(1)
        elif table[column].dtype.kind == "f" and not column.endswith(("p_value", "q_value")):
            table[column] = table[column].round(CSV_DECIMALS)
    return table.replace([np.inf, -np.inf], np.nan)


def _csv(frame: Any, encoding: str) -> Any:
    from ..io.output import csv_writer

    return csv_writer(frame, encoding=encoding)


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
              help="Folder for prevalence.csv/.parquet, comparisons.csv, group_tests.csv and manifest.json.")
@click.option("--by", "by", multiple=True, metavar="VAR",
              help="Group variable (repeatable); VAR1*VAR2 crosses two. Default: the config's groups.")
@click.option("--question", "questions", multiple=True, metavar="NAME", help="Only this question (repeatable).")
@click.option("--theme", "themes", multiple=True, metavar="ID", help="Only this theme or net (repeatable).")
@click.option("--wave", "waves", multiple=True, metavar="WAVE", help="Only this wave (repeatable).")
@click.option("--base", type=click.Choice(["answered", "all"]), default="answered", show_default=True,
              help="Share of those who answered the question, or of all respondents.")
@click.option("--totals", is_flag=True,
              help="Add the estimated number raising each theme (when weights sum to a population).")
@click.option("--family", type=click.Choice(["question-variable", "table"]), default="question-variable",
              show_default=True, help="Benjamini-Hochberg family for q-values.")
@click.option("--drop-missing-wave", is_flag=True,
              help="Leave out responses without a wave value (counted in the manifest) instead of refusing.")
@click.option("--method", default=None, metavar="NAME",
              help="Interval method: korn-graubard (default), logit or wilson.")
@click.option("--confidence", default=0.95, show_default=True,
              type=click.FloatRange(0, 1, min_open=True, max_open=True), help="Confidence level.")
@click.option("--rule", "rule_name", default=None, metavar="NAME",
              help="Publishing rule: base-width (default), rse-25-50 or rse-16-33.")
@click.option("--min-base", type=click.IntRange(min=0), default=None,
              help="Override the rule: unweighted base below this is suppressed.")
@click.option("--caution-rse", type=click.FloatRange(min=0, min_open=True), default=None,
              help="Override the rule: relative SE at or above this (e.g. 0.3) is flagged caution.")
@click.option("--encoding", default="utf-8-sig", show_default=True,
              help="Text encoding of the CSV files (utf-8-sig: UTF-8 with a BOM, read correctly by "
                   "spreadsheet software on every platform).")
@click.option("--layout", type=click.Choice(["long", "wide"]), default="long", show_default=True,
              help="wide also writes prevalence_wide.csv: themes down, groups across, percentages, "
                   "suppressed cells blank, caution and significance marks, footnotes.")
@click.option("--reference", default=None, metavar="GROUP",
              help="With --layout wide: mark differences against this group (VAR=GROUP if ambiguous) "
                   "instead of against the rest of the sample.")
@click.option("--coder-error-from", "coder_error_from", type=click.Path(path_type=Path), default=None,
              metavar="HAND_CODES", help="Also correct each theme's prevalence for the coder's sensitivity and "
              "specificity on these hand codes (Rogan-Gladen), beside the raw one in coder_corrected.csv.")
@click.option("--quiet", is_flag=True, help="Print nothing on success.")
def prevalence_command(coded_or_config: Path, out_dir: Path, by: tuple[str, ...], questions: tuple[str, ...],
                       themes: tuple[str, ...], waves: tuple[str, ...], base: str, totals: bool, family: str,
                       drop_missing_wave: bool, method: str | None, confidence: float, rule_name: str | None,
                       min_base: int | None, caution_rse: float | None, encoding: str, layout: str,
                       reference: str | None, coder_error_from: Path | None,
                       quiet: bool) -> None:
    """Weighted theme prevalence by group and wave, with comparisons and tests.

    CODED_OR_CONFIG is a folder written by 'textkit code' (coded.parquet and
    manifest.json), its coded.parquet, or a survey config YAML (coded first).
    Weight and design columns come from the config (a column it names but the
    data lacks is refused). CSV files are rounded (shares to 4 decimals, counts
    as whole numbers); prevalence.parquet keeps full precision.
    """
    import codecs
    import dataclasses

    from ..errors import AnalysisError
    from ..io.output import parquet_writer, write_outputs
    from ..stats.design import SurveyDesign
    from ..stats.estimate import DEFAULT_METHOD, analyse
    from ..stats.estimate import drop_missing_wave as without_missing_wave

    rule = _rule(rule_name, min_base, caution_rse)
    if reference is not None and layout != "wide":
        raise AnalysisError("--reference applies to the wide layout; add --layout wide")
    try:
        codecs.lookup(encoding)
    except LookupError:
        raise AnalysisError(f"unknown text encoding '{encoding}' (--encoding); try utf-8-sig or utf-8") from None
    coded, roles, all_themes, record, extras = _load_coded(coded_or_config, quiet)
    _require_design_columns(coded, roles)
    nets = extras["nets"]
    chosen = _choose(themes, [*all_themes, *nets], "theme or net (--theme)") if themes else all_themes
    theme_list = [t for t in chosen if t not in nets]
    net_map = {name: members for name, members in nets.items() if not themes or name in chosen}
    source = str(record.get("coded", {}).get("path", coded_or_config))
    id_column = "response_id" if "response_id" in coded.columns else roles.get("id")
    coded, dropped = without_missing_wave(coded, roles.get("wave"), id_column or "response_id",
                                       drop=drop_missing_wave)
    design = SurveyDesign.from_roles(coded, roles, id=id_column, source=source)
    groups = list(by) if by else list(roles.get("groups") or [])
    analysis = analyse(coded, theme_list, design, groups=groups, wave=roles.get("wave"), id_column=id_column,
                       method=method or DEFAULT_METHOD, confidence=confidence, rule=rule,
                       questions=list(questions) or None, waves=list(waves) or None, nets=net_map, base=base,
                       totals=totals, labels={**extras["labels"], **{n: n for n in net_map}},
                       question_text=extras["question_text"], family=family)
    table = analysis.prevalence()
    comparisons = analysis.comparisons()
    tests = analysis.group_tests()
    manifest = {
        "command": "prevalence",
        "inputs": record,
        "roles": roles,
        "themes": [*theme_list, *net_map],
        "nets": net_map,
        "settings": {"method": method or DEFAULT_METHOD, "confidence": confidence, "groups": groups,
                     "questions": list(questions), "waves": list(waves), "base": base, "totals": totals,
                     "family": family, "encoding": encoding, "rule": dataclasses.asdict(rule),
                     "csv_decimals": CSV_DECIMALS},
        "design": {"strata": design.n_strata, "psus": design.n_psus, "df": design.df,
                   "one_cluster_stratum": design.one_cluster_stratum},
        "dropped_responses_missing_wave": dropped,
        "counts": {"prevalence": len(table), "comparisons": len(comparisons), "group_tests": len(tests)},
    }
    files = {"prevalence.csv": _csv(_rounded(table), encoding),
             "prevalence.parquet": parquet_writer(table.astype({"wave": str, "group": str})),
             "comparisons.csv": _csv(_rounded(comparisons), encoding),
             "group_tests.csv": _csv(_rounded(tests), encoding)}
    if layout == "wide":
        from ..stats.crosstab import crosstab

        wide = crosstab(table, comparisons, reference=reference, base=base, rule_name=rule.name)
        try:
            wide_bytes = wide.csv_text().encode(encoding)
        except UnicodeEncodeError:
            raise AnalysisError(f"the wide table's marks or labels cannot be written in '{encoding}' "
                                "(--encoding); use utf-8-sig or utf-8") from None
        files["prevalence_wide.csv"] = lambda path: Path(path).write_bytes(wide_bytes)
        manifest["settings"].update(layout="wide", reference=reference)
    extra_notes = []
    if coder_error_from is not None:
        from .learn import coder_error_files

        extra_files, manifest["coder_error"], extra_notes = coder_error_files(
            coder_error_from, coded_or_config, coded, theme_list, table, confidence, encoding)
        files.update(extra_files)
    write_outputs(out_dir, files, manifest, inputs=_inputs(coded_or_config, record))
    if not quiet:
        flags = table["flag"].value_counts()
        left_out = f"; {dropped} response(s) without a wave left out" if dropped else ""
        click.echo(f"{len(table)} estimates ({flags.get('ok', 0)} ok, {flags.get('caution', 0)} caution, "
                   f"{flags.get('suppress', 0)} suppress), {len(comparisons)} comparisons, "
                   f"{len(tests)} group tests -> {out_dir}{left_out}")
        for note in extra_notes:
            click.echo(f"note: {note}", err=True)


def _rule(rule_name: str | None, min_base: int | None, caution_rse: float | None) -> Any:
    import dataclasses

    from ..errors import AnalysisError
    from ..stats.estimate import DEFAULT_RULE, RULES

    if rule_name is None:
        rule = DEFAULT_RULE
    elif rule_name in RULES:
        rule = RULES[rule_name]
    else:
        raise AnalysisError(f"unknown rule '{rule_name}' (--rule); choose one of {', '.join(RULES)}")
    if min_base is not None:
        rule = dataclasses.replace(rule, min_n=min_base)
    if caution_rse is not None:
        rule = dataclasses.replace(rule, caution_rse=caution_rse)
    return rule


def _require_design_columns(coded: Any, roles: dict) -> None:
    """Refuse, in one line, weight or design columns that the config names but the data lacks."""
    from ..errors import AnalysisError

    for role in ("weight", "strata", "cluster", "fpc", "wave"):
        column = roles.get(role)
        if column is not None and column not in coded.columns:
            raise AnalysisError(f"the {role} column '{column}' named in the config is not in the data; "
                                "prevalence needs every design column (coding does not)", column=column)
