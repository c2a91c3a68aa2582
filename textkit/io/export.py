"""Exporting result tables for people who re-cut them: safe CSV, an XLSX workbook, folder trees.

Formula injection
-----------------
Survey answers are untrusted. A spreadsheet program treats a cell whose text
starts with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return as a formula
(or the start of one), so a crafted answer could run a formula on the reader's
machine. Every *text* cell we write to CSV or XLSX goes through
:func:`neutralise_text`: such a text gets a leading apostrophe (``'=1+1``),
which spreadsheets show as the literal text. Numbers (numeric columns) are
never touched, so they stay numbers.

Workbook layout (:func:`xlsx_writer`): one sheet per table, the header row
frozen and bold, proportions (0-1) formatted as percentages, the ``flag``
column's values shown as cell styles (``caution`` shaded, ``suppress`` greyed
and italic, on the whole row), and a ``notes`` sheet with one row per sheet and
column saying what the column holds. The file's bytes depend only on its
content (fixed timestamps), so the same tables give the same bytes.
"""

from __future__ import annotations

import io
import shutil
import tempfile
import zipfile
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from ..errors import InputError
from .output import Writer, write_outputs

#: Characters that make a spreadsheet read a text cell as a formula when they come first.
FORMULA_TRIGGERS: tuple[str, ...] = ("=", "+", "-", "@", "\t", "\r")

_FIXED_TIME = (2000, 1, 1, 0, 0, 0)


def neutralise_text(value: Any) -> Any:
    """Prefix an apostrophe to a string that starts with a formula trigger; other values unchanged.

    This is the single place the rule lives: CSV and XLSX writers call it for
    every text cell.
    """
    if isinstance(value, str) and value.startswith(FORMULA_TRIGGERS):
        return "'" + value
    return value


def neutralise_frame(frame: Any) -> Any:
    """A copy of a DataFrame whose text (object/string) columns and column names are neutralised."""
    import pandas as pd

    out = frame.copy()
    for column in out.columns:
        series = out[column]
        if pd.api.types.is_object_dtype(series.dtype) or pd.api.types.is_string_dtype(series.dtype):
            out[column] = series.astype(object).map(neutralise_text)
    out.columns = [neutralise_text(str(c)) for c in out.columns]
    return out


def safe_csv_writer(frame: Any, **to_csv_options: Any) -> Writer:
    """Writer for a DataFrame as UTF-8 CSV with every text cell neutralised against formula injection."""
    safe = neutralise_frame(frame)
    return lambda path: safe.to_csv(path, index=False, encoding="utf-8", **to_csv_options)


def _sheet_title(name: str, used: set[str]) -> str:
    """An Excel-legal, unique sheet title (31 characters, no ``[]:*?/\\``)."""
    cleaned = "".join("_" if ch in '[]:*?/\\' else ch for ch in name)[:31] or "sheet"
    title, suffix = cleaned, 2
    while title.lower() in used:
        title = f"{cleaned[:28]}~{suffix}"
        suffix += 1
    used.add(title.lower())
    return title


def _write_sheet(sheet: Any, frame: Any, percent_columns: set[str]) -> None:
    """Fill a write-only sheet: bold frozen header, percentages, flag styles on the flagged rows."""
    import numpy as np
    import pandas as pd
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Font, PatternFill
    from openpyxl.utils import get_column_letter

    styles = {"caution": (PatternFill("solid", fgColor="FFF2CC"), Font(italic=False)),
              "suppress": (PatternFill("solid", fgColor="E7E6E6"), Font(italic=True, color="7F7F7F"))}
    columns = [str(c) for c in frame.columns]
    sheet.freeze_panes = "A2"
    for index, name in enumerate(columns, start=1):
        sheet.column_dimensions[get_column_letter(index)].width = min(max(len(name) + 2, 10), 40)
    header = []
    for name in columns:
        cell = WriteOnlyCell(sheet, neutralise_text(name))
        cell.font = Font(bold=True)
        header.append(cell)
    sheet.append(header)
    is_percent = [name in percent_columns for name in columns]
    flags = frame["flag"].astype(str).to_numpy() if "flag" in columns else np.full(len(frame), "")
    for flag, row in zip(flags, neutralise_frame(frame).itertuples(index=False, name=None), strict=True):
        style = styles.get(flag)
        cells = []
        for value, percent in zip(row, is_percent, strict=True):
            if value is pd.NA or value is pd.NaT or (isinstance(value, float) and not np.isfinite(value)):
                value = None  # missing and infinite values are empty cells
            elif isinstance(value, np.generic):
                value = value.item()
            if not (percent or style):
                cells.append(value)  # a plain value: no cell object needed
                continue
            cell = WriteOnlyCell(sheet, value)
            if percent:
                cell.number_format = "0.0%"
            if style:
                cell.fill, cell.font = style
            cells.append(cell)
        sheet.append(cells)


