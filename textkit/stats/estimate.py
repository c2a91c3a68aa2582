"""Weighted theme prevalence with design-based SEs, intervals, comparisons and tests.

The question answered: "what share of respondents in each group raised this
theme, how sure are we, and which differences are real?" for every question x
theme x group variable x group x wave at once.

Method (Binder 1983; Wolter 2007; Lumley 2004)
-----------------------------------------------
* A prevalence is the ratio ``p = sum w y / sum w`` over the *domain*: the
  respondents of the group (and wave) who answered the question. Rows outside the
  domain get weight 0 but their PSUs stay in the design.
* Its linearised score is ``z_i = w_i (y_i - p) / sum w``. Scores are summed
  within PSUs and the with-replacement estimator
  ``V = sum_h f_h n_h/(n_h-1) sum_j (z_hj - zbar_h)^2`` is applied (see
  :meth:`textkit.design.SurveyDesign.variance_factors`).
* Everything is computed for all themes and domains at once: PSU x domain totals
  come from one sparse matrix product per question and group variable, and the
  full covariance of the base-domain scores (and of the domains' weight totals)
  comes from products of PSU totals that share a PSU. Totals, pooled waves and
  "the rest of the sample" are unions of base domains, handled by the delta
  method on that covariance, so every comparison uses the covariance between
  domains of the same design.

Choices
-------
* Rows with ``wave`` = ``"(all)"`` pool the waves as one stacked design (waves are
  independent samples, see :mod:`textkit.design`); per-wave rows use that wave's
  df. Rows with ``group_var`` = ``group`` = ``"(all)"`` are the question totals.
* Respondents with a missing group value count in the total and in "the rest",
  never in a named group.
* Degrees of freedom: ``#PSU - #strata`` of the design the domain lives in (the
  wave's sample for per-wave rows, the whole design for pooled rows).
* Intervals (:func:`confidence_interval`): ``logit``, ``korn-graubard``
  and ``wilson`` (effective n, t quantile). An estimate of exactly 0 or 1, or
  with a zero variance, has no design-based effective n; it then uses the Kish
  effective n of the domain and, for ``logit``, the Korn-Graubard interval (the
  ``method`` column says which was used).
* Comparisons: differences ``estimate_a - estimate_b`` with a t interval and a
  two-sided t test on the design df. Group pairs and group-vs-rest use the
  covariance of the two domains; waves are independent (``Var = V_a + V_b``,
  ``df = df_a + df_b``); the wave pairs are ordered later - earlier, so the
  difference is the change. A difference of 0 with SE 0 gets p = 1; a nonzero
  difference with SE 0 gets no p-value.
* Benjamini-Hochberg q-values (statsmodels ``multipletests``) are computed over
  all rows of one returned table with a p-value.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd
from scipy import sparse, stats

from ..errors import AnalysisError
from .design import SurveyDesign
from .domains import (  # noqa: F401 (re-exported)
    DomainTotals,
    TargetBlock,
    _linear_covariance,
    domain_totals,
    union_estimates,
)
from .intervals import (  # noqa: F401 (re-exported)
    CI_METHODS,
    DEFAULT_METHOD,
    _method_name,
    beta_interval,
    confidence_interval,
    wilson_interval,
)
from .rao_scott import rao_scott_table
from .rules import (  # noqa: F401 (re-exported)
    BASE_WIDTH_RULE,
    DEFAULT_RULE,
    RSE_16_33_RULE,
    RSE_25_50_RULE,
    RULES,
    ReliabilityRule,
)

#: Label of totals (group variable and group) and pooled waves.
ALL = "(all)"
#: Label of "the rest of the sample" in group comparisons.
REST = "(rest)"

#: Separator of the parts of a crossed group variable (``market*age_band``).
CROSS = "*"
#: Separator of the values of a crossed group (``Domestic / 16-34``).
CROSS_LABEL = " / "
#: Bases of a share: respondents who answered the question, or all respondents.
BASES: tuple[str, ...] = ("answered", "all")
#: Multiple-testing families for the Benjamini-Hochberg q-values.
FAMILIES: tuple[str, ...] = ("question-variable", "table")

PREVALENCE_COLUMNS = ["question", "question_text", "theme", "theme_label", "group_var", "group", "wave", "n",
                      "n_raising", "weighted_n", "n_eff", "estimate", "se", "ci_low", "ci_high", "df", "deff",
                      "method", "flag", "flag_reason"]
#: Columns added to the prevalence table with ``totals=True``.
TOTAL_COLUMNS = ["total", "total_se", "total_ci_low", "total_ci_high"]
COMPARISON_COLUMNS = ["question", "theme", "theme_label", "group_var", "group_a", "group_b", "wave_a", "wave_b",
                      "estimate_a", "estimate_b", "difference", "se", "ci_low", "ci_high", "p_value",
                      "q_value", "test", "family"]
GROUP_TEST_COLUMNS = ["question", "theme", "theme_label", "group_var", "wave", "n_groups", "n", "pearson_chi2",
                      "mean_deff", "f_statistic", "f_df_num", "f_df_den", "f_p_value", "f_q_value",
                      "chi2_first_order", "chi2_df", "chi2_p_value", "chi2_q_value", "family"]


# ---------------------------------------------------------------------------
# Tables
# ---------------------------------------------------------------------------
def add_q_values(frame: pd.DataFrame, p_column: str = "p_value", q_column: str = "q_value",
                 by: str | None = None) -> pd.DataFrame:
    """Benjamini-Hochberg q-values (statsmodels) over the rows of ``frame`` with a p-value.

    With ``by``, one family per value of that column; otherwise the whole frame.
    """
    from statsmodels.stats.multitest import multipletests

    p = frame[p_column].to_numpy(dtype=float)
    q = np.full(p.shape, np.nan)
    families = [np.ones(len(frame), dtype=bool)] if by is None else \
        [(frame[by] == value).to_numpy() for value in pd.unique(frame[by])]
    for member in families:
        known = member & np.isfinite(p)
        if known.any():
            q[known] = multipletests(p[known], method="fdr_bh")[1]
    frame = frame.copy()
    frame[q_column] = q
    return frame


class SurveyAnalysis:
    """Prevalence of every question x theme x group x wave, ready for tables.

    Build it with :func:`analyse`; call :meth:`prevalence`, :meth:`group_comparisons`,
    :meth:`wave_comparisons`, :meth:`comparisons` and :meth:`group_tests`.

    Attributes
    ----------
    themes : list of str
        Themes and nets, in output order.
    labels, question_text : dict
        Readable theme labels and question wording (ids where none was given).
    dropped_responses : int
        Responses left out for a missing wave (``missing_wave="drop"``).
    """

    def __init__(self, blocks: list[TargetBlock], themes: list[str], design: SurveyDesign, method: str,
                 confidence: float, rule: ReliabilityRule, *, labels: dict[str, str] | None = None,
                 question_text: dict[Any, str] | None = None, family: str = "question-variable",
                 totals: bool = False, base: str = "answered", dropped_responses: int = 0) -> None:
        self.blocks = blocks
        self.themes = themes
        self.design = design
        self.method = method
        self.confidence = confidence
        self.rule = rule
        self.labels = {t: (labels or {}).get(t, t) for t in themes}
        self.question_text = dict(question_text or {})
        self.family = family
        self.totals = totals
        self.base = base
        self.dropped_responses = dropped_responses

    def __repr__(self) -> str:
        questions = list(dict.fromkeys(b.question for b in self.blocks))
        variables = list(dict.fromkeys(b.group_var for b in self.blocks))
        waves = self.blocks[0].waves if self.blocks else []
        return (f"<SurveyAnalysis: {len(questions)} question(s), {len(self.themes)} theme(s), "
                f"by {', '.join(map(str, variables))}, {len(waves) or 'no'} wave(s), method {self.method}, "
                f"rule {self.rule.name}, base {self.base}>")

    # -------------------------------------------------------------- prevalence
    def prevalence(self) -> pd.DataFrame:
        """One row per question x theme x group variable x group x wave (totals included).

        Columns: :data:`PREVALENCE_COLUMNS` (and :data:`TOTAL_COLUMNS` when the
        analysis was built with ``totals=True``).
        """
        columns = PREVALENCE_COLUMNS + (TOTAL_COLUMNS if self.totals else [])
        frames = []
        seen_totals: set[Any] = set()
        for block in self.blocks:
            keep = [i for i, kind in enumerate(block.target_kind) if kind != "rest"]
            if block.question in seen_totals:
                keep = [i for i in keep if block.target_kind[i] != "total"]
            seen_totals.add(block.question)
            if keep:
                frames.append(self._estimate_rows(block, np.asarray(keep)))
        if not frames:
            return pd.DataFrame(columns=columns)
        return self._add_precision(pd.concat(frames, ignore_index=True))[columns]

    def _estimate_rows(self, block: TargetBlock, keep: np.ndarray) -> pd.DataFrame:
        """Targets ``keep`` of ``block`` x every theme: ids, bases, estimate and variance."""
        k = len(self.themes)
        t = keep.size
        variance = np.diagonal(block.covariance, axis1=1, axis2=2)[:, keep].T   # (t, k)
        frame = pd.DataFrame({
            "question": block.question,
            "question_text": self.question_text.get(block.question, str(block.question)),
            "theme": np.tile(self.themes, t),
            "theme_label": np.tile([self.labels[x] for x in self.themes], t),
            "group_var": np.repeat([ALL if block.target_kind[i] == "total" else block.group_var
                                    for i in keep], k),
            "group": np.repeat([block.target_group[i] for i in keep], k),
            "wave": np.repeat(np.asarray([block.target_wave[i] for i in keep], dtype=object), k),
            "n": np.repeat(block.count[keep], k).astype(np.int64),
            "n_raising": np.rint(block.count_yes[keep].ravel()).astype(np.int64),
            "weighted_n": np.repeat(block.weight[keep] * block.totals.scale, k),
            "_weight": np.repeat(block.weight[keep], k),
            "_weight_sq": np.repeat(block.weight_sq[keep], k),
            "estimate": block.estimate[keep].ravel(),
            "_variance": np.maximum(variance.ravel(), 0.0),
            "df": np.repeat(block.df[keep], k),
        })
        if self.totals:
            total, total_variance = target_totals(block)
            frame["total"] = total[keep].ravel()
            frame["_total_variance"] = total_variance[keep].ravel()
        return frame

    def _add_precision(self, table: pd.DataFrame) -> pd.DataFrame:
        """Effective n, SE, design effect, interval, method, flag and its reason of every row."""
        empty = ~(table["_weight"].to_numpy() > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            table["n_eff"] = table["_weight"] ** 2 / table["_weight_sq"]
            p = table["estimate"].to_numpy()
            v = np.where(empty, np.nan, table["_variance"].to_numpy())
            table["se"] = np.sqrt(v)
            srs = p * (1 - p) / (table["n"].to_numpy() - 1)
            table["deff"] = np.where(srs > 0, v / srs, np.nan)
        low, high, used, design_n = confidence_interval(
            p, v, table["n"].to_numpy(), table["n_eff"].to_numpy(), table["df"].to_numpy(),
            self.method, self.confidence)
        table["ci_low"], table["ci_high"], table["method"] = low, high, used
        table["flag"], table["flag_reason"] = self.rule.flags_and_reasons(
            table["n"], p, table["se"], low, high, table["df"], design_n)
        table.loc[~np.isfinite(p), "method"] = ""
        if self.totals:
            t_crit = stats.t.ppf(1 - (1 - self.confidence) / 2, table["df"].to_numpy())
            table["total_se"] = np.where(empty, np.nan, np.sqrt(np.maximum(table["_total_variance"], 0.0)))
            table["total_ci_low"] = np.maximum(table["total"] - t_crit * table["total_se"], 0.0)
            table["total_ci_high"] = table["total"] + t_crit * table["total_se"]
        return table

    # ------------------------------------------------------------- comparisons
    def _difference_rows(self, block: TargetBlock, first: np.ndarray, second: np.ndarray, independent: bool,
                         df: np.ndarray) -> dict[str, np.ndarray]:
        """Differences target[first] - target[second] for all themes, shape (pairs * themes,)."""
        variance = np.diagonal(block.covariance, axis1=1, axis2=2)       # (k, T)
        if independent:
            var = variance[:, first] + variance[:, second]
        else:
            cross = block.covariance[:, first, second]
            var = variance[:, first] + variance[:, second] - 2 * cross
        var = np.maximum(var.T, 0.0)                                       # (pairs, k)
        a = block.estimate[first]
        b = block.estimate[second]
        difference = a - b
        se = np.where(np.isfinite(difference), np.sqrt(var), np.nan)
        k = len(self.themes)
        dfs = np.repeat(df, k).reshape(-1, k)
        # both shares at 0 or 1 in opposite directions: the design SE is 0, so test
        # against the pooled share under "no difference" with the Kish effective n
        pooled = (se == 0) & (difference != 0) & np.isfinite(difference)
        se = np.where(pooled, _pooled_null_se(block, first, second), se)
        structural = (se == 0) & (difference == 0)
        t_crit = stats.t.ppf(1 - (1 - self.confidence) / 2, dfs)
        with np.errstate(divide="ignore", invalid="ignore"):
            p_value = np.where(se > 0, 2 * stats.t.sf(np.abs(difference) / se, dfs), np.nan)
        test = np.where(pooled, "pooled-null-t", np.where(structural, "none: both at 0 or both at 1", ""))
        return {"estimate_a": a.ravel(), "estimate_b": b.ravel(), "difference": difference.ravel(),
                "se": se.ravel(), "ci_low": (difference - t_crit * se).ravel(),
                "ci_high": (difference + t_crit * se).ravel(), "p_value": p_value.ravel(),
                "_test": test.ravel()}

    def _comparison_frame(self, block: TargetBlock, first: list[int], second: list[int], independent: bool,
                          group_var: str, test: str) -> pd.DataFrame:
        first_idx, second_idx = np.asarray(first, dtype=np.int64), np.asarray(second, dtype=np.int64)
        df = block.df[first_idx] + block.df[second_idx] if independent else block.df[first_idx]
        k = len(self.themes)
        columns = self._difference_rows(block, first_idx, second_idx, independent, df)
        special = columns.pop("_test")
        name_b = [REST if block.target_kind[j] == "rest" else block.target_group[j] for j in second]
        kind = "waves" if independent else "groups"
        return pd.DataFrame({
            "question": block.question,
            "theme": np.tile(self.themes, len(first)),
            "theme_label": np.tile([self.labels[x] for x in self.themes], len(first)),
            "group_var": group_var,
            "group_a": np.repeat([block.target_group[i] for i in first], k),
            "group_b": np.repeat(name_b, k),
            "wave_a": np.repeat(np.asarray([block.target_wave[i] for i in first], dtype=object), k),
            "wave_b": np.repeat(np.asarray([block.target_wave[j] for j in second], dtype=object), k),
            **columns,
            "test": np.where(special == "", test, special),
            "family": self._family_name(block.question, block.group_var, kind),
        })

    def _family_name(self, question: Any, group_var: str, kind: str) -> str:
        if self.family == "table":
            return "table"
        return f"{question} | {group_var} | {kind}"

    def group_comparisons(self) -> pd.DataFrame:
        """Every pair of groups of a group variable, and each group against the rest.

        Per wave and pooled; differences use the covariance of the two domains of
        the same design. A variable with exactly two groups gets only the pair
        (each group against the rest would repeat it). q-values are
        Benjamini-Hochberg within each multiple-testing family (``family`` column).
        """
        frames = []
        for block in self.blocks:
            if not block.groups:
                continue
            first, second = _group_pairs(block)
            frames.append(self._comparison_frame(block, first, second, False, block.group_var, "design-t"))
        return _finish_comparisons(frames)

    def wave_comparisons(self) -> pd.DataFrame:
        """Every pair of waves (later minus earlier) for the totals and every group.

        Waves are independent samples: ``Var = V_a + V_b``, ``df = df_a + df_b``.
        """
        frames = []
        seen_totals: set[Any] = set()
        for block in self.blocks:
            if len(block.waves) < 2:
                continue
            kinds = [("group", g) for g in block.groups]
            if block.question not in seen_totals:
                kinds.insert(0, ("total", ALL))
            seen_totals.add(block.question)
            for kind, group in kinds:
                first, second = _wave_pairs(block, kind, group)
                frames.append(self._comparison_frame(block, first, second, True,
                                                     ALL if kind == "total" else block.group_var,
                                                     "independent-t"))
        return _finish_comparisons(frames)

    def comparisons(self) -> pd.DataFrame:
        """Group and wave comparisons in one table, q-values within each family."""
        groups = self.group_comparisons()
        waves = self.wave_comparisons()
        table = pd.concat([frame for frame in (groups, waves) if len(frame)], ignore_index=True) \
            if len(groups) or len(waves) else groups
        return add_q_values(table, by="family")[COMPARISON_COLUMNS]

    # ------------------------------------------------------------- Rao-Scott
    def group_tests(self) -> pd.DataFrame:
        """Rao-Scott tests of "prevalence differs across the groups of this variable".

        One row per question x group variable x wave (and pooled) x theme (see
        :mod:`textkit.stats.rao_scott`). q-values are Benjamini-Hochberg within
        each family (per question x group variable, or the whole table). A theme
        nobody (or everybody) raised gives no test (NaN).
        """
        frames = []
        for block in self.blocks:
            if len(block.groups) < 2:
                continue
            for wave in block.scopes:
                frame = rao_scott_table(block, wave, self.themes)
                if frame is not None:
                    frame["theme_label"] = [self.labels[x] for x in self.themes]
                    frame["family"] = self._family_name(block.question, block.group_var, "tests")
                    frames.append(frame)
        if not frames:
            return pd.DataFrame(columns=GROUP_TEST_COLUMNS)
        table = pd.concat(frames, ignore_index=True)
        table = add_q_values(table, "f_p_value", "f_q_value", by="family")
        table = add_q_values(table, "chi2_p_value", "chi2_q_value", by="family")
        return table[GROUP_TEST_COLUMNS]


def _pooled_null_se(block: TargetBlock, first: np.ndarray, second: np.ndarray) -> np.ndarray:
    """SE of a difference under "no difference": ``sqrt(pbar (1 - pbar) (1/n_a + 1/n_b))``.

    ``pbar`` is the two domains' pooled weighted share and ``n`` their Kish
    effective sizes; shape (pairs, n_themes).
    """
    w_a, w_b = block.weight[first][:, None], block.weight[second][:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        pooled = (w_a * block.estimate[first] + w_b * block.estimate[second]) / (w_a + w_b)
        kish_a = block.weight[first] ** 2 / block.weight_sq[first]
        kish_b = block.weight[second] ** 2 / block.weight_sq[second]
        return np.sqrt(pooled * (1 - pooled) * (1 / kish_a + 1 / kish_b)[:, None])


def target_totals(block: TargetBlock) -> tuple[np.ndarray, np.ndarray]:
    """Estimated number raising each theme in each target (``sum w y``) and its variance.

    The total of a union of base domains is linear in their scores and weight
    totals (``sum w y = W_d z_d + p_d s_d`` per domain), so its design variance
    comes from the same covariance as the shares. Shapes (n_targets, n_themes).
    """
    totals = block.totals
    member = block.membership.astype(float)
    safe = np.nan_to_num(totals.estimate)                                 # (D, k)
    total = member @ (totals.weight[:, None] * safe)                       # (T, k), scaled weights
    on_scores = member * totals.weight[None, :]
    on_weights = member[None, :, :] * safe.T[:, None, :]
    covariance = _linear_covariance(totals, on_scores, on_weights)         # (k, T, T)
    variance = np.diagonal(covariance, axis1=1, axis2=2).T
    return total * totals.scale, variance * totals.scale ** 2


def _target_index(block: TargetBlock) -> dict[tuple[str, Any, Any], int]:
    """(kind, group, wave) -> target position in ``block``."""
    return {(kind, g, w): i for i, (kind, g, w) in
            enumerate(zip(block.target_kind, block.target_group, block.target_wave, strict=True))}


def _group_pairs(block: TargetBlock) -> tuple[list[int], list[int]]:
    """Targets compared by group comparisons: each pair of groups, then each group vs its rest, per wave."""
    index = _target_index(block)
    first, second = [], []
    against_rest = len(block.groups) != 2
    for wave in block.scopes:
        for a_pos, a in enumerate(block.groups):
            for b in block.groups[a_pos + 1:]:
                first.append(index[("group", a, wave)])
                second.append(index[("group", b, wave)])
            if against_rest:
                first.append(index[("group", a, wave)])
                second.append(index[("rest", a, wave)])
    return first, second


def _wave_pairs(block: TargetBlock, kind: str, group: str) -> tuple[list[int], list[int]]:
    """Targets compared by wave comparisons of one group (or the total): later, earlier."""
    index = _target_index(block)
    first, second = [], []
    for later_pos, later in enumerate(block.waves):
        for earlier in block.waves[:later_pos]:
            first.append(index[(kind, group, later)])
            second.append(index[(kind, group, earlier)])
    return first, second


def _finish_comparisons(frames: list[pd.DataFrame]) -> pd.DataFrame:
    if not frames:
        return pd.DataFrame(columns=COMPARISON_COLUMNS)
    return add_q_values(pd.concat(frames, ignore_index=True), by="family")[COMPARISON_COLUMNS]


# ---------------------------------------------------------------------------
# Building the analysis from a coded table
# ---------------------------------------------------------------------------
def _theme_matrix(coded: pd.DataFrame, themes: Sequence[str]) -> sparse.csr_matrix:
    missing = [t for t in themes if t not in coded.columns]
    if missing:
        raise AnalysisError(f"theme column '{missing[0]}' is not in the coded table", column=missing[0])
    block = coded[list(themes)]
    if block.isna().to_numpy().any():
        column = block.columns[block.isna().any().to_numpy()][0]
        row = int(np.flatnonzero(block[column].isna().to_numpy())[0]) + 1
        raise AnalysisError("theme indicators must be 0 or 1, found a missing value", row=row, column=column)
    values = block.to_numpy(dtype=np.float64) if len(themes) * len(coded) < 5_000_000 \
        else block.to_numpy(dtype=np.int8)
    matrix = sparse.csr_matrix(values)
    matrix.eliminate_zeros()
    if matrix.nnz and not np.all(matrix.data == 1):
        bad = np.flatnonzero(matrix.data != 1)[0]
        row = int(np.searchsorted(matrix.indptr, bad, side="right") - 1)
        column = themes[int(matrix.indices[bad])]
        raise AnalysisError(f"theme indicators must be 0 or 1, found {matrix.data[bad]}", row=row + 1,
                            column=column)
    return matrix.astype(np.float64)


def _themes_and_nets(coded: pd.DataFrame, themes: list[str], nets: dict[str, Sequence[str]]
                     ) -> sparse.csr_matrix:
    """0/1 matrix of ``themes`` then one column per net (the union of its member themes)."""
    for name, members in nets.items():
        if name in themes:
            raise AnalysisError(f"net '{name}' has the name of a theme; give it a name of its own")
        if not members:
            raise AnalysisError(f"net '{name}' has no member themes")
    columns = list(dict.fromkeys([*themes, *(m for members in nets.values() for m in members)]))
    matrix = _theme_matrix(coded, columns)
    position = {c: i for i, c in enumerate(columns)}
    net_columns = [(matrix[:, [position[m] for m in members]].sum(axis=1) > 0).astype(np.float64)
                   for members in nets.values()]
    parts = [matrix[:, [position[t] for t in themes]], *(sparse.csr_matrix(c) for c in net_columns)]
    out = sparse.hstack(parts, format="csr")
    out.eliminate_zeros()
    return out


def is_missing_value(values: pd.Series) -> np.ndarray:
    """Missing group or wave values: empty, or labelled ``(missing)`` by the survey reader."""
    from ..io.readers import MISSING_LABEL

    return (values.isna() | (values.astype(object) == MISSING_LABEL)).to_numpy()


def _group_codes(coded: pd.DataFrame, variable: str) -> tuple[np.ndarray, list[str]]:
    """Group code of every row (-1: no value) and the sorted group labels.

    ``variable`` is a column, or columns joined by ``*`` for crossed groups (a row
    without a value in any part has no crossed value).
    """
    parts = variable.split(CROSS) if variable not in coded.columns and CROSS in variable else [variable]
    for part in parts:
        if part not in coded.columns:
            raise AnalysisError(f"the data has no column '{part}' (asked for as a group); columns "
                                f"are: {', '.join(map(str, coded.columns[:20]))}", column=part)
    if len(parts) == 1:
        return _column_codes(coded, variable)
    coded_parts = [_column_codes(coded, part) for part in parts]
    missing = np.any([codes < 0 for codes, _ in coded_parts], axis=0)
    combined = np.zeros(len(coded), dtype=np.int64)
    for codes, labels in coded_parts:
        combined = combined * (len(labels) + 1) + codes
    combined = np.where(missing, -1, combined)
    present, codes = np.unique(combined[~missing], return_inverse=True)
    out = np.full(len(coded), -1, dtype=np.int64)
    out[~missing] = codes
    labels = []
    for key in present:
        names = []
        for _, part_labels in reversed(coded_parts):
            names.append(part_labels[key % (len(part_labels) + 1)])
            key //= len(part_labels) + 1
        labels.append(CROSS_LABEL.join(reversed(names)))
    return out, labels


def _column_codes(coded: pd.DataFrame, column: str) -> tuple[np.ndarray, list[str]]:
    values = coded[column]
    if isinstance(values.dtype, pd.CategoricalDtype):
        used = set(values.dropna().unique())
        unused = [c for c in values.cat.categories if c not in used]
        if unused:
            raise AnalysisError(f"group '{unused[0]}' has no responses; drop the empty category "
                                "(e.g. frame[col].cat.remove_unused_categories())", column=column)
    values = values.where(~is_missing_value(values))
    codes, uniques = pd.factorize(values, sort=True)
    if len(uniques) == 0:
        raise AnalysisError("the group column has no values (every response is missing)", column=column)
    return codes.astype(np.int64), [str(v) for v in uniques.tolist()]


def drop_missing_wave(coded: pd.DataFrame, wave: str | None, id_column: str = "response_id",
                      *, drop: bool = False) -> tuple[pd.DataFrame, int]:
    """Refuse (default) or leave out the rows without a wave value.

    Returns the rows kept and the number of responses left out. Without ``drop``
    a missing wave raises :class:`AnalysisError` naming the first rows: a blank
    wave would otherwise become a wave of its own.
    """
    if wave is None or wave not in coded.columns:
        return coded, 0
    missing = is_missing_value(coded[wave])
    if not missing.any():
        return coded, 0
    has_id = id_column in coded.columns
    ids = coded[id_column][missing] if has_id else pd.Series(np.flatnonzero(missing) + 1)
    n_responses = int(ids.nunique())
    if drop:
        return coded[~missing].reset_index(drop=True), n_responses
    rows = np.flatnonzero(missing) + 1
    named = ", ".join(str(r) for r in rows[:5]) + (", ..." if rows.size > 5 else "")
    who = f" (responses {', '.join(map(str, pd.unique(ids)[:3]))}{', ...' if n_responses > 3 else ''})" \
        if has_id else ""
    raise AnalysisError(f"{n_responses} response(s) have no wave value, in rows {named}{who}; give them a "
                        "wave, or leave them out with --drop-missing-wave (missing_wave='drop')",
                        column=wave, row=int(rows[0]))


def analyse(coded: pd.DataFrame, themes: Sequence[str], design: SurveyDesign | None = None,
            groups: Sequence[str] = (), wave: str | None = None, *, question_column: str = "question",
            answered_column: str | None = "answered", id_column: str = "response_id",
            method: str = DEFAULT_METHOD, confidence: float = 0.95,
            rule: ReliabilityRule = DEFAULT_RULE, questions: Sequence[Any] | None = None,
            waves: Sequence[Any] | None = None, nets: dict[str, Sequence[str]] | None = None,
            base: str = "answered", totals: bool = False, labels: dict[str, str] | None = None,
            question_text: dict[Any, str] | None = None, family: str = "question-variable",
            missing_wave: str = "refuse") -> SurveyAnalysis:
    """Compute every prevalence and its covariance once; tables come from the result.

    Parameters
    ----------
    coded : pandas.DataFrame
        One row per response x question: ``id_column``, ``question_column``,
        ``answered_column`` (0/1), the group columns and one 0/1 column per theme.
        Without a question column the table is one question, labelled ``"(all)"``.
    themes : sequence of str
        Theme columns to report, in output order.
    design : SurveyDesign, optional
        Built from the same survey (with ``id=``). Default: every response is its
        own PSU with weight 1 (and the wave, if given).
    groups : sequence of str
        Group variables: columns, or columns joined by ``*`` for crossed groups
        (``"market*age_band"``: one group per combination that occurs).
    wave : str, optional
        Wave column; must be the design's wave column (default: the design's).
    question_column, answered_column, id_column : str
        Column names; ``answered_column=None`` counts every row as answered.
    method : {"logit", "korn-graubard", "wilson"}, default "korn-graubard"
    confidence : float, default 0.95
    rule : ReliabilityRule, default BASE_WIDTH_RULE
    questions : sequence, optional
        Only these questions (default: all, in table order).
    waves : sequence, optional
        Only these waves (compared as text); the pooled ``"(all)"`` rows pool the
        chosen waves and are left out when only one is chosen.
    nets : dict of str to list of str, optional
        Named unions of themes ("any facilities problem"): a respondent raises the
        net when they raise any member theme. Estimated like themes, after them.
    base : {"answered", "all"}, default "answered"
        The base of every share: respondents who answered the question, or all
        respondents (a share of all visitors).
    totals : bool, default False
        Add the estimated number raising each theme (``sum w y``) with its SE and
        t interval (meaningful when the weights sum to a population).
    labels, question_text : dict, optional
        Theme (and net) labels and question wording shown beside the ids.
    family : {"question-variable", "table"}, default "question-variable"
        Benjamini-Hochberg family: each question x group variable (group
        comparisons, wave comparisons and Rao-Scott tests apart), or the whole table.
    missing_wave : {"refuse", "drop"}, default "refuse"
        Rows without a wave value: refuse, or leave them out (counted in
        ``SurveyAnalysis.dropped_responses``).

    Returns
    -------
    SurveyAnalysis

    Raises
    ------
    AnalysisError
        Unknown columns, questions, waves or options, a group category without
        responses, rows whose response is not in the design, theme values other
        than 0/1, a missing wave value (unless dropped).
    """
    method = _method_name(method)
    _check_options(confidence, base, family, missing_wave)
    themes = [str(t) for t in themes]
    nets = {str(k): [str(m) for m in v] for k, v in (nets or {}).items()}
    if not themes and not nets:
        raise AnalysisError("no theme columns to estimate")
    groups = list(groups)
    _check_columns(coded, [g for g in groups if g in coded.columns or CROSS not in g], wave, answered_column)
    coded, dropped = drop_missing_wave(coded, wave or (design.columns.get("wave") if design else None),
                                       id_column, drop=missing_wave == "drop")
    if design is None:
        has_id = id_column in coded.columns
        design = SurveyDesign.from_frame(coded, wave=wave, id=id_column if has_id else None)
    unit = _design_units(coded, design, wave, id_column)
    Y = _themes_and_nets(coded, themes, nets)
    if answered_column is None or base == "all":
        answered = np.ones(len(coded), dtype=bool)
    else:
        answered = pd.to_numeric(coded[answered_column], errors="coerce").fillna(0).to_numpy() > 0
    question_codes, question_list = _question_codes(coded, question_column, questions)
    wave_choice = _wave_choice(design, waves)
    group_codes = {variable: _group_codes(coded, variable) for variable in groups}
    blocks: list[TargetBlock] = []
    for q_code, question in enumerate(question_list):
        in_question = (question_codes == q_code) & answered
        for variable in groups if groups else [ALL]:
            codes = group_codes.get(variable, (np.zeros(len(coded), dtype=np.int64), []))
            blocks.append(_build_block(Y, unit, design, question, in_question, variable, *codes,
                                       wave_choice=wave_choice))
    return SurveyAnalysis(blocks, [*themes, *nets], design, method, confidence, rule, labels=labels,
                          question_text=question_text, family=family, totals=totals, base=base,
                          dropped_responses=dropped)


def _check_options(confidence: float, base: str, family: str, missing_wave: str) -> None:
    if not 0 < confidence < 1:
        raise AnalysisError(f"confidence must be between 0 and 1, not {confidence}")
    for name, value, allowed in (("base", base, BASES), ("family", family, FAMILIES),
                                 ("missing_wave", missing_wave, ("refuse", "drop"))):
        if value not in allowed:
            raise AnalysisError(f"unknown {name} '{value}'; choose one of {', '.join(allowed)}")


def _question_codes(coded: pd.DataFrame, question_column: str, questions: Sequence[Any] | None
                    ) -> tuple[np.ndarray, list[Any]]:
    """Question code of every row (-1: not asked for) and the questions to report."""
    if question_column not in coded.columns:
        if questions:
            raise AnalysisError("the table has no question column, so questions cannot be chosen",
                                column=question_column)
        return np.zeros(len(coded), dtype=np.int64), [ALL]
    codes, found = pd.factorize(coded[question_column], sort=False)
    found = list(found)
    if not questions:
        return codes, found
    by_text = {str(q): i for i, q in enumerate(found)}
    unknown = [q for q in questions if str(q) not in by_text]
    if unknown:
        raise AnalysisError(f"unknown question '{unknown[0]}'; the questions are: "
                            f"{', '.join(map(str, found))}", column=question_column)
    chosen = list(dict.fromkeys(by_text[str(q)] for q in questions))
    remap = np.full(len(found), -1, dtype=np.int64)
    remap[chosen] = np.arange(len(chosen))
    return np.where(codes >= 0, remap[codes], -1), [found[i] for i in chosen]


def _wave_choice(design: SurveyDesign, waves: Sequence[Any] | None) -> list[int]:
    """Codes of the waves to report (all when ``waves`` is empty)."""
    if not waves:
        return list(range(len(design.wave_labels)))
    if not design.wave_labels:
        raise AnalysisError("waves were chosen but the data has no wave column")
    by_text = {str(w): i for i, w in enumerate(design.wave_labels)}
    unknown = [w for w in waves if str(w) not in by_text]
    if unknown:
        raise AnalysisError(f"unknown wave '{unknown[0]}'; the waves are: "
                            f"{', '.join(map(str, design.wave_labels))}", column=design.columns.get("wave"))
    return sorted(dict.fromkeys(by_text[str(w)] for w in waves))


def _check_columns(coded: pd.DataFrame, groups: list[str], wave: str | None,
                   answered_column: str | None) -> None:
    for column in [*groups, *([wave] if wave else [])]:
        if column not in coded.columns:
            raise AnalysisError(f"the data has no column '{column}' (asked for as a group or wave); columns "
                                f"are: {', '.join(map(str, coded.columns[:20]))}", column=column)
    if answered_column is not None and answered_column not in coded.columns:
        raise AnalysisError("the answered column is not in the coded table", column=answered_column)


def _design_units(coded: pd.DataFrame, design: SurveyDesign, wave: str | None, id_column: str) -> np.ndarray:
    """Design unit (response) of every row of ``coded``, shape (n_rows,)."""
    design_wave = design.columns.get("wave")
    if wave is not None and wave != design_wave:
        raise AnalysisError(f"the design was built with wave column '{design_wave}', not '{wave}'; build it "
                            f"with SurveyDesign.from_frame(..., wave='{wave}')", column=wave)
    if design.ids is not None and id_column in coded.columns:
        unit = design.unit_index(coded[id_column])
        if (unit < 0).any():
            row = int(np.flatnonzero(unit < 0)[0])
            raise AnalysisError(f"response '{coded[id_column].iloc[row]}' is not in the survey design",
                                row=row + 1, column=id_column)
        return unit
    if len(coded) == design.n_units:
        return np.arange(len(coded))
    raise AnalysisError(f"the coded table has {len(coded)} rows but the design {design.n_units} "
                        f"responses; give the '{id_column}' column and build the design with id=")


def _build_block(Y: sparse.csr_matrix, unit: np.ndarray, design: SurveyDesign, question: Any,
                 in_question: np.ndarray, variable: str, codes: np.ndarray, labels: list[str],
                 *, wave_choice: list[int]) -> TargetBlock:
    """Base domains (group x wave within the question), their totals and every target's estimate."""
    n_waves = design.n_waves
    if variable == ALL:
        base_groups = 1  # every row sits in the pseudo group "no group value"
    else:
        codes = np.where(codes < 0, len(labels), codes)
        base_groups = len(labels) + int((codes[in_question] == len(labels)).any())
        if base_groups == len(labels):
            codes = np.where(codes == len(labels), -1, codes)
    wave_codes = design.wave[unit] if design.wave is not None else np.zeros(len(unit), dtype=np.int64)
    domain = np.where(in_question & (codes >= 0), codes * n_waves + wave_codes, -1)
    totals = domain_totals(Y, unit, domain, base_groups * n_waves, design)
    block = TargetBlock(question=question, group_var=variable, groups=labels, n_base_groups=base_groups,
                        waves=[design.wave_labels[w] for w in wave_choice], totals=totals)
    _add_targets(block, n_waves, design.df, design.wave_df().astype(float), wave_choice)
    (block.estimate, block.covariance, block.weight, block.count,
     block.weight_sq) = union_estimates(totals, block.membership)
    block.count_yes = block.membership @ totals.count_yes
    return block


