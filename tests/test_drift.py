"""Drift: the weighted fit, its intervals, the forecast, and the flags, checked against independent sources."""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
from scipy import optimize
from scipy import stats as sps

from stockroom import drift
from stockroom.drift import Band, FlagKind, Point

D0 = dt.date(2026, 3, 2)

# Invented re-checks of a 0.1 mol/L NaOH batch drifting down, with unequal standard uncertainties.
DAYS = [0, 13, 27, 42, 55, 70]
MOLARITY = [0.100312, 0.100215, 0.100061, 0.099901, 0.099790, 0.099602]
U = [0.000080, 0.000095, 0.000070, 0.000110, 0.000085, 0.000090]


def points(days=DAYS, molarity=MOLARITY, u=U) -> list[Point]:
    return [
        Point(D0 + dt.timedelta(days=d), y, s, "release" if i == 0 else "recheck")
        for i, (d, y, s) in enumerate(zip(days, molarity, u, strict=True))
    ]


def fitted(days=DAYS, molarity=MOLARITY, u=U) -> drift.Fit:
    fit, note = drift.fit_line(points(days, molarity, u), D0)
    assert fit is not None, note
    return fit


def _line(t, a, b):
    return a + b * t


def _jac(t, a, b):
    # The model's exact Jacobian, so curve_fit's covariance carries no finite-difference error.
    return np.column_stack([np.ones_like(t), t])


def test_fit_matches_scipy_curve_fit_with_absolute_sigma():
    # Reference: scipy.optimize.curve_fit, sigma = u, absolute_sigma=True -> covariance (JᵀWJ)⁻¹ unscaled.
    fit = fitted()
    popt, pcov = optimize.curve_fit(
        _line, np.array(DAYS, float), np.array(MOLARITY), p0=(0.1, 0.0), sigma=np.array(U), absolute_sigma=True, jac=_jac
    )
    assert fit.intercept == pytest.approx(popt[0], rel=1e-9)
    assert fit.slope == pytest.approx(popt[1], rel=1e-7)
    assert np.allclose(np.array(fit.cov_absolute), pcov, rtol=1e-6, atol=0)


def test_fit_matches_scipy_curve_fit_scaled_by_residual_scatter():
    # Reference: curve_fit with absolute_sigma=False scales the covariance by χ²/(n − 2), as the fit's `cov`.
    fit = fitted()
    _, pcov = optimize.curve_fit(
        _line, np.array(DAYS, float), np.array(MOLARITY), p0=(0.1, 0.0), sigma=np.array(U), absolute_sigma=False, jac=_jac
    )
    assert np.allclose(np.array(fit.cov), pcov, rtol=1e-6, atol=0)


def test_fit_matches_numpy_polyfit_weighted():
    # Reference: numpy.polyfit with w = 1/u (weights on the residuals, so 1/u² on their squares);
    # cov="unscaled" is (XᵀWX)⁻¹ and cov=True multiplies it by χ²/(n − 2). polyfit orders (slope, intercept).
    fit = fitted()
    x, y, w = np.array(DAYS, float), np.array(MOLARITY), 1 / np.array(U)
    (b, a), cov_unscaled = np.polyfit(x, y, 1, w=w, cov="unscaled")
    _, cov_scaled = np.polyfit(x, y, 1, w=w, cov=True)
    assert (fit.intercept, fit.slope) == (pytest.approx(a, rel=1e-9), pytest.approx(b, rel=1e-8))
    swap = np.array([[1, 0], [0, 1]])[::-1]  # (slope, intercept) -> (intercept, slope)
    assert np.allclose(np.array(fit.cov_absolute), swap @ cov_unscaled @ swap, rtol=1e-8, atol=0)
    assert np.allclose(np.array(fit.cov), swap @ cov_scaled @ swap, rtol=1e-8, atol=0)
    # s² is the reduced chi-square of the weighted residuals.
    resid = (y - (a + b * x)) * w
    assert fit.s2 == pytest.approx(float(resid @ resid) / (len(x) - 2), rel=1e-8)


def test_equal_weights_reduce_to_ordinary_regression_and_its_slope_test():
    # Reference: scipy.stats.linregress (ordinary least squares; two-sided t test of the slope with
    # n − 2 degrees of freedom). With one u for every point the weighted fit is the ordinary one.
    u = [0.00009] * len(DAYS)
    fit = fitted(u=u)
    ref = sps.linregress(DAYS, MOLARITY)
    assert fit.slope == pytest.approx(ref.slope, rel=1e-9)
    assert fit.intercept == pytest.approx(ref.intercept, rel=1e-9)
    assert fit.slope_se == pytest.approx(ref.stderr, rel=1e-8)
    assert fit.p_value == pytest.approx(ref.pvalue, rel=1e-6)
    assert fit.significant and fit.dof == len(DAYS) - 2


