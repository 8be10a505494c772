"""Omnibus tests against certified values (NIST StRD) and general-purpose libraries."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from sitebuild.stats.omnibus import kruskal_wallis, one_way_anova, spread_test, welch_anova


def _lre(value: float, certified: float) -> float:
    """Log relative error: the number of correct significant digits (NIST's accuracy measure)."""
    if value == certified:
        return 15.0
    return float(-np.log10(abs(value - certified) / abs(certified)))


# NIST StRD one-way ANOVA, SiRstv (Ehrstein & Croarkin, silicon resistivity, 5 instruments x 5),
# data and certified values as published by NIST (lower difficulty, 3 constant leading digits).
SIRSTV = [
    [196.3052, 196.1240, 196.1890, 196.2569, 196.3403],
    [196.3042, 196.3825, 196.1669, 196.3257, 196.0422],
    [196.1303, 196.2005, 196.2889, 196.0343, 196.1811],
    [196.2795, 196.1748, 196.1494, 196.1485, 195.9885],
    [196.2119, 196.1051, 196.1850, 196.0052, 196.2090],
]
SIRSTV_CERTIFIED = {
    "ss_between": 5.11462616000000e-02,
    "ss_within": 2.16636560000000e-01,
    "ms_between": 1.27865654000000e-02,
    "ms_within": 1.08318280000000e-02,
    "f": 1.18046237440255e00,
    "r2": 1.90999039051129e-01,
    "resid_sd": 1.04076068334656e-01,
}

# NIST StRD AtmWtAg (Powell, Murphy & Gramlich, atomic weight of silver, 2 instruments x 24),
# average difficulty (7 constant leading digits).
ATMWTAG = [
    [107.8681568, 107.8681465, 107.8681572, 107.8681785, 107.8681446, 107.8681903,
     107.8681526, 107.8681494, 107.8681616, 107.8681587, 107.8681519, 107.8681486,
     107.8681419, 107.8681569, 107.8681508, 107.8681672, 107.8681385, 107.8681518,
     107.8681662, 107.8681424, 107.8681360, 107.8681333, 107.8681610, 107.8681477],
    [107.8681079, 107.8681344, 107.8681513, 107.8681197, 107.8681604, 107.8681385,
     107.8681642, 107.8681365, 107.8681151, 107.8681082, 107.8681517, 107.8681448,
     107.8681198, 107.8681482, 107.8681334, 107.8681609, 107.8681101, 107.8681512,
     107.8681469, 107.8681360, 107.8681254, 107.8681261, 107.8681450, 107.8681368],
]  # fmt: skip
ATMWTAG_CERTIFIED = {
    "ss_between": 3.63834187500000e-09,
    "ss_within": 1.04951729166667e-08,
    "ms_between": 3.63834187500000e-09,
    "ms_within": 2.28155932971014e-10,
    "f": 1.59467335677930e01,
    "r2": 2.57426544538321e-01,
    "resid_sd": 1.51048314446410e-05,
}


# Certified values shared by each difficulty level (NIST StRD SmLs01/04/07, 02/05/08, 03/06/09).
SMLS_CERTIFIED = {
    21: {"ss_between": 1.68, "ss_within": 1.80, "f": 21.0, "r2": 4.82758620689655e-01, "df2": 180},
    201: {
        "ss_between": 16.08,
        "ss_within": 18.0,
        "f": 201.0,
        "r2": 4.71830985915493e-01,
        "df2": 1800,
    },
    2001: {
        "ss_between": 160.08,
        "ss_within": 180.0,
        "f": 2001.0,
        "r2": 4.70712773465067e-01,
        "df2": 18000,
    },
}
# Digits attainable in double precision: the data themselves carry representation error of about
# ulp(offset) on deviations of 0.1 — 1e-16 for no offset, ~1e-10 for 1e6 and ~1e-4 for 1e12 — so
# the achievable LRE is about 13, 9 and 3 digits (we ask for one digit less than that ceiling).
SMLS_DIGITS = {"": 12.0, "1000000": 8.0, "1000000000000": 3.0}


def test_anova_matches_nist_sirstv_certified_values():
    # Source: NIST StRD one-way ANOVA, dataset SiRstv (certified to 15 digits).
    r = one_way_anova([np.array(g) for g in SIRSTV])
    c = SIRSTV_CERTIFIED
    assert (r.df1, r.df2) == (4, 20)
    for value, key in [
        (r.ss_between, "ss_between"),
        (r.ss_within, "ss_within"),
        (r.ms_between, "ms_between"),
        (r.ms_within, "ms_within"),
        (r.statistic, "f"),
        (r.r_squared, "r2"),
        (r.residual_sd, "resid_sd"),
    ]:
        assert _lre(value, c[key]) >= 10.0, key


def test_anova_matches_nist_atmwtag_certified_values():
    # Source: NIST StRD one-way ANOVA, dataset AtmWtAg (average difficulty).
    r = one_way_anova([np.array(g) for g in ATMWTAG])
    c = ATMWTAG_CERTIFIED
    assert (r.df1, r.df2) == (1, 46)
    for value, key in [
        (r.ss_between, "ss_between"),
        (r.ss_within, "ss_within"),
        (r.statistic, "f"),
        (r.r_squared, "r2"),
        (r.residual_sd, "resid_sd"),
    ]:
        assert _lre(value, c[key]) >= 8.0, key


@pytest.mark.parametrize("per_group", [21, 201, 2001])
@pytest.mark.parametrize("offset", ["", "1000000", "1000000000000"])
def test_anova_matches_nist_smls_certified_values(offset, per_group):
    # Source: NIST StRD SmLs01-09 (offset '' = SmLs01-03, 1e6 = SmLs04-06, 1e12 = SmLs07-09);
    # data generated from the published structure, certified values as published.
    if offset == "":
        groups = [
            np.array([float(f"{d / 10:.1f}") for d in _digits(c, per_group)]) for c in _centres()
        ]
    else:
        groups = [
            np.array([float(f"{offset}.{d % 10}") for d in _digits(c, per_group)])
            for c in _centres()
        ]
    cert = SMLS_CERTIFIED[per_group]
    r = one_way_anova(groups)
    assert (r.df1, r.df2) == (8, cert["df2"])
    digits = SMLS_DIGITS[offset]
    assert _lre(r.ss_between, cert["ss_between"]) >= digits
    assert _lre(r.ss_within, cert["ss_within"]) >= digits
    assert _lre(r.statistic, cert["f"]) >= digits
    assert _lre(r.r_squared, cert["r2"]) >= digits
    assert _lre(r.residual_sd, 0.1) >= digits


def _centres() -> list[int]:
    return [14, 13, 15, 13, 15, 13, 15, 13, 15]


def _digits(centre: int, per_group: int) -> list[int]:
    # One value at the centre, then centre − 1 and centre + 1 alternately (in tenths).
    return [centre] + [centre - 1 if i % 2 == 0 else centre + 1 for i in range(per_group - 1)]


def test_smls_generator_reproduces_the_published_first_values():
    # Source: NIST StRD SmLs07 lists treatment 1 as 1000000000000.4, .3, .5, .3, .5, ...
    first = [float(f"1000000000000.{d % 10}") for d in _digits(14, 5)]
    assert first == [
        1000000000000.4,
        1000000000000.3,
        1000000000000.5,
        1000000000000.3,
        1000000000000.5,
    ]


def test_anova_agrees_with_scipy_f_oneway():
    # Reference: scipy.stats.f_oneway on the same data.
    rng = np.random.default_rng(11)
    groups = [rng.normal(i * 0.3, 1 + i * 0.2, 15 + 3 * i) for i in range(5)]
    r = one_way_anova(groups)
    ref = stats.f_oneway(*groups)
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-10)


