"""Correlation coefficients against scipy.stats and a published dataset."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from sitebuild.stats.correlation import (
    correlation_tables,
    kendall,
    pearson,
    rank_average,
    spearman,
)

# Anscombe, F. J. (1973). Graphs in statistical analysis. The American Statistician 27(1),
# 17-21: the four data sets of the paper's table, typed in.
ANSCOMBE_X = [10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5]
ANSCOMBE_X4 = [8, 8, 8, 8, 8, 8, 8, 19, 8, 8, 8]
ANSCOMBE = {
    "I": (ANSCOMBE_X, [8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68]),
    "II": (ANSCOMBE_X, [9.14, 8.14, 8.74, 8.77, 9.26, 8.10, 6.13, 3.10, 9.13, 7.26, 4.74]),
    "III": (ANSCOMBE_X, [7.46, 6.77, 12.74, 7.11, 7.81, 8.84, 6.08, 5.39, 8.15, 6.42, 5.73]),
    "IV": (ANSCOMBE_X4, [6.58, 5.76, 7.71, 8.84, 8.47, 7.04, 5.25, 12.50, 5.56, 7.91, 6.89]),
}


def _data(seed: int = 7, n: int = 120):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    y = 0.5 * x + rng.normal(size=n)
    y = np.round(y, 1)  # ties, so the tie handling is exercised
    x[[3, 17]] = np.nan
    y[[5, 17, 30]] = np.nan
    return x, y


def _complete(x, y):
    keep = ~(np.isnan(x) | np.isnan(y))
    return x[keep], y[keep]


def test_pearson_matches_scipy_pearsonr_and_its_fisher_interval():
    x, y = _data()
    ours = pearson(x, y, level=0.9)
    cx, cy = _complete(x, y)
    ref = stats.pearsonr(cx, cy)  # reference library: scipy.stats
    assert ours.n == cx.size
    assert ours.r == pytest.approx(ref.statistic, abs=1e-12)
    assert ours.p == pytest.approx(ref.pvalue, rel=1e-9)
    # scipy's interval for pearsonr is Fisher's z transformation.
    ci = ref.confidence_interval(confidence_level=0.9)
    assert ours.ci_low == pytest.approx(ci.low, abs=1e-12)
    assert ours.ci_high == pytest.approx(ci.high, abs=1e-12)


def test_fisher_interval_matches_textbook_formula():
    # Direct formula of Fisher (1921), Metron 1, as given in Zar, Biostatistical Analysis
    # (chapter on correlation; from memory): z = atanh r, z -/+ z_0.975 / sqrt(n - 3), then tanh.
    x, y = _data(seed=11, n=40)
    ours = pearson(x, y)
    n = ours.n
    z = math.atanh(ours.r)
    half = stats.norm.ppf(0.975) / math.sqrt(n - 3)
    assert ours.ci_low == pytest.approx(math.tanh(z - half), abs=1e-12)
    assert ours.ci_high == pytest.approx(math.tanh(z + half), abs=1e-12)


def test_spearman_matches_scipy_and_bonett_wright_interval():
    x, y = _data()
    ours = spearman(x, y)
    cx, cy = _complete(x, y)
    ref = stats.spearmanr(cx, cy)  # reference library: scipy.stats
    assert ours.r == pytest.approx(ref.statistic, abs=1e-12)
    assert ours.p == pytest.approx(ref.pvalue, rel=1e-9)
    # Bonett & Wright (2000), Psychometrika 65(1): se = sqrt((1 + r^2 / 2) / (n - 3)).
    se = math.sqrt((1 + ours.r**2 / 2) / (ours.n - 3))
    z = math.atanh(ours.r)
    assert ours.ci_low == pytest.approx(math.tanh(z - 1.959963984540054 * se), abs=1e-12)
    assert ours.ci_high == pytest.approx(math.tanh(z + 1.959963984540054 * se), abs=1e-12)


def test_kendall_tau_b_matches_scipy_with_ties():
    x, y = _data()
    ours = kendall(x, y)
    cx, cy = _complete(x, y)
    ref = stats.kendalltau(cx, cy, variant="b")  # reference library: scipy.stats
    assert ours.r == pytest.approx(ref.statistic, abs=1e-12)
    assert ours.p == pytest.approx(ref.pvalue, rel=1e-9)
    # Interval: Fisher's z with the Fieller, Hartley & Pearson (1957) standard error
    # sqrt(0.437 / (n - 4)), evaluated directly.
    n = len(cx)
    half = stats.norm.ppf(0.975) * np.sqrt(0.437 / (n - 4))
    z = np.arctanh(ref.statistic)
    assert (ours.ci_low, ours.ci_high) == pytest.approx((np.tanh(z - half), np.tanh(z + half)))
    assert ours.reason is None


def test_kendall_interval_covers_the_true_tau_of_a_bivariate_normal():
    # For a bivariate normal with correlation rho, tau = (2 / pi) arcsin(rho) (Greiner's
    # relation; from memory of Kendall's Rank Correlation Methods). Simulation: 400 samples.
    rng = np.random.default_rng(11)
    rho, n, runs = 0.5, 60, 400
    true_tau = 2 / np.pi * np.arcsin(rho)
    hits = 0
    for _ in range(runs):
        x = rng.normal(size=n)
        y = rho * x + np.sqrt(1 - rho**2) * rng.normal(size=n)
        c = kendall(x, y)
        hits += c.ci_low <= true_tau <= c.ci_high
    coverage = hits / runs
    assert abs(coverage - 0.95) <= 3 * np.sqrt(0.95 * 0.05 / runs), coverage


def test_kendall_sample_reports_sizes_and_stays_close_to_full_data():
    rng = np.random.default_rng(3)
    x = rng.normal(size=60_000)
    y = x + rng.normal(size=60_000)
    ours = kendall(x, y, limit=20_000, rng=np.random.default_rng(5))
    full = stats.kendalltau(x, y).statistic  # reference library: scipy.stats, all rows
    assert ours.n == 20_000 and ours.n_available == 60_000
    # tau's standard error at n = 20,000 is about 0.004 here; 0.02 is five of them.
    assert abs(ours.r - full) < 0.02


def test_rank_average_matches_scipy_rankdata():
    values = np.array([3.0, 1.0, 3.0, 2.0, 3.0, 1.0])
    assert rank_average(values).tolist() == stats.rankdata(values).tolist()


@pytest.mark.parametrize("name", ["I", "II", "III", "IV"])
def test_anscombe_quartet_all_have_r_about_0816(name):
    # Anscombe (1973): every set has correlation 0.816 (three decimals from memory; the paper
    # prints 0.82).
    x, y = ANSCOMBE[name]
    result = pearson(x, y)
    assert result.r == pytest.approx(0.816, abs=0.0006)
    assert result.r == pytest.approx(stats.pearsonr(x, y).statistic, abs=1e-12)


def test_undefined_cases_give_none_with_reason_never_nan():
    for fn in (pearson, spearman, kendall):
        short = fn([1.0, 2.0], [3.0, 1.0])
        assert short.r is None and short.p is None and "fewer than 3" in short.reason
        flat = fn([1.0, 2.0, 3.0, 4.0], [5.0, 5.0, 5.0, 5.0])
        assert flat.r is None and flat.reason == "y has no variation"
    three = pearson([1.0, 2.0, 3.0], [1.0, 3.0, 2.0])
    assert three.r == pytest.approx(0.5) and three.ci_low is None and "4 pairs" in three.reason


@pytest.mark.parametrize("chunk_rows", [2**21, 64])
@pytest.mark.parametrize("missing", [True, False])
def test_tables_match_scipy_pair_by_pair_in_every_scope(monkeypatch, chunk_rows, missing):
    # chunk_rows=64: the matrix products run over blocks of rows, as on 10M-row tables.
    from sitebuild.stats import correlation

    monkeypatch.setattr(correlation, "CHUNK_ROWS", chunk_rows)
    rng = np.random.default_rng(21)
    n = 400
    data = rng.normal(size=(n, 4))
    data[:, 1] += data[:, 0]
    data[:, 3] = np.round(data[:, 3], 1)
    if missing:
        data[rng.choice(n, 30, replace=False), 2] = np.nan  # pairs with their own complete rows
    codes = rng.integers(0, 3, size=n)
    tables = correlation_tables(data, codes, 3, rng=np.random.default_rng(0))
    assert len(tables) == 4 * 3
    refs = {
        "pearson": lambda a, b: stats.pearsonr(a, b),
        "spearman": lambda a, b: stats.spearmanr(a, b),
        "kendall": lambda a, b: stats.kendalltau(a, b),
    }
    for table in tables:
        rows = np.ones(n, bool) if table.group is None else codes == table.group
        for i, j, c in table.pairs:
            a, b = _complete(data[rows, i], data[rows, j])
            ref = refs[table.method](a, b)  # reference library: scipy.stats
            assert c.n == a.size
            assert c.r == pytest.approx(ref.statistic, abs=1e-10), (table.method, i, j)
            assert c.p == pytest.approx(ref.pvalue, rel=1e-7, abs=1e-300)


def test_tables_flag_constant_columns_and_tiny_groups():
    data = np.array(
        [[1.0, 2.0, 7.0], [2.0, 1.0, 7.0], [3.0, 5.0, 7.0], [4.0, 3.0, 7.0], [5.0, 4.0, 7.0]]
    )
    codes = np.array([0, 0, 0, 0, 1])
    tables = correlation_tables(data, codes, 2, rng=np.random.default_rng(0))
    for table in tables:
        for _i, j, c in table.pairs:
            if c.r is None:
                assert c.reason
            else:
                assert math.isfinite(c.r)
            if j == 2:
                assert c.r is None
        if table.group == 1:
            assert all(c.r is None and "fewer than 3" in c.reason for _, _, c in table.pairs)


@pytest.mark.parametrize("scale", [2.0**1000, 2.0**-1000], ids=["near-max", "near-min"])
def test_values_near_the_float_limits_give_the_same_correlations(scale):
    # Products of values ~1e301 overflow and of ~1e-301 underflow; r is scale-free, so the
    # tables must equal scipy.stats on the same data at ordinary scale (exact power of two).
    rng = np.random.default_rng(5)
    n = 200
    plain = rng.normal(size=(n, 3))
    plain[:, 1] += plain[:, 0]
    plain[rng.choice(n, 20, replace=False), 2] = np.nan
    codes = rng.integers(0, 2, size=n)
    big = plain * scale
    assert np.all(np.isfinite(big[~np.isnan(big)]))
    with np.errstate(all="raise"):
        tables = correlation_tables(big, codes, 2, methods=("pearson",), rng=None)
    for table in tables:
        rows = np.ones(n, bool) if table.group is None else codes == table.group
        for i, j, c in table.pairs:
            a, b = _complete(plain[rows, i], plain[rows, j])
            ref = stats.pearsonr(a, b)  # reference library: scipy.stats
            assert c.r == pytest.approx(ref.statistic, abs=1e-12), (table.group, i, j)
    one = pearson(big[:, 0], big[:, 1])
    assert one.r == pytest.approx(stats.pearsonr(plain[:, 0], plain[:, 1]).statistic, abs=1e-12)


def test_kendall_above_the_limit_uses_one_row_sample_for_every_pair():
    # With no missing values every pair shares its rows, so one seeded sample of rows serves
    # all pairs; each tau must equal scipy.stats.kendalltau on exactly those rows.
    rng = np.random.default_rng(8)
    rows, limit = 3_000, 500
    data = rng.normal(size=(rows, 3))
    data[:, 1] += 0.5 * data[:, 0]
    data[:, 2] = np.round(data[:, 2], 1)  # ties
    (table,) = correlation_tables(
        data, methods=("kendall",), rng=np.random.default_rng(3), kendall_limit=limit
    )
    pick = np.sort(np.random.default_rng(3).choice(rows, size=limit, replace=False))
    for i, j, c in table.pairs:
        ref = stats.kendalltau(data[pick, i], data[pick, j], variant="b")  # scipy.stats
        assert c.n == limit and c.n_available == rows
        assert c.r == pytest.approx(ref.statistic, abs=1e-12)
        assert c.p == pytest.approx(ref.pvalue, rel=1e-9)


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_spearman_of_perfectly_ordered_data_has_no_interval_or_p_like_kendall(sign):
    # Reference: scipy.stats.spearmanr and kendalltau give rho = tau = ±1 on a monotone but
    # curved relation; scipy's t approximation then gives p = 0 and a Fisher interval [1, 1],
    # which is no real uncertainty. Spearman is treated like Kendall's tau-b = ±1: the
    # coefficient, no interval, no p-value, and a note.
    x = np.linspace(0.0, 3.0, 30)
    y = sign * np.exp(x)
    assert stats.spearmanr(x, y).statistic == pytest.approx(sign)
    rho, tau = spearman(x, y), kendall(x, y)
    assert rho.r == sign and tau.r == pytest.approx(sign)
    assert (rho.ci_low, rho.ci_high, rho.p) == (None, None, None)
    assert (tau.ci_low, tau.ci_high) == (None, None)
    assert rho.reason and "±1" in rho.reason
    # The table path (with a missing value, so the pair keeps its own complete rows) agrees.
    data = np.column_stack([x, y, np.where(np.arange(30) == 4, np.nan, y)])
    table = correlation_tables(data, methods=("spearman",), rng=np.random.default_rng(0))[0]
    for _, _, c in table.pairs:
        assert (c.ci_low, c.ci_high, c.p) == (None, None, None) and c.reason


def test_nearly_perfect_spearman_keeps_its_interval_and_p():
    # Reference: scipy.stats.spearmanr; one adjacent swap in 30 values gives rho = 1 - 6·2 /
    # (30·899) = 0.99956, an ordinary estimate with an interval and a p-value.
    x = np.arange(30.0)
    y = x.copy()
    y[[10, 11]] = y[[11, 10]]
    rho = spearman(x, y)
    assert rho.r == pytest.approx(stats.spearmanr(x, y).statistic, abs=1e-12)
    assert rho.ci_low is not None and rho.p is not None and rho.reason is None
    table = correlation_tables(np.column_stack([x, y]), methods=("spearman",))[0]
    assert table.pairs[0][2].ci_low is not None


def test_grouped_ranks_match_scipy_rankdata_with_ties_missing_values_and_empty_groups():
    # Reference: scipy.stats.rankdata (average) over each column's present values, and over
    # each group's. Group 2 has no rows; column 1 is missing for every row of group 3; the
    # groups are large enough for the sorted-key path of sorting_order (4,096 values and up).
    from sitebuild.stats.correlation import _grouped_ranks

    rng = np.random.default_rng(8)
    sizes = [5000, 4100, 0, 4300, 7]
    codes = np.repeat(np.arange(len(sizes)), sizes)
    n = codes.size
    data = np.empty((n, 3), order="F")
    data[:, 0] = np.round(rng.normal(codes, 1.0), 1)  # heavy ties within and between groups
    data[:, 1] = rng.normal(size=n)
    data[codes == 3, 1] = np.nan
    data[:, 2] = rng.integers(0, 5, n).astype(float)
    data[rng.choice(n, 500, replace=False), 2] = np.nan
    bounds = np.searchsorted(codes, np.arange(len(sizes) + 1))
    pooled, within = _grouped_ranks(data, bounds)
    for j in range(3):
        present = ~np.isnan(data[:, j])
        expected = np.full(n, np.nan)
        expected[present] = stats.rankdata(data[present, j])
        assert np.array_equal(pooled[:, j], expected, equal_nan=True), j
        for g in range(len(sizes)):
            rows = (codes == g) & present
            expected = np.full(n, np.nan)
            expected[rows] = stats.rankdata(data[rows, j])
            got = within[:, j].astype(np.float64)
            assert np.array_equal(got[codes == g], expected[codes == g], equal_nan=True), (j, g)


def test_ranking_in_place_gives_the_very_tables_of_the_copying_path(monkeypatch):
    # Complete grouped data rank in place (one copy of the data less); the tables, including
    # Kendall's seeded samples of rows, must be exactly those of the path that keeps the values.
    from sitebuild.stats import correlation

    rng = np.random.default_rng(5)
    n = 3000
    data = rng.normal(size=(n, 4))
    data[:, 1] += data[:, 0]
    data[:, 2] = np.round(data[:, 2], 1)  # ties
    data[:, 3] = 1.0  # a constant column
    codes = rng.integers(0, 3, size=n)

    def tables():
        return correlation_tables(data, codes, 3, rng=np.random.default_rng(1), kendall_limit=500)

    in_place = tables()
    monkeypatch.setattr(correlation, "_complete", lambda values: False)
    copying = tables()
    assert [(t.method, t.group) for t in in_place] == [(t.method, t.group) for t in copying]
    assert in_place == copying
    assert any(c.n == 500 for t in in_place if t.method == "kendall" for _, _, c in t.pairs)
