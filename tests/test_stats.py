"""Checks of stockroom.stats against outside references: scipy/numpy, the Python statistics module
(exact rational arithmetic), published tables and a Monte Carlo of Dixon's statistic.

Replicate values below are invented for the tests unless a source is named.
"""

from __future__ import annotations

import math
import statistics
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from stockroom import stats
from stockroom.errors import InvalidInput
from stockroom.stats import AcceptanceRule, Summary

# Invented, realistic 0.1 mol/L NaOH standardization against KHP (mol/L).
MOLARITIES = [0.10214, 0.10218, 0.10209, 0.10221]

PACKAGE_CSV = Path(stats.__file__).parent / "data" / "dixon_q_r10.csv"


# --------------------------------------------------------------------------- Student t


# Two-sided 95 % (upper-tail 0.025) Student t values; NIST/SEMATECH e-Handbook of Statistical
# Methods, 1.3.6.7.2 "Critical values of the Student's t distribution" (standard t table).
T_TABLE_975 = {
    1: 12.706,
    2: 4.303,
    3: 3.182,
    4: 2.776,
    5: 2.571,
    6: 2.447,
    7: 2.365,
    8: 2.306,
    9: 2.262,
    10: 2.228,
    20: 2.086,
    30: 2.042,
}


@pytest.mark.parametrize(("dof", "expected"), sorted(T_TABLE_975.items()))
def test_t_quantile_matches_handbook_table(dof: int, expected: float) -> None:
    # Source: NIST/SEMATECH e-Handbook 1.3.6.7.2 (table printed to 3 decimals).
    assert abs(stats.t_quantile(0.975, dof) - expected) <= 0.0005 + 1e-12


@pytest.mark.parametrize(("p", "dof"), [(0.975, 1), (0.995, 4), (0.9, 7), (0.05, 12), (0.999, 60)])
def test_t_quantile_matches_scipy(p: float, dof: int) -> None:
    # Source: scipy.stats.t.ppf (reference library).
    assert stats.t_quantile(p, dof) == pytest.approx(scipy.stats.t.ppf(p, dof), rel=1e-12)


@pytest.mark.parametrize(("p", "dof"), [(0.0, 3), (1.0, 3), (0.5, 0), (0.5, 2.5)])
def test_t_quantile_rejects_bad_arguments(p: float, dof: int) -> None:
    with pytest.raises(InvalidInput):
        stats.t_quantile(p, dof)


# --------------------------------------------------------------------------- summarize


def test_summarize_matches_numpy_and_scipy_on_molarities() -> None:
    s = stats.summarize(MOLARITIES, 0.95)
    arr = np.array(MOLARITIES)
    # Source: numpy mean / std(ddof=1) and scipy.stats.t.interval (reference libraries).
    sd = float(np.std(arr, ddof=1))
    sem = sd / math.sqrt(len(arr))
    lo, hi = scipy.stats.t.interval(0.95, len(arr) - 1, loc=float(arr.mean()), scale=sem)
    assert s.n == 4
    assert s.mean == pytest.approx(float(arr.mean()), rel=1e-14)
    assert s.sd == pytest.approx(sd, rel=1e-12)
    assert s.sem == pytest.approx(sem, rel=1e-12)
    assert s.rsd == pytest.approx(sd / float(arr.mean()), rel=1e-12)
    assert s.ci_low == pytest.approx(lo, rel=1e-12)
    assert s.ci_high == pytest.approx(hi, rel=1e-12)
    assert s.t == pytest.approx(3.182, abs=5e-4)  # NIST e-Handbook 1.3.6.7.2, dof 3
    assert s.confidence == 0.95
    # Worked by hand: mean 0.102155; deviations -1.5, 2.5, -6.5, 5.5 (×1e-5); squares sum to
    # 81e-10, so s = √(81e-10 / 3) = 3√3 × 1e-5.
    assert s.mean == pytest.approx(0.102155, abs=1e-15)
    assert s.sd == pytest.approx(3 * math.sqrt(3) * 1e-5, rel=1e-9)


