"""Measurement uncertainty: GUM propagation (JCGM 100:2008) and a Monte Carlo check (JCGM 101:2008).

Pure module. A measurement model here is a product of powers of linear combinations,

    y = K · Π_i X_i^e_i,    X_i = Σ_j a_ij · x_ij,

which covers every model stockroom certifies (c = 1000·m·P·ν/(M·(V − V_blank)), c_x = c_ref·V_ref·ν/V_x)
and lets each elementary error source (one balance reading, one burette tolerance) stay a line of
its own in the budget. The sensitivity coefficients are exact, ∂y/∂x_ij = y·e_i·a_ij/X_i, so no
numerical differentiation is needed; combine_numeric() is there for models of another shape.
All sources are independent by construction: an effect shared by several inputs is written as one
source, not as several correlated ones.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from enum import StrEnum

import numpy as np
from scipy import stats as _sps

SQRT3 = math.sqrt(3.0)
SQRT6 = math.sqrt(6.0)
SQRT12 = math.sqrt(12.0)

# 95 % two-sided normal quantile: a half-width stated "at 95 % confidence" is divided by it (GUM 4.3.4).
Z95 = 1.959963984540054

DEFAULT_DRAWS = 100_000
DEFAULT_SEED = 20_080_901  # any fixed seed: a preview must give the same Monte Carlo figure twice


class Distribution(StrEnum):
    """Probability distribution assigned to an input (GUM 4.3; JCGM 101 6.4)."""

    NORMAL = "normal"
    RECTANGULAR = "rectangular"
    TRIANGULAR = "triangular"


# --------------------------------------------------------------------------- type B helpers


def u_rectangular(half_width: float) -> float:
    """Standard uncertainty of a rectangular distribution, a/√3 (GUM 4.3.7).

    half_width: a, in the quantity's unit. Returns u in the same unit.
    """
    return abs(half_width) / SQRT3


def u_triangular(half_width: float) -> float:
    """Standard uncertainty of a symmetric triangular distribution, a/√6 (GUM 4.3.9).

    half_width: a, in the quantity's unit. Returns u in the same unit.
    """
    return abs(half_width) / SQRT6


def u_from_expanded(expanded: float, k: float) -> float:
    """Standard uncertainty from a certificate's expanded uncertainty, U/k (GUM 4.3.3).

    expanded: U, in the quantity's unit; k: coverage factor (dimensionless, > 0). Returns u.
    """
    if not k > 0:
        raise ValueError(f"coverage factor must be positive, got {k!r}")
    return abs(expanded) / k


def u_resolution(resolution: float) -> float:
    """Standard uncertainty of a digital reading, d/√12: rectangular of half-width d/2 (GUM F.2.2.1).

    resolution: d, the last digit's step, in the quantity's unit. Returns u in the same unit.
    """
    return abs(resolution) / SQRT12


# --------------------------------------------------------------------------- inputs and models


def _amount(value: float, unit: str) -> str:
    """A number and its unit for a sentence: '0.15 mg', or just '0.0005' when dimensionless."""
    return f"{value:g} {unit}" if unit else f"{value:g}"


@dataclass(frozen=True)
class InputQuantity:
    """One input of a model: best estimate, standard uncertainty and where that came from.

    value and u are in `unit`; `distribution` is what the Monte Carlo draws from (for rectangular
    and triangular the half-width is recovered from u); `derivation` is a sentence for the budget,
    e.g. "balance linearity ±0.15 mg, rectangular". dof: degrees of freedom of u (n − 1 for a Type A
    estimate from n readings; infinite, the default, for a Type B figure taken as exactly known, GUM G.4.2).
    """

    name: str
    value: float
    u: float
    unit: str = ""
    distribution: Distribution = Distribution.NORMAL
    derivation: str = ""
    dof: float = math.inf

    def __post_init__(self) -> None:
        if not (math.isfinite(self.value) and math.isfinite(self.u)) or self.u < 0:
            raise ValueError(f"{self.name}: value and u must be finite and u >= 0, got {self.value!r} ± {self.u!r}")
        if not self.dof > 0:
            raise ValueError(f"{self.name}: degrees of freedom must be above 0, got {self.dof!r}")

    @property
    def half_width(self) -> float:
        """Half-width a of the distribution (rectangular, triangular), or 0 for a normal; unit as value."""
        if self.distribution is Distribution.RECTANGULAR:
            return self.u * SQRT3
        if self.distribution is Distribution.TRIANGULAR:
            return self.u * SQRT6
        return 0.0

    @classmethod
    def normal(
        cls, name: str, value: float, u: float, unit: str = "", derivation: str = "", dof: float = math.inf
    ) -> InputQuantity:
        """A normally distributed input of standard uncertainty u (both in unit), with dof degrees of freedom."""
        return cls(name, value, abs(u), unit, Distribution.NORMAL, derivation, dof)

    @classmethod
    def expanded(cls, name: str, value: float, expanded: float, k: float, unit: str = "", derivation: str = "") -> InputQuantity:
        """A normal input from a certificate's U and k: u = U/k (U in unit, k dimensionless)."""
        return cls(
            name,
            value,
            u_from_expanded(expanded, k),
            unit,
            Distribution.NORMAL,
            derivation or f"certificate U = {_amount(expanded, unit)} (k = {k:g}), u = U/k",
        )

    @classmethod
    def rectangular(cls, name: str, value: float, half_width: float, unit: str = "", derivation: str = "") -> InputQuantity:
        """A rectangular input value ± half_width (unit): u = a/√3."""
        return cls(
            name,
            value,
            u_rectangular(half_width),
            unit,
            Distribution.RECTANGULAR,
            derivation or f"±{_amount(abs(half_width), unit)}, rectangular, u = a/√3",
        )

    @classmethod
    def triangular(cls, name: str, value: float, half_width: float, unit: str = "", derivation: str = "") -> InputQuantity:
        """A triangular input value ± half_width (unit): u = a/√6."""
        return cls(
            name,
            value,
            u_triangular(half_width),
            unit,
            Distribution.TRIANGULAR,
            derivation or f"±{_amount(abs(half_width), unit)}, triangular, u = a/√6",
        )


