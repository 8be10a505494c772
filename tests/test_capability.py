"""Share outside spec limits and capability indices, against outside references.

References: statsmodels ``proportion_confint(method="wilson")``; the published formulas of
Kane (1986) for Cp/Cpk and its chi-square interval and of Bissell (1990) for the Cpk interval,
computed independently here; a textbook worked example recalled from memory.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.stats.proportion as proportion
from scipy import stats

from sitebuild.stats.capability import capability, wilson_interval


@pytest.mark.parametrize(
    ("count", "n", "confidence"),
    [(0, 20, 0.95), (3, 50, 0.95), (17, 40, 0.90), (40, 40, 0.99), (1, 1_000_000, 0.95)],
)
def test_wilson_interval_matches_statsmodels(count, n, confidence):
    # Source: statsmodels proportion_confint(method="wilson") on the same counts.
    low, high = proportion.proportion_confint(count, n, alpha=1 - confidence, method="wilson")
    got = wilson_interval(count, n, confidence)
    assert got == pytest.approx((low, high), rel=1e-9, abs=1e-12)


def test_indices_match_the_published_formulas_on_seeded_values():
    # Source: Kane (1986) Cp = (USL - LSL) / 6s and Cpk = min(USL - mean, mean - LSL) / 3s, Cp's
    # chi-square interval; Bissell (1990) Cpk ± z sqrt(1/(9n) + Cpk²/(2(n-1))). Written out
    # here from the formulas, separately from the module's code.
    rng = np.random.default_rng(20261201)
    values = rng.normal(10.08, 0.14, 85)
    lsl, usl = 9.6, 10.5
    n, mean, sd = values.size, values.mean(), values.std(ddof=1)
    below, above = int((values < lsl).sum()), int((values > usl).sum())
    got = capability(n, mean, sd, below, above, lsl, usl, 0.95)
    cp = (usl - lsl) / (6 * sd)
    cpk = min(usl - mean, mean - lsl) / (3 * sd)
    z = stats.norm.ppf(0.975)
    half = z * math.sqrt(1 / (9 * n) + cpk**2 / (2 * (n - 1)))
    assert got.cp == pytest.approx(cp, rel=1e-12)
    assert got.cpk == pytest.approx(cpk, rel=1e-12)
    assert (got.cpk_low, got.cpk_high) == pytest.approx((cpk - half, cpk + half), rel=1e-12)
    chi_low, chi_high = stats.chi2.ppf([0.025, 0.975], n - 1)
    assert got.cp_low == pytest.approx(cp * math.sqrt(chi_low / (n - 1)), rel=1e-12)
    assert got.cp_high == pytest.approx(cp * math.sqrt(chi_high / (n - 1)), rel=1e-12)
    assert got.share_outside == pytest.approx((below + above) / n)


def test_cpk_interval_of_the_textbook_example():
    # Worked example from memory (Montgomery, Introduction to Statistical Quality Control:
    # n = 20, Cpk = 1.33 gives the 95% interval about 0.88 to 1.78 by Bissell's formula; the
    # same n and Cp = 1.33 give about 0.91 to 1.75 from the chi-square distribution).
    sd = 1.0
    lsl, usl = -3.99, 3.99  # Cp = Cpk = 1.33 with the mean centred at 0
    got = capability(20, 0.0, sd, 0, 0, lsl, usl, 0.95)
    assert got.cpk == pytest.approx(1.33)
    assert (got.cpk_low, got.cpk_high) == pytest.approx((0.88, 1.78), abs=0.01)
    assert (got.cp_low, got.cp_high) == pytest.approx((0.91, 1.75), abs=0.01)


def test_one_sided_limit_gives_cpk_but_no_cp():
    got = capability(30, 8.0, 0.5, 0, 2, None, 9.0, 0.95)
    assert math.isnan(got.cp)
    assert got.cpk == pytest.approx((9.0 - 8.0) / 1.5)  # Cpu alone
    assert got.below == 0 and got.above == 2


def test_no_spread_leaves_indices_undefined():
    got = capability(5, 10.0, 0.0, 0, 0, 9.0, 11.0)
    assert math.isnan(got.cpk) and math.isnan(got.cp)
    assert got.share_outside == 0.0
