"""Reading survey files: the only module of textkit that opens a survey.

:func:`read_table` turns a CSV (any common encoding and delimiter), Excel, Parquet,
SPSS or SQLite file into a DataFrame plus notes for the user; :func:`read_survey`
reads the file a :class:`~textkit.config.SurveyConfig` names and checks it against
the config, so every later stage can trust ids, weights and design columns.

Input files are opened for reading only (SQLite through a read-only URI) and never
changed. Row numbers in errors are 1-based data rows: the header is not counted.

Decisions
---------
- CSV cells are read as text (an empty cell is missing; ``NA`` or ``none`` stay text);
  weight and fpc columns are converted to numbers in :func:`read_survey`, with errors
  that name the row.
- Column names are trimmed; an empty header becomes ``column_<n>``; a repeated header
  ``x`` becomes ``x.2``, ``x.3``... Each such change is reported in the notes.
- Missing strata or cluster values are errors (a response outside the design cannot be
  weighted correctly); a missing wave or group value becomes the label ``(missing)``
  and is counted in a note, so the response still counts in the overall figures.
- Id, strata, cluster, wave and group columns become trimmed text (SPSS value labels
  applied, whole numbers written without ``.0``); weight and fpc become float64.
- Limits: only regular files are read (a device, pipe or socket is refused before it
  is opened) and none over :data:`MAX_SURVEY_BYTES` (2 GiB). An answer longer than
  :data:`MAX_ANSWER_CHARS` characters (20,000, about 3,500 words; a config's
  ``max_answer_chars`` overrides it) is cut to that length before coding; how many
  answers were cut and how many characters were left out is reported in a note.
- Refused with one line rather than read wrongly: a quoted CSV cell that is never
  closed or is followed by stray text (the line it starts on is named), an Excel
  workbook with no sheets, a formula cell without a saved result (the workbook was
  written by a program that does not compute formulas: open and save it in a
  spreadsheet program), and hand codes that are not theme ids (``1``, ``yes``...).
"""

from __future__ import annotations

import codecs
import csv
import difflib
import hashlib
import io
import re
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..errors import InputError, ProblemCollector
from .config import SURVEY_FORMATS, SurveyConfig, normalise_answer, reading_option_misfit, survey_format
from .data_checks import (
    RowPlaces,
    add_rows,
    check_design_labels,
    check_fpc,
    check_ids,
    check_wave_values,
    check_weights,
)
from .output import file_sha256
from .yaml_files import check_regular_file

#: Label given to a missing wave or group value.
MISSING_LABEL = "(missing)"
#: Largest survey file read, in bytes.
MAX_SURVEY_BYTES = 2 * 1024**3
#: Default longest answer coded, in characters (the rest is counted in a note).
MAX_ANSWER_CHARS = 20_000
#: Hand codes that are answers to a yes/no question, not theme ids.
_NOT_THEME_IDS = {"yes", "no", "y", "n", "true", "false", "x", "ok", "none", "na", "nan", "null"}
_THEME_ID = re.compile(r"[a-z][a-z0-9_]*\Z")

_CSV_DELIMITERS = (",", ";", "\t", "|")
_DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", "|": "pipe"}
_SNIFF_CHARS = 64 * 1024
_SQLITE_MAGIC = b"SQLite format 3\x00"


@dataclass
class SurveyData:
    """A survey read and checked against its config.

    Attributes
    ----------
    frame : DataFrame of shape (n_responses, n_columns)
        Every column of the file, in file order, one row per response. Configured
        columns are converted (see the module notes); others are as read.
    config : SurveyConfig
        The config the survey was checked against.
    notes : list of str
        Things the user should know (encoding fallback, zero weights...).
    source_sha256 : str
        Hex SHA-256 of the survey file's bytes (for manifests); for wave files, of
        their waves and hashes.
    files : list of dict
        For a survey stacked from wave files: ``wave``, ``path``, ``sha256`` and
        ``rows`` of each file, in stacking order (empty for one file).
    """

    frame: pd.DataFrame
    config: SurveyConfig
    notes: list[str] = field(default_factory=list)
    source_sha256: str = ""
    files: list[dict] = field(default_factory=list)

    @property
    def n_responses(self) -> int:
        """Number of responses (rows)."""
        return len(self.frame)

    @property
    def weights(self) -> np.ndarray:
        """Weights of shape (n_responses,), float64; all 1 when no weight column is configured."""
        if self.config.weight is None:
            return np.ones(len(self.frame), dtype=np.float64)
        return self.frame[self.config.weight].to_numpy(dtype=np.float64)

    def texts(self, question: str) -> pd.Series:
        """The answers to ``question`` (a question name of the config), missing as NA."""
        return self.frame[self.config.questions[question]]


# ---------------------------------------------------------------------------
# read_table


