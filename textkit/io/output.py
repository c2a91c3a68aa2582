"""Writing result folders: whole folders put in place at once, a manifest, safe cells.

All writers in textkit go through :func:`write_outputs`, so an output folder holds
either the complete new result, or what it held before, never a mix:

- every file is written into a temporary sibling folder (``.NAME.textkit-PID-new-*``
  next to the output folder), which is renamed into place once all files are
  ready. A folder that holds the previous result of the same command (its
  ``manifest.json`` and the files it lists, nothing else) is replaced as a whole.
  A folder that holds other files too gets the new files moved in one by one
  (each move atomic), the other files left alone;
- the files an interrupted run leaves behind carry this process id in their
  name; the next run removes them once that process is gone (and puts an old
  result back in place if a kill struck between the two renames of a swap);
- an output that would replace or remove an input (the same file after
  following links, or the folder an input lives in) is refused with one line;
- SIGINT and SIGTERM arriving while the folder is being swapped are held back
  until the swap is finished.

Every text cell written to a CSV, TSV or XLSX file goes through :func:`safe_cell`
(see there): cells a spreadsheet would run as a formula are written as text, and
control or bidirectional-override characters are replaced by visible symbols.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import platform
import re
import shutil
import signal
import tempfile
import threading
from collections.abc import Callable, Iterable, Iterator, Mapping
from pathlib import Path
from typing import Any

from ..errors import InputError

#: A writer takes the path it must write to (inside the temporary folder).
Writer = Callable[[Path], None]

#: First characters that make a spreadsheet read a cell as a formula (with their full-width forms).
FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r", "\n", "\uff1d", "\uff0b", "\uff0d", "\uff20")
#: Written before a cell that starts with a trigger, so a spreadsheet shows it as text.
TEXT_MARK = "'"

_PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?\Z")
_BIDI_CONTROLS = (0x061C, 0x200E, 0x200F, *range(0x202A, 0x202F), *range(0x2066, 0x206A))
#: One visible character for each invisible one, so offsets into the text stay valid:
#: C0 controls (not tab, line feed, carriage return) -> their Control Pictures (NUL -> U+2400),
#: DEL -> U+2421, C1 controls and bidirectional controls -> U+FFFD.
_VISIBLE = {code: 0x2400 + code for code in range(0x20) if code not in (0x09, 0x0A, 0x0D)}
_VISIBLE.update({0x7F: 0x2421, **dict.fromkeys(range(0x80, 0xA0), 0xFFFD), **dict.fromkeys(_BIDI_CONTROLS, 0xFFFD)})
_INVISIBLE = re.compile("[" + "".join(re.escape(chr(c)) for c in _VISIBLE) + "]")
_OURS = ".textkit-"


def safe_cell(value: Any) -> Any:
    """A cell value as it may be written to a CSV, TSV or XLSX file.

    Text is changed in two ways, each keeping one character for one character
    except the mark: control and bidirectional-override characters become
    visible symbols (NUL -> U+2400, other C0 controls -> their Control Pictures,
    DEL -> U+2421, C1 and bidirectional controls -> U+FFFD; tab, line feed and
    carriage return inside a cell stay), and a text that starts with ``=``,
    ``+``, ``-``, ``@``, a tab, a carriage return or a line feed (or the
    full-width ``＝ ＋ － ＠``) gets a leading ``'``, so a spreadsheet shows it as
    text instead of running it. A plain number written as text (``-5``,
    ``+1.5e3``) is left as it is. Values that are not text (numbers, missing
    values) are returned unchanged.
    """
    if not isinstance(value, str):
        return value
    if _INVISIBLE.search(value):
        value = value.translate(_VISIBLE)
    if value.startswith(FORMULA_TRIGGERS) and not _PLAIN_NUMBER.match(value):
        return TEXT_MARK + value
    return value


def safe_frame(frame: Any) -> Any:
    """A copy of a DataFrame with :func:`safe_cell` applied to every text cell and column name."""
    import pandas as pd

    safe = frame.copy()
    safe.columns = [safe_cell(name) if isinstance(name, str) else name for name in frame.columns]
    for position in range(safe.shape[1]):
        column = safe.iloc[:, position]
        if isinstance(column.dtype, pd.CategoricalDtype):
            column = column.astype(object)
        elif not (column.dtype == object or pd.api.types.is_string_dtype(column.dtype)):
            continue
        safe.isetitem(position, column.map(safe_cell, na_action="ignore"))
    return safe


def file_sha256(path: str | Path) -> str:
    """Hex SHA-256 of a file's bytes (streamed, constant memory)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def library_versions(names: tuple[str, ...] = ("textkit", "numpy", "scipy", "pandas",
                                                 "scikit-learn", "nltk", "statsmodels")) -> dict[str, str]:
    """Installed versions of the libraries that shape results (missing ones omitted)."""
    from importlib import metadata

    versions = {"python": platform.python_version()}
    for name in names:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return versions


