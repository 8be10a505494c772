"""Comparisons from moments (n, mean, variance per group) against scipy, statsmodels and
pingouin on the same data, and against the array versions they share their formulas with."""

import numpy as np
import pytest
from scipy import stats

from sitebuild.stats import from_moments as fm
from sitebuild.stats.omnibus import welch_anova


def _groups():
    rng = np.random.default_rng(20261201)
    # Unequal sizes, spreads and a large common offset (precision of centred moments).
    return [
        1000.0 + rng.normal(0.0, 1.0, 40),
        1000.3 + rng.normal(0.0, 2.5, 55),
        1001.0 + rng.normal(0.0, 1.5, 33),
        1000.1 + rng.gamma(2.0, 1.0, 61),
    ]


def _stats(groups):
    ns = [g.size for g in groups]
    means = [float(np.mean(g)) for g in groups]
    variances = [float(np.var(g, ddof=1)) for g in groups]
    return ns, means, variances


def test_welch_t_from_stats_matches_scipy_ttest_ind_from_stats():
    # Reference: scipy.stats.ttest_ind_from_stats(equal_var=False) and, for the interval,
    # scipy.stats.ttest_ind(equal_var=False).confidence_interval() on the same data.
    a, b = _groups()[:2]
    (n1, n2), (m1, m2), (v1, v2) = _stats([a, b])
    got = fm.welch_t_from_stats(n1, m1, v1, n2, m2, v2, confidence=0.9)
    ref = stats.ttest_ind_from_stats(m1, np.sqrt(v1), n1, m2, np.sqrt(v2), n2, equal_var=False)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    ci = stats.ttest_ind(a, b, equal_var=False).confidence_interval(0.9)
    assert (got.ci_low, got.ci_high) == pytest.approx((ci.low, ci.high), rel=1e-9)


def test_one_way_anova_from_stats_matches_scipy_f_oneway():
    # Reference: scipy.stats.f_oneway on the values themselves.
    groups = _groups()
    got = fm.one_way_anova_from_stats(*_stats(groups))
    ref = stats.f_oneway(*groups)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-8)
    assert (got.df1, got.df2) == (3, sum(g.size for g in groups) - 4)


def test_welch_anova_from_stats_matches_pingouin_and_the_array_version():
    # Reference: pingouin.welch_anova on the same data in long form.
    import pandas as pd
    import pingouin as pg

    groups = _groups()
    got = fm.welch_anova_from_stats(*_stats(groups))
    frame = pd.DataFrame(
        {
            "y": np.concatenate(groups),
            "g": np.repeat(np.arange(len(groups)), [g.size for g in groups]),
        }
    )
    ref = pg.welch_anova(data=frame, dv="y", between="g")
    assert got.statistic == pytest.approx(float(ref["F"].iloc[0]), rel=1e-9)
    assert got.df2 == pytest.approx(float(ref["ddof2"].iloc[0]), rel=1e-9)
    assert got.pvalue == pytest.approx(float(ref["p_unc"].iloc[0]), rel=1e-7)
    assert got.statistic == pytest.approx(welch_anova(groups).statistic, rel=1e-12)


def test_tukey_kramer_from_stats_matches_scipy_tukey_hsd():
    # Reference: scipy.stats.tukey_hsd (Tukey–Kramer for unequal n) on the same data.
    groups = _groups()
    got = fm.tukey_hsd_from_stats(*_stats(groups))
    ref = stats.tukey_hsd(*groups).pvalue
    assert len(got) == 6
    for pair in got:
        assert pair.pvalue == pytest.approx(ref[pair.a, pair.b], rel=1e-6, abs=1e-12)


def test_games_howell_from_stats_matches_pingouin():
    # Reference: pingouin.pairwise_gameshowell on the same data.
    import pandas as pd
    import pingouin as pg

    groups = _groups()
    got = {(p.a, p.b): p.pvalue for p in fm.games_howell_from_stats(*_stats(groups))}
    frame = pd.DataFrame(
        {
            "y": np.concatenate(groups),
            "g": np.repeat(np.arange(len(groups)), [g.size for g in groups]),
        }
    )
    ref = pg.pairwise_gameshowell(data=frame, dv="y", between="g")
    for _, row in ref.iterrows():
        assert got[(int(row["A"]), int(row["B"]))] == pytest.approx(row["pval"], abs=1e-6)


