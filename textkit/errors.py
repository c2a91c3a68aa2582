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
    option : str, optional
        The command-line option involved ("--theme").
    """

    def __init__(
        self,
        message: str,
        *,
        source: str | Path | None = None,
        line: int | None = None,
        row: int | None = None,
        column: str | None = None,
        option: str | None = None,
    ) -> None:
        self.message = " ".join(str(message).split())
        self.source = str(source) if source is not None else None
        self.line = line
        self.row = row
        self.column = column
        self.option = option
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
        if self.option is not None:
            where.append(f"option {self.option}")
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


class MissingExtraError(TextkitError):
    """An option needs an optional extra that is not installed (the message names the install command)."""


#: Most problems one run lists before it stops (the rest are counted).
MAX_PROBLEMS = 20


class DataProblemsError(InputError):
    """Several problems found in one pass over the data, each with its own place.

    The message is the summary line (with one problem: that problem's own line);
    :attr:`problems` holds up to :data:`MAX_PROBLEMS` of them, each a
    :class:`TextkitError` naming file, row and column, and :attr:`detail_lines`
    the lines the CLI prints under the summary.

    Parameters
    ----------
    problems : list of TextkitError
        The problems kept, in the order found (at least one).
    total : int, optional
        How many were found in all (default: ``len(problems)``).
    """

    def __init__(self, problems: list[TextkitError], total: int | None = None) -> None:
        self.problems = list(problems)
        self.total = max(total or 0, len(self.problems))
        first = self.problems[0]
        if self.total == 1:
            super().__init__(first.message, source=first.source, line=first.line, row=first.row,
                             column=first.column, option=first.option)
            return
        sources = list(dict.fromkeys(p.source for p in self.problems if p.source is not None))
        listed = "all listed below" if self.total == len(self.problems) else \
            f"the first {len(self.problems)} listed below"
        super().__init__(f"{self.total} problems in the data ({listed}); fix them and run again",
                         source=sources[0] if len(sources) == 1 else None)

    @property
    def detail_lines(self) -> list[str]:
        """One line per problem kept (none when there is only one), then how many were left unlisted."""
        if self.total == 1:
            return []
        lines = [str(problem) for problem in self.problems]
        if self.total > len(self.problems):
            lines.append(f"... and {self.total - len(self.problems)} more problem(s) of the same kinds")
        return lines


class ProblemCollector:
    """Gathers data problems so one run can report many (see :class:`DataProblemsError`).

    Parameters
    ----------
    limit : int, default :data:`MAX_PROBLEMS`
        Problems kept; later ones are only counted.
    """

    def __init__(self, limit: int = MAX_PROBLEMS) -> None:
        self.limit = limit
        self.problems: list[TextkitError] = []
        self.total = 0

    def add(self, problem: TextkitError) -> None:
        """Record one problem."""
        self.total += 1
        if len(self.problems) < self.limit:
            self.problems.append(problem)

    def count(self, n_more: int) -> None:
        """Count ``n_more`` problems that are not listed (beyond the limit)."""
        self.total += n_more

    @property
    def full(self) -> bool:
        """True when no more problems would be listed."""
        return len(self.problems) >= self.limit

    def raise_if_any(self) -> None:
        """Raise :class:`DataProblemsError` when anything was recorded."""
        if self.total:
            raise DataProblemsError(self.problems, self.total)