def read_table(path: str | Path, *, sheet: str | int | None = None, table: str | None = None,
               query: str | None = None, encoding: str | None = None,
               delimiter: str | None = None) -> tuple[pd.DataFrame, list[str]]:
    """Read one survey file into a DataFrame.

    Parameters
    ----------
    path : path
        The file; its suffix picks the reader: .csv/.tsv/.txt (CSV), .xlsx/.xlsm
        (Excel), .parquet/.pq (Parquet), .sav/.zsav (SPSS, value labels applied),
        .sqlite/.sqlite3/.db (SQLite).
    sheet : str or int, optional
        Excel sheet name or 0-based index. Default: the first sheet.
    table : str, optional
        SQLite table (or view). Default: the only table, if there is just one.
    query : str, optional
        A read-only SQL query to run instead of reading a table.
    encoding : str, optional
        Force the CSV encoding. Default: UTF-8 (with or without byte-order mark), UTF-16
        with a byte-order mark, else Windows-1252 (cp1252), else Latin-1, with a note.
    delimiter : str, optional
        Force the CSV delimiter. Default: detected among comma, semicolon, tab and
        pipe (tab for .tsv).

    Returns
    -------
    frame : DataFrame of shape (n_rows, n_columns)
        Data rows with a default RangeIndex. Text columns hold str with missing as NA;
        CSV columns are all text.
    notes : list of str
        Messages for the user (never empty-handed guesses: a fallback is always noted).

    Raises
    ------
    InputError
        Naming the file: missing, a folder, empty, no data rows, unknown suffix, an
        option that does not fit the file type, undecodable text, malformed CSV
        (with the row), unknown sheet or table (listing those present), a failing
        query, or a corrupt workbook/Parquet/SPSS/SQLite file.
    """
    source = Path(path).expanduser()
    if not source.exists():
        raise InputError("survey file not found", source=source)
    if source.is_dir():
        raise InputError("expected a survey file, found a folder", source=source)
    family = survey_format(source)
    if family is None:
        raise InputError(f"unknown file type '{source.suffix}'; expected one of {', '.join(SURVEY_FORMATS)} "
                         "(for an old .xls workbook, save it as .xlsx)", source=source)
    options = {"sheet": sheet, "table": table, "query": query, "encoding": encoding, "delimiter": delimiter}
    for name, value in options.items():
        if value is not None and (misfit := reading_option_misfit(source, name)):
            raise InputError(misfit, source=source)
    if table is not None and query is not None:
        raise InputError("give either a table or a query, not both", source=source)
    size = check_regular_file(source, "survey file", MAX_SURVEY_BYTES)
    if size == 0:
        raise InputError("the file is empty (0 bytes); expected a header row and data rows", source=source)

    notes: list[str] = []
    if family == "csv":
        frame = _read_csv(source, encoding, delimiter, notes)
    elif family == "excel":
        frame = _read_excel(source, sheet, notes)
    elif family == "parquet":
        frame = _read_parquet(source)
    elif family == "spss":
        frame = _read_spss(source, notes)
    else:
        frame = _read_sqlite(source, table, query, notes)

    frame.columns = _column_names(list(frame.columns), source, notes)
    frame = _blank_text_to_na(frame)
    frame = _drop_trailing_empty_rows(frame)
    if len(frame) == 0:
        raise InputError("no data rows (only a header)", source=source)
    return frame.reset_index(drop=True), notes


def _decode(data: bytes, source: Path, encoding: str | None, notes: list[str]) -> str:
    if encoding is not None:
        try:
            text = data.decode(encoding)
        except LookupError:
            raise InputError(f"unknown text encoding {encoding!r}; try utf-8, cp1252 or latin-1",
                             source=source) from None
        except UnicodeDecodeError as error:
            line = data[:error.start].count(b"\n") + 1
            raise InputError(f"cannot be read as {encoding}: byte 0x{data[error.start]:02x} at offset "
                             f"{error.start} is not valid; give the file's real encoding, or remove "
                             "the forced encoding to let textkit detect it",
                             source=source, line=line) from None
        return text.removeprefix("\ufeff")
    if data.startswith(codecs.BOM_UTF8):
        try:
            return data[len(codecs.BOM_UTF8):].decode("utf-8")
        except UnicodeDecodeError as error:
            start = error.start + len(codecs.BOM_UTF8)
            line = data[:start].count(b"\n") + 1
            raise InputError(f"starts with a UTF-8 byte-order mark but byte 0x{data[start]:02x} at offset "
                             f"{start} is not UTF-8; re-save the file as UTF-8", source=source,
                             line=line) from None
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        try:
            return data.decode("utf-16").removeprefix("\ufeff")
        except UnicodeDecodeError:
            raise InputError("starts with a UTF-16 byte-order mark but is not valid UTF-16; "
                             "re-save the file as UTF-8", source=source) from None
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as error:
        line = data[:error.start].count(b"\n") + 1
        where = f"byte 0x{data[error.start]:02x} on line {line}"
    try:
        text = data.decode("cp1252")
        notes.append(f"{source}: not UTF-8 (first non-UTF-8 {where}); read as Windows-1252 (cp1252). "
                     "If accented letters look wrong, set 'encoding' in the survey config")
    except UnicodeDecodeError:
        text = data.decode("latin-1")
        notes.append(f"{source}: neither UTF-8 (first non-UTF-8 {where}) nor Windows-1252; read as "
                     "Latin-1 (ISO-8859-1). If letters look wrong, set 'encoding' in the survey config")
    return text


