"""The import's bulk path (store.bulk): no write lock for a refused import, bounded transactions that
never split a lot, a re-run that completes an interrupted import, and the input checks added for
ambiguous separators, mixed encodings, implausible years, huge cells, absurd widths and repeated
rows.

Sources: SQLite's locking (BEGIN IMMEDIATE takes the RESERVED lock; a second writer gets
SQLITE_BUSY after its timeout, sqlite.org/lang_transaction.html); UTF-8 well-formedness (RFC 3629,
section 4); Python's int-string conversion limit of 4,300 digits (docs.python.org, "Integer string
conversion length limitation"); decimal comma with '.' grouping thousands (common practice in
many European locales).
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from lotwatch.store import BadInput, Store, StoreLocked, bulk
from lotwatch.store.importer import FileRefused, ImportOptions, import_file

HEADER = "lot,characteristic,value,measured_at,site,line,shift"


@pytest.fixture
def lab(tmp_path: Path):
    s = Store.create(tmp_path / "lab.sqlite", timeout=0.3)
    s.add_characteristic("fill_volume", unit="mL", resolution="0.1", plausible=(0, 5000))
    try:
        yield s
    finally:
        s.close()


def rows(n: int, start: int = 0, value: str = "500.1") -> str:
    return "".join(f"L{i // 2:05d},fill_volume,{value},2026-11-03T08:15:00Z,S,L{i // 2 % 3},e\n"
                   for i in range(start, start + n))


def write(path: Path, text: str, encoding: str = "utf-8") -> Path:
    path.write_bytes(text.encode(encoding))
    return path


def dump(store: Store) -> list[str]:
    return list(store.conn.iterdump())


@pytest.fixture
def locker(lab: Store):
    """Another connection holding the store's write lock (BEGIN IMMEDIATE) until released."""
    conn = sqlite3.connect(lab.path, timeout=0.1, isolation_level=None)
    conn.execute("BEGIN IMMEDIATE")
    yield conn
    conn.execute("ROLLBACK")
    conn.close()


def test_refused_import_never_waits_for_the_write_lock(lab, tmp_path, locker):
    f = write(tmp_path / "bad.csv", HEADER + "\n" + rows(40) + "X,fill_volume,5OO.1,"
              "2026-11-03T08:15:00Z,S,L,e\n")
    with pytest.raises(BadInput) as err:  # not StoreLocked: the lock was never asked for
        import_file(lab, f)
    assert [(p.row, p.column, p.value) for p in err.value.problems] == [(41, "value", "5OO.1")]


def test_a_good_import_does_wait_for_the_write_lock(lab, tmp_path, locker):
    # the control for the test above: the same situation with a good file reaches the lock
    f = write(tmp_path / "good.csv", HEADER + "\n" + rows(40))
    with pytest.raises(StoreLocked):
        import_file(lab, f)


def test_store_problems_are_found_without_the_write_lock(lab, tmp_path, locker):
    f = write(tmp_path / "bad.csv", HEADER + "\n" + rows(4) + "Z,fill_volume,9999.9,"
              "2026-11-03T08:15:00Z,S,L,e\n")
    with pytest.raises(BadInput, match="plausible"):
        import_file(lab, f)


def test_transactions_are_bounded_and_never_split_a_lot(lab, tmp_path, monkeypatch):
    monkeypatch.setattr(bulk, "CHUNK_VALUES", 7)
    chunks: list[list[str]] = []
    real = bulk._write_chunk

    def spy(store, part, *args):
        chunks.append(part.entries.explode("units")["lot"].to_list())
        return real(store, part, *args)

    monkeypatch.setattr(bulk, "_write_chunk", spy)
    f = write(tmp_path / "many.csv", HEADER + "\n" + rows(60))
    summary = import_file(lab, f)
    assert summary.stored == 60
    assert len(chunks) > 1 and max(map(len, chunks)) <= 7 + 1  # a lot finishing a chunk
    owners = {}
    for i, lots in enumerate(chunks):
        for lot in lots:
            assert owners.setdefault(lot, i) == i  # each lot in exactly one transaction
    assert lab.check().ok


