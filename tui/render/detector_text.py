"""How the detectors and the review's settings are written in the review's tables and text."""

from __future__ import annotations

from typing import Any

from lotwatch.tui.render.numbers import num


def detector_cell(c: Any) -> str:
    """Evidence (statistic / threshold) and kind in five characters: "3.4m" mean, "1.2s"
    spread; "-" when no detector watches the comparison yet."""
    ev = getattr(c, "detector_evidence", None)
    if ev is None:
        return "-"
    text = num(ev, 2) if ev < 10 else f"{ev:.0f}"
    return text[:4] + ("s" if c.detector_kind == "spread" else "m")


def detector_summary(c: Any) -> str:
    """Evidence, kind, group, direction and onset of the comparison's strongest detector."""
    if getattr(c, "detector_evidence", None) is None:
        return "-"
    onset = f" since {c.detector_onset}" if c.detector_onset else ""
    return (f"{num(c.detector_evidence, 3)} of threshold, {c.detector_kind} "
            f"{c.detector_group} {c.detector_direction or ''}{onset}").replace("  ", " ")


def settings_sentence(result: Any) -> str:
    s = result.settings
    if s.window == "trailing":
        win = f"trailing {s.days}-day windows every {s.step_days} days"
    elif s.window == "last_n":
        win = f"the last {s.last_n} lots of each group, every {s.step_days} days"
    else:
        win = "ISO calendar weeks"
    budget = getattr(result, "budget_years", None)
    per = f"one false alert per {budget:g} comparison-years" if budget else "the false-alert budget"
    return (f"Windows: {win}; groups with fewer than {s.min_n} lots left out. Alerts come from "
            "day-by-day detectors comparing each group with the rest of its factor (mean and "
            f"spread), with thresholds set for {per}; the window table explains them.")