def _pick_delimiter(text: str, source: Path) -> str:
    """Delimiter of a CSV text: csv.Sniffer's guess when it splits the header into the
    most fields, else the candidate that does; comma for a one-column file."""
    end = text.find("\n")
    header = (text if end < 0 else text[:end]).rstrip("\r")
    fields = {d: len(next(csv.reader([header], delimiter=d), [])) for d in _CSV_DELIMITERS}
    best = max(fields.values())
    if best <= 1:
        return ","
    sample = text[:_SNIFF_CHARS]
    if len(text) > _SNIFF_CHARS and "\n" in sample:
        sample = sample[:sample.rindex("\n")]  # whole lines only
    try:
        sniffed = csv.Sniffer().sniff(sample, delimiters="".join(_CSV_DELIMITERS)).delimiter
    except csv.Error:
        sniffed = None
    if sniffed in fields and fields[sniffed] == best:
        return sniffed
    return next(d for d in _CSV_DELIMITERS if fields[d] == best)


_PARSER_LINE = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
_PARSER_ROW = re.compile(r"starting at row (\d+)")


def _read_csv(source: Path, encoding: str | None, delimiter: str | None, notes: list[str]) -> pd.DataFrame:
    try:
        data = source.read_bytes()
    except OSError as error:
        raise InputError(f"cannot read the file: {error.strerror}", source=source) from error
    text = _decode(data, source, encoding, notes)
    if not text.strip():
        raise InputError("the file holds no text; expected a header row and data rows", source=source)
    if "\x00" in text:
        raise InputError("contains NUL characters, so it is not plain CSV text (a UTF-16 file without "
                         "byte-order mark? then set encoding: utf-16)", source=source)
    if delimiter is None:
        delimiter = "\t" if source.suffix.lower() == ".tsv" else _pick_delimiter(text, source)
        if delimiter != ",":
            notes.append(f"{source}: read as {_DELIMITER_NAMES.get(delimiter, repr(delimiter))}-separated")
    try:
        raw = pd.read_csv(io.StringIO(text), sep=delimiter, header=None, dtype=str, keep_default_na=False,
                          na_values=[""], skip_blank_lines=True, quotechar='"', engine="c")
    except pd.errors.EmptyDataError:
        raise InputError("the file holds no rows; expected a header row and data rows",
                         source=source) from None
    except pd.errors.ParserError as error:
        message = str(error)
        if match := _PARSER_LINE.search(message):
            expected, record, saw = (int(g) for g in match.groups())
            raise InputError(f"this row has {saw} fields but the header has {expected}; check the quoting, "
                             f"or the delimiter (read as {_DELIMITER_NAMES.get(delimiter, repr(delimiter))})",
                             source=source, row=record - 1) from None
        if match := _PARSER_ROW.search(message):
            raise InputError("a quoted cell starting in this row is never closed (missing '\"')",
                             source=source, row=int(match.group(1))) from None
        raise InputError(f"not readable as CSV: {message.split('C error: ')[-1]}", source=source) from None
    if '"' in text:
        _check_quoting(text, delimiter, source)
    header = raw.iloc[0].tolist()
    frame = raw.iloc[1:].reset_index(drop=True)
    frame.columns = header
    return frame


def _check_quoting(text: str, delimiter: str, source: Path) -> None:
    """Refuse a quoted cell that is never closed or has text after its closing quote.

    The C parser reads such a cell on, taking the following rows into it, so the
    error would surface later as a wrong field (a "missing weight"). Python's csv
    module in strict mode stops at the spot; the line where the bad row starts is named.
    """
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, quotechar='"', strict=True)
    start = 1
    try:
        for _ in reader:
            start = reader.line_num + 1
    except csv.Error as error:
        problem = ("is never closed" if "end of data" in str(error)
                   else "has text after its closing quote")
        raise InputError(f"a quoted cell in the row starting on this line {problem} (missing or stray '\"'; "
                         "a '\"' inside a quoted cell must be doubled: \"\")", source=source,
                         line=start) from None


