"""Exception classes of textkit.

Every error a user can cause is a :class:`TextkitError`. Its message is one
line that names the place (file, row, column or lexicon line), says what was
expected and what was found, and, where it helps, how to fix it. The CLI prints
``str(error)`` and exits with status 2.
"""

from __future__ import annotations

from pathlib import Path


class TextkitError(Exception):
    """Base class for every user-facing textkit error.

    Parameters
    ----------
    message : str
        What is wrong and how to fix it (one line, no trailing full stop needed).
    source : str or Path, optional
        The file the problem is in.
    line : int, optional
        1-based line number in ``source`` (lexicon and config files).
    row : int, optional
        1-based data row number (header not counted) in ``source``.
    column : str, optional
        The column name involved.
    """

    def __init__(
        self,
        message: str,
        *,
        source: str | Path | None = None,
        line: int | None = None,
        row: int | None = None,
        column: str | None = None,
    ) -> None:
        self.message = " ".join(str(message).split())
        self.source = str(source) if source is not None else None
        self.line = line
        self.row = row
        self.column = column
        super().__init__(self.__str__())

    def __str__(self) -> str:
        place = ""
        if self.source is not None:
            place = self.source
            if self.line is not None:
                place += f":{self.line}"
        where = []
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        prefix = place
        if where:
            prefix = f"{prefix} ({', '.join(where)})" if prefix else ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message


class InputError(TextkitError):
    """A survey file or survey config cannot be read or is inconsistent."""


class LexiconError(TextkitError):
    """A theme lexicon is malformed (always carries the lexicon line)."""


class DesignError(TextkitError):
    """A survey design (weights, strata, clusters) is impossible or incomplete."""


class AnalysisError(TextkitError):
    """An analysis request does not fit the data (unknown group, empty group...)."""
