"""Hand codes read from a filled sheet: the wide 0/1 form and the long form.

**Wide** (what ``textkit sample`` writes): one row per answer (and coder), the
columns ``response_id``, ``question``, optionally ``coder``, ``text`` and
``sample_weight``, one column per theme id holding 0, 1 or blank, and
``none_applies``. A blank cell means *not coded* and is left out of every
figure, never read as 0; ``none_applies = 1`` states that no theme applies, so
the row's blank theme cells count as 0. Every lexicon theme must have a column;
another column holding only 0, 1 and blanks is read as a theme the lexicon lacks
(an emerging topic, scored with the machine at 0).

**Long** (the older form): ``response_id``, ``question``, ``text`` and ``themes``
(theme ids separated by ``;``); every row is a complete decision, so an empty
``themes`` cell means no theme applies.

Hand codes name the most specific theme: parents are implied (a 1 for
``toilets`` sets ``facilities`` to 1).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import InputError
from .lexicon import Lexicon

#: Columns of a wide hand-coding sheet that are not themes.
META_COLUMNS = ("response_id", "question", "coder", "text", "none_applies", "note", "sample_weight",
                "selection", "wave", "group")
#: Label used for rows without a coder name.
NO_CODER = "(coder)"


@dataclass(frozen=True, eq=False)
class HandCodes:
    """Hand codes for a set of answers, possibly from several coders.

    Attributes
    ----------
    keys : DataFrame of shape (n_rows, 3)
        ``response_id``, ``question``, ``coder`` (str) of each row.
    values : ndarray of shape (n_rows, n_themes), float
        1 or 0, NaN where the cell was not coded.
    themes : tuple of str
        Column order: the lexicon's themes, then themes the lexicon lacks.
    in_lexicon : tuple of bool
    weights : ndarray of shape (n_rows,)
        ``sample_weight`` (inverse selection probability) or ones.
    texts : list of str or None, length n_rows
        The answers as written in the sheet (None where absent).
    source : str
        The file (and sheet) read, for messages.
    """

    keys: pd.DataFrame
    values: np.ndarray
    themes: tuple[str, ...]
    in_lexicon: tuple[bool, ...]
    weights: np.ndarray
    texts: list
    source: str

    @property
    def coders(self) -> list[str]:
        return sorted(self.keys["coder"].unique().tolist())


def binary_cells(column: pd.Series, place: str, name: str) -> np.ndarray:
    """Cells 0, 1 or blank as floats (1.0, 0.0, NaN).

    Accepts numbers 0 and 1, ``True``/``False`` and the texts "0", "1", "0.0",
    "1.0" (trimmed). Anything else raises :class:`InputError` naming ``place``
    (file and sheet), the 1-based data row and the column.
    """
    out = np.full(len(column), np.nan)
    for row, value in enumerate(column.tolist()):
        if value is None or (not isinstance(value, str) and pd.isna(value)):
            continue
        text = str(value).strip() if not isinstance(value, bool) else str(int(value))
        if text == "":
            continue
        if text in ("1", "1.0", "True", "true"):
            out[row] = 1.0
        elif text in ("0", "0.0", "False", "false"):
            out[row] = 0.0
        else:
            raise InputError(f"expected 0, 1 or blank, found {value!r}", source=place, row=row + 1, column=name)
    return out


def _require(frame: pd.DataFrame, columns: Sequence[str], place: str) -> None:
    for column in columns:
        if column not in frame.columns:
            raise InputError(f"no column '{column}'; the columns are: {', '.join(map(str, frame.columns))}",
                             source=place, column=column)


def _text_column(frame: pd.DataFrame, name: str) -> list:
    if name not in frame.columns:
        return [None] * len(frame)
    return [v if isinstance(v, str) else (None if pd.isna(v) else str(v)) for v in frame[name].tolist()]


def _keys(frame: pd.DataFrame, place: str, coder_column: str) -> pd.DataFrame:
    def as_id(series: pd.Series) -> pd.Series:
        return series.map(lambda v: "" if v is None or (not isinstance(v, str) and pd.isna(v))
                          else (str(int(v)) if isinstance(v, float) and v.is_integer() else str(v)).strip())

    keys = pd.DataFrame({"response_id": as_id(frame["response_id"]), "question": as_id(frame["question"])})
    keys["coder"] = as_id(frame[coder_column]).replace("", NO_CODER) if coder_column in frame.columns else NO_CODER
    for column in ("response_id", "question"):
        blank = np.flatnonzero((keys[column] == "").to_numpy())
        if len(blank):
            raise InputError(f"'{column}' is blank; every row needs a response_id and a question",
                             source=place, row=int(blank[0]) + 1, column=column)
    repeated = np.flatnonzero(keys.duplicated().to_numpy())
    if len(repeated):
        row = int(repeated[0])
        raise InputError(f"answer {keys.response_id[row]} / {keys.question[row]} is coded twice by "
                         f"{keys.coder[row]}; keep one row per answer and coder", source=place, row=row + 1,
                         column="response_id")
    return keys.reset_index(drop=True)


def _weights(frame: pd.DataFrame, place: str, column: str = "sample_weight") -> np.ndarray:
    if column not in frame.columns:
        return np.ones(len(frame))
    weights = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    bad = np.flatnonzero(~np.isfinite(weights) | (weights <= 0))
    if len(bad):
        raise InputError(f"expected a positive number, found {frame[column].iloc[bad[0]]!r}", source=place,
                         row=int(bad[0]) + 1, column=column)
    return weights


def _roll_up(values: np.ndarray, themes: Sequence[str], lexicon: Lexicon) -> np.ndarray:
    position = {theme: i for i, theme in enumerate(themes)}
    for theme in lexicon.ids:
        for ancestor in lexicon.ancestors(theme):
            child = values[:, position[theme]] == 1
            values[child, position[ancestor]] = 1.0
    return values


def wide_hand_codes(frame: pd.DataFrame, lexicon: Lexicon, place: str, *, coder_column: str = "coder",
                    text_column: str = "text") -> HandCodes:
    """Read a wide 0/1 sheet (see the module docstring)."""
    _require(frame, ("response_id", "question"), place)
    missing = [theme for theme in lexicon.ids if theme not in frame.columns]
    if missing:
        raise InputError(f"the sheet has no column for the lexicon's theme(s) {', '.join(missing)}; the theme "
                         f"columns must match the lexicon '{lexicon.name}' (write a fresh sheet with "
                         "'textkit sample')", source=place, column=missing[0])
    keys = _keys(frame, place, coder_column)
    columns = {theme: binary_cells(frame[theme], place, theme) for theme in lexicon.ids}
    extra = []
    for name in frame.columns:
        name = str(name)
        if name in columns or name in META_COLUMNS or name in (coder_column, text_column):
            continue
        try:
            values = binary_cells(frame[name], place, name)
        except InputError:
            continue  # a descriptive column (market, wave label...), not a theme
        if np.isfinite(values).any():
            columns[name] = values
            extra.append(name)
    themes = list(lexicon.ids) + extra
    values = np.column_stack([columns[t] for t in themes])
    if "none_applies" in frame.columns:
        none = binary_cells(frame["none_applies"], place, "none_applies")
        clash = np.flatnonzero((none == 1) & (values == 1).any(axis=1))
        if len(clash):
            raise InputError("none_applies is 1 but a theme is also marked 1; keep one of them",
                             source=place, row=int(clash[0]) + 1, column="none_applies")
        values[none == 1] = np.where(np.isnan(values[none == 1]), 0.0, values[none == 1])
    values = _roll_up(values, themes, lexicon)
    return HandCodes(keys=keys, values=values, themes=tuple(themes),
                     in_lexicon=tuple(t in lexicon.ids for t in themes), weights=_weights(frame, place),
                     texts=_text_column(frame, text_column), source=place)


def long_hand_codes(frame: pd.DataFrame, lexicon: Lexicon, place: str, *, codes_column: str = "themes",
                    coder_column: str = "coder", text_column: str = "text") -> HandCodes:
    """Read the long form: one row per answer, theme ids joined by ``;`` (empty: no theme)."""
    _require(frame, ("response_id", "question", codes_column), place)
    keys = _keys(frame, place, coder_column)
    codes = frame[codes_column].tolist()
    extra = sorted({code.strip() for value in codes if isinstance(value, str) for code in value.split(";")
                    if code.strip() and code.strip() not in lexicon.ids})
    themes = list(lexicon.ids) + extra
    position = {theme: i for i, theme in enumerate(themes)}
    values = np.zeros((len(frame), len(themes)))
    for row, value in enumerate(codes):
        if isinstance(value, str):
            for code in filter(None, (part.strip() for part in value.split(";"))):
                values[row, position[code]] = 1.0
    values = _roll_up(values, themes, lexicon)
    return HandCodes(keys=keys, values=values, themes=tuple(themes),
                     in_lexicon=tuple(t in lexicon.ids for t in themes), weights=_weights(frame, place),
                     texts=_text_column(frame, text_column), source=place)


def hand_codes_from_frame(frame: pd.DataFrame, lexicon: Lexicon, place: str, *, codes_column: str = "themes",
                          text_column: str = "text") -> HandCodes:
    """Long form when ``codes_column`` is present, else the wide 0/1 form."""
    if codes_column in frame.columns:
        return long_hand_codes(frame, lexicon, place, codes_column=codes_column, text_column=text_column)
    return wide_hand_codes(frame, lexicon, place, text_column=text_column)


def check_ids_in_survey(hand: HandCodes, known: pd.DataFrame, place: str) -> None:
    """Raise naming the first row whose (response_id, question) is not in ``known``.

    ``known`` has ``response_id`` and ``question`` columns (the coded survey).
    """
    index = pd.MultiIndex.from_frame(known[["response_id", "question"]].astype(str))
    found = index.get_indexer(pd.MultiIndex.from_frame(hand.keys[["response_id", "question"]]))
    questions = set(known["question"].astype(str))
    for row in np.flatnonzero(found < 0).tolist()[:1]:
        question = hand.keys.question[row]
        column = "question" if question not in questions else "response_id"
        what = (f"question '{question}' is not one of the survey's ({', '.join(sorted(questions))})"
                if column == "question" else f"response_id {hand.keys.response_id[row]} is not in the survey")
        raise InputError(what, source=place, row=row + 1, column=column)