@dataclass(frozen=True)
class Term:
    """An input and its coefficient a in the linear combination X = Σ a·x (dimensionless a)."""

    quantity: InputQuantity
    coefficient: float = 1.0


@dataclass(frozen=True)
class Factor:
    """One factor X^e of a product model, X = Σ a_j·x_j over its terms (X in `unit`)."""

    name: str
    exponent: float
    terms: tuple[Term, ...]
    unit: str = ""

    @property
    def value(self) -> float:
        """X = Σ a_j·x_j, in unit."""
        return math.fsum(t.coefficient * t.quantity.value for t in self.terms)

    @property
    def u(self) -> float:
        """u(X) = √Σ (a_j·u_j)², in unit (the terms are independent)."""
        return math.sqrt(math.fsum((t.coefficient * t.quantity.u) ** 2 for t in self.terms))


def factor(name: str, exponent: float, *quantities: InputQuantity | Term, unit: str = "") -> Factor:
    """Build a Factor from inputs (coefficient 1) or Terms; exponent dimensionless, X in unit."""
    terms = tuple(q if isinstance(q, Term) else Term(q) for q in quantities)
    if not terms:
        raise ValueError(f"factor {name} needs at least one input")
    return Factor(name, float(exponent), terms, unit or terms[0].quantity.unit)


@dataclass(frozen=True)
class ProductModel:
    """y = constant · Π X_i^e_i; the constant carries exact numbers (1000 mL/L, ν) in y's unit."""

    constant: float
    factors: tuple[Factor, ...]
    unit: str = ""
    name: str = "y"

    def value(self) -> float:
        """Best estimate of y, in unit."""
        y = self.constant
        for f in self.factors:
            x = f.value
            if x == 0.0 and f.exponent < 0:
                raise ZeroDivisionError(f"factor {f.name} is zero and has a negative exponent")
            y *= x**f.exponent
        return y


