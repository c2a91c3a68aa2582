"""Excel workbooks for people: review sheets, hand-coding samples, and reading them back.

:func:`workbook_writer` gives a :data:`~textkit.io.output.Writer` for a workbook of
several sheets, each a DataFrame with a frozen header row and an autofilter;
:func:`write_file` puts one file in place atomically (a temporary file renamed
into place), refusing to overwrite a file the run reads. :func:`read_coding_file`
reads a filled CSV or workbook back, naming the sheet in every error.

Every text cell goes through :func:`neutralise_cell` first, so an answer such as
``=HYPERLINK(...)`` is shown as text and never runs as a formula. The bytes are
deterministic: the workbook's creation and modification times and the zip
entries' dates are fixed.
"""

from __future__ import annotations

import io
import os
import re
import tempfile
import zipfile
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import InputError
from .output import FORMULA_TRIGGERS, safe_cell

#: First characters that make a spreadsheet read a cell as a formula (common practice: the
#: OWASP guidance on CSV injection lists these); the one rule lives in textkit.io.output.
_FORMULA_TRIGGERS = FORMULA_TRIGGERS
_FIXED_ZIP_DATE = (1980, 1, 1, 0, 0, 0)
_FIXED_TIMESTAMP = "2000-01-01T00:00:00Z"


def neutralise_cell(value: Any) -> Any:
    """A text cell that a spreadsheet would run as a formula, made inert with a leading apostrophe.

    The rule is :func:`textkit.io.output.safe_cell`, the one every CSV, TSV and XLSX
    writer uses (control characters made visible too). Non-text values are returned unchanged.
    """
    return safe_cell(value)


def restore_cell(value: Any) -> Any:
    """Undo :func:`neutralise_cell` on a value read back from a sheet textkit wrote."""
    if isinstance(value, str) and len(value) > 1 and value[0] == "'" and value[1:].startswith(_FORMULA_TRIGGERS):
        return value[1:]
    return value


@dataclass(frozen=True)
class Sheet:
    """One sheet of a workbook.

    Attributes
    ----------
    name : str
        Sheet name (Excel allows 31 characters).
    frame : DataFrame
        Header row from its columns, one row per record; may have no rows.
    widths : dict of str to float
        Column widths in characters for the columns named (others get a width from
        their header and first values, capped at 60).
    wrap : tuple of str
        Columns whose text wraps (long answers).
    blank_rows : int
        Extra empty rows with borders left below the data for people to fill in.
    """

    name: str
    frame: Any
    widths: dict[str, float] = field(default_factory=dict)
    wrap: tuple[str, ...] = ()
    blank_rows: int = 0


def _fill_sheet(sheet, spec: Sheet) -> None:
    from openpyxl.styles import Alignment, Font
    from openpyxl.utils import get_column_letter

    frame = spec.frame
    columns = [str(c) for c in frame.columns]
    sheet.append([neutralise_cell(c) for c in columns])
    for cell in sheet[1]:
        cell.font = Font(bold=True)
    for record in frame.itertuples(index=False, name=None):
        sheet.append([_cell_value(v) for v in record])
    n_rows = len(frame) + spec.blank_rows + 1
    if columns:
        sheet.freeze_panes = "A2"
        sheet.auto_filter.ref = f"A1:{get_column_letter(len(columns))}{max(n_rows, 2)}"
    for index, name in enumerate(columns, start=1):
        letter = get_column_letter(index)
        if name in spec.widths:
            width = spec.widths[name]
        else:
            sample = [len(str(v)) for v in frame.iloc[:50, index - 1].tolist() if v is not None] if len(frame) else []
            width = min(60, max([len(name) + 2, *[s + 1 for s in sample]]))
        sheet.column_dimensions[letter].width = width
        if name in spec.wrap:
            for row in range(2, len(frame) + 2):
                sheet.cell(row=row, column=index).alignment = Alignment(wrap_text=True, vertical="top")


def _cell_value(value: Any) -> Any:
    import numpy as np
    import pandas as pd

    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, str):
        return neutralise_cell(value)
    if value is None or pd.isna(value):
        return None
    return value


def _fix_timestamps(data: bytes) -> bytes:
    """Rewrite a saved workbook with fixed dates so identical content gives identical bytes."""
    source = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            content = source.read(info.filename)
            if info.filename == "docProps/core.xml":
                content = re.sub(rb"(<dcterms:(?:created|modified)[^>]*>)[^<]*(</dcterms:)",
                                 rb"\g<1>" + _FIXED_TIMESTAMP.encode() + rb"\g<2>", content)
            entry = zipfile.ZipInfo(info.filename, date_time=_FIXED_ZIP_DATE)
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o600 << 16
            target.writestr(entry, content)
    return out.getvalue()