def test_summarize_99_percent_interval_matches_scipy() -> None:
    s = stats.summarize(MOLARITIES, 0.99)
    arr = np.array(MOLARITIES)
    sem = float(np.std(arr, ddof=1)) / 2.0
    # Source: scipy.stats.t.interval (reference library).
    lo, hi = scipy.stats.t.interval(0.99, 3, loc=float(arr.mean()), scale=sem)
    assert (s.ci_low, s.ci_high) == (pytest.approx(lo, rel=1e-12), pytest.approx(hi, rel=1e-12))


@pytest.mark.parametrize("offset", [0.0, 1.0e4, 1.0e8, -3.0e9])
def test_summarize_is_accurate_with_a_large_common_offset(offset: float) -> None:
    values = [offset + v for v in (0.10214, 0.10218, 0.10209, 0.10221, 0.10216)]
    s = stats.summarize(values)
    # Source: Python's statistics module, which works in exact rational arithmetic on the floats.
    exact_mean = sum(Fraction(v) for v in values) / len(values)
    assert s.mean == pytest.approx(float(exact_mean), rel=1e-15, abs=1e-15)
    assert s.sd == pytest.approx(statistics.stdev(values), rel=1e-9)
    # The naive one-pass formula visibly fails at 1e8, so this test can tell the two apart.
    if offset == 1.0e8:
        n = len(values)
        naive_var = (sum(v * v for v in values) - sum(values) ** 2 / n) / (n - 1)
        naive = math.sqrt(naive_var) if naive_var > 0 else 0.0
        assert abs(naive - statistics.stdev(values)) > 1e-6


def test_summarize_single_and_equal_values() -> None:
    one = stats.summarize([0.1021])
    assert (one.n, one.mean) == (1, 0.1021)
    assert one.sd is one.rsd is one.sem is one.ci_low is one.ci_high is one.t is None
    same = stats.summarize([0.1021] * 4)
    assert same.sd == 0.0 and same.rsd == 0.0 and same.ci_low == same.ci_high == 0.1021


def test_summarize_zero_mean_has_no_rsd() -> None:
    s = stats.summarize([-1.0, 1.0])
    assert s.rsd is None
    assert s.sd == pytest.approx(math.sqrt(2.0), rel=1e-15)  # by hand: deviations ±1, s² = 2/1


@pytest.mark.parametrize(
    ("values", "confidence"),
    [([], 0.95), ([0.1, float("nan")], 0.95), ([0.1, float("inf")], 0.95), ([0.1, 0.2], 1.0), (["abc"], 0.95)],
)
def test_summarize_rejects_bad_input(values: list, confidence: float) -> None:
    with pytest.raises(InvalidInput):
        stats.summarize(values, confidence)


# --------------------------------------------------------------------------- Grubbs


# Two-sided 5 % (one-sided 2.5 %) Grubbs critical values, n = 3..10, to 4 dp.
# Source: Grubbs (1969), Technometrics 11, 1-21; ASTM E178 Table 1.
GRUBBS_95 = [1.1543, 1.4812, 1.7150, 1.8871, 2.0200, 2.1266, 2.2150, 2.2900]
# Two-sided 1 % (one-sided 0.5 %) column of the same ASTM E178 table, n = 3..10 (from memory;
# they agree with the formula given in the NIST/SEMATECH e-Handbook 1.3.5.17, checked below).
GRUBBS_99 = [1.1547, 1.4962, 1.7637, 1.9728, 2.1391, 2.2744, 2.3868, 2.4821]


@pytest.mark.parametrize(("n", "expected"), list(zip(range(3, 11), GRUBBS_95, strict=True)))
def test_grubbs_critical_95_matches_published_table(n: int, expected: float) -> None:
    # Source: Grubbs (1969) / ASTM E178. Tolerance is half a unit in the 4th decimal plus a hair,
    # because n = 4 evaluates to 1.481250 and tables round it either way.
    assert abs(stats.grubbs_critical(n, 0.05) - expected) <= 0.5e-4 + 1e-6


