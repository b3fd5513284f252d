"""The full battery for one comparison: ANOVA and every companion, in one ``BatteryResult``.

Order of work: drop non-finite values (noted), exclude groups with fewer than ``min_n`` values
(lots, where lot labels are given; listed with the reason), sort groups by name, then the classical ANOVA (exact when a resolution
is declared), Welch, Kruskal-Wallis, Brown-Forsythe, Bartlett, residual normality, the resolution
check, the recommendation, post-hoc comparisons (Tukey-Kramer, Games-Howell, Dunnett against a
reference, Dunn), compact letters for the recommended post-hoc, analysis of means, effect sizes,
variance components, power and, with specification limits, capability per group.

Degenerate input (no groups, one group, single-value groups, all values equal, zero within-group
variance, NaN/inf) never raises: the result's ``status`` says what happened in words and the
parts that cannot be computed carry their own status.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import Any, TypeVar

import numpy as np
from lotwatch.stats import anom as _anom
from lotwatch.stats import letters as _letters
from lotwatch.stats import posthoc as _posthoc
from lotwatch.stats.anova import one_way_anova
from lotwatch.stats.capability import capability
from lotwatch.stats.checks import (
    bartlett_test,
    brown_forsythe,
    kruskal_wallis,
    recommend,
    residual_normality,
    resolution_check,
)
from lotwatch.stats.effect import effect_sizes, variance_components
from lotwatch.stats.power import power_analysis
from lotwatch.stats.results import (
    OK,
    AnomResult,
    BatteryResult,
    Capability,
    DunnettComparison,
    ExcludedGroup,
    GroupSummary,
    PairComparison,
    Recommendation,
)
from lotwatch.stats.spread import overall_sd
from lotwatch.stats.welch import welch_anova
from scipy import special

T = TypeVar("T")
DUNN_ADJUST = _posthoc.ADJUST_METHODS
# Largest |value| accepted: squares of 1e150 summed over a million values stay below the largest
# double (about 1.8e308), so no sum of squares overflows.
MAX_MAGNITUDE = 1e150


def _group_summaries(names: list[str], arrays: list[np.ndarray], alpha: float,
                     resolution: str | float | None) -> list[GroupSummary]:
    ns = np.array([a.size for a in arrays], dtype=float)
    sums = np.array([math.fsum(a.tolist()) for a in arrays])
    total, n_total = math.fsum(sums.tolist()), float(ns.sum())
    out = []
    for name, a, n, s in zip(names, arrays, ns, sums, strict=True):
        mean = float(s / n)
        mean = mean + math.fsum((a - mean).tolist()) / n  # one refinement pass
        sd = overall_sd(a, resolution)  # exact from integer units: a constant group gives 0
        lo = hi = None
        if sd is not None:
            half = float(special.stdtrit(n - 1, 1 - alpha / 2)) * sd / math.sqrt(n)
            lo, hi = mean - half, mean + half
        rest = n_total - n
        diff = mean - (total - s) / rest if rest > 0 else None
        out.append(GroupSummary(name=name, n=int(n), mean=mean, sd=sd, ci_low=lo, ci_high=hi,
                                diff_from_others=diff))
    return out


def _finite_labels(labels: list[object] | None, keep: np.ndarray | None) -> list[object] | None:
    """The lot labels of the values kept after dropping non-finite ones."""
    if labels is None or keep is None:
        return labels
    if len(labels) != keep.size:
        raise ValueError(f"{keep.size} values but {len(labels)} lot labels")
    return [lab for lab, k in zip(labels, keep.tolist(), strict=True) if k]


def _guard(notes: list[str], what: str, fn: Callable[[], T], fallback: T) -> T:
    """Run one optional part; a failure becomes a note instead of an exception."""
    try:
        return fn()
    except (ValueError, ArithmeticError, RuntimeError, np.linalg.LinAlgError) as exc:
        notes.append(f"{what} could not be computed: {exc}")
        return fallback


def run_battery(samples: Sequence[Any], names: Sequence[str], *, alpha: float = 0.05,
                resolution: str | float | None = None, reference: str | None = None,
                lsl: float | None = None, usl: float | None = None, shift: float | None = None,
                dunn_adjust: str = "holm", min_n: int = 2,
                lots: Sequence[Sequence[object]] | None = None) -> BatteryResult:
    """Run the whole battery on ``samples`` (one array-like per group) labelled by ``names``.

    ``lots`` (optional, one label sequence per sample, values in time order) says which lot each
    value belongs to: capability then reads each group's within SD pooled within lots where lots
    have replicates, else from the moving range of consecutive lots (``stats.spread``)."""
    notes: list[str] = []
    if not 0 < alpha < 1:
        raise ValueError(f"alpha must be between 0 and 1, got {alpha!r}")
    if dunn_adjust not in DUNN_ADJUST:
        raise ValueError(f"dunn_adjust must be one of {', '.join(DUNN_ADJUST)}, "
                         f"got {dunn_adjust!r}")
    if shift is not None and not (math.isfinite(shift) and shift != 0):
        notes.append(f"Shift {shift!r} ignored for power: it must be a non-zero number.")
        shift = None
    if len(samples) != len(names):
        raise ValueError(f"{len(samples)} samples but {len(names)} names")
    if lots is not None and len(lots) != len(samples):
        raise ValueError(f"{len(samples)} samples but {len(lots)} lot label lists")
    lot_of = {str(nm): (None if lots is None else list(lots[i])) for i, nm in enumerate(names)}
    if lsl is not None and usl is not None and not usl > lsl:
        raise ValueError(f"USL {usl} must be greater than LSL {lsl}")
    labels = [str(n) for n in names]
    dupes = sorted({n for n in labels if labels.count(n) > 1})
    if dupes:
        raise ValueError("duplicate group names: " + ", ".join(dupes))

    cleaned: dict[str, np.ndarray] = {}
    cleaned_mask: dict[str, np.ndarray] = {}
    for name, s in zip(labels, samples, strict=True):
        a = np.asarray(s, dtype=float).ravel()
        bad = ~np.isfinite(a)
        cleaned_mask[name] = ~bad
        if bad.any():
            notes.append(f"Dropped {int(bad.sum())} non-finite value(s) from group {name}.")
            a = a[~bad]
        if a.size and float(np.max(np.abs(a))) > MAX_MAGNITUDE:
            raise ValueError(
                f"group {name}: a value of magnitude {float(np.max(np.abs(a))):.3g} is too large "
                f"to analyse in double precision (limit {MAX_MAGNITUDE:.0e}: sums of squares "
                "would overflow); express the data in a larger unit"
            )
        cleaned[name] = a
    # the minimum group size counts lots where lot labels are given (a lot with replicates is
    # one lot, as in the review's windows), else values
    unit = "values" if lots is None else "lots"

    def size(name: str, a: np.ndarray) -> int:
        labels_of = lot_of[name]
        if labels_of is None:
            return int(a.size)
        return len({lab for lab, keep in zip(labels_of, cleaned_mask[name], strict=False)
                    if keep})

    sizes = {n: size(n, a) for n, a in cleaned.items()}
    excluded = [ExcludedGroup(name=n, n=int(a.size),
                              reason=f"fewer than {min_n} {unit}" if a.size else "no values")
                for n, a in sorted(cleaned.items()) if sizes[n] < min_n]
    kept = sorted((n, a) for n, a in cleaned.items() if sizes[n] >= min_n)
    gnames = [n for n, _ in kept]
    arrays = [a for _, a in kept]
    ns = [a.size for a in arrays]

    table = None
    if resolution is not None:
        try:
            table = one_way_anova(arrays, gnames, alpha=alpha, resolution=resolution)
        except ValueError as exc:
            notes.append(f"Exact computation at resolution {resolution} not possible ({exc}); "
                         "used floating point.")
    if table is None:
        table = one_way_anova(arrays, gnames, alpha=alpha)

    groups = _group_summaries(gnames, arrays, alpha, resolution) if arrays else []
    if lots is not None:
        groups = [replace(g, lots=len(set(_finite_labels(lot_of[g.name], cleaned_mask[g.name])
                                           or [])))
                  for g in groups]
    welch = welch_anova(arrays)
    kw = kruskal_wallis(arrays, alpha=alpha)
    bf = brown_forsythe(arrays, alpha=alpha)
    bart = bartlett_test(arrays, alpha=alpha)
    normality = residual_normality(arrays, alpha=alpha)
    tolerance = usl - lsl if lsl is not None and usl is not None else None
    res_warning = resolution_check(table.resid_sd, resolution, tolerance)
    can_compare = table.status == OK
    if can_compare:
        rec = recommend(bart, normality, ns, alpha=alpha)  # the one Welch rule: welch_rule.py
    else:
        rec = Recommendation(test="none", posthoc="none",
                             reason=f"No test can be read: {table.status}.")

    tukey: list[PairComparison] = []
    gh: list[PairComparison] = []
    dunn_pairs: list[PairComparison] = []
    dunnett: list[DunnettComparison] | None = None
    if can_compare:
        tukey = _guard(notes, "Tukey-Kramer", lambda: _posthoc.tukey_kramer(
            arrays, gnames, alpha=alpha), [])
        gh = _guard(notes, "Games-Howell", lambda: _posthoc.games_howell(
            arrays, gnames, alpha=alpha), [])
        if kw.status == OK:
            dunn_pairs = _guard(notes, "Dunn", lambda: _posthoc.dunn(
                arrays, gnames, adjust=dunn_adjust, alpha=alpha), [])
    if reference is not None:
        if reference not in gnames:
            where = ("was excluded" if any(e.name == reference for e in excluded)
                     else "is not among the groups")
            notes.append(f"Reference group {reference} {where}; Dunnett's test skipped.")
        elif can_compare:
            no_pairs: list[DunnettComparison] = []
            dunnett = _guard(notes, "Dunnett", lambda: _posthoc.dunnett(
                arrays, gnames, reference=reference, alpha=alpha), no_pairs)
    for title, method, got in (("Tukey-Kramer", "tukey", tukey), ("Games-Howell", "games-howell", gh),
                               ("Dunn", "dunn", dunn_pairs), ("Dunnett", "dunnett", dunnett)):
        why = _posthoc.posthoc_problem(arrays, gnames, method) if got == [] else None
        if can_compare and why:
            notes.append(f"{title}: not computed ({why}).")
    chosen = {"Tukey-Kramer": tukey, "Games-Howell": gh, "Dunn": dunn_pairs}.get(rec.posthoc, [])
    letters: dict[str, str] = {}
    if can_compare and chosen:  # no letters without the pairs they summarise
        letters = _guard(notes, "Compact letters",
                         lambda: _letters.compact_letters(
                             gnames, chosen, means={g.name: g.mean for g in groups}), {})
    anom_fallback = AnomResult(grand_mean=table.grand_mean, alpha=alpha, critical_value=None,
                               status=table.status if not can_compare else "not computed")
    anom = (_guard(notes, "Analysis of means", lambda: _anom.analysis_of_means(
        arrays, gnames, alpha=alpha), anom_fallback) if can_compare else anom_fallback)

    effect = effect_sizes(table, alpha)
    vc = variance_components(table, ns, alpha=alpha)
    power = power_analysis(ns, table.resid_sd, alpha=alpha, shift=shift)
    cap: list[Capability] | None = None
    if lsl is not None or usl is not None:
        cap = []
        for n, a in kept:
            one = _guard(notes, f"Capability of {n}",
                         functools.partial(capability, n, a, lsl=lsl, usl=usl,
                                           lots=_finite_labels(lot_of[n], cleaned_mask.get(n)),
                                           resolution=resolution, alpha=alpha), None)
            if one is not None:
                cap.append(one)

    status = table.status
    if not arrays and not cleaned:
        status = "no groups"
    return BatteryResult(status=status, alpha=alpha, groups=groups, excluded=excluded,
                         anova=table, welch=welch, kruskal=kw, brown_forsythe=bf, bartlett=bart,
                         normality=normality, resolution_warning=res_warning,
                         recommendation=rec, tukey=tukey, games_howell=gh, dunnett=dunnett,
                         reference=reference, dunn=dunn_pairs, dunn_adjust=dunn_adjust,
                         letters=letters, anom=anom, effect=effect, variance_components=vc,
                         power=power, capability=cap, notes=notes)
