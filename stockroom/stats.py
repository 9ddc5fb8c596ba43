"""Replicate statistics for a standardization: summary with a t interval, outlier screens, acceptance.

Pure module: plain numbers in, frozen dataclasses out. Nothing here drops a replicate; the outlier
functions only report, and the caller (a person, through the standardization workflow) decides.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cache
from pathlib import Path

from scipy import stats as _sps

from stockroom.errors import FieldError, InvalidInput

# Read from the package directory so a wheel install finds it beside this module.
_DIXON_TABLE = Path(__file__).parent / "data" / "dixon_q_r10.csv"
# Critical values of the ratio Dixon recommends for each n (r10, r11, r21, r22), 3 to 30 replicates.
_DIXON_RATIOS_TABLE = Path(__file__).parent / "data" / "dixon_critical.csv"
DIXON_RATIO_MAX_N = 30
# At three replicates a screen cannot tell one stray value from a wide spread (see screen()).
SCREEN_MIN_N = 4

# Confidence levels tabulated in the Dixon r10 file, as (level, column name).
_DIXON_LEVELS: tuple[tuple[float, str], ...] = ((0.90, "q90"), (0.95, "q95"), (0.99, "q99"))
DIXON_MIN_N = 3
DIXON_MAX_N = 10
GRUBBS_MIN_N = 3


# --------------------------------------------------------------------------- validation


def _finite_values(values: Sequence[float], field: str = "values") -> list[float]:
    """Return the replicates as a list of floats, refusing non-numbers and non-finite values."""
    try:
        out = [float(v) for v in values]
    except (TypeError, ValueError) as exc:
        raise InvalidInput(f"every replicate must be a number ({exc})", field=field) from exc
    bad = [i + 1 for i, v in enumerate(out) if not math.isfinite(v)]
    if bad:
        listed = ", ".join(str(i) for i in bad)
        raise InvalidInput(f"replicate(s) {listed} are not finite numbers", field=field)
    return out


def _probability(value: float, field: str) -> float:
    """Check 0 < value < 1 (a confidence level or a significance level) and return it as float."""
    try:
        p = float(value)
    except (TypeError, ValueError) as exc:
        raise InvalidInput(f"must be a number between 0 and 1, got {value!r}", field=field) from exc
    if not (0.0 < p < 1.0):
        raise InvalidInput(f"must lie strictly between 0 and 1, got {value!r}", field=field)
    return p


def _mean_and_deviations(x: list[float]) -> tuple[float, list[float]]:
    """Mean and deviations from it, with the first pass summed exactly (math.fsum).

    The mean is then refined once by the mean of the deviations, which removes the rounding left
    in the first pass (the "corrected two-pass" scheme, Chan, Golub & LeVeque 1983).
    """
    n = len(x)
    mean = math.fsum(x) / n
    dev = [v - mean for v in x]
    correction = math.fsum(dev) / n
    if correction:
        mean += correction
        dev = [v - mean for v in x]
    return mean, dev


def _sample_sd(dev: list[float]) -> float:
    """Sample standard deviation (n − 1 denominator) from deviations about the mean, same unit."""
    n = len(dev)
    # Subtracting (Σd)²/n cancels what rounding left in the mean (corrected two-pass).
    ss = math.fsum(d * d for d in dev) - math.fsum(dev) ** 2 / n
    return math.sqrt(max(ss, 0.0) / (n - 1))


def _fmt(v: float) -> str:
    """A replicate value for a sentence: six significant digits, enough for a molarity like 0.102143."""
    return f"{v:.6g}"


# --------------------------------------------------------------------------- Student t, summary


def t_quantile(p: float, dof: int) -> float:
    """Quantile of Student's t distribution (scipy.stats.t.ppf).

    p: cumulative probability, 0 < p < 1 (dimensionless); dof: degrees of freedom, integer >= 1.
    Returns the t value (dimensionless) with P(T <= t) = p.
    """
    p = _probability(p, "p")
    if isinstance(dof, bool) or int(dof) != dof or dof < 1:
        raise InvalidInput(f"degrees of freedom must be a whole number >= 1, got {dof!r}", field="dof")
    return float(_sps.t.ppf(p, int(dof)))


@dataclass(frozen=True)
class Summary:
    """Mean, spread and t confidence interval of a set of replicates.

    All values are in the unit of the replicates (e.g. mol/L) except n (count), rsd (relative,
    0.0012 = 0.12 %), confidence (fraction, 0.95) and t (dimensionless). sd, rsd, sem, ci_low,
    ci_high and t are None when n < 2; rsd is also None when the mean is zero.
    """

    n: int
    mean: float
    sd: float | None
    rsd: float | None
    sem: float | None
    ci_low: float | None
    ci_high: float | None
    confidence: float
    t: float | None


def summarize(values: Sequence[float], confidence: float = 0.95) -> Summary:
    """Mean ± t(1 − α/2, n − 1)·s/√n of the replicates.

    values: replicate results, any one unit (e.g. mol/L), at least one; confidence: two-sided level
    of the interval as a fraction (0.95). Returns a Summary in the unit of the values (rsd relative).
    """
    confidence = _probability(confidence, "confidence")
    x = _finite_values(values)
    n = len(x)
    if n == 0:
        raise InvalidInput("at least one replicate is needed", field="values")
    mean, dev = _mean_and_deviations(x)
    if n < 2:
        return Summary(n=n, mean=mean, sd=None, rsd=None, sem=None, ci_low=None, ci_high=None, confidence=confidence, t=None)
    sd = _sample_sd(dev)
    rsd = sd / abs(mean) if mean != 0.0 else None
    sem = sd / math.sqrt(n)
    t = t_quantile(1.0 - (1.0 - confidence) / 2.0, n - 1)
    half = t * sem
    return Summary(n=n, mean=mean, sd=sd, rsd=rsd, sem=sem, ci_low=mean - half, ci_high=mean + half, confidence=confidence, t=t)


# --------------------------------------------------------------------------- outlier screens


@dataclass(frozen=True)
class OutlierResult:
    """Outcome of one outlier test on one set of replicates; reports only, never removes.

    test: "grubbs" or "dixon"; applicable: False when the test cannot be run or cannot judge (see
    note); index: 0-based position in the input of the value tested; statistic and critical:
    dimensionless (G, or the Dixon ratio named in `ratio`); outlier: statistic > critical; note: a
    sentence for a person; verdict: "outlier", "no outlier", "cannot judge" (the test ran but too few
    replicates make its answer meaningless) or "not applicable"; ratio: Dixon's ratio used ("r10",
    "r11", "r21", "r22"), None for Grubbs.
    """

    test: str
    applicable: bool
    index: int | None
    statistic: float | None
    critical: float | None
    outlier: bool
    note: str
    verdict: str = ""
    ratio: str | None = None

    def __post_init__(self) -> None:
        if not self.verdict:
            verdict = ("outlier" if self.outlier else "no outlier") if self.applicable else "not applicable"
            object.__setattr__(self, "verdict", verdict)


def _not_applicable(test: str, note: str) -> OutlierResult:
    return OutlierResult(test=test, applicable=False, index=None, statistic=None, critical=None, outlier=False, note=note)


def grubbs_critical(n: int, alpha: float = 0.05) -> float:
    """Two-sided Grubbs critical value G_crit = ((n−1)/√n)·√(t²/(n−2+t²)), t = t(1 − α/(2n), n−2).

    n: number of replicates, >= 3; alpha: two-sided significance level as a fraction (0.05).
    Returns G_crit (dimensionless). Formula: Grubbs (1969); NIST/SEMATECH e-Handbook 1.3.5.17.
    """
    alpha = _probability(alpha, "alpha")
    if isinstance(n, bool) or int(n) != n or n < GRUBBS_MIN_N:
        raise InvalidInput(f"the Grubbs test needs n >= {GRUBBS_MIN_N}, got {n!r}", field="n")
    n = int(n)
    t = t_quantile(1.0 - alpha / (2.0 * n), n - 2)
    return (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))


def grubbs(values: Sequence[float], alpha: float = 0.05) -> OutlierResult:
    """Two-sided Grubbs test of the single value farthest from the mean, G = max|xᵢ − x̄|/s.

    values: replicate results, any one unit; alpha: significance level as a fraction (0.05).
    Returns an OutlierResult (statistic and critical dimensionless, index 0-based into values).
    """
    alpha = _probability(alpha, "alpha")
    x = _finite_values(values)
    n = len(x)
    if n < GRUBBS_MIN_N:
        return _not_applicable(
            "grubbs", f"the Grubbs test needs at least {GRUBBS_MIN_N} replicates; there {'is' if n == 1 else 'are'} {n}"
        )
    _, dev = _mean_and_deviations(x)
    sd = _sample_sd(dev)
    if sd == 0.0:
        return _not_applicable("grubbs", "all replicates are equal, so no value stands out")
    # First occurrence on ties keeps the answer independent of anything but the input order.
    index = max(range(n), key=lambda i: (abs(dev[i]), -i))
    g = abs(dev[index]) / sd
    crit = grubbs_critical(n, alpha)
    flagged = g > crit
    where = f"{_fmt(x[index])} (replicate {index + 1})"
    if flagged:
        note = (
            f"G = {g:.4f} exceeds G_crit = {crit:.4f} (n = {n}, α = {alpha:g}): {where} is a "
            f"suspected outlier; whether to exclude it is the analyst's decision"
        )
    else:
        note = (
            f"G = {g:.4f} does not exceed G_crit = {crit:.4f} (n = {n}, α = {alpha:g}): "
            f"the most distant value, {where}, is not flagged"
        )
    return OutlierResult(test="grubbs", applicable=True, index=index, statistic=g, critical=crit, outlier=flagged, note=note)


@cache
def _dixon_table() -> dict[int, dict[str, float]]:
    """The r10 critical values by n and column name, read once from the package CSV."""
    table: dict[int, dict[str, float]] = {}
    with _DIXON_TABLE.open(newline="", encoding="utf-8") as fh:
        rows = csv.DictReader(line for line in fh if line.strip() and not line.lstrip().startswith("#"))
        for row in rows:
            table[int(row["n"])] = {name: float(row[name]) for _, name in _DIXON_LEVELS}
    return table


def _dixon_column(confidence: float) -> str | None:
    """Column name in the Dixon table for a confidence level, or None when it is not tabulated."""
    for level, name in _DIXON_LEVELS:
        if math.isclose(confidence, level, abs_tol=1e-9):
            return name
    return None


def _dixon_levels_text() -> str:
    return "/".join(f"{level:.2f}" for level, _ in _DIXON_LEVELS)


def dixon_critical(n: int, confidence: float = 0.95) -> float:
    """Critical value of Dixon's r10 (Q) from the tabulated values (Rorabacher 1991, Table II).

    n: number of replicates, 3 to 10; confidence: 0.90, 0.95 or 0.99 (two-sided, as a fraction).
    Returns Q_crit (dimensionless).
    """
    errors: list[FieldError] = []
    if isinstance(n, bool) or int(n) != n or not (DIXON_MIN_N <= n <= DIXON_MAX_N):
        errors.append(FieldError("n", f"the Dixon table covers n = {DIXON_MIN_N} to {DIXON_MAX_N}, got {n!r}"))
    column = _dixon_column(float(confidence))
    if column is None:
        errors.append(FieldError("confidence", f"the Dixon table has confidence {_dixon_levels_text()} only, got {confidence!r}"))
    if errors:
        raise InvalidInput(errors)
    assert column is not None
    return _dixon_table()[int(n)][column]


def dixon(values: Sequence[float], confidence: float = 0.95) -> OutlierResult:
    """Dixon's r10 test, Q = gap/range, on the more extreme of the lowest and the highest value.

    values: replicate results, any one unit, 3 to 10 of them; confidence: 0.90, 0.95 or 0.99.
    Returns an OutlierResult (statistic and critical dimensionless, index 0-based into values).
    """
    column = _dixon_column(_probability(confidence, "confidence"))
    if column is None:
        raise InvalidInput(f"the Dixon table has confidence {_dixon_levels_text()} only, got {confidence!r}", field="confidence")
    x = _finite_values(values)
    n = len(x)
    if not (DIXON_MIN_N <= n <= DIXON_MAX_N):
        return _not_applicable(
            "dixon",
            f"the Dixon r10 table covers {DIXON_MIN_N} to {DIXON_MAX_N} replicates; there {'is' if n == 1 else 'are'} {n}",
        )
    order = sorted(range(n), key=lambda i: (x[i], i))
    lo, lo2, hi2, hi = x[order[0]], x[order[1]], x[order[-2]], x[order[-1]]
    spread = hi - lo
    if spread == 0.0:
        return _not_applicable("dixon", "all replicates are equal, so no value stands out")
    gap_low, gap_high = lo2 - lo, hi - hi2
    if gap_high > gap_low:
        value, gap = hi, gap_high
    elif gap_low > gap_high:
        value, gap = lo, gap_low
    else:
        # Equal gaps give the same Q either way; name the value farther from the mean.
        mean = math.fsum(x) / n
        value, gap = (hi, gap_high) if hi - mean >= mean - lo else (lo, gap_low)
    index = x.index(value)
    q = gap / spread
    crit = dixon_critical(n, confidence)
    flagged = q > crit
    where = f"{_fmt(value)} (replicate {index + 1})"
    level = f"{confidence * 100:g} %"
    if flagged:
        note = (
            f"Q = {q:.3f} exceeds Q_crit = {crit:.3f} (n = {n}, {level}): {where} is a suspected "
            f"outlier; whether to exclude it is the analyst's decision"
        )
    else:
        note = (
            f"Q = {q:.3f} does not exceed Q_crit = {crit:.3f} (n = {n}, {level}): "
            f"the more extreme end value, {where}, is not flagged"
        )
    return OutlierResult(test="dixon", applicable=True, index=index, statistic=q, critical=crit, outlier=flagged, note=note)


def dixon_ratio_for(n: int) -> str:
    """The Dixon ratio recommended for n replicates (Dixon 1953; Rorabacher 1991): r10, r11, r21 or r22.

    n: count, 3 or more. r10 = gap/range for 3–7; r11 leaves the farthest value at the other end out of
    the range (8–10); r21 also takes the gap to the second neighbour (11–13); r22 leaves two out at each
    end (14 and more). Each guards against a second stray value masking the first.
    """
    if n <= 7:
        return "r10"
    if n <= 10:
        return "r11"
    if n <= 13:
        return "r21"
    return "r22"


@cache
def _dixon_ratio_table() -> dict[tuple[str, int], dict[str, float]]:
    """Critical values by (ratio, n) and column name, read once from the package CSV."""
    table: dict[tuple[str, int], dict[str, float]] = {}
    with _DIXON_RATIOS_TABLE.open(newline="", encoding="utf-8") as fh:
        rows = csv.DictReader(line for line in fh if line.strip() and not line.lstrip().startswith("#"))
        for row in rows:
            table[(row["ratio"], int(row["n"]))] = {name: float(row[name]) for _, name in _DIXON_LEVELS}
    return table


def dixon_ratio_critical(n: int, confidence: float = 0.95) -> tuple[str, float]:
    """The recommended Dixon ratio for n and its two-sided critical value (data/dixon_critical.csv).

    n: replicates, 3 to 30; confidence: 0.90, 0.95 or 0.99. Returns (ratio name, critical value).
    """
    errors: list[FieldError] = []
    if isinstance(n, bool) or int(n) != n or not (DIXON_MIN_N <= n <= DIXON_RATIO_MAX_N):
        errors.append(FieldError("n", f"the Dixon tables cover n = {DIXON_MIN_N} to {DIXON_RATIO_MAX_N}, got {n!r}"))
    column = _dixon_column(float(confidence))
    if column is None:
        errors.append(FieldError("confidence", f"the Dixon table has confidence {_dixon_levels_text()} only, got {confidence!r}"))
    if errors:
        raise InvalidInput(errors)
    assert column is not None
    ratio = dixon_ratio_for(int(n))
    return ratio, _dixon_ratio_table()[(ratio, int(n))][column]


def _dixon_ends(s: list[float], ratio: str) -> tuple[float, float, float, float]:
    """(low gap, low range, high gap, high range) of sorted values s for one of Dixon's ratios."""
    n = len(s)
    gap_i, drop_j = {"r10": (1, 0), "r11": (1, 1), "r21": (2, 1), "r22": (2, 2)}[ratio]
    low_gap, low_range = s[gap_i] - s[0], s[n - 1 - drop_j] - s[0]
    high_gap, high_range = s[n - 1] - s[n - 1 - gap_i], s[n - 1] - s[drop_j]
    return low_gap, low_range, high_gap, high_range


