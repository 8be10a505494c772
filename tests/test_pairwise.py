"""Pairwise tests and effect sizes against published values, scipy, statsmodels and pingouin."""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
from scipy import stats

from sitebuild.stats import pairwise as pw
from sitebuild.stats.pairwise import (
    Sample,
    cliffs_delta,
    detectable_difference,
    dunnett,
    games_howell,
    hedges_g,
    hodges_lehmann,
    kth_pairwise_differences,
    mann_whitney_u,
    mwu_exact_cdf,
    permutation_test,
    size_label,
    tost_welch,
    tukey_hsd,
    welch_t,
)

# Student (1908), "The probable error of a mean", Biometrika 6(1): extra hours of sleep of
# 10 patients under two drugs (the public "sleep" data).
SLEEP_1 = np.array([0.7, -1.6, -0.2, -1.2, -0.1, 3.4, 3.7, 0.8, 0.0, 2.0])
SLEEP_2 = np.array([1.9, 0.8, 1.1, 0.1, -0.1, 4.4, 5.5, 1.6, 4.6, 3.4])


def test_welch_matches_published_sleep_example():
    # Reference values t = -1.8608, df = 17.776, p = 0.0794, from memory of a standard
    # statistics package's documented Welch two-sample example on Student's (1908) data.
    r = welch_t(SLEEP_1, SLEEP_2)
    assert r.statistic == pytest.approx(-1.8608, abs=5e-5)
    assert r.df == pytest.approx(17.776, abs=5e-4)
    assert r.pvalue == pytest.approx(0.0794, abs=5e-5)
    # Same example, from memory: 95 % CI of the difference -3.3654832 to 0.2054832.
    assert r.ci_low == pytest.approx(-3.3654832, abs=1e-6)
    assert r.ci_high == pytest.approx(0.2054832, abs=1e-6)


def test_welch_matches_scipy_ttest_ind():
    # Reference: scipy.stats.ttest_ind(equal_var=False) and its confidence_interval().
    rng = np.random.default_rng(1)
    x, y = rng.normal(0, 1, 23), rng.normal(0.4, 2.2, 31)
    r = welch_t(x, y, confidence=0.9)
    ref = stats.ttest_ind(x, y, equal_var=False)
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert r.df == pytest.approx(ref.df, rel=1e-12)
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-10)
    ci = ref.confidence_interval(0.9)
    assert (r.ci_low, r.ci_high) == pytest.approx((ci.low, ci.high), rel=1e-10)


@pytest.mark.parametrize("m,n", [(5, 7), (12, 9), (20, 20), (50, 3)])
def test_mann_whitney_exact_matches_scipy(m, n):
    # Reference: scipy.stats.mannwhitneyu(method="exact"), no ties.
    rng = np.random.default_rng(m * 100 + n)
    x, y = rng.normal(0, 1, m), rng.normal(0.7, 1, n)
    r = mann_whitney_u(x, y)
    ref = stats.mannwhitneyu(x, y, method="exact")
    assert r.method == "exact"
    assert r.statistic == ref.statistic
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def test_exact_distribution_matches_enumeration():
    # Direct enumeration of all C(7, 3) = 35 splits of ranks 1..7 (Mann & Whitney 1947).
    from itertools import combinations

    counts = np.zeros(13)
    for xs in combinations(range(7), 3):
        u = sum(sum(1 for y in set(range(7)) - set(xs) if x > y) for x in xs)
        counts[u] += 1
    assert mwu_exact_cdf(3, 4, 12) == pytest.approx(np.cumsum(counts) / 35, abs=1e-15)


def test_mann_whitney_normal_with_ties_matches_scipy():
    # Reference: scipy.stats.mannwhitneyu(method="asymptotic", use_continuity=True).
    rng = np.random.default_rng(5)
    x = rng.integers(0, 8, 40).astype(float)
    y = rng.integers(1, 9, 55).astype(float)
    r = mann_whitney_u(x, y)
    ref = stats.mannwhitneyu(x, y, method="asymptotic", use_continuity=True)
    assert r.method.startswith("normal")
    assert r.statistic == ref.statistic
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-10)