@pytest.mark.parametrize(("n", "expected"), list(zip(range(3, 11), GRUBBS_99, strict=True)))
def test_grubbs_critical_99_matches_published_table(n: int, expected: float) -> None:
    # Source: ASTM E178 Table 1, 0.5 % one-sided column (from memory, see above).
    assert abs(stats.grubbs_critical(n, 0.01) - expected) <= 0.5e-4 + 1e-6


@pytest.mark.parametrize("n", [3, 7, 25, 100])
def test_grubbs_critical_matches_formula_with_scipy_t(n: int) -> None:
    # Source: NIST/SEMATECH e-Handbook 1.3.5.17 formula, evaluated here with scipy.stats.t.ppf.
    alpha = 0.05
    t = scipy.stats.t.ppf(1 - alpha / (2 * n), n - 2)
    expected = (n - 1) / math.sqrt(n) * math.sqrt(t**2 / (n - 2 + t**2))
    assert stats.grubbs_critical(n, alpha) == pytest.approx(expected, rel=1e-12)


def test_grubbs_critical_rejects_small_n() -> None:
    with pytest.raises(InvalidInput):
        stats.grubbs_critical(2)


# Masses (g) of nine US pennies, the outlier example in Harvey, Analytical Chemistry 2.1,
# section 4.6 (from memory): Q = 0.882 > 0.493 and G = 2.64 > 2.215 for the 2.514 g penny.
PENNIES = [3.067, 2.514, 3.094, 3.049, 3.048, 3.109, 3.039, 3.079, 3.102]


def test_grubbs_flags_the_textbook_outlier() -> None:
    r = stats.grubbs(PENNIES, 0.05)
    # Independent computation: G by hand formula with the statistics module (exact arithmetic).
    mean, sd = statistics.fmean(PENNIES), statistics.stdev(PENNIES)
    g_by_hand = max(abs(v - mean) for v in PENNIES) / sd
    assert r.test == "grubbs" and r.applicable
    assert r.index == 1 and PENNIES[r.index] == 2.514
    assert r.statistic == pytest.approx(g_by_hand, rel=1e-12)
    assert r.statistic == pytest.approx(2.64, abs=0.005)  # Harvey 2.1 (from memory)
    assert r.critical == pytest.approx(2.2150, abs=1e-4)  # Grubbs (1969) / ASTM E178, n = 9
    assert r.outlier
    assert "2.514" in r.note and "replicate 2" in r.note


def test_grubbs_does_not_flag_consistent_replicates() -> None:
    r = stats.grubbs(MOLARITIES)
    mean, sd = statistics.fmean(MOLARITIES), statistics.stdev(MOLARITIES)
    deviations = [abs(v - mean) for v in MOLARITIES]
    # Independent computation by hand formula: most distant value is 0.10209 (index 2).
    assert r.index == deviations.index(max(deviations)) == 2
    assert r.statistic == pytest.approx(max(deviations) / sd, rel=1e-10)
    assert r.critical == pytest.approx(1.4812, abs=1e-4)  # Grubbs (1969) / ASTM E178, n = 4
    assert not r.outlier


def test_grubbs_reports_when_not_applicable() -> None:
    short = stats.grubbs([0.1021, 0.1023])
    assert not short.applicable and not short.outlier and short.index is None and "2" in short.note
    flat = stats.grubbs([0.1021] * 5)
    assert not flat.applicable and flat.statistic is None and "equal" in flat.note


# --------------------------------------------------------------------------- Dixon


