"""Where lotwatch keeps its files by default: the user's data directory (platformdirs; XDG on
Linux). Application policy, so it lives here and not in the store package, which only ever
works on a path it is given."""

from __future__ import annotations

from pathlib import Path


def data_dir() -> Path:
    """The user's lotwatch data directory (not created here)."""
    from platformdirs import user_data_path

    return user_data_path("lotwatch", appauthor=False)


def default_store_path() -> Path:
    """The default store: ``lotwatch.sqlite`` in the user's data directory."""
    return data_dir() / "lotwatch.sqlite"


def demo_store_path() -> Path:
    """Where ``lotwatch demo`` keeps its store: ``demo.sqlite`` in the user's data directory,
    apart from the person's own store."""
    return data_dir() / "demo.sqlite"