# --------------------------------------------------------------------------- GUM


@dataclass(frozen=True)
class BudgetLine:
    """One elementary source in an uncertainty budget.

    u and value in `unit` (the input's); u_rel = u/|X| with X the factor the source feeds (QUAM's
    "relative standard uncertainty"); sensitivity ∂y/∂x in y-unit per unit; contribution = |c|·u
    in y's unit; contribution_rel = contribution/|y|; share = contribution²/u_c² (fraction); dof:
    the input's degrees of freedom (inf for Type B).
    """

    source: str
    factor: str
    value: float
    u: float
    unit: str
    distribution: str
    derivation: str
    sensitivity: float
    u_rel: float
    contribution: float
    contribution_rel: float
    share: float
    dof: float = math.inf


@dataclass(frozen=True)
class FactorLine:
    """One model input (a factor) in the budget: its combined sources.

    value and u in `unit`; u_rel = u/|X|; contribution (y's unit), contribution_rel and share
    (fractions) as in BudgetLine; sources names the BudgetLines it sums.
    """

    name: str
    value: float
    u: float
    unit: str
    u_rel: float
    contribution: float
    contribution_rel: float
    share: float
    sources: tuple[str, ...]


@dataclass(frozen=True)
class GumResult:
    """Combined and expanded uncertainty of y with its budget.

    value, u (combined standard uncertainty) and U = k·u in `unit`; k dimensionless; lines per
    elementary source, factors per model input, both in model order. nu_eff: effective degrees of
    freedom of u (Welch-Satterthwaite, GUM G.4.1; inf when every source is Type B); coverage: the
    coverage probability k was chosen for from t(nu_eff), or None when k was fixed by the caller.
    """

    value: float
    u: float
    k: float
    U: float
    unit: str
    lines: tuple[BudgetLine, ...]
    factors: tuple[FactorLine, ...]
    nu_eff: float = math.inf
    coverage: float | None = None

    @property
    def u_rel(self) -> float:
        """u_c/|y| (dimensionless); nan when y is 0."""
        return self.u / abs(self.value) if self.value else math.nan


def _share(contribution: float, u_c: float) -> float:
    return (contribution / u_c) ** 2 if u_c > 0 else 0.0


def welch_satterthwaite(contributions: Sequence[tuple[float, float]]) -> float:
    """Effective degrees of freedom ν_eff = u_c⁴ / Σ u_i⁴/ν_i (GUM G.4.1, equation G.2b).

    contributions: (u_i, ν_i) pairs, u_i = |c_i|·u(x_i) in y's unit and ν_i > 0 (inf for Type B).
    Returns ν_eff (dimensionless, not rounded; inf when every ν_i is infinite or u_c is 0).
    """
    u_c2 = math.fsum(u * u for u, _ in contributions)
    den = math.fsum(u**4 / nu for u, nu in contributions if math.isfinite(nu) and u > 0)
    if den == 0.0 or u_c2 == 0.0:
        return math.inf
    return u_c2 * u_c2 / den


def coverage_factor(nu_eff: float, coverage: float = 0.95) -> float:
    """k = t_p(ν) for a two-sided coverage probability p (GUM G.3.4, G.4.1).

    nu_eff: effective degrees of freedom (inf gives the normal quantile); coverage: p as a fraction
    (0.95). GUM G.4.1 takes ν_eff truncated to the next lower integer (at least 1) for the t table; so
    does this. Returns k (dimensionless).
    """
    if not 0 < coverage < 1:
        raise ValueError(f"coverage must lie between 0 and 1, got {coverage!r}")
    q = 0.5 + coverage / 2.0
    if not math.isfinite(nu_eff):
        return float(_sps.norm.ppf(q))
    # The 1e-9 keeps a ν_eff that rounding left at 7.999999999 from truncating to 7.
    return float(_sps.t.ppf(q, max(1, math.floor(nu_eff + 1e-9))))


