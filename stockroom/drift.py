"""Drift of a released batch: a weighted straight line of molarity against time, its forecast, and flags.

Pure module: plain values and frozen dataclasses in and out; no web or database import.

The points of one release are its certified value and the re-checks made under it. Point i is at
t_i days after the release, with molarity y_i and standard uncertainty u_i (both mol/L). The line
y = a + b·t is fitted by weighted least squares with weights w_i = 1/u_i², in the closed form for a
straight line (Draper & Smith, Applied Regression Analysis, 3rd ed., 1998, the chapters on the
straight line and on weighted least squares; Montgomery, Peck & Vining, Introduction to Linear
Regression Analysis, 5th ed., 2012, the section on weighted least squares):

    S = Σw,   t̄ = Σw·t / S,   ȳ = Σw·y / S,   Stt = Σw·(t − t̄)²,   Sty = Σw·(t − t̄)·(y − ȳ)
    b = Sty / Stt,   a = ȳ − b·t̄
    s² = Σw·(y − a − b·t)² / (n − 2)          weighted residual mean square (dimensionless: with
                                              w = 1/u² it is the reduced chi-square)
    Var(b) = s² / Stt,   Var(a) = s²·(1/S + t̄²/Stt),   Cov(a, b) = −s²·t̄ / Stt

The weights fix only the points' relative say; the overall scale s² comes from the scatter about the
line, so the intervals use Student's t with n − 2 degrees of freedom. Why not the stated u alone
("absolute" weights): a standardization's u is mostly shared, systematic parts (the standard lot's
assay, the molar mass, the burette's calibration) that are the same at every point and move the whole
line, not its slope; taken as independent they would make a real trend look insignificant. Both
covariances are kept (`cov` scaled by s², `cov_absolute` without), for comparison.

Slope test: t = b / se(b), two-sided p from t with n − 2 degrees of freedom; significant when p < α.

Prediction of a new re-check at t0, made with weight w0 (here the mean weight of the points, i.e. a
re-check as uncertain as the batch's own standardizations typically are), at level 1 − α:

    ŷ0 = a + b·t0,   ŷ0 ± t(1 − α/2, n − 2) · s · √(1/w0 + 1/S + (t0 − t̄)²/Stt)

(the weighted form of the textbook prediction interval ŷ0 ± t·s·√(1 + 1/n + (x0 − x̄)²/Sxx); without
the 1/w0 term it is the confidence interval of the line itself).

Fewer than three points leave no degree of freedom for the scatter: no line is fitted, and the flags
come from the points alone.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from enum import StrEnum
from functools import lru_cache

from scipy.special import stdtr

from stockroom.stats import t_quantile

MIN_POINTS = 3
CONFIDENCE = 0.95
SIGNIFICANCE = 0.05
HORIZON_DAYS = 36_525  # a century: beyond it a crossing date means nothing for a titrant
DAYS_PER_PERIOD = 30  # slopes are reported per 30 days: a re-check interval of the order of a month


@dataclass(frozen=True)
class Point:
    """One standardization of a batch: date, molarity and standard uncertainty u (mol/L at 20 °C).

    kind is "release" (the certified value) or "recheck"; k is the coverage factor of its expanded
    uncertainty U = k·u (dimensionless).
    """

    on: dt.date
    molarity: float
    u: float
    kind: str = "recheck"
    k: float = 2.0

    @property
    def U(self) -> float:
        """Expanded uncertainty k·u, mol/L."""
        return self.k * self.u


@dataclass(frozen=True)
class Band:
    """Tolerance band about a certified value: certified in mol/L, tolerance_rel a fraction (0.005 = 0.5 %)."""

    certified: float
    tolerance_rel: float

    @property
    def low(self) -> float:
        """Lower edge, mol/L."""
        return self.certified * (1.0 - self.tolerance_rel)

    @property
    def high(self) -> float:
        """Upper edge, mol/L."""
        return self.certified * (1.0 + self.tolerance_rel)

    def deviation(self, molarity: float) -> float:
        """Relative deviation of a molarity (mol/L) from the certified value, a fraction."""
        return (molarity - self.certified) / self.certified

    def contains(self, molarity: float) -> bool:
        """True when a molarity (mol/L) is within the band, edges included."""
        return abs(self.deviation(molarity)) <= self.tolerance_rel


@dataclass(frozen=True)
class Fit:
    """A weighted straight line through a release's points.

    origin: the date of t = 0 (the release). intercept in mol/L; slope in mol/L per day; cov (scaled by
    s²) and cov_absolute are 2×2 covariances of (intercept, slope) in (mol/L)², (mol/L)²/day and
    (mol/L/day)². s2 dimensionless; dof count; confidence and alpha fractions. sum_w in L²/mol²,
    t_mean in days, stt in days²·L²/mol² are the weighted sums the intervals need; w_new (L²/mol²)
    is the weight of a new re-check in the prediction interval. last_on: date of the newest point.
    """

    origin: dt.date
    last_on: dt.date
    n: int
    intercept: float
    slope: float
    cov: tuple[tuple[float, float], tuple[float, float]]
    cov_absolute: tuple[tuple[float, float], tuple[float, float]]
    s2: float
    dof: int
    t_crit: float
    t_stat: float
    p_value: float
    confidence: float
    alpha: float
    sum_w: float
    t_mean: float
    stt: float
    w_new: float

    @property
    def slope_se(self) -> float:
        """Standard error of the slope, mol/L per day."""
        return math.sqrt(self.cov[1][1])

    @property
    def significant(self) -> bool:
        """True when the slope differs from zero at level alpha (two-sided t test)."""
        return self.p_value < self.alpha

    @property
    def slope_per_period(self) -> float:
        """Slope in mol/L per 30 days."""
        return self.slope * DAYS_PER_PERIOD

    @property
    def slope_per_period_ci(self) -> tuple[float, float]:
        """Confidence interval of the slope, mol/L per 30 days (t with n − 2 degrees of freedom)."""
        half = self.t_crit * self.slope_se * DAYS_PER_PERIOD
        return (self.slope_per_period - half, self.slope_per_period + half)

    def days(self, on: dt.date) -> int:
        """Days from the origin to a date (negative before it)."""
        return (on - self.origin).days

    def value_at(self, t_days: float) -> float:
        """The fitted molarity t_days after the origin, mol/L."""
        return self.intercept + self.slope * t_days


@dataclass(frozen=True)
class Prediction:
    """The line's value on a date with its intervals, mol/L; confidence is a fraction (0.95).

    pi_low/pi_high bound a new re-check on that date (prediction interval); ci_low/ci_high bound the
    line itself (confidence interval of the mean).
    """

    on: dt.date
    molarity: float
    pi_low: float
    pi_high: float
    ci_low: float
    ci_high: float
    confidence: float


class FlagKind(StrEnum):
    """What a drift flag is about."""

    RECHECK_OUTSIDE = "recheck_outside"
    PREDICTED_OUTSIDE = "predicted_outside"
    EXPECTED_TO_LEAVE = "expected_to_leave"
    RECHECK_DUE = "recheck_due"
    RECHECK_OVERDUE = "recheck_overdue"
    EXPIRED = "expired"
    # Only in a look-back (stockroom.labday): re-checks made after a day put that day outside the band.
    HINDSIGHT_OUTSIDE = "outside_in_hindsight"


@dataclass(frozen=True)
class Flag:
    """One thing to tell people about a batch on a date, in plain words; date: the day it concerns."""

    kind: FlagKind
    message: str
    date: dt.date | None = None


@dataclass(frozen=True)
class DriftReport:
    """A release's drift as known on a date: its points, band, fit (if any), forecast and flags.

    Dates are calendar dates; molarities mol/L. fit_note says, in plain words, why there is no fit
    (when fit is None) or what was left out of it. For a significant drift only: crossing is
    the first day the fitted line lies outside the band, forecast the first such day after the newest
    point. next_check_due is the date a re-check is due.
    """

    on: dt.date
    released_on: dt.date
    expires_on: dt.date
    band: Band
    points: tuple[Point, ...]
    fit: Fit | None
    fit_note: str | None
    prediction: Prediction | None
    crossing: dt.date | None
    forecast: dt.date | None
    next_check_due: dt.date
    flags: tuple[Flag, ...] = field(default_factory=tuple)


@lru_cache(maxsize=256)
def _t_crit(confidence: float, dof: int) -> float:
    # Cached: every batch on a list page asks for the same few quantiles, and the quantile is the slow part.
    return t_quantile(1.0 - (1.0 - confidence) / 2.0, dof)


def _usable(points: Sequence[Point]) -> tuple[list[Point], list[str]]:
    good, notes = [], []
    for p in points:
        if not (math.isfinite(p.molarity) and math.isfinite(p.u) and p.u > 0):
            # A point without a stated uncertainty would take infinite weight; it is shown, not fitted.
            notes.append(f"the point of {p.on.isoformat()} has no usable uncertainty and is left out of the fit")
        else:
            good.append(p)
    return good, notes


def fit_line(
    points: Sequence[Point], origin: dt.date, confidence: float = CONFIDENCE, alpha: float = SIGNIFICANCE
) -> tuple[Fit | None, str | None]:
    """Weighted least-squares line of molarity against days since `origin`, or None with the reason.

    points: standardizations (mol/L, u in mol/L); origin: date of t = 0; confidence, alpha: fractions.
    Returns (Fit, note) or (None, reason), the note and reason in plain words (note None when nothing
    was left out).
    """
    good, notes = _usable(points)
    n = len(good)
    if n < MIN_POINTS:
        why = (
            f"{n} standardization{'' if n == 1 else 's'} so far; a trend needs at least {MIN_POINTS} "
            "(the release and two re-checks)"
        )
        return None, "; ".join([why, *notes])
    t = [float((p.on - origin).days) for p in good]
    y = [p.molarity for p in good]
    w = [1.0 / (p.u * p.u) for p in good]
    S = math.fsum(w)
    t_mean = math.fsum(wi * ti for wi, ti in zip(w, t, strict=True)) / S
    y_mean = math.fsum(wi * yi for wi, yi in zip(w, y, strict=True)) / S
    stt = math.fsum(wi * (ti - t_mean) ** 2 for wi, ti in zip(w, t, strict=True))
    if stt <= 0.0:
        return None, "; ".join(["every standardization is on the same day, so there is no trend to fit", *notes])
    sty = math.fsum(wi * (ti - t_mean) * (yi - y_mean) for wi, ti, yi in zip(w, t, y, strict=True))
    b = sty / stt
    a = y_mean - b * t_mean
    dof = n - 2
    chi2 = math.fsum(wi * (yi - a - b * ti) ** 2 for wi, ti, yi in zip(w, t, y, strict=True))
    s2 = chi2 / dof
    abs_cov = ((1.0 / S + t_mean**2 / stt, -t_mean / stt), (-t_mean / stt, 1.0 / stt))
    cov = tuple(tuple(s2 * c for c in row) for row in abs_cov)
    se_b = math.sqrt(cov[1][1])
    if se_b > 0:
        t_stat = b / se_b
        p_value = float(2.0 * stdtr(dof, -abs(t_stat)))  # two-sided, Student t CDF (scipy.special)
    else:
        # Points exactly on a line: any non-zero slope is certain, a zero one is no drift.
        t_stat = math.copysign(math.inf, b) if b else 0.0
        p_value = 0.0 if b else 1.0
    fit = Fit(
        origin=origin,
        last_on=max(p.on for p in good),
        n=n,
        intercept=a,
        slope=b,
        cov=cov,  # type: ignore[arg-type]
        cov_absolute=abs_cov,
        s2=s2,
        dof=dof,
        t_crit=_t_crit(confidence, dof),
        t_stat=t_stat,
        p_value=p_value,
        confidence=confidence,
        alpha=alpha,
        sum_w=S,
        t_mean=t_mean,
        stt=stt,
        w_new=S / n,
    )
    return fit, ("; ".join(notes) or None)


def interval_at(fit: Fit, t_days: float) -> tuple[float, float, float]:
    """The line's value at t_days after the origin and the half-widths of its two intervals, mol/L.

    Returns (value, prediction half-width for a new re-check, confidence half-width of the line).
    """
    line_var = 1.0 / fit.sum_w + (t_days - fit.t_mean) ** 2 / fit.stt
    s = math.sqrt(fit.s2)
    return (fit.value_at(t_days), fit.t_crit * s * math.sqrt(1.0 / fit.w_new + line_var), fit.t_crit * s * math.sqrt(line_var))


def predict(fit: Fit, on: dt.date) -> Prediction:
    """The fitted molarity on a date with its prediction and confidence intervals (mol/L)."""
    y0, pi, ci = interval_at(fit, float(fit.days(on)))
    return Prediction(
        on=on, molarity=y0, pi_low=y0 - pi, pi_high=y0 + pi, ci_low=y0 - ci, ci_high=y0 + ci, confidence=fit.confidence
    )


def crossing(fit: Fit, band: Band) -> dt.date | None:
    """The first day, from the release on, on which the fitted line lies outside the band; None if never.

    "Outside" is strictly beyond an edge, as for a re-check. None also when the crossing is more than a
    century away (a slope that small gives no date worth printing).
    """
    if not band.contains(fit.value_at(0)):
        return fit.origin
    if fit.slope == 0.0:
        return None
    edge = band.low if fit.slope < 0 else band.high
    t_edge = (edge - fit.intercept) / fit.slope
    if t_edge > HORIZON_DAYS:
        return None
    day = math.floor(t_edge) + 1
    while band.contains(fit.value_at(day)):  # guard against rounding at the edge itself
        day += 1
    return fit.origin + dt.timedelta(days=day)


def crossing_after(fit: Fit, band: Band, after: dt.date) -> dt.date | None:
    """The first day after `after` on which the fitted line lies outside the band, or None if never.

    Why after the newest point: on the day of a re-check its own measured value decides, and the line
    is a forecast only beyond the data.
    """
    nxt = after + dt.timedelta(days=1)
    if not band.contains(fit.value_at(fit.days(nxt))):
        return nxt
    first = crossing(fit, band)
    return first if first is not None and first > after else None


def _pct(x: float, digits: int = 2) -> str:
    return f"{x * 100:+.{digits}f} %"


def assess(
    points: Sequence[Point],
    band: Band,
    released_on: dt.date,
    expires_on: dt.date,
    recheck_interval_days: int,
    on: dt.date,
    confidence: float = CONFIDENCE,
    alpha: float = SIGNIFICANCE,
) -> DriftReport:
    """The drift of one release as known on `on`: fit of its points up to that date, forecast, flags.

    points: the release's certified value and re-checks (later points are ignored); band: tolerance
    about the certified value; dates as dates; recheck_interval_days in days; confidence, alpha
    fractions. Returns a DriftReport whose flags follow the order of urgency.
    """
    known = tuple(sorted((p for p in points if p.on <= on), key=lambda p: (p.on, p.kind != "release")))
    fit, fit_note = fit_line(known, released_on, confidence, alpha)
    checks = [p for p in known if p.kind == "recheck"]
    last = checks[-1] if checks else None
    last_date = last.on if last else released_on
    due = min(last_date + dt.timedelta(days=recheck_interval_days), expires_on)
    prediction = predict(fit, on) if fit is not None else None
    # A trend the data cannot tell from zero forecasts nothing: only a significant slope is extrapolated.
    trending = fit is not None and fit.significant
    first_out = crossing(fit, band) if trending and fit is not None else None
    forecast = crossing_after(fit, band, fit.last_on) if trending and fit is not None else None
    flags: list[Flag] = []
    tol = f"tolerance ±{band.tolerance_rel * 100:.2f} %"
    if on > expires_on:
        flags.append(Flag(FlagKind.EXPIRED, f"expired on {expires_on.isoformat()}", expires_on))
    else:
        measured_out = last is not None and not band.contains(last.molarity)
        if last is not None and measured_out:
            flags.append(
                Flag(
                    FlagKind.RECHECK_OUTSIDE,
                    f"re-check on {last.on.isoformat()} differs from the certified value by "
                    f"{_pct(band.deviation(last.molarity))} ({tol})",
                    last.on,
                )
            )
        # A re-check already outside says it plainly; a forecast from the line would add nothing.
        if trending and fit is not None and prediction is not None and not measured_out:
            trend = (
                f"{_pct(fit.slope_per_period / band.certified, 3)} per 30 days, {fit.n} standardizations, p = {fit.p_value:.2g}"
            )
            if on > fit.last_on and not band.contains(prediction.molarity):
                since = f"outside the band since {first_out.isoformat()}" if first_out else "outside the band"
                flags.append(
                    Flag(
                        FlagKind.PREDICTED_OUTSIDE,
                        f"predicted {prediction.molarity:.5f} mol/L on {on.isoformat()} "
                        f"({_pct(band.deviation(prediction.molarity))}, {tol}): {since} on a trend of {trend}",
                        first_out,
                    )
                )
            elif forecast is not None and on < forecast <= expires_on:
                flags.append(
                    Flag(
                        FlagKind.EXPECTED_TO_LEAVE,
                        f"expected to leave tolerance on {forecast.isoformat()} (trend {trend})",
                        forecast,
                    )
                )
        if on >= due and due < expires_on:
            overdue = (on - due).days
            if overdue == 0:
                flags.append(Flag(FlagKind.RECHECK_DUE, "re-check due today", due))
            else:
                flags.append(Flag(FlagKind.RECHECK_OVERDUE, f"re-check overdue by {overdue} day(s)", due))
    return DriftReport(
        on=on,
        released_on=released_on,
        expires_on=expires_on,
        band=band,
        points=known,
        fit=fit,
        fit_note=fit_note,
        prediction=prediction,
        crossing=first_out,
        forecast=forecast,
        next_check_due=due,
        flags=tuple(flags),
    )
