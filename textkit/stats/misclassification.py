"""Prevalence measured with an imperfect coder: the Rogan-Gladen correction.

A coder (lexicon or model) that misses some answers raising a theme
(sensitivity Se < 1) and codes some that do not (specificity Sp < 1) gives an
observed prevalence ``p_obs = Se p + (1 - Sp)(1 - p)``. Solving for the true
prevalence (Rogan & Gladen 1978, *Am. J. Epidemiol.* 107):

    p = (p_obs + Sp - 1) / (Se + Sp - 1),   clipped to [0, 1],

defined only when ``Se + Sp > 1`` (a coder no better than chance carries no
information: the correction is refused with the reason).

Variance by the delta method, with the survey sample and the hand-coded
validation sample independent:

    Var(p) = [Var(p_obs) + p^2 Var(Se) + (1 - p)^2 Var(Sp)] / (Se + Sp - 1)^2,

``Var(Se) = Se (1 - Se) / n_pos`` and ``Var(Sp) = Sp (1 - Sp) / n_neg`` from the
hand codes (``n_pos`` answers the people coded with the theme, ``n_neg``
without), ``Var(p_obs)`` the survey design's variance of the coded share. The
interval is the normal (Wald) interval on that variance, clipped to [0, 1].
When the validation sample has no coder error at all (Se = Sp = 1) the binomial
variances are 0 and the interval reduces to the survey's own Wald interval: a
small hand-coded sample then understates the uncertainty; report it with care.

Pure functions over numpy arrays (broadcast: one call for every theme x group x
wave row of a prevalence table).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

METHOD = "rogan-gladen, delta method"


@dataclass(frozen=True, eq=False)
class CorrectedPrevalence:
    """Rogan-Gladen corrected prevalence, element-wise over the inputs' broadcast shape.

    Attributes
    ----------
    estimate, se, ci_low, ci_high : ndarray
        Corrected share (0-1, clipped), its delta-method SE and the clipped
        normal interval; NaN where refused.
    sensitivity, specificity : ndarray
        Se = tp / (tp + fn) and Sp = tn / (tn + fp) from the hand codes.
    reason : ndarray of str
        "" where corrected; else why not (e.g. "sensitivity + specificity = 0.95 <= 1").
    """

    estimate: np.ndarray
    se: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    sensitivity: np.ndarray
    specificity: np.ndarray
    reason: np.ndarray


def rogan_gladen(observed, observed_variance, true_positive, false_negative, true_negative, false_positive,
                 *, confidence: float = 0.95) -> CorrectedPrevalence:
    """Correct an observed (coded) prevalence for the coder's sensitivity and specificity.

    Parameters
    ----------
    observed : array_like
        Coded prevalence, 0-1 (any shape; broadcast with the rest).
    observed_variance : array_like
        Its (design-based) variance; 0 for a census of coded answers.
    true_positive, false_negative : array_like
        Hand-coded answers with the theme that the coder coded / missed (n_pos = tp + fn).
    true_negative, false_positive : array_like
        Hand-coded answers without the theme that the coder left / coded (n_neg = tn + fp).
    confidence : float, default 0.95

    Returns
    -------
    CorrectedPrevalence
        Refused entries (NaN estimate, ``reason`` set): no hand-coded positives or
        negatives, or ``Se + Sp <= 1``.
    """
    observed = np.asarray(observed, dtype=float)
    observed_variance = np.asarray(observed_variance, dtype=float)
    tp, fn, tn, fp = (np.asarray(v, dtype=float) for v in (true_positive, false_negative, true_negative,
                                                             false_positive))
    n_pos, n_neg = tp + fn, tn + fp
    with np.errstate(divide="ignore", invalid="ignore"):
        sensitivity = tp / n_pos
        specificity = tn / n_neg
        youden = sensitivity + specificity - 1
        raw = (observed + specificity - 1) / youden
        estimate = np.clip(raw, 0.0, 1.0)
        variance = (observed_variance + estimate**2 * sensitivity * (1 - sensitivity) / n_pos
                    + (1 - estimate) ** 2 * specificity * (1 - specificity) / n_neg) / youden**2
    shape = np.broadcast_shapes(observed.shape, observed_variance.shape, tp.shape, fn.shape, tn.shape, fp.shape)
    reason = np.full(shape, "", dtype=object)
    youden_b = np.broadcast_to(youden, shape)
    reason[np.broadcast_to(~np.isfinite(observed), shape)] = "no coded prevalence"
    reason[np.broadcast_to(n_neg <= 0, shape)] = "no hand-coded answer without the theme: specificity unknown"
    reason[np.broadcast_to(n_pos <= 0, shape)] = "no hand-coded answer with the theme: sensitivity unknown"
    bad = (reason == "") & ~(youden_b > 0)
    reason[bad] = [f"sensitivity + specificity = {1 + y:.3f} <= 1: the coder is no better than chance"
                   for y in youden_b[bad]]
    refused = reason != ""
    z = norm.ppf(0.5 + confidence / 2)
    se = np.sqrt(np.broadcast_to(variance, shape)).astype(float)
    estimate = np.broadcast_to(estimate, shape).astype(float)
    estimate, se = np.where(refused, np.nan, estimate), np.where(refused, np.nan, se)
    return CorrectedPrevalence(estimate=estimate, se=se, ci_low=np.clip(estimate - z * se, 0.0, 1.0),
                               ci_high=np.clip(estimate + z * se, 0.0, 1.0),
                               sensitivity=np.broadcast_to(sensitivity, shape).astype(float),
                               specificity=np.broadcast_to(specificity, shape).astype(float), reason=reason)
