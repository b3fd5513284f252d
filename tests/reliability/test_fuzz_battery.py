"""Property-based fuzzing of the statistics battery (``stats.run_battery``) and its text report.

Groups are arbitrary: none, empty, single values, constant, huge magnitude (1e300), tiny
(1e-300), mixed magnitudes, NaN and infinities, many groups, odd names; options (alpha,
resolution, reference, limits, shift, min_n) vary too. Properties: no exception except a
``ValueError`` with a message (the battery's refusal of bad arguments); every p-value it reports
is NaN/None or within [0, 1]; the plain-text report renders and its JSON form serialises.
Inputs tried are counted and printed (10,000+ in the slow test).
"""

from __future__ import annotations

import json
import math
import random
import traceback
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.stats import run_battery
from lotwatch.tui.render.battery_text import render_battery

COUNTS: Counter[str] = Counter()
import lotwatch.stats  # noqa: E402

STATS_DIR = Path(lotwatch.stats.__file__).resolve().parent

FINITE = st.floats(allow_nan=False, allow_infinity=False)
ANY_FLOAT = st.floats(allow_nan=True, allow_infinity=True)


def _group():
    return st.one_of(
        st.just([]),
        st.lists(FINITE, min_size=1, max_size=1),
        st.builds(lambda v, n: [v] * n, FINITE, st.integers(2, 8)),  # constant
        st.lists(st.floats(-1e3, 1e3), min_size=2, max_size=12),
        st.lists(st.floats(1e299, 1e300) | st.floats(-1e300, -1e299), min_size=2, max_size=6),
        st.lists(st.floats(-1e-300, 1e-300), min_size=2, max_size=6),
        st.lists(st.sampled_from([1e-300, 1.0, 1e300, -1e300, 0.0, 5e-324, 1.7976931348623157e308]),
                 min_size=2, max_size=8),  # mixed magnitudes
        st.lists(ANY_FLOAT, min_size=0, max_size=10),
        st.builds(lambda c, d, n: [c + d * (i % 2) for i in range(n)],
                  st.floats(-1e6, 1e6), st.sampled_from([1e-12, 1e-9, 0.1]), st.integers(2, 10)),
    )


NAMES = st.one_of(
    st.text(min_size=0, max_size=12),
    st.sampled_from(["", " ", "[b]x[/b]", "\x1b[31mred", "\u202eevil", "a" * 300, "0", "nan"]),
)


@st.composite
def battery_inputs(draw):
    k = draw(st.integers(0, 7))
    groups = [draw(_group()) for _ in range(k)]
    names = draw(st.lists(NAMES, min_size=k, max_size=k, unique=True))
    if draw(st.integers(0, 20)) == 0 and k >= 2:
        names[1] = names[0]  # duplicate names: a refusal
    kw = {}
    if draw(st.booleans()):
        kw["alpha"] = draw(st.sampled_from([0.05, 0.01, 0.1, 0.5, 1e-12, 0.999, 0.0, 1.0, -1.0,
                                            float("nan")]))
    if draw(st.booleans()):
        kw["resolution"] = draw(st.sampled_from(["0.1", "0.001", "1", "1e-300", "0", "-1", "abc",
                                                 0.5, "1e300"]))
    if draw(st.booleans()) and names:
        kw["reference"] = draw(st.sampled_from([names[0], "missing-group"]))
    if draw(st.booleans()):
        lsl = draw(st.one_of(FINITE, st.just(float("nan"))))
        usl = draw(st.one_of(FINITE, st.just(float("inf"))))
        kw["lsl"], kw["usl"] = lsl, usl
    if draw(st.booleans()):
        kw["shift"] = draw(ANY_FLOAT)
    if draw(st.booleans()):
        kw["min_n"] = draw(st.integers(0, 5))
    return groups, names, kw


_KINDS = ("empty", "single", "constant", "normal", "huge", "tiny", "mixed", "nonfinite",
          "near-constant", "integers")
_ODD_NAMES = ["", " ", "[b]x[/b]", "\x1b[31mred", "\u202eevil", "a" * 300, "0", "nan", "ü"]


def seeded_inputs(seed: int):
    """Groups of random kinds and odd options built from ``seed`` with ``random.Random``
    (cheap to generate; the seed reproduces the case)."""
    r = random.Random(seed)
    k = r.randint(0, 7)
    groups = []
    for _ in range(k):
        kind = r.choice(_KINDS)
        n = r.randint(2, 15)
        if kind == "empty":
            g = []
        elif kind == "single":
            g = [r.uniform(-1e6, 1e6)]
        elif kind == "constant":
            g = [r.choice([0.0, 1.0, -3.5, 1e-300, 1e150, 500.1])] * n
        elif kind == "normal":
            g = [r.gauss(r.uniform(-100, 100), r.choice([1e-9, 0.01, 1.0, 1e6])) for _ in range(n)]
        elif kind == "huge":
            g = [r.choice([-1, 1]) * 10 ** r.uniform(100, 308) for _ in range(n)]
        elif kind == "tiny":
            g = [r.choice([-1, 1]) * 10 ** r.uniform(-323, -100) for _ in range(n)]
        elif kind == "mixed":
            g = [r.choice([-1, 1]) * 10 ** r.uniform(-300, 300) for _ in range(n)]
        elif kind == "nonfinite":
            g = [r.choice([math.nan, math.inf, -math.inf, 1.0, 2.0]) for _ in range(n)]
        elif kind == "near-constant":
            c = r.uniform(-1e6, 1e6)
            g = [c + r.choice([0.0, 1e-12, 1e-9]) for _ in range(n)]
        else:
            g = [float(r.randint(-3, 3)) for _ in range(n)]
        groups.append(g)
    names = []
    for i in range(k):
        name = r.choice(_ODD_NAMES) + str(i) if r.random() < 0.3 else f"G{i}"
        names.append(name)
    kw = {}
    if r.random() < 0.2:
        kw["resolution"] = r.choice(["0.1", "0.001", "1", "1e-300", "0.5"])
    if r.random() < 0.2 and names:
        kw["reference"] = names[0]
    if r.random() < 0.2:
        kw["lsl"], kw["usl"] = sorted([r.uniform(-1e3, 1e3), r.uniform(-1e3, 1e3)])
        if kw["lsl"] == kw["usl"]:
            kw["usl"] += 1
    if r.random() < 0.2:
        kw["shift"] = r.choice([0.1, 1.0, 1e-300, 1e300, -5.0, math.nan])
    if r.random() < 0.1:
        kw["alpha"] = r.choice([0.01, 0.1, 0.5])
    return groups, names, kw


