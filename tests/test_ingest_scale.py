"""Fast paths for big tables give the same answers as the plain definitions.

References: pandas factorize/astype and numpy lexsort/sort/percentile (the plain definitions
the fast paths replace), scipy.stats.normaltest for the moment-based D'Agostino–Pearson test.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from sitebuild.ingest import group_codes, natural_key
from sitebuild.sections.summaries import _sorted_by_group
from sitebuild.stats.summary import dagostino_pearson, histogram_edges, histogram_edges_from


def _plain_labels(raw: pd.Series):
    """The per-row definition: text as written, float codes 1.0 -> "1", tokens missing."""
    out = []
    for v in raw.astype(object):
        if v is None or (isinstance(v, float) and np.isnan(v)):
            out.append(None)
        elif isinstance(v, float):
            out.append(str(int(v)) if v.is_integer() else repr(v))
        else:
            text = str(v)
            out.append(None if text.strip() in ("", "NA", "n/a", "-", "null") else text)
    groups = sorted(dict.fromkeys(t for t in out if t is not None), key=natural_key)
    codes = [groups.index(t) if t is not None else -1 for t in out]
    return np.array(codes), tuple(groups)


@pytest.mark.parametrize(
    "raw",
    [
        pd.Series(["Line 10", "Line 2", " n/a ", "NA", None, "line 2", "<b>x</b>", "Line 2"]),
        pd.Series([1.0, 2.5, np.nan, 1.0, 10.0, 3.0]),
        pd.Series([3, 1, 2, 1, 10]),
        pd.Series([1, "1", None, "x", "-"], dtype=object),
    ],
    ids=["text", "float-codes", "integers", "mixed-json"],
)
def test_group_codes_match_the_per_row_definition(raw):
    codes, groups = group_codes(raw)
    want_codes, want_groups = _plain_labels(raw)
    assert groups == want_groups
    np.testing.assert_array_equal(codes, want_codes)


def test_group_codes_on_a_million_rows_is_quick():
    import time

    labels = np.array([f"Line {i}" for i in range(8)], dtype=object)
    raw = pd.Series(labels[np.random.default_rng(1).integers(0, 8, 1_000_000)], dtype="str")
    start = time.perf_counter()
    codes, groups = group_codes(raw)
    assert time.perf_counter() - start < 1.0  # common practice: well under the read itself
    assert groups[0] == "Line 0" and groups[-1] == "Line 7"
    np.testing.assert_array_equal(np.array(groups)[codes], raw.to_numpy())


def test_one_sort_per_measure_equals_lexsort_and_full_sort():
    rng = np.random.default_rng(2)
    values = rng.normal(size=100_000)
    values[rng.random(values.size) < 0.05] = np.nan
    codes = rng.integers(0, 7, values.size).astype(np.int32)
    ordered, bounds, missing, everything = _sorted_by_group(values, codes, 7)
    keep = ~np.isnan(values)
    order = np.lexsort((values[keep], codes[keep]))
    np.testing.assert_array_equal(ordered, values[keep][order])
    np.testing.assert_array_equal(everything, np.sort(values[keep]))
    np.testing.assert_array_equal(missing, np.bincount(codes[~keep], minlength=7))
    np.testing.assert_array_equal(bounds, np.searchsorted(codes[keep][order], np.arange(8)))


def test_histogram_edges_from_five_numbers_equal_the_full_version():
    rng = np.random.default_rng(3)
    for values in (rng.normal(size=9999), rng.lognormal(size=1234), np.round(rng.normal(size=500))):
        q1, q3 = np.percentile(values, [25, 75])
        got = histogram_edges_from(values.size, values.min(), values.max(), q1, q3)
        np.testing.assert_array_equal(got, histogram_edges(values))


@pytest.mark.parametrize("n", [8, 30, 5001, 200_000])
def test_dagostino_pearson_from_moments_matches_scipy(n):
    # Reference: scipy.stats.normaltest on the values (D'Agostino & Pearson 1973).
    rng = np.random.default_rng(n)
    for values in (rng.normal(size=n), rng.exponential(size=n), rng.standard_t(4, size=n)):
        d = values - values.mean()
        m2 = np.mean(d * d)
        got = dagostino_pearson(n, np.mean(d**3) / m2**1.5, np.mean(d**4) / m2**2)
        want = stats.normaltest(values)
        assert got.statistic == pytest.approx(want.statistic, rel=1e-9)
        assert got.pvalue == pytest.approx(want.pvalue, rel=1e-9, abs=1e-300)