def dixon_recommended(values: Sequence[float], confidence: float = 0.95) -> OutlierResult:
    """Dixon's test with the ratio recommended for n (r10, r11, r21, r22) on the more extreme end value.

    values: replicate results, any one unit, 3 to 30 of them; confidence: 0.90, 0.95 or 0.99.
    Returns an OutlierResult (ratio names the ratio; statistic and critical dimensionless).
    """
    column = _dixon_column(_probability(confidence, "confidence"))
    if column is None:
        raise InvalidInput(f"the Dixon table has confidence {_dixon_levels_text()} only, got {confidence!r}", field="confidence")
    x = _finite_values(values)
    n = len(x)
    if not (DIXON_MIN_N <= n <= DIXON_RATIO_MAX_N):
        return _not_applicable(
            "dixon",
            f"the Dixon tables cover {DIXON_MIN_N} to {DIXON_RATIO_MAX_N} replicates; there {'is' if n == 1 else 'are'} {n}",
        )
    ratio, crit = dixon_ratio_critical(n, confidence)
    order = sorted(range(n), key=lambda i: (x[i], i))
    s = [x[i] for i in order]
    low_gap, low_range, high_gap, high_range = _dixon_ends(s, ratio)
    if low_range <= 0.0 or high_range <= 0.0:
        return OutlierResult(
            "dixon", False, None, None, None, False, "too many equal replicates: the ratio is undefined", ratio=ratio
        )
    q_low, q_high = low_gap / low_range, high_gap / high_range
    if q_high > q_low or (q_high == q_low and s[-1] - math.fsum(s) / n >= math.fsum(s) / n - s[0]):
        q, index = q_high, order[-1]
    else:
        q, index = q_low, order[0]
    flagged = q > crit
    where = f"{_fmt(x[index])} (replicate {index + 1})"
    level = f"{confidence * 100:g} %"
    if flagged:
        note = (
            f"Dixon {ratio} = {q:.3f} exceeds {crit:.3f} (n = {n}, {level}): {where} is a suspected outlier; "
            f"whether to exclude it is the analyst's decision"
        )
    else:
        note = (
            f"Dixon {ratio} = {q:.3f} does not exceed {crit:.3f} (n = {n}, {level}): "
            f"the more extreme end value, {where}, is not flagged"
        )
    return OutlierResult("dixon", True, index, q, crit, flagged, note, ratio=ratio)