def test_dixon_critical_reads_the_package_table() -> None:
    # Independent parse of the same file with numpy, compared with what the module returns.
    lines = [ln for ln in PACKAGE_CSV.read_text(encoding="utf-8").splitlines() if not ln.startswith("#")]
    table = np.genfromtxt(lines, delimiter=",", names=True)
    assert [int(n) for n in table["n"]] == list(range(3, 11))
    for row in table:
        n = int(row["n"])
        assert stats.dixon_critical(n, 0.90) == row["q90"]
        assert stats.dixon_critical(n, 0.95) == row["q95"]
        assert stats.dixon_critical(n, 0.99) == row["q99"]
    # Spot values of Rorabacher, Anal. Chem. 63 (1991) 139, Table II (from memory).
    assert stats.dixon_critical(3, 0.95) == 0.970
    assert stats.dixon_critical(10, 0.95) == 0.466
    assert stats.dixon_critical(5, 0.99) == 0.821


@pytest.mark.parametrize(("n", "confidence"), [(2, 0.95), (11, 0.95), (5, 0.975), (5, 0.5)])
def test_dixon_critical_rejects_values_outside_the_table(n: int, confidence: float) -> None:
    with pytest.raises(InvalidInput):
        stats.dixon_critical(n, confidence)


def _r10(samples: np.ndarray) -> np.ndarray:
    """Dixon r10 of each row, the larger of the two end gaps over the range (vectorized)."""
    x = np.sort(samples, axis=1)
    gaps = np.maximum(x[:, 1] - x[:, 0], x[:, -1] - x[:, -2])
    return gaps / (x[:, -1] - x[:, 0])


def test_dixon_table_independent_check_by_monte_carlo() -> None:
    """INDEPENDENT CHECK of the transcribed table: simulate r10 under normality.

    200 000 seeded normal samples per n; the 90/95/99 % quantiles of r10 must match the table
    within 0.01 (sampling error is about 0.001 at 95 %). Rorabacher's 99 % column sits up to about
    0.006 away from simulation for n = 4..7; a digit copied wrongly would be far larger.
    """
    rng = np.random.default_rng(20240611)
    for n in range(3, 11):
        q = _r10(rng.standard_normal((200_000, n)))
        for confidence in (0.90, 0.95, 0.99):
            simulated = float(np.quantile(q, confidence))
            assert abs(simulated - stats.dixon_critical(n, confidence)) < 0.01, (n, confidence, simulated)
        # The simulated statistic is the one dixon() computes.
        for row in rng.standard_normal((5, n)):
            assert stats.dixon(row.tolist()).statistic == pytest.approx(_r10(row[None, :])[0], rel=1e-12)


def test_dixon_flags_the_textbook_outlier() -> None:
    r = stats.dixon(PENNIES, 0.95)
    ordered = sorted(PENNIES)
    # Independent computation by hand: gap from the lowest value over the range.
    q_by_hand = (ordered[1] - ordered[0]) / (ordered[-1] - ordered[0])
    assert r.test == "dixon" and r.applicable and r.index == 1
    assert r.statistic == pytest.approx(q_by_hand, rel=1e-12)
    assert r.statistic == pytest.approx(0.882, abs=5e-4)  # Harvey 2.1 (from memory)
    assert r.critical == 0.493  # Rorabacher (1991) Table II, n = 9, 95 %
    assert r.outlier


def test_dixon_does_not_flag_consistent_replicates_and_picks_the_wider_gap() -> None:
    r = stats.dixon(MOLARITIES)
    # By hand: sorted 0.10209 0.10214 0.10218 0.10221; low gap 5e-5, high gap 3e-5, range 1.2e-4.
    assert r.index == 2
    assert r.statistic == pytest.approx((0.10214 - 0.10209) / (0.10221 - 0.10209), rel=1e-9)
    assert r.critical == 0.829  # Rorabacher (1991) Table II, n = 4, 95 %
    assert not r.outlier
    high = stats.dixon([10.0, 10.1, 10.2, 11.0])
    assert high.index == 3 and high.statistic == pytest.approx(0.8 / 1.0, rel=1e-12)


