"""Settings of the sequential detectors (``detect.*`` keys of the store's settings table)."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, fields
from typing import TYPE_CHECKING

from lotwatch.stats.review_settings import typed_values

if TYPE_CHECKING:  # the settings are read where no numpy is loaded (the board's first rows)
    import numpy as np


@dataclass(frozen=True)
class DetectorSettings:
    """How the group-vs-rest detectors are calibrated (this tool's defaults, not a standard).

    * ``years_per_false_alert``: the false-alert budget, "one false alert per N
      comparison-years" (a comparison is one characteristic by one grouping factor). 500 is
      close to what the earlier windowed review gave on null data.
    * ``spread_ratio``: the smallest growth of a group's standard deviation against the rest
      that matters (1.5 = 50% wider); the spread detector is designed for it and its gate is it.
    * ``trailing_days``: days of history that estimate each group's within-day spread.
    * ``warmup_days``: days with data a group needs in that history before it is watched.
    * ``dispersion_days``: days of standardised contrasts whose day-to-day differences estimate
      the extra dispersion (skew, correlated lots) the normal theory misses.
    * ``clear_days``: an alert clears once the group has been back within the gate over this
      many days (and at least this long after detection).
    * ``no_limits_sigmas``: the minimum shift, in pooled standard deviations, of a
      characteristic with neither a minimum shift nor both limits.
    """

    years_per_false_alert: float = 500.0
    spread_ratio: float = 1.5
    trailing_days: int = 42
    warmup_days: int = 10
    dispersion_days: int = 84
    clear_days: int = 14
    no_limits_sigmas: float = 1.0

    KEYS = {
        "detect.years_per_false_alert": "years_per_false_alert",
        "detect.spread_ratio": "spread_ratio",
        "detect.trailing_days": "trailing_days",
        "detect.warmup_days": "warmup_days",
        "detect.dispersion_days": "dispersion_days",
        "detect.clear_days": "clear_days",
        "detect.no_limits_sigmas": "no_limits_sigmas",
    }

    @classmethod
    def from_lookup(cls, get: Callable[[str], str | None]) -> DetectorSettings:
        """Read the settings through ``get(key) -> text | None``; unset keys keep defaults.
        Raises ``ValueError`` naming the key and the bad value."""
        return cls(**typed_values(cls(), cls.KEYS, get)).validated()

    def validated(self) -> DetectorSettings:
        """Return self, or raise ``ValueError`` saying which setting is out of range."""
        problems = []
        if not self.years_per_false_alert >= 1:
            problems.append(f"detect.years_per_false_alert = {self.years_per_false_alert}: "
                            "must be at least 1")
        if not self.spread_ratio > 1:
            problems.append(f"detect.spread_ratio = {self.spread_ratio}: must exceed 1")
        if not self.no_limits_sigmas > 0:
            problems.append(f"detect.no_limits_sigmas = {self.no_limits_sigmas}: must be > 0")
        for name, lo in (("trailing_days", 7), ("warmup_days", 3), ("dispersion_days", 14),
                         ("clear_days", 1)):
            if getattr(self, name) < lo:
                problems.append(f"detect.{name} = {getattr(self, name)}: must be at least {lo}")
        if problems:
            raise ValueError("; ".join(problems))
        return self

    def run_length(self, groups: np.ndarray, days_per_year: np.ndarray) -> np.ndarray:
        """The in-control run length, in days, each one-sided detector is set for:
        ``years_per_false_alert x 3 K x reporting days per year`` for K watched groups with
        three detectors each (mean up, mean down, spread up), so that a comparison's false
        alerts, a sum of its detectors' rates, stay within the budget."""
        return self.years_per_false_alert * 3.0 * groups * days_per_year

    def fingerprint(self) -> str:
        """A text that changes whenever a setting does (stored beside the detector state)."""
        return ";".join(f"{f.name}={getattr(self, f.name)!r}" for f in fields(self))
