"""Worker failures in words: what happened and what to do (the app's one place for this)."""

from __future__ import annotations

import sqlite3

from lotwatch.tui.render.safe_text import clean


def describe_error(exc: BaseException | None, task: str) -> str:
    """What happened and what to do, for a worker that failed while doing ``task``."""
    from lotwatch.store.errors import (
        BadInput,
        NotFound,
        StoreError,
        StoreFull,
        StoreLocked,
        StoreMissing,
        StoreReadOnly,
    )

    if exc is None:
        return f"{task} failed for an unknown reason. The app keeps running; try again."
    raw = clean(str(exc), 400).strip()
    said = raw + ("." if raw and raw[-1] not in ".!?" else "")
    said = said[:1].upper() + said[1:]
    # The store's messages already say what happened and what to do; add only what the app
    # itself knows: that the form keeps what was typed.
    if isinstance(exc, (StoreLocked, StoreFull)):
        return f"{said} What you typed is kept: press Enter in the form to try again."
    if isinstance(exc, StoreReadOnly):
        return f"{said} To make changes, quit and reopen without --read-only."
    if isinstance(exc, StoreMissing):
        return (f"{said} The store file is gone. Restore it, or quit and start lotwatch with "
                "--db pointing at a store.")
    if isinstance(exc, BadInput):
        return f"{said} Correct the form and save again."
    if isinstance(exc, NotFound):
        return f"{said} It may have been changed by someone else; the view will refresh."
    if isinstance(exc, StoreError):
        return said
    if isinstance(exc, sqlite3.Error):
        return (f"{task}: the store could not be read or written ({raw}). If the file was "
                "moved, replaced or damaged, quit and reopen it (lotwatch check can verify it).")
    if isinstance(exc, ValueError):  # the review engine's word for a bad setting or week
        return f"{task}: {raw}."
    if isinstance(exc, OSError):
        return f"{task}: {raw}. Check the disk and the file's permissions."
    return (f"{task} failed unexpectedly ({type(exc).__name__}: {raw}). The app keeps "
            "running; please report this with what you did just before.")