def test_mann_whitney_large_sample_matches_scipy():
    # Reference: scipy.stats.mannwhitneyu (asymptotic) on 3,000 vs 2,000 continuous values.
    rng = np.random.default_rng(6)
    x, y = rng.normal(0, 1, 3000), rng.normal(0.05, 1, 2000)
    r = mann_whitney_u(x, y)
    ref = stats.mannwhitneyu(x, y, method="asymptotic")
    assert r.statistic == ref.statistic
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def _brute_differences(x, y):
    return np.sort((np.asarray(x)[:, None] - np.asarray(y)[None, :]).ravel())


def test_hodges_lehmann_estimate_matches_brute_force():
    # Reference: the median of all m·n differences listed by brute force (Hodges & Lehmann 1963).
    rng = np.random.default_rng(7)
    for _ in range(30):
        m, n = rng.integers(1, 60, 2)
        x, y = rng.normal(0, 1, m), rng.gamma(2.0, 1.0, n)
        d = _brute_differences(x, y)
        assert hodges_lehmann(x, y).estimate == pytest.approx(float(np.median(d)), abs=1e-15)


def test_exact_cdf_matches_scipy_one_sided_exact_p():
    # Reference: scipy.stats.mannwhitneyu(method="exact", alternative="less") gives P(U <= u_obs).
    rng = np.random.default_rng(18)
    for m, n in [(4, 9), (9, 11), (15, 6)]:
        x, y = rng.normal(0, 1, m), rng.normal(0.5, 1, n)
        ref = stats.mannwhitneyu(x, y, method="exact", alternative="less")
        u = int(ref.statistic)
        assert mwu_exact_cdf(m, n, u)[u] == pytest.approx(ref.pvalue, rel=1e-10)


def test_hodges_lehmann_interval_uses_published_order_statistics():
    # Lehmann (1975), ch. 2: the interval is [d_(k), d_(mn-k+1)] with k the largest integer
    # such that P(U <= k - 1) <= alpha/2 under the null; checked against brute-force order
    # statistics of all 99 differences (exact distribution checked against scipy above).
    rng = np.random.default_rng(8)
    x, y = rng.normal(1, 1, 9), rng.normal(0, 1, 11)
    r = hodges_lehmann(x, y, confidence=0.95)
    d = _brute_differences(x, y)
    cdf = mwu_exact_cdf(9, 11, 99)
    k = max(i for i in range(1, 50) if cdf[i - 1] <= 0.025)
    assert r.method == "exact"
    assert r.ci_low == d[k - 1]
    assert r.ci_high == d[99 - k]


def test_hodges_lehmann_normal_interval_with_ties_matches_brute_force():
    # Normal-approximation k = floor(mn/2 - z sigma_U) with the tie-corrected sigma (Lehmann 1975);
    # order statistics from brute force.
    rng = np.random.default_rng(19)
    x, y = rng.integers(0, 9, 60).astype(float), rng.integers(0, 7, 70).astype(float)
    r = hodges_lehmann(x, y)
    d = _brute_differences(x, y)
    pooled = np.concatenate([x, y])
    _, t = np.unique(pooled, return_counts=True)
    big_n = 130
    sigma = math.sqrt(60 * 70 / 12 * ((big_n + 1) - np.sum(t**3 - t) / (big_n * (big_n - 1))))
    k = math.floor(60 * 70 / 2 - stats.norm.ppf(0.975) * sigma)
    assert r.estimate == float(np.median(d))
    assert (r.ci_low, r.ci_high) == (d[k - 1], d[60 * 70 - k])


