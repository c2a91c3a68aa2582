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
* Intervals (:func:`confidence_interval`): ``logit``, ``korn-graubard`` (beta)
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
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import sparse, stats

from ..errors import AnalysisError
from .design import SurveyDesign
from .domains import DomainTotals, TargetBlock, domain_totals, union_estimates  # noqa: F401 (re-exported)
from .rao_scott import rao_scott_table

#: Label of totals (group variable and group) and pooled waves.
ALL = "(all)"
#: Label of "the rest of the sample" in group comparisons.
REST = "(rest)"
#: Interval methods accepted by :func:`confidence_interval` (``"beta"`` is an alias).
CI_METHODS: tuple[str, ...] = ("logit", "korn-graubard", "wilson")
#: Default interval method, chosen by the coverage study (benchmarks/coverage.py).
DEFAULT_METHOD = "korn-graubard"

PREVALENCE_COLUMNS = ["question", "theme", "group_var", "group", "wave", "n", "weighted_n", "n_eff",
                      "estimate", "se", "ci_low", "ci_high", "df", "deff", "method", "flag"]
COMPARISON_COLUMNS = ["question", "theme", "group_var", "group_a", "group_b", "wave_a", "wave_b",
                      "estimate_a", "estimate_b", "difference", "se", "ci_low", "ci_high", "p_value",
                      "q_value", "test"]
GROUP_TEST_COLUMNS = ["question", "theme", "group_var", "wave", "n_groups", "n", "pearson_chi2",
                      "mean_deff", "f_statistic", "f_df_num", "f_df_den", "f_p_value", "f_q_value",
                      "chi2_first_order", "chi2_df", "chi2_p_value", "chi2_q_value"]


# ---------------------------------------------------------------------------
# Publishing rules
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ReliabilityRule:
    """A rule that flags estimates ``ok``, ``caution`` or ``suppress``.

    Parameters
    ----------
    name : str
        Short name (used by the CLI's ``--rule``).
    origin : str
        Where the thresholds come from.
    min_n : int, default 30
        Unweighted base below this: ``suppress``.
    min_effective_n : float or None, default None
        Design effective sample size (the ``n`` behind the interval: ``p(1-p)/V``
        capped at ``n``, or the Kish n at 0 and 1) below this: ``suppress``.
    suppress_rse, caution_rse : float or None
        Relative standard error at or above this: ``suppress`` / ``caution``. The
        RSE is taken on the smaller of the share and its complement,
        ``se / min(p, 1 - p)``, so a share near 0 and its complement near 1 are
        judged alike; estimates of exactly 0 or 1 (SE 0) are not judged by RSE.
    max_ci_width : float or None
        Interval width at or above this: ``suppress``.
    max_relative_ci_width : float or None
        Interval width over the smaller of ``p`` and ``1 - p`` above this:
        ``suppress``, but only when the width is above ``relative_width_floor``
        (a narrow interval around a small share is informative).
    relative_width_floor : float, default 0.05
    min_df : int or None
        Degrees of freedom below this: ``caution``.
    caution_at_bounds : bool, default True
        Estimates of exactly 0 or 1 are ``caution``: their SE is 0 and says nothing;
        only the interval (from the Kish effective n) carries the uncertainty.
    """

    name: str
    origin: str
    min_n: int = 30
    min_effective_n: float | None = None
    suppress_rse: float | None = None
    caution_rse: float | None = 0.30
    max_ci_width: float | None = None
    max_relative_ci_width: float | None = None
    relative_width_floor: float = 0.05
    min_df: int | None = None
    caution_at_bounds: bool = True

    def flags(self, n: Any, estimate: Any, se: Any, ci_low: Any, ci_high: Any, df: Any,
              effective_n: Any) -> np.ndarray:
        """Flag each estimate.

        Parameters
        ----------
        n, estimate, se, ci_low, ci_high, df, effective_n : array-like of shape (m,)
            Unweighted base, estimate (0-1), SE, interval, degrees of freedom and
            design effective n.

        Returns
        -------
        ndarray of str of shape (m,)
            ``"ok"``, ``"caution"`` or ``"suppress"``; a missing estimate is ``suppress``.
        """
        n = np.asarray(n, float)
        p = np.asarray(estimate, float)
        se = np.asarray(se, float)
        width = np.asarray(ci_high, float) - np.asarray(ci_low, float)
        df = np.asarray(df, float)
        effective_n = np.asarray(effective_n, float)
        with np.errstate(divide="ignore", invalid="ignore"):
            smaller = np.minimum(p, 1.0 - p)
            rse = np.where(smaller > 0, se / smaller, np.nan)
            relative_width = np.where(smaller > 0, width / smaller, np.inf)
        suppress = ~np.isfinite(p) | (n < self.min_n)
        caution = np.zeros(p.shape, dtype=bool)
        if self.min_effective_n is not None:
            suppress |= effective_n < self.min_effective_n
        if self.suppress_rse is not None:
            suppress |= rse >= self.suppress_rse
        if self.max_ci_width is not None:
            suppress |= width >= self.max_ci_width
        if self.max_relative_ci_width is not None:
            suppress |= (width > self.relative_width_floor) & (relative_width > self.max_relative_ci_width)
        if self.caution_rse is not None:
            caution |= rse >= self.caution_rse
        if self.min_df is not None:
            caution |= df < self.min_df
        if self.caution_at_bounds:
            caution |= (p == 0) | (p == 1)
        return np.where(suppress, "suppress", np.where(caution, "caution", "ok")).astype(object)


