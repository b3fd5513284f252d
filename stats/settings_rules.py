"""Review settings checked against each other and against sane bounds, each with its reason.

``ReviewSettings.validated`` (stats/monitor.py) calls ``combination_problems``; every door that
changes settings (``lotwatch settings set``, a store read by the review) goes through it.
The bounds are lotwatch decisions, stated with the reason a person sees.
"""

from __future__ import annotations

from typing import Any

MAX_WINDOW_DAYS = 731  # two years
MAX_TREND_WINDOWS = 520  # ten years of weekly windows


def combination_problems(s: Any) -> list[str]:
    """Why a set of review settings cannot work together, one sentence per problem."""
    out: list[str] = []
    if not 0 < s.tolerance_fraction <= 1:
        out.append(f"review.tolerance_fraction = {s.tolerance_fraction}: must be in (0, 1]")
    if s.days > MAX_WINDOW_DAYS:
        out.append(f"review.window_days = {s.days}: at most {MAX_WINDOW_DAYS} (two years); a "
                   "longer window mixes process states and no review could use it")
    if s.last_n < s.min_n:
        out.append(f"review.last_n = {s.last_n} is below review.min_lots = {s.min_n}: every "
                   "group would have too few lots in every last-N window, so no comparison "
                   "could ever be made")
    if s.trend_windows > MAX_TREND_WINDOWS:
        out.append(f"review.trend_windows = {s.trend_windows}: at most {MAX_TREND_WINDOWS}")
    return out
