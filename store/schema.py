"""The store's tables and their versioned migrations.

The schema version lives in ``PRAGMA user_version``; ``PRAGMA application_id`` marks the file as
a lotwatch store, and ``store_info`` records which lotwatch version created and last upgraded
it (so a store from a newer lotwatch can be refused with a useful message). Every table is
created explicitly and STRICT (no type inference); foreign keys are enforced per connection.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

# Bumped with every release that writes the store; the schema version moves only with migrations.
LOTWATCH_VERSION = "0.1.0"
# "LotW" in ASCII: marks the file as ours (see https://www.sqlite.org/pragma.html#pragma_application_id)
APPLICATION_ID = 0x4C6F7457

DEFAULT_FACTORS = ("site", "line", "shift")

_V1 = """
CREATE TABLE store_info (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
) STRICT;

CREATE TABLE settings (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
) STRICT;

CREATE TABLE characteristics (
    id             INTEGER PRIMARY KEY,
    name           TEXT NOT NULL UNIQUE CHECK (length(name) > 0),
    unit           TEXT NOT NULL,
    resolution     TEXT NOT NULL CHECK (length(resolution) > 0),
    origin_units   INTEGER NOT NULL,
    lsl            REAL,
    target         REAL,
    usl            REAL,
    min_shift      REAL CHECK (min_shift IS NULL OR min_shift > 0),
    plausible_low  REAL,
    plausible_high REAL,
    created_at     TEXT NOT NULL,
    created_by     TEXT NOT NULL,
    CHECK (lsl IS NULL OR usl IS NULL OR lsl < usl),
    CHECK (plausible_low IS NULL OR plausible_high IS NULL OR plausible_low < plausible_high)
) STRICT;

CREATE TABLE factors (
    name       TEXT PRIMARY KEY CHECK (length(name) > 0),
    required   INTEGER NOT NULL CHECK (required IN (0, 1)),
    created_at TEXT NOT NULL
) STRICT;

CREATE TABLE lots (
    id         INTEGER PRIMARY KEY,
    lot_code   TEXT NOT NULL UNIQUE CHECK (length(lot_code) > 0),
    created_at TEXT NOT NULL
) STRICT;

CREATE TABLE lot_tags (
    lot_id INTEGER NOT NULL REFERENCES lots(id),
    key    TEXT NOT NULL CHECK (length(key) > 0),
    value  TEXT NOT NULL CHECK (length(value) > 0),
    PRIMARY KEY (lot_id, key)
) STRICT, WITHOUT ROWID;
CREATE INDEX lot_tags_key_value ON lot_tags(key, value);

CREATE TABLE measurements (
    id                INTEGER PRIMARY KEY,
    lot_id            INTEGER NOT NULL REFERENCES lots(id),
    characteristic_id INTEGER NOT NULL REFERENCES characteristics(id),
    seq               INTEGER NOT NULL CHECK (seq >= 0),
    original_units    INTEGER NOT NULL,
    current_units     INTEGER NOT NULL,
    voided            INTEGER NOT NULL DEFAULT 0 CHECK (voided IN (0, 1)),
    measured_at       TEXT NOT NULL,
    day               TEXT NOT NULL,
    logged_at         TEXT NOT NULL,
    logged_by         TEXT NOT NULL,
    note              TEXT,
    source            TEXT NOT NULL,
    UNIQUE (lot_id, characteristic_id, seq)
) STRICT;
CREATE INDEX measurements_char_day ON measurements(characteristic_id, day);
CREATE INDEX measurements_char_time ON measurements(characteristic_id, measured_at);

CREATE TABLE audit (
    id             INTEGER PRIMARY KEY,
    measurement_id INTEGER NOT NULL REFERENCES measurements(id),
    action         TEXT NOT NULL CHECK (action IN ('log', 'correct', 'void')),
    at             TEXT NOT NULL,
    by             TEXT NOT NULL,
    old_units      INTEGER,
    new_units      INTEGER,
    reason         TEXT
) STRICT;
CREATE INDEX audit_measurement ON audit(measurement_id);

CREATE TABLE buckets (
    characteristic_id INTEGER NOT NULL REFERENCES characteristics(id),
    factor            TEXT NOT NULL REFERENCES factors(name),
    level             TEXT NOT NULL,
    day               TEXT NOT NULL,
    n                 INTEGER NOT NULL CHECK (n >= 0),
    sum_d             INTEGER NOT NULL,
    sum_d2            INTEGER NOT NULL CHECK (sum_d2 >= 0),
    PRIMARY KEY (characteristic_id, factor, level, day)
) STRICT, WITHOUT ROWID;

