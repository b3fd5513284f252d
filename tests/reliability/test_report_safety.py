"""`lotwatch report` with hostile group names, and a report that cannot be written.

matplotlib reads text between two dollar signs as mathtext (and fails on an unbalanced
expression such as ``$x^{$``), and leaves a label starting with "_" out of an automatic legend
(matplotlib documentation: "Writing mathematical expressions"; ``Axes.legend``: "labels starting
with an underscore are ignored"). A group name is data: it must appear, literally, in the chart.
A report that fails records nothing (the review's alert changes commit with the written file).
"""

from __future__ import annotations

import sqlite3
from datetime import date
from pathlib import Path

from click.testing import CliRunner
from lotwatch.store import LotEntry, Store
from lotwatch.tui.cli import main
from matplotlib import cbook

LINES = ["$x^{$", "_hidden", "L3"]


def _store(path: Path) -> Path:
    """Three lines, L3 2 g above the others for four weeks: the review opens an alert."""
    with Store.create(path, zone="UTC") as s:
        s.add_characteristic("x", unit="g", resolution="0.1", min_shift=0.5)
        entries = []
        for d in range(28):
            for i, line in enumerate(LINES):
                v = 10 + (2 if line == "L3" else 0) + 0.1 * ((d * 7 + i) % 5)
                entries.append(LotEntry("x", [f"{v:.1f}"],
                                        {"site": "A", "line": line, "shift": "n"},
                                        measured_at=f"2026-03-{1 + d:02d}T08:00:00Z"))
        s.log_lots(entries)
    return path


def _run(db: Path, *args: str):
    return CliRunner().invoke(main, ["--db", str(db), *args])


def _alert_rows(db: Path) -> tuple[int, int, str | None]:
    conn = sqlite3.connect(db)
    try:
        return (conn.execute("SELECT count(*) FROM alerts").fetchone()[0],
                conn.execute("SELECT count(*) FROM alert_events").fetchone()[0],
                conn.execute("SELECT value FROM settings WHERE key LIKE '%last%review%'")
                .fetchone())
    finally:
        conn.close()


def test_report_with_dollar_and_underscore_group_names(tmp_path: Path) -> None:
    db = _store(tmp_path / "s.sqlite")
    out = tmp_path / "r.html"
    res = _run(db, "report", "--as-of", "2026-03-28", "--out", str(out))
    assert res.exit_code == 0, (res.output, res.exception)
    assert isinstance(res.exception, (type(None), SystemExit))
    text = out.read_text(encoding="utf-8")
    assert "<svg" in text, "the alert's trend chart is drawn"
    assert _alert_rows(db)[0] >= 1


def test_chart_legend_shows_every_group_literally(tmp_path: Path) -> None:
    from lotwatch.tui.render.trend import trend_figure
    from lotwatch.tui.services import review_engine as eng

    db = _store(tmp_path / "s.sqlite")
    with Store.open(db) as s:
        tr = eng.trend(s, "x", "line", as_of=date(2026, 3, 28))
    legend = trend_figure(tr).axes[0].get_legend()
    texts = [t.get_text() for t in legend.get_texts()]
    assert len(texts) == len(LINES) + 1  # every group and the grand mean
    assert "_hidden" in texts
    assert not [t for t in texts if cbook.is_math_text(t)], texts
    assert r"\$x^{\$" in texts  # escaped dollars: drawn as the literal name


def test_a_report_that_fails_records_nothing(tmp_path: Path, monkeypatch) -> None:
    import lotwatch.tui.render.weekly as weekly

    db = _store(tmp_path / "s.sqlite")
    before = _alert_rows(db)

    def broken(rep):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(weekly, "report_html", broken)  # rendering or writing fails
    res = _run(db, "report", "--as-of", "2026-03-28", "--out", str(tmp_path / "r.html"))
    assert res.exit_code != 0
    assert _alert_rows(db) == before, "the review was recorded although no report was written"
    assert not list(tmp_path.glob("*.html")) and not list(tmp_path.glob(".*part"))
    monkeypatch.undo()
    # a target the command cannot replace: a message, exit 2, nothing recorded
    (tmp_path / "r.html").mkdir()
    res = _run(db, "report", "--as-of", "2026-03-28", "--out", str(tmp_path / "r.html"))
    assert res.exit_code == 2, res.output
    assert _alert_rows(db) == before
    # the same report to a writable place records the review
    ok = _run(db, "report", "--as-of", "2026-03-28", "--out", str(tmp_path / "ok.md"))
    assert ok.exit_code == 0, ok.output
    assert _alert_rows(db) != before