def combine(model: ProductModel, k: float | None = 2.0, coverage: float = 0.95) -> GumResult:
    """Law of propagation of uncertainty (GUM 5.1.2) for a product model, exact sensitivities.

    model: a ProductModel; k: coverage factor (dimensionless, > 0), or None to take k = t_p(ν_eff)
    at the coverage probability `coverage` (fraction, 0.95) from the Welch-Satterthwaite ν_eff
    (GUM G.4). Returns a GumResult in the model's unit. For a pure product this is
    (u_c/y)² = Σ (e_i·u(x_i)/x_i)².
    """
    if k is not None and not k > 0:
        raise ValueError(f"coverage factor must be positive, got {k!r}")
    y = model.value()
    raw: list[tuple[Factor, Term, float]] = []
    for f in model.factors:
        x = f.value
        for t in f.terms:
            # ∂y/∂x_ij = y·e_i·a_ij / X_i (exact for this model form).
            c = y * f.exponent * t.coefficient / x if x != 0 else math.nan
            raw.append((f, t, c))
    u_c = math.sqrt(math.fsum((c * t.quantity.u) ** 2 for _, t, c in raw))
    lines: list[BudgetLine] = []
    for f, t, c in raw:
        q = t.quantity
        contribution = abs(c) * q.u
        lines.append(
            BudgetLine(
                source=q.name,
                factor=f.name,
                value=q.value,
                u=q.u,
                unit=q.unit,
                distribution=str(q.distribution),
                derivation=q.derivation,
                sensitivity=c,
                u_rel=q.u * abs(t.coefficient) / abs(f.value) if f.value else math.nan,
                contribution=contribution,
                contribution_rel=contribution / abs(y) if y else math.nan,
                share=_share(contribution, u_c),
                dof=q.dof,
            )
        )
    factors: list[FactorLine] = []
    for f in model.factors:
        x, ux = f.value, f.u
        contribution = abs(y * f.exponent / x) * ux if x else math.nan
        factors.append(
            FactorLine(
                name=f.name,
                value=x,
                u=ux,
                unit=f.unit,
                u_rel=ux / abs(x) if x else math.nan,
                contribution=contribution,
                contribution_rel=contribution / abs(y) if y else math.nan,
                share=_share(contribution, u_c),
                sources=tuple(t.quantity.name for t in f.terms),
            )
        )
    nu_eff = welch_satterthwaite([(ln.contribution, ln.dof) for ln in lines])
    used_k = coverage_factor(nu_eff, coverage) if k is None else float(k)
    return GumResult(
        value=y,
        u=u_c,
        k=used_k,
        U=used_k * u_c,
        unit=model.unit,
        lines=tuple(lines),
        factors=tuple(factors),
        nu_eff=nu_eff,
        coverage=coverage if k is None else None,
    )


def combine_numeric(
    func: Callable[[Sequence[float]], float],
    quantities: Sequence[InputQuantity],
    k: float | None = 2.0,
    unit: str = "",
    step: float = 1e-3,
    coverage: float = 0.95,
) -> GumResult:
    """GUM propagation for any model y = func(x), sensitivities by central differences.

    func: takes the input values in the order given and returns y (in unit); quantities: the
    inputs; k: coverage factor; step: difference step as a fraction of each u (dimensionless;
    the error of a central difference falls as step², so 1e-3 leaves it far below rounding).
    Returns a GumResult whose factors list each input on its own.
    """
    x0 = [q.value for q in quantities]
    y = float(func(x0))
    cs: list[float] = []
    for i, q in enumerate(quantities):
        if q.u == 0:
            cs.append(0.0)
            continue
        h = q.u * step
        hi, lo = list(x0), list(x0)
        hi[i] += h
        lo[i] -= h
        cs.append((float(func(hi)) - float(func(lo))) / (2 * h))
    u_c = math.sqrt(math.fsum((c * q.u) ** 2 for c, q in zip(cs, quantities, strict=True)))
    lines, factors = [], []
    for c, q in zip(cs, quantities, strict=True):
        contribution = abs(c) * q.u
        rel = q.u / abs(q.value) if q.value else math.nan
        crel = contribution / abs(y) if y else math.nan
        share = _share(contribution, u_c)
        lines.append(
            BudgetLine(
                q.name, q.name, q.value, q.u, q.unit, str(q.distribution), q.derivation, c, rel, contribution, crel, share, q.dof
            )
        )
        factors.append(FactorLine(q.name, q.value, q.u, q.unit, rel, contribution, crel, share, (q.name,)))
    nu_eff = welch_satterthwaite([(ln.contribution, ln.dof) for ln in lines])
    used_k = coverage_factor(nu_eff, coverage) if k is None else float(k)
    return GumResult(
        value=y,
        u=u_c,
        k=used_k,
        U=used_k * u_c,
        unit=unit,
        lines=tuple(lines),
        factors=tuple(factors),
        nu_eff=nu_eff,
        coverage=coverage if k is None else None,
    )


