"""Confidence intervals for survey proportions: Korn-Graubard, logit, Wilson.

Korn & Graubard (1998); Wilson with the effective n and a t quantile; the logit
interval falls back to Korn-Graubard at 0 and 1.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import stats

from ..errors import AnalysisError

#: Interval methods accepted by :func:`confidence_interval`.
CI_METHODS: tuple[str, ...] = ("logit", "korn-graubard", "wilson")
#: Default interval method, chosen by the coverage study (benchmarks/coverage.py).
DEFAULT_METHOD = "korn-graubard"


def _method_name(method: str) -> str:
    name = method
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
        n ``p(1-p)/V`` (capped at ``n``) times ``(t_{n-1} / t_df)^2`` (capped at 1).
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
            # the df factor may only widen the interval: a domain with fewer respondents
            # than the design has df would otherwise get a narrower one (capped at 1)
            ratio = np.where(n >= 2, np.minimum((t_n / t_df) ** 2, 1.0), 1.0)
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
