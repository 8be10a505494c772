"""Work shared between statistics for speed gives scipy's numbers on the same data.

Reference for every check: scipy.stats on the same values (rankdata, kruskal, skew, skewtest,
spearmanr); the data are seeded random draws with ties and missing values.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from sitebuild.allocator import reuse_freed_memory
from sitebuild.sections.comparisons import residual_skew_check
from sitebuild.stats.correlation import _grouped_ranks, correlation_tables
from sitebuild.stats.omnibus import kruskal_wallis
from sitebuild.stats.pairwise import Sample, pooled_ranks


def _groups(seed: int) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    return [
        np.round(rng.lognormal(rng.normal(), 0.5, int(rng.integers(8, 80))), 1)
        for _ in range(int(rng.integers(2, 7)))
    ]


@pytest.mark.parametrize("seed", range(20))
def test_pooled_ranks_and_kruskal_wallis_match_scipy(seed):
    groups = _groups(seed)
    samples = [Sample.of(g) for g in groups]
    ranks, runs = pooled_ranks(samples)
    expected = stats.rankdata(np.concatenate([s.sorted for s in samples]))
    assert np.array_equal(np.concatenate(ranks), expected)
    kw = kruskal_wallis([s.sorted for s in samples], ranks=ranks, runs=runs)
    reference = stats.kruskal(*groups)
    assert kw.statistic == pytest.approx(reference.statistic, rel=1e-12)
    assert kw.pvalue == pytest.approx(reference.pvalue, rel=1e-9)


@pytest.mark.parametrize("seed", range(40))
def test_residual_skew_check_matches_scipy_on_the_pooled_residuals(seed):
    samples = [Sample.of(g * 10.0 ** (seed % 7 - 3)) for g in _groups(seed)]
    residuals = np.concatenate([s.sorted - s.mean for s in samples])
    check = residual_skew_check(samples)
    assert check["residual_skewness"] == pytest.approx(stats.skew(residuals, bias=False), rel=1e-9)
    assert check["skew_test_p"] == pytest.approx(stats.skewtest(residuals).pvalue, rel=1e-8)


def test_residual_skew_check_needs_eight_values_and_some_spread():
    assert residual_skew_check([Sample.of(np.array([1.0, 2, 3]))] * 2)["skew_test_p"] is None
    flat = [Sample.of(np.full(10, 4.0)), Sample.of(np.full(10, 9.0))]
    assert residual_skew_check(flat)["residual_skewness"] is None


def _reference_ranks(column: np.ndarray) -> np.ndarray:
    out = np.full(column.size, np.nan)
    keep = ~np.isnan(column)
    out[keep] = stats.rankdata(column[keep])
    return out


@pytest.mark.parametrize("seed", range(5))
def test_ranks_over_all_rows_and_within_groups_match_scipy(seed):
    rng = np.random.default_rng(seed)
    n, groups = 2_000, 6
    data = np.round(rng.normal(size=(n, 3)), 1)
    data[rng.random((n, 3)) < 0.05] = np.nan
    codes = np.sort(rng.integers(0, groups, n))
    codes[codes == 2] = 3  # a group with no rows
    bounds = np.searchsorted(codes, np.arange(groups + 1))
    pooled, within = _grouped_ranks(np.asfortranarray(data), bounds)
    for j in range(3):
        assert np.array_equal(pooled[:, j], _reference_ranks(data[:, j]), equal_nan=True)
        for g in range(groups):
            part = slice(bounds[g], bounds[g + 1])
            assert np.array_equal(within[part, j], _reference_ranks(data[part, j]), equal_nan=True)


def test_spearman_tables_per_group_match_scipy():
    rng = np.random.default_rng(11)
    n = 3_000
    data = np.round(rng.normal(size=(n, 3)), 1)
    data[rng.random((n, 3)) < 0.03] = np.nan
    codes = rng.integers(0, 4, n)
    for table in correlation_tables(data, codes, 4, rng=np.random.default_rng(0)):
        if table.method != "spearman":
            continue
        rows = np.ones(n, bool) if table.group is None else codes == table.group
        for i, j, result in table.pairs:
            x, y = data[rows, i], data[rows, j]
            keep = ~(np.isnan(x) | np.isnan(y))
            assert result.r == pytest.approx(stats.spearmanr(x[keep], y[keep])[0], abs=1e-12)


def test_freed_memory_is_kept_on_glibc():
    # The settings take on glibc (this project's CI runs on Debian); elsewhere they are skipped
    # quietly, and either way they change where arrays live, not what is computed.
    import platform

    assert reuse_freed_memory() is (platform.libc_ver()[0] == "glibc")
