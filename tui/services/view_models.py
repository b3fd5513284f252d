"""What the screens show: plain, frozen dataclasses built by the loaders in worker threads.

Widgets only render these; they never compute statistics or read the store.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from lotwatch.stats.results import BatteryResult

ALERTING = "alerting"
WATCHING = "watching"
NOT_ENOUGH = "not enough data"
CHECKING = "checking…"
ACTIVE = ("open", "acknowledged")  # alert states that still stand (not cleared)


@dataclass(frozen=True)
class CharacteristicInfo:
    """What the list and the entry form need about one characteristic."""

    name: str
    unit: str
    resolution: str
    lsl: float | None
    target: float | None
    usl: float | None
    min_shift: float | None
    plausible_low: float | None
    plausible_high: float | None


@dataclass(frozen=True)
class FactorInfo:
    name: str
    required: bool


@dataclass(frozen=True)
class ComparisonRow:
    """One comparison (characteristic × factor) of a review window."""

    characteristic: str
    factor: str
    window_label: str
    k: int
    n_total: int
    f: float | None
    p: float | None
    welch_p: float | None
    q: float | None
    omega_squared: float | None
    largest_shift: float | None
    largest_shift_group: str | None
    detectable_shift: float | None
    alert_state: str | None
    status: str
    alert_id: int | None = None
    unit: str = ""
    groups: str | None = None  # the groups driving the difference, largest shift first
    direction: str | None = None  # "higher" | "lower"
    gate: float | None = None  # the practical size an alert needs (min shift)
    test: str = "F"  # "Welch" when ``f`` and the p behind ``q`` are Welch's (one rule: monitor)
    lots_total: int | None = None  # lots in the groups used (``n_total`` counts values)
    resolution: str = ""  # the characteristic's resolution: sizes carry its decimals plus one


@dataclass(frozen=True)
class AlertEventRow:
    at: str
    event: str
    by: str | None
    note: str | None
    window: str | None
    text: str | None = None  # the sentence the review wrote with the event


@dataclass(frozen=True)
class AlertRow:
    """One alert as the alert list shows it."""

    id: int
    characteristic: str
    factor: str
    state: str
    opened_at: str
    opened_window: str | None
    last_window: str | None
    groups: str | None
    direction: str | None
    size: float | None
    q: float | None
    updated_at: str | None
    kind: str = "mean"  # the detector that raised it: mean | spread
    onset: str | None = None  # plant day the change is estimated to have begun
    evidence: float | None = None  # detector statistic / threshold when last written
    percent_of_tolerance: float | None = None
    unit: str = ""  # the characteristic's unit and resolution: the size is written with them
    resolution: str = ""


@dataclass(frozen=True)
class Overview:
    """The main view's frame: characteristics with state, factors, tag values, open alerts."""

    characteristics: list[CharacteristicInfo]
    factors: list[FactorInfo]
    tag_values: dict[str, list[str]]
    states: dict[str, str]  # characteristic -> ALERTING | WATCHING | NOT_ENOUGH
    comparison_states: dict[tuple[str, str], str]
    open_alerts: list[AlertRow]  # active: open or acknowledged
    window_label: str
    data_version: int
    window_kind: str = "trailing"  # the store's review.window setting
    partial: bool = False  # True before the review has run (states are CHECKING)
    board: list[BoardRow] = field(default_factory=list)  # sorted by urgency
    # (factor, value) -> {coarser factor: the only value seen with it}: the form's suggestions
    tag_links: dict[tuple[str, str], dict[str, str]] = field(default_factory=dict)
    plant_zone: str | None = None  # IANA name: typed times in the form are plant-local


@dataclass(frozen=True)
class DetailRequest:
    """What the main view asks for: one comparison in one window at one alpha."""

    characteristic: str
    factor: str
    week: str | None = None  # ISO week ("2026-W48"): windows end on its Sunday; None = today
    alpha: float = 0.05
    window: str | None = None  # trailing | last_n | week; None = the store's review setting
    reference: str | None = None  # Dunnett's reference group; None = no Dunnett table


@dataclass(frozen=True)
class RecentLot:
    """One of the latest lots of the shown characteristic (newest first)."""

    lot: str
    level: str
    values: str
    measured_at: str


@dataclass(frozen=True)
class DetectorLine:
    """One group's detector of the shown comparison: how close to its threshold, since when."""

    group: str
    kind: str  # mean | spread
    direction: str | None  # higher | lower | wider
    evidence: float | None  # statistic / threshold; 1 = crossed
    onset: str | None  # plant day, YYYY-MM-DD
    size: float | None  # change since the onset, in the unit
    alarmed: bool


@dataclass(frozen=True)
class SpreadRow:
    """One group's SD against the pooled within-group SD (sqrt of MS Within)."""

    group: str
    n: int
    sd: float | None
    ratio: float | None  # sd / pooled SD


@dataclass(frozen=True)
class DayMean:
    """One group's values of one plant day: their count, mean and SD (None below 2 values)."""

    offset: int  # days after the chart's first day
    n: int
    mean: float
    sd: float | None