def test_omega_and_eta_squared_follow_their_definitions():
    # Direct formula evaluation (Hays 1963 for omega²): SS from NIST SiRstv certified values.
    r = one_way_anova([np.array(g) for g in SIRSTV])
    c = SIRSTV_CERTIFIED
    total = c["ss_between"] + c["ss_within"]
    assert r.eta_squared == pytest.approx(c["ss_between"] / total, rel=1e-9)
    omega = (c["ss_between"] - 4 * c["ms_within"]) / (total + c["ms_within"])
    assert r.omega_squared == pytest.approx(omega, rel=1e-8)


def test_welch_anova_matches_statsmodels_anova_oneway():
    # Reference: statsmodels.stats.oneway.anova_oneway(use_var="unequal", welch_correction=True).
    from statsmodels.stats.oneway import anova_oneway

    rng = np.random.default_rng(3)
    groups = [rng.normal(0, 1, 12), rng.normal(0.5, 2.5, 20), rng.normal(1.0, 0.5, 8)]
    r = welch_anova(groups)
    ref = anova_oneway(groups, use_var="unequal", welch_correction=True)
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert r.df1 == pytest.approx(ref.df[0])
    assert r.df2 == pytest.approx(ref.df[1], rel=1e-10)
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-8)


def test_welch_anova_matches_pingouin():
    # Reference: pingouin.welch_anova on the same data (a second independent implementation).
    import pandas as pd
    import pingouin as pg

    rng = np.random.default_rng(8)
    groups = [rng.normal(i, 1 + i, 10 + 5 * i) for i in range(4)]
    frame = pd.DataFrame(
        {"y": np.concatenate(groups), "g": np.repeat(list("abcd"), [len(g) for g in groups])}
    )
    ref = pg.welch_anova(data=frame, dv="y", between="g")
    r = welch_anova(groups)
    assert r.statistic == pytest.approx(float(ref["F"].iloc[0]), rel=1e-9)
    assert r.df2 == pytest.approx(float(ref["ddof2"].iloc[0]), rel=1e-9)


