"""A researcher's corrections, kept apart from the lexicon and applied after coding on every run.

A corrections file has the columns ``response_id, question, theme, code, note, who,
when``: one row per decision, ``code`` 1 (the theme applies) or 0 (it does not). In a
filled review workbook the same decisions come from the ``corrections`` sheet and
from the review sheet's ``correct_theme``/``correct_code`` columns (one per answer
row). A blank ``code`` means "not decided" and is left out, never read as 0.

Applying them: a corrected cell takes the researcher's value whatever the lexicon
says; a theme set to 1 also sets its parents to 1 (a parent set to 0 explicitly stays
0); a child set to 0 takes its parent down with it unless the parent's own terms
matched. Corrections whose answer is no longer in the survey, or was not answered,
are reported, never dropped silently. When one cell is corrected twice, the later
row wins (review-sheet rows come before the corrections sheet).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..errors import InputError
from .handcodes import binary_cells
from .lexicon import Lexicon

#: Columns of a corrections file.
CORRECTION_COLUMNS = ["response_id", "question", "theme", "code", "note", "who", "when"]
#: Review-sheet columns that hold a correction, and the corrections-file column each stands for.
REVIEW_CORRECTION_COLUMNS = {"correct_theme": "theme", "correct_code": "code", "correct_note": "note",
                             "corrected_by": "who", "corrected_on": "when"}
#: Columns of the table of applied corrections.
APPLIED_COLUMNS = ["response_id", "question", "theme", "machine", "final", "source", "note", "who", "when"]
#: Columns of the table of corrections that could not be applied.
UNMATCHED_COLUMNS = ["response_id", "question", "theme", "code", "reason", "place", "row"]


def _text(series: pd.Series) -> pd.Series:
    def one(value):
        if value is None or (not isinstance(value, str) and pd.isna(value)):
            return ""
        if isinstance(value, float) and value.is_integer():
            return str(int(value))
        return str(value).strip()

    return series.map(one).astype(object)


def corrections_from_frame(frame: pd.DataFrame, place: str, *, review_sheet: bool = False) -> pd.DataFrame:
    """Decisions of one sheet or CSV as a table of :data:`CORRECTION_COLUMNS` plus ``place``, ``row``.

    ``code`` is 1.0, 0.0 or NaN (blank: not decided). With ``review_sheet`` the
    ``correct_*`` columns are read and rows without a correction skipped.
    Raises :class:`InputError` naming ``place``, row and column for a missing
    column, a code that is not 0, 1 or blank, or a code without a theme.
    """
    if review_sheet:
        if "correct_theme" not in frame.columns:
            return pd.DataFrame(columns=[*CORRECTION_COLUMNS, "place", "row"])
        frame = frame.rename(columns=REVIEW_CORRECTION_COLUMNS)
    for column in ("response_id", "question", "theme", "code"):
        if column not in frame.columns:
            raise InputError(f"no column '{column}'; a corrections file needs {', '.join(CORRECTION_COLUMNS)}",
                             source=place, column=column)
    code_column = "correct_code" if review_sheet else "code"
    table = pd.DataFrame({column: _text(frame[column]) if column in frame.columns else ""
                          for column in CORRECTION_COLUMNS if column != "code"})
    table["code"] = binary_cells(frame["code"], place, code_column)
    table["place"] = place
    table["row"] = np.arange(1, len(frame) + 1)
    theme_column = "correct_theme" if review_sheet else "theme"
    filled = (table["theme"] != "") | np.isfinite(table["code"].to_numpy())
    if review_sheet:
        table = table[filled]
    for column, name in (("response_id", "response_id"), ("question", "question"), ("theme", theme_column)):
        blank = table.index[(table[column] == "") & filled[table.index]]
        if len(blank):
            raise InputError(f"'{name}' is blank but the row holds a correction", source=place,
                             row=int(table.row[blank[0]]), column=name)
    table = table[filled[table.index]]
    return table[[*CORRECTION_COLUMNS, "place", "row"]].reset_index(drop=True)


def check_corrections(corrections: pd.DataFrame, themes: Sequence[str], questions: Sequence[str]) -> None:
    """Raise naming place, row and column for a theme not in the lexicon or an unknown question."""
    for column, known, what in (("theme", themes, "lexicon theme"), ("question", questions, "question")):
        bad = np.flatnonzero(~corrections[column].isin(list(known)).to_numpy())
        if len(bad):
            first = corrections.iloc[int(bad[0])]
            name = column if not str(first.place).endswith("'review']") else f"correct_{column}"
            raise InputError(f"'{first[column]}' is not a {what}; expected one of {', '.join(known)} (fix or "
                             "delete the correction)", source=first.place, row=int(first.row),
                             column=name if column == "theme" else column)


@dataclass(frozen=True, eq=False)
class CorrectionOutcome:
    """The coded table with corrections applied, and what happened to each correction.

    ``coded`` gains ``source`` (``lexicon`` or ``correction``) and ``corrected_themes``
    (the row's corrected cells, ``;``-joined); ``applied`` (:data:`APPLIED_COLUMNS`)
    lists every corrected cell, ``unmatched`` (:data:`UNMATCHED_COLUMNS`) the
    corrections that fit no answer; ``changed`` counts cells whose code changed;
    ``undecided`` the rows left out for a blank code; ``superseded`` the rows
    overridden by a later correction of the same cell.
    """

    coded: pd.DataFrame
    applied: pd.DataFrame
    unmatched: pd.DataFrame
    changed: int
    undecided: int
    superseded: int


def apply_corrections(coded: pd.DataFrame, direct: sp.spmatrix, lexicon: Lexicon,
                      corrections: pd.DataFrame) -> CorrectionOutcome:
    """Apply ``corrections`` to ``coded``.

    Parameters
    ----------
    coded : DataFrame
        The coded table (``response_id``, ``question``, ``answered``, one 0/1 column per
        lexicon theme, ``n_themes``, ``uncoded``).
    direct : sparse matrix of shape (n_rows, n_themes)
        Matches of each theme's own terms, before the roll-up to parents.
    lexicon : Lexicon
    corrections : DataFrame
        From :func:`corrections_from_frame` (checked with :func:`check_corrections`).
    """
    themes = list(lexicon.ids)
    undecided = int(np.isnan(corrections["code"].to_numpy(dtype=float)).sum())
    decided = corrections[np.isfinite(corrections["code"].to_numpy(dtype=float))].reset_index(drop=True)
    index = pd.MultiIndex.from_arrays([coded["response_id"].astype(str), coded["question"].astype(str)])
    rows = index.get_indexer(pd.MultiIndex.from_arrays([decided["response_id"], decided["question"]]))
    answered = coded["answered"].to_numpy(dtype=bool)
    reason = np.where(rows < 0, "response_id not in the survey",
                      np.where(~answered[np.maximum(rows, 0)], "answer is blank or a non-answer", ""))
    unmatched = decided[reason != ""].assign(reason=reason[reason != ""])
    usable = decided[reason == ""].assign(_row=rows[reason == ""])
    usable["_theme"] = pd.Index(themes).get_indexer(usable["theme"])
    last = ~usable.duplicated(["_row", "_theme"], keep="last")
    superseded = int((~last).sum())
    usable = usable[last]

    out = coded.copy()
    out["source"] = "lexicon"
    out["corrected_themes"] = ""
    applied = pd.DataFrame(columns=APPLIED_COLUMNS)
    changed = 0
    if len(usable):
        touched = np.unique(usable["_row"].to_numpy())
        local = np.searchsorted(touched, usable["_row"].to_numpy())
        cells = (local, usable["_theme"].to_numpy())
        codes = usable["code"].to_numpy().astype(np.int8)
        own = (sp.csr_matrix(direct)[touched].toarray() > 0).astype(np.int8)
        own[cells] = codes
        final = ((own @ lexicon.rollup_matrix().toarray()) > 0).astype(np.int8)
        final[cells] = codes  # an explicit decision wins over the roll-up
        before = coded[themes].to_numpy(dtype=np.int8)[touched].copy()
        explicit = np.zeros_like(final, dtype=bool)
        explicit[cells] = True
        marked = explicit | (final != before)
        changed = int((final != before).sum())
        values = out[themes].to_numpy(dtype=np.int8, copy=True)
        values[touched] = final
        for position, theme in enumerate(themes):
            out[theme] = values[:, position]
        n_themes = out["n_themes"].to_numpy(copy=True)
        n_themes[touched] = own.sum(axis=1)
        out["n_themes"] = n_themes.astype(out["n_themes"].dtype)
        out["uncoded"] = (answered & (values.sum(axis=1) == 0)).astype(np.int8)
        names = np.asarray(themes, dtype=object)
        corrected = out["corrected_themes"].to_numpy(dtype=object)
        corrected[touched] = [";".join(names[m]) for m in marked]
        out["corrected_themes"] = corrected
        out.loc[out["corrected_themes"] != "", "source"] = "correction"
        applied = _applied_table(coded, themes, touched, before, final, explicit, marked, usable, local)
    unmatched = unmatched.assign(code=unmatched["code"].astype(int))[UNMATCHED_COLUMNS].reset_index(drop=True)
    return CorrectionOutcome(coded=out, applied=applied, unmatched=unmatched, changed=changed,
                             undecided=undecided, superseded=superseded)


def _applied_table(coded, themes, touched, before, final, explicit, marked, usable, local) -> pd.DataFrame:
    local_row, theme_index = np.nonzero(marked)
    source = np.where(explicit[local_row, theme_index], "correction", "correction (parent or child)")
    frame = pd.DataFrame({
        "response_id": coded["response_id"].to_numpy()[touched[local_row]],
        "question": coded["question"].to_numpy()[touched[local_row]],
        "theme": np.asarray(themes, dtype=object)[theme_index],
        "machine": before[local_row, theme_index], "final": final[local_row, theme_index], "source": source,
    })
    who = usable.assign(_local=local).set_index(["_local", "_theme"])[["note", "who", "when"]]
    found = who.reindex(pd.MultiIndex.from_arrays([local_row, theme_index]))
    for column in ("note", "who", "when"):
        frame[column] = found[column].fillna("").to_numpy()
    return frame[APPLIED_COLUMNS]
