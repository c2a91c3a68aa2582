"""The wide view of a prevalence table: themes down, groups across, percentages.

:func:`crosstab` turns the long tables of :class:`~textkit.stats.estimate.SurveyAnalysis`
(``prevalence()`` and ``comparisons()``) into the table an analyst pastes into a
report: one row per question x wave x theme (a base row first), one column per
group (``Total`` first), each cell the weighted share in percent.

Decisions (ours; documented in the README):

- a cell flagged ``suppress`` by the publishing rule is left blank, a ``caution``
  cell carries :data:`CAUTION_MARK`; footnotes say how many of each and why;
- a cell is marked :data:`HIGHER_MARK` or :data:`LOWER_MARK` when its group differs from
  the comparison group with a Benjamini-Hochberg q-value below ``alpha`` (the
  families of ``comparisons()``): by default the rest of the sample (for a variable
  with two groups, the other group, which is the same contrast), or a chosen
  reference group of the same variable. No mark where the cell or the reference
  cell is suppressed, nor for the reference column itself.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import AnalysisError

#: Marks of a cell significantly above / below its comparison group, and of a ``caution`` cell.
HIGHER_MARK, LOWER_MARK, CAUTION_MARK = "↑", "↓", "!"
#: Column of the whole sample, and the theme id of the base row.
TOTAL_COLUMN, BASE_ROW = "Total", "(base)"
_ALL, _REST = "(all)", "(rest)"
_KEYS = ["question", "theme", "group_var", "group", "wave"]


@dataclass
class Crosstab:
    """A wide prevalence table and its footnotes.

    Attributes
    ----------
    table : DataFrame of str
        ``question, question_text, wave, theme, theme_label`` then one column per
        group (``Total``, then ``VAR: GROUP`` in the prevalence table's order).
        Cells are percentages as text with their marks; blank when suppressed.
    footnotes : list of str
        What the cells, blanks and marks mean (written under the table).
    """

    table: pd.DataFrame
    footnotes: list[str] = field(default_factory=list)

    def csv_text(self) -> str:
        """The table as CSV, then an empty row and one footnote per row (``\\n`` line ends)."""
        buffer = io.StringIO()
        self.table.to_csv(buffer, index=False, lineterminator="\n")
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow([])
        for note in self.footnotes:
            writer.writerow([note])
        return buffer.getvalue()


def crosstab(prevalence: pd.DataFrame, comparisons: pd.DataFrame, *, reference: str | None = None,
             alpha: float = 0.05, decimals: int = 0, base: str = "answered",
             rule_name: str | None = None) -> Crosstab:
    """Themes down, groups across: percentages with suppression, caution and significance marks.

    Parameters
    ----------
    prevalence : DataFrame
        ``SurveyAnalysis.prevalence()`` (columns ``PREVALENCE_COLUMNS``).
    comparisons : DataFrame
        ``SurveyAnalysis.comparisons()`` of the same analysis (q-values used).
    reference : str, optional
        Compare each group with this group of its variable (``GROUP``, or
        ``VAR=GROUP`` when the name occurs in several variables) instead of with
        the rest of the sample. Variables without it are still compared with the rest.
    alpha : float, default 0.05
        A difference is marked when its q-value is below this.
    decimals : int, default 0
        Decimals of the percentages.
    base, rule_name : str, optional
        Named in the footnotes (``answered`` or ``all``; the publishing rule).

    Returns
    -------
    Crosstab

    Raises
    ------
    AnalysisError
        An unknown or ambiguous reference group (the valid ones listed).
    """
    if prevalence.empty:
        raise AnalysisError("the prevalence table is empty: nothing to lay out")
    table = prevalence.reset_index(drop=True).copy()
    table["_column"] = np.where(table["group_var"] == _ALL, TOTAL_COLUMN,
                                table["group_var"].astype(str) + ": " + table["group"].astype(str))
    ref_var, ref_group = _reference(table, reference)
    signs = _significance(table, comparisons, ref_var, ref_group, alpha)
    suppressed = (table["flag"] == "suppress").to_numpy()
    caution = (table["flag"] == "caution").to_numpy()
    text = (table["estimate"] * 100).map(lambda v: f"{v:.{decimals}f}" if np.isfinite(v) else "")
    marks = np.where(signs > 0, HIGHER_MARK, np.where(signs < 0, LOWER_MARK, ""))
    table["_cell"] = np.where(suppressed, "", text + marks + np.where(caution, CAUTION_MARK, ""))
    wide = _pivot(table)
    if ref_var is not None:
        wide = wide.rename(columns={f"{ref_var}: {ref_group}": f"{ref_var}: {ref_group} (reference)"})
    notes = _footnotes(table, suppressed, caution, signs, ref_var, ref_group, alpha, base, rule_name)
    return Crosstab(wide, notes)


def _reference(table: pd.DataFrame, reference: str | None) -> tuple[str | None, str | None]:
    """(group variable, group) of ``reference``, checked against the table's groups."""
    if reference is None:
        return None, None
    groups = table.loc[table["group_var"] != _ALL, ["group_var", "group"]].drop_duplicates()
    var, _, name = reference.rpartition("=")
    match = groups[(groups["group"].astype(str) == name) & ((groups["group_var"] == var) if var else True)]
    variables = sorted(set(match["group_var"]))
    if len(variables) == 1:
        return variables[0], name
    if not variables:
        valid = ", ".join(f"{v}={g}" for v, g in groups.itertuples(index=False))
        raise AnalysisError(f"unknown reference group '{reference}' (--reference); choose from: {valid}")
    raise AnalysisError(f"reference group '{reference}' is a group of {', '.join(variables)}; "
                        f"write VAR=GROUP, e.g. {variables[0]}={name}")


def _significance(table: pd.DataFrame, comparisons: pd.DataFrame, ref_var: str | None, ref_group: str | None,
                  alpha: float) -> np.ndarray:
    """+1 / -1 where a row's group is significantly above / below its comparison group, else 0."""
    same_scope = comparisons[(comparisons["wave_a"].astype(str) == comparisons["wave_b"].astype(str))
                             & (comparisons["group_var"] != _ALL)]
    significant = (same_scope["q_value"] < alpha).to_numpy()
    direction = np.sign(same_scope["difference"].to_numpy()) * significant
    forward = pd.DataFrame({"question": same_scope["question"].to_numpy(), "theme": same_scope["theme"].to_numpy(),
                            "group_var": same_scope["group_var"].to_numpy(), "wave": same_scope["wave_a"].to_numpy(),
                            "group": same_scope["group_a"].to_numpy(), "other": same_scope["group_b"].to_numpy(),
                            "sign": direction})
    backward = forward.rename(columns={"group": "other", "other": "group"}).assign(sign=-direction)
    pairs = pd.concat([forward, backward[forward.columns]], ignore_index=True)
    n_groups = table[table["group_var"] != _ALL].groupby(["question", "group_var", "wave"])["group"].nunique()
    two = pd.Series(n_groups == 2, name="_two").reset_index()
    pairs = pairs.merge(two, on=["question", "group_var", "wave"], how="left")
    is_ref_var = (pairs["group_var"] == ref_var).to_numpy()
    wanted = np.where(is_ref_var, pairs["other"] == ref_group,
                      np.where(pairs["_two"].fillna(False).to_numpy(dtype=bool), pairs["other"] != _REST,
                               pairs["other"] == _REST))
    chosen = pairs[wanted & (pairs["group"] != pairs["other"]).to_numpy()]
    # the comparison cell: suppressed there means no mark (the rest is not in the table: never)
    flags = table[_KEYS + ["flag"]].rename(columns={"group": "other", "flag": "_other_flag"})
    chosen = chosen.merge(flags, on=["question", "theme", "group_var", "other", "wave"], how="left")
    chosen = chosen[chosen["_other_flag"] != "suppress"]
    keyed = table[_KEYS].astype(object).merge(chosen[_KEYS + ["sign"]].astype(object), on=_KEYS, how="left")
    signs = pd.to_numeric(keyed["sign"], errors="coerce").fillna(0).to_numpy()
    return np.where((table["flag"] == "suppress").to_numpy(), 0, signs)


def _pivot(table: pd.DataFrame) -> pd.DataFrame:
    """Rows question x wave x theme (a base row first), columns in the table's order."""
    rows = ["question", "question_text", "wave", "theme", "theme_label"]
    base = table.drop_duplicates(["question", "wave", "_column"]).assign(
        theme=BASE_ROW, theme_label="Base: respondents (unweighted)", _cell=lambda f: f["n"].astype(str))
    both = pd.concat([base, table], ignore_index=True)
    both["_order"] = np.arange(len(both))
    both = both.sort_values(["question", "wave"], kind="stable", key=_appearance(both))
    keys = both[rows].astype(str).drop_duplicates()
    columns = list(dict.fromkeys(table["_column"]))
    wide = both.astype({r: str for r in rows}).pivot(index=rows, columns="_column", values="_cell")
    wide = wide.reindex(pd.MultiIndex.from_frame(keys))[columns].fillna("")
    wide.columns.name = None
    return wide.reset_index()


def _appearance(frame: pd.DataFrame):
    """Sort key: first appearance order of each value (keeps the analysis' own order)."""
    def key(column: pd.Series) -> pd.Series:
        order = {value: i for i, value in enumerate(dict.fromkeys(frame[column.name].tolist()))}
        return column.map(order)
    return key


def _footnotes(table: pd.DataFrame, suppressed: np.ndarray, caution: np.ndarray, signs: np.ndarray,
               ref_var: str | None, ref_group: str | None, alpha: float, base: str,
               rule_name: str | None) -> list[str]:
    of_whom = "who answered the question" if base == "answered" else "(all respondents)"
    rule = f" '{rule_name}'" if rule_name else ""
    against = "the rest of the sample (for a variable with two groups: the other group)"
    if ref_var is not None:
        against = f"{ref_var}: {ref_group} (reference) for {ref_var}; the rest of the sample for other variables"
    return [
        f"Cells: weighted percentage of respondents {of_whom} raising the theme; base row: unweighted respondents.",
        f"Blank cell: suppressed by the publishing rule{rule} ({int(suppressed.sum())} cells; the reason is "
        "in flag_reason of prevalence.csv).",
        f"{CAUTION_MARK} after a figure: use with caution ({int(caution.sum())} cells; reason in flag_reason).",
        f"{HIGHER_MARK} / {LOWER_MARK}: significantly higher / lower than {against}; Benjamini-Hochberg q below "
        f"{alpha:g} within each family of comparisons.csv ({int((signs > 0).sum())} higher, "
        f"{int((signs < 0).sum())} lower).",
    ]