def test_welch_anova_stays_precise_with_constant_leading_digits():
    # Welch's F is invariant to a shift; NIST SmLs07-style offsets must not change it
    # beyond the data's own representation error (~1e-4 relative at 1e12, see SMLS_DIGITS).
    rng = np.random.default_rng(5)
    groups = [np.round(rng.normal(0, 1 + i, 30), 1) for i in range(3)]
    base = welch_anova(groups).statistic
    shifted = welch_anova([g + 1e6 for g in groups]).statistic
    assert _lre(shifted, base) >= 8.0


def test_kruskal_wallis_matches_scipy_with_ties():
    # Reference: scipy.stats.kruskal (tie-corrected H).
    rng = np.random.default_rng(2)
    groups = [rng.integers(0, 6, 14).astype(float) + i * 0.5 for i in range(4)]
    r = kruskal_wallis(groups)
    ref = stats.kruskal(*groups)
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-10)
    assert r.epsilon_squared == pytest.approx(r.statistic / (sum(map(len, groups)) - 1))


def test_kruskal_wallis_accepts_precomputed_ranks():
    # Reference: scipy.stats.kruskal; ranks computed once by scipy.stats.rankdata.
    rng = np.random.default_rng(4)
    groups = [rng.normal(i * 0.2, 1, 25) for i in range(3)]
    ranks = stats.rankdata(np.concatenate(groups))
    split = np.split(ranks, np.cumsum([len(g) for g in groups])[:-1])
    assert kruskal_wallis(groups, ranks=split).statistic == pytest.approx(
        stats.kruskal(*groups).statistic
    )


@pytest.mark.parametrize("center", ["median", "mean"])
def test_spread_test_matches_scipy_levene(center):
    # Reference: scipy.stats.levene (center="median" is Brown–Forsythe).
    rng = np.random.default_rng(9)
    groups = [rng.normal(0, 1 + i, 20 + i) for i in range(4)]
    r = spread_test(groups, center=center)
    ref = stats.levene(*groups, center=center)
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def _smls_groups(offset: str, per_group: int) -> list[np.ndarray]:
    """NIST StRD SmLs data as parsed doubles (offset '' = SmLs01-03, 1e6 = 04-06, 1e12 = 07-09)."""
    if offset == "":
        return [
            np.array([float(f"{d / 10:.1f}") for d in _digits(c, per_group)]) for c in _centres()
        ]
    return [
        np.array([float(f"{offset}.{d % 10}") for d in _digits(c, per_group)]) for c in _centres()
    ]


