"""The straight-line fit against scipy/statsmodels, and the strong-but-not-straight rule."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from sitebuild.stats.correlation import pearson
from sitebuild.stats.curvature import curvature_check, straight_line, strong_but_not_straight

# Anscombe (1973), The American Statistician 27(1): the quartet, typed in from the paper.
X = [10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5]
ANSCOMBE = {
    "I": (X, [8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68]),
    "II": (X, [9.14, 8.14, 8.74, 8.77, 9.26, 8.10, 6.13, 3.10, 9.13, 7.26, 4.74]),
    "III": (X, [7.46, 6.77, 12.74, 7.11, 7.81, 8.84, 6.08, 5.39, 8.15, 6.42, 5.73]),
    "IV": (
        [8, 8, 8, 8, 8, 8, 8, 19, 8, 8, 8],
        [6.58, 5.76, 7.71, 8.84, 8.47, 7.04, 5.25, 12.50, 5.56, 7.91, 6.89],
    ),
}


def test_straight_line_matches_scipy_linregress_and_statsmodels_interval():
    rng = np.random.default_rng(4)
    x = rng.uniform(0, 5, 60)
    y = 1.5 - 0.7 * x + rng.normal(0, 1, 60)
    ours = straight_line(x, y, level=0.9)
    ref = stats.linregress(x, y)  # reference library: scipy.stats
    assert ours.slope == pytest.approx(ref.slope, rel=1e-12)
    assert ours.intercept == pytest.approx(ref.intercept, rel=1e-12)
    assert ours.slope_se == pytest.approx(ref.stderr, rel=1e-10)
    assert ours.p == pytest.approx(ref.pvalue, rel=1e-8)
    assert ours.r2 == pytest.approx(ref.rvalue**2, rel=1e-12)
    ols = sm.OLS(y, sm.add_constant(x)).fit()  # reference library: statsmodels OLS
    low, high = ols.conf_int(alpha=0.1)[1]
    assert ours.slope_low == pytest.approx(low, rel=1e-10)
    assert ours.slope_high == pytest.approx(high, rel=1e-10)


def test_anscombe_set_two_is_flagged_curved_and_sets_one_and_three_are_not():
    # Anscombe (1973): set II is an exact curve (a parabola), I is a noisy line, III is a line
    # with one outlier, all with r = 0.816 (three decimals from memory).
    flags = {name: strong_but_not_straight(x, y).curved for name, (x, y) in ANSCOMBE.items()}
    assert flags == {"I": False, "II": True, "III": False, "IV": False}
    # Set IV: x takes two values, so no smooth can be fitted; it says why.
    assert strong_but_not_straight(*ANSCOMBE["IV"]).reason


@pytest.mark.parametrize("seed", range(5))
@pytest.mark.parametrize("noise", [0.2, 1.0, 3.0])
def test_noisy_straight_lines_are_not_flagged(seed, noise):
    rng = np.random.default_rng(seed)
    x = rng.uniform(0, 10, 200)
    y = 2.0 + 0.8 * x + rng.normal(0, noise, 200)
    assert not strong_but_not_straight(x, y).curved


def test_u_shape_with_zero_correlation_is_flagged():
    rng = np.random.default_rng(1)
    x = rng.uniform(-1, 1, 300)
    y = x**2 + rng.normal(0, 0.05, 300)
    assert abs(pearson(x, y).r) < 0.1
    check = strong_but_not_straight(x, y)  # default span 0.75, degree 1
    assert check.curved and check.linear_r2 < 0.01 and check.smooth_adj_r2 > 0.8


def test_periodic_relationship_with_zero_correlation_is_flagged_with_auto_span():
    rng = np.random.default_rng(2)
    x = rng.uniform(0, 2 * np.pi, 400)
    y = np.cos(2 * x) + rng.normal(0, 0.2, 400)
    assert abs(pearson(x, y).r) < 0.1
    assert strong_but_not_straight(x, y, span="auto").curved


def test_rule_charges_the_smooth_for_its_degrees_of_freedom():
    # Same raw R² gain; with few residual degrees of freedom the adjusted gain vanishes.
    assert curvature_check(0.3, 0.75, 200, 190.0).curved
    assert not curvature_check(0.3, 0.75, 12, 4.0).curved
    assert curvature_check(None, 0.9, 10, 5.0).reason


@pytest.mark.slow
def test_false_alarm_rate_on_pure_noise_is_small(record_property):
    # Simulation (ours): x and y independent, so every flag is a false alarm.
    rng = np.random.default_rng(20261201)
    rates = {}
    for n in (10, 30, 100):
        fires = sum(
            strong_but_not_straight(rng.uniform(0, 1, n), rng.normal(0, 1, n)).curved
            for _ in range(600)
        )
        rates[n] = fires / 600
    record_property("false_alarm_rates", rates)
    print(f"false-alarm rate on pure noise by n: {rates}")
    assert rates[30] <= 0.01 and rates[100] <= 0.005
    assert rates[10] <= 0.02  # measured 0.003 with the F-test of the gain (0.05 without)


def test_gain_test_matches_statsmodels_nested_f_test():
    # Reference: statsmodels' compare_f_test of a straight line nested in a quadratic; with the
    # quadratic standing in for the smooth (residual df n - 3), gain_p is the same F-test.
    import statsmodels.api as sm

    from sitebuild.stats.curvature import gain_p

    rng = np.random.default_rng(3)
    x = rng.uniform(0, 1, 40)
    y = 1 + x + 0.8 * (x - 0.5) ** 2 + rng.normal(0, 0.2, 40)
    line = sm.OLS(y, sm.add_constant(x)).fit()
    quad = sm.OLS(y, sm.add_constant(np.column_stack([x, x**2]))).fit()
    _, p_ref, _ = quad.compare_f_test(line)
    assert gain_p(line.rsquared, quad.rsquared, 40, 37.0) == pytest.approx(p_ref, rel=1e-9)