def test_dixon_reports_when_not_applicable() -> None:
    assert not stats.dixon([0.1, 0.2]).applicable
    eleven = stats.dixon([0.1 + i * 1e-4 for i in range(11)])
    assert not eleven.applicable and "10" in eleven.note
    flat = stats.dixon([0.1021] * 4)
    assert not flat.applicable and "equal" in flat.note
    with pytest.raises(InvalidInput):
        stats.dixon(MOLARITIES, confidence=0.975)


# --------------------------------------------------------------------------- screen


def test_screen_runs_both_tests_and_never_drops_a_value() -> None:
    values = list(PENNIES)
    results = stats.screen(values, 0.05)
    assert [r.test for r in results] == ["grubbs", "dixon"]
    assert all(r.outlier for r in results)
    assert values == PENNIES  # reports only; the input is untouched
    assert results[0] == stats.grubbs(PENNIES, 0.05)
    # Nine replicates: Dixon's r11 (Dixon 1953; Rorabacher 1991), not r10.
    assert results[1] == stats.dixon_recommended(PENNIES, 0.95)
    assert results[1].ratio == "r11" and results[1].index == 1


def test_screen_leaves_out_dixon_outside_its_table() -> None:
    assert [r.test for r in stats.screen([0.1 + i * 1e-4 for i in range(31)])] == ["grubbs"]
    two = stats.screen([0.1, 0.2])
    assert [r.test for r in two] == ["grubbs"] and not two[0].applicable
    odd_alpha = stats.screen(MOLARITIES, 0.02)
    assert [r.test for r in odd_alpha] == ["grubbs", "dixon"]
    assert odd_alpha[0].applicable and not odd_alpha[1].applicable


# --------------------------------------------------------------------------- judge


def _summary(n: int, rsd: float | None) -> Summary:
    sd = None if rsd is None else rsd * 0.1
    return Summary(n=n, mean=0.1, sd=sd, rsd=rsd, sem=None, ci_low=None, ci_high=None, confidence=0.95, t=None)


def test_judge_rsd_boundary() -> None:
    # Limit 0.2 % (Ph. Eur./BP general text on volumetric solutions; "not more than", so the limit
    # itself passes — wording from memory).
    rule = AcceptanceRule()
    assert (rule.min_n, rule.max_rsd) == (3, 0.002)
    assert stats.judge(_summary(3, 0.002), rule).accepted
    over = stats.judge(_summary(3, 0.0020001), rule)
    assert not over.accepted and over.reasons == ("RSD 0.20001 % exceeds the limit of 0.20000 %",)
    clear = stats.judge(_summary(5, 0.0031), rule)
    assert clear.reasons == ("RSD 0.31 % exceeds the limit of 0.20 %",)


def test_judge_replicate_count_boundary() -> None:
    # At least three replicates (EDQM guidance on Ph. Eur. volumetric solutions).
    rule = AcceptanceRule()
    assert stats.judge(_summary(3, 0.0005), rule) == stats.Verdict(True, ())
    two = stats.judge(_summary(2, 0.0005), rule)
    assert not two.accepted and two.reasons == ("only 2 replicates; at least 3 are needed",)
    one = stats.judge(_summary(1, None), rule)
    assert one.reasons == ("only 1 replicate; at least 3 are needed",)
    both = stats.judge(_summary(2, 0.004), rule)
    assert len(both.reasons) == 2 and not both.accepted


def test_judge_on_real_summaries() -> None:
    good = stats.judge(stats.summarize(MOLARITIES), AcceptanceRule())
    assert good.accepted  # RSD ≈ 0.051 % by the numpy check above
    # Invented bad run: 0.10214 / 0.10290 / 0.10240 gives RSD ≈ 0.38 % (by statistics.stdev below).
    bad_values = [0.10214, 0.10290, 0.10240]
    rsd = statistics.stdev(bad_values) / statistics.fmean(bad_values)
    bad = stats.judge(stats.summarize(bad_values), AcceptanceRule())
    assert bad.reasons == (f"RSD {rsd * 100:.2f} % exceeds the limit of 0.20 %",)
    assert stats.judge(stats.summarize([-1.0, 1.0]), AcceptanceRule(min_n=2)).accepted is False
    assert not stats.judge(stats.summarize([0.1]), AcceptanceRule(min_n=1)).accepted


