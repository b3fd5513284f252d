"""The catalog of a store: characteristics, grouping factors, tag keys and values, settings.

Functions over an open ``Session`` (a ``Store``); ``Store`` exposes each as a method. Field
checks live in ``store.fields``.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from lotwatch.store.errors import BadInput, Conflict, NotFound, RowProblem
from lotwatch.store.fields import CHARACTERISTIC_FIELDS, clean_name, validate_characteristic
from lotwatch.store.model import Characteristic, Factor
from lotwatch.store.timeutil import format_stored, now_utc
from lotwatch.store.transaction import Session
from lotwatch.store.values import choose_origin, scale_of

_CHAR_COLS = ("id, name, unit, resolution, origin_units, lsl, target, usl, min_shift, "
              "plausible_low, plausible_high, created_at, created_by, retired_at")


def _char_from_row(r: Sequence[Any]) -> Characteristic:
    m, k = scale_of(r[3])
    return Characteristic(
        id=r[0], name=r[1], unit=r[2], resolution=r[3], resolution_value=m / 10**k,
        origin_units=r[4], lsl=r[5], target=r[6], usl=r[7], min_shift=r[8],
        plausible_low=r[9], plausible_high=r[10], created_at=r[11], created_by=r[12],
        retired_at=r[13],
    )


# ---------------------------------------------------------------------- characteristics


def characteristics(s: Session) -> list[Characteristic]:
    """Every characteristic, by name."""
    with s.mapped():
        rows = s.conn.execute(f"SELECT {_CHAR_COLS} FROM characteristics ORDER BY name")
        return [_char_from_row(r) for r in rows]


def characteristic(s: Session, name: str) -> Characteristic:
    """The characteristic called ``name``; NotFound lists the known names."""
    with s.mapped():
        row = s.conn.execute(
            f"SELECT {_CHAR_COLS} FROM characteristics WHERE name = ?", (name,)
        ).fetchone()
    if row is None:
        known = ", ".join(c.name for c in characteristics(s)) or "none yet"
        raise NotFound(f"no characteristic named {name!r} (known: {known})")
    return _char_from_row(row)


def characteristic_by_id(s: Session, characteristic_id: int) -> Characteristic:
    row = s.conn.execute(
        f"SELECT {_CHAR_COLS} FROM characteristics WHERE id = ?", (characteristic_id,)
    ).fetchone()
    if row is None:
        raise NotFound(f"no characteristic with id {characteristic_id}")
    return _char_from_row(row)


def _name_taken(s: Session, name: str) -> bool:
    return s.conn.execute(
        "SELECT 1 FROM characteristics WHERE name = ?", (name,)
    ).fetchone() is not None


def add_characteristic(
    s: Session, name: str, *, unit: str, resolution: str, lsl: float | None = None,
    target: float | None = None, usl: float | None = None, min_shift: float | None = None,
    plausible: tuple[float, float] | None = None, by: str | None = None,
) -> Characteristic:
    """Define a characteristic. The origin (in resolution units) is the target, else the
    LSL/USL midpoint, else the plausible-range midpoint, else 0; it never changes once data
    exists. Bad fields raise BadInput listing each; an existing name raises Conflict."""
    fields = validate_characteristic(
        name=name, unit=unit, resolution=resolution, lsl=lsl, target=target, usl=usl,
        min_shift=min_shift, plausible=plausible,
    )
    with s.write():
        if _name_taken(s, fields["name"]):
            raise Conflict(f"a characteristic named {fields['name']!r} already exists")
        origin = choose_origin(
            fields["resolution"], target=fields["target"], lsl=fields["lsl"],
            usl=fields["usl"], plausible=fields["plausible"],
        )
        lo, hi = fields["plausible"] or (None, None)
        cur = s.conn.execute(
            "INSERT INTO characteristics(name, unit, resolution, origin_units, lsl, target, "
            "usl, min_shift, plausible_low, plausible_high, created_at, created_by) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (fields["name"], fields["unit"], fields["resolution"], origin, fields["lsl"],
             fields["target"], fields["usl"], fields["min_shift"], lo, hi,
             format_stored(now_utc()), by or s.user),
        )
        new_id = int(cur.lastrowid or 0)
    return characteristic_by_id(s, new_id)


def edit_characteristic(s: Session, name: str, /, **changes: Any) -> Characteristic:
    """Change fields of a characteristic: ``name`` (rename), ``unit``, ``resolution``,
    ``lsl``, ``target``, ``usl``, ``min_shift``, ``plausible`` (a (low, high) pair or None).
    The resolution cannot change once measurements exist (Conflict); nor does the origin."""
    unknown = sorted(set(changes) - CHARACTERISTIC_FIELDS)
    if unknown:
        raise BadInput([RowProblem("command line", None, k, None,
                                   f"unknown characteristic field {k!r} (can change: "
                                   f"{', '.join(sorted(CHARACTERISTIC_FIELDS))})")
                        for k in unknown])
    with s.write():
        old = characteristic(s, name)
        merged: dict[str, Any] = {
            "name": old.name, "unit": old.unit, "resolution": old.resolution,
            "lsl": old.lsl, "target": old.target, "usl": old.usl, "min_shift": old.min_shift,
            "plausible": (None if old.plausible_low is None or old.plausible_high is None
                          else (old.plausible_low, old.plausible_high)),
        }
        merged.update(changes)
        fields = validate_characteristic(**merged)
        has_data = s.conn.execute(
            "SELECT 1 FROM measurements WHERE characteristic_id = ? LIMIT 1", (old.id,)
        ).fetchone() is not None
        if fields["resolution"] != old.resolution and has_data:
            raise Conflict(
                f"the resolution of {old.name} cannot change from {old.resolution} to "
                f"{fields['resolution']}: measurements are stored in steps of "
                f"{old.resolution}. Create a new characteristic instead."
            )
        if fields["name"] != old.name and _name_taken(s, fields["name"]):
            raise Conflict(f"a characteristic named {fields['name']!r} already exists")
        origin = old.origin_units
        if not has_data:
            origin = choose_origin(fields["resolution"], target=fields["target"],
                                   lsl=fields["lsl"], usl=fields["usl"],
                                   plausible=fields["plausible"])
        lo, hi = fields["plausible"] or (None, None)
        s.conn.execute(
            "UPDATE characteristics SET name = ?, unit = ?, resolution = ?, origin_units = ?, "
            "lsl = ?, target = ?, usl = ?, min_shift = ?, plausible_low = ?, "
            "plausible_high = ? WHERE id = ?",
            (fields["name"], fields["unit"], fields["resolution"], origin, fields["lsl"],
             fields["target"], fields["usl"], fields["min_shift"], lo, hi, old.id),
        )
    return characteristic_by_id(s, old.id)


# ---------------------------------------------------------------------- factors and tags

# Distinct keys / values by hopping along the (key, value) index: one index seek per distinct
# entry instead of a scan of every lot's tags (the "loose index scan" recursive CTE).
_HOP_KEYS = """
WITH RECURSIVE k(key) AS (
    SELECT min(key) FROM lot_tags
    UNION ALL
    SELECT (SELECT min(key) FROM lot_tags WHERE key > k.key) FROM k WHERE k.key IS NOT NULL
) SELECT key FROM k WHERE key IS NOT NULL
"""
_HOP_VALUES = """
WITH RECURSIVE v(value) AS (
    SELECT min(value) FROM lot_tags WHERE key = :key
    UNION ALL
    SELECT (SELECT min(value) FROM lot_tags WHERE key = :key AND value > v.value)
    FROM v WHERE v.value IS NOT NULL
) SELECT value FROM v WHERE value IS NOT NULL
"""


def factors(s: Session) -> list[Factor]:
    """Grouping factors, in the order they were added (site, line, shift first)."""
    with s.mapped():
        rows = s.conn.execute(
            "SELECT name, required, retired_at FROM factors ORDER BY created_at, rowid"
        ).fetchall()
    return [Factor(name, bool(req), retired) for name, req, retired in rows]


def add_factor(s: Session, name: str, required: bool = False) -> Factor:
    """Make a tag key a grouping factor; buckets for it are built from the tags of every
    stored lot in the same transaction."""
    from lotwatch.store.aggregates import backfill_factor

    key = clean_name(name, "factor")
    with s.write():
        if s.conn.execute("SELECT 1 FROM factors WHERE name = ?", (key,)).fetchone():
            raise Conflict(f"{key!r} is already a grouping factor")
        s.conn.execute(
            "INSERT INTO factors(name, required, created_at) VALUES (?, ?, ?)",
            (key, int(bool(required)), format_stored(now_utc())),
        )
        backfill_factor(s.conn, key)
    return Factor(key, bool(required))


def tag_keys(s: Session) -> list[str]:
    """Every tag key used by a stored lot, plus every factor, sorted."""
    with s.mapped():
        used = {r[0] for r in s.conn.execute(_HOP_KEYS)}
    return sorted(used | {f.name for f in factors(s)})


def tag_values(s: Session, key: str) -> list[str]:
    """Known values of a tag key, sorted (empty if the key is unused)."""
    with s.mapped():
        return [r[0] for r in s.conn.execute(_HOP_VALUES, {"key": key})]


# ---------------------------------------------------------------------- settings and info


def settings(s: Session) -> dict[str, str]:
    """Every stored setting, read in one query (callers look keys up in the dict)."""
    with s.mapped():
        return dict(s.conn.execute("SELECT key, value FROM settings").fetchall())


def get_setting(s: Session, key: str, default: str | None = None) -> str | None:
    with s.mapped():
        row = s.conn.execute("SELECT value FROM settings WHERE key = ?", (key,)).fetchone()
    return row[0] if row else default


def set_setting(s: Session, key: str, value: str | None) -> None:
    """Store a setting (text); ``None`` removes it. The plant zone changes only through
    ``Store.set_plant_zone`` (its days must move with it)."""
    if not key:
        raise BadInput([RowProblem("command line", None, "setting", key, "empty setting name")])
    if key == "plant.time_zone":
        raise BadInput([RowProblem("command line", None, "setting", key,
                                   "the plant time zone changes with `lotwatch zone set` "
                                   "(every stored day is recomputed with it)")])
    with s.write():
        if value is None:
            s.conn.execute("DELETE FROM settings WHERE key = ?", (key,))
        else:
            s.conn.execute(
                "INSERT INTO settings(key, value) VALUES (?, ?) "
                "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                (key, str(value)),
            )


def info(s: Session) -> dict[str, str]:
    """The ``store_info`` rows (schema version, creating/upgrading lotwatch version, ...)."""
    with s.mapped():
        return dict(s.conn.execute("SELECT key, value FROM store_info").fetchall())
