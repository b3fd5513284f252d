"""Result types of the statistics battery.

Every statistic in ``stats`` returns one of these plain dataclasses. They carry numbers and short
plain-language sentences; they never carry formatting or colour. ``status`` fields are ``"ok"`` or a
short phrase saying what was degenerate (``"fewer than two groups"``, ``"zero within-group
variance"`` ...). Degenerate input never raises from deep code: it yields a result whose status says
what happened, and whose numbers are ``None`` where they do not exist.

``to_dict`` gives the stable JSON contract documented in the README (``lotwatch analyze --format
json``).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from datetime import date
from typing import Any

OK = "ok"


def json_safe(obj: Any) -> Any:
    """Convert to JSON-safe values: non-finite floats become None, tuples become lists, numpy
    scalars become Python numbers, dates become ISO 8601 text."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    if isinstance(obj, date):
        return obj.isoformat()
    if hasattr(obj, "item") and callable(obj.item):  # numpy scalar
        return json_safe(obj.item())
    return obj


@dataclass(frozen=True)
class GroupSummary:
    """One group of a comparison: n, mean, sample SD (ddof=1) and a t confidence interval.

    ``ci_low``/``ci_high`` is the two-sided (1 - alpha) interval mean ± t(1-alpha/2, n-1)·sd/√n
    from the group's own SD (None when n < 2).
    """

    name: str
    n: int
    mean: float
    sd: float | None
    ci_low: float | None = None
    ci_high: float | None = None
    diff_from_others: float | None = None  # mean(group) - mean of all other observations
    lots: int | None = None  # distinct lots among the n values, when the caller said which


@dataclass(frozen=True)
class AnovaTable:
    """Classical one-way ANOVA table (fixed effects).

    SS_between = Σ n_i (ȳ_i − ȳ)², SS_within = Σ Σ (y_ij − ȳ_i)², SS_total = their sum;
    df_between = k − 1, df_within = N − k; MS = SS/df; F = MS_between / MS_within;
    p = P(F(df_between, df_within) > F); f_crit = F⁻¹(1 − alpha); R² = SS_between/SS_total;
    resid_sd = √MS_within. Source: NIST/SEMATECH e-Handbook of Statistical Methods, §7.4.3.
    """

    k: int
    n_total: int
    df_between: int
    df_within: int
    ss_between: float | None
    ss_within: float | None
    ss_total: float | None
    ms_between: float | None
    ms_within: float | None
    f: float | None
    p: float | None
    f_crit: float | None
    alpha: float
    r_squared: float | None
    resid_sd: float | None
    grand_mean: float | None
    decision: str  # a sentence, e.g. "F = 4.21 > critical F 3.10: the group means differ at alpha 0.05."
    status: str = OK
    exact: bool = False  # True when computed from exact integer sums at a declared resolution


@dataclass(frozen=True)
class WelchResult:
    """Welch's heteroscedastic one-way ANOVA (Welch 1951): F, df1 = k − 1, fractional df2, p."""

    f: float | None
    df_between: float | None
    df_within: float | None
    p: float | None
    status: str = OK


@dataclass(frozen=True)
class TestResult:
    """A generic test: statistic, p-value, a plain sentence, and a status."""

    name: str
    statistic: float | None
    p: float | None
    sentence: str
    df: float | None = None
    status: str = OK


@dataclass(frozen=True)
class Recommendation:
    """Which omnibus test the battery recommends reading, and why, in words."""

    test: str  # "classical ANOVA" | "Welch ANOVA" | "Kruskal-Wallis"
    posthoc: str  # "Tukey-Kramer" | "Games-Howell" | "Dunn"
    reason: str


@dataclass(frozen=True)
class PairComparison:
    """One pair of a post-hoc comparison: diff = mean(a) − mean(b), simultaneous CI, adjusted p.

    For Dunn's test, ``diff`` is the difference of mean ranks and ``lower``/``upper`` are None.
    """

    a: str
    b: str
    diff: float
    lower: float | None
    upper: float | None
    p: float
    significant: bool


@dataclass(frozen=True)
class DunnettComparison:
    """One group against the reference: diff = mean(group) − mean(reference), CI, adjusted p."""

    group: str
    diff: float
    lower: float
    upper: float
    p: float
    significant: bool


@dataclass(frozen=True)
class AnomGroup:
    """Analysis of means: a group's mean against decision limits around the grand mean."""

    group: str
    mean: float
    lower: float
    upper: float
    flag: str  # "above" | "within" | "below"


@dataclass(frozen=True)
class AnomResult:
    """Analysis of means (Ott 1967; Nelson 1982 for unequal n) at a given alpha."""

    grand_mean: float | None
    alpha: float
    critical_value: float | None  # h such that limits are grand_mean ± h·s·√((N−n_i)/(N·n_i))
    groups: list[AnomGroup] = field(default_factory=list)
    status: str = OK


@dataclass(frozen=True)
class EffectSize:
    """Eta², omega², Cohen's f with (1 − alpha) intervals from noncentral-F inversion."""

    eta_squared: float | None
    omega_squared: float | None
    cohen_f: float | None
    eta_squared_ci: tuple[float, float] | None = None
    cohen_f_ci: tuple[float, float] | None = None
    status: str = OK


@dataclass(frozen=True)
class VarianceComponents:
    """Random-effects one-way model: σ²_between, σ²_within, ICC = σ²_b/(σ²_b+σ²_w), ICC interval."""

    var_between: float | None
    var_within: float | None
    icc: float | None
    icc_ci: tuple[float, float] | None = None
    status: str = OK