@pytest.mark.parametrize(("min_n", "max_rsd"), [(0, 0.002), (3, 0.0), (3, -0.01), (2.5, 0.002)])
def test_acceptance_rule_rejects_nonsense(min_n: int, max_rsd: float) -> None:
    with pytest.raises(InvalidInput):
        AcceptanceRule(min_n=min_n, max_rsd=max_rsd)


# --------------------------------------------------------------------------- properties

_positive = st.floats(min_value=0.01, max_value=100.0, allow_nan=False, allow_infinity=False)
_signed = st.floats(min_value=-100.0, max_value=100.0, allow_nan=False, allow_infinity=False)


def _spread_ok(values: list[float]) -> bool:
    """Exclude near-constant sets, where rounding dominates any relative comparison."""
    return max(values) - min(values) > 1e-6 * max(abs(v) for v in values)


@settings(max_examples=60, deadline=None)
@given(values=st.lists(_signed, min_size=3, max_size=12), data=st.data())
def test_permutation_changes_nothing(values: list[float], data: st.DataObject) -> None:
    shuffled = data.draw(st.permutations(values))
    a, b = stats.summarize(values), stats.summarize(shuffled)
    # Exactly rounded sums make the summary order-independent to the last bit.
    assert (a.mean, a.sd, a.ci_low, a.ci_high) == (b.mean, b.sd, b.ci_low, b.ci_high)
    assert stats.grubbs(values).statistic == stats.grubbs(shuffled).statistic
    if len(values) <= 10:
        assert stats.dixon(values).statistic == stats.dixon(shuffled).statistic


@settings(max_examples=60, deadline=None)
@given(values=st.lists(_positive, min_size=3, max_size=10), factor=st.floats(min_value=1e-3, max_value=1e3, allow_nan=False))
def test_positive_scaling_keeps_rsd_and_test_statistics(values: list[float], factor: float) -> None:
    assume(_spread_ok(values))
    scaled = [v * factor for v in values]
    assert stats.summarize(scaled).rsd == pytest.approx(stats.summarize(values).rsd, rel=1e-9)
    assert stats.grubbs(scaled).statistic == pytest.approx(stats.grubbs(values).statistic, rel=1e-8)
    assert stats.dixon(scaled).statistic == pytest.approx(stats.dixon(values).statistic, abs=1e-8)


@settings(max_examples=60, deadline=None)
@given(values=st.lists(_signed, min_size=2, max_size=12), shift=st.floats(min_value=-1e3, max_value=1e3, allow_nan=False))
def test_shift_leaves_sd_unchanged(values: list[float], shift: float) -> None:
    sd = stats.summarize(values).sd
    shifted = stats.summarize([v + shift for v in values]).sd
    assert sd is not None and shifted is not None
    # Adding the shift rounds each value by at most ~1e-13 here, which bounds the change in s.
    assert shifted == pytest.approx(sd, rel=1e-9, abs=1e-11)


@settings(max_examples=60, deadline=None)
@given(values=st.lists(_signed, min_size=3, max_size=12))
def test_grubbs_statistic_never_exceeds_its_bound(values: list[float]) -> None:
    # G <= (n − 1)/√n for any sample (Shiffler, Am. Stat. 42 (1988) 79 — from memory).
    r = stats.grubbs(values)
    assume(r.applicable)
    n = len(values)
    assert r.statistic is not None and r.statistic <= (n - 1) / math.sqrt(n) * (1 + 1e-12)


# --------------------------------------------------------------------------- Dixon's ratio by n