CASES = st.one_of(battery_inputs(), st.integers(0, 2**32).map(seeded_inputs),
                  st.integers(0, 2**32).map(seeded_inputs),
                  st.integers(0, 2**32).map(seeded_inputs))


def _p_values(obj, path="result"):
    """Every attribute called p / p_value / p_adj ... found in the result, with its path."""
    if isinstance(obj, dict):
        if path.endswith(".letters"):  # keyed by group names, which may well be "p"
            return
        for k, v in obj.items():
            if isinstance(v, (dict, list)):
                yield from _p_values(v, f"{path}.{k}")
            elif k in ("p", "p_value", "p_adj", "p_adjusted", "pvalue") and v is not None:
                yield f"{path}.{k}", v
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _p_values(v, f"{path}[{i}]")


def _one(groups, names, kw) -> None:
    COUNTS["battery inputs"] += 1
    try:
        result = run_battery([np.asarray(g, dtype=float) for g in groups], names, **kw)
    except ValueError as exc:
        # a refusal is the battery's own argument check, not an error deep inside a solver
        origin = traceback.extract_tb(exc.__traceback__)[-1].filename
        assert str(Path(origin).resolve()).startswith(str(STATS_DIR)), (
            f"ValueError from {origin}, not a refusal by lotwatch's stats: {exc}")
        COUNTS["refused (ValueError)"] += 1
        assert str(exc).strip()
        return
    COUNTS["computed"] += 1
    d = result.to_dict()
    for where, p in _p_values(d):
        assert isinstance(p, (int, float)), (where, p)
        assert math.isnan(p) or 0.0 <= p <= 1.0, (where, p)
    json.dumps(d, allow_nan=False)  # as lotwatch analyze --format json writes it
    text = render_battery(result)
    assert "\x1b" not in text and "\u202e" not in text


def _run(n: int) -> int:
    start = COUNTS["battery inputs"]

    @settings(max_examples=n, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.filter_too_much])
    @given(case=CASES)
    def prop(case) -> None:
        with np.errstate(all="ignore"):
            _one(*case)

    prop()
    tried = COUNTS["battery inputs"] - start
    print(f"battery fuzz: {tried:,} inputs tried; {dict(COUNTS)}")
    return tried



def test_battery_fuzz_fast() -> None:
    assert _run(200) >= 200


@pytest.mark.slow
def test_battery_fuzz_10k() -> None:
    assert _run(10_000) >= 10_000


# --- inputs the fuzzer found, kept as plain regression tests ------------------------------------

FOUND = [
    ([[0.0, 0.0], [1.0, 1.000000000001]], {}),  # eta² rounds to 1: ZeroDivisionError
    ([[1.3407807929942597e154] * 2, [0.0, 0.0]], {}),  # fsum OverflowError
    ([[0.0, 0.0], [0.0, 1.0]], {"alpha": 0.999}),  # brentq: f(a), f(b) same sign
    ([[0.0, 0.0], [0.0, 1e-12], [1.0, 1.0]], {"shift": 6.7e141}),  # x ** 2 OverflowError
    ([[-3.0, 3.0], [-438413.9], [133461.2], [2.99e-162, -6.6e-287, 1.15e-321]], {}),  # MSW -> 0
    ([[1e150] * 3, [-6.8e-101, -6.0e-310, -7.2e-307]], {"resolution": "1e-300"}),  # Fraction
]


@pytest.mark.parametrize("groups,kw", FOUND)
def test_inputs_found_by_fuzzing(groups, kw) -> None:
    names = [f"g{i}" for i in range(len(groups))]
    with np.errstate(all="ignore"):
        _one(groups, names, kw)


@pytest.mark.parametrize("seed", [504181, 8634351, 2865])  # NaN into brentq, MSW -> 0, Fraction
def test_seeded_inputs_found_by_fuzzing(seed) -> None:
    with np.errstate(all="ignore"):
        _one(*seeded_inputs(seed))


def test_group_named_like_a_p_value_key() -> None:
    """Found by the 10k run: a group called "p" is a letters key, not a p-value."""
    _one([[], [], [], [], [], [0.0, 0.0], [0.0, 1.0]], ["", "0", "1", "00", "000", "0000", "p"], {})