#: Default rule, after the US National Center for Health Statistics: the classic
#: presentation rule (unweighted base below 30 not shown, RSE of 30% or more
#: flagged) with the tests of NCHS's 2017 standard for proportions, which is built
#: on Korn-Graubard intervals (effective n below 30, interval width 0.30 or more, or
#: width above 0.05 and relative width above 130%: suppressed; df below 8: flagged).
NCHS_LIKE = ReliabilityRule(
    name="nchs-like",
    origin="US NCHS: base below 30 suppressed, RSE 30%+ flagged; NCHS 2017 proportions standard "
           "(effective n < 30, CI width >= 0.30, relative CI width > 130% suppressed; df < 8 flagged)",
    min_n=30, min_effective_n=30, caution_rse=0.30, max_ci_width=0.30, max_relative_ci_width=1.30,
    relative_width_floor=0.05, min_df=8,
)
#: After the Australian Bureau of Statistics: RSE 25-50% "use with caution", over 50% not reliable.
ABS_LIKE = ReliabilityRule(
    name="abs-like", origin="Australian Bureau of Statistics: RSE 25%+ annotated, 50%+ too unreliable",
    min_n=0, caution_rse=0.25, suppress_rse=0.50,
)
#: After Statistics Canada (secondary source): CV above 16.5% caution, above 33.3% withheld.
STATCAN_LIKE = ReliabilityRule(
    name="statcan-like", origin="Statistics Canada (secondary source): CV 16.5%+ caution, 33.3%+ withheld",
    min_n=0, caution_rse=0.165, suppress_rse=0.333,
)
#: Shipped rules by name.
RULES: dict[str, ReliabilityRule] = {rule.name: rule for rule in (NCHS_LIKE, ABS_LIKE, STATCAN_LIKE)}
DEFAULT_RULE = NCHS_LIKE


# ---------------------------------------------------------------------------
# Confidence intervals
# ---------------------------------------------------------------------------
def _method_name(method: str) -> str:
    name = {"beta": "korn-graubard", "kg": "korn-graubard"}.get(method, method)
    if name not in CI_METHODS:
        raise AnalysisError(f"unknown interval method '{method}'; choose one of {', '.join(CI_METHODS)}")
    return name


def wilson_interval(estimate: Any, n: Any, critical: Any) -> tuple[np.ndarray, np.ndarray]:
    """Wilson score interval for a share ``estimate`` on ``n`` (possibly effective) units.

    Parameters
    ----------
    estimate, n, critical : array-like
        Share (0-1), sample size and critical value (normal or t quantile).

    Returns
    -------
    low, high : ndarray
    """
    p = np.asarray(estimate, float)
    n = np.asarray(n, float)
    z2 = np.asarray(critical, float) ** 2
    denominator = 1.0 + z2 / n
    centre = (p + z2 / (2 * n)) / denominator
    half = np.sqrt(z2) * np.sqrt(p * (1 - p) / n + z2 / (4 * n * n)) / denominator
    return np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)