CREATE TABLE alerts (
    id                INTEGER PRIMARY KEY,
    characteristic_id INTEGER NOT NULL REFERENCES characteristics(id),
    factor            TEXT NOT NULL,
    state             TEXT NOT NULL CHECK (state IN ('open', 'acknowledged', 'cleared')),
    opened_at         TEXT NOT NULL,
    opened_window     TEXT,
    last_window       TEXT,
    groups            TEXT,
    direction         TEXT,
    size              REAL,
    size_fraction     REAL,
    q                 REAL,
    updated_at        TEXT NOT NULL
) STRICT;
CREATE INDEX alerts_char_factor ON alerts(characteristic_id, factor, state);

CREATE TABLE alert_events (
    id       INTEGER PRIMARY KEY,
    alert_id INTEGER NOT NULL REFERENCES alerts(id),
    at       TEXT NOT NULL,
    event    TEXT NOT NULL CHECK (event IN ('opened', 'held', 'acknowledged', 'cleared', 'reopened')),
    by       TEXT,
    note     TEXT,
    window   TEXT,
    details  TEXT
) STRICT;
CREATE INDEX alert_events_alert ON alert_events(alert_id);
"""


def _split(script: str) -> list[str]:
    return [s.strip() for s in script.split(";") if s.strip()]


def _migrate_to_1(conn: sqlite3.Connection) -> None:
    for stmt in _split(_V1):
        conn.execute(stmt)


def _migrate_to_2(conn: sqlite3.Connection) -> None:
    # The review's incremental refresh reads every bucket of one day across characteristics.
    conn.execute("CREATE INDEX buckets_day ON buckets(day)")


def _migrate_to_3(conn: sqlite3.Connection) -> None:
    # Distinct lots per bucket (a lot may carry several replicates), rebuilt from the raw rows;
    # and the plant time zone: a store older than the setting keeps UTC days so nothing moves
    # (a new store gets the computer's zone from ``Store.create``).
    conn.execute("ALTER TABLE buckets ADD COLUMN lots INTEGER NOT NULL DEFAULT 0 "
                 "CHECK (lots >= 0 AND lots <= n)")
    conn.execute("DELETE FROM buckets")
    for (factor,) in conn.execute("SELECT name FROM factors").fetchall():
        conn.execute(
            "INSERT INTO buckets(characteristic_id, factor, level, day, n, sum_d, sum_d2, lots) "
            "SELECT m.characteristic_id, t.key, t.value, m.day, count(*), "
            "sum(m.current_units - c.origin_units), "
            "sum((m.current_units - c.origin_units) * (m.current_units - c.origin_units)), "
            "count(DISTINCT m.lot_id) FROM measurements m "
            "JOIN characteristics c ON c.id = m.characteristic_id "
            "JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ? "
            "WHERE m.voided = 0 GROUP BY m.characteristic_id, t.value, m.day", (factor,))
    conn.execute("INSERT INTO settings(key, value) VALUES ('plant.time_zone', 'UTC') "
                 "ON CONFLICT(key) DO NOTHING")


_DETECTORS = """
ALTER TABLE alerts ADD COLUMN kind TEXT NOT NULL DEFAULT 'mean';
ALTER TABLE alerts ADD COLUMN onset TEXT;
ALTER TABLE alerts ADD COLUMN detected_on TEXT;
ALTER TABLE alerts ADD COLUMN size_low REAL;
ALTER TABLE alerts ADD COLUMN size_high REAL;
ALTER TABLE alerts ADD COLUMN percent_of_tolerance REAL;
ALTER TABLE alerts ADD COLUMN evidence REAL;
DROP INDEX alerts_char_factor;
CREATE INDEX alerts_char_factor ON alerts(characteristic_id, factor, kind, state);

CREATE TABLE detector_progress (
    characteristic_id INTEGER PRIMARY KEY REFERENCES characteristics(id),
    through_day       TEXT NOT NULL,
    dirty_from        TEXT,
    fingerprint       TEXT NOT NULL
) STRICT;

CREATE TABLE detector_days (
    characteristic_id INTEGER NOT NULL REFERENCES characteristics(id),
    day               TEXT NOT NULL,
    factor            TEXT NOT NULL,
    level             TEXT NOT NULL,
    kind              TEXT NOT NULL CHECK (kind IN ('mean', 'spread')),
    s_hi REAL NOT NULL, s_lo REAL NOT NULL, onset_hi INTEGER NOT NULL, onset_lo INTEGER NOT NULL,
    w_hi REAL NOT NULL, wc_hi REAL NOT NULL, w_lo REAL NOT NULL, wc_lo REAL NOT NULL,
    alarm INTEGER NOT NULL, detected INTEGER NOT NULL, alarm_onset INTEGER NOT NULL,
    aw REAL NOT NULL, awc REAL NOT NULL,
    used INTEGER NOT NULL, threshold REAL, evidence REAL, size REAL, size_low REAL,
    size_high REAL, ref_sd REAL,
    PRIMARY KEY (characteristic_id, day, factor, level, kind)
) STRICT, WITHOUT ROWID;