def test_hedges_g_from_stats_matches_pingouin():
    # Reference: pingouin.compute_effsize(eftype="hedges") for the estimate; the interval is
    # Hedges & Olkin (1985) eq. 5.14, checked by hand below.
    import pingouin as pg

    a, b = _groups()[:2]
    (n1, n2), (m1, m2), (v1, v2) = _stats([a, b])
    got = fm.hedges_g_from_stats(n1, m1, v1, n2, m2, v2)
    assert got.estimate == pytest.approx(pg.compute_effsize(a, b, eftype="hedges"), rel=1e-3)
    se = np.sqrt((n1 + n2) / (n1 * n2) + got.estimate**2 / (2 * (n1 + n2)))
    assert got.ci_high - got.ci_low == pytest.approx(2 * stats.norm.ppf(0.975) * se, rel=1e-12)


def test_tost_from_stats_matches_statsmodels_ttost_ind():
    # Reference: statsmodels.stats.weightstats.ttost_ind(usevar="unequal") (Schuirmann 1987).
    from statsmodels.stats.weightstats import ttost_ind

    a, b = _groups()[:2]
    (n1, n2), (m1, m2), (v1, v2) = _stats([a, b])
    got = fm.tost_from_stats(n1, m1, v1, n2, m2, v2, margin=1.0)
    p, _, _ = ttost_ind(a, b, -1.0, 1.0, usevar="unequal")
    assert got.pvalue == pytest.approx(p, rel=1e-9)


def test_detectable_difference_from_stats_has_80_percent_power():
    # Reference: the power of Welch's test at that difference from the noncentral t
    # (scipy.stats.nct with Welch's df); the t-quantile approximation is within 0.01.
    a, b = _groups()[:2]
    (n1, n2), _, (v1, v2) = _stats([a, b])
    delta = fm.detectable_difference_from_stats(n1, v1, n2, v2)
    se = np.sqrt(v1 / n1 + v2 / n2)
    df = (v1 / n1 + v2 / n2) ** 2 / ((v1 / n1) ** 2 / (n1 - 1) + (v2 / n2) ** 2 / (n2 - 1))
    crit = stats.t.ppf(0.975, df)
    power = stats.nct.sf(crit, df, delta / se) + stats.nct.cdf(-crit, df, delta / se)
    assert power == pytest.approx(0.8, abs=0.01)


def test_pearson_and_line_from_comoments_match_scipy():
    # Reference: scipy.stats.pearsonr (r, p, Fisher-z interval) and scipy.stats.linregress.
    rng = np.random.default_rng(7)
    x = rng.normal(5e6, 3.0, 500)
    y = 0.4 * (x - 5e6) + rng.normal(0, 1.0, 500)
    dx, dy = x - x.mean(), y - y.mean()
    sxx, syy, sxy = float(dx @ dx), float(dy @ dy), float(dx @ dy)
    got = fm.pearson_from_stats(500, sxx, syy, sxy, level=0.9)
    ref = stats.pearsonr(x, y)
    ci = ref.confidence_interval(0.9)
    assert got.r == pytest.approx(ref.statistic, rel=1e-12)
    assert got.p == pytest.approx(ref.pvalue, rel=1e-6, abs=1e-300)
    assert (got.ci_low, got.ci_high) == pytest.approx((ci.low, ci.high), rel=1e-12)
    line = fm.straight_line_from_stats(500, x.mean(), y.mean(), sxx, syy, sxy)
    fit = stats.linregress(x, y)
    assert line.slope == pytest.approx(fit.slope, rel=1e-10)
    assert line.intercept == pytest.approx(fit.intercept, rel=1e-7)
    assert line.slope_se == pytest.approx(fit.stderr, rel=1e-9)
    assert line.r2 == pytest.approx(fit.rvalue**2, rel=1e-10)


def test_flat_groups_are_named_not_divided_by_zero():
    assert fm.pearson_from_stats(10, 0.0, 3.0, 0.0).reason == "x has no variation"
    assert fm.pearson_from_stats(10, 2.0, 3.0, 1.0, flat=(False, True)).reason == (
        "y has no variation"
    )
    assert fm.straight_line_from_stats(10, 1.0, 2.0, 0.0, 3.0, 0.0).reason == "x has no variation"
    assert fm.is_flat(0.0) and fm.is_flat(float("nan")) and not fm.is_flat(1e-300)


def test_brown_forsythe_from_stats_matches_scipy_levene_median():
    # Reference: scipy.stats.levene(center="median") (the Brown–Forsythe test) on the values;
    # ours gets only the moments of each group's |x − median|.
    groups = _groups()
    deviations = [np.abs(g - np.median(g)) for g in groups]
    got = fm.brown_forsythe_from_stats(*_stats(deviations))
    ref = stats.levene(*groups, center="median")
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert got.pvalue == pytest.approx(ref.pvalue, rel=1e-8)
