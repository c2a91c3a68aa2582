"""Domain totals: weighted shares of every theme in every base domain, with their covariance.

The vectorised core of the statistics. Base domains are non-overlapping cells
(group x wave within one question); PSU x domain totals come from one sparse
product, and the covariance of the domains' linearised scores and weight totals
from products of totals that share a PSU (Binder 1983; Wolter 2007). Unions of
base domains (totals, pooled waves, "the rest", crossed groups, nets) get their
shares and full covariance by the delta method (:func:`union_estimates`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import sparse

from .design import SurveyDesign


@dataclass
class DomainTotals:
    """Totals and score covariances of ``n_domains`` base domains (all themes at once).

    Attributes
    ----------
    weight : ndarray of shape (n_domains,)
        Sum of weights (weighted n).
    count : ndarray of shape (n_domains,)
        Number of rows (unweighted n).
    weight_sq : ndarray of shape (n_domains,)
        Sum of squared weights (for the Kish effective n).
    estimate : ndarray of shape (n_domains, n_themes)
        Weighted shares (NaN for an empty domain).
    zz : ndarray of shape (n_themes, n_domains, n_domains), or (n_themes, n_domains) if diagonal
        Design covariance of the ratio scores ``z_d`` (the diagonal is ``Var(p_d)``).
    zs : same shape as ``zz``
        Covariance of ``z_d`` with the weight totals ``s_e`` of the domains.
    ss : ndarray of shape (n_domains, n_domains), or (n_domains,) if diagonal
        Covariance of the weight totals.
    count_yes : ndarray of shape (n_domains, n_themes)
        Unweighted number of rows with each theme (the numerator).
    scale : float, default 1.0
        Every weight above was divided by this power of two, so that sums of
        squared weights cannot overflow; shares and their variances do not depend
        on it; weight totals are ``weight * scale``.
    """

    weight: np.ndarray
    count: np.ndarray
    weight_sq: np.ndarray
    estimate: np.ndarray
    zz: np.ndarray
    zs: np.ndarray
    ss: np.ndarray
    count_yes: np.ndarray | None = None
    scale: float = 1.0

    @property
    def variance(self) -> np.ndarray:
        """Design variance of each domain's shares, shape (n_domains, n_themes)."""
        if self.zz.ndim == 2:
            return self.zz.T.copy()
        return np.diagonal(self.zz, axis1=1, axis2=2).T.copy()


def _compact(keys: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray]:
    """Sorted distinct values of ``keys`` (all in [0, size)) and each key's position among them."""
    if size <= max(8 * keys.size, 1 << 20):
        present = np.zeros(size, dtype=bool)
        present[keys] = True
        distinct = np.flatnonzero(present)
        position = np.cumsum(present) - 1
        return distinct, position[keys]
    distinct, inverse = np.unique(keys, return_inverse=True)
    return distinct, inverse