def _cannot_judge(r: OutlierResult, n: int) -> OutlierResult:
    reason = (
        f"with {n} replicates no screen can judge: one stray value cannot be told from a wide spread "
        f"(Grubbs' G cannot exceed (n − 1)/√n = {(n - 1) / math.sqrt(n):.3f}, barely above its critical value, and "
        f"Dixon's Q needs the other two to agree within a few % of the range); measure a fourth replicate"
    )
    return OutlierResult(r.test, False, r.index, r.statistic, r.critical, False, reason, "cannot judge", r.ratio)


def screen(values: Sequence[float], alpha: float = 0.05) -> list[OutlierResult]:
    """Both outlier tests on the replicates: Grubbs, and Dixon with the ratio recommended for n (3 to 30).

    values: replicate results, any one unit; alpha: significance level as a fraction (0.05; Dixon
    runs at confidence 1 − alpha, which must be a tabulated level, else its entry says why not).
    Returns a list of OutlierResult, Grubbs first. With three replicates both say "cannot judge"
    (verdict) instead of flagging: their statistics are kept for the record.
    """
    alpha = _probability(alpha, "alpha")
    x = _finite_values(values)
    results = [grubbs(x, alpha)]
    if DIXON_MIN_N <= len(x) <= DIXON_RATIO_MAX_N:
        confidence = 1.0 - alpha
        if _dixon_column(confidence) is None:
            results.append(
                _not_applicable(
                    "dixon",
                    f"the Dixon table has confidence {_dixon_levels_text()} only; α = {alpha:g} has no tabulated critical value",
                )
            )
        else:
            results.append(dixon_recommended(x, confidence))
    if len(x) < SCREEN_MIN_N and len(x) >= GRUBBS_MIN_N:
        results = [_cannot_judge(r, len(x)) if r.applicable else r for r in results]
    return results