def beta_interval(estimate: Any, n: Any, confidence: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Clopper-Pearson (beta) interval with a possibly non-integer ``n`` and count ``n * estimate``.

    Defined at 0 (lower end 0) and 1 (upper end 1).
    """
    p = np.asarray(estimate, float)
    n = np.asarray(n, float)
    alpha = 1.0 - confidence
    x = p * n
    with np.errstate(invalid="ignore", divide="ignore"):
        low = np.where(p <= 0, 0.0, stats.beta.ppf(alpha / 2, np.maximum(x, 1e-300), n - x + 1))
        high = np.where(p >= 1, 1.0, stats.beta.ppf(1 - alpha / 2, x + 1, np.maximum(n - x, 1e-300)))
    bad = ~np.isfinite(p) | ~(n > 0)
    return np.where(bad, np.nan, low), np.where(bad, np.nan, high)


def confidence_interval(estimate: Any, variance: Any, n: Any, kish_n: Any, df: Any,
                        method: str = DEFAULT_METHOD, confidence: float = 0.95
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Design-based confidence interval of survey proportions (vectorised).

    Parameters
    ----------
    estimate, variance : array-like of shape (m,)
        Share (0-1) and its design variance.
    n : array-like of shape (m,)
        Unweighted base.
    kish_n : array-like of shape (m,)
        Kish effective n of the domain, used where the design effective n is
        undefined (estimate 0 or 1, or variance 0).
    df : array-like of shape (m,)
        Design degrees of freedom.
    method : {"logit", "korn-graubard", "wilson"}
        ``logit``: ``logit(p) +- t_df se / (p (1 - p))`` back-transformed.
        ``korn-graubard`` (Korn & Graubard 1998): Clopper-Pearson on the effective
        n ``p(1-p)/V`` (capped at ``n``) times ``(t_{n-1} / t_df)^2``.
        ``wilson``: Wilson score interval on the effective n with ``t_df``.
    confidence : float, default 0.95

    Returns
    -------
    low, high : ndarray of shape (m,)
    method_used : ndarray of str of shape (m,)
        The method actually used (``logit`` falls back to ``korn-graubard`` at 0 and 1).
    effective_n : ndarray of shape (m,)
        The design effective n behind the interval (before the df adjustment).
    """
    name = _method_name(method)
    p = np.asarray(estimate, float)
    v = np.asarray(variance, float)
    n = np.asarray(n, float)
    df = np.asarray(df, float)
    alpha = 1.0 - confidence
    degenerate = (p <= 0) | (p >= 1) | ~(v > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        design_n = np.where(degenerate, np.asarray(kish_n, float), np.minimum(p * (1 - p) / v, n))
        t_df = stats.t.ppf(1 - alpha / 2, df)
    if name == "wilson":
        low, high = wilson_interval(p, design_n, t_df)
        used = np.full(p.shape, "wilson", dtype=object)
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            t_n = stats.t.ppf(1 - alpha / 2, np.maximum(n - 1, 1))
            ratio = np.where(n >= 2, (t_n / t_df) ** 2, 1.0)
        low, high = beta_interval(p, design_n * ratio, confidence)
        used = np.full(p.shape, "korn-graubard", dtype=object)
        if name == "logit":
            with np.errstate(divide="ignore", invalid="ignore"):
                centre = np.log(p / (1 - p))
                half = t_df * np.sqrt(v) / (p * (1 - p))
                logit_low = 1 / (1 + np.exp(-(centre - half)))
                logit_high = 1 / (1 + np.exp(-(centre + half)))
            low = np.where(degenerate, low, logit_low)
            high = np.where(degenerate, high, logit_high)
            used = np.where(degenerate, "korn-graubard", "logit").astype(object)
    missing = ~np.isfinite(p)
    low = np.where(missing, np.nan, low)
    high = np.where(missing, np.nan, high)
    return low, high, used, design_n


# ---------------------------------------------------------------------------
# Tables
# ---------------------------------------------------------------------------
def add_q_values(frame: pd.DataFrame, p_column: str = "p_value", q_column: str = "q_value") -> pd.DataFrame:
    """Benjamini-Hochberg q-values over every row of ``frame`` with a p-value (statsmodels)."""
    from statsmodels.stats.multitest import multipletests

    p = frame[p_column].to_numpy(dtype=float)
    q = np.full(p.shape, np.nan)
    known = np.isfinite(p)
    if known.any():
        q[known] = multipletests(p[known], method="fdr_bh")[1]
    frame = frame.copy()
    frame[q_column] = q
    return frame


class SurveyAnalysis:
    """Prevalence of every question x theme x group x wave, ready for tables.

    Build it with :func:`analyse`; call :meth:`prevalence`, :meth:`group_comparisons`,
    :meth:`wave_comparisons`, :meth:`comparisons` and :meth:`group_tests`.
    """

    def __init__(self, blocks: list[TargetBlock], themes: list[str], design: SurveyDesign, method: str,
                 confidence: float, rule: ReliabilityRule) -> None:
        self.blocks = blocks
        self.themes = themes
        self.design = design
        self.method = method
        self.confidence = confidence
        self.rule = rule

    # -------------------------------------------------------------- prevalence
    def prevalence(self) -> pd.DataFrame:
        """One row per question x theme x group variable x group x wave (totals included).

        Columns: ``question, theme, group_var, group, wave, n, weighted_n, n_eff,
        estimate, se, ci_low, ci_high, df, deff, method, flag``.
        """
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
            return pd.DataFrame(columns=PREVALENCE_COLUMNS)
        return self._add_precision(pd.concat(frames, ignore_index=True))[PREVALENCE_COLUMNS]

    def _estimate_rows(self, block: TargetBlock, keep: np.ndarray) -> pd.DataFrame:
        """Targets ``keep`` of ``block`` x every theme: ids, bases, estimate and variance."""
        k = len(self.themes)
        t = keep.size
        variance = np.diagonal(block.covariance, axis1=1, axis2=2)[:, keep].T   # (t, k)
        return pd.DataFrame({
            "question": block.question,
            "theme": np.tile(self.themes, t),
            "group_var": np.repeat([ALL if block.target_kind[i] == "total" else block.group_var
                                    for i in keep], k),
            "group": np.repeat([block.target_group[i] for i in keep], k),
            "wave": np.repeat(np.asarray([block.target_wave[i] for i in keep], dtype=object), k),
            "n": np.repeat(block.count[keep], k).astype(np.int64),
            "weighted_n": np.repeat(block.weight[keep], k),
            "_weight_sq": np.repeat(block.weight_sq[keep], k),
            "estimate": block.estimate[keep].ravel(),
            "_variance": np.maximum(variance.ravel(), 0.0),
            "df": np.repeat(block.df[keep], k),
        })

    def _add_precision(self, table: pd.DataFrame) -> pd.DataFrame:
        """Effective n, SE, design effect, interval, method and flag of every row."""
        with np.errstate(divide="ignore", invalid="ignore"):
            table["n_eff"] = table["weighted_n"] ** 2 / table["_weight_sq"]
            p = table["estimate"].to_numpy()
            v = table["_variance"].to_numpy()
            table["se"] = np.sqrt(v)
            srs = p * (1 - p) / (table["n"].to_numpy() - 1)
            table["deff"] = np.where(srs > 0, v / srs, np.nan)
        low, high, used, design_n = confidence_interval(
            p, v, table["n"].to_numpy(), table["n_eff"].to_numpy(), table["df"].to_numpy(),
            self.method, self.confidence)
        table["ci_low"], table["ci_high"], table["method"] = low, high, used
        table["flag"] = self.rule.flags(table["n"], p, table["se"], low, high, table["df"], design_n)
        table.loc[~np.isfinite(p), "method"] = ""
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
        se = np.sqrt(var)
        k = len(self.themes)
        dfs = np.repeat(df, k).reshape(-1, k)
        t_crit = stats.t.ppf(1 - (1 - self.confidence) / 2, dfs)
        with np.errstate(divide="ignore", invalid="ignore"):
            p_value = 2 * stats.t.sf(np.abs(difference) / se, dfs)
        p_value = np.where((se == 0) & (difference == 0), 1.0, np.where(se > 0, p_value, np.nan))
        p_value = np.where(np.isfinite(difference), p_value, np.nan)
        return {"estimate_a": a.ravel(), "estimate_b": b.ravel(), "difference": difference.ravel(),
                "se": se.ravel(), "ci_low": (difference - t_crit * se).ravel(),
                "ci_high": (difference + t_crit * se).ravel(), "p_value": p_value.ravel()}

    def _comparison_frame(self, block: TargetBlock, first: list[int], second: list[int], independent: bool,
                          group_var: str, test: str) -> pd.DataFrame:
        first_idx, second_idx = np.asarray(first, dtype=np.int64), np.asarray(second, dtype=np.int64)
        df = block.df[first_idx] + block.df[second_idx] if independent else block.df[first_idx]
        k = len(self.themes)
        columns = self._difference_rows(block, first_idx, second_idx, independent, df)
        name_b = [REST if block.target_kind[j] == "rest" else block.target_group[j] for j in second]
        frame = pd.DataFrame({
            "question": block.question,
            "theme": np.tile(self.themes, len(first)),
            "group_var": group_var,
            "group_a": np.repeat([block.target_group[i] for i in first], k),
            "group_b": np.repeat(name_b, k),
            "wave_a": np.repeat(np.asarray([block.target_wave[i] for i in first], dtype=object), k),
            "wave_b": np.repeat(np.asarray([block.target_wave[j] for j in second], dtype=object), k),
            **columns,
            "test": test,
        })
        return frame

    def group_comparisons(self) -> pd.DataFrame:
        """Every pair of groups of a group variable, and each group against the rest.

        Per wave and pooled; differences use the covariance of the two domains of
        the same design. q-values are Benjamini-Hochberg over this table.
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
        """Group and wave comparisons in one table, q-values over the whole table."""
        groups = self.group_comparisons()
        waves = self.wave_comparisons()
        table = pd.concat([frame for frame in (groups, waves) if len(frame)], ignore_index=True) \
            if len(groups) or len(waves) else groups
        return add_q_values(table)[COMPARISON_COLUMNS]

    # ------------------------------------------------------------- Rao-Scott
    def group_tests(self) -> pd.DataFrame:
        """Rao-Scott tests of "prevalence differs across the groups of this variable".

        For each question x group variable x wave (and pooled) x theme, the theme
        (yes/no) x group table of weighted shares: Pearson's X^2 on the table
        rescaled to the unweighted n, the generalised design effects ``Delta``
        from the design covariance of the cell shares (Rao & Scott 1981, 1984),
        the second-order F = X^2 / tr(Delta) on (d0, d0 * df) with
        d0 = tr(Delta)^2 / tr(Delta^2), and the first-order X^2 / mean(delta) on
        chi^2 with (groups - 1) df. q-values are Benjamini-Hochberg over the table.
        A theme nobody (or everybody) raised gives no test (NaN).
        """
        frames = []
        for block in self.blocks:
            if len(block.groups) < 2:
                continue
            for wave in [ALL, *block.waves]:
                frame = rao_scott_table(block, wave, self.themes)
                if frame is not None:
                    frames.append(frame)
        if not frames:
            return pd.DataFrame(columns=GROUP_TEST_COLUMNS)
        table = pd.concat(frames, ignore_index=True)
        table = add_q_values(table, "f_p_value", "f_q_value")
        table = add_q_values(table, "chi2_p_value", "chi2_q_value")
        return table[GROUP_TEST_COLUMNS]


def _target_index(block: TargetBlock) -> dict[tuple[str, Any, Any], int]:
    """(kind, group, wave) -> target position in ``block``."""
    return {(kind, g, w): i for i, (kind, g, w) in
            enumerate(zip(block.target_kind, block.target_group, block.target_wave, strict=True))}


def _group_pairs(block: TargetBlock) -> tuple[list[int], list[int]]:
    """Targets compared by group comparisons: each pair of groups, then each group vs its rest, per wave."""
    index = _target_index(block)
    first, second = [], []
    for wave in [ALL, *block.waves]:
        for a_pos, a in enumerate(block.groups):
            for b in block.groups[a_pos + 1:]:
                first.append(index[("group", a, wave)])
                second.append(index[("group", b, wave)])
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
    return add_q_values(pd.concat(frames, ignore_index=True))[COMPARISON_COLUMNS]


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


def _group_codes(coded: pd.DataFrame, column: str) -> tuple[np.ndarray, list[str]]:
    values = coded[column]
    if isinstance(values.dtype, pd.CategoricalDtype):
        used = set(values.dropna().unique())
        unused = [c for c in values.cat.categories if c not in used]
        if unused:
            raise AnalysisError(f"group '{unused[0]}' has no responses; drop the empty category "
                                "(e.g. frame[col].cat.remove_unused_categories())", column=column)
    codes, uniques = pd.factorize(values, sort=True)
    if len(uniques) == 0:
        raise AnalysisError("the group column has no values (every response is missing)", column=column)
    return codes.astype(np.int64), [str(v) for v in uniques.tolist()]


def analyse(coded: pd.DataFrame, themes: Sequence[str], design: SurveyDesign | None = None,
            groups: Sequence[str] = (), wave: str | None = None, *, question_column: str = "question",
            answered_column: str | None = "answered", id_column: str = "response_id",
            method: str = DEFAULT_METHOD, confidence: float = 0.95,
            rule: ReliabilityRule = DEFAULT_RULE) -> SurveyAnalysis:
    """Compute every prevalence and its covariance once; tables come from the result.

    Parameters
    ----------
    coded : pandas.DataFrame
        One row per response x question: ``id_column``, ``question_column``,
        ``answered_column`` (0/1), the group columns and one 0/1 column per theme.
        Without a question column the table is one question, labelled ``"(all)"``.
    themes : sequence of str
        Theme columns, in output order.
    design : SurveyDesign, optional
        Built from the same survey (with ``id=``). Default: every response is its
        own PSU with weight 1 (and the wave, if given).
    groups : sequence of str
        Group variable columns.
    wave : str, optional
        Wave column; must be the design's wave column (default: the design's).
    question_column, answered_column, id_column : str
        Column names; ``answered_column=None`` counts every row as answered.
    method : {"logit", "korn-graubard", "wilson"}, default "korn-graubard"
    confidence : float, default 0.95
    rule : ReliabilityRule, default NCHS_LIKE

    Returns
    -------
    SurveyAnalysis

    Raises
    ------
    AnalysisError
        Unknown columns, a group category without responses, rows whose response
        is not in the design, theme values other than 0/1.
    """
    method = _method_name(method)
    if not 0 < confidence < 1:
        raise AnalysisError(f"confidence must be between 0 and 1, not {confidence}")
    themes = [str(t) for t in themes]
    if not themes:
        raise AnalysisError("no theme columns to estimate")
    groups = list(groups)
    _check_columns(coded, groups, wave, answered_column)
    if design is None:
        has_id = id_column in coded.columns
        design = SurveyDesign.from_frame(coded, wave=wave, id=id_column if has_id else None)
    unit = _design_units(coded, design, wave, id_column)
    Y = _theme_matrix(coded, themes)
    if answered_column is None:
        answered = np.ones(len(coded), dtype=bool)
    else:
        answered = pd.to_numeric(coded[answered_column], errors="coerce").fillna(0).to_numpy() > 0
    if question_column in coded.columns:
        question_codes, questions = pd.factorize(coded[question_column], sort=False)
        questions = list(questions)
    else:
        question_codes, questions = np.zeros(len(coded), dtype=np.int64), [ALL]
    group_codes = {column: _group_codes(coded, column) for column in groups}
    blocks: list[TargetBlock] = []
    for q_code, question in enumerate(questions):
        in_question = (question_codes == q_code) & answered
        for variable in groups if groups else [ALL]:
            codes = group_codes.get(variable, (np.zeros(len(coded), dtype=np.int64), []))
            blocks.append(_build_block(Y, unit, design, question, in_question, variable, *codes))
    return SurveyAnalysis(blocks, themes, design, method, confidence, rule)


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
                 in_question: np.ndarray, variable: str, codes: np.ndarray, labels: list[str]) -> TargetBlock:
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
                        waves=list(design.wave_labels), totals=totals)
    _add_targets(block, n_waves, design.df, design.wave_df().astype(float))
    (block.estimate, block.covariance, block.weight, block.count,
     block.weight_sq) = union_estimates(totals, block.membership)
    return block


def _add_targets(block: TargetBlock, n_waves: int, design_df: int, wave_df: np.ndarray) -> None:
    """Targets of a block: every group (and the total) per wave and pooled, and each group's rest."""
    g_named = len(block.groups)
    n_domains = block.n_base_groups * n_waves
    base_group = np.arange(n_domains) // n_waves
    base_wave = np.arange(n_domains) % n_waves
    scopes: list[tuple[Any, np.ndarray, float]] = [(ALL, np.ones(n_domains, dtype=bool), float(design_df))]
    if block.waves:
        scopes += [(label, base_wave == w, float(wave_df[w])) for w, label in enumerate(block.waves)]
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
