"""Per-group summaries checked against scipy, numpy and NIST StRD certified values."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from sitebuild.stats.summary import describe, histogram_edges, median_ci_ranks

RNG = np.random.default_rng(7)
SAMPLES = {
    "normal": RNG.normal(50, 5, size=200),
    "skewed": RNG.lognormal(1.0, 0.7, size=333),
    "ties": RNG.integers(0, 6, size=101).astype(float),
    "small": np.array([3.1, 2.4, 5.6, 4.4, 3.9]),
}


@pytest.mark.parametrize("name", SAMPLES)
def test_moments_and_interval_match_scipy(name):
    x = SAMPLES[name]
    s = describe(x, 0.95)
    # Reference: scipy.stats on the same data.
    assert s.mean == pytest.approx(np.mean(x), rel=1e-13)
    assert s.sd == pytest.approx(np.std(x, ddof=1), rel=1e-12)
    assert s.se == pytest.approx(stats.sem(x), rel=1e-12)
    low, high = stats.t.interval(0.95, len(x) - 1, loc=np.mean(x), scale=stats.sem(x))
    assert (s.ci_low, s.ci_high) == pytest.approx((low, high), rel=1e-12)
    assert s.skewness == pytest.approx(stats.skew(x, bias=False), rel=1e-10, abs=1e-12)
    assert s.excess_kurtosis == pytest.approx(stats.kurtosis(x, bias=False), rel=1e-10, abs=1e-12)
    assert s.min == x.min() and s.max == x.max()


@pytest.mark.parametrize("name", SAMPLES)
def test_quartiles_are_hyndman_fan_type_7(name):
    x = SAMPLES[name]
    s = describe(x)
    # Reference: numpy's default 'linear' method is Hyndman & Fan definition 7; pandas agrees.
    q1, med, q3 = np.percentile(x, [25, 50, 75], method="linear")
    assert (s.q1, s.median, s.q3) == pytest.approx((q1, med, q3), rel=1e-14)
    assert s.q1 == pytest.approx(pd.Series(x).quantile(0.25), rel=1e-14)
    assert s.iqr == pytest.approx(q3 - q1, rel=1e-12)


@pytest.mark.parametrize("name", ["normal", "skewed", "ties"])
def test_median_interval_matches_scipy_quantile_test(name):
    x = SAMPLES[name]
    s = describe(x, 0.95)
    # Reference: scipy.stats.quantile_test(...).confidence_interval, the binomial order-statistic
    # interval for a quantile (scipy >= 1.12).
    ci = stats.quantile_test(x, q=np.median(x), p=0.5).confidence_interval(0.95)
    assert (s.median_ci_low, s.median_ci_high) == (ci.low, ci.high)


def test_median_interval_ranks_for_ten_values():
    # From memory of the standard order-statistic table (Conover 1999): for n = 10 at 95 %,
    # the interval is (x_(2), x_(9)) with coverage 1 - 2 * 11/1024 = 0.9785.
    lower, upper, coverage = median_ci_ranks(10, 0.95)
    assert (lower, upper) == (2, 9)
    assert coverage == pytest.approx(1 - 2 * 11 / 1024)
    assert median_ci_ranks(5, 0.95) is None  # (x_(1), x_(5)) covers only 93.75 %


def test_outliers_beyond_tukey_fences():
    x = np.array([1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 40.0, -30.0])
    s = describe(x)
    q1, q3 = np.percentile(x, [25, 75])
    fences = (q1 - 1.5 * (q3 - q1), q3 + 1.5 * (q3 - q1))
    assert s.outliers == int(((x < fences[0]) | (x > fences[1])).sum()) == 2


def test_shares_within_sd():
    x = SAMPLES["normal"]
    s = describe(x)
    d = np.abs(x - x.mean())
    assert s.share_within_1sd == np.mean(d <= x.std(ddof=1))
    assert s.share_within_2sd == np.mean(d <= 2 * x.std(ddof=1))


def test_normality_test_choice_and_values():
    x = SAMPLES["skewed"]
    s = describe(x)
    assert s.normality_test == "shapiro-wilk"
    assert s.normality_p == pytest.approx(stats.shapiro(x).pvalue, rel=1e-12)
    big = np.random.default_rng(3).normal(size=6000)
    s = describe(big)
    assert s.normality_test == "dagostino-pearson"
    assert s.normality_p == pytest.approx(stats.normaltest(big).pvalue, rel=1e-12)


def exact_sd(values) -> float:
    """Standard deviation of the given doubles in exact rational arithmetic (independent check)."""
    xs = [Fraction(float(v)) for v in values]
    mean = sum(xs) / len(xs)
    var = sum((x - mean) ** 2 for x in xs) / (len(xs) - 1)
    return float(var) ** 0.5


def test_nist_numacc4_large_offset():
    # NIST StRD univariate "NumAcc4": 10000000.2 followed by 500 pairs 10000000.1, 10000000.3;
    # certified mean 10000000.2, certified sd 0.1 (from memory of the NIST StRD pages).
    x = np.array([10000000.2] + [10000000.1, 10000000.3] * 500)
    s = describe(x)
    assert s.mean == pytest.approx(10000000.2, rel=1e-15)
    # The decimals are not exact in binary; the exact sd of the stored doubles is the reference,
    # and the certified 0.1 is met to 8 significant digits (NIST's own expectation for this set).
    assert s.sd == pytest.approx(exact_sd(x), rel=1e-9)
    assert s.sd == pytest.approx(0.1, rel=1e-8)
    with np.errstate(invalid="ignore"):
        naive = np.sqrt((np.sum(x * x) - np.sum(x) ** 2 / len(x)) / (len(x) - 1))
    assert abs(naive - 0.1) > 1e-3 or np.isnan(naive), "the naive formula fails here (sanity check)"


def test_nist_numacc1():
    # NIST StRD "NumAcc1": 10000001, 10000003, 10000002; certified mean 10000002, sd 1 (from memory).
    s = describe(np.array([10000001.0, 10000003.0, 10000002.0]))
    assert s.mean == 10000002.0
    assert s.sd == 1.0


def test_two_close_values_with_large_offset():
    s = describe(np.array([10_000_000.1, 10_000_000.3]))
    assert s.sd == pytest.approx(exact_sd([10_000_000.1, 10_000_000.3]), rel=1e-9)


def test_undefined_values_are_none_with_reasons():
    one = describe(np.array([4.0]))
    assert one.mean == 4.0 and one.sd is None and one.ci_low is None
    assert "sd" in one.reasons and one.normality_p is None
    same = describe(np.array([2.0, 2.0, 2.0, 2.0]))
    assert same.sd == 0.0 and same.skewness is None and "skewness" in same.reasons
    empty = describe(np.array([np.nan, np.nan]))
    assert empty.n == 0 and empty.missing == 2 and empty.mean is None


def test_histogram_edges_are_bounded():
    edges = histogram_edges(np.random.default_rng(1).normal(size=100_000))
    assert 5 <= len(edges) - 1 <= 40
    assert len(histogram_edges(np.array([1.0, 1.0]))) == 2


@pytest.mark.parametrize(
    "name, centre",
    [("NumAcc2", 1.2), ("NumAcc3", 1000000.2), ("NumAcc4", 10000000.2)],
)
def test_every_value_of_nist_numacc_lies_within_one_sd(name, centre):
    # NIST StRD univariate NumAcc2/3/4: the centre value then 500 pairs centre ∓ 0.1; certified
    # mean = centre, sd = 0.1 (from memory of the NIST StRD pages), so every value is exactly
    # 0 or 1 SD from the mean: the share within 1 SD is 100 %. Before the boundary tolerance
    # NumAcc3 and NumAcc4 gave 50.05 % (rounding put the ∓0.1 values either side of the SD).
    x = np.array([centre] + [round(centre - 0.1, 1), round(centre + 0.1, 1)] * 500)
    s = describe(x)
    assert s.share_within_1sd == 1.0, name
    assert s.share_within_2sd == 1.0, name


def test_share_within_sd_still_leaves_out_values_clearly_beyond():
    # Reference: direct count (common practice definition): 1, 2, 3, 4, 100 has mean 22 and
    # sd ≈ 43.6, so only 100 (78 from the mean) lies beyond 1 SD; a tolerance of a few ulps
    # cannot move it.
    x = np.array([1.0, 2.0, 3.0, 4.0, 100.0])
    s = describe(x)
    assert s.share_within_1sd == pytest.approx(0.8)


@pytest.mark.parametrize("engine_name", ["memory", "stream"])
def test_numacc3_share_within_one_sd_is_the_same_streamed(tmp_path, monkeypatch, engine_name):
    # NIST StRD univariate NumAcc3 (certified sd 0.1, every value 0 or 1 SD from the mean;
    # from memory), read from a CSV by each engine: both count every value within 1 SD.
    from sitebuild.ingest import read_table
    from sitebuild.manifest import DatasetSpec, SiteSettings
    from sitebuild.sections import summaries
    from sitebuild.streaming import engine

    # Groups up to engine.SMALL values are kept whole and summarised in memory; lower it so
    # the streamed counting pass is the one tested.
    monkeypatch.setattr(engine, "SMALL", 100)

    values = ["1000000.2"] + ["1000000.1", "1000000.3"] * 500
    path = tmp_path / "numacc3.csv"
    path.write_text("g,v\n" + "".join(f"a,{v}\n" for v in values), encoding="utf-8")
    spec = DatasetSpec(
        name="t", file=path.name, path=path, group="g", measures=("v",), engine=engine_name
    )
    out = summaries.compute(read_table(spec), SiteSettings(), None, {})
    shares = {row["group"]: row["share_within_1sd"] for row in out["summaries"]}
    assert set(shares.values()) == {1.0}
