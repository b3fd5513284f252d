"""Several Unix accounts sharing one store: a group, a setgid folder, umask 002.

Two accounts in the group both write the store (its -wal and -shm files are created group
writable too, since SQLite gives them the database file's mode); an account outside the group
can read but not write and is told so; a store made with umask 022 by one member cannot be
written by the other, and lotwatch says so. Needs root (to create the accounts); skipped with
the reason otherwise.
"""

from __future__ import annotations

import grp
import os
import stat
import subprocess

from tests.reliability.helpers import CHAR, assert_clean_refusal
from tests.reliability.helpers_env import accounts, public_dir  # noqa: F401 - fixture

LOG = ["log", CHAR, "500.1", "--tag", "site=north", "--tag", "line=1", "--tag", "shift=day"]

_HOLD_OPEN = """
import os, stat, sys
from lotwatch.store import LotEntry, Store
path = sys.argv[1]
with Store.open(path) as s:
    s.log_lots([LotEntry("fill_volume", ["500.0"], {"site": "south", "line": "2", "shift": "day"},
                         lot="HELD-" + sys.argv[2])])
    for suffix in ("", "-wal", "-shm"):
        st = os.stat(path + suffix)
        print(suffix or "db", oct(stat.S_IMODE(st.st_mode)), st.st_gid)
"""


def _ok(res: subprocess.CompletedProcess) -> str:
    assert res.returncode == 0, res.stdout + res.stderr
    return res.stdout


def test_two_accounts_in_a_group_share_one_store(accounts) -> None:  # noqa: F811
    group = accounts.group()
    gid = grp.getgrnam(group).gr_gid
    alice, bob = accounts.user(groups=(group,)), accounts.user(groups=(group,))
    outsider = accounts.user()
    with public_dir() as d:
        shared = d / "shared"
        shared.mkdir()
        os.chown(shared, 0, gid)
        shared.chmod(0o2775)  # setgid: new files get the folder's group
        path = shared / "plant.sqlite"

        _ok(accounts.run(alice, ["init", path], umask="002"))
        _ok(accounts.run(alice, ["characteristic", "add", CHAR, "--unit", "mL", "--resolution",
                                 "0.1", "--target", "500", "--db", path], umask="002"))
        _ok(accounts.run(alice, [*LOG, "--lot", "A-1", "--db", path], umask="002"))
        _ok(accounts.run(bob, [*LOG, "--lot", "B-1", "--db", path], umask="002"))
        _ok(accounts.run(bob, ["correct", 1, "500.2", "--reason", "re-read", "--db", path],
                         umask="002"))
        st = path.stat()
        assert st.st_gid == gid and stat.S_IMODE(st.st_mode) & 0o060 == 0o060

        # -wal and -shm (exist while a connection is open) are group writable and in the group
        for who in (alice, bob):
            out = _ok(accounts.run_python(who, _HOLD_OPEN, str(path), who, umask="002"))
            for line in out.splitlines():
                name, mode, file_gid = line.split()
                assert int(mode, 8) & 0o060 == 0o060, (who, line)
                assert int(file_gid) == gid, (who, line)

        hist = _ok(accounts.run(alice, ["history", 1, "--db", path]))
        assert f"by {alice}" in hist and f"by {bob}" in hist

        # outside the group: may read (and run a dry-run review), cannot write, and is told why
        (d / "out").mkdir()
        (d / "out").chmod(0o777)
        for args in (["check"], ["history", 1], ["export"], ["review", "--dry-run"],
                     ["report", "--dry-run", "--out", d / "out" / "w.md"], ["alerts", "list"]):
            _ok(accounts.run(outsider, [*args, "--db", path]))
        out = assert_clean_refusal(accounts.run(outsider, [*LOG, "--lot", "X-1", "--db", path]))
        assert "cannot be written" in out or "not writable" in out, out
        _ok(accounts.run(alice, ["check", "--db", path]))


def test_store_made_with_umask_022_is_refused_to_the_other_member(accounts) -> None:  # noqa: F811
    group = accounts.group()
    gid = grp.getgrnam(group).gr_gid
    alice, bob = accounts.user(groups=(group,)), accounts.user(groups=(group,))
    with public_dir() as d:
        shared = d / "shared"
        shared.mkdir()
        os.chown(shared, 0, gid)
        shared.chmod(0o2775)
        path = shared / "plant.sqlite"
        _ok(accounts.run(alice, ["init", path], umask="022"))
        _ok(accounts.run(alice, ["characteristic", "add", CHAR, "--unit", "mL", "--resolution",
                                 "0.1", "--db", path], umask="022"))
        assert stat.S_IMODE(path.stat().st_mode) & 0o020 == 0
        out = assert_clean_refusal(accounts.run(bob, [*LOG, "--db", path], umask="002"))
        assert "cannot be written" in out or "not writable" in out, out
        # the fix from the documentation: make the store group writable
        _ok(accounts.run(alice, ["check", "--db", path]))
        path.chmod(0o664)
        _ok(accounts.run(bob, [*LOG, "--db", path], umask="002"))