def workbook_bytes(tables: Mapping[str, Any], notes: Any, percent_columns: set[str] | frozenset[str] = frozenset()
                   ) -> bytes:
    """The XLSX workbook of ``tables`` as bytes (see the module docstring for the layout).

    Parameters
    ----------
    tables : mapping of sheet name to DataFrame
        In sheet order.
    notes : DataFrame
        Columns ``sheet, column, meaning``: written as the last sheet, ``notes``.
    percent_columns : set of str
        Column names holding proportions (0-1), shown as percentages.
    """
    import datetime as dt

    from openpyxl import Workbook

    book = Workbook(write_only=True)
    used: set[str] = {"notes"}
    for name, frame in tables.items():
        _write_sheet(book.create_sheet(_sheet_title(name, used)), frame, set(percent_columns))
    _write_sheet(book.create_sheet("notes"), notes, set())
    fixed = dt.datetime(*_FIXED_TIME)
    book.properties.created = fixed
    book.properties.modified = fixed
    book.properties.creator = "textkit"
    raw = io.BytesIO()
    book.save(raw)
    return _fixed_zip(raw.getvalue(), fixed)


def _fixed_zip(data: bytes, fixed: Any) -> bytes:
    """Rewrite a zip with fixed member timestamps (openpyxl stamps the save time) and a fixed core.xml date."""
    import re

    stamp = fixed.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    source = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            payload = source.read(info.filename)
            if info.filename == "docProps/core.xml":
                payload = re.sub(rb"(<dcterms:(?:created|modified)[^>]*>)[^<]*", rb"\g<1>" + stamp, payload)
            member = zipfile.ZipInfo(info.filename, date_time=_FIXED_TIME)
            member.compress_type = zipfile.ZIP_DEFLATED
            member.external_attr = 0o644 << 16
            target.writestr(member, payload)
    return out.getvalue()


def xlsx_writer(tables: Mapping[str, Any], notes: Any,
                percent_columns: set[str] | frozenset[str] = frozenset()) -> Writer:
    """Writer for :func:`workbook_bytes` (built when the writer runs)."""
    return lambda path: Path(path).write_bytes(workbook_bytes(tables, notes, percent_columns))


def bytes_writer(payload: bytes) -> Writer:
    """Writer for a file of given bytes."""
    return lambda path: Path(path).write_bytes(payload)


def write_tree(out_dir: str | Path, files: Mapping[str, Writer], manifest: Mapping[str, Any] | None = None,
               *, inputs: Iterable[str | Path | None] = ()) -> list[Path]:
    """Write files into ``out_dir`` and its subfolders (names like ``charts/a.svg``), all or nothing.

    Every file is first written, through :func:`textkit.io.output.write_outputs`,
    into a staging folder inside ``out_dir``; only when all of them are written
    are they renamed into place. If any writer fails, the staging folder is
    removed and ``out_dir`` is as it was. ``manifest`` goes to ``out_dir/manifest.json``.
    Files of earlier runs with other names are left where they are. A file that
    would replace one of ``inputs`` is refused before anything is written.
    """
    import os

    out = Path(out_dir)
    _refuse_replacing_inputs(out, [*files, *(["manifest.json"] if manifest is not None else [])], inputs)
    by_folder: dict[str, dict[str, Writer]] = {}
    for name, writer in files.items():
        parent, _, leaf = name.rpartition("/")
        by_folder.setdefault(parent, {})[leaf] = writer
    write_outputs(out, {})  # creates the folder, or fails with one line
    staging = Path(tempfile.mkdtemp(prefix=".staging-", dir=out))
    try:
        staged: list[tuple[Path, Path]] = []
        for folder in sorted(by_folder):
            top = folder == ""
            written = write_outputs(staging / folder, by_folder[folder], manifest if top else None)
            staged += [(path, out / folder / path.name) for path in written]
        if "" not in by_folder and manifest is not None:
            staged += [(p, out / p.name) for p in write_outputs(staging, {}, manifest)]
        for _, final in staged:
            final.parent.mkdir(parents=True, exist_ok=True)
        for temp, final in staged:
            os.replace(temp, final)
        return [final for _, final in staged]
    finally:
        shutil.rmtree(staging, ignore_errors=True)


def _refuse_replacing_inputs(out: Path, names: Iterable[str], inputs: Iterable[str | Path | None]) -> None:
    """One line if writing ``names`` under ``out`` would replace one of ``inputs`` (same path or same file)."""
    import os

    sources = [Path(p).expanduser() for p in inputs if p is not None and str(p)]
    for name in names:
        final = out / name
        for source in sources:
            if final.resolve() == source.resolve() or (final.exists() and source.exists()
                                                       and os.path.samefile(final, source)):
                raise InputError(f"writing '{name}' would replace the input '{source}'; choose another "
                                 "--out folder", source=out)
