"""The end point located on each replicate's curve enters the budget as its own line, by root-sum-square.

The expectation is computed independently of stockroom's budget: the mean of the replicate molarities
c_i = K m_i / (V_i + δ_i − b_i) written with the `uncertainties` package (first-order propagation, as
GUM 5.1.2), each δ_i an independent end-point error of standard uncertainty u_i (mL).
"""

from __future__ import annotations

import dataclasses
import math

import pytest
from uncertainties import ufloat

from stockroom.settings import resolve
from stockroom.standardization import InputQuantity, Instruments, PrimaryRun, Replicate, standard_spec, standardize_primary

MASSES = (0.8123, 0.8241, 0.8090, 0.8302)  # g KHP, invented
TITRES = (39.80, 40.39, 39.62, 40.70)  # mL, invented
U_LOCATED = (0.015, 0.021, 0.012, 0.030)  # mL: located u of each replicate's end point, invented


def _run(located: bool, methods: tuple[str, ...] = ("derivative",) * 4) -> PrimaryRun:
    reps = tuple(
        Replicate(
            volume_ml=v,
            mass_g=m,
            blank_ml=0.03,
            endpoint_u_ml=u if located else None,
            endpoint_method=meth if located else None,
        )
        for m, v, u, meth in zip(MASSES, TITRES, U_LOCATED, methods, strict=True)
    )
    return PrimaryRun(
        standard=standard_spec("NaOH", "KHP"),
        replicates=reps,
        purity=InputQuantity.expanded("purity", 0.99995, 0.0002, 2.0),
        nominal_molarity=0.1,
    )


def _instruments() -> Instruments:
    return dataclasses.replace(Instruments.from_settings(resolve({})), monte_carlo_draws=2_000)


def _line(result, source):
    return next(ln for ln in result.gum.lines if ln.source == source)


def test_the_located_u_adds_by_root_sum_square_to_the_combined_u():
    inst = _instruments()
    without = standardize_primary(_run(False), inst)
    with_curves = standardize_primary(_run(True), inst)
    assert with_curves.molarity == without.molarity  # the titres are the same; only the budget grows
    # Independent: the mean of c_i = c_i,0 (V_i − b) / (V_i + δ_i − b), δ_i ~ (0, u_i), by `uncertainties`.
    c0 = [r.molarity for r in without.replicates]
    mean = sum(c * (v - 0.03) / (v + ufloat(0.0, u) - 0.03) for c, v, u in zip(c0, TITRES, U_LOCATED, strict=True)) / 4
    u_ep = mean.std_dev
    assert with_curves.u**2 - without.u**2 == pytest.approx(u_ep**2, rel=1e-6)
    assert with_curves.u == pytest.approx(math.hypot(without.u, u_ep), rel=1e-6)


def test_the_budget_line_names_its_source_and_figure():
    result = standardize_primary(_run(True), _instruments())
    line = _line(result, "end point (located)")
    expected_ml = math.sqrt(sum(u * u for u in U_LOCATED)) / 4  # √(Σu²)/n, mL
    assert line.u == pytest.approx(expected_ml, rel=0.02)  # the weights differ from 1 by the titres' 3 % spread
    assert "located from the curve, derivative method" in line.derivation
    assert "every replicate" in line.derivation
    mixed = standardize_primary(
        _run(True, ("derivative", "gran", "derivative", "derivative")),
        _instruments(),
    )
    assert "derivative method and gran method" in _line(mixed, "end point (located)").derivation


def test_a_stated_end_point_u_gives_way_to_the_located_one():
    inst = dataclasses.replace(_instruments(), endpoint_u_ml=0.05)
    stated = standardize_primary(_run(False), inst)
    assert _line(stated, "end point").u == pytest.approx(0.05)
    located = standardize_primary(_run(True), inst)
    sources = [ln.source for ln in located.gum.lines]
    assert "end point (located)" in sources and "end point" not in sources