@dataclass(frozen=True)
class RunChart:
    """The run chart of one comparison: each group's daily means over the plant days
    ``first_day`` .. ``last_day`` (inclusive) and each group's detector evidence day by day
    (statistic / threshold; 1 = crossed), by (group, kind)."""

    first_day: str  # YYYY-MM-DD
    last_day: str
    resolution: str
    unit: str
    lsl: float | None
    target: float | None
    usl: float | None
    series: dict[str, tuple[DayMean, ...]] = field(default_factory=dict)
    evidence: dict[tuple[str, str], tuple[tuple[int, float], ...]] = field(default_factory=dict)

    @property
    def days(self) -> int:
        from datetime import date

        return (date.fromisoformat(self.last_day) - date.fromisoformat(self.first_day)).days + 1

    def day(self, offset: int) -> str:
        from datetime import date, timedelta

        return (date.fromisoformat(self.first_day) + timedelta(days=offset)).isoformat()


@dataclass(frozen=True)
class DetailView:
    """The battery, run chart and limits of one comparison, ready to show."""

    request: DetailRequest
    characteristic: CharacteristicInfo
    factor: str
    window_label: str
    battery: BatteryResult
    grand_mean: float | None
    lsl: float | None
    target: float | None
    usl: float | None
    window_kind: str = ""
    recent: list[RecentLot] = field(default_factory=list)
    pooled_sd: float | None = None
    spread: list[SpreadRow] = field(default_factory=list)
    detectors: list[DetectorLine] = field(default_factory=list)  # most evidence first
    chart: RunChart | None = None  # daily means and evidence over the weeks before


@dataclass(frozen=True)
class ReviewView:
    """Every comparison of one week, sorted by q (missing q last)."""

    week: str | None
    window_label: str
    family_size: int
    fdr_method: str
    fdr_level: float
    rows: list[ComparisonRow]
    # what the review says about itself, e.g. that an earlier week shows the state as of then
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class AlertsView:
    alerts: list[AlertRow]
    history: dict[int, list[AlertEventRow]] = field(default_factory=dict)
    plant_zone: str | None = None  # event times are shown in plant time


@dataclass(frozen=True)
class EntryDraft:
    """The entry form's content: one lot, one or more characteristics (values as typed)."""

    values: dict[str, list[str]]  # characteristic -> its values of this lot
    tags: dict[str, str]
    lot: str | None
    measured_at: str | None
    note: str | None

    @property
    def characteristics(self) -> list[str]:
        return list(self.values)


@dataclass(frozen=True)
class LoggedLot:
    """What one save of the entry form stored."""

    characteristics: list[str]
    lot: str | None
    stored: int
    duplicates: int
    rounded: int
    outside_spec: int = 0
    tags: dict[str, str] = field(default_factory=dict)


# --- the board ----------------------------------------------------------------------------------

MEAN_ALERT = "mean alert"
SPREAD_ALERT = "spread alert"
ACKNOWLEDGED = "acknowledged"
# Urgency order of the board's states (most urgent first).
STATE_ORDER = (MEAN_ALERT, SPREAD_ALERT, ACKNOWLEDGED, WATCHING, NOT_ENOUGH)


@dataclass(frozen=True)
class BoardRow:
    """One characteristic × factor on the board, from the latest window and the alert log.

    ``size`` is the flagged (or most shifted) group's mean minus the mean of the other lots, in
    the characteristic's unit; ``percent_of_tolerance`` is |size| / (USL − LSL) × 100 when both
    limits exist; ``min_shift`` is the practical size the review requires (the characteristic's
    min shift, else a share of the tolerance). ``onset`` and ``evidence`` (the detector's
    statistic as a fraction of its threshold) stay None until the detector reports them.
    """

    characteristic: str
    factor: str
    unit: str
    resolution: str
    state: str
    group: str | None
    direction: str | None  # "higher" | "lower"
    size: float | None
    percent_of_tolerance: float | None
    min_shift: float | None
    q: float | None
    alert_id: int | None = None
    onset: str | None = None
    evidence: float | None = None
    window_label: str = ""

    @property
    def urgency(self) -> tuple[int, float, float, str, str]:
        """Sort key: state first, then the stronger evidence, smaller q, larger share of the
        tolerance."""
        rank = STATE_ORDER.index(self.state) if self.state in STATE_ORDER else len(STATE_ORDER)
        return (rank, -(self.evidence or 0.0), self.q if self.q is not None else 2.0,
                self.characteristic, self.factor)


# --- the lots behind a number ------------------------------------------------------------------


@dataclass(frozen=True)
class LotsRequest:
    """The lots of one group of one comparison in the window shown."""

    characteristic: str
    factor: str
    level: str
    week: str | None = None
    window: str | None = None
    since: str | None = None  # plant days (YYYY-MM-DD, inclusive): a chart point's days
    until: str | None = None  # instead of the window


@dataclass(frozen=True)
class LotValue:
    """One stored value of a lot (a measurement), as the lots screen lists it."""

    measurement_id: int
    lot: str
    measured_at: str  # plant-local time, "YYYY-MM-DD HH:MM"
    value: str  # current value at the resolution
    original: str | None  # the value first logged, when it was corrected
    voided: bool
    by: str
    note: str
    outside_spec: bool


@dataclass(frozen=True)
class LotsView:
    request: LotsRequest
    unit: str
    resolution: str
    window_label: str
    values: list[LotValue]
    truncated: bool = False


@dataclass(frozen=True)
class AuditLine:
    """One step of a value's audit trail (logged, corrected, voided)."""

    action: str
    at: str
    by: str
    old: str | None
    new: str | None
    reason: str | None
