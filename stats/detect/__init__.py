"""Sequential detection of a group that drifts from the rest of its factor (pure numpy).

``contrasts`` turns per-day sums into group-vs-rest contrasts, ``cusum`` runs the mean and spread
CUSUMs over them, ``arl`` computes run lengths and thresholds, ``settings`` holds the
``detect.*`` settings. No SQLite here; ``tui/services/detection.py`` joins it with the store.
"""

from lotwatch.stats.detect.settings import DetectorSettings

__all__ = ["DetectorSettings"]