def csv_writer(frame: Any, **to_csv_options: Any) -> Writer:
    """Writer for a DataFrame as UTF-8 CSV without the index, every text cell through :func:`safe_cell`.

    A ``sep="\\t"`` option makes it a TSV writer.
    """
    options = {"encoding": "utf-8", **to_csv_options}
    return lambda path: safe_frame(frame).to_csv(path, index=False, **options)


def parquet_writer(frame: Any) -> Writer:
    """Writer for a DataFrame as Parquet without the index (a data format: cells kept as they are)."""
    return lambda path: frame.to_parquet(path, index=False)


def text_writer(text: str) -> Writer:
    """Writer for a UTF-8 text file."""
    return lambda path: Path(path).write_text(text, encoding="utf-8")


def json_writer(payload: Any) -> Writer:
    """Writer for a JSON document (sorted keys, so identical inputs give identical bytes)."""
    return text_writer(json.dumps(payload, indent=2, sort_keys=True, default=str) + "\n")


def render_figure(figure: Any, file_format: str, dpi: int = 200) -> bytes:
    """The bytes of a matplotlib figure as ``png`` (``dpi`` >= 200) or ``svg``, identical across runs.

    PNG: no software stamp, zlib level 3 (about 40% faster than the default for
    a few per cent more bytes). SVG: no date, element ids from a fixed hash salt,
    text kept as text (editable in a drawing program; the font is DejaVu Sans).
    """
    import io

    import matplotlib

    buffer = io.BytesIO()
    if file_format == "png":
        if dpi < 200:
            raise ValueError(f"PNG charts are written at 200 dpi or more, got {dpi}")
        figure.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None}, pil_kwargs={"compress_level": 3})
    elif file_format == "svg":
        with matplotlib.rc_context({"svg.hashsalt": "textkit", "svg.fonttype": "none"}):
            figure.savefig(buffer, format="svg", metadata={"Date": None})
    else:
        raise ValueError(f"unknown figure format {file_format!r}; expected png or svg")
    return buffer.getvalue()


def bytes_writer(data: bytes) -> Writer:
    """Writer for bytes already rendered."""
    return lambda path: Path(path).write_bytes(data)


def figure_png_writer(figure: Any, dpi: int = 200) -> Writer:
    """Writer for a matplotlib figure as PNG (``dpi`` at least 200, for print)."""
    return lambda path: Path(path).write_bytes(render_figure(figure, "png", dpi))


def figure_svg_writer(figure: Any) -> Writer:
    """Writer for a matplotlib figure as SVG, byte-identical across runs (see :func:`render_figure`)."""
    return lambda path: Path(path).write_bytes(render_figure(figure, "svg"))


# --------------------------------------------------------------------------- the folder


def write_outputs(out_dir: str | Path, files: Mapping[str, Writer], manifest: Mapping[str, Any] | None = None,
                  *, inputs: Iterable[str | Path | None] = ()) -> list[Path]:
    """Write every file of ``files`` into ``out_dir``, all at once.

    Parameters
    ----------
    out_dir : path
        Folder to write into; created (with its parents) if missing. An empty
        name is refused.
    files : mapping of file name to writer
        Each writer is called with the path of its file in a temporary folder.
    manifest : mapping, optional
        Written as ``manifest.json`` beside the files, with the file names and
        library versions added. Its ``command`` key tells a previous result of
        the same command (replaced) from another command's (refused).
    inputs : iterable of paths
        The files and folders the result was made from (None entries ignored).
        An output that would replace one of them, or replace the folder holding
        one, is refused.

    Returns
    -------
    list of Path
        The final paths, in the order given (manifest last).

    Raises
    ------
    InputError
        One line naming the output folder: an empty name, a file where the folder
        should be, a collision with an input, another command's result in the
        folder, or a write that failed (disk full, no permission). Nothing in
        ``out_dir`` is changed then, and no temporary file is left behind.
    """
    if isinstance(out_dir, str) and not out_dir.strip():
        raise InputError("the output folder name is empty; name the folder to write into")
    out = Path(out_dir).expanduser()
    if out.exists() and not out.is_dir():
        raise InputError("expected an output folder, found a file; choose another --out", source=out)
    plan = dict(files)
    command = None
    if manifest is not None:
        full = dict(manifest)
        full.setdefault("versions", library_versions())
        full["files"] = sorted(plan)
        command = full.get("command")
        plan["manifest.json"] = json_writer(full)
    clean_stale(out)
    sources = [Path(p).expanduser() for p in inputs if p is not None and str(p)]
    _refuse_collisions(out, list(plan), sources, whole=False)
    mode = _mode(out, set(plan), command)
    if mode != "merge":
        _refuse_collisions(out, list(plan), sources, whole=True)
    if mode == "merge":
        return _merge_into(out, plan)
    return _swap_into(out, plan, replace=mode == "replace")