def _read_excel(source: Path, sheet: str | int | None, notes: list[str]) -> pd.DataFrame:
    try:
        book = pd.ExcelFile(source, engine="openpyxl")
    except Exception as error:  # openpyxl/zipfile raise many kinds for a damaged workbook
        raise InputError(f"not a readable Excel workbook ({type(error).__name__}: {error})",
                         source=source) from None
    with book:
        names = list(book.sheet_names)
        if not names:
            raise InputError("the workbook has no sheets; save the survey table in a sheet", source=source)
        listing = ", ".join(repr(n) for n in names)
        if sheet is None:
            chosen = names[0]
            if len(names) > 1:
                notes.append(f"{source}: read the first sheet {chosen!r} of {len(names)} ({listing}); "
                             "set 'sheet' to choose another")
        elif isinstance(sheet, int) and not isinstance(sheet, bool):
            if not 0 <= sheet < len(names):
                raise InputError(f"there is no sheet number {sheet} (0-based); the workbook has "
                                 f"{len(names)}: {listing}", source=source)
            chosen = names[sheet]
        elif sheet in names:
            chosen = sheet
        else:
            raise InputError(f"there is no sheet {sheet!r}; the sheets are: {listing}", source=source)
        try:
            raw = pd.read_excel(book, sheet_name=chosen, header=None)
        except Exception as error:
            raise InputError(f"cannot read sheet {chosen!r} ({type(error).__name__}: {error})",
                             source=source) from None
    if raw.empty:
        raise InputError(f"sheet {chosen!r} is empty; expected a header row and data rows", source=source)
    if raw.isna().to_numpy().any():
        _check_formula_results(source, chosen)
    header = raw.iloc[0].tolist()
    frame = raw.iloc[1:].reset_index(drop=True).infer_objects()
    frame.columns = header
    return frame


_FORMULA_ELEMENT = re.compile(rb"<(?:\w+:)?f[ >]")


def _check_formula_results(source: Path, sheet: str) -> None:
    """Refuse a formula cell of ``sheet`` that has no saved result (it would read as missing)."""
    import zipfile

    import openpyxl

    try:
        with zipfile.ZipFile(source) as archive:
            parts = [n for n in archive.namelist() if n.startswith("xl/worksheets/") and n.endswith(".xml")]
            if not any(_FORMULA_ELEMENT.search(archive.read(n)) for n in parts):
                return  # no formulas anywhere: the usual case, decided without parsing the sheet twice
        formulas = openpyxl.load_workbook(source, read_only=True, data_only=False)
        results = openpyxl.load_workbook(source, read_only=True, data_only=True)
    except Exception:  # the workbook was read once already; leave damage to that reader
        return
    try:
        for cells, values in zip(formulas[sheet].iter_rows(), results[sheet].iter_rows(values_only=True),
                                 strict=False):
            for cell, value in zip(cells, values, strict=False):
                if getattr(cell, "data_type", None) == "f" and value is None:
                    raise InputError(f"cell {cell.coordinate} of sheet {sheet!r} holds a formula with no saved "
                                     "result, so its value is unknown; open the workbook in a spreadsheet "
                                     "program and save it (or paste the values)", source=source)
    finally:
        formulas.close()
        results.close()


def _read_parquet(source: Path) -> pd.DataFrame:
    try:
        frame = pd.read_parquet(source, engine="pyarrow")
    except Exception as error:  # pyarrow raises ArrowInvalid, OSError... for a damaged file
        raise InputError(f"not a readable Parquet file ({type(error).__name__}: {error})",
                         source=source) from None
    # A named index (say response_id) was a column to whoever wrote the file.
    if any(name is not None for name in frame.index.names):
        return frame.reset_index()
    return frame.reset_index(drop=True)


def _read_spss(source: Path, notes: list[str]) -> pd.DataFrame:
    import pyreadstat

    try:
        frame, meta = pyreadstat.read_sav(str(source), apply_value_formats=True, formats_as_category=True)
    except Exception as error:  # pyreadstat raises ReadstatError/PyreadstatError for damaged files
        raise InputError(f"not a readable SPSS file ({type(error).__name__}: {error})",
                         source=source) from None
    labelled = sorted(set(meta.variable_value_labels) & set(frame.columns))
    if labelled:
        notes.append(f"{source}: applied SPSS value labels to {len(labelled)} column(s): "
                     f"{', '.join(labelled)}")
    return frame