def test_slope_per_30_days_and_its_t_interval():
    fit = fitted()
    t = sps.t.ppf(0.975, len(DAYS) - 2)  # Student t, n − 2 degrees of freedom (scipy)
    lo, hi = fit.slope_per_period_ci
    assert fit.slope_per_period == pytest.approx(30 * fit.slope)
    assert hi - fit.slope_per_period == pytest.approx(t * 30 * math.sqrt(fit.cov[1][1]), rel=1e-10)
    assert lo < fit.slope_per_period < hi < 0  # a clear downward drift
    # About -0.33 % of 0.1003 mol/L per 30 days for these invented points (a hand estimate from the ends:
    # (0.099602 - 0.100312) / 70 d * 30 d = -3.04e-4 mol/L).
    assert fit.slope_per_period == pytest.approx(-3.04e-4, rel=0.08)


def _textbook_prediction(x0: float, days, molarity, u, level=0.95):
    """The weighted prediction interval written out in matrix form, independently of stockroom.drift.

    Montgomery, Peck & Vining, Introduction to Linear Regression Analysis (5th ed.), weighted least
    squares: β = (XᵀWX)⁻¹XᵀWy, σ̂² = (y − Xβ)ᵀW(y − Xβ)/(n − p), and a new observation y0 at x0 with
    variance σ²/w0 has ŷ0 ± t(α/2, n − p)·√(σ̂²·(1/w0 + x0ᵀ(XᵀWX)⁻¹x0)); without 1/w0 it is the
    confidence interval of the mean response. Here w0 is the mean weight, as stockroom.drift documents.
    """
    X = np.column_stack([np.ones(len(days)), np.array(days, float)])
    W = np.diag(1 / np.array(u) ** 2)
    y = np.array(molarity)
    inv = np.linalg.inv(X.T @ W @ X)
    beta = inv @ X.T @ W @ y
    r = y - X @ beta
    n, p = X.shape
    sigma2 = float(r @ W @ r) / (n - p)
    w0 = float(np.mean(np.diag(W)))
    v0 = np.array([1.0, x0])
    t = sps.t.ppf(1 - (1 - level) / 2, n - p)
    mean = float(v0 @ beta)
    pi = t * math.sqrt(sigma2 * (1 / w0 + float(v0 @ inv @ v0)))
    ci = t * math.sqrt(sigma2 * float(v0 @ inv @ v0))
    return mean, pi, ci


@pytest.mark.parametrize("x0", [0, 35, 70, 95, 140])
def test_prediction_interval_matches_the_textbook_formula(x0):
    fit = fitted()
    pred = drift.predict(fit, D0 + dt.timedelta(days=x0))
    mean, pi, ci = _textbook_prediction(x0, DAYS, MOLARITY, U)
    assert pred.molarity == pytest.approx(mean, rel=1e-9)
    assert pred.pi_high - pred.molarity == pytest.approx(pi, rel=1e-8)
    assert pred.molarity - pred.pi_low == pytest.approx(pi, rel=1e-8)
    assert pred.ci_high - pred.molarity == pytest.approx(ci, rel=1e-8)


def test_unweighted_prediction_interval_is_draper_and_smiths_formula():
    # Draper & Smith, Applied Regression Analysis (3rd ed.), straight line: a future observation at x0 is
    # ŷ0 ± t(n − 2, 0.975)·s·√(1 + 1/n + (x0 − x̄)²/Sxx), s² = Σe²/(n − 2).
    u = [0.0001] * len(DAYS)
    fit = fitted(u=u)
    x, y = np.array(DAYS, float), np.array(MOLARITY)
    b, a = np.polyfit(x, y, 1)
    n = len(x)
    s = math.sqrt(float(np.sum((y - a - b * x) ** 2)) / (n - 2))
    x0 = 100.0
    half = sps.t.ppf(0.975, n - 2) * s * math.sqrt(1 + 1 / n + (x0 - x.mean()) ** 2 / np.sum((x - x.mean()) ** 2))
    pred = drift.predict(fit, D0 + dt.timedelta(days=100))
    assert pred.pi_high - pred.molarity == pytest.approx(half, rel=1e-8)


def test_fewer_than_three_points_give_no_fit_and_say_why():
    fit, why = drift.fit_line(points()[:2], D0)
    assert fit is None and "2 standardizations" in why and "at least 3" in why
    fit, why = drift.fit_line([Point(D0, 0.1, 1e-4, "release")] * 3, D0)
    assert fit is None and "same day" in why


def test_a_point_without_uncertainty_is_left_out_with_a_note():
    pts = points()
    pts[2] = Point(pts[2].on, pts[2].molarity, 0.0)
    fit, note = drift.fit_line(pts, D0)
    assert fit is not None and fit.n == len(pts) - 1 and "left out of the fit" in note


# ---------------------------------------------------------------- forecast and flags


def exact_line(rel_per_day: float, days=(0, 10, 20), c0=0.1000, u=0.00008) -> list[Point]:
    """Invented points lying exactly on c0·(1 + rel_per_day·t)."""
    return [Point(D0 + dt.timedelta(days=d), c0 * (1 + rel_per_day * d), u, "release" if d == 0 else "recheck") for d in days]