# --------------------------------------------------------------------------- acceptance


@dataclass(frozen=True)
class AcceptanceRule:
    """Repeatability criteria for accepting a standardization.

    min_n: least number of replicates (count); max_rsd: largest relative standard deviation as a
    fraction (0.002 = 0.2 %, Ph. Eur./BP general text on volumetric solutions).
    """

    min_n: int = 3
    max_rsd: float = 0.002

    def __post_init__(self) -> None:
        errors: list[FieldError] = []
        if isinstance(self.min_n, bool) or int(self.min_n) != self.min_n or self.min_n < 1:
            errors.append(FieldError("min_n", f"must be a whole number >= 1, got {self.min_n!r}"))
        if not (isinstance(self.max_rsd, int | float) and math.isfinite(self.max_rsd) and self.max_rsd > 0):
            errors.append(FieldError("max_rsd", f"must be a positive fraction, got {self.max_rsd!r}"))
        if errors:
            raise InvalidInput(errors)


@dataclass(frozen=True)
class Verdict:
    """Whether a set of replicates meets an AcceptanceRule, and every reason it does not."""

    accepted: bool
    reasons: tuple[str, ...]


def _pct_pair(value: float, limit: float) -> tuple[str, str]:
    """Both fractions as percentages with the fewest decimals (>= 2) that tell them apart."""
    for dp in range(2, 7):
        a, b = f"{value * 100:.{dp}f}", f"{limit * 100:.{dp}f}"
        if a != b:
            return a, b
    return f"{value * 100:.6f}", f"{limit * 100:.6f}"


def judge(summary: Summary, rule: AcceptanceRule) -> Verdict:
    """Check replicate count and repeatability (RSD <= limit, the limit itself passes) against a rule.

    summary: from summarize(); rule: an AcceptanceRule (min_n a count, max_rsd a fraction).
    Returns a Verdict; reasons are empty when accepted.
    """
    reasons: list[str] = []
    n = summary.n
    if n < rule.min_n:
        noun = "replicate" if n == 1 else "replicates"
        only = "only " if n > 0 else ""
        reasons.append(f"{only}{n} {noun}; at least {rule.min_n} are needed")
    if summary.rsd is None:
        if n >= 2:
            reasons.append("the RSD cannot be computed because the mean is zero")
        elif n >= rule.min_n:
            # Only reached when a rule allows a single replicate: repeatability is then unknown.
            reasons.append("the RSD cannot be computed from a single replicate")
    elif summary.rsd > rule.max_rsd:
        got, limit = _pct_pair(summary.rsd, rule.max_rsd)
        reasons.append(f"RSD {got} % exceeds the limit of {limit} %")
    return Verdict(accepted=not reasons, reasons=tuple(reasons))