def _mode(out: Path, names: set[str], command: str | None) -> str:
    """"new" (no folder or an empty one), "replace" (a previous result of ours) or "merge"."""
    if not out.exists():
        return "new"
    if out.resolve() == Path.cwd().resolve() or os.path.ismount(out):
        return "merge"
    present = {entry.name for entry in out.iterdir()}
    if not present:
        return "new"
    if "manifest.json" not in present or "manifest.json" not in names:
        return "merge"
    try:
        previous = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
        previous_command, listed = previous.get("command"), set(previous.get("files", []))
    except (OSError, ValueError, AttributeError, TypeError):
        return "merge"
    if previous_command is not None and previous_command != command:
        raise InputError(f"the folder holds the result of 'textkit {previous_command}' (its manifest.json "
                         "would be replaced); choose another --out folder", source=out)
    listed |= {str(name).split("/")[0] for name in listed}  # a subfolder of the result belongs to it
    return "replace" if present <= listed | {"manifest.json"} else "merge"


def _refuse_collisions(out: Path, names: list[str], inputs: list[Path], whole: bool) -> None:
    target = out.resolve()
    for source in inputs:
        real = source.resolve()
        if real == target:
            raise InputError(f"the output folder is the input '{source}'; choose another --out folder",
                             source=out)
        if whole and target in real.parents and out.exists():
            raise InputError(f"writing here replaces the whole folder, which holds the input '{source}'; "
                             "choose another --out folder", source=out)
        for name in names:
            final = target / name
            if final == real or (final.exists() and source.exists() and os.path.samefile(final, source)):
                raise InputError(f"writing '{name}' would replace the input '{source}'; choose another "
                                 "--out folder", source=out)


def _fail(out: Path, name: str | None, error: OSError) -> InputError:
    what = f"cannot write '{name}' into the output folder" if name else "cannot write to the output folder"
    return InputError(f"{what}: {error.strerror or error}", source=out)


def _write_all(folder: Path, plan: Mapping[str, Writer], out: Path) -> None:
    for name, writer in plan.items():
        try:
            if "/" in name:
                (folder / name).parent.mkdir(parents=True, exist_ok=True)
            writer(folder / name)
        except OSError as error:
            raise _fail(out, name, error) from None


def _temporary_folder(parent: Path, stem: str, out: Path) -> Path:
    try:
        parent.mkdir(parents=True, exist_ok=True)
        folder = Path(tempfile.mkdtemp(prefix=f"{stem}{_OURS}{os.getpid()}-new-", dir=parent))
        umask = os.umask(0o022)
        os.umask(umask)
        os.chmod(folder, 0o777 & ~umask)  # mkdtemp makes 0700; give what a plain mkdir would
    except OSError as error:
        raise _fail(out, None, error) from None
    return folder


def temporary_file(target: Path) -> Path:
    """An empty file beside ``target`` under the temporary name :func:`clean_stale` recognises.

    The name is ``.NAME.textkit-PID-new-*``: once process PID is gone, the next
    :func:`clean_stale` of ``target`` removes it. Its mode is what a plain
    ``open`` would give (``mkstemp`` makes 0600).
    """
    handle, name = tempfile.mkstemp(prefix=f".{target.name}{_OURS}{os.getpid()}-new-", dir=target.parent)
    os.close(handle)
    umask = os.umask(0o022)
    os.umask(umask)
    os.chmod(name, 0o666 & ~umask)
    return Path(name)


