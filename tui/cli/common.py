"""Shared pieces of the command line: locating the store and turning store errors into messages."""

from __future__ import annotations

import functools
import os
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import click
from lotwatch.tui.services.paths import default_store_path

F = TypeVar("F", bound=Callable[..., Any])

ENV_VAR = "LOTWATCH_DB"


def resolve_db_path(db: str | os.PathLike[str] | None) -> Path:
    """``--db PATH``, else ``$LOTWATCH_DB``, else the default file in the user's data directory."""
    if db:
        return Path(db).expanduser()
    env = os.environ.get(ENV_VAR)
    if env:
        return Path(env).expanduser()
    return default_store_path()


def db_option(f: F) -> F:
    """Add ``--db PATH`` to a command (falls back to the group's ``--db``, then env, then default)."""

    @click.option(
        "--db",
        "db",
        type=click.Path(dir_okay=False),
        default=None,
        help=f"Store file. Default: ${ENV_VAR}, else {default_store_path()}.",
    )
    @functools.wraps(f)
    def wrapper(*args: Any, db: str | None = None, **kwargs: Any) -> Any:
        ctx = click.get_current_context()
        group_db = (ctx.find_root().obj or {}).get("db")
        kwargs["db_path"] = resolve_db_path(db or group_db)
        return f(*args, **kwargs)

    return wrapper  # type: ignore[return-value]


def open_store(db_path: Path, *, read_only: bool = False):  # -> store.Store
    """Open an existing store or exit with a message that says how to create one."""
    from lotwatch.store import Store, StoreError, StoreMissing

    try:
        return Store.open(db_path, read_only=read_only)
    except StoreMissing:
        raise UserError(
            f"no store at {db_path}. Create one with: lotwatch init {db_path}"
            "  (or try the demo: lotwatch demo)"
        ) from None
    except StoreError as exc:
        raise UserError(str(exc)) from None


def plain(text: object) -> str:
    """User-supplied text made safe for the terminal, line by line: escape sequences, control
    and bidi characters removed (``tui.safe_text.clean``), line breaks kept."""
    from lotwatch.tui.render.safe_text import clean

    return "\n".join(clean(line) for line in str(text).split("\n"))


def store_errors(f: F) -> F:
    """Turn any ``StoreError`` raised by a command into a clean message and exit status 2."""

    @functools.wraps(f)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        from lotwatch.store import StoreError

        try:
            return f(*args, **kwargs)
        except StoreError as exc:
            raise UserError(plain(exc)) from None
        except UnicodeEncodeError as exc:
            # an argument with bytes that are not UTF-8 (Python keeps them as surrogates)
            bad = exc.object[exc.start:exc.end].encode("utf-8", "surrogateescape")
            raise UserError(
                f"some text given to lotwatch is not valid UTF-8 (bytes {bad!r}); check the "
                "terminal's or the file's encoding. Nothing was changed."
            ) from None

    return wrapper  # type: ignore[return-value]


class UserError(click.ClickException):
    """A refusal with a clear message; exit status 2 (bad input or store error)."""

    exit_code = 2