def _cross_sums(group: np.ndarray, variable: np.ndarray, factor: np.ndarray, left: np.ndarray,
                right: np.ndarray, n_variables: int, diagonal: bool) -> np.ndarray:
    """``sum_g factor_g sum_{i, j in g} left_i * right_j`` by (variable_i, variable_j).

    ``group`` must be sorted. Returns shape (n_variables**2, width) or, when
    ``diagonal`` (pairs i == j only; entries are unique per group and variable),
    (n_variables, width).
    """
    m, width = left.shape
    if diagonal:
        first, second = np.arange(m), np.arange(m)
        key = variable
        size = n_variables
    else:
        starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
        lengths = np.diff(np.r_[starts, m])
        run = np.repeat(np.arange(starts.size), lengths)
        repeat = lengths[run]
        first = np.repeat(np.arange(m), repeat)
        offset = np.arange(first.size) - np.repeat(np.cumsum(repeat) - repeat, repeat)
        second = np.repeat(starts[run], repeat) + offset
        key = variable[first] * n_variables + variable[second]
        size = n_variables * n_variables
    out = np.zeros((size, width))
    chunk = max(1, 8_000_000 // max(width, 1))
    for start in range(0, first.size, chunk):
        i, j = first[start:start + chunk], second[start:start + chunk]
        products = left[i] * right[j] * factor[group[i]][:, None]
        collect = sparse.csr_matrix((np.ones(i.size), (key[start:start + chunk], np.arange(i.size))),
                                    shape=(size, i.size))
        out += collect @ products
    return out


def domain_totals(Y: Any, unit: np.ndarray, domain: np.ndarray, n_domains: int, design: SurveyDesign,
                  diagonal: bool = False) -> DomainTotals:
    """Weighted shares of every theme in every base domain, with their design covariance.

    Parameters
    ----------
    Y : sparse matrix or ndarray of shape (n_rows, n_themes)
        0/1 theme indicators.
    unit : ndarray of int of shape (n_rows,)
        Design unit (response) of each row.
    domain : ndarray of int of shape (n_rows,)
        Base domain of each row, 0..n_domains-1, or -1 outside every domain
        (e.g. did not answer). Domains must not overlap (one code per row).
    n_domains : int
        Number of base domains.
    design : SurveyDesign
    diagonal : bool, default False
        Only the variances (no covariances between domains): for many domains.

    Returns
    -------
    DomainTotals
    """
    inside = domain >= 0
    rows = np.flatnonzero(inside)
    d_rows = domain[rows].astype(np.int64)
    u_rows = unit[rows]
    weight_unit = weight_scale(design.weights)
    w_rows = design.weights[u_rows] / weight_unit
    psu_rows = design.psu[u_rows]
    k = Y.shape[1]
    cell_keys, cell_of_row = _compact(psu_rows * n_domains + d_rows, design.n_psus * n_domains)
    m = cell_keys.size
    cell_psu = cell_keys // n_domains
    cell_domain = cell_keys % n_domains
    cell_weight = np.bincount(cell_of_row, weights=w_rows, minlength=m)
    gather = sparse.csr_matrix((w_rows, (cell_of_row, np.arange(rows.size))), shape=(m, rows.size))
    y_rows = Y[rows] if sparse.issparse(Y) else np.asarray(Y)[rows]
    cell_yes = gather @ y_rows
    cell_yes = cell_yes.toarray() if sparse.issparse(cell_yes) else np.asarray(cell_yes, dtype=float)

    weight = np.bincount(cell_domain, weights=cell_weight, minlength=n_domains)
    count = np.bincount(d_rows, minlength=n_domains).astype(float)
    weight_sq = np.bincount(d_rows, weights=w_rows ** 2, minlength=n_domains)
    by_domain = sparse.csr_matrix((np.ones(m), (cell_domain, np.arange(m))), shape=(n_domains, m))
    yes = by_domain @ cell_yes
    count_yes = sparse.csr_matrix((np.ones(rows.size), (d_rows, np.arange(rows.size))),
                                  shape=(n_domains, rows.size)) @ y_rows
    count_yes = count_yes.toarray() if sparse.issparse(count_yes) else np.asarray(count_yes, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        estimate = np.where(weight[:, None] > 0, yes / weight[:, None], np.nan)
        inverse = np.where(weight > 0, 1.0 / weight, 0.0)
    safe = np.nan_to_num(estimate)
    scores = (cell_yes - safe[cell_domain] * cell_weight[:, None]) * inverse[cell_domain][:, None]

    scale, centre = design.variance_factors()
    ones = np.ones((1, k))
    # PSU level: sum over PSUs of scale_h * (z z', z s', s s')
    left = np.hstack([scores, scores, cell_weight[:, None]])
    right = np.hstack([scores, cell_weight[:, None] * ones, cell_weight[:, None]])
    total = _cross_sums(cell_psu, cell_domain, scale[design.psu_stratum], left, right, n_domains, diagonal)
    # stratum level: minus centre_h * (stratum sums)(stratum sums)'
    cell_stratum = design.psu_stratum[cell_psu]
    sum_keys, sum_of_cell = _compact(cell_stratum * n_domains + cell_domain, design.n_strata * n_domains)
    summing = sparse.csr_matrix((np.ones(m), (sum_of_cell, np.arange(m))), shape=(sum_keys.size, m))
    stratum_scores = summing @ scores
    stratum_weight = summing @ cell_weight
    left = np.hstack([stratum_scores, stratum_scores, stratum_weight[:, None]])
    right = np.hstack([stratum_scores, stratum_weight[:, None] * ones, stratum_weight[:, None]])
    total -= _cross_sums(sum_keys // n_domains, sum_keys % n_domains, centre, left, right, n_domains,
                         diagonal)
    if diagonal:
        zz, zs, ss = total[:, :k].T, total[:, k:2 * k].T, total[:, 2 * k]
    else:
        cube = total.reshape(n_domains, n_domains, 2 * k + 1)
        zz = np.ascontiguousarray(np.moveaxis(cube[:, :, :k], 2, 0))
        zs = np.ascontiguousarray(np.moveaxis(cube[:, :, k:2 * k], 2, 0))
        ss = cube[:, :, 2 * k]
    return DomainTotals(weight=weight, count=count, weight_sq=weight_sq, estimate=estimate,
                        zz=zz, zs=zs, ss=ss, count_yes=count_yes, scale=weight_unit)


def weight_scale(weights: np.ndarray) -> float:
    """A power of two near the largest weight (1.0 when the weights are all 0 or tiny).

    Dividing by a power of two is exact in floating point, so results are the
    same bytes as without scaling whenever no overflow would occur.
    """
    largest = float(np.max(weights)) if weights.size else 0.0
    if not np.isfinite(largest) or largest <= 1.0:
        return 1.0
    return float(2.0 ** np.floor(np.log2(largest)))


def _linear_covariance(totals: DomainTotals, on_scores: np.ndarray, on_weights: np.ndarray) -> np.ndarray:
    """Covariance of linear combinations ``sum_d a_rd z_d + b_rd s_d`` of the base variables.

    Parameters
    ----------
    on_scores : ndarray of shape (r, n_domains) or (n_themes, r, n_domains)
    on_weights : ndarray of shape (n_themes, r, n_domains)

    Returns
    -------
    ndarray of shape (n_themes, r, r)
    """
    n_themes = totals.zz.shape[0]
    a = on_scores if on_scores.ndim == 3 else np.broadcast_to(on_scores, (n_themes, *on_scores.shape))
    b = on_weights
    aza = a @ totals.zz @ np.swapaxes(a, 1, 2)
    azb = a @ totals.zs @ np.swapaxes(b, 1, 2)
    bsb = b @ totals.ss @ np.swapaxes(b, 1, 2)
    return aza + azb + np.swapaxes(azb, 1, 2) + bsb


def union_estimates(totals: DomainTotals, membership: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Shares of unions of base domains and their full covariance (delta method).

    Parameters
    ----------
    totals : DomainTotals
        From :func:`domain_totals` (not diagonal).
    membership : ndarray of 0/1 of shape (n_targets, n_domains)
        Which base domains make up each target domain.

    Returns
    -------
    estimate : ndarray of shape (n_targets, n_themes)
    covariance : ndarray of shape (n_themes, n_targets, n_targets)
    weight, count, weight_sq : ndarray of shape (n_targets,)
    """
    member = membership.astype(float)
    weight = member @ totals.weight
    count = member @ totals.count
    weight_sq = member @ totals.weight_sq
    safe = np.nan_to_num(totals.estimate)
    with np.errstate(divide="ignore", invalid="ignore"):
        estimate = np.where(weight[:, None] > 0, (member @ (totals.weight[:, None] * safe)) / weight[:, None],
                            np.nan)
        inverse = np.where(weight > 0, 1.0 / weight, 0.0)
    target_safe = np.nan_to_num(estimate)
    on_scores = member * totals.weight[None, :] * inverse[:, None]
    # d p_A / d s_d = (p_d - p_A) / W_A for d in A; shape (themes, targets, domains)
    on_weights = (member[None, :, :] * (safe.T[:, None, :] - target_safe.T[:, :, None])
                  * inverse[None, :, None])
    covariance = _linear_covariance(totals, on_scores, on_weights)
    return estimate, covariance, weight, count, weight_sq


@dataclass
class TargetBlock:
    """All targets of one question x group variable."""

    question: Any
    group_var: str
    groups: list[str]          # named groups (labels), G
    n_base_groups: int         # G plus 1 if some rows lack a group value
    waves: list[Any]           # wave labels (empty without waves)
    totals: DomainTotals
    target_group: list[str] = field(default_factory=list)
    target_wave: list[Any] = field(default_factory=list)
    target_kind: list[str] = field(default_factory=list)   # "group", "total", "rest"
    membership: np.ndarray | None = None
    estimate: np.ndarray | None = None
    covariance: np.ndarray | None = None
    weight: np.ndarray | None = None
    count: np.ndarray | None = None
    weight_sq: np.ndarray | None = None
    df: np.ndarray | None = None
    count_yes: np.ndarray | None = None   # (n_targets, n_themes) unweighted respondents raising the theme
    scopes: list[Any] = field(default_factory=list)   # wave labels of the targets ("(all)" = pooled)