def _staged_write(folder: Path, stem: str, out: Path, plan: Mapping[str, Writer],
                  install: Callable[[Path], None],
                  fallback: Callable[[], list[Path] | None] | None = None) -> list[Path]:
    """Write ``plan`` into a temporary folder made in ``folder``, then ``install`` it (signals held).

    Whatever is left of the temporary folder is removed. When the temporary folder
    cannot be made at all, ``fallback`` (if given and it returns paths) does the work.
    """
    staging: Path | None = None
    try:
        with signals_held():  # so that a signal cannot strike between creating and knowing the folder
            staging = _temporary_folder(folder, stem, out)
        _write_all(staging, plan, out)
        with signals_held():
            install(staging)
    except InputError:
        written = fallback() if staging is None and fallback is not None else None
        if written is None:
            raise
        return written
    except OSError as error:
        raise _fail(out, None, error) from None
    finally:
        if staging is not None:
            shutil.rmtree(staging, ignore_errors=True)
    return [out / name for name in plan]


def _swap_into(out: Path, plan: Mapping[str, Writer], replace: bool) -> list[Path]:
    def install(staging: Path) -> None:
        if replace:
            retired = staging.with_name(staging.name.replace("-new-", "-old-", 1))
            os.rename(out, retired)
            try:
                os.rename(staging, out)
            except OSError:
                os.rename(retired, out)
                raise
            shutil.rmtree(retired, ignore_errors=True)
        else:
            with contextlib.suppress(FileNotFoundError):
                out.rmdir()  # an empty folder (anything else makes rmdir fail, and rename too)
            os.rename(staging, out)

    def in_place() -> list[Path] | None:  # the parent may be read-only while the folder is not
        return _merge_into(out, plan) if out.is_dir() else None

    return _staged_write(out.parent, f".{out.name}", out, plan, install, in_place)


def _merge_into(out: Path, plan: Mapping[str, Writer]) -> list[Path]:
    def install(staging: Path) -> None:
        for name in plan:
            if "/" in name:
                (out / name).parent.mkdir(parents=True, exist_ok=True)
            os.replace(staging / name, out / name)

    return _staged_write(out, "", out, plan, install)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def clean_stale(out: Path) -> None:
    """Remove what interrupted runs (now gone) left beside or inside ``out``.

    A retired old result whose swap was cut short is put back when ``out`` is missing.
    Files of the form ``.NAME.*.part`` (left by writers before this one) are removed too.
    """
    pattern = re.compile(re.escape(_OURS) + r"(\d+)-(new|old)-")
    places = [(out.parent, f".{out.name}{_OURS}"), (out, _OURS)]
    for folder, prefix in places:
        if not folder.is_dir():
            continue
        try:
            entries = [entry for entry in folder.iterdir() if entry.name.startswith(prefix)]
        except OSError:
            continue
        for entry in sorted(entries, key=lambda e: e.name):
            match = pattern.search(entry.name[len(prefix) - len(_OURS):])
            if match is None or _alive(int(match.group(1))):
                continue
            if not entry.is_dir():  # a single file's temporary (textkit.io.workbook.write_file)
                with contextlib.suppress(OSError):
                    entry.unlink()
                continue
            if match.group(2) == "old" and folder == out.parent and not out.exists():
                with contextlib.suppress(OSError):
                    os.rename(entry, out)
                    continue
            shutil.rmtree(entry, ignore_errors=True)
    legacy = [(out, "."), (out.parent, f".{out.name}.")]  # ``.NAME.*.part`` of writers before this one
    for folder, prefix in legacy if out.is_dir() else legacy[1:]:
        with contextlib.suppress(OSError):
            for entry in folder.iterdir():
                if entry.name.startswith(prefix) and entry.name.endswith(".part") and entry.is_file():
                    entry.unlink(missing_ok=True)


@contextlib.contextmanager
def signals_held() -> Iterator[None]:
    """Hold SIGINT and SIGTERM back while the block runs (main thread only), then deliver them."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught: list[int] = []
    held = (signal.SIGINT, signal.SIGTERM)
    previous = {number: signal.getsignal(number) for number in held}
    for number in held:
        signal.signal(number, lambda number, frame: caught.append(number))
    try:
        yield
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler)
        if caught:
            os.kill(os.getpid(), caught[0])