def test_kth_difference_selection_matches_brute_force_with_ties_and_offsets():
    # Reference: brute-force sorted differences. Small enumeration limits force the bracket
    # search through several rounds, including heavy ties and large constant offsets.
    rng = np.random.default_rng(9)
    old = (pw._ENUMERATE_LIMIT, pw._SAMPLE_SIZE)
    pw._ENUMERATE_LIMIT, pw._SAMPLE_SIZE = 500, 256
    try:
        for trial in range(40):
            m, n = rng.integers(40, 250, 2)
            if trial % 3 == 0:
                x, y = rng.integers(0, 6, m).astype(float), rng.integers(0, 6, n).astype(float)
            elif trial % 3 == 1:
                x, y = rng.normal(0, 1e-3, m) + 1e9, rng.standard_cauchy(n) + 1e9
            else:
                x, y = rng.normal(size=m), rng.normal(size=n) * 5
            d = _brute_differences(x, y)
            ks = [int(k) for k in rng.integers(0, m * n, 4)] + [0, m * n - 1, (m * n) // 2]
            got = kth_pairwise_differences(x, y, ks, np.random.default_rng(trial))
            assert got == [d[k] for k in ks]
    finally:
        pw._ENUMERATE_LIMIT, pw._SAMPLE_SIZE = old


def _count_below_and_at(x: Sample, y: Sample, t: float) -> tuple[int, int]:
    """Exact numbers of differences x_i - y_j below t and at or below t (sorted counting)."""
    n = y.n
    lt = int(np.sum(n - np.searchsorted(y.sorted, x.sorted - t, side="right")))
    le = int(np.sum(n - np.searchsorted(y.sorted, x.sorted - t, side="left")))
    return lt, le


def test_hodges_lehmann_on_125k_per_group_is_fast_and_has_the_right_ranks():
    # 125,000 x 125,000 = 1.56e10 differences cannot be listed; instead the returned values'
    # ranks are checked by exact counting (the definition of the k-th order statistic).
    rng = np.random.default_rng(10)
    x, y = Sample.of(rng.normal(0, 1, 125_000)), Sample.of(rng.gamma(2, 1, 125_000))
    began = time.perf_counter()
    r = hodges_lehmann(x, y)
    elapsed = time.perf_counter() - began
    total = 125_000**2
    # The "+ 1" allows for x_i - t being rounded once in the counting, not for a wrong rank.
    lt, le = _count_below_and_at(x, y, r.estimate)
    assert lt <= total // 2 <= le + 1
    k = pw._ci_rank(125_000, 125_000, 0.95, 0.0)
    lt, le = _count_below_and_at(x, y, r.ci_low)
    assert lt <= k - 1 < le + 1
    lt, le = _count_below_and_at(x, y, r.ci_high)
    assert lt <= total - k < le + 1
    assert r.ci_low < r.estimate < r.ci_high
    assert elapsed < 5.0  # typically about 0.15 s


def test_tukey_hsd_matches_scipy():
    # Reference: scipy.stats.tukey_hsd (Tukey–Kramer for unequal n).
    rng = np.random.default_rng(12)
    groups = [rng.normal(i * 0.4, 1, 10 + 2 * i) for i in range(4)]
    ref = stats.tukey_hsd(*groups)
    for fp in tukey_hsd(groups):
        assert fp.pvalue == pytest.approx(ref.pvalue[fp.a, fp.b], rel=1e-6, abs=1e-12)


def test_games_howell_matches_pingouin():
    # Reference: pingouin.pairwise_gameshowell on the same data.
    import pandas as pd
    import pingouin as pg

    rng = np.random.default_rng(13)
    groups = [rng.normal(i * 0.5, 1 + i, 12 + 4 * i) for i in range(4)]
    labels = ["g0", "g1", "g2", "g3"]
    frame = pd.DataFrame(
        {"y": np.concatenate(groups), "g": np.repeat(labels, [len(g) for g in groups])}
    )
    ref = pg.pairwise_gameshowell(data=frame, dv="y", between="g")
    ours = {(labels[fp.a], labels[fp.b]): fp for fp in games_howell(groups)}
    for _, row in ref.iterrows():
        fp = ours[(row["A"], row["B"])]
        assert fp.df == pytest.approx(row["df"], rel=1e-9)
        assert fp.pvalue == pytest.approx(row["pval"], rel=1e-5, abs=1e-9)


def test_dunnett_matches_scipy_with_same_seed():
    # Reference: scipy.stats.dunnett (its p-values come from a seeded quasi-Monte Carlo integral).
    rng = np.random.default_rng(14)
    groups = [rng.normal(i * 0.3, 1, 15) for i in range(4)]
    ours = dunnett(groups, reference=0, rng=np.random.default_rng(99))
    ref = stats.dunnett(*groups[1:], control=groups[0], rng=np.random.default_rng(99))
    assert [fp.a for fp in ours] == [1, 2, 3]
    assert [fp.pvalue for fp in ours] == pytest.approx(list(ref.pvalue), rel=1e-12)
    assert [fp.statistic for fp in ours] == pytest.approx(list(ref.statistic), rel=1e-12)


def test_hedges_g_matches_pingouin_and_hedges_olkin_interval():
    # Point estimate: pingouin.compute_effsize(eftype="hedges") (same small-sample factor
    # J = 1 - 3/(4(n1+n2) - 9)). Interval: direct evaluation of Hedges & Olkin (1985, ch. 5)
    # large-sample variance (n1+n2)/(n1 n2) + g²/(2(n1+n2)) with a normal quantile.
    import pingouin as pg

    r = hedges_g(SLEEP_1, SLEEP_2, confidence=0.95)
    assert r.estimate == pytest.approx(
        pg.compute_effsize(SLEEP_1, SLEEP_2, eftype="hedges"), rel=1e-10
    )
    g = r.estimate
    se = math.sqrt(20 / 100 + g**2 / 40)
    z = stats.norm.ppf(0.975)
    assert (r.ci_low, r.ci_high) == pytest.approx((g - z * se, g + z * se), rel=1e-12)


def test_cliffs_delta_matches_direct_evaluation_of_cliff_1993():
    # Direct evaluation of Cliff (1993) eqs. for delta, its variance and the asymmetric interval,
    # from the full dominance matrix d_ij = sign(x_i - y_j), with ties.
    rng = np.random.default_rng(15)
    x = rng.integers(0, 10, 17).astype(float)
    y = rng.integers(2, 12, 23).astype(float)
    d = np.sign(x[:, None] - y[None, :])
    m, n = d.shape
    delta = d.mean()
    di, dj = d.mean(axis=1), d.mean(axis=0)
    s2 = (
        n**2 * np.sum((di - delta) ** 2)
        + m**2 * np.sum((dj - delta) ** 2)
        - np.sum((d - delta) ** 2)
    ) / (m * n * (m - 1) * (n - 1))
    s2 = max(s2, (1 - delta**2) / (m * n - 1))
    z = stats.norm.ppf(0.975)
    root = z * math.sqrt(s2) * math.sqrt((1 - delta**2) ** 2 + z**2 * s2)
    low = (delta - delta**3 - root) / (1 - delta**2 + z**2 * s2)
    high = (delta - delta**3 + root) / (1 - delta**2 + z**2 * s2)
    r = cliffs_delta(x, y)
    assert r.estimate == pytest.approx(delta, abs=1e-15)
    assert (r.ci_low, r.ci_high) == pytest.approx((low, high), rel=1e-12)


def test_shared_ranks_match_scipy_ranks_and_brute_force_dominance_and_ties():
    # Reference: scipy.stats.rankdata (average) on the pooled values; dominance counts and the
    # tie term by direct comparison of every pair of values (ties within and between groups).
    rng = np.random.default_rng(21)
    groups = [np.round(rng.normal(0.2 * g, 1, size), 1) for g, size in enumerate((40, 1, 57, 33))]
    samples = [Sample.of(g) for g in groups]
    shared = pw.SharedRanks.of(samples)
    pooled = np.concatenate([s.sorted for s in samples])
    assert np.array_equal(np.concatenate(shared.ranks), stats.rankdata(pooled))
    for i in range(4):
        for j in range(4):
            x, y = samples[i].sorted, samples[j].sorted
            dom = shared.dominance(i, j)
            below, at_or_below = dom.per_value()
            assert below.tolist() == [int(np.sum(y < v)) for v in x]
            assert at_or_below.tolist() == [int(np.sum(y <= v)) for v in x]
            x_below, x_upto = pw.Dominance(dom.y_count, dom.x_below, dom.x_upto).per_value()
            assert x_below.tolist() == [int(np.sum(x < v)) for v in y]
            assert x_upto.tolist() == [int(np.sum(x <= v)) for v in y]
            searched = pw.dominance_counts(samples[i], samples[j])
            for field in ("x_count", "y_below", "y_upto", "y_count", "x_below", "x_upto"):
                assert np.array_equal(getattr(searched, field), getattr(dom, field)), field
            if i != j:
                _, t = np.unique(np.concatenate([x, y]), return_counts=True)
                assert shared.tie_term(i, j) == float(np.sum(t.astype(float) ** 3 - t))


def test_cliffs_delta_column_counts_come_from_the_row_counts_exactly():
    # Against Cliff's column means d_.j evaluated directly (Cliff 1993), with heavy ties and a
    # value of x equal to the smallest and largest y.
    x = np.array([0.0, 0.0, 1.0, 2.0, 2.0, 5.0, 9.0])
    y = np.array([0.0, 1.0, 1.0, 2.0, 9.0])
    d = np.sign(x[:, None] - y[None, :])
    r = cliffs_delta(x, y)
    assert r.estimate == pytest.approx(d.mean(), abs=1e-15)
    m, n = d.shape
    di, dj = d.mean(axis=1), d.mean(axis=0)
    s2 = (
        n**2 * np.sum((di - d.mean()) ** 2)
        + m**2 * np.sum((dj - d.mean()) ** 2)
        - np.sum((d - d.mean()) ** 2)
    ) / (m * n * (m - 1) * (n - 1))
    z = stats.norm.ppf(0.975)
    delta = d.mean()
    s2 = max(s2, (1 - delta**2) / (m * n - 1))
    root = z * math.sqrt(s2) * math.sqrt((1 - delta**2) ** 2 + z**2 * s2)
    low = (delta - delta**3 - root) / (1 - delta**2 + z**2 * s2)
    assert r.ci_low == pytest.approx(low, rel=1e-12)


def test_cliffs_delta_complete_separation_has_no_interval_and_says_why():
    r = cliffs_delta(np.array([1.0, 2, 3]), np.array([4.0, 5, 6]))
    assert r.estimate == -1.0 and r.ci_low is None and "separation" in r.reason


def test_tost_matches_statsmodels_ttost_ind():
    # Reference: statsmodels.stats.weightstats.ttost_ind(usevar="unequal") (Schuirmann 1987).
    from statsmodels.stats.weightstats import ttost_ind

    rng = np.random.default_rng(16)
    x, y = rng.normal(10, 1, 30), rng.normal(10.1, 1.5, 25)
    r = tost_welch(x, y, margin=0.8, alpha=0.05)
    p, lower, upper = ttost_ind(x, y, -0.8, 0.8, usevar="unequal")
    assert r.pvalue == pytest.approx(p, rel=1e-10)
    assert r.p_lower == pytest.approx(lower[1], rel=1e-10)
    assert r.p_upper == pytest.approx(upper[1], rel=1e-10)
    assert r.equivalent == (p < 0.05)


@pytest.mark.parametrize("n,sd_ratio", [(12, 1.0), (30, 2.0), (200, 0.5)])
def test_detectable_difference_has_80_percent_power_by_noncentral_t(n, sd_ratio):
    # Reference: the power of the two-sided t-test at the returned difference, from
    # scipy.stats.nct with Welch's df; the t-quantile approximation is within 0.01 of 0.80
    # for df >= 10 (checked exactly here, not assumed).
    rng = np.random.default_rng(n)
    x, y = rng.normal(0, 1, n), rng.normal(0, sd_ratio, n + 3)
    delta = detectable_difference(x, y, alpha=0.05, power=0.8)
    xs, ys = Sample.of(x), Sample.of(y)
    se = math.sqrt(xs.variance / xs.n + ys.variance / ys.n)
    df = welch_t(x, y).df
    crit = stats.t.ppf(0.975, df)
    power = stats.nct.sf(crit, df, delta / se) + stats.nct.cdf(-crit, df, delta / se)
    assert power == pytest.approx(0.80, abs=0.01)


def test_permutation_test_is_seeded_and_agrees_with_scipy():
    # Reference: scipy.stats.permutation_test (independent, difference in means); both are
    # Monte Carlo, so they agree within Monte-Carlo error (SD of p ~ 0.007 at 4,999 draws).
    rng = np.random.default_rng(17)
    x, y = rng.normal(0, 1, 14), rng.normal(0.6, 1, 12)
    a = permutation_test(x, y, 4999, np.random.default_rng(1))
    b = permutation_test(x, y, 4999, np.random.default_rng(1))
    assert a == b
    ref = stats.permutation_test(
        (x, y),
        lambda u, v: np.mean(u) - np.mean(v),
        n_resamples=4999,
        rng=np.random.default_rng(2),
    )
    assert a.pvalue == pytest.approx(ref.pvalue, abs=0.03)


def test_size_labels_follow_common_practice_thresholds():
    # Common practice: Cohen (1988) for g and variance shares; Romano et al. (2006) for delta.
    assert [size_label("Hedges' g", v) for v in (0.1, 0.3, 0.6, 1.2)] == [
        "negligible", "small", "medium", "large",
    ]  # fmt: skip
    assert size_label("Cliff's delta", -0.2) == "small"
    assert size_label("omega²", 0.2) == "large"
