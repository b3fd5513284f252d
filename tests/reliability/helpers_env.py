"""Environment fixtures for the reliability tests: other Unix accounts, a world-readable work
folder, a size-limited file system. Each one skips with the reason when this machine cannot
provide it (not root, no useradd, mount not permitted ...)."""

from __future__ import annotations

import hashlib
import os
import secrets
import shutil
import subprocess
import sys
import sysconfig
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest

from tests.reliability.helpers import ROOT, subprocess_env


def need_root(what: str) -> None:
    if os.geteuid() != 0:
        pytest.skip(f"{what} needs root (to create accounts or mount a file system)")


@contextmanager
def public_dir() -> Iterator[Path]:
    """A fresh folder under /tmp that other accounts can reach (pytest's tmp_path is 0700)."""
    d = Path(tempfile.mkdtemp(prefix="lotwatch-rel-", dir="/tmp"))
    d.chmod(0o755)
    try:
        yield d
    finally:
        for p in d.rglob("*"):
            try:
                p.chmod(0o777 if p.is_dir() else 0o666)
            except OSError:
                pass
        d.chmod(0o755)
        shutil.rmtree(d, ignore_errors=True)


_PUBLIC_TREE: Path | None = None


def _public_source_tree() -> Path:
    """A world-readable folder under /tmp holding a copy of this checkout's ``lotwatch/{store,
    stats,tui}`` and ``tests/tui/tui_helpers.py``, so another account's Python imports the code
    under test even when the checkout itself is out of its reach (a clone in a 0700 folder) or
    installed editable (a path hook other accounts' interpreters do not load). Copied once per
    test process, one folder per checkout."""
    global _PUBLIC_TREE
    if _PUBLIC_TREE is not None:
        return _PUBLIC_TREE
    tag = hashlib.sha256(str(ROOT.resolve()).encode()).hexdigest()[:10]
    d = Path(tempfile.gettempdir()) / f"lotwatch-src-{os.getuid()}-{tag}"
    shutil.rmtree(d, ignore_errors=True)
    skip = shutil.ignore_patterns("__pycache__", "*.pyc")
    for name in ("store", "stats", "tui"):
        shutil.copytree(ROOT / name, d / "lotwatch" / name, ignore=skip)
    (d / "tests" / "tui").mkdir(parents=True)
    shutil.copy2(ROOT / "tests" / "tui" / "tui_helpers.py", d / "tests" / "tui")
    for p in (d, *d.rglob("*")):
        p.chmod(0o755 if p.is_dir() else 0o644)
    _PUBLIC_TREE = d
    return d


