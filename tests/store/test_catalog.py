"""The catalog (store.catalog) and the Store assembled from opening, transaction and catalog."""

from __future__ import annotations

import sqlite3

from lotwatch.store import Store
from lotwatch.store.identity import file_identity, login_name


def _count_selects(store: Store) -> list[str]:
    seen: list[str] = []
    store.conn.set_trace_callback(
        lambda sql: seen.append(sql) if sql.lstrip().upper().startswith("SELECT") else None
    )
    return seen


def test_settings_are_read_in_one_query(store: Store) -> None:
    for i in range(12):
        store.set_setting(f"key{i}", str(i))
    store.set_setting("key3", None)  # None removes a setting
    seen = _count_selects(store)
    got = store.settings()
    store.conn.set_trace_callback(None)
    assert len(seen) == 1
    # every store also carries its plant time zone (store.plantzone)
    assert got == {**{f"key{i}": str(i) for i in range(12) if i != 3},
                   "plant.time_zone": store.plant_zone}
    # The single-key lookup agrees with the one-query read, key by key.
    assert all(store.get_setting(k) == v for k, v in got.items())
    assert store.get_setting("key3", "absent") == "absent"


def test_tag_keys_include_factors_and_used_keys(fill: Store) -> None:
    assert fill.tag_keys() == ["line", "shift", "site"]
    assert fill.tag_values("site") == ["north"]
    assert fill.tag_values("never-used") == []


def test_store_is_a_session_with_nested_savepoints(store: Store) -> None:
    # Nested write() is a SAVEPOINT: the inner failure rolls back alone (SQLite SAVEPOINT
    # semantics, https://www.sqlite.org/lang_savepoint.html).
    with store.write():
        store.conn.execute("INSERT INTO settings(key, value) VALUES ('outer', '1')")
        try:
            with store.write():
                store.conn.execute("INSERT INTO settings(key, value) VALUES ('inner', '1')")
                raise sqlite3.IntegrityError("inner body fails")
        except sqlite3.IntegrityError:
            pass
    assert store.settings() == {"outer": "1", "plant.time_zone": store.plant_zone}


def test_identity_helpers(store: Store) -> None:
    assert login_name()  # never empty: falls back to "unknown"
    assert file_identity(store.path) is not None
    assert file_identity(store.path.with_name("missing.sqlite")) is None