def test_crossing_date_of_an_exact_line():
    # c0·(1 − 1.2e-4·t) meets the lower edge c0·(1 − 0.005) at t = 0.005/1.2e-4 = 41.67 days (hand
    # computation), so day 42 is the first whole day strictly outside the band.
    band = Band(0.1000, 0.005)
    fit, _ = drift.fit_line(exact_line(-1.2e-4), D0)
    assert fit is not None and fit.significant  # points exactly on a line: the slope is certain
    assert drift.crossing(fit, band) == D0 + dt.timedelta(days=42)
    assert drift.crossing_after(fit, band, D0 + dt.timedelta(days=20)) == D0 + dt.timedelta(days=42)
    assert drift.crossing_after(fit, band, D0 + dt.timedelta(days=50)) == D0 + dt.timedelta(days=51)


def assess(pts, on_day, expires_day=90, interval=14, tol=0.005, c0=0.1000):
    return drift.assess(pts, Band(c0, tol), D0, D0 + dt.timedelta(days=expires_day), interval, D0 + dt.timedelta(days=on_day))


def kinds(report) -> set[FlagKind]:
    return {f.kind for f in report.flags}


def test_forecast_flag_names_the_date_and_later_becomes_predicted_outside():
    pts = exact_line(-1.2e-4)
    before = assess(pts, 25)
    assert kinds(before) == {FlagKind.EXPECTED_TO_LEAVE}
    flag = before.flags[0]
    assert flag.date == D0 + dt.timedelta(days=42)
    assert "expected to leave tolerance on 2026-04-13" in flag.message  # 2026-03-02 + 42 days
    after = assess(pts, 45, interval=60)
    assert kinds(after) == {FlagKind.PREDICTED_OUTSIDE}
    assert after.prediction.molarity == pytest.approx(0.1 * (1 - 1.2e-4 * 45))
    assert "outside the band since 2026-04-13" in after.flags[0].message


def test_no_forecast_when_the_crossing_is_after_expiry_or_the_slope_is_not_significant():
    assert FlagKind.EXPECTED_TO_LEAVE not in kinds(assess(exact_line(-1.2e-4), 25, expires_day=40))
    # Scatter of ±0.1 % about no real trend (invented): a slope the data cannot tell from zero.
    noisy = [
        Point(D0 + dt.timedelta(days=d), 0.1 * (1 + e), 0.00008, "release" if d == 0 else "recheck")
        for d, e in ((0, 0.0), (10, -0.001), (20, 0.0008), (30, -0.0012))
    ]
    report = assess(noisy, 31, expires_day=365, interval=60)
    assert report.fit is not None and not report.fit.significant
    assert not kinds(report) & {FlagKind.EXPECTED_TO_LEAVE, FlagKind.PREDICTED_OUTSIDE}


def test_on_the_day_of_a_recheck_its_measured_value_decides():
    # The line through these invented points is outside the band at day 30 (it overshoots the last point),
    # but the re-check of day 30 itself is inside: no DRIFTING reason that day; the forecast is tomorrow.
    pts = [
        Point(D0, 0.1000, 0.0001, "release"),
        Point(D0 + dt.timedelta(days=10), 0.09990, 0.00002),
        Point(D0 + dt.timedelta(days=20), 0.09960, 0.00002),
        Point(D0 + dt.timedelta(days=30), 0.09951, 0.0003),
    ]
    report = assess(pts, 30)
    assert report.fit.value_at(30) < Band(0.1, 0.005).low
    assert FlagKind.PREDICTED_OUTSIDE not in kinds(report)
    assert report.forecast == D0 + dt.timedelta(days=31)


def test_recheck_outside_due_overdue_and_expired():
    out = [Point(D0, 0.1000, 0.00008, "release"), Point(D0 + dt.timedelta(days=7), 0.09945, 0.00008)]
    assert kinds(assess(out, 8)) == {FlagKind.RECHECK_OUTSIDE}
    assert "-0.55 %" in assess(out, 8).flags[0].message
    inside = out[:1] + [Point(D0 + dt.timedelta(days=7), 0.09990, 0.00008)]
    assert kinds(assess(inside, 20)) == set()
    assert kinds(assess(inside, 21)) == {FlagKind.RECHECK_DUE}  # 7 + 14 days
    overdue = assess(inside, 24)
    assert kinds(overdue) == {FlagKind.RECHECK_OVERDUE} and "overdue by 3 day(s)" in overdue.flags[0].message
    assert kinds(assess(inside, 91)) == {FlagKind.EXPIRED}


def test_points_after_the_day_asked_are_not_seen():
    pts = exact_line(-1.2e-4, days=(0, 10, 20, 60))
    report = assess(pts, 15)
    assert [p.on for p in report.points] == [D0, D0 + dt.timedelta(days=10)]
    assert report.fit is None