class Accounts:
    """Unix accounts and groups made for one test (removed afterwards)."""

    def __init__(self) -> None:
        self.users: list[str] = []
        self.groups: list[str] = []
        self.python: list[str] | None = None

    def group(self) -> str:
        name = "lwg" + secrets.token_hex(3)
        subprocess.run(["groupadd", name], check=True, capture_output=True)
        self.groups.append(name)
        return name

    def user(self, *, groups: tuple[str, ...] = ()) -> str:
        name = "lwu" + secrets.token_hex(3)
        cmd = ["useradd", "-M", "-N", "-s", "/usr/sbin/nologin"]
        if groups:
            cmd += ["-G", ",".join(groups)]
        subprocess.run([*cmd, name], check=True, capture_output=True)
        self.users.append(name)
        return name

    def cleanup(self) -> None:
        for u in self.users:
            subprocess.run(["userdel", u], capture_output=True)
        for g in self.groups:
            subprocess.run(["groupdel", g], capture_output=True)

    def interpreter(self, user: str) -> list[str]:
        """A Python another account can run with lotwatch's packages: this one if they can
        reach it, else the system Python of the same version; either with a world-readable copy
        of the code under test and this venv's site-packages on its path."""
        if self.python is not None:
            return self.python
        env = subprocess_env()
        probe = "import polars, click, textual, scipy, lotwatch.tui.cli, tests.tui.tui_helpers"
        path = os.pathsep.join([str(_public_source_tree()), str(ROOT),
                                sysconfig.get_paths()["purelib"]])
        version = f"python{sys.version_info.major}.{sys.version_info.minor}"
        system = shutil.which(version, path="/usr/bin:/usr/local/bin:/bin")
        for exe in (sys.executable, system):
            if exe and _as(user, [exe, "-c", probe], dict(env, PYTHONPATH=path)).returncode == 0:
                self.python = ["env", f"PYTHONPATH={path}", exe]
                return self.python
        pytest.skip("no Python interpreter that another account may run has lotwatch's "
                    f"packages (this one, {sys.executable}, is not reachable by them)")

    def run(self, user: str, args: list[str], *, umask: str = "022",
            env_extra: dict[str, str] | None = None, timeout: float = 120
            ) -> subprocess.CompletedProcess:
        """Run ``lotwatch ARGS`` as ``user`` with the given umask."""
        py = self.interpreter(user)
        env = subprocess_env(env_extra)
        cmd = ["sh", "-c", f'umask {umask} && exec "$@"', "sh", *py, "-m", "lotwatch.tui",
               *(str(a) for a in args)]
        return _as(user, cmd, env, timeout=timeout)

    def run_python(self, user: str, code: str, *args: str, timeout: float = 120,
                   umask: str = "022") -> subprocess.CompletedProcess:
        py = self.interpreter(user)
        cmd = ["sh", "-c", f'umask {umask} && exec "$@"', "sh", *py, "-c", code, *args]
        return _as(user, cmd, subprocess_env(), timeout=timeout)


def _as(user: str, cmd: list[str], env: dict[str, str], timeout: float = 120
        ) -> subprocess.CompletedProcess:
    env = dict(env, HOME="/tmp", USER=user, LOGNAME=user)
    full = ["runuser", "-u", user, "--", "env", *(f"{k}={v}" for k, v in env.items()), *cmd]
    return subprocess.run(full, capture_output=True, text=True, timeout=timeout, cwd="/tmp")


@pytest.fixture
def accounts() -> Iterator[Accounts]:
    need_root("creating Unix accounts")
    if not shutil.which("useradd") or not shutil.which("runuser"):
        pytest.skip("useradd/runuser are not available on this machine")
    acc = Accounts()
    try:
        try:
            acc.group()
        except (subprocess.CalledProcessError, OSError) as exc:
            pytest.skip(f"cannot create Unix groups here: {exc}")
        acc.cleanup()
        acc.groups.clear()
        yield acc
    finally:
        acc.cleanup()


@contextmanager
def small_filesystem(size: str = "2m") -> Iterator[Path]:
    """A tmpfs of ``size`` mounted on a fresh folder (root only); skips if mounting fails."""
    need_root("mounting a size-limited file system")
    d = Path(tempfile.mkdtemp(prefix="lotwatch-smallfs-", dir="/tmp"))
    res = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(d)],
                         capture_output=True, text=True)
    if res.returncode != 0:
        d.rmdir()
        pytest.skip(f"cannot mount a tmpfs here ({res.stderr.strip()}); the RLIMIT_FSIZE test "
                    "covers a size limit instead")
    try:
        yield d
    finally:
        subprocess.run(["umount", "-l", str(d)], capture_output=True)
        shutil.rmtree(d, ignore_errors=True)


def fill_up(folder: Path) -> Path:
    """Write a filler file until the file system is full; returns it (delete it to free)."""
    filler = folder / "filler.bin"
    fd = os.open(filler, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
    try:
        for size in (1 << 20, 65536, 4096, 512, 1):
            try:
                while os.write(fd, b"\0" * size) > 0:
                    pass
            except OSError:
                pass
    finally:
        os.close(fd)
    return filler


def with_fsize_limit(limit_bytes: int) -> Callable[[], None]:
    """preexec_fn for subprocess: limit the size of any file the child writes."""
    import resource
    import signal

    def apply() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # get EFBIG instead of being killed
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))

    return apply
