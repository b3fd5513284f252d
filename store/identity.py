"""Who is working and which file is open: the operator's login name and a file's identity.

The one implementation of each (the store records the login name as "by"; the app's store
watcher compares file identities to notice a deleted or replaced store).
"""

from __future__ import annotations

import getpass
import os
from pathlib import Path


def login_name() -> str:
    """The operator name used when none is given: the login name, else ``$USER`` /
    ``$USERNAME``, else "unknown" (containers may have no passwd entry)."""
    try:
        name = getpass.getuser()
    except (OSError, KeyError, ImportError):
        name = os.environ.get("USER") or os.environ.get("USERNAME") or ""
    return name or "unknown"


def file_identity(path: Path | str) -> tuple[int, int] | None:
    """(device, inode) of the file at ``path``, None when there is none: a file deleted, moved
    or replaced under an open store shows up as a different (or no) identity."""
    try:
        st = os.stat(path)
    except OSError:
        return None
    return st.st_dev, st.st_ino
