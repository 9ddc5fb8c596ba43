"""GUM and Monte Carlo propagation checked against published examples and reference libraries."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats as scipy_stats
from uncertainties import ufloat

from stockroom import uncertainty as unc
from stockroom.uncertainty import (
    Distribution,
    InputQuantity,
    ProductModel,
    Term,
    _order_statistic,
    combine,
    combine_numeric,
    factor,
    monte_carlo,
    monte_carlo_function,
    u_from_expanded,
    u_rectangular,
    u_resolution,
    u_triangular,
)


def test_type_b_conversions():
    # GUM (JCGM 100:2008) 4.3.7 rectangular a/√3, 4.3.9 triangular a/√6, 4.3.3 U/k, F.2.2.1 d/√12.
    assert u_rectangular(0.15e-3) == pytest.approx(0.15e-3 / math.sqrt(3), rel=1e-15)
    assert u_triangular(0.03) == pytest.approx(0.03 / math.sqrt(6), rel=1e-15)
    assert u_from_expanded(0.0010, 2.0) == pytest.approx(0.0005, rel=1e-15)
    assert u_resolution(0.0001) == pytest.approx(0.0001 / math.sqrt(12), rel=1e-15)
    # QUAM:2012 A2.4: purity 1.0 ± 0.0005 rectangular gives u = 0.00029.
    assert round(u_rectangular(0.0005), 5) == 0.00029
    # QUAM:2012 A2.4: burette ±0.03 mL triangular gives 0.012 mL.
    assert round(u_triangular(0.03), 3) == 0.012
    with pytest.raises(ValueError):
        u_from_expanded(1.0, 0.0)


def _quam_a2_model() -> ProductModel:
    """EURACHEM/CITAC QUAM:2012 Example A2 as GTC's documentation writes it (docs/API/CITAC_A2.rst).

    Mass by difference with a ±0.15 mg rectangular linearity per weighing; purity 1.0 ± 0.0005
    rectangular; molar mass 8·C + 5·H + 4·O + K with rectangular atomic-weight uncertainties
    (IUPAC values QUAM used); burette ±0.03 mL triangular plus a 0.006 mL temperature term;
    repeatability 0.0005 relative.
    """
    mass = factor(
        "m",
        1,
        InputQuantity.normal("net reading", 0.3888, 0.0, "g"),
        InputQuantity.rectangular("linearity gross", 0.0, 0.15e-3, "g"),
        Term(InputQuantity.rectangular("linearity tare", 0.0, 0.15e-3, "g"), -1.0),
        unit="g",
    )
    purity = factor("P", 1, InputQuantity.rectangular("P", 1.0, 0.0005))
    molar = factor(
        "M",
        -1,
        Term(InputQuantity.rectangular("M_C", 12.0107, 0.0008, "g/mol"), 8.0),
        Term(InputQuantity.rectangular("M_H", 1.00794, 0.00007, "g/mol"), 5.0),
        Term(InputQuantity.rectangular("M_O", 15.9994, 0.0003, "g/mol"), 4.0),
        Term(InputQuantity.rectangular("M_K", 39.0983, 0.0001, "g/mol"), 1.0),
        unit="g/mol",
    )
    volume = factor(
        "V",
        -1,
        InputQuantity.normal("V reading", 18.64, 0.0, "mL"),
        InputQuantity.triangular("V cal", 0.0, 0.03, "mL"),
        InputQuantity.normal("V temp", 0.0, 0.006, "mL"),
        unit="mL",
    )
    rep = factor("R", 1, InputQuantity.normal("R", 1.0, 0.0005))
    return ProductModel(1000.0, (mass, purity, molar, volume, rep), "mol/L")


def test_quam_a2_gum_matches_published_and_gtc():
    g = combine(_quam_a2_model())
    # QUAM:2012 A2 (Table A2.1): c = 0.10214 mol/L, u = 0.00010 mol/L.
    assert round(g.value, 5) == 0.10214
    assert round(g.u, 5) == 0.00010
    # GTC's reproduction of the same example prints ureal(0.102136159706..., 0.000100500722124...).
    assert g.value == pytest.approx(0.102136159706, rel=1e-10)
    assert g.u == pytest.approx(0.000100500722124, rel=1e-9)
    assert g.U == pytest.approx(2 * g.u)
    # GTC's budget for the same example: V_T 7.47292E-05, R 5.10681E-05, m 3.21735E-05,
    # P 2.94842E-05, M 1.88312E-06 mol/L.
    contrib = {f.name: f.contribution for f in g.factors}
    expected = {"V": 7.47292e-5, "R": 5.10681e-5, "m": 3.21735e-5, "P": 2.94842e-5, "M": 1.88312e-6}
    for name, value in expected.items():
        assert contrib[name] == pytest.approx(value, rel=1e-5), name
    # Shares sum to one, and the largest is the titre volume (QUAM:2012 Figure A2.3 ordering).
    assert math.fsum(f.share for f in g.factors) == pytest.approx(1.0, rel=1e-12)
    assert max(g.factors, key=lambda f: f.share).name == "V"
    # QUAM:2012 Table A2.1 relative standard uncertainties: m 0.00033 (QUAM rounds 0.09 mg per
    # weighing first), P 0.00029, M 0.000019, V 0.0007, combined 0.00097.
    by = {f.name: f for f in g.factors}
    assert by["m"].u_rel == pytest.approx(0.00033, rel=0.06)
    assert round(by["P"].u_rel, 5) == 0.00029
    assert round(by["M"].u, 4) == 0.0038
    assert by["M"].u_rel == pytest.approx(0.000019, rel=0.05)  # QUAM divides its rounded 0.0038
    assert round(by["V"].u_rel, 4) == 0.0007
    assert round(g.u_rel, 5) == 0.00098  # 0.00097 in QUAM, from its rounded inputs


def test_gum_matches_uncertainties_package():
    # The same A2 model propagated by the `uncertainties` package (first-order, like the GUM).
    lin_g = ufloat(0.0, 0.15e-3 / math.sqrt(3))
    lin_t = ufloat(0.0, 0.15e-3 / math.sqrt(3))
    m = 0.3888 + lin_g - lin_t
    p = ufloat(1.0, 0.0005 / math.sqrt(3))
    mc = ufloat(12.0107, 0.0008 / math.sqrt(3))
    mh = ufloat(1.00794, 0.00007 / math.sqrt(3))
    mo = ufloat(15.9994, 0.0003 / math.sqrt(3))
    mk = ufloat(39.0983, 0.0001 / math.sqrt(3))
    big_m = 8 * mc + 5 * mh + 4 * mo + mk
    v = 18.64 + ufloat(0.0, 0.03 / math.sqrt(6)) + ufloat(0.0, 0.006)
    r = ufloat(1.0, 0.0005)
    c = r * 1000 * m * p / (big_m * v)
    g = combine(_quam_a2_model())
    assert g.value == pytest.approx(c.nominal_value, rel=1e-12)
    assert g.u == pytest.approx(c.std_dev, rel=1e-10)


def test_numeric_path_matches_exact_sensitivities():
    model = _quam_a2_model()
    exact = combine(model)
    quantities = [t.quantity for f in model.factors for t in f.terms]
    coeffs = [(i, t.coefficient) for i, f in enumerate(model.factors) for t in f.terms]

    def func(x):
        sums = [0.0] * len(model.factors)
        for (i, a), xi in zip(coeffs, x, strict=True):
            sums[i] += a * xi
        y = model.constant
        for f, s in zip(model.factors, sums, strict=True):
            y *= s**f.exponent
        return y

    numeric = combine_numeric(func, quantities, unit="mol/L")
    assert numeric.value == pytest.approx(exact.value, rel=1e-14)
    assert numeric.u == pytest.approx(exact.u, rel=1e-7)
    # A model that is not a product: y = x1 + x2², u² = u1² + (2·x2·u2)² (GUM 5.1.2).
    x1 = InputQuantity.normal("x1", 3.0, 0.1)
    x2 = InputQuantity.normal("x2", 2.0, 0.05)
    r = combine_numeric(lambda x: x[0] + x[1] ** 2, [x1, x2])
    assert r.u == pytest.approx(math.hypot(0.1, 2 * 2.0 * 0.05), rel=1e-8)


def test_monte_carlo_agrees_with_gum_on_quam_a2():
    model = _quam_a2_model()
    g = combine(model)
    mc = monte_carlo(model, draws=100_000, seed=7)
    # JCGM 101:2008 7.9: for a nearly linear model the MC standard deviation matches the GUM u.
    assert mc.u == pytest.approx(g.u, rel=0.02)
    assert mc.mean == pytest.approx(g.value, rel=2e-5)
    # The 95 % interval of a nearly normal output is close to y ± 1.96 u.
    assert mc.low == pytest.approx(g.value - 1.96 * g.u, abs=0.05 * g.u)
    assert mc.high == pytest.approx(g.value + 1.96 * g.u, abs=0.05 * g.u)
    again = monte_carlo(model, draws=100_000, seed=7)
    assert again == mc  # seeded: the same figures twice
    other = monte_carlo(model, draws=100_000, seed=8)
    assert other.u != mc.u


@pytest.mark.parametrize(
    ("dist", "half_width_95"),
    [
        # Quantiles of the distributions themselves (JCGM 101:2008 6.4.2, 6.4.5, 6.4.7):
        # rectangular ±a: 95 % of the mass within ±0.95a; triangular ±a: within ±a(1 − √0.05);
        # normal: ±1.95996 u.
        (Distribution.RECTANGULAR, 0.95),
        (Distribution.TRIANGULAR, 1 - math.sqrt(0.05)),
        (Distribution.NORMAL, 1.959963984540054),
    ],
)
def test_each_input_is_drawn_from_its_own_distribution(dist, half_width_95):
    a = 2.0
    if dist is Distribution.RECTANGULAR:
        q = InputQuantity.rectangular("x", 10.0, a)
    elif dist is Distribution.TRIANGULAR:
        q = InputQuantity.triangular("x", 10.0, a)
    else:
        q = InputQuantity.normal("x", 10.0, 1.0)
        a = 1.0
    model = ProductModel(1.0, (factor("x", 1, q),))
    mc = monte_carlo(model, draws=100_000, seed=3)
    assert mc.u == pytest.approx(q.u, rel=0.01)
    assert mc.high - 10.0 == pytest.approx(half_width_95 * a, rel=0.01)
    assert 10.0 - mc.low == pytest.approx(half_width_95 * a, rel=0.01)
    if dist is not Distribution.NORMAL:
        # Bounded distributions never leave their interval.
        assert 10.0 - a <= mc.low and mc.high <= 10.0 + a


def test_monte_carlo_nonlinear_model_shows_what_gum_misses():
    # y = 1/x with x = 1 ± 0.2 (normal): the mean of y exceeds 1/x by about u²/x³ = 0.04 (second
    # order term of the Taylor series; JCGM 101 exists for such cases). The GUM keeps y = 1.
    x = InputQuantity.normal("x", 1.0, 0.2)
    model = ProductModel(1.0, (factor("x", -1, x),))
    g = combine(model)
    mc = monte_carlo(model, draws=100_000, seed=11)
    assert g.value == 1.0
    assert mc.mean - 1.0 == pytest.approx(0.04, abs=0.01)
    via_function = monte_carlo_function(lambda v: 1.0 / v, [x], draws=100_000, seed=11)
    assert via_function.u == pytest.approx(mc.u, rel=0.03)


def test_order_statistic_is_exact():
    rng = np.random.default_rng(5)
    for sample in (rng.standard_normal(20_000), rng.random(20_000), rng.standard_exponential(20_000)):
        ordered = np.sort(sample)
        mean, sd = float(sample.mean()), float(sample.std(ddof=1))
        for i in (0, 1, 499, 10_000, 19_500, 19_999):
            assert _order_statistic(sample, i, mean, sd) == ordered[i]


def test_inputs_refuse_nonsense():
    with pytest.raises(ValueError):
        InputQuantity("x", math.nan, 0.1)
    with pytest.raises(ValueError):
        InputQuantity("x", 1.0, -0.1)
    with pytest.raises(ValueError):
        monte_carlo(_quam_a2_model(), draws=10)


# --------------------------------------------------------------------------- effective degrees of freedom


def test_welch_satterthwaite_gum_h1_gauge_block() -> None:
    # JCGM 100:2008 (GUM) H.1.6, the end-gauge calibration: contributions 25 nm (ν = 18), 9.7 nm (25.6),
    # 2.9 nm (50) and 16.6 nm (2), u_c ≈ 32 nm, ν_eff ≈ 16.7, truncated to 16, t_95(16) = 2.12, U = 67 nm
    # (the figures from memory of the example).
    contributions = [(25.0, 18.0), (9.7, 25.6), (2.9, 50.0), (16.6, 2.0)]
    nu = unc.welch_satterthwaite(contributions)
    assert nu == pytest.approx(16.7, abs=0.1)
    k = unc.coverage_factor(nu, 0.95)
    # scipy.stats.t as the independent quantile: t(0.975, 16) = 2.1199.
    assert k == pytest.approx(scipy_stats.t.ppf(0.975, 16), rel=1e-12) and round(k, 2) == 2.12
    u_c = math.sqrt(sum(u * u for u, _ in contributions))
    assert round(u_c) == 32 and round(k * u_c) == 67


def test_welch_satterthwaite_limits() -> None:
    # GUM G.4.1: two equal contributions of ν = 4 each give ν_eff = 8; Type B only gives infinity and the
    # normal quantile (1.95996 at 95 %, scipy.stats.norm).
    assert unc.welch_satterthwaite([(1.0, 4.0), (1.0, 4.0)]) == pytest.approx(8.0, rel=1e-12)
    assert unc.welch_satterthwaite([(1.0, math.inf), (2.0, math.inf)]) == math.inf
    assert unc.coverage_factor(math.inf, 0.95) == pytest.approx(scipy_stats.norm.ppf(0.975), rel=1e-12)
    # A Type B source adds to u_c but not to the denominator: ν_eff grows above the Type A ν.
    assert unc.welch_satterthwaite([(1.0, 2.0), (1.0, math.inf)]) == pytest.approx(8.0, rel=1e-12)


def test_combine_takes_k_from_nu_eff_when_asked() -> None:
    rep = unc.InputQuantity.normal("repeatability", 1.0, 0.001, dof=2)
    v = unc.InputQuantity.normal("volume", 20.0, 0.02, "mL")
    model = unc.ProductModel(1.0, (unc.factor("R", 1, rep), unc.factor("V", -1, v)), "mol/L")
    fixed = unc.combine(model)
    assert fixed.k == 2.0 and fixed.coverage is None
    free = unc.combine(model, None, 0.95)
    # (u_c/y)² = 0.001² + 0.001² so ν_eff = 2·(2e-6)²/(1e-6)² = 8; t(0.975, 8) = 2.306 (scipy.stats.t).
    assert free.nu_eff == pytest.approx(8.0, rel=1e-9)
    assert free.k == pytest.approx(scipy_stats.t.ppf(0.975, 8), rel=1e-12) and free.coverage == 0.95
    assert free.U == pytest.approx(free.k * free.u, rel=1e-12)
    assert [ln.dof for ln in free.lines] == [2, math.inf]
