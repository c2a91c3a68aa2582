"""Excel workbooks: the one XLSX writer of textkit, atomic single files, and reading sheets back.

:func:`workbook_bytes` (and :func:`workbook_writer`, its
:data:`~textkit.io.output.Writer`) is the only XLSX writer in the package: the
report's ``tables.xlsx``, the review sheet, the hand-coding sample and every
other workbook. Each :class:`Sheet` gets a bold, frozen header row with an
autofilter, column widths from its header and first values, optional wrapped
columns, proportions formatted as percentages, and rows styled by their
publishing flag (``caution`` shaded, ``suppress`` greyed and italic). Notes and
definitions are sheets like any other. Every text cell goes through
:func:`textkit.io.output.safe_cell`, the project's one formula rule (numbers
stay numbers). The bytes depend only on the content: the workbook's creation
and modification times and the zip entries' dates are fixed.

:func:`write_file` puts one file in place atomically: it is written under a
temporary name beside it (``.NAME.textkit-PID-new-*``, the mark
:mod:`textkit.io.output` uses for folders) and renamed into place when
complete; a run killed outright leaves that name behind, and the next write of
the same file removes it once the process is gone. :func:`read_coding_file`
reads a filled CSV or workbook back, naming the sheet in every error.
"""

from __future__ import annotations

import io
import os
import re
import zipfile
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import InputError
from .output import (
    FORMULA_TRIGGERS,
    TEXT_MARK,
    Writer,
    clean_stale,
    safe_cell,
    safe_frame,
    signals_held,
    temporary_file,
)

_FIXED_ZIP_DATE = (1980, 1, 1, 0, 0, 0)
_FIXED_TIMESTAMP = b"2000-01-01T00:00:00Z"
#: Fill and font of a row by its flag value.
_FLAG_STYLES = {"caution": ("FFF2CC", False, None), "suppress": ("E7E6E6", True, "7F7F7F")}


def restore_cell(value: Any) -> Any:
    """Undo :func:`~textkit.io.output.safe_cell`'s mark on a value read back from a sheet textkit wrote."""
    if (isinstance(value, str) and len(value) > 1 and value[0] == TEXT_MARK
            and value[1:].startswith(FORMULA_TRIGGERS)):
        return value[1:]
    return value


@dataclass(frozen=True)
class Sheet:
    """One sheet of a workbook.

    Attributes
    ----------
    name : str
        Sheet name (made Excel-legal and unique: 31 characters, no ``[]:*?/\\``).
    frame : DataFrame
        Header row from its columns, one row per record; may have no rows.
    widths : dict of str to float
        Column widths in characters for the columns named (others get a width from
        their header and first values, capped at 60).
    wrap : tuple of str
        Columns whose text wraps (long answers).
    blank_rows : int
        Empty rows below the data that the autofilter still covers (for people to fill in).
    percent : frozenset of str
        Columns holding proportions (0-1), shown as percentages (``0.0%``).
    flag_column : str or None, default "flag"
        Rows whose value in this column is ``caution`` or ``suppress`` are styled.
    """

    name: str
    frame: Any
    widths: dict[str, float] = field(default_factory=dict)
    wrap: tuple[str, ...] = ()
    blank_rows: int = 0
    percent: frozenset[str] = frozenset()
    flag_column: str | None = "flag"


def _sheet_title(name: str, used: set[str]) -> str:
    """An Excel-legal, unique sheet title (31 characters, no ``[]:*?/\\``)."""
    cleaned = "".join("_" if ch in '[]:*?/\\' else ch for ch in str(name))[:31] or "sheet"
    title, suffix = cleaned, 2
    while title.lower() in used:
        title = f"{cleaned[:28]}~{suffix}"
        suffix += 1
    used.add(title.lower())
    return title


def _width(frame: Any, position: int, name: str, widths: dict[str, float]) -> float:
    if name in widths:
        return widths[name]
    sample = [len(str(v)) for v in frame.iloc[:50, position].tolist() if v is not None] if len(frame) else []
    return min(60, max([len(name) + 2, 10, *[s + 1 for s in sample]]))


def _cell_value(value: Any) -> Any:
    """A cell as written: text through :func:`safe_cell`; missing and infinite numbers empty."""
    import math

    import numpy as np
    import pandas as pd

    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, str):
        return safe_cell(value)
    if value is None or value is pd.NA or value is pd.NaT or (isinstance(value, float) and not math.isfinite(value)):
        return None
    return value


