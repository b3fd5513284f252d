"""The few helpers that read the detectors' stored columns, kept apart from the detectors'
computation (numpy, scipy) so that reading the stored state (``detection.detector_status``, the
board's first numbers) loads neither."""

from __future__ import annotations

import math
from datetime import date
from typing import Any

DIRECTIONS = {("mean", 1): "higher", ("mean", -1): "lower", ("spread", 1): "wider",
              ("spread", -1): "narrower"}


def _f(x: Any) -> float | None:
    if x is None:
        return None
    v = float(x)
    return v if math.isfinite(v) else None


def _day(ordinal: Any) -> date | None:
    o = int(ordinal) if ordinal is not None else -1
    return date.fromordinal(o) if o > 0 else None


def _tolerance(ch) -> float | None:
    if ch.lsl is not None and ch.usl is not None and ch.usl > ch.lsl:
        return float(ch.usl - ch.lsl)
    return None