def workbook_writer(sheets: Sequence[Sheet]) -> Callable[[Path], None]:
    """Writer (takes the path to write) of an .xlsx workbook with the given sheets, in order."""

    def write(path: Path) -> None:
        from openpyxl import Workbook

        book = Workbook()
        book.remove(book.active)
        for spec in sheets:
            _fill_sheet(book.create_sheet(spec.name[:31]), spec)
        buffer = io.BytesIO()
        book.save(buffer)
        Path(path).write_bytes(_fix_timestamps(buffer.getvalue()))

    return write


def csv_for_spreadsheets_writer(frame: Any) -> Callable[[Path], None]:
    """Writer of a UTF-8 CSV (with byte-order mark, so Excel reads the accents) whose text cells are neutralised."""

    def write(path: Path) -> None:
        safe = frame.copy()
        for column in safe.columns:
            if _is_text(safe[column]):
                safe[column] = safe[column].map(neutralise_cell)
        safe.to_csv(path, index=False, encoding="utf-8-sig")

    return write


def write_file(path: str | Path, writer: Callable[[Path], None], *, inputs: Iterable[str | Path] = ()) -> Path:
    """Write one file atomically: to a temporary file beside it, renamed into place when complete.

    Raises
    ------
    InputError
        When ``path`` is one of ``inputs`` (a run never overwrites what it reads) or
        is a folder, or its folder cannot be created.
    """
    target = Path(path).expanduser()
    resolved = target.resolve()
    for source in inputs:
        if source is not None and Path(source).expanduser().resolve() == resolved:
            raise InputError("the output would overwrite an input of this run; choose another file name",
                             source=target)
    if target.is_dir():
        raise InputError("expected a file name for the output, found a folder", source=target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise InputError(f"cannot create the output folder: {error.strerror}", source=target.parent) from error
    handle, temp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    os.close(handle)
    temp = Path(temp_name)
    try:
        writer(temp)
        umask = os.umask(0o022)
        os.umask(umask)
        os.chmod(temp, 0o666 & ~umask)
    except BaseException:
        temp.unlink(missing_ok=True)
        raise
    os.replace(temp, target)
    return target


@dataclass(frozen=True)
class SheetData:
    """Cells read back from one sheet (or a CSV file).

    ``frame`` holds the data rows (header not counted: row 1 is ``frame.iloc[0]``);
    ``place`` names the file and, for a workbook, the sheet, for error messages.
    """

    frame: Any
    place: str
    sheet: str | None


def workbook_sheet_names(path: str | Path) -> list[str]:
    """Sheet names of an .xlsx workbook, in order."""
    from openpyxl import load_workbook

    try:
        book = load_workbook(path, read_only=True)
    except Exception as error:  # openpyxl/zipfile raise many kinds for a damaged workbook
        raise InputError(f"not a readable Excel workbook ({type(error).__name__}: {error})", source=path) from None
    try:
        return list(book.sheetnames)
    finally:
        book.close()


def read_coding_file(path: str | Path, *, sheets: Sequence[str] = (), optional_sheets: Sequence[str] = ()
                     ) -> list[SheetData]:
    """Read a filled coding file: a CSV, or the named sheets of a workbook.

    Parameters
    ----------
    path : path
        ``.csv``/``.tsv``/``.txt`` or ``.xlsx``/``.xlsm``.
    sheets : sequence of str
        Workbook sheets to read, in order; each must exist. Default: the first sheet
        (none when ``optional_sheets`` are given).
    optional_sheets : sequence of str
        Workbook sheets read when present (skipped when missing or with no data rows).

    Returns
    -------
    list of SheetData
        Cells as read (CSV: text; workbook: numbers and text), with values written by
        :func:`neutralise_cell` restored.
    """
    from .readers import read_table

    source = Path(path).expanduser()
    if source.suffix.lower() not in (".xlsx", ".xlsm"):
        frame, _ = read_table(source)
        return [SheetData(_restore(frame), str(source), None)]
    names = workbook_sheet_names(source)
    wanted = list(sheets) or ([] if optional_sheets else names[:1])
    out = []
    for name in wanted:
        if name not in names:
            raise InputError(f"there is no sheet {name!r}; the sheets are: {', '.join(map(repr, names))}",
                             source=source)
        out.append(_read_sheet(source, name))
    for name in optional_sheets:
        if name in names and name not in wanted:
            try:
                out.append(_read_sheet(source, name))
            except InputError as error:
                if "no data rows" not in str(error):
                    raise
    return out


def _read_sheet(source: Path, name: str) -> SheetData:
    from .readers import read_table

    place = f"{source} [sheet '{name}']"
    try:
        frame, _ = read_table(source, sheet=name)
    except InputError as error:
        raise InputError(error.message, source=place, row=error.row, column=error.column) from None
    return SheetData(_restore(frame), place, name)


def _restore(frame: Any) -> Any:
    frame = frame.copy()
    for column in frame.columns:
        if _is_text(frame[column]):
            frame[column] = frame[column].map(restore_cell)
    return frame


def _is_text(series: Any) -> bool:
    from pandas.api.types import is_object_dtype, is_string_dtype

    return is_object_dtype(series.dtype) or is_string_dtype(series.dtype)