CREATE TRIGGER buckets_dirty_insert AFTER INSERT ON buckets BEGIN
    UPDATE detector_progress SET dirty_from = NEW.day
    WHERE characteristic_id = NEW.characteristic_id AND through_day >= NEW.day
      AND (dirty_from IS NULL OR dirty_from > NEW.day);
END;
CREATE TRIGGER buckets_dirty_update AFTER UPDATE ON buckets BEGIN
    UPDATE detector_progress SET dirty_from = NEW.day
    WHERE characteristic_id = NEW.characteristic_id AND through_day >= NEW.day
      AND (dirty_from IS NULL OR dirty_from > NEW.day);
END;
CREATE TRIGGER buckets_dirty_delete AFTER DELETE ON buckets BEGIN
    UPDATE detector_progress SET dirty_from = OLD.day
    WHERE characteristic_id = OLD.characteristic_id AND through_day >= OLD.day
      AND (dirty_from IS NULL OR dirty_from > OLD.day);
END
"""


def _migrate_to_4(conn: sqlite3.Connection) -> None:
    # Sequential detectors: their per-day state, how far each characteristic is advanced (and
    # the earliest day a write has touched since: triggers on buckets record it, so every write
    # path, present or future, marks the detectors for recomputation), and what alerts say.
    for stmt in _split_triggers(_DETECTORS):
        conn.execute(stmt)


def _split_triggers(script: str) -> list[str]:
    """Split a script on ';' at the end of a line, keeping trigger bodies (``BEGIN ... END``)
    whole."""
    out, buf = [], []
    for line in script.strip().splitlines():
        buf.append(line)
        text = "\n".join(buf).strip()
        inside = text.upper().startswith("CREATE TRIGGER") and not text.upper().endswith("END;") \
            and not text.upper().endswith("END")
        if line.rstrip().endswith(";") and not inside:
            out.append(text.rstrip(";"))
            buf = []
    if "\n".join(buf).strip():
        out.append("\n".join(buf).strip().rstrip(";"))
    return [s for s in out if s]


def _migrate_to_5(conn: sqlite3.Connection) -> None:
    # Retiring a characteristic or a grouping factor hides it from reviews, detectors and the
    # board; its data and day sums are kept (``store.retire``).
    conn.execute("ALTER TABLE characteristics ADD COLUMN retired_at TEXT")
    conn.execute("ALTER TABLE factors ADD COLUMN retired_at TEXT")


# MIGRATIONS[v] brings a store from schema version v-1 to v. Run in order inside one
# BEGIN IMMEDIATE transaction by ``migrate``. Never edit a released step; add a new one.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {
    1: _migrate_to_1,
    2: _migrate_to_2,
    3: _migrate_to_3,
    4: _migrate_to_4,
    5: _migrate_to_5,
}
SCHEMA_VERSION = max(MIGRATIONS)


def user_version(conn: sqlite3.Connection) -> int:
    return int(conn.execute("PRAGMA user_version").fetchone()[0])


def application_id(conn: sqlite3.Connection) -> int:
    return int(conn.execute("PRAGMA application_id").fetchone()[0])


def migrate(conn: sqlite3.Connection, *, now: str) -> int:
    """Apply every pending migration; the caller holds a write transaction. Returns the old version."""
    old = user_version(conn)
    for version in range(old + 1, SCHEMA_VERSION + 1):
        MIGRATIONS[version](conn)
    if old < SCHEMA_VERSION:
        # PRAGMAs take no parameters; both values are integers we control.
        conn.execute(f"PRAGMA user_version = {int(SCHEMA_VERSION)}")
        conn.execute(f"PRAGMA application_id = {int(APPLICATION_ID)}")
        info = {"schema_version": str(SCHEMA_VERSION), "last_written_by": LOTWATCH_VERSION,
                "upgraded_at": now}
        if old == 0:
            info.update({"application": "lotwatch", "created_by": LOTWATCH_VERSION,
                         "created_at": now})
        conn.executemany(
            "INSERT INTO store_info(key, value) VALUES (?, ?) "
            "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
            sorted(info.items()),
        )
    return old


def written_by(conn: sqlite3.Connection) -> str | None:
    """The lotwatch version that last upgraded this store, if it says."""
    try:
        row = conn.execute(
            "SELECT value FROM store_info WHERE key = 'last_written_by'"
        ).fetchone()
    except sqlite3.DatabaseError:
        return None
    return row[0] if row else None


def has_table(conn: sqlite3.Connection, name: str) -> bool:
    return conn.execute(
        "SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?", (name,)
    ).fetchone() is not None
