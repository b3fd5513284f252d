"""Writers the app runs in thread workers: log a lot, correct or void a value, record a review,
acknowledge an alert. Each opens its own Store and writes through the store's API (the same rules
and audit trail as the command line). After a lot is logged, corrected or voided, the detectors
are brought current (``detection.advance_detectors``, its own transaction: the board's evidence
moves with each lot and an alert opens on the day it is raised, not at the next review)."""

from __future__ import annotations

from pathlib import Path

from lotwatch.tui.services.storefile import opened
from lotwatch.tui.services.view_models import CharacteristicInfo, EntryDraft, LoggedLot

SOURCE = "terminal interface"


def outside_spec(value: float, ch: CharacteristicInfo) -> bool:
    """Whether a value lies beyond the characteristic's LSL or USL (stored all the same)."""
    return (ch.lsl is not None and value < ch.lsl) or (ch.usl is not None and value > ch.usl)


def log_draft(path: Path, draft: EntryDraft, by: str) -> LoggedLot:
    """Store the form's lot, every characteristic of it, in one transaction.

    When several characteristics share a lot with no lot ID typed, one ID is drawn here so they
    land on the same lot (the store draws one per entry otherwise).
    """
    from lotwatch.store import BadInput, LotEntry
    from lotwatch.store.plantzone import new_lot_code
    from lotwatch.tui.services.loaders import char_info

    with opened(path, False) as store:
        lot = draft.lot
        if lot is None and len(draft.values) > 1:
            lot = new_lot_code(set(), zone_name=store.plant_zone)  # plant-local date in the ID
        entries = [LotEntry(characteristic=name, values=list(values), tags=dict(draft.tags),
                            lot=lot, measured_at=draft.measured_at, note=draft.note, by=by,
                            source=SOURCE)
                   for name, values in draft.values.items()]
        chars = {name: char_info(store.characteristic(name)) for name in draft.values}
        try:
            outcome = store.log_lots(entries)
        except BadInput as exc:
            raise plain_words(exc, lot) from None
        advance_after_write(store, by)
    flagged = sum(1 for name, values in draft.values.items() for v in values
                  if outside_spec(float(v), chars[name]))
    stored_lot = outcome.lots[0] if outcome.lots else lot
    return LoggedLot(list(draft.values), stored_lot, outcome.stored, outcome.duplicates,
                     outcome.rounded, flagged, dict(draft.tags))


def advance_after_write(store, by: str) -> None:
    """Bring every detector current after a write (cheap: only the days a write touched are
    recomputed). The write has committed already; if the detectors cannot be advanced (a bad
    ``detect.*`` setting) the next ``lotwatch review`` says why and catches up, so the write is
    not reported as failed."""
    from lotwatch.store import StoreError
    from lotwatch.tui.services.detection import advance_detectors

    try:
        advance_detectors(store, by=by)
    except (ValueError, StoreError):
        pass


def catch_up(path: Path, by: str) -> None:
    """Bring the detectors current with whatever the store holds: lots logged from the command
    line or imported by another terminal, and the days since the last review. Writes nothing
    when they are current already (so the store's change it causes is seen once)."""
    with opened(path, False) as store:
        advance_after_write(store, by)


def plain_words(exc: Exception, lot: str | None) -> Exception:
    """The store's refusal of an entry for a lot it already holds, said as what to do."""
    from lotwatch.store import BadInput, RowProblem

    assert isinstance(exc, BadInput)
    problems = []
    for p in exc.problems:
        reason = p.reason
        if "already has" in reason:
            reason = (f"lot {lot} is already stored with other values ({reason.split(';')[0]}). "
                      "To change a stored value, open its group's lots (l in the comparison "
                      "view) and correct it (c); to log a new lot, type another lot ID or "
                      "leave it blank")
        elif "is stored with" in reason:
            reason = (f"{reason}. A lot keeps its tags: type the stored tag, or a new lot ID "
                      "for a different lot")
        problems.append(RowProblem("the form", None, p.column, p.value, reason))
    return BadInput(problems)


def correct_value(path: Path, measurement_id: int, new_value: str, reason: str,
                  by: str) -> None:
    """Replace a stored value with a reason (the original and the change stay in the audit)."""
    with opened(path, False) as store:
        store.correct(measurement_id, new_value, reason=reason, by=by)
        advance_after_write(store, by)


def void_value(path: Path, measurement_id: int, reason: str, by: str) -> None:
    """Mark a stored value void with a reason (kept, left out of every statistic)."""
    with opened(path, False) as store:
        store.void(measurement_id, reason=reason, by=by)
        advance_after_write(store, by)


def record_review(path: Path, week: str | None, by: str) -> tuple[int, int, list[str]]:
    """Run the review with ``persist=True``: alert transitions are written (one transaction).

    Returns (opened, cleared, notes); the engine refuses to change states with a review dated
    before the latest recorded one and says so in the notes.
    """
    from lotwatch.tui.services.review_engine import run_review

    with opened(path, False) as store:
        result = run_review(store, week=week, persist=True, by=by)
    return len(result.opened), len(result.cleared), list(result.notes)


def acknowledge_alert(path: Path, alert_id: int, by: str, note: str) -> None:
    """Record that ``by`` acknowledged the alert, with the note."""
    from lotwatch.store.alerts import acknowledge

    with opened(path, False) as store:
        acknowledge(store, alert_id, by=by, note=note)
