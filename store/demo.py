"""A demo store with invented data and a few planted effects, for trying lotwatch out.

The scenario is invented (no real company, place or person): a spring-water bottler with three
plants (Hillside, Riverbend, Lakeshore) and eight filling lines (HS-1..3, RB-1..2, LS-1..3), each
running three shifts (early 06-14, late 14-22, night 22-06; times are UTC). Every line fills one or
two lots per shift per day for 26 weeks (182 days) ending on ``end`` (default: the last day whose
night shift is over, so no timestamp lies in the future). Each lot is measured on four
characteristics:

================ ====== ========== ====== ====== ====== ========= ===========================
characteristic   unit   resolution LSL    target USL    min shift values per lot, model
================ ====== ========== ====== ====== ====== ========= ===========================
fill_volume      mL     0.1        497.0  500.0  503.0  0.5       2, normal mean 500.0 sd 0.6
cap_torque       N·m    0.01       1.60   2.00   2.40   0.08      1, normal mean 2.00 sd 0.08
turbidity        NTU    0.01       --     --     1.00   0.05      1, lognormal median 0.25
label_offset     mm     0.5        -2.0   0.0    2.0    0.5       1, normal mean 0.0 sd 0.35
================ ====== ========== ====== ====== ====== ========= ===========================

Planted effects (also given as data in ``DEMO_EFFECTS``):

(a) drift: line RB-2's fill_volume mean rises linearly from the start of week 18 (day index 119
    of 0..181) by 0.15 mL per week: ``shift(day) = 0.15 * (day - 119) / 7`` mL, so +1.33 mL on the
    last day and +0.9 mL on average over the last 6 weeks, well above the 0.5 mL min shift.
    Because RB-2 is one of Riverbend's two lines, site Riverbend's fill_volume mean rises by half
    of that, and its spread within a day widens as its two lines part (implied effects, listed
    with ``implied=True``). The detectors find the drift within a week of its size passing the
    0.5 mL minimum shift (day 142).
(b) unequal spread: on the night shift cap_torque has sd 0.20 N·m instead of 0.08 (variance
    ratio 6.25); its mean is unchanged. The spread detector raises it (as spread) once the
    shift has the two weeks of history a group needs.
(c) skew: turbidity is lognormal, ``exp(N(ln 0.25, 0.5^2))`` NTU (skewness about 1.75), the same
    distribution for every group.
(d) coarse gauge: label_offset is read to 0.5 mm while its sd is 0.35 mm, so only a handful of
    distinct values occur; no group differences.
(e) everything else has no group differences: every other (characteristic, factor) pair draws
    from one distribution for all levels.

For realism a few lots carry notes, one fill_volume value was keyed 10 mL high and then
corrected, and one cap_torque value entered twice was voided. Values are generated with numpy
from a fixed seed and logged through ``Store.log_lots``: the same seed and end date give the same
data.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

from lotwatch.store.values import scale_of

DEMO_SEED = 20_261_201
WEEKS = 26
DAYS = WEEKS * 7
DRIFT_START_DAY = 17 * 7  # first day of week 18 (weeks counted from 1)
DRIFT_PER_WEEK = 0.15

SITES: dict[str, tuple[str, ...]] = {
    "Hillside": ("HS-1", "HS-2", "HS-3"),
    "Riverbend": ("RB-1", "RB-2"),
    "Lakeshore": ("LS-1", "LS-2", "LS-3"),
}
SHIFTS: dict[str, int] = {"early": 6, "late": 14, "night": 22}  # start hour, UTC
SHIFT_HOURS = 8
LAB_ACCOUNTS = {"Hillside": "lab-hillside", "Riverbend": "lab-riverbend", "Lakeshore": "lab-lakeshore"}


@dataclass(frozen=True)
class DemoCharacteristic:
    """A demo characteristic, its limits and the model its values are drawn from."""

    name: str
    unit: str
    resolution: str
    lsl: float | None
    target: float | None
    usl: float | None
    min_shift: float
    plausible: tuple[float, float]
    replicates: int
    distribution: str  # "normal" (mean, sd) or "lognormal" (median, sigma of the log)
    centre: float
    spread: float


DEMO_CHARACTERISTICS: tuple[DemoCharacteristic, ...] = (
    DemoCharacteristic("fill_volume", "mL", "0.1", 497.0, 500.0, 503.0, 0.5, (450.0, 550.0),
                       2, "normal", 500.0, 0.6),
    DemoCharacteristic("cap_torque", "N·m", "0.01", 1.60, 2.00, 2.40, 0.08, (0.0, 5.0),
                       1, "normal", 2.00, 0.08),
    DemoCharacteristic("turbidity", "NTU", "0.01", None, None, 1.00, 0.05, (0.0, 20.0),
                       1, "lognormal", 0.25, 0.5),
    DemoCharacteristic("label_offset", "mm", "0.5", -2.0, 0.0, 2.0, 0.5, (-10.0, 10.0),
                       1, "normal", 0.0, 0.35),
)


@dataclass(frozen=True)
class DemoEffect:
    """One planted effect. ``kind``: mean_drift, spread, skew or resolution."""

    kind: str
    characteristic: str
    factor: str | None
    level: str | None
    start_week: int | None
    size: float
    description: str
    implied: bool = False


NIGHT_TORQUE_SD = 0.20

DEMO_EFFECTS: tuple[DemoEffect, ...] = (
    DemoEffect("mean_drift", "fill_volume", "line", "RB-2", 18, DRIFT_PER_WEEK,
               "line RB-2 fill_volume mean rises 0.15 mL per week from week 18"),
    DemoEffect("mean_drift", "fill_volume", "site", "Riverbend", 18, DRIFT_PER_WEEK / 2,
               "site Riverbend fill_volume mean rises by half of RB-2's drift (RB-2 is one of "
               "its two lines)", implied=True),
    DemoEffect("spread", "fill_volume", "site", "Riverbend", 18, 0.0,
               "site Riverbend fill_volume spread within a day widens as RB-2 drifts away from "
               "RB-1", implied=True),
    DemoEffect("spread", "cap_torque", "shift", "night", None, NIGHT_TORQUE_SD / 0.08,
               "night shift cap_torque sd 0.20 N·m against 0.08 elsewhere (ratio 2.5)"),
    DemoEffect("skew", "turbidity", None, None, None, 0.5,
               "turbidity is lognormal (sigma of the log 0.5), skewed to the right"),
    DemoEffect("resolution", "label_offset", None, None, None, 0.5,
               "label_offset read to 0.5 mm against an sd of 0.35 mm"),
)

_NOTES = (  # (day index, line, shift, lot number, note)
    (DRIFT_START_DAY, "RB-2", "early", 0, "filler valve seals replaced during changeover"),
    (40, "HS-2", "late", 0, "line restarted after a conveyor stop"),
    (75, "LS-1", "night", 0, "new reel of labels"),
    (120, "HS-3", "early", 0, "cap hopper refilled from a new delivery"),
    (160, "LS-3", "late", 0, "sample taken after a format change"),
)
_CORRECTED = (10, "HS-1", "early")  # its first fill_volume value is keyed 10 mL high
_VOIDED = (33, "LS-2", "late")  # its cap_torque value is entered twice; the copy is voided


@dataclass
class _Lot:
    day: int
    site: str
    line: str
    shift: str
    number: int
    code: str
    measured_at: datetime


def _lots(rng, end: date) -> list[_Lot]:
    start = end - timedelta(days=DAYS - 1)
    lots: list[_Lot] = []
    lines = [(site, line) for site, ls in SITES.items() for line in ls]
    counts = rng.integers(1, 3, size=(DAYS, len(lines), len(SHIFTS)))
    offsets = rng.uniform(0.0, 1.0, size=(DAYS, len(lines), len(SHIFTS), 2))
    for d in range(DAYS):
        day = start + timedelta(days=d)
        for li, (site, line) in enumerate(lines):
            for si, (shift, hour) in enumerate(SHIFTS.items()):
                n = int(counts[d, li, si])
                for k in range(n):
                    # lot k of n is measured within the k-th part of the shift
                    frac = (k + offsets[d, li, si, k]) / n
                    at = datetime(day.year, day.month, day.day, hour, tzinfo=UTC)
                    at += timedelta(seconds=int(frac * SHIFT_HOURS * 3600))
                    code = f"{line}-{day:%Y%m%d}-{shift[0].upper()}{k + 1}"
                    lots.append(_Lot(d, site, line, shift, k, code, at))
    return lots


def _values(rng, spec: DemoCharacteristic, lots: list[_Lot]):  # -> np.ndarray (len(lots), reps)
    import numpy as np

    shape = (len(lots), spec.replicates)
    if spec.distribution == "lognormal":
        x = np.exp(rng.normal(np.log(spec.centre), spec.spread, size=shape))
    else:
        z = rng.standard_normal(size=shape)
        sd = np.full((len(lots), 1), spec.spread)
        mean = np.full((len(lots), 1), spec.centre)
        if spec.name == "cap_torque":
            night = np.array([lot.shift == "night" for lot in lots])
            sd[night] = NIGHT_TORQUE_SD
        if spec.name == "fill_volume":
            day = np.array([lot.day for lot in lots], dtype=float)
            rb2 = np.array([lot.line == "RB-2" for lot in lots])
            drift = np.where(rb2 & (day >= DRIFT_START_DAY),
                             DRIFT_PER_WEEK * (day - DRIFT_START_DAY) / 7.0, 0.0)
            mean = mean + drift[:, None]
        x = mean + sd * z
    res = float(spec.resolution)
    units = np.rint(x / res).astype(np.int64)
    return units


def _texts(units_row, spec: DemoCharacteristic) -> list[str]:
    dp = scale_of(spec.resolution)[1]
    res = float(spec.resolution)
    return [f"{int(u) * res:.{dp}f}" for u in units_row]


def _entries(seed: int, end: date):
    """The demo's ``LotEntry`` list plus the positions of the corrected and voided values."""
    import numpy as np
    from lotwatch.store import LotEntry

    rng = np.random.default_rng(seed)
    lots = _lots(rng, end)
    notes = {(d, line, shift, k): note for d, line, shift, k, note in _NOTES}
    entries = []
    corrected = voided = None
    position = 0  # index of the next value in LogOutcome.measurement_ids
    for spec in DEMO_CHARACTERISTICS:
        units = _values(rng, spec, lots)
        for i, lot in enumerate(lots):
            values = _texts(units[i], spec)
            key = (lot.day, lot.line, lot.shift)
            if spec.name == "fill_volume" and key == _CORRECTED and lot.number == 0:
                true = values[0]
                values[0] = f"{float(true) + 10.0:.1f}"
                corrected = (position, true)
            if spec.name == "cap_torque" and key == _VOIDED and lot.number == 0:
                values = values + values  # typed in twice
                voided = position + 1
            entries.append(
                LotEntry(
                    characteristic=spec.name,
                    values=values,
                    tags={"site": lot.site, "line": lot.line, "shift": lot.shift},
                    lot=lot.code,
                    measured_at=lot.measured_at,
                    note=notes.get((lot.day, lot.line, lot.shift, lot.number))
                    if spec.name == "fill_volume" else None,
                    by=LAB_ACCOUNTS[lot.site],
                    source="demo",
                )
            )
            position += len(values)
    return entries, corrected, voided


