"""Day sums at SQLite's integer limit.

A bucket keeps n, sum d and sum d^2 (d = units - origin) as SQLite INTEGERs, which are signed
64-bit numbers (sqlite.org/datatype3.html: "up to 8 bytes"; largest 2^63 - 1 =
9,223,372,036,854,775,807). The store accepts |d| up to MAX_ABS_D = 10^7 resolution steps, so a
day and group holds floor((2^63 - 1) / 10^14) = 92,233 values at that extreme. The tests fill
one bucket to that bound exactly, then show the store takes a value that still fits and refuses,
with a message and nothing stored, one that does not, through logging and through import. Before,
the import wrapped the sum around silently (64-bit polars sums) or failed with a traceback.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from lotwatch.store import LotEntry, Store, StoreError
from lotwatch.store.aggregates import INT64_MAX, capacity
from lotwatch.store.values import MAX_ABS_D

from tests.reliability.helpers import Snapshot, assert_clean_refusal, run_cli

TAGS = {"site": "A", "line": "1", "shift": "d"}
AT = "2026-11-20T08:00:00Z"
FULL = capacity(MAX_ABS_D)


def _bucket(path: Path) -> tuple[int, int, int]:
    conn = sqlite3.connect(path)
    try:
        return conn.execute("SELECT n, sum_d, sum_d2 FROM buckets WHERE factor = 'site'"
                            ).fetchone()
    finally:
        conn.close()


@pytest.fixture(scope="module")
def full_store(tmp_path_factory) -> Path:
    """One bucket holding exactly ``FULL`` values at d = +10^7 (resolution 1, origin 0)."""
    assert FULL == 92_233  # 9,223,372,036,854,775,807 // 10^14, worked by hand
    path = tmp_path_factory.mktemp("bound") / "s.sqlite"
    with Store.create(path, zone="UTC") as s:
        s.add_characteristic("x", unit="u", resolution="1", target=0)
        s.log_lots([LotEntry("x", [str(MAX_ABS_D)] * FULL, TAGS, lot="FULL", measured_at=AT)])
    return path


def test_a_bucket_holds_its_capacity_exactly(full_store: Path) -> None:
    n, s1, s2 = _bucket(full_store)
    assert (n, s1, s2) == (FULL, FULL * MAX_ABS_D, FULL * MAX_ABS_D**2)
    assert s2 <= INT64_MAX < s2 + MAX_ABS_D**2


def test_the_last_value_that_fits_is_taken_and_the_next_refused(full_store: Path,
                                                                tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    path.write_bytes(full_store.read_bytes())
    room = INT64_MAX - _bucket(path)[2]  # 72,036,854,775,807
    fits = int(room**0.5)  # the largest d whose square still fits
    while (fits + 1) ** 2 <= room:
        fits += 1
    while fits**2 > room:
        fits -= 1
    before = Snapshot.of(path)
    with Store.open(path) as s:
        with pytest.raises(StoreError, match="too many extreme values of x for site = A"):
            s.log_lots([LotEntry("x", [str(fits + 1)], TAGS, lot="ONE-TOO-MANY",
                                 measured_at=AT)])
    assert Snapshot.of(path) == before
    with Store.open(path) as s:
        s.log_lots([LotEntry("x", [str(fits)], TAGS, lot="LAST", measured_at=AT)])
        assert s.check().ok
    assert _bucket(path)[2] == FULL * MAX_ABS_D**2 + fits**2 <= INT64_MAX


@pytest.mark.slow  # two imports of 92,000 rows in subprocesses
def test_an_import_past_the_bound_is_refused_not_wrapped(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    with Store.create(path, zone="UTC") as s:
        s.add_characteristic("x", unit="u", resolution="1", target=0)
    rows = FULL + 1  # one value too many for one day and group
    src = tmp_path / "big.csv"
    body = "".join(f"L{i},x,{MAX_ABS_D},A,1,d,{AT}\n" for i in range(rows))
    src.write_text("lot,characteristic,value,site,line,shift,measured_at\n" + body)
    before = Snapshot.of(path)
    res = run_cli("import", src, "--db", path, timeout=300)
    assert_clean_refusal(res, contains=("too many extreme values", "2026-11-20"))
    assert res.returncode == 2
    assert Snapshot.of(path) == before
    # the same file minus one row is stored, and its sums are exact
    src.write_text("lot,characteristic,value,site,line,shift,measured_at\n"
                   + "".join(body.splitlines(keepends=True)[:FULL]))
    res = run_cli("import", src, "--db", path, timeout=300)
    assert res.returncode == 0, res.stdout + res.stderr
    assert _bucket(path) == (FULL, FULL * MAX_ABS_D, FULL * MAX_ABS_D**2)
    assert run_cli("check", "--db", path).returncode == 0


@pytest.mark.slow  # four buckets filled to capacity (369,000 values)
def test_review_over_days_whose_sums_pass_64_bits_together(tmp_path: Path) -> None:
    """Each day sum fits, but two full days of one group add up past 2^63 - 1: the review's
    running totals must not wrap around (they read "zero within-group variance" before).
    Oracle: scipy.stats.f_oneway on the raw values."""
    from datetime import date

    import numpy as np
    from lotwatch.tui.services import review_engine as eng
    from scipy import stats

    path = tmp_path / "s.sqlite"
    small = [i % 5 for i in range(60)]
    with Store.create(path, zone="UTC") as s:
        s.add_characteristic("x", unit="u", resolution="1", target=0)
        for day in (10, 11):
            for line, v in (("1", MAX_ABS_D), ("2", -MAX_ABS_D)):
                s.log_lots([LotEntry("x", [str(v)] * FULL,
                                     {"site": "S" + line, "line": line, "shift": "h" + line},
                                     lot=f"L{day}-{line}", measured_at=f"2026-11-{day}T08:00:00Z")])
        s.log_lots([LotEntry("x", [str(v)], {"site": f"S{i % 2 + 1}", "line": f"{i % 2 + 1}",
                                             "shift": f"h{i % 2 + 1}"},
                             lot=f"S{i}", measured_at=f"2026-11-{12 + i % 10}T08:00:00Z")
                    for i, v in enumerate(small)])
        review = eng.run_review(s, as_of=date(2026, 11, 29), persist=False)
    g1 = np.r_[np.full(2 * FULL, float(MAX_ABS_D)), small[0::2]]
    g2 = np.r_[np.full(2 * FULL, -float(MAX_ABS_D)), small[1::2]]
    expected = stats.f_oneway(g1, g2).statistic
    line = next(c for c in review.comparisons if c.factor == "line")
    assert line.status == "ok" and line.n_total == g1.size + g2.size
    assert line.f == pytest.approx(expected, rel=1e-9)
