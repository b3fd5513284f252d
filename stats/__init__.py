"""lotwatch statistics: one-way ANOVA and its companions, pure computation on arrays.

Nothing here knows SQLite or Textual. Every function returns a dataclass from ``stats.results``;
degenerate input returns a result whose ``status`` says what happened instead of raising.

The names below are loaded on first use (PEP 562 module ``__getattr__``), so importing one light
module such as ``lotwatch.stats.monitor`` for its settings does not load scipy for every other.
"""

from __future__ import annotations

import importlib
from typing import Any

_HOME = {
    "analysis_of_means": "anom",
    "anova_batch": "anova", "anova_from_sums": "anova", "one_way_anova": "anova",
    "run_battery": "battery",
    "capability": "capability",
    "bartlett_test": "checks", "brown_forsythe": "checks", "kruskal_wallis": "checks",
    "recommend": "checks", "residual_normality": "checks", "resolution_check": "checks",
    "ptukey": "distributions", "qtukey": "distributions",
    "effect_sizes": "effect", "variance_components": "effect",
    "compact_letters": "letters",
    "AdjustedPValues": "multiple", "adjust_pvalues": "multiple",
    "dunn": "posthoc", "dunnett": "posthoc", "games_howell": "posthoc", "tukey_kramer": "posthoc",
    "power_analysis": "power",
    "BatteryResult": "results",
    "welch_anova": "welch", "welch_batch": "welch", "welch_from_moments": "welch",
}

__all__ = sorted(_HOME)


def __getattr__(name: str) -> Any:
    home = _HOME.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{home}"), name)
    globals()[name] = value
    return value

