"""lotwatch statistics: one-way ANOVA and its companions, pure computation on arrays.

Nothing here knows SQLite or Textual. Every function returns a dataclass from ``stats.results``;
degenerate input returns a result whose ``status`` says what happened instead of raising.
"""

from lotwatch.stats.anom import analysis_of_means
from lotwatch.stats.anova import anova_batch, anova_from_sums, one_way_anova
from lotwatch.stats.battery import run_battery
from lotwatch.stats.capability import capability
from lotwatch.stats.checks import (
    bartlett_test,
    brown_forsythe,
    kruskal_wallis,
    recommend,
    residual_normality,
    resolution_check,
)
from lotwatch.stats.distributions import ptukey, qtukey
from lotwatch.stats.effect import effect_sizes, variance_components
from lotwatch.stats.letters import compact_letters
from lotwatch.stats.multiple import AdjustedPValues, adjust_pvalues
from lotwatch.stats.posthoc import dunn, dunnett, games_howell, tukey_kramer
from lotwatch.stats.power import power_analysis
from lotwatch.stats.results import BatteryResult
from lotwatch.stats.welch import welch_anova, welch_batch, welch_from_moments

__all__ = [
    "AdjustedPValues", "BatteryResult", "adjust_pvalues", "analysis_of_means", "anova_batch",
    "anova_from_sums", "bartlett_test", "brown_forsythe", "capability", "compact_letters", "dunn",
    "dunnett", "effect_sizes", "games_howell", "kruskal_wallis", "one_way_anova",
    "power_analysis", "ptukey", "qtukey", "recommend", "residual_normality", "resolution_check",
    "run_battery", "tukey_kramer", "variance_components", "welch_anova", "welch_batch",
    "welch_from_moments",
]