@dataclass(frozen=True)
class PowerResult:
    """Power of the F test to detect one group shifted by ``shift`` from the others.

    ``detectable_shift_80`` is the smallest such shift (in the characteristic's units) detected with
    80% power at the current group sizes; ``n_per_group_80``/``_90`` are values per group needed for a
    given shift (None when no shift was asked for).
    """

    alpha: float
    sd_within: float | None
    shift: float | None
    power_at_shift: float | None
    n_per_group_80: int | None
    n_per_group_90: int | None
    detectable_shift_80: float | None
    status: str = OK


@dataclass(frozen=True)
class Capability:
    """Cp, Cpk (the group's within SD) and Pp, Ppk (its overall SD), Cpk interval (Bissell).

    ``status`` is None when the indices could be computed, else why not ("undefined: no
    spread"); ``caveat`` warns of clearly skewed data; ``within_method`` says how the within SD
    was estimated (pooled within lots, or average moving range / 1.128)."""

    group: str
    cp: float | None
    cpk: float | None
    cpk_ci: tuple[float, float] | None
    pp: float | None
    ppk: float | None
    n: int = 0
    lots: int = 0
    sd_within: float | None = None
    sd_overall: float | None = None
    within_method: str = ""
    status: str | None = None
    caveat: str | None = None


@dataclass(frozen=True)
class ExcludedGroup:
    name: str
    n: int
    reason: str


@dataclass
class BatteryResult:
    """Everything the battery knows about one comparison (one characteristic, one factor, one set)."""

    status: str
    alpha: float
    groups: list[GroupSummary]
    excluded: list[ExcludedGroup]
    anova: AnovaTable
    welch: WelchResult
    kruskal: TestResult
    brown_forsythe: TestResult
    bartlett: TestResult
    normality: TestResult
    resolution_warning: str | None
    recommendation: Recommendation
    tukey: list[PairComparison]
    games_howell: list[PairComparison]
    dunnett: list[DunnettComparison] | None
    reference: str | None
    dunn: list[PairComparison]
    dunn_adjust: str
    letters: dict[str, str]
    anom: AnomResult
    effect: EffectSize
    variance_components: VarianceComponents
    power: PowerResult
    capability: list[Capability] | None
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """The JSON contract of ``lotwatch analyze --format json`` (see README)."""
        a = self.anova
        d: dict[str, Any] = {
            "status": self.status,
            "alpha": self.alpha,
            "groups": [{"name": g.name, "n": g.n, "mean": g.mean, "sd": g.sd,
                        "ci_low": g.ci_low, "ci_high": g.ci_high,
                        "diff_from_others": g.diff_from_others} for g in self.groups],
            "excluded": [asdict(e) for e in self.excluded],
            "anova": {
                "df_between": a.df_between, "df_within": a.df_within,
                "ss_between": a.ss_between, "ss_within": a.ss_within, "ss_total": a.ss_total,
                "ms_between": a.ms_between, "ms_within": a.ms_within, "f": a.f, "p": a.p,
                "f_crit": a.f_crit, "alpha": a.alpha, "r_squared": a.r_squared,
                "resid_sd": a.resid_sd, "grand_mean": a.grand_mean, "decision": a.decision,
                "exact": a.exact, "status": a.status,
            },
            "welch": {"f": self.welch.f, "df_between": self.welch.df_between,
                      "df_within": self.welch.df_within, "p": self.welch.p,
                      "status": self.welch.status},
            "kruskal": {"h": self.kruskal.statistic, "df": self.kruskal.df, "p": self.kruskal.p,
                        "sentence": self.kruskal.sentence},
            "brown_forsythe": {"statistic": self.brown_forsythe.statistic,
                               "p": self.brown_forsythe.p,
                               "sentence": self.brown_forsythe.sentence},
            "bartlett": {"statistic": self.bartlett.statistic, "p": self.bartlett.p,
                         "sentence": self.bartlett.sentence},
            "normality": {"test": self.normality.name, "statistic": self.normality.statistic,
                          "p": self.normality.p, "sentence": self.normality.sentence},
            "resolution_warning": self.resolution_warning,
            "recommendation": asdict(self.recommendation),
            "effect": {"eta_squared": self.effect.eta_squared,
                       "omega_squared": self.effect.omega_squared,
                       "cohen_f": self.effect.cohen_f,
                       "eta_squared_ci": self.effect.eta_squared_ci,
                       "cohen_f_ci": self.effect.cohen_f_ci},
            "variance_components": asdict(self.variance_components),
            "tukey": [_pair(p) for p in self.tukey],
            "games_howell": [_pair(p) for p in self.games_howell],
            "dunn": [_pair(p) for p in self.dunn],
            "dunn_adjust": self.dunn_adjust,
            "letters": self.letters,
            "anom": [{"group": g.group, "mean": g.mean, "lower": g.lower, "upper": g.upper,
                      "flag": g.flag} for g in self.anom.groups],
            "anom_critical_value": self.anom.critical_value,
            "power": {"detectable_shift_80": self.power.detectable_shift_80,
                      "n_per_group_80": self.power.n_per_group_80,
                      "n_per_group_90": self.power.n_per_group_90,
                      "shift": self.power.shift, "power_at_shift": self.power.power_at_shift,
                      "sd_within": self.power.sd_within},
            "notes": list(self.notes),
        }
        if self.dunnett is not None:
            d["reference"] = self.reference
            d["dunnett"] = [{"group": c.group, "diff": c.diff, "lower": c.lower,
                             "upper": c.upper, "p": c.p} for c in self.dunnett]
        if self.capability is not None:
            d["capability"] = [asdict(c) for c in self.capability]
        return json_safe(d)


def _pair(p: PairComparison) -> dict[str, Any]:
    return {"a": p.a, "b": p.b, "diff": p.diff, "lower": p.lower, "upper": p.upper, "p": p.p}