def _exact_anova_f(groups: list[np.ndarray]) -> Fraction:
    """One-way ANOVA F in exact rational arithmetic on the doubles as stored (no rounding)."""
    exact = [[Fraction(float(v)) for v in g] for g in groups]
    n = sum(len(g) for g in exact)
    k = len(exact)
    means = [sum(g) / len(g) for g in exact]
    grand = sum(sum(g) for g in exact) / n
    between = sum(len(g) * (m - grand) ** 2 for g, m in zip(exact, means, strict=True))
    within = sum(sum((v - m) ** 2 for v in g) for g, m in zip(exact, means, strict=True))
    return (between / (k - 1)) / (within / (n - k))


def _exact_welch_f(groups: list[np.ndarray]) -> Fraction:
    """Welch's F (Welch 1951) in exact rational arithmetic on the doubles as stored."""
    exact = [[Fraction(float(v)) for v in g] for g in groups]
    k = len(exact)
    ns = [len(g) for g in exact]
    means = [sum(g) / len(g) for g in exact]
    variances = [
        sum((v - m) ** 2 for v in g) / (len(g) - 1) for g, m in zip(exact, means, strict=True)
    ]
    w = [n / v for n, v in zip(ns, variances, strict=True)]
    big_w = sum(w)
    centre = sum(wi * m for wi, m in zip(w, means, strict=True)) / big_w
    a = sum(wi * (m - centre) ** 2 for wi, m in zip(w, means, strict=True)) / (k - 1)
    h = sum((1 - wi / big_w) ** 2 / (n - 1) for wi, n in zip(w, ns, strict=True))
    return a / (1 + Fraction(2 * (k - 2), k * k - 1) * h)


@pytest.mark.parametrize("per_group", [21, 201, 2001])
@pytest.mark.parametrize("offset", ["", "1000000"])
def test_anova_f_is_certified_21_201_2001_on_smls01_to_06(offset, per_group):
    # Source: NIST StRD SmLs01-06, certified F = 21, 201, 2001 (exact); within 1e-9 relative.
    r = one_way_anova(_smls_groups(offset, per_group))
    assert r.statistic == pytest.approx(SMLS_CERTIFIED[per_group]["f"], rel=1e-9)


@pytest.mark.parametrize("per_group", [21, 201, 2001])
def test_anova_and_welch_f_match_exact_arithmetic_on_smls07_to_09(per_group):
    # Source: NIST StRD SmLs07-09 (values near 1e12). Parsed to doubles the data carry
    # representation error (~1e-4 of their spread), so the certified F = 21 is not attainable;
    # the reference is the exact rational F of the parsed doubles (fractions.Fraction).
    # Before the pivot shift, SmLs07 gave F = 20.98860 against the exact 21.00081 (5.8e-4).
    groups = _smls_groups("1000000000000", per_group)
    assert one_way_anova(groups).statistic == pytest.approx(
        float(_exact_anova_f(groups)), rel=1e-12
    )
    if per_group <= 201:  # the exact Welch sums on 18,009 values take too long for a unit test
        assert welch_anova(groups).statistic == pytest.approx(
            float(_exact_welch_f(groups)), rel=1e-12
        )
    # scipy.stats.f_oneway centres the data too: it agrees.
    assert one_way_anova(groups).statistic == pytest.approx(
        stats.f_oneway(*groups).statistic, rel=1e-12
    )


def test_groups_far_apart_keep_their_own_spread():
    # Reference: scipy.stats.f_oneway and statsmodels anova_oneway (Welch) on the same data.
    # A common pivot must not round away a group's spread: here the pivot lies near -5e69,
    # where 0 and 1.9 are the same double (found by the random-table property test).
    from statsmodels.stats.oneway import anova_oneway

    groups = [np.array([0.0] * 17 + [1.9]), np.array([0.0, -1e70])]
    assert one_way_anova(groups).statistic == pytest.approx(
        stats.f_oneway(*groups).statistic, rel=1e-9
    )
    ref = anova_oneway(groups, use_var="unequal", welch_correction=True)
    assert welch_anova(groups).statistic == pytest.approx(ref.statistic, rel=1e-9)
