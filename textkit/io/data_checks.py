"""Row-level checks of a survey, collected rather than stopped at the first.

:func:`textkit.io.readers.read_survey` runs these over the converted columns and
raises one :class:`~textkit.errors.DataProblemsError` listing up to
:data:`~textkit.errors.MAX_PROBLEMS` problems (file, row, column, what was found,
how to fix it), so a user fixes a file in one pass instead of one run per typo.
A survey stacked from several wave files keeps, for each row, the file and the
1-based data row it came from (:class:`RowPlaces`).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import InputError, ProblemCollector


class RowPlaces:
    """Where each row of a (possibly stacked) survey frame comes from.

    Parameters
    ----------
    sources : list of Path
        The files, in stacking order.
    lengths : list of int
        Data rows read from each file.
    """

    def __init__(self, sources: list[Path], lengths: list[int]) -> None:
        self.sources = list(sources)
        self.starts = np.concatenate([[0], np.cumsum(lengths)]).astype(np.int64)

    def of(self, position: int) -> tuple[Path, int]:
        """(file, 1-based data row in that file) of the 0-based stacked ``position``."""
        part = int(np.searchsorted(self.starts, position, side="right")) - 1
        return self.sources[part], position - int(self.starts[part]) + 1

    def error(self, message: str, position: int, column: str | None) -> InputError:
        source, row = self.of(position)
        return InputError(message, source=source, row=row, column=column)

    def describe(self, position: int, here: int) -> str:
        """``row 4`` when ``position`` is in the same file as ``here``, else ``wave2025.csv row 4``."""
        source, row = self.of(position)
        return f"row {row}" if source == self.of(here)[0] else f"{source.name} row {row}"


def add_rows(problems: ProblemCollector, places: RowPlaces, flagged: np.ndarray, column: str | None,
             message: Callable[[int], str]) -> None:
    """One problem for each flagged row (``message(position)``), as many as the collector lists."""
    rows = np.flatnonzero(flagged)
    room = max(problems.limit - len(problems.problems), 0)
    for position in rows[:room].tolist():
        problems.add(places.error(message(position), position, column))
    problems.count(max(rows.size - room, 0))


def check_ids(ids: pd.Series, column: str, places: RowPlaces, problems: ProblemCollector) -> None:
    """Every response id present and unique (repeats name the row of the first use)."""
    add_rows(problems, places, ids.isna().to_numpy(), column,
             lambda _: "missing response id; every row needs a unique id")
    repeat = ids.duplicated(keep="first").to_numpy()
    if not repeat.any():
        return
    first_of = pd.Series(np.arange(len(ids)), index=ids.index).groupby(ids, sort=False).transform("first")
    first = first_of.to_numpy()

    def message(position: int) -> str:
        where = places.describe(int(first[position]), position)
        if where.startswith("row "):
            return (f"response id {ids.iloc[position]!r} appears twice, in rows {where[4:]} and "
                    f"{places.of(position)[1]}; ids must be unique")
        return (f"response id {ids.iloc[position]!r} appears twice, in {where} and here; ids must be unique "
                "across the wave files (prefix them with the wave)")
    add_rows(problems, places, repeat, column, message)


def check_weights(weights: pd.Series, unreadable: np.ndarray, column: str, places: RowPlaces,
                  problems: ProblemCollector, notes: list[str]) -> None:
    """Weights present, finite and not negative; not all 0 (zero weights are noted)."""
    values = weights.to_numpy(dtype=np.float64)
    add_rows(problems, places, np.isnan(values) & ~unreadable, column,
             lambda _: "missing weight; every response needs one (0 leaves it out of estimates)")
    add_rows(problems, places, np.isinf(values), column, lambda _: "infinite weight; give a finite number")
    add_rows(problems, places, values < 0, column,
             lambda p: f"negative weight {values[p]:g}; weights must be 0 or more")
    zero = int((values == 0).sum())
    if zero == len(values):
        problems.add(InputError("every weight is 0; at least one response must have a positive weight",
                                source=places.sources[0], column=column))
    elif zero:
        notes.append(f"{places.sources[0]}: {zero} response(s) have weight 0 in column {column!r}; they are "
                     "kept but do not count in weighted estimates")


def check_design_labels(labels: pd.Series, role: str, column: str, places: RowPlaces,
                        problems: ProblemCollector) -> None:
    """Every response has a stratum (or cluster) value."""
    add_rows(problems, places, labels.isna().to_numpy(), column,
             lambda _: f"missing {role} value; every response must belong to a {role} of the design")


def check_fpc(fpc: pd.Series, unreadable: np.ndarray, strata: pd.Series | None, clusters: pd.Series | None,
              column: str, places: RowPlaces, problems: ProblemCollector) -> None:
    """fpc present and positive, constant within a stratum and not below the stratum's sample.

    The last two checks need complete values, so they run only when the fpc,
    strata and cluster columns have no problem of their own.
    """
    values = fpc.to_numpy(dtype=np.float64)
    before = problems.total
    add_rows(problems, places, np.isnan(values) & ~unreadable, column,
             lambda _: "missing fpc (population size of the stratum)")
    add_rows(problems, places, np.isfinite(values) & (values <= 0) | np.isinf(values), column,
             lambda p: f"fpc {values[p]:g} is not a positive population size")
    incomplete = any(part is not None and part.isna().any() for part in (strata, clusters))
    if problems.total > before or unreadable.any() or incomplete:
        return
    stratum = strata if strata is not None else pd.Series("(all)", index=fpc.index, dtype="str")
    first_value = fpc.groupby(stratum, sort=False).transform("first").to_numpy()
    add_rows(problems, places, values != first_value, column,
             lambda p: f"fpc {values[p]:g} differs from {first_value[p]:g} given earlier for stratum "
                       f"{stratum.iloc[p]!r}; the fpc must be the same for every response of a stratum")
    # First-stage sample size: PSUs when clustered, else responses. One problem per stratum.
    units = clusters if clusters is not None else pd.Series(np.arange(len(fpc)), index=fpc.index)
    sampled = units.groupby(stratum, sort=False).transform("nunique").to_numpy(dtype=np.float64)
    short = (values < sampled) & ~stratum.duplicated().to_numpy()
    what = "PSUs" if clusters is not None else "responses"
    add_rows(problems, places, short, column,
             lambda p: f"fpc {values[p]:g} for stratum {stratum.iloc[p]!r} is smaller than the "
                       f"{int(sampled[p])} {what} sampled in it; the fpc is the population size N_h "
                       "(a count of units), not a sampling fraction")


def check_wave_values(labels: pd.Series, given: np.ndarray, column: str, places: RowPlaces,
                      problems: ProblemCollector) -> None:
    """A wave column a wave file already holds must agree with the wave the config gives the file."""
    differs = (labels.notna() & (labels.astype(object) != given)).to_numpy()
    add_rows(problems, places, differs, column,
             lambda p: f"wave value {labels.iloc[p]!r} differs from the wave {given[p]!r} the survey config "
                       "gives this file; correct the cell or the config (or leave the cell blank)")
