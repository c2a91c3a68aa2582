"""Command line for keyness (``textkit keyness``) and lexicon suggestions (``textkit suggest``).

Only click is imported here; the analysis modules load inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click

from .main import OUTPUT_FOLDER

#: Columns of ``coded`` that are never group variables.
_NOT_GROUPS = {"question", "answered", "n_themes", "nothing_to_report", "uncoded"}


def _load(source: Path, quiet: bool, total: int):
    """The coded survey from a config, or from a folder (or coded file) written by ``textkit code``.

    A coded folder is traced back through its manifest to the config and lexicon it was coded
    from (the texts live there); both must be unchanged since (same SHA-256), else the run stops.
    """
    from ..pipeline import code_survey
    from .main import steps

    config, lexicon = source, None
    if source.suffix.lower() not in (".yaml", ".yml"):
        config, lexicon, expected = _coded_origin(source)
    with steps(total, quiet) as progress:
        survey = code_survey(config, lexicon=lexicon, progress=progress)
        progress("counting terms")
    if lexicon is not None:
        _check_unchanged(source, survey, expected)
    return survey


def _coded_origin(source: Path):
    from ..errors import InputError
    from ..pipeline import load_coded

    _, manifest, data_path = load_coded(source)
    config = Path(str((manifest.get("config") or {}).get("path", "")))
    lexicon = Path(str((manifest.get("lexicon") or {}).get("path", "")))
    for what, path in (("config", config), ("lexicon", lexicon)):
        if not str(path) or not path.exists():
            raise InputError(f"the coded table's manifest names the {what} '{path}', which is not there; run "
                             "this command on the survey config instead", source=data_path.parent / "manifest.json")
    return config, lexicon, manifest


def _check_unchanged(source: Path, survey, expected: dict) -> None:
    from ..errors import InputError

    for what in ("survey", "lexicon"):
        before = (expected.get(what) or {}).get("sha256")
        if before and before != survey.manifest[what]["sha256"]:
            raise InputError(f"the {what} changed since it was coded (SHA-256 differs from the manifest); "
                             "code it again with 'textkit code' or pass the survey config", source=source)


def _questions(survey, requested: tuple[str, ...]) -> list[str]:
    from ..errors import AnalysisError

    known = list(survey.roles["questions"])
    for question in requested:
        if question not in known:
            raise AnalysisError(f"the survey has no question '{question}' (questions: {', '.join(known)})")
    return list(dict.fromkeys(requested)) or known


def _weights(survey, unweighted: bool):
    weight = survey.roles.get("weight")
    if unweighted or not weight:
        return None
    return survey.coded[weight].to_numpy(dtype=float)


def _group_variables(survey, requested: tuple[str, ...]) -> tuple[list[str], str | None]:
    from ..errors import AnalysisError

    roles = survey.roles
    wave = roles.get("wave")
    configured = list(dict.fromkeys([*roles.get("groups", []), *([wave] if wave else [])]))
    allowed = [c for c in survey.coded.columns
               if c not in _NOT_GROUPS and c not in survey.themes and not str(c).startswith("topic_")]
    for variable in requested:
        if variable not in allowed:
            listed = ", ".join(configured) or "none configured"
            raise AnalysisError(f"the data has no group variable '{variable}' (group variables: {listed})",
                                column=variable)
    by = list(dict.fromkeys(requested)) or configured
    if not by:
        raise AnalysisError("the survey config names no group or wave columns; pass --by COLUMN")
    return by, wave


def _pairs(survey, by: list[str], pairs: tuple[tuple[str, str], ...]) -> list[tuple[str, str, str]]:
    from ..errors import AnalysisError

    resolved = []
    for group, reference in pairs:
        holders = [v for v in by if group in set(survey.coded[v].dropna().astype(str))]
        if not holders:
            raise AnalysisError(f"no group variable among {', '.join(by)} has a group '{group}'")
        resolved.extend((variable, group, reference) for variable in holders)
    return resolved


@click.command("keyness")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for keyness.csv and manifest.json.")
@click.option("--by", "by", multiple=True, metavar="GROUP_VAR",
              help="Group variable to compare (repeatable); default every group variable and the wave.")
@click.option("--question", "questions", multiple=True, metavar="NAME",
              help="Only this question (repeatable); default every question.")
@click.option("--theme", "themes", multiple=True, metavar="THEME",
              help="Also compare the groups within the answers coded with THEME (repeatable).")
@click.option("--pair", "pairs", nargs=2, multiple=True, metavar="GROUP REFERENCE",
              help="Also compare GROUP with REFERENCE, two groups of a --by variable (repeatable).")
@click.option("--min-respondents", type=click.IntRange(min=1), default=5, show_default=True,
              help="Answers (both sides together) a term needs.")
@click.option("--max-terms", type=click.IntRange(min=1), default=50, show_default=True,
              help="Terms kept per side of each comparison.")
@click.option("--rank-by", type=click.Choice(["z", "log_ratio"]), default="z", show_default=True,
              help="z: log-odds z-score; log_ratio: effect size among BH-significant terms.")
@click.option("--prior-strength", type=click.FloatRange(min=0, min_open=True), default=0.1, show_default=True,
              help="Weight of the pooled prior, as a share of the compared answers.")
@click.option("--all-subterms", is_flag=True,
              help="Keep words that a key phrase containing them explains (default: drop them).")
@click.option("--unweighted", is_flag=True, help="Ignore the survey weights.")
@click.option("--count-tokens", is_flag=True,
              help="Count every occurrence instead of once per answer.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def keyness_command(config: Path, out_dir: Path, by: tuple[str, ...], questions: tuple[str, ...],
                    themes: tuple[str, ...], pairs: tuple[tuple[str, str], ...], min_respondents: int,
                    max_terms: int, rank_by: str, prior_strength: float, all_subterms: bool,
                    unweighted: bool, count_tokens: bool, quiet: bool) -> None:
    """Terms and phrases that set each group of respondents apart, from the survey CONFIG.

    Each group is compared with the rest of its variable, each wave with the one
    before, and each --pair; with --theme also within that theme's answers.
    CONFIG is a survey config (YAML) or a folder written by 'textkit code'.
    """
    import numpy as np
    import pandas as pd

    from ..discover.keyness import KEYNESS_COLUMNS, compare
    from ..io.output import csv_writer, write_outputs
    from ..text.ngrams import document_term_matrix

    survey = _load(config, quiet, 6)
    coded = survey.coded
    chosen_questions = _questions(survey, questions)
    variables, wave = _group_variables(survey, by)
    resolved_pairs = _pairs(survey, variables, pairs)
    matrix, terms, n_words = document_term_matrix(survey.stream, binary=not count_tokens)
    doc_lengths = None
    if count_tokens:
        stream = survey.stream
        words = ~stream.break_mask()
        doc_lengths = np.bincount(stream.document_index()[words], minlength=stream.n_documents)
    weights = _weights(survey, unweighted)
    answered = coded["answered"].to_numpy(dtype=bool)
    tables = []
    summary: dict[str, int] = {}
    skipped: list[str] = []
    for question in chosen_questions:
        table = compare(
            matrix, terms, n_words, coded[variables], weights=weights,
            answered=answered & (coded["question"] == question).to_numpy(), by=variables, wave=wave,
            pairs=resolved_pairs, theme_matrix=survey.theme_matrix, themes=survey.themes,
            within_themes=themes, question=question, document_frequency=not count_tokens,
            doc_lengths=doc_lengths, prior_strength=prior_strength, min_respondents=min_respondents,
            max_terms=max_terms, rank_by=rank_by, phrase_handling="keep" if all_subterms else "collapse")
        tables.append(table)
        for key, value in table.attrs["summary"].items():
            summary[key] = summary.get(key, 0) + int(value)
        skipped += [f"{question}: {note}" for note in table.attrs["skipped"]]
    result = pd.concat(tables, ignore_index=True)[KEYNESS_COLUMNS]
    settings = {"by": variables, "wave": wave, "questions": chosen_questions, "within_themes": list(themes),
                "pairs": [list(p) for p in resolved_pairs], "min_respondents": min_respondents,
                "max_terms": max_terms, "rank_by": rank_by, "prior_strength": prior_strength,
                "phrase_handling": "keep" if all_subterms else "collapse",
                "weighted": weights is not None, "counting": "tokens" if count_tokens else "answers",
                "ngram_range": [1, 3]}
    manifest = {"command": "keyness", "config": survey.manifest.get("config"),
                "survey": survey.manifest.get("survey"), "lexicon": survey.manifest.get("lexicon"),
                "settings": settings, "counts": {"rows": len(result), **summary}, "skipped": skipped}
    paths = write_outputs(out_dir, {"keyness.csv": csv_writer(result, float_format="%.10g")}, manifest,
                          inputs=survey.input_paths)
    if quiet:
        return
    for note in skipped:
        click.echo(f"note: skipped {note}", err=True)
    click.echo(f"keyness: {summary.get('comparisons', 0)} comparisons over {len(chosen_questions)} "
               f"question(s), {len(result):,} rows; left out (counted per comparison): "
               f"{summary.get('below_min_respondents', 0):,} terms below {min_respondents} answers, "
               f"{summary.get('explained_by_phrase', 0):,} words explained by a key phrase, "
               + (f"{summary.get('not_significant', 0):,} not significant, " if rank_by == "log_ratio" else "")
               + f"{summary.get('beyond_max_terms', 0):,} beyond --max-terms")
    click.echo(f"wrote {', '.join(p.name for p in paths)} to {out_dir}")


@click.command("suggest")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for lexicon-suggestions.yaml, suggestions.csv and manifest.json.")
@click.option("--question", "questions", multiple=True, metavar="NAME",
              help="Only this question (repeatable); default every question.")
@click.option("--by", "by", multiple=True, metavar="GROUP_VAR",
              help="Variable whose last group is compared with the one before for emerging terms "
                   "(default the wave; give one).")
@click.option("--max-terms", type=click.IntRange(min=1), default=15, show_default=True,
              help="Candidate terms per existing theme.")
@click.option("--max-new-terms", type=click.IntRange(min=1), default=40, show_default=True,
              help="Candidate terms for new themes, before they are grouped.")
@click.option("--min-respondents", type=click.IntRange(min=1), default=5, show_default=True,
              help="Answers a term needs.")
@click.option("--unweighted", is_flag=True, help="Ignore the survey weights.")
@click.option("--topics", "with_topics", is_flag=True,
              help="Also add NMF topics (default scope) to the draft as candidate themes.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def suggest_command(config: Path, out_dir: Path, questions: tuple[str, ...], by: tuple[str, ...],
                    max_terms: int, max_new_terms: int, min_respondents: int, unweighted: bool,
                    with_topics: bool, quiet: bool) -> None:
    """Draft lexicon additions from keyness of coded vs uncoded answers of CONFIG.

    Writes a commented YAML draft for review; the lexicon itself is never changed.
    CONFIG is a survey config (YAML) or a folder written by 'textkit code'.
    """
    import numpy as np
    import scipy.sparse as sp

    from ..coding.coder import ThemeCoder
    from ..discover.suggest import render_suggestions_yaml, suggest_terms
    from ..io.output import csv_writer, text_writer, write_outputs
    from ..text.ngrams import document_term_matrix

    survey = _load(config, quiet, 6)
    coded = survey.coded
    chosen = _questions(survey, questions)
    matrix, terms, n_words = document_term_matrix(survey.stream, binary=True)
    answered = coded["answered"].to_numpy(dtype=bool) & coded["question"].isin(chosen).to_numpy() \
        & ~survey.nothing_to_report  # "Nothing", "All good": neither a theme nor a gap
    themes = list(survey.themes)

    def covered(candidates: np.ndarray):
        texts = [str(t) for t in candidates]
        coder = ThemeCoder(survey.lexicon).fit(texts)
        found = sp.csc_matrix(coder.transform(texts))
        order = [list(coder.themes_).index(t) for t in themes]
        return found[:, order]

    from ..errors import AnalysisError

    if len(by) > 1:
        raise AnalysisError("suggest compares the last two groups of one variable: give --by once")
    wave = _group_variables(survey, by)[0][0] if by else survey.roles.get("wave")
    table = suggest_terms(matrix, terms, n_words, survey.theme_matrix, themes, answered=answered,
                          weights=_weights(survey, unweighted), covered=covered,
                          waves=coded[wave].to_numpy() if wave else None, max_terms=max_terms,
                          max_new_terms=max_new_terms, min_respondents=min_respondents)
    labels = {theme.id: theme.label for theme in survey.lexicon.themes}
    draft = render_suggestions_yaml(table, labels=labels, source=str(config))
    if with_topics:
        from ..discover.topic_tables import render_topic_drafts
        from ..pipeline import find_survey_topics

        draft += "\n" + "\n".join(render_topic_drafts(find_survey_topics(survey, chosen))) + "\n"
    manifest = {"command": "suggest", "config": survey.manifest.get("config"),
                "survey": survey.manifest.get("survey"), "lexicon": survey.manifest.get("lexicon"),
                "settings": {"questions": chosen, "emerging_by": wave, "max_terms": max_terms,
                             "max_new_terms": max_new_terms,
                             "min_respondents": min_respondents, "weighted": not unweighted}}
    paths = write_outputs(out_dir, {"lexicon-suggestions.yaml": text_writer(draft),
                                    "suggestions.csv": csv_writer(table, float_format="%.10g")}, manifest,
                          inputs=survey.input_paths)
    if quiet:
        return
    n_terms = int((table["kind"] == "term").sum())
    n_new = table.loc[table["kind"] == "new_theme", "theme"].nunique()
    n_emerging = table.loc[table["kind"] == "emerging_theme", "theme"].nunique()
    click.echo(f"suggest: {n_terms} candidate terms for existing themes, {n_new} draft new themes, "
               f"{n_emerging} emerging topics (from {int(answered.sum()):,} answers); nothing in the "
               "lexicon was changed")
    click.echo(f"wrote {', '.join(p.name for p in paths)} to {out_dir} - review the draft before use")


@click.command("topics")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=OUTPUT_FOLDER,
              help="Folder for topics.csv, topic_summary.csv, topic_answers.csv, k_selection.csv, "
                   "topic_examples.csv, topic-drafts.yaml and manifest.json.")
@click.option("--question", "questions", multiple=True, metavar="NAME",
              help="Only this question (repeatable); default every question.")
@click.option("--by", "by", multiple=True, metavar="GROUP_VAR",
              help="Group variables searched for where a topic is over-represented (repeatable); "
                   "default every group variable and the wave.")
@click.option("--scope", type=click.Choice(["unexplained", "uncoded", "all", "theme"]), default="unexplained",
              show_default=True, help="Which text the topics are found in (see the README).")
@click.option("--theme", default=None, metavar="THEME", help="With --scope theme: the theme whose answers.")
@click.option("--k", "k", type=int, default=None, help="Number of topics (default: chosen by stability).")
@click.option("--k-range", nargs=2, type=int, default=(3, 15), show_default=True, metavar="LOW HIGH",
              help="Numbers of topics scanned when --k is not given.")
@click.option("--min-df", type=click.IntRange(min=1), default=5, show_default=True,
              help="Distinct answers a term must occur in.")
@click.option("--max-df", type=click.FloatRange(min=0, max=1, min_open=True), default=0.2, show_default=True,
              help="Largest share of the distinct answers a term may occur in.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
def topics_command(config: Path, out_dir: Path, questions: tuple[str, ...], by: tuple[str, ...], scope: str,
                   theme: str | None, k: int | None, k_range: tuple[int, int], min_df: int, max_df: float,
                   quiet: bool) -> None:
    """Emerging topics (NMF) in what the lexicon leaves unexplained, as codes and draft themes.

    CONFIG is a survey config (YAML) or a folder written by 'textkit code'.
    """
    import dataclasses

    from ..discover.topic_tables import find_topics, nothing_to_report_rows, render_topic_drafts
    from ..io.output import csv_writer, text_writer, write_outputs
    from ..pipeline import survey_text

    survey = _load(config, quiet, 6)
    chosen = _questions(survey, questions)
    variables = _group_variables(survey, by)[0] if (by or survey.roles.get("groups")) else []
    data = dataclasses.replace(survey_text(survey), groups=survey.coded[variables] if variables else None)
    result = find_topics(data, chosen, scope=scope, theme=theme, exclude=nothing_to_report_rows(survey.coded),
                         n_topics=k, k_range=tuple(k_range),
                         min_df=min_df, max_df=max_df, random_state=int(survey.config.seed or 0),
                         language=survey.lexicon.language)
    header = ["# DRAFT themes from textkit topics - review every line before use; nothing was added to",
              f"# your lexicon. Source: {config}", "draft: true", ""]
    draft = "\n".join(header + render_topic_drafts(result)) + "\n"
    settings = {"questions": chosen, "scope": scope, "theme": theme, "by": variables, "k": k,
                "k_range": list(k_range), "min_df": min_df, "max_df": max_df, "ngram_range": [1, 2],
                "seed": int(survey.config.seed or 0), "loading_threshold": 0.5}
    manifest = {"command": "topics", "config": survey.manifest.get("config"), "survey": survey.manifest.get("survey"),
                "lexicon": survey.manifest.get("lexicon"), "settings": settings,
                "counts": {**result.counts, "topics": len(result.topic_ids)},
                "chosen_k": {q: m.n_topics_ for q, m in result.models.items()}}
    fmt = "%.10g"
    paths = write_outputs(out_dir, {
        "topics.csv": csv_writer(result.terms, float_format=fmt),
        "topic_summary.csv": csv_writer(result.summary, float_format=fmt),
        "topic_answers.csv": csv_writer(result.answers, float_format=fmt),
        "k_selection.csv": csv_writer(result.k_selection, float_format=fmt),
        "topic_examples.csv": csv_writer(result.examples, float_format=fmt),
        "topic-drafts.yaml": text_writer(draft)}, manifest, inputs=survey.input_paths)
    if quiet:
        return
    for question, model in result.models.items():
        how = "given" if k else f"chosen by stability {model.stability_:.2f}"
        click.echo(f"{question}: {model.n_topics_} topics ({how}) from {model.n_answers_:,} answers "
                   f"({model.n_empty_:,} empty after filtering skipped), {len(model.terms_):,} terms")
    for row in result.summary.itertuples():
        click.echo(f"  {row.topic} [{row.question}] {row.label}: {row.weighted_share:.1%} weighted, "
                   f"most over-represented in {row.top_group_var}={row.top_group}")
    click.echo(f"wrote {', '.join(p.name for p in paths)} to {out_dir} - quotes are redacted, but read them "
               "before publishing")
