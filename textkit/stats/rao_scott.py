"""Rao-Scott tests of "prevalence differs across the groups of this variable".

For one question x group variable x wave and every theme at once: the theme
(yes/no) x group table of weighted cell shares and their design covariance
(:func:`cell_shares`), then Pearson's X^2 on the table rescaled to the
unweighted n and the generalised design effects ``Delta`` (Rao & Scott 1981,
1984; Thomas & Rao 1987): the second-order F = X^2 / tr(Delta) on
(d0, d0 * df) with d0 = tr(Delta)^2 / tr(Delta^2), and the first-order
X^2 / mean(delta) on chi^2 with (groups - 1) df (:func:`rao_scott_statistics`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from .domains import TargetBlock, _linear_covariance


@dataclass
class CellShares:
    """The theme x group table of one test, all themes at once.

    Attributes
    ----------
    cells : ndarray of shape (n_themes, 2 * r)
        Weighted cell shares, ordered ``column * r + row`` (yes cells, then no cells).
    covariance : ndarray of shape (n_themes, 2 * r, 2 * r)
        Design covariance of the cell shares.
    n_total : float
        Unweighted respondents in the table.
    """

    cells: np.ndarray
    covariance: np.ndarray
    n_total: float


def group_rows(block: TargetBlock, wave: Any) -> list[int]:
    """Targets of the groups of ``block`` in ``wave`` that hold some weight."""
    return [i for i, (kind, w) in enumerate(zip(block.target_kind, block.target_wave, strict=True))
            if kind == "group" and w == wave and block.weight[i] > 0]


def cell_shares(block: TargetBlock, rows: list[int]) -> CellShares:
    """Cell shares of the groups ``rows`` of ``block`` and their covariance (delta method)."""
    totals = block.totals
    k = totals.estimate.shape[1]
    r = len(rows)
    member = block.membership[rows].astype(float)             # (r, D)
    scope = member.sum(axis=0)                                 # base domains in the table
    s_total = float((member @ totals.weight).sum())
    n_total = float((member @ totals.count).sum())
    safe = np.nan_to_num(totals.estimate)                      # (D, k)
    p_group = block.estimate[rows]                             # (r, k)
    w_group = block.weight[rows]
    yes = w_group[:, None] * p_group / s_total                 # pi_g1, (r, k)
    no = w_group[:, None] * (1 - p_group) / s_total            # pi_g0
    # linear maps of the cell shares on the base variables (z_d, s_d)
    on_z = member * totals.weight[None, :] / s_total           # (r, D)
    on_scores = np.concatenate([np.broadcast_to(on_z, (k, r, on_z.shape[1])),
                                -np.broadcast_to(on_z, (k, r, on_z.shape[1]))], axis=1)
    on_w_yes = (member[None] * safe.T[:, None, :] - yes.T[:, :, None] * scope[None, None, :]) / s_total
    in_scope = scope[None, None, :]
    on_w_no = (member[None] * (1 - safe.T[:, None, :]) - no.T[:, :, None] * in_scope) / s_total
    on_weights = np.concatenate([on_w_yes, on_w_no], axis=1)   # (k, 2r, D)
    covariance = _linear_covariance(totals, on_scores, on_weights)    # (k, 2r, 2r)
    cells = np.concatenate([yes, no], axis=0).T                # (k, 2r) order: col * r + row
    return CellShares(cells=cells, covariance=covariance, n_total=n_total)


def rao_scott_statistics(table: CellShares, df_design: float) -> dict[str, np.ndarray]:
    """Pearson X^2, design effects and both Rao-Scott tests for each theme, shape (n_themes,).

    Themes nobody (or everybody) raised get NaN everywhere.
    """
    cells, n_total = table.cells, table.n_total
    r = cells.shape[1] // 2
    row_share = (cells[:, :r] + cells[:, r:])                  # (k, r)
    col_share = np.stack([cells[:, :r].sum(axis=1), cells[:, r:].sum(axis=1)], axis=1)  # (k, 2)
    expected = np.concatenate([row_share * col_share[:, :1], row_share * col_share[:, 1:]], axis=1)
    valid = (col_share.min(axis=1) > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        pearson = n_total * np.where(expected > 0, (cells - expected) ** 2 / expected, 0.0).sum(axis=1)
    contrast = _interaction_contrasts(r, 2)                   # (2r, r-1)
    inv_cells = np.where(cells > 0, 1.0 / np.where(cells > 0, cells, 1.0), 0.0)   # (k, 2r)
    weighted = contrast[None, :, :] * inv_cells[:, :, None]    # D^-1 C, (k, 2r, r-1)
    denominator = np.swapaxes(contrast[None], 1, 2) @ weighted / n_total
    numerator = np.swapaxes(weighted, 1, 2) @ table.covariance @ weighted
    denominator[~valid] = np.eye(r - 1)
    numerator[~valid] = np.eye(r - 1)
    delta = np.linalg.solve(denominator, numerator)
    trace = np.trace(delta, axis1=1, axis2=2)
    trace_sq = np.trace(delta @ delta, axis1=1, axis2=2)
    with np.errstate(divide="ignore", invalid="ignore"):
        d0 = trace ** 2 / trace_sq
        f_stat = pearson / trace
        first_order = pearson / (trace / (r - 1))
    f_p = stats.f.sf(f_stat, d0, d0 * df_design)
    chi_p = stats.chi2.sf(first_order, r - 1)
    nan = np.where(valid, 1.0, np.nan)
    return {"pearson_chi2": pearson * nan, "mean_deff": trace / (r - 1) * nan, "f_statistic": f_stat * nan,
            "f_df_num": d0 * nan, "f_df_den": d0 * df_design * nan, "f_p_value": f_p * nan,
            "chi2_first_order": first_order * nan, "chi2_df": r - 1, "chi2_p_value": chi_p * nan}


def rao_scott_table(block: TargetBlock, wave: Any, themes: list[str]) -> pd.DataFrame | None:
    """One row per theme: the tests across the groups of ``block`` in ``wave`` (None: under two groups)."""
    rows = group_rows(block, wave)
    if len(rows) < 2:
        return None
    table = cell_shares(block, rows)
    columns = rao_scott_statistics(table, float(block.df[rows[0]]))
    return pd.DataFrame({"question": block.question, "theme": themes, "group_var": block.group_var,
                         "wave": wave, "n_groups": len(rows), "n": int(table.n_total), **columns})


def _interaction_contrasts(rows: int, columns: int) -> np.ndarray:
    """Row x column interaction contrasts orthogonal to the main effects, shape (rows*columns, (r-1)(c-1)).

    Cells are ordered ``column * rows + row``.
    """
    cell = np.arange(rows * columns)
    row, col = cell % rows, cell // rows
    row_dummies = (row[:, None] == np.arange(1, rows)[None, :]).astype(float)
    col_dummies = (col[:, None] == np.arange(1, columns)[None, :]).astype(float)
    main = np.hstack([np.ones((cell.size, 1)), row_dummies, col_dummies])
    interactions = (row_dummies[:, :, None] * col_dummies[:, None, :]).reshape(cell.size, -1)
    fitted = main @ np.linalg.lstsq(main, interactions, rcond=None)[0]
    return interactions - fitted

