"""The one rule for reading Welch's ANOVA instead of the classical F, used by every screen.

Rule: read Welch's ANOVA (Welch 1951), and Games-Howell after it, wherever Bartlett's test of
equal variances (Bartlett 1937) finds the group spreads unequal at the comparison's alpha
(p < alpha); read the classical F elsewhere. The weekly review (from the day sums), the
comparison's Tests tab and ``lotwatch analyze`` (from raw values) apply this same function, so
the F shown and the p behind the q-value are the same statistic on every screen.

Why Bartlett and not Brown-Forsythe: Bartlett's statistic is computable exactly from the stored
sums (n, Σd, Σd²), so the review and the detail agree on the same window; Brown-Forsythe needs
the raw values. Bartlett is sensitive to non-normal data, so it switches to Welch more often
than needed; Welch's test loses little power when the spreads are in fact equal, while the
classical F can mislead when they are not (and group sizes differ), so erring toward Welch is
the safer side. Brown-Forsythe stays on the Tests tab as the robust check of spread.
"""

from __future__ import annotations

from typing import Any

import numpy as np

RULE = ("Welch's ANOVA is read where Bartlett's test finds unequal spreads (p < alpha), the "
        "classical F elsewhere")


def reads_welch(spread_p: Any, alpha: float) -> Any:
    """True where Welch is read: Bartlett's p is known and below alpha (arrays element-wise)."""
    p = np.asarray(spread_p, dtype=float)
    out = np.isfinite(p) & (p < alpha)
    return bool(out) if out.ndim == 0 else out
