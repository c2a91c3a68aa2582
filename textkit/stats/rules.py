"""Publishing rules: flag estimates ``ok``, ``caution`` or ``suppress``, and say why.

Statistical agencies suppress or flag unstable estimates; the shipped rules
follow three of them (cited beside each rule) under neutral names that say what
they check. Users set their own with :class:`ReliabilityRule`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np


@dataclass(frozen=True)
class ReliabilityRule:
    """A rule that flags estimates ``ok``, ``caution`` or ``suppress``, and says why.

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
        Relative standard error at or above this: ``suppress`` / ``caution``.
        Estimates of exactly 0 or 1 (SE 0) are not judged by RSE.
    rse_of : {"smaller", "estimate"}, default "smaller"
        What the SE is relative to. ``"estimate"``: ``se / p``, the definition of
        the agencies the shipped rules follow. ``"smaller"`` (our deliberate
        choice for the shipped rules): ``se / min(p, 1 - p)``, so that a share near
        0 and its complement near 1 are judged alike (a theme raised by 95% with
        SE 0.02 is as uncertain as the 5% who did not raise it).
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

    Whatever the thresholds, an empty domain (no weight) and any estimate whose
    SE or interval is not a finite number are ``suppress``.
    """

    name: str
    origin: str
    min_n: int = 30
    min_effective_n: float | None = None
    suppress_rse: float | None = None
    caution_rse: float | None = 0.30
    rse_of: str = "smaller"
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
        return self.flags_and_reasons(n, estimate, se, ci_low, ci_high, df, effective_n)[0]

    def flags_and_reasons(self, n: Any, estimate: Any, se: Any, ci_low: Any, ci_high: Any, df: Any,
                          effective_n: Any) -> tuple[np.ndarray, np.ndarray]:
        """Flags (see :meth:`flags`) and, for each, the checks that fired joined by ``"; "``."""
        checks = self._checks(np.asarray(n, float), np.asarray(estimate, float), np.asarray(se, float),
                              np.asarray(ci_low, float), np.asarray(ci_high, float), np.asarray(df, float),
                              np.asarray(effective_n, float))
        size = np.asarray(estimate, float).shape
        suppress = np.zeros(size, dtype=bool)
        caution = np.zeros(size, dtype=bool)
        reasons = np.full(size, "", dtype=object)
        for level, reason, fired in checks:
            (suppress if level == "suppress" else caution)[...] |= fired
            reasons = np.where(fired, np.where(reasons == "", reason, reasons + "; " + reason), reasons)
        flags = np.where(suppress, "suppress", np.where(caution, "caution", "ok")).astype(object)
        return flags, reasons.astype(object)

    def _checks(self, n: np.ndarray, p: np.ndarray, se: np.ndarray, ci_low: np.ndarray, ci_high: np.ndarray,
                df: np.ndarray, effective_n: np.ndarray) -> list[tuple[str, str, np.ndarray]]:
        """(level, reason, fired) of every check of the rule, in reading order."""
        width = ci_high - ci_low
        with np.errstate(divide="ignore", invalid="ignore"):
            smaller = np.minimum(p, 1.0 - p)
            relative_to = smaller if self.rse_of == "smaller" else p
            rse = np.where((smaller > 0) & (relative_to > 0), se / relative_to, np.nan)
            relative_width = np.where(smaller > 0, width / smaller, np.inf)
        empty = ~np.isfinite(p)
        checks = [("suppress", "no weight in the domain", empty),
                  ("suppress", "SE or interval not finite",
                   ~empty & ~(np.isfinite(se) & np.isfinite(ci_low) & np.isfinite(ci_high))),
                  ("suppress", f"base below {self.min_n:g}", n < self.min_n)]
        if self.min_effective_n is not None:
            checks.append(("suppress", f"effective n below {self.min_effective_n:g}",
                           effective_n < self.min_effective_n))
        if self.suppress_rse is not None:
            checks.append(("suppress", f"relative SE {self.suppress_rse:.0%} or more", rse >= self.suppress_rse))
        if self.max_ci_width is not None:
            checks.append(("suppress", f"interval width {self.max_ci_width:g} or more", width >= self.max_ci_width))
        if self.max_relative_ci_width is not None:
            checks.append(("suppress", f"relative interval width over {self.max_relative_ci_width:.0%}",
                           (width > self.relative_width_floor) & (relative_width > self.max_relative_ci_width)))
        if self.caution_rse is not None:
            checks.append(("caution", f"relative SE {self.caution_rse:.0%} or more", rse >= self.caution_rse))
        if self.min_df is not None:
            checks.append(("caution", f"df below {self.min_df:g}", df < self.min_df))
        if self.caution_at_bounds:
            checks.append(("caution", "estimate at 0 or 1", (p == 0) | (p == 1)))
        return checks


#: Default rule: a minimum base, a minimum effective n and a maximum interval width,
#: after the US National Center for Health Statistics: the classic presentation rule
#: (unweighted base below 30 not shown, RSE of 30% or more flagged) with the tests of
#: NCHS's 2017 standard for proportions (Parker et al. 2017), which is built on
#: Korn-Graubard intervals (effective n below 30, interval width 0.30 or more, or
#: width above 0.05 and relative width above 130%: suppressed; df below 8: flagged).
#: The RSE here is relative to the smaller of p and 1 - p (see ``rse_of``); NCHS
#: divides by the estimate.
BASE_WIDTH_RULE = ReliabilityRule(
    name="base-width",
    origin="after US NCHS: base below 30 suppressed, RSE 30%+ flagged; NCHS 2017 proportions standard "
           "(effective n < 30, CI width >= 0.30, relative CI width > 130% suppressed; df < 8 flagged)",
    min_n=30, min_effective_n=30, caution_rse=0.30, max_ci_width=0.30, max_relative_ci_width=1.30,
    relative_width_floor=0.05, min_df=8,
)
#: RSE 25-50% caution, over 50% suppressed, after the Australian Bureau of Statistics
#: (which divides the SE by the estimate; here by the smaller of p and 1 - p).
RSE_25_50_RULE = ReliabilityRule(
    name="rse-25-50", origin="after the Australian Bureau of Statistics: RSE 25%+ annotated, 50%+ too unreliable",
    min_n=0, caution_rse=0.25, suppress_rse=0.50,
)
#: RSE 16.5% caution, 33.3% suppressed, after Statistics Canada (secondary source;
#: its CV divides the SE by the estimate; here by the smaller of p and 1 - p).
RSE_16_33_RULE = ReliabilityRule(
    name="rse-16-33", origin="after Statistics Canada (secondary source): CV 16.5%+ caution, 33.3%+ withheld",
    min_n=0, caution_rse=0.165, suppress_rse=0.333,
)
#: Shipped rules by name.
RULES: dict[str, ReliabilityRule] = {rule.name: rule for rule in (BASE_WIDTH_RULE, RSE_25_50_RULE,
                                                                   RSE_16_33_RULE)}
DEFAULT_RULE = BASE_WIDTH_RULE
#: The default rule's name before the rules got descriptive names; kept so that code written
#: against textkit 0.1 still imports.
NCHS_LIKE = BASE_WIDTH_RULE