def test_interrupted_import_keeps_whole_lots_and_a_rerun_completes_it(lab, tmp_path,
                                                                      monkeypatch):
    monkeypatch.setattr(bulk, "CHUNK_VALUES", 10)
    real = bulk._write_chunk
    calls = []

    def dies_on_third(*args):
        calls.append(1)
        if len(calls) == 3:
            raise KeyboardInterrupt  # what Ctrl-C does in the middle of a transaction
        return real(*args)

    monkeypatch.setattr(bulk, "_write_chunk", dies_on_third)
    f = write(tmp_path / "big.csv", HEADER + "\n" + rows(50))
    with pytest.raises(KeyboardInterrupt):
        import_file(lab, f)
    assert lab.check().ok
    per_lot = lab.conn.execute("SELECT count(*) FROM measurements GROUP BY lot_id").fetchall()
    assert {n for (n,) in per_lot} == {2} and len(per_lot) == 10  # two whole transactions
    monkeypatch.setattr(bulk, "_write_chunk", real)
    again = import_file(lab, f)
    assert (again.stored, again.duplicates) == (30, 20)
    assert lab.conn.execute("SELECT count(*) FROM measurements").fetchone()[0] == 50
    assert lab.check().ok


def test_decimal_comma_refuses_ambiguous_thousands(lab, tmp_path):
    f = write(tmp_path / "dc.csv", "lot;characteristic;value;measured_at;site;line;shift\n"
              "A;fill_volume;980,5;2026-11-03T08:15:00Z;S;L;e\n"
              "B;fill_volume;1.250;2026-11-03T08:15:00Z;S;L;e\n")
    before = dump(lab)
    with pytest.raises(BadInput) as err:
        import_file(lab, f, ImportOptions(decimal_comma=True))
    [p] = err.value.problems
    assert (p.row, p.column, p.value) == (2, "value", "1.250") and "ambiguous" in p.reason
    assert dump(lab) == before
    # declared: '.' groups thousands, so 1.250 is one thousand two hundred fifty
    summary = import_file(lab, f, ImportOptions(decimal_comma=True, thousands="."))
    assert summary.stored == 2
    values = sorted(lab.measurements_frame()["value_text"].to_list())
    assert values == ["1250.0", "980.5"]


def test_file_mixing_utf8_and_latin1_is_refused_naming_the_bad_line(lab, tmp_path):
    text = (HEADER + "\n" + "A,fill_volume,500.1,2026-11-03T08:15:00Z,Münster,L,e\n").encode()
    text += "B,fill_volume,500.1,2026-11-03T08:15:00Z,Münster,L,e\n".encode("latin-1")
    f = tmp_path / "mixed.csv"
    f.write_bytes(text)
    before = dump(lab)
    with pytest.raises(FileRefused) as err:
        import_file(lab, f)
    assert "mixed.csv" in str(err.value) and "line 3" in str(err.value)
    assert "line 2 is UTF-8" in str(err.value)
    assert dump(lab) == before