def _fill(store, seed: int, end: date) -> None:
    for spec in DEMO_CHARACTERISTICS:
        store.add_characteristic(
            spec.name, unit=spec.unit, resolution=spec.resolution, lsl=spec.lsl,
            target=spec.target, usl=spec.usl, min_shift=spec.min_shift,
            plausible=spec.plausible, by="demo",
        )
    entries, corrected, voided = _entries(seed, end)
    outcome = store.log_lots(entries)
    ids = list(outcome.measurement_ids)
    if corrected is not None:
        position, true = corrected
        store.correct(ids[position], true, by="lab-hillside",
                      reason="keyed 10 mL high; corrected from the filling record")
    if voided is not None:
        store.void(ids[voided], by="lab-lakeshore", reason="same sample entered twice")
    store.set_setting("demo_seed", str(seed))
    store.set_setting("demo_end", end.isoformat())


def default_end(now: datetime | None = None) -> date:
    """The last day whose night shift (22:00 to 06:00 the next day, UTC) has ended by ``now``."""
    now = now or datetime.now(UTC)
    return (now - timedelta(hours=SHIFT_HOURS - 2)).date() - timedelta(days=1)


def _remove(path: Path) -> None:
    for p in (path, Path(f"{path}-wal"), Path(f"{path}-shm"), Path(f"{path}-journal")):
        try:
            p.unlink()
        except FileNotFoundError:
            pass


