"""Opening the store from a worker thread, who is at the keyboard, and the store file's identity.

A SQLite connection belongs to the thread that opened it, so every loader and writer opens its own
:class:`store.Store` with :func:`opened` and closes it when done.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

# The one login-name and file-identity helpers, re-exported for the app.
from lotwatch.store.identity import file_identity as file_identity
from lotwatch.store.identity import login_name as login_name

if TYPE_CHECKING:
    from lotwatch.store import Store


@contextmanager
def opened(path: Path, read_only: bool) -> Iterator[Store]:
    """A Store on ``path`` for this thread, closed afterwards."""
    from lotwatch.store import Store

    store = Store.open(path, read_only=read_only)
    try:
        yield store
    finally:
        store.close()


def file_stamp(path: Path) -> tuple[int, ...]:
    """Modification times and sizes of the store file and its WAL: a change detector for stores
    opened ``immutable`` (read-only in a folder we cannot write), where SQLite's own
    ``data_version`` never moves."""
    out: list[int] = []
    for p in (path, Path(f"{path}-wal")):
        try:
            st = os.stat(p)
        except FileNotFoundError:
            out += [0, 0]
        else:
            out += [st.st_mtime_ns, st.st_size]
    return tuple(out)