# --------------------------------------------------------------------------- Monte Carlo


@dataclass(frozen=True)
class MonteCarloResult:
    """Propagation of distributions (JCGM 101:2008, 7.6–7.7).

    mean, u (standard deviation of the draws) and the probabilistically symmetric coverage
    interval [low, high] are in `unit`; coverage is a fraction (0.95); draws a count; seed the
    generator seed used.
    """

    mean: float
    u: float
    low: float
    high: float
    coverage: float
    draws: int
    seed: int
    unit: str


def _draw(q: InputQuantity, n: int, rng: np.random.Generator) -> np.ndarray | float:
    """n draws of one input from its own distribution (a float when it has no uncertainty)."""
    if q.u == 0:
        return q.value
    if q.distribution is Distribution.RECTANGULAR:
        a = q.half_width
        out = rng.random(n)
        out *= 2.0 * a
        out += q.value - a
        return out
    if q.distribution is Distribution.TRIANGULAR:
        # The difference of two U(0, 1) draws is triangular on (−1, 1): cheaper than rng.triangular.
        a = q.half_width
        out = rng.random(n)
        out -= rng.random(n)
        out *= a
        out += q.value
        return out
    out = rng.standard_normal(n)
    out *= q.u
    out += q.value
    return out


def _summarize_draws(y: np.ndarray, coverage: float, seed: int, unit: str) -> MonteCarloResult:
    m = y.size
    mean = float(y.mean())
    sd = float(y.std(ddof=1))
    # JCGM 101 7.7.1: with q = pM draws inside, the interval runs from the r-th to the (r+q)-th
    # smallest value, r = (M − q)/2 rounded to the nearest integer (1-based).
    q = int(round(coverage * m))
    r = max(1, int(round((m - q) / 2.0)))
    lo_i, hi_i = r - 1, min(m - 1, r - 1 + q)
    low, high = _order_statistic(y, lo_i, mean, sd), _order_statistic(y, hi_i, mean, sd)
    return MonteCarloResult(mean=mean, u=sd, low=low, high=high, coverage=coverage, draws=m, seed=seed, unit=unit)


def _order_statistic(y: np.ndarray, i: int, mean: float, sd: float) -> float:
    """The i-th smallest draw (0-based), exactly, selecting only within the tail that must hold it.

    A full np.partition of 10^5 draws costs more than drawing them; a coverage bound sits in a
    tail, so the values beyond a cut at mean ± 1.5 sd are counted and, when the wanted rank falls
    among them, only those few are partitioned. Any other case takes the full partition.
    """
    m = y.size
    if sd > 0 and m >= 1000:
        if i < m // 2:
            tail = y[y < mean - 1.5 * sd]
            if tail.size > i:
                return float(np.partition(tail, i)[i])
        else:
            tail = y[y > mean + 1.5 * sd]
            j = i - (m - tail.size)  # rank inside the upper tail
            if 0 <= j < tail.size:
                return float(np.partition(tail, j)[j])
    return float(np.partition(y, i)[i])


