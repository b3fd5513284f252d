"""Logging lots: validate every entry, then store the good ones in one write transaction.

Rules (each refusal is a ``RowProblem`` naming source, row, column and value):
- the characteristic must exist; every value must be a finite decimal no finer than its
  resolution (or ``round_values``: rounded half-even and counted), inside the plausible range;
- tags belong to the lot: a lot's tags are the union of what is stored and what every entry for
  it says; two different values for one key is a conflict; each required factor must be tagged
  and no tag value may be empty;
- a lot + characteristic already stored (or earlier in the same input) with the same values and
  consistent tags is a duplicate and skipped; with different values it is a conflict (stored
  values change only through ``correct``). Duplicates are judged on the values as first logged
  and the tags; ``measured_at``/note of a duplicate are not compared.
Nothing is written unless every entry is good, except with ``skip_bad``.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from datetime import datetime
from typing import TYPE_CHECKING

from lotwatch.store.aggregates import Deltas
from lotwatch.store.entry_checks import PreparedEntry, entry_problem, prepare_entry
from lotwatch.store.errors import BadInput, RowProblem
from lotwatch.store.model import Characteristic, LogOutcome, LotEntry
from lotwatch.store.plantzone import new_lot_code
from lotwatch.store.timeutil import format_stored, now_utc
from lotwatch.store.values import (
    format_units,
)

if TYPE_CHECKING:
    from lotwatch.store.connection import Store

PROGRESS_EVERY = 10_000
_CHUNK = 500  # parameters per IN (...) lookup, below SQLite's default limit


def _chunks(items: list, size: int = _CHUNK):
    for k in range(0, len(items), size):
        yield items[k:k + size]


def log_lots(store: Store, entries: Sequence[LotEntry], *, round_values: bool = False,
             skip_bad: bool = False, progress: Callable[[int], None] | None = None) -> LogOutcome:
    """Validate every entry, then store the good ones in one BEGIN IMMEDIATE transaction.

    Raises BadInput listing every problem (nothing stored) unless ``skip_bad``, which stores
    the good entries and returns the refused ones in ``LogOutcome.rejected``.
    """
    entries = list(entries)
    now = now_utc()
    now_s = format_stored(now)
    conn = store.conn
    zone = store.plant_zone

    def prepare_all(chars: dict[str, Characteristic]) -> tuple[dict, list[PreparedEntry]]:
        problems: dict[int, list[RowProblem]] = {}
        good: list[PreparedEntry] = []
        times: dict[object, str] = {}
        for i, e in enumerate(entries):
            p = prepare_entry(i, e, chars, now, round_values, store.user, times, zone)
            if isinstance(p, list):
                problems[i] = p
            else:
                good.append(p)
        return problems, good

    # Per-entry checks need no lock: run them first, and again inside the transaction only if
    # a characteristic changed meanwhile (keeps the write lock short for big batches).
    chars_seen = {c.name: c for c in store.characteristics()}
    problems, good = prepare_all(chars_seen)
    with store.write():
        chars = {c.name: c for c in store.characteristics()}
        if chars != chars_seen:
            problems, good = prepare_all(chars)
        factors = store.factors()
        factor_names = {f.name for f in factors}
        required = [f.name for f in factors if f.required]

        # Stored lots named in this input: id, tags, and first-logged values per characteristic.
        codes = sorted({p.lot for p in good if p.lot is not None})
        lot_ids: dict[str, int] = {}
        for chunk in _chunks(codes):
            marks = ",".join("?" * len(chunk))
            lot_ids.update(conn.execute(
                f"SELECT lot_code, id FROM lots WHERE lot_code IN ({marks})", chunk).fetchall())
        stored_tags: dict[int, dict[str, str]] = {i: {} for i in lot_ids.values()}
        stored_values: dict[tuple[int, int], list[int]] = {}
        stored_meas: dict[int, list[tuple[int, str, int, int]]] = {}
        ids = sorted(lot_ids.values())
        for chunk in _chunks(ids):
            marks = ",".join("?" * len(chunk))
            for lot_id, key, value in conn.execute(
                    f"SELECT lot_id, key, value FROM lot_tags WHERE lot_id IN ({marks})", chunk):
                stored_tags[lot_id][key] = value
            for lot_id, cid, _seq, orig, cur, voided, day in conn.execute(
                    "SELECT lot_id, characteristic_id, seq, original_units, current_units, "
                    f"voided, day FROM measurements WHERE lot_id IN ({marks}) "
                    "ORDER BY lot_id, characteristic_id, seq", chunk):
                stored_values.setdefault((lot_id, cid), []).append(orig)
                if not voided:
                    stored_meas.setdefault(lot_id, []).append((cid, day, cur, 0))

        # Duplicates, conflicts and lot tag merging, in input order.
        merged: dict[str, dict[str, str]] = {}
        seen: dict[tuple[str, int], PreparedEntry] = {}
        accepted: list[PreparedEntry] = []
        duplicates = 0
        for p in good:
            e = p.entry
            if p.lot is None:
                accepted.append(p)
                continue
            lot_id = lot_ids.get(p.lot)
            base = merged.setdefault(p.lot, dict(stored_tags.get(lot_id, {})) if lot_id else {})
            clash = [(k, base[k], v) for k, v in p.tags.items() if k in base and base[k] != v]
            if clash:
                k, old, new = clash[0]
                where = "is stored" if lot_id and stored_tags[lot_id].get(k) == old else (
                    "is given elsewhere in this input")
                problems.setdefault(p.index, []).append(entry_problem(
                    e, k, new, f"lot {p.lot!r} {where} with {k}={old!r}; this entry says "
                    f"{k}={new!r}"))
                continue
            key = (p.lot, p.char.id)
            stored = stored_values.get((lot_id, p.char.id)) if lot_id else None
            if stored is not None:
                if tuple(stored) == p.units:
                    duplicates += 1
                    continue
                was = ", ".join(format_units(u, p.char.resolution) for u in stored)
                now_v = ", ".join(format_units(u, p.char.resolution) for u in p.units)
                problems.setdefault(p.index, []).append(entry_problem(
                    e, e.column or "value", now_v,
                    f"lot {p.lot!r} already has {p.char.name} = {was}; this entry has {now_v}. "
                    "Stored values change only by a correction"))
                continue
            if key in seen:
                first = seen[key]
                if first.units == p.units:
                    duplicates += 1
                    continue
                at = f" (row {first.row})" if first.row is not None else ""
                problems.setdefault(p.index, []).append(entry_problem(
                    e, e.column or "value",
                    ", ".join(format_units(u, p.char.resolution) for u in p.units),
                    f"lot {p.lot!r} has {p.char.name} twice in this input with different "
                    f"values{at}"))
                continue
            seen[key] = p
            base.update(p.tags)
            accepted.append(p)

        # Required factors, judged on each lot's merged tags.
        final: list[PreparedEntry] = []
        for p in accepted:
            tags = merged[p.lot] if p.lot is not None else p.tags
            missing = [k for k in required if k not in tags]
            if missing:
                problems.setdefault(p.index, []).append(entry_problem(
                    p.entry, missing[0], None,
                    f"missing required tag{'s' if len(missing) > 1 else ''} "
                    f"{', '.join(repr(k) for k in missing)} (required: {', '.join(required)})"))
                continue
            final.append(p)

        rejected = [prob for i in sorted(problems) for prob in problems[i]]
        if rejected and not skip_bad:
            raise BadInput(rejected)

        # A lot whose entries were refused by a later check must not keep their tags.
        if skip_bad and len(final) != len(accepted):
            merged = {}
            for p in final:
                if p.lot is not None:
                    lot_id = lot_ids.get(p.lot)
                    base = merged.setdefault(
                        p.lot, dict(stored_tags.get(lot_id, {})) if lot_id else {})
                    base.update(p.tags)

        ids_out, lots_out = _write(store, final, merged, lot_ids, stored_tags, stored_meas,
                                   factor_names, now, now_s, progress, zone)
    return LogOutcome(read=len(entries), stored=len(final), duplicates=duplicates,
                      rejected=rejected, rounded=sum(p.rounded for p in final),
                      measurement_ids=ids_out, lots=lots_out)


def _write(store: Store, final: list[PreparedEntry], merged: dict[str, dict[str, str]],
           lot_ids: dict[str, int], stored_tags: dict[int, dict[str, str]],
           stored_meas: dict[int, list[tuple[int, str, int, int]]], factor_names: set[str],
           now: datetime, now_s: str,
           progress: Callable[[int], None] | None,
           zone: str) -> tuple[list[int], list[str]]:
    from lotwatch.store.plantzone import day_function

    conn = store.conn
    day_of = day_function(zone)
    # We hold the write lock (BEGIN IMMEDIATE), so max(id) + 1 cannot be taken by anyone else.
    next_lot = conn.execute("SELECT coalesce(max(id), 0) + 1 FROM lots").fetchone()[0]
    next_meas = conn.execute("SELECT coalesce(max(id), 0) + 1 FROM measurements").fetchone()[0]
    taken = set(lot_ids)
    new_lots: list[tuple[int, str, str]] = []
    tag_rows: list[tuple[int, str, str]] = []
    deltas = Deltas()
    origin = {p.char.id: p.char.origin_units for p in final}

    for code, tags in merged.items():
        lot_id = lot_ids.get(code)
        if lot_id is None:
            continue
        old = stored_tags.get(lot_id, {})
        for k, v in tags.items():
            if k not in old:
                tag_rows.append((lot_id, k, v))
                if k in factor_names:  # an existing lot gains a factor tag: its rows join buckets
                    joined: set[tuple[int, str]] = set()
                    for cid, day, cur, _ in stored_meas.get(lot_id, []):
                        o = origin.get(cid)
                        if o is None:
                            o = store.characteristic_by_id(cid).origin_units
                            origin[cid] = o
                        deltas.add((cid, k, v, day), cur - o)
                        joined.add((cid, day))
                    for cid, day in joined:
                        deltas.add_lot((cid, k, v, day))

    meas_rows: list[tuple] = []
    audit_rows: list[tuple] = []
    ids_out: list[int] = []
    lots_out: list[str] = []
    for p in final:
        if p.lot is None:
            code = new_lot_code(taken, now, zone)
            lot_id = next_lot
            next_lot += 1
            new_lots.append((lot_id, code, now_s))
            tags = p.tags
            tag_rows.extend((lot_id, k, v) for k, v in tags.items())
        else:
            code = p.lot
            lot_id = lot_ids.get(code)
            tags = merged[code]
            if lot_id is None:
                lot_id = next_lot
                next_lot += 1
                lot_ids[code] = lot_id
                taken.add(code)
                new_lots.append((lot_id, code, now_s))
                tag_rows.extend((lot_id, k, v) for k, v in tags.items())
        lots_out.append(code)
        levels = [(k, v) for k, v in tags.items() if k in factor_names]
        day = day_of(p.measured_at)
        source = p.entry.source or "command line"
        note = p.entry.note.strip() if isinstance(p.entry.note, str) and p.entry.note.strip() else None
        o = p.char.origin_units
        for seq, u in enumerate(p.units):
            mid = next_meas
            next_meas += 1
            meas_rows.append((mid, lot_id, p.char.id, seq, u, u, p.measured_at, day, now_s,
                              p.by, note, source))
            audit_rows.append((mid, now_s, p.by, u))
            ids_out.append(mid)
            deltas.add_measurement(p.char.id, day, u - o, levels)
        if p.units:  # a (lot, characteristic) is logged once, so the lot is new to its buckets
            deltas.add_lot_to(p.char.id, day, levels)

    generated = [code for _, code, _ in new_lots if code not in lot_ids]
    clash: set[str] = set()
    for chunk in _chunks(generated):
        marks = ",".join("?" * len(chunk))
        clash.update(r[0] for r in conn.execute(
            f"SELECT lot_code FROM lots WHERE lot_code IN ({marks})", chunk))
    if clash:  # a generated ID already stored (about 1 in 10^9 per second): draw again
        taken |= clash
        renamed = {code: new_lot_code(taken, now, zone) for code in clash}
        new_lots = [(i, renamed.get(c, c), t) for i, c, t in new_lots]
        lots_out = [renamed.get(c, c) for c in lots_out]
    conn.executemany("INSERT INTO lots(id, lot_code, created_at) VALUES (?, ?, ?)", new_lots)
    conn.executemany("INSERT INTO lot_tags(lot_id, key, value) VALUES (?, ?, ?)", tag_rows)
    done = 0
    for start in range(0, len(meas_rows), PROGRESS_EVERY):
        conn.executemany(
            "INSERT INTO measurements(id, lot_id, characteristic_id, seq, original_units, "
            "current_units, measured_at, day, logged_at, logged_by, note, source) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", meas_rows[start:start + PROGRESS_EVERY])
        conn.executemany(
            "INSERT INTO audit(measurement_id, action, at, by, new_units) "
            "VALUES (?, 'log', ?, ?, ?)", audit_rows[start:start + PROGRESS_EVERY])
        done += len(meas_rows[start:start + PROGRESS_EVERY])
        if progress is not None:
            progress(done)
    deltas.apply(conn)
    if progress is not None and not meas_rows:
        progress(0)
    return ids_out, lots_out