def _fill_sheet(sheet: Any, spec: Sheet) -> None:
    """Fill a write-only sheet: bold frozen header with autofilter, widths, percentages, wraps, flag styles."""
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Alignment, Font, PatternFill
    from openpyxl.utils import get_column_letter

    frame = spec.frame
    columns = [str(c) for c in frame.columns]
    if columns:
        sheet.freeze_panes = "A2"
        sheet.auto_filter.ref = f"A1:{get_column_letter(len(columns))}{max(len(frame) + spec.blank_rows + 1, 2)}"
    for index, name in enumerate(columns, start=1):
        sheet.column_dimensions[get_column_letter(index)].width = _width(frame, index - 1, name, spec.widths)
    bold = Font(bold=True)
    header = [WriteOnlyCell(sheet, safe_cell(name)) for name in columns]
    for cell in header:
        cell.font = bold
    sheet.append(header)
    styles = {flag: (PatternFill("solid", fgColor=fill), Font(italic=italic, color=colour))
              for flag, (fill, italic, colour) in _FLAG_STYLES.items()}
    wrap = Alignment(wrap_text=True, vertical="top")
    percent = [name in spec.percent for name in columns]
    wrapped = [name in spec.wrap for name in columns]
    flag_at = columns.index(spec.flag_column) if spec.flag_column in columns else None
    for record in frame.itertuples(index=False, name=None):
        style = styles.get(str(record[flag_at])) if flag_at is not None else None
        cells = []
        for value, is_percent, is_wrapped in zip(record, percent, wrapped, strict=True):
            value = _cell_value(value)
            if not (is_percent or is_wrapped or style):
                cells.append(value)  # a plain value needs no cell object
                continue
            cell = WriteOnlyCell(sheet, value)
            if is_percent:
                cell.number_format = "0.0%"
            if is_wrapped:
                cell.alignment = wrap
            if style:
                cell.fill, cell.font = style
            cells.append(cell)
        sheet.append(cells)


def _fixed_zip(data: bytes) -> bytes:
    """Rewrite a saved workbook with fixed dates (openpyxl stamps the save time), so same content, same bytes."""
    source = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            content = source.read(info.filename)
            if info.filename == "docProps/core.xml":
                content = re.sub(rb"(<dcterms:(?:created|modified)[^>]*>)[^<]*(</dcterms:)",
                                 rb"\g<1>" + _FIXED_TIMESTAMP + rb"\g<2>", content)
            entry = zipfile.ZipInfo(info.filename, date_time=_FIXED_ZIP_DATE)
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o644 << 16
            target.writestr(entry, content)
    return out.getvalue()


def workbook_bytes(sheets: Sequence[Sheet]) -> bytes:
    """The .xlsx workbook of ``sheets`` (in order) as bytes; see the module docstring for the layout."""
    from openpyxl import Workbook

    book = Workbook(write_only=True)
    used: set[str] = set()
    for spec in sheets:
        _fill_sheet(book.create_sheet(_sheet_title(spec.name, used)), spec)
    book.properties.creator = "textkit"
    buffer = io.BytesIO()
    book.save(buffer)
    return _fixed_zip(buffer.getvalue())


def workbook_writer(sheets: Sequence[Sheet]) -> Writer:
    """Writer (takes the path to write) of :func:`workbook_bytes`, built when the writer runs."""
    return lambda path: Path(path).write_bytes(workbook_bytes(sheets))


def csv_for_spreadsheets_writer(frame: Any) -> Writer:
    """Writer of a UTF-8 CSV (with byte-order mark, so Excel reads the accents) whose text cells are made safe."""
    return lambda path: safe_frame(frame).to_csv(path, index=False, encoding="utf-8-sig")


def refuse_existing(path: str | Path, replace: bool = False) -> None:
    """Refuse (InputError) an existing ``path`` unless ``replace``: a sheet written earlier may hold codes."""
    target = Path(path).expanduser()
    if not replace and (target.exists() or target.is_symlink()) and not target.is_dir():
        raise InputError("the file already exists (it may hold codes typed in since); choose another name "
                         "or pass --replace", source=target)


def write_file(path: str | Path, writer: Writer, *, inputs: Iterable[str | Path] = (),
               replace: bool = False) -> Path:
    """Write one file atomically: under a temporary name beside it, renamed into place when complete.

    An existing file is replaced only with ``replace`` (a sheet written earlier may
    hold hand codes or corrections typed into it since).

    What a killed earlier run left beside ``path`` (its temporary file, or a
    ``.NAME.*.part`` file of older versions) is removed first, once that run's
    process is gone. SIGINT and SIGTERM arriving during the rename are held back.

    Raises
    ------
    InputError
        When ``path`` is one of ``inputs`` (a run never overwrites what it reads), is
        a folder, exists and ``replace`` is false, or its folder cannot be created or written.
    """
    target = Path(path).expanduser()
    resolved = target.resolve()
    for source in inputs:
        if source is not None and Path(source).expanduser().resolve() == resolved:
            raise InputError("the output would overwrite an input of this run; choose another file name",
                             source=target)
    if target.is_dir():
        raise InputError("expected a file name for the output, found a folder", source=target)
    refuse_existing(target, replace)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise InputError(f"cannot create the output folder: {error.strerror}", source=target.parent) from error
    clean_stale(target)
    temp: Path | None = None
    try:
        with signals_held():  # so that a signal cannot strike between creating and knowing the file
            temp = temporary_file(target)
        writer(temp)
        with signals_held():
            os.replace(temp, target)
            temp = None
    except OSError as error:
        raise InputError(f"cannot write the file: {error.strerror or error}", source=target) from None
    finally:
        if temp is not None:
            temp.unlink(missing_ok=True)
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
        :func:`~textkit.io.output.safe_cell` restored.
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