def _add_targets(block: TargetBlock, n_waves: int, design_df: int, wave_df: np.ndarray,
                 wave_choice: list[int]) -> None:
    """Targets of a block: every group (and the total) per chosen wave and pooled, and each group's rest."""
    g_named = len(block.groups)
    n_domains = block.n_base_groups * n_waves
    base_group = np.arange(n_domains) // n_waves
    base_wave = np.arange(n_domains) % n_waves
    scopes: list[tuple[Any, np.ndarray, float]] = []
    if len(wave_choice) != 1:
        chosen = np.isin(base_wave, wave_choice) if wave_choice else np.ones(n_domains, dtype=bool)
        pooled_df = float(wave_df[wave_choice].sum()) if len(wave_choice) < n_waves and wave_choice \
            else float(design_df)
        scopes.append((ALL, chosen, pooled_df))
    scopes += [(block.waves[i], base_wave == w, float(wave_df[w])) for i, w in enumerate(wave_choice)]
    rows, kinds, groups, waves, dfs = [], [], [], [], []
    for label, in_scope, df in scopes:
        rows.append(in_scope)
        kinds.append("total")
        groups.append(ALL)
        waves.append(label)
        dfs.append(df)
        for g in range(g_named):
            in_group = base_group == g
            for kind, member in (("group", in_scope & in_group), ("rest", in_scope & ~in_group)):
                rows.append(member)
                kinds.append(kind)
                groups.append(block.groups[g])
                waves.append(label)
                dfs.append(df)
    block.membership = np.asarray(rows, dtype=float)
    block.target_kind, block.target_group, block.target_wave = kinds, groups, waves
    block.df = np.asarray(dfs)
    block.scopes = [label for label, _, _ in scopes]


