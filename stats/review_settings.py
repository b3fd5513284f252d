"""The review's settings (``review.*`` keys of the store's settings table)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

WINDOW_KINDS = ("trailing", "last_n", "week")
FDR_METHODS = ("bh", "by")
NO_LIMITS_GATES = ("detectable", "skip")


@dataclass(frozen=True)
class ReviewSettings:
    """How reviews are windowed and when a signal becomes an alert (this tool's defaults).

    * ``window``: "trailing" (the last ``days`` days, evaluated every ``step_days``),
      "last_n" (the last ``last_n`` lots of each group, rounded out to whole days, evaluated every
      ``step_days``) or "week" (ISO calendar weeks, Monday to Sunday).
    * ``min_n``: a group with fewer lots than this in a window is left out of that window.
    * A window *signal* (shown beside the detectors, no longer what opens alerts): q ≤
      ``fdr_level`` and the largest shift ≥ the practical gate.
    * Practical gate: the characteristic's min_shift; else ``tolerance_fraction`` × (USL − LSL)
      when both limits exist (1/8 is this tool's default, not a standard); else
      ``no_limits_gate``: "detectable" (the shift must reach the window's 80%-power detectable
      shift) or "skip" (no alerts for that characteristic).
    """

    window: str = "trailing"
    days: int = 28
    step_days: int = 7
    last_n: int = 30
    min_n: int = 5
    fdr_level: float = 0.05
    fdr_method: str = "bh"
    tolerance_fraction: float = 0.125
    no_limits_gate: str = "detectable"
    trend_windows: int = 12
    alpha: float = 0.05

    KEYS = {  # settings-table key -> field
        "review.window": "window",
        "review.window_days": "days",
        "review.step_days": "step_days",
        "review.last_n": "last_n",
        "review.min_lots": "min_n",
        "review.fdr_level": "fdr_level",
        "review.fdr_method": "fdr_method",
        "review.tolerance_fraction": "tolerance_fraction",
        "review.no_limits_gate": "no_limits_gate",
        "review.trend_windows": "trend_windows",
    }

    @classmethod
    def from_lookup(cls, get: Callable[[str], str | None]) -> ReviewSettings:
        """Read every setting through ``get(key) -> text | None``; unset keys keep defaults.

        Raises ``ValueError`` naming the key and the bad value.
        """
        return cls(**typed_values(cls(), cls.KEYS, get)).validated()

    def validated(self) -> ReviewSettings:
        """Return self, or raise ``ValueError`` saying which setting is out of range."""
        problems = []
        if self.window not in WINDOW_KINDS:
            problems.append(f"review.window = {self.window!r}: use one of {', '.join(WINDOW_KINDS)}")
        if self.fdr_method not in FDR_METHODS:
            problems.append(f"review.fdr_method = {self.fdr_method!r}: use bh or by")
        if self.no_limits_gate not in NO_LIMITS_GATES:
            problems.append(f"review.no_limits_gate = {self.no_limits_gate!r}: use detectable or skip")
        for name, lo in (("days", 1), ("step_days", 1), ("last_n", 2), ("min_n", 2),
                         ("trend_windows", 1)):
            if getattr(self, name) < lo:
                problems.append(f"{name} = {getattr(self, name)}: must be at least {lo}")
        if not 0 < self.fdr_level < 1:
            problems.append(f"review.fdr_level = {self.fdr_level}: must be between 0 and 1")
        from lotwatch.stats.settings_rules import combination_problems  # bounds, with reasons
        problems += combination_problems(self)
        if problems:
            raise ValueError("; ".join(problems))
        return self


def typed_values(defaults: Any, keys: Mapping[str, str],
                 get: Callable[[str], str | None]) -> dict[str, Any]:
    """The settings that are set, read through ``get(key) -> text | None`` and converted to the
    type of the matching field of ``defaults`` (``keys`` maps a settings key to a field name).
    Raises ``ValueError`` naming the key and the bad value."""
    values: dict[str, Any] = {}
    for key, name in keys.items():
        text = get(key)
        if text is None or str(text).strip() == "":
            continue
        kind = type(getattr(defaults, name))
        try:
            values[name] = kind(str(text).strip())
        except ValueError:
            raise ValueError(f"setting {key} = {text!r}: expected {kind.__name__}") from None
    return values