@pytest.mark.parametrize(
    ("n", "ratio"),
    [(3, "r10"), (7, "r10"), (8, "r11"), (10, "r11"), (11, "r21"), (13, "r21"), (14, "r22"), (30, "r22")],
)
def test_dixon_ratio_recommended_for_n(n: int, ratio: str) -> None:
    # Dixon (1953) as Rorabacher (1991) restates it: r10 for 3-7, r11 for 8-10, r21 for 11-13, r22 for 14+.
    assert stats.dixon_ratio_for(n) == ratio
    assert stats.dixon_ratio_critical(n, 0.95)[0] == ratio


def test_dixon_r10_rows_are_rorabachers() -> None:
    # Rorabacher, Anal. Chem. 63 (1991) 139, Table II, 95 %: 0.970 0.829 0.710 0.625 0.568 for n = 3-7.
    assert [stats.dixon_ratio_critical(n, 0.95)[1] for n in range(3, 8)] == [0.970, 0.829, 0.710, 0.625, 0.568]


def _dixon_mc(n: int, ratio: str, draws: int, rng: np.random.Generator) -> np.ndarray:
    s = np.sort(rng.standard_normal((draws, n)), axis=1)
    gap_i, drop_j = {"r10": (1, 0), "r11": (1, 1), "r21": (2, 1), "r22": (2, 2)}[ratio]
    low = (s[:, gap_i] - s[:, 0]) / (s[:, n - 1 - drop_j] - s[:, 0])
    high = (s[:, -1] - s[:, n - 1 - gap_i]) / (s[:, -1] - s[:, drop_j])
    return np.maximum(low, high)


@pytest.mark.parametrize("n", [8, 10, 11, 13, 14, 20, 30])
def test_dixon_higher_ratio_critical_values_by_independent_monte_carlo(n: int) -> None:
    # Independent check with another seed and fewer draws than the table was made with: the 95 % and 99 %
    # quantiles of the statistic for normal samples agree within 0.01.
    rng = np.random.default_rng(1000 + n)
    ratio, _ = stats.dixon_ratio_critical(n, 0.95)
    q = _dixon_mc(n, ratio, 200_000, rng)
    for conf in (0.95, 0.99):
        assert abs(np.quantile(q, conf) - stats.dixon_ratio_critical(n, conf)[1]) < 0.01


def test_dixon_recommended_uses_the_ratio_and_names_the_replicate() -> None:
    # r11 on nine values: the low value 2.514 against the range without the highest (hand computation:
    # (3.039 − 2.514)/(3.102 − 2.514) = 0.8929).
    r = stats.dixon_recommended(PENNIES, 0.95)  # n = 9
    assert r.ratio == "r11" and r.index == 1 and r.outlier and r.verdict == "outlier"
    assert r.statistic == pytest.approx((3.039 - 2.514) / (3.102 - 2.514), rel=1e-12)
    # r11 at the high end: the gap to the neighbour over the range without the lowest value (Dixon 1953).
    masked = [10.0, 10.01, 10.02, 10.03, 10.02, 10.01, 11.0, 11.1]
    m = stats.dixon_recommended(masked, 0.95)
    assert m.ratio == "r11" and m.statistic == pytest.approx((11.1 - 11.0) / (11.1 - 10.01), rel=1e-12)


def test_screen_cannot_judge_three_replicates() -> None:
    # Common practice (and Grubbs' own bound): with n = 3 G cannot exceed (n − 1)/√n = 1.1547 while
    # G_crit(3, 0.05) = 1.1531 (NIST/SEMATECH 1.3.5.17 table), so a "flag" says nothing.
    results = stats.screen([0.1021, 0.1022, 0.1040])
    assert [r.verdict for r in results] == ["cannot judge", "cannot judge"]
    assert not any(r.outlier for r in results) and not any(r.applicable for r in results)
    assert all("fourth replicate" in r.note for r in results)
    assert results[0].statistic is not None  # kept for the record
    four = stats.screen([0.1021, 0.1022, 0.1021, 0.1040])
    assert four[0].verdict in ("outlier", "no outlier")
