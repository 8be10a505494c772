"""sitebuild.stats.ordering.sorting_order: a true sorting permutation on awkward doubles, and
ranks from it equal to scipy.stats.rankdata (the reference library) on the same values."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from sitebuild.stats.correlation import rank_average
from sitebuild.stats.ordering import sorting_order

rng = np.random.default_rng(11)


def _cluster_among_spread() -> np.ndarray:
    # 300 values closer together than the kept bits, among 49,700 spread ones: the stretch
    # that holds them is sorted again on its own (not the whole column).
    v = rng.normal(size=50_000)
    v[:300] = 0.75 + rng.integers(0, 40, 300) * 2.0**-52
    rng.shuffle(v)
    return v


CASES = {
    "normal": rng.normal(size=50_000),
    "a close cluster among spread values": _cluster_among_spread(),
    "rounded, many ties": rng.normal(size=50_000).round(1),
    # Differences far below the kept bits: every stretch must be sorted again by value.
    "a large offset with tiny steps": 1e12 + rng.integers(0, 1000, 50_000) * 1e-3,
    "steps of one unit in the last place": 1.0 + rng.integers(0, 50, 50_000) * 2.0**-52,
    "signed zeros, infinities, subnormals": rng.choice(
        [-0.0, 0.0, np.inf, -np.inf, 1.0, -1.0, 5e-324, -5e-324, 2.2e-308], 50_000
    ),
    "near the largest double": rng.normal(size=50_000) * 1e307,
    "already sorted": np.sort(rng.normal(size=50_000)),
    "reversed": np.sort(rng.normal(size=50_000))[::-1].copy(),
    "small (argsort path)": rng.normal(size=100),
    "with NaN (argsort path)": np.where(rng.random(50_000) < 0.01, np.nan, rng.normal(size=50_000)),
}


@pytest.mark.parametrize("name", list(CASES))
def test_the_order_sorts_and_is_a_permutation(name):
    v = CASES[name]
    order, ordered = sorting_order(v)
    assert order.dtype == np.int64
    assert np.array_equal(np.sort(order), np.arange(v.size))
    assert np.array_equal(ordered, v[order], equal_nan=True)
    finite = ordered[~np.isnan(ordered)]
    assert np.all(finite[1:] >= finite[:-1])
    assert np.all(np.isnan(ordered[finite.size :]))  # NaN last, as argsort puts them


@pytest.mark.parametrize("name", [n for n in CASES if "NaN" not in n])
def test_ranks_match_scipy_rankdata(name):
    v = CASES[name]
    np.testing.assert_array_equal(rank_average(v), stats.rankdata(v, method="average"))


def test_a_close_cluster_is_sorted_again_without_falling_back(monkeypatch):
    from sitebuild.stats import ordering

    whole = []
    real = np.argsort
    monkeypatch.setattr(ordering.np, "argsort", lambda a, **k: whole.append(a.size) or real(a, **k))
    order, ordered = sorting_order(CASES["a close cluster among spread values"])
    assert np.all(ordered[1:] >= ordered[:-1])
    assert whole and max(whole) < 1000  # only the cluster's stretch was argsorted