def _check_mc_args(draws: int, coverage: float) -> None:
    if isinstance(draws, bool) or int(draws) != draws or draws < 100:
        raise ValueError(f"draws must be a whole number >= 100, got {draws!r}")
    if not 0 < coverage < 1:
        raise ValueError(f"coverage must lie between 0 and 1, got {coverage!r}")


def monte_carlo(
    model: ProductModel, draws: int = DEFAULT_DRAWS, seed: int = DEFAULT_SEED, coverage: float = 0.95
) -> MonteCarloResult:
    """Monte Carlo propagation (JCGM 101) of a product model, each input from its own distribution.

    model: a ProductModel; draws: number of trials (count, >= 100); seed: generator seed
    (numpy PCG64); coverage: coverage probability (fraction). Returns a MonteCarloResult in the
    model's unit. Vectorized: no Python loop over draws, and three work arrays reused for every
    input (fresh large arrays cost page faults that took longer than drawing the numbers).
    """
    _check_mc_args(draws, coverage)
    # A draw may land where the model is undefined (a volume drawn through zero when its u is
    # absurdly large): that trial is inf or nan and shows in the result rather than as a warning.
    with np.errstate(all="ignore"):
        return _monte_carlo(model, int(draws), int(seed), coverage)


def _monte_carlo(model: ProductModel, n: int, seed: int, coverage: float) -> MonteCarloResult:
    rng = np.random.default_rng(seed)
    y = np.full(n, model.constant, dtype=np.float64)
    x = np.empty(n, dtype=np.float64)
    w = np.empty(n, dtype=np.float64)
    for f in model.factors:
        # The normal terms of one factor are summed into one normal draw of their combined u: a sum
        # of independent normals is normal, so the distribution of X is the same, and a normal draw
        # costs several uniform ones.
        constant = 0.0
        normal_u2 = 0.0
        drawn = False
        x.fill(0.0)
        for t in f.terms:
            q = t.quantity
            constant += t.coefficient * q.value
            if q.u == 0:
                continue
            if q.distribution is Distribution.NORMAL:
                normal_u2 += (t.coefficient * q.u) ** 2
                continue
            a = q.half_width * t.coefficient
            rng.random(out=w)
            if q.distribution is Distribution.RECTANGULAR:
                w -= 0.5
                w *= 2.0 * a
                x += w
            else:
                # The difference of two U(0, 1) draws is triangular on (−1, 1).
                w *= a
                x += w
                rng.random(out=w)
                w *= a
                x -= w
            drawn = True
        if normal_u2 > 0:
            rng.standard_normal(out=w)
            w *= math.sqrt(normal_u2)
            x += w
            drawn = True
        if not drawn:
            y *= constant**f.exponent
            continue
        x += constant
        if f.exponent == 1.0:
            y *= x
        elif f.exponent == -1.0:
            y /= x
        else:
            y *= np.power(x, f.exponent)
    return _summarize_draws(y, coverage, seed, model.unit)


def monte_carlo_function(
    func: Callable[..., np.ndarray],
    quantities: Sequence[InputQuantity],
    draws: int = DEFAULT_DRAWS,
    seed: int = DEFAULT_SEED,
    coverage: float = 0.95,
    unit: str = "",
) -> MonteCarloResult:
    """Monte Carlo propagation through any vectorized model y = func(x_1, ..., x_n).

    func: takes one numpy array (or float, for an exact input) per quantity, in order, and returns
    the array of y (unit); other arguments as monte_carlo(). Returns a MonteCarloResult.
    """
    _check_mc_args(draws, coverage)
    n = int(draws)
    rng = np.random.default_rng(seed)
    with np.errstate(all="ignore"):
        samples = [_draw(q, n, rng) for q in quantities]
        y = np.broadcast_to(np.asarray(func(*samples), dtype=np.float64), (n,))
        return _summarize_draws(np.array(y), coverage, int(seed), unit)