def build_demo_store(
    path: str | os.PathLike[str],
    *,
    fresh: bool = False,
    seed: int = DEMO_SEED,
    end: date | None = None,
) -> Path:
    """Build the demo store at ``path`` and return the path (``lotwatch demo`` keeps it in the
    user's data directory: ``lotwatch.tui.services.paths.demo_store_path``).

    An existing file is reused as it is unless ``fresh`` is set, which rebuilds it. The store is
    built under a temporary name and moved into place, so an interrupted build leaves nothing
    half-made at ``path``.
    """
    from lotwatch.store import Store

    target = Path(path)
    if target.exists() and not fresh:
        return target
    target.parent.mkdir(parents=True, exist_ok=True)
    end = end or default_end()
    building = target.with_name(target.name + ".building")
    _remove(building)
    store = Store.create(building, zone="UTC")  # the invented plant keeps UTC shift hours
    try:
        _fill(store, seed, end)
    except BaseException:
        store.close()
        _remove(building)
        raise
    store.close()
    _remove(target)
    os.replace(building, target)
    for suffix in ("-wal", "-shm"):
        leftover = Path(f"{building}{suffix}")
        if leftover.exists():
            os.replace(leftover, Path(f"{target}{suffix}"))
    return target


def demo_summary(store) -> str:
    """A few lines describing the demo store: scenario, size, characteristics, planted effects."""
    count, first, last = store.conn.execute(
        "SELECT count(*), min(day), max(day) FROM measurements WHERE voided = 0"
    ).fetchone()
    lots = store.conn.execute("SELECT count(*) FROM lots").fetchone()[0]
    sites = store.tag_values("site")
    lines = store.tag_values("line")
    shifts = store.tag_values("shift")
    out = [
        "Demo store (invented data): a spring-water bottler with "
        f"{len(sites)} plants ({', '.join(sites)}), {len(lines)} filling lines and "
        f"{len(shifts)} shifts ({', '.join(shifts)}).",
        f"{count:,} measurements in {lots:,} lots"
        + (f", plant days {first} to {last} ({store.plant_zone})." if first else "."),
        "Characteristics:",
    ]

    def fmt(x: float | None) -> str:
        return "-" if x is None else f"{x:g}"

    for c in store.characteristics():
        out.append(
            f"  {c.name:<13} {c.unit:<4} resolution {c.resolution:<5} LSL {fmt(c.lsl):<6} "
            f"target {fmt(c.target):<6} USL {fmt(c.usl)}"
        )
    out.append("Planted for you to find:")
    for e in DEMO_EFFECTS:
        out.append(f"    which implies: {e.description}" if e.implied else f"  - {e.description}")
    out.append("Everything else has no real group differences.")
    return "\n".join(out)