def _quote_identifier(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _read_only_authorizer(action: int, *_: Any) -> int:
    allowed = (sqlite3.SQLITE_SELECT, sqlite3.SQLITE_READ, sqlite3.SQLITE_FUNCTION, sqlite3.SQLITE_RECURSIVE)
    return sqlite3.SQLITE_OK if action in allowed else sqlite3.SQLITE_DENY


def _read_sqlite(source: Path, table: str | None, query: str | None, notes: list[str]) -> pd.DataFrame:
    with open(source, "rb") as handle:
        magic = handle.read(len(_SQLITE_MAGIC))
    if magic != _SQLITE_MAGIC:
        raise InputError("not a SQLite database (it lacks the SQLite file header)", source=source)
    uri = source.resolve().as_uri() + "?mode=ro"
    try:
        connection = sqlite3.connect(uri, uri=True)
    except sqlite3.Error as error:
        raise InputError(f"cannot open the SQLite database: {error}", source=source) from None
    try:
        try:
            tables = [row[0] for row in connection.execute(
                "SELECT name FROM sqlite_master WHERE type IN ('table', 'view') "
                "AND name NOT LIKE 'sqlite_%' ORDER BY name")]
        except sqlite3.Error as error:
            raise InputError(f"not a readable SQLite database ({error})", source=source) from None
        listing = ", ".join(repr(t) for t in tables) or "none"
        if query is None:
            if table is None:
                if len(tables) != 1:
                    raise InputError(f"the database has {len(tables)} tables ({listing}); choose one with "
                                     "'table' or give a 'query'", source=source)
                table = tables[0]
                notes.append(f"{source}: read table {table!r}, the only table")
            elif table not in tables:
                raise InputError(f"there is no table {table!r}; the tables are: {listing}", source=source)
            sql = f"SELECT * FROM {_quote_identifier(table)}"
        else:
            sql = query
        connection.set_authorizer(_read_only_authorizer)
        try:
            cursor = connection.execute(sql)
            if cursor.description is None:
                raise InputError("the query returns no columns; it must be a SELECT", source=source)
            columns = [d[0] for d in cursor.description]
            rows = cursor.fetchall()
        except (sqlite3.Error, sqlite3.Warning) as error:
            what = "the query failed" if query is not None else f"cannot read table {table!r}"
            hint = "; only reading queries (SELECT) are allowed" if "authorized" in str(error) else ""
            raise InputError(f"{what}: {error}{hint}", source=source) from None
    finally:
        connection.close()
    frame = pd.DataFrame.from_records(rows, columns=range(len(columns)), coerce_float=True) \
        if rows else pd.DataFrame({i: pd.Series(dtype=object) for i in range(len(columns))})
    frame.columns = columns
    return frame


def _column_names(raw: list[Any], source: Path, notes: list[str]) -> list[str]:
    names: list[str] = []
    seen: dict[str, int] = {}
    for position, value in enumerate(raw, start=1):
        name = "" if _is_missing(value) else _scalar_text(value).strip()
        if not name:
            name = f"column_{position}"
            notes.append(f"{source}: column {position} has no header; named it {name!r}")
        if name in seen:
            seen[name] += 1
            renamed = f"{name}.{seen[name]}"
            notes.append(f"{source}: header {name!r} appears more than once; column {position} "
                         f"renamed {renamed!r}")
            name = renamed
        seen.setdefault(name, 1)
        names.append(name)
    return names


def _blank_text_to_na(frame: pd.DataFrame) -> pd.DataFrame:
    """Empty strings -> missing in text columns (SPSS and SQLite store missing text as '')."""
    for column in frame.columns:
        series = frame[column]
        if pd.api.types.is_string_dtype(series.dtype) or series.dtype == object:
            empty = series.map(lambda v: isinstance(v, str) and v == "", na_action="ignore") \
                if series.dtype == object else series.eq("")
            empty = empty.fillna(False).astype(bool)
            if empty.any():
                frame[column] = series.mask(empty)
    return frame


def _drop_trailing_empty_rows(frame: pd.DataFrame) -> pd.DataFrame:
    """Drop fully empty rows at the end (spreadsheets keep formatted blank rows);
    rows in the middle stay, so row numbers match the file."""
    filled = frame.notna().any(axis=1).to_numpy()
    if filled.all():
        return frame
    last = np.flatnonzero(filled)
    return frame.iloc[: (last[-1] + 1 if last.size else 0)]


# ---------------------------------------------------------------------------
# conversions


def _is_missing(value: Any) -> bool:
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def _scalar_text(value: Any) -> str:
    if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
        return str(int(value))
    if isinstance(value, bytes):
        return value.decode("utf-8", errors="replace")
    return str(value)


def _as_text(series: pd.Series) -> pd.Series:
    """Series -> text (pandas ``str`` dtype, missing as NA); whole-number floats lose ``.0``."""
    if isinstance(series.dtype, pd.CategoricalDtype):
        series = series.astype(object)
    if pd.api.types.is_string_dtype(series.dtype) and series.dtype != object:
        return series.astype("str")
    if pd.api.types.is_float_dtype(series.dtype):
        values = series.to_numpy(dtype=np.float64, na_value=np.nan)
        whole = np.isfinite(values) & (np.abs(values) < 2**53) & (values == np.round(values))
        text = series.astype("str")
        if whole.any():
            text[whole] = series[whole].astype(np.int64).astype("str")
        return text.mask(series.isna())
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        return series.astype("str").mask(series.isna())
    return series.map(_scalar_text, na_action="ignore").astype("str")


def _label_text(series: pd.Series) -> pd.Series:
    """Text for an id or design column: trimmed, blank -> NA."""
    text = _as_text(series).str.strip()
    return text.mask(text.eq("").fillna(False).astype(bool))


_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


def _as_number(series: pd.Series, role: str, column: str, source: Path, notes: list[str],
               problems: tuple[ProblemCollector, RowPlaces] | None = None) -> pd.Series:
    """Series -> float64; a value that is not a number is an error naming its row.

    With ``problems`` every such value is recorded there (and read as NaN) instead.
    """
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        return series.astype(np.float64)
    text = _label_text(series)
    numbers = pd.to_numeric(text, errors="coerce")
    bad = (text.notna() & numbers.isna()).to_numpy()
    if bad.any():
        present = text[text.notna()]
        if present.str.match(_DECIMAL_COMMA).any() and not present.str.contains(".", regex=False).any() and \
                text[bad].str.match(_DECIMAL_COMMA).all():
            numbers = pd.to_numeric(text.str.replace(",", ".", regex=False), errors="coerce")
            bad = (text.notna() & numbers.isna()).to_numpy()
            notes.append(f"{source}: column {column!r} uses decimal commas; read 1,5 as 1.5")
    if bad.any() and problems is not None:
        collector, places = problems
        add_rows(collector, places, bad, column, lambda p: f"{role} {text.iloc[p]!r} is not a number")
    elif bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputError(f"{role} {text.iloc[row]!r} is not a number", source=source, row=row + 1,
                         column=column)
    return numbers.astype(np.float64)


# Every character Python's str.split() treats as whitespace, in RE2 syntax, so the
# vectorised form below agrees exactly with config.normalise_answer.
_WHITESPACE_RUN = r"[\s\x{0B}\x{1C}-\x{1F}\x{85}\pZ]+"


def answered_mask(texts: pd.Series, non_answers: tuple[str, ...] | list[str]) -> np.ndarray:
    """Which answers count as answered.

    Parameters
    ----------
    texts : Series of shape (n_responses,)
        Answers; missing values allowed.
    non_answers : sequence of str
        Answers meaning "no answer" (e.g. ``SurveyConfig.non_answers``).

    Returns
    -------
    ndarray of bool, shape (n_responses,)
        False where the answer is missing, blank, or equals a non-answer once both are
        trimmed, inner whitespace runs collapsed to one space and lower-cased
        (:func:`textkit.config.normalise_answer`); True otherwise.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    values = pa.array(_as_text(texts), from_pandas=True, type=pa.large_string())
    compact = pc.utf8_trim(pc.utf8_lower(pc.replace_substring_regex(values, _WHITESPACE_RUN, " ")),
                           characters=" ")
    skip = pa.array(sorted({normalise_answer(a) for a in non_answers}), type=pa.large_string())
    answered = pc.and_(pc.not_equal(compact, ""), pc.invert(pc.is_in(compact, value_set=skip)))
    return answered.fill_null(False).to_numpy(zero_copy_only=False).astype(bool, copy=False)


# ---------------------------------------------------------------------------
# read_survey


def _configured_columns(config: SurveyConfig) -> list[tuple[str, str]]:
    roles = [("the id column", config.id_column)]
    roles += [(f"the text of question {name!r}", column) for name, column in config.questions.items()]
    for role, column in (("the weight column", config.weight), ("the strata column", config.strata),
                         ("the cluster column", config.cluster), ("the fpc column", config.fpc),
                         ("the wave column", config.wave)):
        if column is not None:
            roles.append((role, column))
    roles += [("a group column", column) for column in config.groups]
    return roles


def _check_columns_present(frame: pd.DataFrame, config: SurveyConfig, source: Path) -> None:
    present = [str(c) for c in frame.columns]
    missing = [(role, column) for role, column in _configured_columns(config) if column not in frame.columns]
    if not missing:
        return
    role, column = missing[0]
    close = difflib.get_close_matches(column, present, n=3, cutoff=0.7)
    close += [c for c in present if c.casefold() == column.casefold() and c not in close]
    if close:
        hint = "did you mean " + " or ".join(repr(c) for c in close) + "?"
    else:
        shown = ", ".join(repr(c) for c in present[:12]) + (", ..." if len(present) > 12 else "")
        hint = f"the columns are: {shown}"
    more = ""
    if len(missing) > 1:
        more = f" (also missing: {', '.join(repr(c) for _, c in missing[1:])})"
    config_name = f" in {config.path}" if config.path is not None else ""
    raise InputError(f"no such column, named as {role}{config_name}; {hint}{more}", source=source,
                     column=column)


def _cap_answers(text: pd.Series, cap: int, what: str, source: Path, notes: list[str]) -> pd.Series:
    """Cut answers longer than ``cap`` characters to ``cap``; count what was left out in a note."""
    lengths = text.str.len()
    over = (lengths > cap).fillna(False).to_numpy(dtype=bool)
    if not over.any():
        return text
    left_out = int((lengths[over] - cap).sum())
    text = text.copy()
    text[over] = text[over].str.slice(0, cap)
    notes.append(f"{source}: {int(over.sum())} answer(s) to {what} are longer than {cap:,} characters "
                 f"(longest {int(lengths.max()):,}); only the first {cap:,} of each were coded, "
                 f"{left_out:,} characters left out (max_answer_chars sets the limit)")
    return text


def check_hand_code_ids(frame: pd.DataFrame, codes_column: str, source: str | Path,
                        known_ids: tuple[str, ...] | list[str] = ()) -> None:
    """Refuse hand codes that cannot be theme ids (``2``, ``yes``, ``no``, ``Toilets``).

    ``codes_column`` holds theme ids separated by ``;``; ids are lower-case letters,
    digits and ``_``, starting with a letter (``known_ids`` are always accepted). A
    frame without that column (the wide 0/1 form) is left alone.

    Raises
    ------
    InputError
        Naming the first such code with its row and column.
    """
    if codes_column not in frame.columns:
        return
    known = set(known_ids)
    for row, value in enumerate(_as_text(frame[codes_column]), start=1):
        if not isinstance(value, str):
            continue
        for code in (part.strip() for part in value.split(";")):
            if not code or code in known:
                continue
            if not _THEME_ID.match(code) or code in _NOT_THEME_IDS:
                raise InputError(f"hand code {code!r} is not a theme id; list the ids of the themes an answer "
                                 "has, separated by ';' (a yes/no or 0/1 column is not a hand code)",
                                 source=source, row=row, column=codes_column)


def read_survey(config: SurveyConfig, *, missing_design: str = "refuse") -> SurveyData:
    """Read the survey a config names and check it against the config.

    Parameters
    ----------
    config : SurveyConfig
        With ``survey_waves`` set, every wave file is read, given its wave value and
        stacked (their columns must agree).
    missing_design : {"refuse", "drop"}, default "refuse"
        What to do when the config names weight or design columns (weight, strata,
        cluster, fpc) that the data lacks: refuse, or leave those roles out of the
        returned ``SurveyData.config`` with a warning in the notes (coding uses none
        of them; estimating prevalence needs them all).

    Returns
    -------
    SurveyData
        The frame has every column of the file; the id, question text, strata,
        cluster, wave and group columns are text (str dtype), weight and fpc float64.
        Missing wave/group values are labelled :data:`MISSING_LABEL`.

    Raises
    ------
    InputError
        Naming the file, the column and (when it applies) the 1-based data row: any
        :func:`read_table` error; a wave file whose columns differ from the first
        one's; a configured column the file lacks (with close matches); a question
        column with no text at all.
    DataProblemsError
        Up to 20 row-level problems at once (the rest counted), each naming file,
        row and column: a missing or repeated response id (both rows named); a weight
        that is not a number, missing, infinite or negative, or all weights 0; an fpc
        that is not a number, missing, not positive, not constant within a stratum or
        smaller than the stratum's sample (PSUs when clustered); a missing strata or
        cluster value; a wave cell that contradicts the wave its file is given.
    """
    frame, notes, places, files = _read_survey_files(config)
    source = places.sources[0]
    problems = ProblemCollector()
    if config.survey_waves:
        frame = _give_waves(frame, config, places, problems)
    if missing_design == "drop":
        config = _without_absent_design(frame, config, source, notes)
    _check_columns_present(frame, config, source)
    frame = frame.copy()

    ids = _label_text(frame[config.id_column])
    check_ids(ids, config.id_column, places, problems)
    frame[config.id_column] = ids

    cap = getattr(config, "max_answer_chars", None) or MAX_ANSWER_CHARS
    for name, column in config.questions.items():
        text = _cap_answers(_as_text(frame[column]), cap, f"question {name!r} (column {column!r})", source,
                            notes)
        if not text.fillna("").str.strip().ne("").any():
            raise InputError(f"the text column of question {name!r} is empty in every row", source=source,
                             column=column)
        if not answered_mask(text, config.non_answers).any():
            notes.append(f"{source}: question {name!r} (column {column!r}) has no answers besides "
                         "non-answers such as 'n/a'")
        frame[column] = text

    _check_design_rows(frame, config, places, problems, notes)
    problems.raise_if_any()

    for column in dict.fromkeys([c for c in (config.wave, *config.groups) if c is not None]):
        if column in (config.strata, config.cluster):
            continue  # already text and complete
        labels = _label_text(frame[column])
        missing = int(labels.isna().sum())
        if missing:
            labels = labels.fillna(MISSING_LABEL)
            notes.append(f"{source}: {missing} response(s) have no value in column {column!r}; "
                         f"labelled {MISSING_LABEL!r}")
        frame[column] = labels

    sha256 = file_sha256(source) if not files else \
        hashlib.sha256("\n".join(f"{f['wave']} {f['sha256']}" for f in files).encode()).hexdigest()
    return SurveyData(frame=frame, config=config, notes=notes, source_sha256=sha256, files=files)


def _check_design_rows(frame: pd.DataFrame, config: SurveyConfig, places: RowPlaces,
                       problems: ProblemCollector, notes: list[str]) -> None:
    """Convert and check the weight, strata, cluster and fpc columns in place, collecting problems."""
    source = places.sources[0]
    if config.weight is not None:
        unreadable = _label_text(frame[config.weight]).notna().to_numpy().copy()
        frame[config.weight] = _as_number(frame[config.weight], "weight", config.weight, source, notes,
                                          problems=(problems, places))
        unreadable &= frame[config.weight].isna().to_numpy()
        check_weights(frame[config.weight], unreadable, config.weight, places, problems, notes)

    for role, column in (("stratum", config.strata), ("cluster", config.cluster)):
        if column is not None:
            frame[column] = _label_text(frame[column])
            check_design_labels(frame[column], role, column, places, problems)

    if config.fpc is not None:
        unreadable = _label_text(frame[config.fpc]).notna().to_numpy().copy()
        fpc = _as_number(frame[config.fpc], "fpc", config.fpc, source, notes, problems=(problems, places))
        unreadable &= fpc.isna().to_numpy()
        check_fpc(fpc, unreadable, frame[config.strata] if config.strata else None,
                  frame[config.cluster] if config.cluster else None, config.fpc, places, problems)
        frame[config.fpc] = fpc


#: Config roles that coding does without (``read_survey(missing_design="drop")``).
_DESIGN_ROLES = ("weight", "strata", "cluster", "fpc")


def _without_absent_design(frame: pd.DataFrame, config: SurveyConfig, source: Path,
                           notes: list[str]) -> SurveyConfig:
    """The config without the weight/design roles whose columns the data lacks (a warning in ``notes``)."""
    import dataclasses

    absent = {role: getattr(config, role) for role in _DESIGN_ROLES
              if getattr(config, role) is not None and getattr(config, role) not in frame.columns}
    if not absent:
        return config
    named = ", ".join(f"{role} {column!r}" for role, column in absent.items())
    notes.append(f"warning: {source}: the data has no {named} column named in the config; coding uses none, "
                 "so it goes on ('textkit prevalence' will need them)")
    return dataclasses.replace(config, **dict.fromkeys(absent))


# ---------------------------------------------------------------------------
# one survey file per wave


def _read_survey_files(config: SurveyConfig) -> tuple[pd.DataFrame, list[str], RowPlaces, list[dict]]:
    """The survey frame (wave files stacked in config order), notes, row places and file records."""
    if not config.survey_waves:
        frame, notes = read_table(config.survey, **config.reading_options())
        return frame, notes, RowPlaces([config.survey], [len(frame)]), []
    frames: list[pd.DataFrame] = []
    notes: list[str] = []
    files: list[dict] = []
    for wave, path in config.survey_waves:
        frame, file_notes = read_table(path, **config.reading_options())
        notes += file_notes
        if frames:
            _check_same_columns(frames[0], config.survey_waves[0][1], frame, path)
        frames.append(frame)
        files.append({"wave": wave, "path": str(path), "sha256": file_sha256(path), "rows": len(frame)})
    paths = [path for _, path in config.survey_waves]
    notes.append("stacked " + ", ".join(f"{f['rows']:,} rows of {Path(f['path']).name} (wave {f['wave']})"
                                        for f in files))
    stacked = pd.concat(frames, ignore_index=True)
    return stacked, notes, RowPlaces(paths, [len(f) for f in frames]), files


def _check_same_columns(first: pd.DataFrame, first_path: Path, frame: pd.DataFrame, path: Path) -> None:
    """Refuse a wave file whose columns are not those of the first wave file (order may differ)."""
    missing = [c for c in first.columns if c not in frame.columns]
    if missing:
        raise InputError(f"column {missing[0]!r} of the first wave file {first_path.name} is not in this "
                         "file; every wave file needs the same columns", source=path, column=str(missing[0]))
    extra = [c for c in frame.columns if c not in first.columns]
    if extra:
        raise InputError(f"column {extra[0]!r} is not in the first wave file {first_path.name}; every wave "
                         "file needs the same columns", source=path, column=str(extra[0]))


def _give_waves(frame: pd.DataFrame, config: SurveyConfig, places: RowPlaces,
                problems: ProblemCollector) -> pd.DataFrame:
    """Set the wave column to each file's wave; cells already there must agree (blank ones are filled)."""
    lengths = np.diff(places.starts)
    given = np.repeat(np.asarray([wave for wave, _ in config.survey_waves], dtype=object), lengths)
    column = str(config.wave)
    frame = frame.copy()
    if column in frame.columns:
        labels = _label_text(frame[column])
        check_wave_values(labels, given, column, places, problems)
    frame[column] = pd.Series(given, index=frame.index, dtype="str")
    return frame
