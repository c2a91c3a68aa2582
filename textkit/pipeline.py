"""The coding job end to end: survey config -> coded table, evidence, coverage.

:func:`code_survey` is what ``textkit code`` runs; it returns a
:class:`CodedSurvey` that notebooks and the later stages (prevalence,
keyness) use directly. :func:`write_coded` writes it atomically.
"""

from __future__ import annotations

from collections.abc import Callable
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
EVIDENCE_COLUMNS = ["response_id", "question", "theme", "term", "start", "end", "matched_text"]
#: Columns of ``coverage.csv``.
COVERAGE_COLUMNS = ["question", "theme", "label", "parent", "responses_coded", "answered", "share",
                    "weighted_share"]


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
        reached only through its child is not counted again) and ``uncoded`` (1 when answered but no theme matched).
    texts : Series
        The answer texts aligned with ``coded`` rows (non-answers as None).
    evidence : DataFrame
        ``EVIDENCE_COLUMNS``; ``matched_text`` is redacted.
    coverage : DataFrame
        ``COVERAGE_COLUMNS``: per question and theme, responses coded and their
        unweighted and weighted share of the answered responses.
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
    text_list = raw_texts.tolist()
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
    coverage = _coverage_table(coded, lex, data.config)
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
    columns["uncoded"] = (answered & (n_themes == 0)).astype(np.int8)
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
        "matched_text": redact_all(result.evidence["matched_text"].tolist()),
    })
    return evidence[EVIDENCE_COLUMNS]


def _coverage_table(coded: pd.DataFrame, lexicon: Lexicon, config: SurveyConfig) -> pd.DataFrame:
    themes = list(lexicon.ids)
    weights = coded[config.weight].to_numpy(dtype=float) if config.weight else np.ones(len(coded))
    answered = coded["answered"].to_numpy(dtype=bool)
    columns = themes + ["uncoded"]  # "answered, no theme" is one more 0/1 column to share out
    frames = []
    for question in config.questions:
        in_question = (coded["question"] == question).to_numpy() & answered
        values = coded.loc[in_question, columns].to_numpy(dtype=float)
        w = weights[in_question]
        n_answered = int(in_question.sum())
        counts = values.sum(axis=0)
        frames.append(pd.DataFrame({
            "question": question,
            "theme": themes + ["(uncoded)"],
            "label": [t.label for t in lexicon.themes] + ["Answered, no theme"],
            "parent": [t.parent or "" for t in lexicon.themes] + [""],
            "responses_coded": counts.astype(np.int64),
            "answered": n_answered,
            "share": counts / n_answered if n_answered else np.nan,
            "weighted_share": (w @ values) / w.sum() if w.sum() > 0 else np.nan,
        }))
    return pd.concat(frames, ignore_index=True)[COVERAGE_COLUMNS]


def write_coded(survey: CodedSurvey, out_dir: str | Path) -> list[Path]:
    """Write coded.csv, coded.parquet, evidence.csv, coverage.csv and manifest.json atomically."""
    files = {
        "coded.csv": csv_writer(survey.coded),
        "coded.parquet": parquet_writer(survey.coded),
        "evidence.csv": csv_writer(survey.evidence),
        "coverage.csv": csv_writer(survey.coverage, float_format="%.6g"),
        **{name: csv_writer(table) for name, table in survey.extra_tables.items()},
    }
    return write_outputs(out_dir, files, survey.manifest)


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
        numeric = [c for c in (*manifest["themes"], "answered", "n_themes", "uncoded",
                               manifest["roles"].get("weight"), manifest["roles"].get("fpc"))
                   if c and c in frame.columns]
        for column in numeric:
            frame[column] = pd.to_numeric(frame[column], errors="coerce")
    return frame, manifest, data_path