@pytest.mark.parametrize("stamp", ["0999-06-01T08:00:00Z", "2999-01-01T00:00:00Z"])
def test_implausible_years_are_refused(lab, tmp_path, stamp):
    f = write(tmp_path / "y.csv", HEADER + f"\nA,fill_volume,500.1,{stamp},S,L,e\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    [p] = err.value.problems
    assert (p.row, p.column, p.value) == (1, "measured_at", stamp)
    assert "outside the plausible range" in p.reason
    wide = ImportOptions(years=(900, 3000))  # the range is configurable ...
    if stamp < "2000":
        assert import_file(lab, f, wide).stored == 1
    else:  # ... but no range lets a lot be measured in the future (store.rules, every door)
        with pytest.raises(BadInput, match="in the future"):
            import_file(lab, f, wide)


def test_a_cell_with_thousands_of_digits_gets_a_clear_message(lab, tmp_path):
    huge = "5" + "0" * 4400 + ".1"
    f = write(tmp_path / "h.csv", HEADER + f"\nA,fill_volume,{huge},2026-11-03T08:15:00Z,S,L,e\n"
              "B,fill_volume,0." + "0" * 4400 + "1,2026-11-03T08:15:00Z,S,L,e\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    assert [(p.row, p.column) for p in err.value.problems] == [(1, "value"), (2, "value")]
    assert all("characters" in p.reason for p in err.value.problems)


def test_log_refuses_a_value_with_thousands_of_digits(lab):
    from lotwatch.store import LotEntry

    with pytest.raises(BadInput, match="finer than the resolution|too small to be a measurement"):  # a message, no crash
        lab.log_lots([LotEntry("fill_volume", ["0." + "0" * 4400 + "1"],
                               {"site": "S", "line": "L", "shift": "e"})])


def test_absurdly_wide_files_are_refused_before_reading(lab, tmp_path):
    header = ",".join(f"c{i}" for i in range(100_000))
    f = write(tmp_path / "wide.csv", header + "\n" + ",".join("1" * 1 for _ in range(100_000)))
    with pytest.raises(FileRefused, match="100,000 columns"):
        import_file(lab, f)


def test_identical_rows_are_named_and_voiding_the_copy_makes_the_clean_file_a_duplicate(
        lab, tmp_path):
    line = "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
    f = write(tmp_path / "dup.csv", HEADER + "\n" + line + "A,fill_volume,500.2,"
              "2026-11-03T08:15:00Z,S,L,e\n" + line)
    first = import_file(lab, f)
    assert first.stored == 3
    [note] = [n for n in first.notes if "repeat an earlier row" in n]
    assert "rows 3" in note and "void" in note
    # the clean file (without the copy) conflicts while the copy is live ...
    clean = write(tmp_path / "clean.csv", HEADER + "\n" + line + "A,fill_volume,500.2,"
                  "2026-11-03T08:15:00Z,S,L,e\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, clean)
    assert "void" in err.value.problems[0].reason  # says what the user can do
    # ... and is a duplicate once the copy is voided (voided values are not compared)
    copy = max(first.measurement_ids)
    lab.void(copy, reason="copied row in the lab file")
    again = import_file(lab, clean)
    assert (again.stored, again.duplicates) == (0, 2)
    assert lab.check().ok


def test_bulk_days_and_lot_counts_follow_the_plant_zone_like_log_lots(lab, tmp_path):
    # America/Chicago is UTC-6 on 3 November 2026 (US daylight time ended on 1 November; IANA tz
    # database). 23:30 local on the 3rd is 05:30 UTC on the 4th, and stays on plant day the 3rd.
    from lotwatch.store import LotEntry

    lab.set_plant_zone("America/Chicago")
    f = write(tmp_path / "z.csv", HEADER + "\n"
              "A,fill_volume,500.1,2026-11-03 23:30,S,L,night\n"
              "A,fill_volume,500.3,2026-11-03 23:30,S,L,night\n"
              "B,fill_volume,500.2,2026-11-04T04:30:00Z,S,L,night\n")
    import_file(lab, f)
    rows = lab.conn.execute("SELECT measured_at, day FROM measurements ORDER BY id").fetchall()
    assert rows == [("2026-11-04T05:30:00Z", "2026-11-03")] * 2 + [
        ("2026-11-04T04:30:00Z", "2026-11-03")]
    got = lab.conn.execute("SELECT factor, level, day, n, lots FROM buckets "
                           "WHERE factor = 'shift'").fetchall()
    assert got == [("shift", "night", "2026-11-03", 3, 2)]  # 3 values, 2 lots
    # the row-by-row path stores the same lots the same way
    other = Store.create(tmp_path / "other.sqlite")
    other.add_characteristic("fill_volume", unit="mL", resolution="0.1", plausible=(0, 5000))
    other.set_plant_zone("America/Chicago")
    tags = {"site": "S", "line": "L", "shift": "night"}
    other.log_lots([LotEntry("fill_volume", ["500.1", "500.3"], tags, lot="A",
                             measured_at="2026-11-03 23:30"),
                    LotEntry("fill_volume", ["500.2"], tags, lot="B",
                             measured_at="2026-11-04T04:30:00Z")])
    sql = "SELECT characteristic_id, factor, level, day, n, sum_d, sum_d2, lots FROM buckets"
    assert sorted(lab.conn.execute(sql).fetchall()) == sorted(other.conn.execute(sql).fetchall())
    other.close()
    assert lab.check().ok


def test_check_finds_malformed_stored_times(lab, tmp_path):
    # A time stored before years were checked could have a three-digit year ("999-06-01T...");
    # text compares as time only in the stored form, so check must say so (common practice).
    f = write(tmp_path / "ok.csv", HEADER + "\nA,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n")
    import_file(lab, f)
    assert lab.check().ok
    lab.conn.execute("UPDATE measurements SET measured_at = '999-06-01T08:15:00Z'")
    report = lab.check()
    assert not report.ok
    assert any("malformed time" in p and "999-06-01T08:15:00Z" in p for p in report.problems)


def test_rows_of_a_stored_lot_may_omit_its_required_tags(lab, tmp_path):
    # DEVELOPERS.md, "Rules the store keeps": an entry for a stored lot may omit its tags
    first = write(tmp_path / "a.csv", HEADER + "\nA,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n")
    import_file(lab, first)
    lab.add_characteristic("cap_torque", unit="N·m", resolution="0.01", plausible=(0, 5))
    later = write(tmp_path / "b.csv", "lot,characteristic,value,measured_at\n"
                  "A,cap_torque,2.05,2026-11-03T08:20:00Z\n"
                  "NEW,cap_torque,2.05,2026-11-03T08:20:00Z\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, later)
    [p] = err.value.problems
    assert p.row == 2 and "missing required tags" in p.reason  # only the new lot lacks them
    kept = write(tmp_path / "c.csv", "lot,characteristic,value,measured_at\n"
                 "A,cap_torque,2.05,2026-11-03T08:20:00Z\n")
    assert import_file(lab, kept).stored == 1
    assert lab.check().ok


def test_stored_lots_are_judged_in_slices(lab, tmp_path, monkeypatch):
    from lotwatch.store import bulk_plan

    f = write(tmp_path / "a.csv", HEADER + "\n" + rows(30))
    import_file(lab, f)
    monkeypatch.setattr(bulk_plan, "JUDGE_SLICE", 4)  # 15 entries: four slices
    more = write(tmp_path / "b.csv", HEADER + "\n" + rows(30) + rows(6, start=30)
                 + "L00001,fill_volume,500.9,2026-11-03T08:15:00Z,S,L1,e\n")
    with pytest.raises(BadInput) as err:  # the conflict in the last slice is found
        import_file(lab, more)
    assert [p.row for p in err.value.problems] == [3]
    fine = write(tmp_path / "c.csv", HEADER + "\n" + rows(30) + rows(6, start=30))
    again = import_file(lab, fine)
    assert (again.stored, again.duplicates) == (6, 30)
    assert lab.check().ok


def test_lots_stored_by_another_terminal_after_the_plan_are_judged_again(lab, tmp_path,
                                                                         monkeypatch):
    # A chunk is laid out before its transaction when its lots were new at planning time; a lot
    # logged meanwhile must still be skipped as a duplicate (or join its stored lot), never be
    # written twice, and the day sums must stay those of the raw rows (Store.check).
    from lotwatch.store import LotEntry
    from lotwatch.store.bulk import plan_values, write_plan
    from lotwatch.store.importer import parse_import

    monkeypatch.setattr(bulk, "CHUNK_VALUES", 4)
    lab.add_characteristic("cap_torque", unit="N·m", resolution="0.01", plausible=(0, 5))
    f = write(tmp_path / "a.csv", HEADER + "\n" + rows(20))
    parsed = parse_import(f, ImportOptions(), factors=["site", "line", "shift"],
                          characteristics=["fill_volume", "cap_torque"], zone=lab.plant_zone)
    plan = plan_values(lab, parsed.values, parsed.tag_keys, source="a.csv", round_values=False,
                       now_s="2026-11-03T09:00:00Z")
    with Store.open(lab.path) as floor:  # another terminal, after the plan was made
        floor.log_lots([
            LotEntry("fill_volume", ["500.1", "500.1"], {"site": "S", "line": "L0", "shift": "e"},
                     lot="L00003", measured_at="2026-11-03T08:15:00Z"),
            LotEntry("cap_torque", ["2.05"], {"site": "S", "line": "L0", "shift": "e"},
                     lot="L00006", measured_at="2026-11-03T08:15:00Z")])
    ids, lots = write_plan(lab, plan, source="a.csv", skip_bad=False)
    assert (len(ids), lots, plan.duplicates) == (18, 8, 2)  # L00006 was stored by the floor
    per_lot = dict(lab.conn.execute(
        "SELECT l.lot_code, count(*) FROM measurements m JOIN lots l ON l.id = m.lot_id "
        "WHERE m.characteristic_id = 1 GROUP BY l.lot_code").fetchall())
    assert per_lot == {f"L{i:05d}": 2 for i in range(10)}
    assert lab.check().ok


def test_notes_of_a_lots_rows_are_joined_once_each_in_file_order(lab, tmp_path):
    # importer docstring: an entry's notes are joined; the replicates of one lot share them
    f = write(tmp_path / "n.csv", HEADER + ",note\n"
              "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e,second look\n"
              "B,fill_volume,500.2,2026-11-03T08:15:00Z,S,L,e,\n"
              "A,fill_volume,500.3,2026-11-03T08:15:00Z,S,L,e,\n"
              "A,fill_volume,500.4,2026-11-03T08:15:00Z,S,L,e,gauge 2\n"
              "A,fill_volume,500.5,2026-11-03T08:15:00Z,S,L,e,second look\n")
    assert import_file(lab, f).stored == 5
    got = lab.conn.execute("SELECT l.lot_code, m.note FROM measurements m "
                           "JOIN lots l ON l.id = m.lot_id ORDER BY m.id").fetchall()
    assert got == [("A", "second look; gauge 2")] * 4 + [("B", None)]


def test_day_sums_past_the_limit_are_refused_before_anything_is_written(tmp_path, monkeypatch):
    # The import refuses a file whose values would take a day sum of squares past SQLite's
    # integer limit (tests/reliability/test_day_sum_bound.py does it at the real limit, slowly).
    # Here the limit is lowered to 60 so each branch is quick: the file's own sums (the bound
    # n * max d^2 = 4 * 16 > 30 sends it to the grouped check), and a stored sum over half the
    # limit (48 > 30) with a small file.
    from lotwatch.store import StoreError, aggregates

    monkeypatch.setattr(aggregates, "INT64_MAX", 60)
    with Store.create(tmp_path / "s.sqlite", zone="UTC") as s:
        s.add_characteristic("x", unit="u", resolution="1", target=0)

        def csv(name: str, values: list[int]) -> Path:
            return write(tmp_path / name, HEADER + "\n" + "".join(
                f"{name}{i},x,{v},2026-11-03T08:15:00Z,S,L,e\n" for i, v in enumerate(values)))

        before = dump(s)
        with pytest.raises(StoreError, match="too many extreme values of x for site = S"):
            import_file(s, csv("four", [4, 4, 4, -4]))  # 64 > 60
        assert dump(s) == before
        assert import_file(s, csv("three", [4, 4, -4])).stored == 3  # 48 <= 60
        before = dump(s)
        with pytest.raises(StoreError, match="too many extreme values"):
            import_file(s, csv("one", [4]))  # stored 48 + 16 > 60
        assert dump(s) == before
        assert import_file(s, csv("fits", [3])).stored == 1  # 48 + 9 = 57 <= 60


def test_padded_cells_are_trimmed_and_blank_cells_are_empty(lab, tmp_path):
    # surrounding white space (Unicode White_Space, so a no-break space too) is not part of a
    # cell (common practice for CSV exports); a cell of spaces is an empty cell
    f = write(tmp_path / "p.csv", HEADER + "\n"
              " A ,fill_volume\u00a0, 500.1,2026-11-03T08:15:00Z ,S,\tL ,e\n"
              "   ,fill_volume,500.2,2026-11-03T08:15:00Z,S,L,e\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    [p] = err.value.problems
    assert (p.row, p.column, p.reason) == (2, "lot", "lot id is empty")
    assert import_file(lab, f, ImportOptions(skip_bad=True)).stored == 1
    assert lab.conn.execute(
        "SELECT l.lot_code, m.measured_at, m.original_units, group_concat(t.key || '=' || t.value)"
        " FROM measurements m JOIN lots l ON l.id = m.lot_id JOIN lot_tags t ON t.lot_id = l.id"
        ).fetchone() == ("A", "2026-11-03T08:15:00Z", 5001, "line=L,shift=e,site=S")


@pytest.mark.parametrize("order", ["adjacent", "apart"])
def test_a_lot_whose_rows_disagree_on_a_tag_is_refused(lab, tmp_path, order):
    # importer docstring: a lot whose tags disagree between rows is refused, row by row; checked
    # by comparing neighbouring rows when a lot's rows are adjacent, by counting otherwise
    a1 = "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L1,e\n"
    a2 = "A,fill_volume,500.2,2026-11-03T08:15:00Z,S,L2,e\n"
    b = "B,fill_volume,500.3,2026-11-03T08:15:00Z,S,L1,e\n"
    body = a1 + a2 + b if order == "adjacent" else a1 + b + a2
    f = write(tmp_path / "t.csv", HEADER + "\n" + body)
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    [p] = err.value.problems
    assert (p.row, p.column, p.value) == (2 if order == "adjacent" else 3, "line", "L2")
    assert "lot 'A' has line='L1' on row 1" in p.reason
    fine = write(tmp_path / "f.csv", HEADER + "\n" + (a1 + b + a1 if order == "apart"
                                                      else a1 + a1 + b))
    assert import_file(lab, fine).stored == 3


def test_chunks_are_judged_again_only_after_another_connection_wrote(lab, tmp_path,
                                                                     monkeypatch):
    # PRAGMA data_version changes only when another connection commits
    # (sqlite.org/pragma.html#pragma_data_version): while it stands still the plan's judgement
    # holds and the chunks skip the second look; once it moves, every chunk is judged again.
    from lotwatch.store import LotEntry
    from lotwatch.store.bulk import plan_values, write_plan
    from lotwatch.store.importer import parse_import

    monkeypatch.setattr(bulk, "CHUNK_VALUES", 4)
    judged: list[int] = []
    real = bulk._judge_stored

    def spy(conn, part, *args):
        judged.append(part.entries.height)
        return real(conn, part, *args)

    monkeypatch.setattr(bulk, "_judge_stored", spy)
    f = write(tmp_path / "a.csv", HEADER + "\n" + rows(20))
    assert import_file(lab, f).stored == 20
    assert judged == []  # five chunks, nobody else wrote: no second judgement
    g = write(tmp_path / "b.csv", HEADER + "\n" + rows(20, start=20))
    parsed = parse_import(g, ImportOptions(), factors=["site", "line", "shift"],
                          characteristics=["fill_volume"], zone=lab.plant_zone)
    plan = plan_values(lab, parsed.values, parsed.tag_keys, source="b.csv", round_values=False,
                       now_s="2026-11-03T09:00:00Z")
    with Store.open(lab.path) as floor:  # another terminal writes after the plan
        floor.log_lots([LotEntry("fill_volume", ["500.1"], {"site": "S", "line": "L0",
                                                            "shift": "e"}, lot="F1")])
    ids, _ = write_plan(lab, plan, source="b.csv", skip_bad=False)
    assert len(ids) == 20 and len(judged) == 5  # every chunk judged again
    assert lab.check().ok


def test_replicates_at_different_times_are_noted_once_per_pair(lab, tmp_path):
    # importer docstring: a lot's replicate values are stamped with the time of its first row;
    # the summary says how many lot/characteristic pairs had differing times
    f = write(tmp_path / "t.csv", HEADER + "\n"
              "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
              "A,fill_volume,500.2,2026-11-03T08:20:00Z,S,L,e\n"
              "A,fill_volume,500.3,2026-11-03T08:25:00Z,S,L,e\n"
              "B,fill_volume,500.2,2026-11-03T08:15:00Z,S,L,e\n"
              "B,fill_volume,500.2,2026-11-03T08:15:00Z,S,L,e\n"
              "C,fill_volume,500.4,2026-11-03T09:15:00Z,S,L,e\n"
              "C,fill_volume,500.5,2026-11-03T09:16:00Z,S,L,e\n")
    summary = import_file(lab, f)
    assert summary.stored == 7
    mixed = [n for n in summary.notes if "different times" in n]
    assert mixed == ["2 lot/characteristic pair(s) have replicate values at different times; "
                     "each pair is stamped with the time of its first row"]
    times = lab.conn.execute("SELECT DISTINCT measured_at FROM measurements m JOIN lots l "
                             "ON l.id = m.lot_id WHERE l.lot_code = 'A'").fetchall()
    assert times == [("2026-11-03T08:15:00Z",)]
    plain = write(tmp_path / "p.csv", HEADER + "\n" + rows(6, start=100))
    assert not [n for n in import_file(lab, plain).notes if "different times" in n]


@pytest.mark.parametrize("lots", [
    ["A", "A", "B", "B", "C"],            # in order: the runs are the groups
    ["C", "C", "A", "B", "B"],            # adjacent, not in order: runs checked for repeats
    ["A", "B", "A", "C", "B"],            # interleaved: grouped by hashing the keys
    ["A", None, "A", "B", None],          # missing keys group together, as polars does
])
def test_entries_grouped_by_runs_equal_a_plain_group_by(lots):
    # the oracle is polars' own group_by(maintain_order=True): same groups, same order, same
    # lists in row order
    import polars as pl
    from lotwatch.store.bulk_plan import _grouped

    vals = pl.DataFrame({"lot": lots, "characteristic": ["x"] * 5, "__row": [1, 2, 3, 4, 5]},
                        schema={"lot": pl.String, "characteristic": pl.String, "__row": pl.Int64})
    aggs = [pl.col("__row").alias("rows"), pl.col("__row").first().alias("first")]
    got = _grouped(vals, ["lot", "characteristic"], aggs)
    want = vals.group_by(["lot", "characteristic"], maintain_order=True).agg(*aggs)
    assert got.equals(want)


@pytest.mark.parametrize("order", ["A,A,B,B", "B,B,A,A", "A,B,A,B"])
def test_a_lot_whose_rows_disagree_on_a_tag_is_refused_in_any_row_order(lab, tmp_path, order):
    # import_parse: every row of a lot carries the tags of its first row; lots in order, adjacent
    # but not in order, and interleaved take different paths to the same answer
    lots = order.split(",")
    lines = [f"{lot},fill_volume,500.{i},2026-11-03T08:15:00Z,S,L0,e"
             for i, lot in enumerate(lots)]
    bad_row = max(i for i, lot in enumerate(lots, start=1) if lot == "B")
    lines[bad_row - 1] = lines[bad_row - 1].replace(",L0,", ",L1,")
    f = write(tmp_path / "t.csv", HEADER + "\n" + "\n".join(lines) + "\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    [p] = err.value.problems
    first_b = lots.index("B") + 1
    assert (p.row, p.column, p.value) == (bad_row, "line", "L1")
    assert f"lot 'B' has line='L0' on row {first_b}" in p.reason


def test_a_file_with_bad_cells_gets_the_stores_messages_word_for_word(lab, tmp_path):
    # A file with bad cells is refused whatever else is found, so its plan only looks for
    # problems (no stored text laid out); the store's messages must be the very words of a file
    # whose only problems are the store's own (oracle: the same rows without the bad cell).
    from lotwatch.store import LotEntry

    lab.log_lots([LotEntry("fill_volume", ["500.0"], {"site": "S", "line": "L", "shift": "e"},
                           lot="OLD", measured_at="2026-11-01T08:00:00Z")])
    store_rows = ("F1,fill_volume,9999.9,2026-11-03T09:15:00+01:00,S,L,e\n"  # 1 implausible
                  "OLD,fill_volume,500.9,2026-11-03T08:15:00Z,S,L,e\n"        # 2 conflicts
                  "X3,fill_volume,500.15,2026-11-03T08:15:00Z,S,L,e\n")       # 3 too fine
    only_store = write(tmp_path / "s.csv", HEADER + "\n" + store_rows)
    with_bad = write(tmp_path / "b.csv", HEADER + "\n" + store_rows
                     + "X4,fill_volume,5OO.1,2026-11-03T08:15:00Z,S,L,e\n")
    before = dump(lab)
    found = {}
    for f in (only_store, with_bad):
        with pytest.raises(BadInput) as err:
            import_file(lab, f)
        found[f.name] = [(p.row, p.column, p.value, p.reason) for p in err.value.problems]
    assert found["b.csv"][:3] == found["s.csv"] and len(found["s.csv"]) == 3
    assert [p[:3] for p in found["s.csv"]] == [(1, "value", "9999.9"), (2, "value", "500.9"),
                                               (3, "value", "500.15")]
    assert "OLD" in found["s.csv"][1][3] and "plausible" in found["s.csv"][0][3]
    assert found["b.csv"][3][:3] == (4, "value", "5OO.1")
    assert dump(lab) == before