# ---------------------------------------------------------------------------
# Public one-call functions
# ---------------------------------------------------------------------------
def prevalence(coded: pd.DataFrame, themes: Sequence[str], design: SurveyDesign | None = None,
               groups: Sequence[str] = (), wave: str | None = None, **options: Any) -> pd.DataFrame:
    """Weighted prevalence table (see :func:`analyse` for the parameters and :data:`PREVALENCE_COLUMNS`)."""
    return analyse(coded, themes, design, groups, wave, **options).prevalence()


def compare_groups(coded: pd.DataFrame, themes: Sequence[str], design: SurveyDesign | None = None,
                   groups: Sequence[str] = (), wave: str | None = None, **options: Any) -> pd.DataFrame:
    """Group pairs and group vs rest per group variable (see :meth:`SurveyAnalysis.group_comparisons`)."""
    return analyse(coded, themes, design, groups, wave, **options).group_comparisons()


def compare_waves(coded: pd.DataFrame, themes: Sequence[str], design: SurveyDesign | None = None,
                  groups: Sequence[str] = (), wave: str | None = None, **options: Any) -> pd.DataFrame:
    """Wave against wave as independent samples (see :meth:`SurveyAnalysis.wave_comparisons`)."""
    return analyse(coded, themes, design, groups, wave, **options).wave_comparisons()


def group_tests(coded: pd.DataFrame, themes: Sequence[str], design: SurveyDesign | None = None,
                groups: Sequence[str] = (), wave: str | None = None, **options: Any) -> pd.DataFrame:
    """Rao-Scott tests across the groups of each variable (see :meth:`SurveyAnalysis.group_tests`)."""
    return analyse(coded, themes, design, groups, wave, **options).group_tests()
