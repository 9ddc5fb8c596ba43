"""End points located on a recorded titration curve: derivative peak, second-derivative zero, Gran line.

Pure module: (volume in mL, reading in pH or mV) pairs in, frozen dataclasses out; no Flask, no database.
The points are taken as an analyst records them: unevenly spaced, coarse far from an end point and fine
near it. Volumes must rise strictly; readings must lie in the range of the kind given.

Methods (equations in docs/measurement-model.md, section 9):

- "derivative": the first difference D_i = (E_{i+1} - E_i) / (V_{i+1} - V_i) is placed at the interval's
  midpoint; each prominent peak of |D| is refined by the vertex of the parabola through the peak and its
  two neighbours (unevenly spaced abscissae allowed).
- "second-derivative": the difference of D, placed at the midpoint of two midpoints, changes sign at
  each peak of |D|; the zero is found by linear interpolation between the two values either side.
- "gran": pH readings rising (a weak acid, or with initial_volume_ml a strong acid, titrated with a
  strong base). The Gran function G = V * 10^-pH (weak acid: V [H+] = Ka (Ve - V)), or
  G = (V0 + V) * 10^-pH (strong acid), is fitted by least squares on the points from 30 % to 90 % of the
  derivative's first end point and extrapolated to G = 0. Gran gives the first end point only.

Uncertainty u_ml of each located volume (standard uncertainty, mL):

- interpolation: the end point is known only between recorded points, so the local step h (the
  interval the located value falls in) contributes a rectangular distribution of half-width h/2:
  u_step = (h / 2) / sqrt(3);
- reading noise: each reading carries u_reading (default 0.01 pH or 0.5 mV, the resolution a bench
  meter shows: common practice); its effect on the located volume is propagated through the method's
  arithmetic with the sensitivity coefficients found numerically (central differences, GUM 5.1.3):
  u_noise = u_reading * sqrt(sum_i (dV_e / dE_i)^2);
- a weak, broad break: noise also moves which interval holds the peak, a jump the linear propagation
  cannot see; so u_noise is the larger of that propagation and a parametric bootstrap (the readings
  redrawn BOOTSTRAP_DRAWS times with N(0, u_reading), the end point located again each time near the
  same peak, u the standard deviation of the results; fixed seed, so one curve always gives one u);
- derivative methods: u_ml = sqrt(u_step^2 + u_noise^2);
- Gran: u_ml is the larger of the fit's standard error of the intercept volume
  (u^2 = (var a + Ve^2 var b + 2 Ve cov(a, b)) / b^2 for G = a + b V, Ve = -a / b) and u_noise.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.signal import find_peaks

from stockroom.errors import FieldError, InvalidInput

PH, MV = "ph", "mv"
KINDS = (PH, MV)
DERIVATIVE, SECOND_DERIVATIVE, GRAN = "derivative", "second-derivative", "gran"
METHODS = (DERIVATIVE, SECOND_DERIVATIVE, GRAN)
UNITS = {PH: "pH", MV: "mV"}

MIN_POINTS = 5
MAX_POINTS = 500
MAX_VOLUME_ML = 1000.0
# The smallest rise between two recorded volumes: a burette is read to 0.01 mL, a piston burette to 0.001.
MIN_STEP_ML = 0.001
# Readings a glass or metal electrode can give in water (wide on purpose: a typing slip is still caught).
READING_RANGE = {PH: (-2.0, 16.0), MV: (-2000.0, 2000.0)}
# The resolution a bench meter shows (common practice), used as the reading's standard uncertainty.
DEFAULT_U_READING = {PH: 0.01, MV: 0.5}
# A peak of |dE/dV| counts as an end point when its prominence (scipy.signal.peak_prominences: its height
# above the higher of the lowest slopes either side) is at least this share of its height...
PEAK_PROMINENCE_SHARE = 0.5
# ... and at least this many standard deviations of a difference's noise (sqrt(2) u_reading / step).
NOISE_SIGMAS = 4.0
# ... and when the reading moves at least this much across the break (0.5 pH, 30 mV: common practice).
MIN_JUMP = {PH: 0.5, MV: 30.0}
# The step across the end point, as a share of its volume, above which it is not located (a step of
# 2.5 % alone gives u = 0.7 %).
MAX_STEP_SHARE = 0.025
# Gran's fit region, as shares of the first end point's volume (common practice), and its fewest points.
GRAN_REGION = (0.30, 0.90)
GRAN_MIN_POINTS = 4


@dataclass(frozen=True)
class EndPoint:
    """One located equivalence volume.

    volume_ml, u_ml: the volume and its standard uncertainty (mL); method: one of METHODS; reading: the
    reading interpolated at the volume (pH or mV); slope: |dE/dV| at the peak (reading unit per mL; for
    Gran the fitted line's slope per mL); step_ml: the local step the volume falls in (mL); u_step_ml and
    u_noise_ml (or u_fit_ml for Gran): the contributions (mL); points_used: readings the value rests on.
    """

    volume_ml: float
    u_ml: float
    method: str
    reading: float
    slope: float
    step_ml: float
    u_step_ml: float
    u_noise_ml: float
    u_fit_ml: float | None
    points_used: int


def _refuse(field: str, message: str) -> InvalidInput:
    return InvalidInput([FieldError(field, message)])


def check_points(volumes: Sequence[float], readings: Sequence[float], kind: str) -> tuple[np.ndarray, np.ndarray]:
    """The points as arrays, or InvalidInput naming the first broken rule.

    volumes: mL, as recorded; readings: pH or mV (kind); returns (V, E) as float arrays.
    """
    if kind not in KINDS:
        raise _refuse("kind", "must be pH or mV")
    if len(volumes) != len(readings):
        raise _refuse("points", "each point needs one volume and one reading")
    if len(volumes) < MIN_POINTS:
        raise _refuse("points", f"needs at least {MIN_POINTS} points to show a curve (got {len(volumes)})")
    if len(volumes) > MAX_POINTS:
        raise _refuse("points", f"may hold at most {MAX_POINTS} points (got {len(volumes)})")
    v = np.asarray(volumes, dtype=float)
    e = np.asarray(readings, dtype=float)
    if not (np.all(np.isfinite(v)) and np.all(np.isfinite(e))):
        raise _refuse("points", "every volume and reading must be a finite number")
    low, high = READING_RANGE[kind]
    errors: list[FieldError] = []
    for i, (vi, ei) in enumerate(zip(v, e, strict=True)):
        if not 0 <= vi <= MAX_VOLUME_ML:
            errors.append(FieldError(f"points[{i}].volume_ml", f"must be from 0 to {MAX_VOLUME_ML:g} mL"))
        if not low <= ei <= high:
            errors.append(FieldError(f"points[{i}].{kind}", f"must be from {low:g} to {high:g} {UNITS[kind]}"))
        if i and vi < v[i - 1] + MIN_STEP_ML:
            word = "repeats" if vi >= v[i - 1] else "goes back from"
            errors.append(
                FieldError(
                    f"points[{i}].volume_ml",
                    f"{word} the volume before it ({v[i - 1]:g} mL): the volumes added must rise from point to point "
                    f"(by {MIN_STEP_ML:g} mL at least)",
                )
            )
    if errors:
        raise InvalidInput(errors)
    return v, e


def _first_derivative(v: np.ndarray, e: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return (v[:-1] + v[1:]) / 2.0, np.diff(e) / np.diff(v)


def first_derivative(volumes: Sequence[float], readings: Sequence[float]) -> tuple[np.ndarray, np.ndarray]:
    """The first difference of a curve: (interval midpoints, mL; dE/dV, reading unit per mL)."""
    return _first_derivative(np.asarray(volumes, dtype=float), np.asarray(readings, dtype=float))


def _peaks(v: np.ndarray, e: np.ndarray, kind: str, u_e: float) -> list[int]:
    """Indices (intervals) of the prominent peaks of the first derivative taken in the curve's direction."""
    _, d = _first_derivative(v, e)
    sd = d if e[-1] >= e[0] else -d
    # The noise of one difference from u_e on both readings: a peak must stand NOISE_SIGMAS of it clear.
    sigma_d = math.sqrt(2) * u_e / np.diff(v)
    # Padded on the right only, so that a break in the last interval (stopped too early) is seen and
    # refused; a weak acid's first interval climbs steeply too, and that is no end point.
    found, props = find_peaks(np.concatenate((sd, [-np.inf])), prominence=0.0)
    out = []
    for j, prom in zip(found, props["prominences"], strict=True):
        height = sd[j]
        if not np.isfinite(prom):
            prom = height
        if height <= 0 or prom < max(PEAK_PROMINENCE_SHARE * height, NOISE_SIGMAS * sigma_d[j]):
            continue
        # The reading's move across the break: from half-height to half-height of the peak.
        lo = j
        while lo > 0 and sd[lo - 1] > height / 2:
            lo -= 1
        hi = j
        while hi < len(sd) - 1 and sd[hi + 1] > height / 2:
            hi += 1
        if abs(e[hi + 1] - e[lo]) >= MIN_JUMP[kind]:
            out.append(int(j))
    return out


def _vertex(x: np.ndarray, y: np.ndarray) -> float:
    """x of the vertex of the parabola through three points (uneven x allowed)."""
    coef = np.polyfit(x - x[1], y, 2)
    if coef[0] >= 0:  # not a maximum: keep the middle point
        return float(x[1])
    # A nearly flat top (noise on a weak break) can put the vertex far out: it stays within the three points.
    return float(np.clip(x[1] - coef[1] / (2 * coef[0]), x[0], x[2]))


def _derivative_at(v: np.ndarray, e: np.ndarray, j: int) -> float:
    """The parabola-refined peak of the first derivative at interval j (needs j - 1 and j + 1)."""
    vm, d = _first_derivative(v, e)
    sd = d if e[-1] >= e[0] else -d  # a falling curve's break is a minimum of D: its peak in -D
    return _vertex(vm[j - 1 : j + 2], sd[j - 1 : j + 2])


def _second_derivative_at(v: np.ndarray, e: np.ndarray, j: int) -> float:
    """The zero of the second derivative nearest the peak interval j, by linear interpolation.

    The second difference S_k = (D_{k+1} - D_k) / (Vm_{k+1} - Vm_k) sits at Vmm_k, the midpoint of two
    midpoints; the crossing from + to - (in the curve's direction) nearest Vm_j is taken.
    """
    vm, d = _first_derivative(v, e)
    sd = d if e[-1] >= e[0] else -d
    vmm = (vm[:-1] + vm[1:]) / 2.0
    s = np.diff(sd) / np.diff(vm)
    best = float(vm[j])
    for k in range(max(j - 2, 0), min(j + 2, len(s) - 1)):
        a, b = s[k], s[k + 1]
        if a > 0 >= b:
            x = float(vmm[k] + a / (a - b) * (vmm[k + 1] - vmm[k]))
            if best == float(vm[j]) or abs(x - vm[j]) < abs(best - vm[j]):
                best = x
    return best


def _noise_u(func: Callable[[np.ndarray], float], e: np.ndarray, idx: Iterable[int], u_reading: float) -> float:
    """u of func(e) from u_reading on each reading in idx, by central differences (GUM 5.1.3)."""
    h = max(u_reading, 1e-9) * 0.1
    total = 0.0
    for i in idx:
        up, down = e.copy(), e.copy()
        up[i] += h
        down[i] -= h
        total += ((func(up) - func(down)) / (2 * h)) ** 2
    return u_reading * math.sqrt(total)


# The parametric bootstrap of a derivative end point (see _bootstrap_u): draws, the generator's fixed seed
# (the same curve always gives the same u), and how many intervals either side the peak may move to.
BOOTSTRAP_DRAWS = 200
BOOTSTRAP_SEED = 20_261_203
BOOTSTRAP_REACH = 4


def _bootstrap_u(func: Callable[[np.ndarray, np.ndarray, int], float], v: np.ndarray, e: np.ndarray, j: int, u_e: float) -> float:
    """u of a derivative end point from re-locating it on the curve with fresh reading noise (mL).

    The linear propagation (_noise_u) holds while noise only nudges the parabola through the peak; on a
    weak, broad break it also moves which interval holds the peak, a jump no derivative sees. So the
    readings get BOOTSTRAP_DRAWS fresh draws of N(0, u_e) each (a parametric bootstrap, JCGM 101 in
    spirit), the peak is found again within BOOTSTRAP_REACH intervals of j and refined the same way, and
    the standard deviation of the located volumes is returned. v, e: mL and pH or mV; u_e: reading unit.
    """
    if u_e <= 0:
        return 0.0
    rng = np.random.default_rng(BOOTSTRAP_SEED)
    n_d = len(v) - 1
    lo, hi = max(j - BOOTSTRAP_REACH, 1), min(j + BOOTSTRAP_REACH, n_d - 2)
    sign = 1.0 if e[-1] >= e[0] else -1.0
    dv = np.diff(v)
    located = np.empty(BOOTSTRAP_DRAWS)
    for k in range(BOOTSTRAP_DRAWS):
        ee = e + rng.normal(0.0, u_e, len(e))
        sd = sign * np.diff(ee) / dv
        jj = lo + int(np.argmax(sd[lo : hi + 1]))
        located[k] = func(v, ee, jj)
    return float(np.std(located, ddof=1))


def _step_containing(v: np.ndarray, x: float) -> float:
    i = int(np.clip(np.searchsorted(v, x) - 1, 0, len(v) - 2))
    return float(v[i + 1] - v[i])


def locate(
    volumes: Sequence[float],
    readings: Sequence[float],
    *,
    kind: str = PH,
    method: str = DERIVATIVE,
    u_reading: float | None = None,
    initial_volume_ml: float | None = None,
) -> tuple[EndPoint, ...]:
    """Every end point the curve shows, by one method, in order of volume.

    volumes: mL added; readings: pH or mV (kind); method: one of METHODS; u_reading: the standard
    uncertainty of one reading (pH or mV; default DEFAULT_U_READING); initial_volume_ml: the titrated
    solution's volume (mL), which makes Gran's function the strong-acid one. Raises InvalidInput.
    """
    if method not in METHODS:
        raise _refuse("method", "must be one of " + ", ".join(METHODS))
    v, e = check_points(volumes, readings, kind)
    u_e = DEFAULT_U_READING[kind] if u_reading is None else float(u_reading)
    if not (math.isfinite(u_e) and u_e >= 0):
        raise _refuse("u_reading", "must be a number of zero or more")
    peaks = _peaks(v, e, kind, u_e)
    if not peaks:
        raise _refuse(
            "points", f"show no end point: the reading never breaks sharply (by {MIN_JUMP[kind]:g} {UNITS[kind]} or more)"
        )
    n_d = len(v) - 1
    for j in peaks:
        if j < 2 or j > n_d - 3:  # two readings either side of the interval the break is in
            raise _refuse(
                "points",
                f"have too few readings past the break near {v[j]:g} mL: record at least two on each side of the end point",
            )
        if v[j + 1] - v[j] > MAX_STEP_SHARE * v[j + 1]:
            raise _refuse(
                "points",
                f"are too far apart near the end point ({v[j]:g} to {v[j + 1]:g} mL): add the titrant in smaller steps there",
            )
    if method == GRAN:
        return (_gran(v, e, kind, peaks[0], u_e, initial_volume_ml),)
    func = _derivative_at if method == DERIVATIVE else _second_derivative_at
    out = []
    for j in peaks:
        x = func(v, e, j)
        window = range(max(j - 2, 0), min(j + 4, len(v)))

        def at(ee: np.ndarray, j: int = j) -> float:
            return func(v, ee, j)

        # The larger of the linear propagation and the bootstrap: the bootstrap sees a weak break's peak
        # wander between intervals (docs/measurement-model.md, section 9).
        u_noise = max(_noise_u(at, e, window, u_e), _bootstrap_u(func, v, e, j, u_e))
        step = _step_containing(v, x)
        if step > MAX_STEP_SHARE * x:
            raise _refuse(
                "points",
                f"are too far apart near the end point at about {x:.2f} mL (a step of {step:g} mL): "
                "add the titrant in smaller steps there",
            )
        u_step = step / 2 / math.sqrt(3)
        vm, d = _first_derivative(v, e)
        out.append(
            EndPoint(
                volume_ml=x,
                u_ml=math.hypot(u_step, u_noise),
                method=method,
                reading=float(np.interp(x, v, e)),
                slope=float(abs(d[j])),
                step_ml=step,
                u_step_ml=u_step,
                u_noise_ml=u_noise,
                u_fit_ml=None,
                points_used=len(window),
            )
        )
    return tuple(out)


def _gran_line(v: np.ndarray, g: np.ndarray) -> tuple[float, float, np.ndarray, float]:
    """OLS G = a + b V: (a, b, covariance of (a, b), Ve = -a / b)."""
    x = np.column_stack([np.ones_like(v), v])
    coef, *_ = np.linalg.lstsq(x, g, rcond=None)
    a, b = float(coef[0]), float(coef[1])
    dof = len(v) - 2
    resid = g - x @ coef
    s2 = float(resid @ resid) / dof if dof > 0 else 0.0
    cov = s2 * np.linalg.inv(x.T @ x)
    return a, b, cov, -a / b if b != 0 else math.nan


def _gran(v: np.ndarray, e: np.ndarray, kind: str, j: int, u_e: float, v0: float | None) -> EndPoint:
    if kind != PH:
        raise _refuse("method", "Gran's method here reads pH: give the readings as pH")
    if e[-1] <= e[0]:
        raise _refuse("method", "Gran's method here suits an acid titrated with a base (pH rising)")
    estimate = _derivative_at(v, e, j)
    lo, hi = GRAN_REGION
    sel = np.nonzero((v >= lo * estimate) & (v <= hi * estimate))[0]
    if len(sel) < GRAN_MIN_POINTS:
        raise _refuse(
            "points",
            f"have too few readings before the end point for Gran's method: at least {GRAN_MIN_POINTS} are needed "
            f"between {lo * estimate:.2f} and {hi * estimate:.2f} mL",
        )
    vs = v[sel]
    offset = 0.0 if v0 is None else float(v0)

    def ve_of(ee: np.ndarray) -> float:
        return _gran_line(vs, (offset + vs) * 10.0 ** (-ee[sel]))[3]

    a, b, cov, ve = _gran_line(vs, (offset + vs) * 10.0 ** (-e[sel]))
    if not (b < 0 and math.isfinite(ve) and ve > vs[-1]):
        raise _refuse("points", "do not fall on a Gran line before the end point: use the derivative method")
    u_fit = math.sqrt(max(float(cov[0, 0] + ve * ve * cov[1, 1] + 2 * ve * cov[0, 1]), 0.0)) / abs(b)
    u_noise = _noise_u(ve_of, e, [int(i) for i in sel], u_e) if u_e > 0 else 0.0
    step = _step_containing(v, min(ve, float(v[-1])))
    return EndPoint(
        volume_ml=ve,
        u_ml=max(u_fit, u_noise),
        method=GRAN,
        reading=float(np.interp(ve, v, e)),
        slope=abs(b),
        step_ml=step,
        u_step_ml=0.0,
        u_noise_ml=u_noise,
        u_fit_ml=u_fit,
        points_used=len(sel),
    )


def as_dict(point: EndPoint, kind: str) -> dict[str, object]:
    """The end point as the API answers it (volumes in mL, reading in pH or mV as `kind`)."""
    return {
        "volume_ml": point.volume_ml,
        "u_ml": point.u_ml,
        "method": point.method,
        f"{kind}_at_end_point": point.reading,
        "slope_per_ml": point.slope,
        "step_ml": point.step_ml,
        "u_step_ml": point.u_step_ml,
        "u_noise_ml": point.u_noise_ml,
        "u_fit_ml": point.u_fit_ml,
        "points_used": point.points_used,
    }
