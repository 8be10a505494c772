"""sitebuild.stats.distributions against scipy.stats (the reference: same values to the last
bit, signs of zero included), over a grid that includes the edges of each argument."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy import stats

from sitebuild.stats import distributions as D

QS = [0.0, 1e-300, 1e-12, 0.001, 0.025, 0.05, 0.3, 0.5, 0.8, 0.95, 0.975, 1 - 1e-12, 1.0]
QS_BAD = [-0.1, 1.1, np.nan]
XS = [-np.inf, -40.0, -5.0, -1.96, -0.5, -0.0, 0.0, 1e-9, 0.5, 1.96, 5.0, 40.0, np.inf, np.nan]
DFS = [-1.0, 0.0, 1e-3, 0.5, 1.0, 2.0, 3.5, 10.0, 29.7, 100.0, 1e6, np.inf, np.nan]


def same(ours: float, theirs) -> bool:
    theirs = float(theirs)
    if np.isnan(theirs):
        return np.isnan(ours)
    return ours == theirs and (ours != 0 or np.signbit(ours) == np.signbit(theirs))


@pytest.mark.parametrize("q", QS + QS_BAD)
def test_normal_quantile(q):
    assert same(D.norm_ppf(q), stats.norm.ppf(q))


@pytest.mark.parametrize("x", XS)
def test_normal_upper_tail(x):
    assert same(D.norm_sf(x), stats.norm.sf(x))


@pytest.mark.parametrize("q, df", list(itertools.product(QS + QS_BAD, DFS)))
def test_t_quantile(q, df):
    assert same(D.t_ppf(q, df), stats.t.ppf(q, df))


@pytest.mark.parametrize("x, df", list(itertools.product(XS, DFS)))
def test_t_tails(x, df):
    assert same(D.t_sf(x, df), stats.t.sf(x, df))
    assert same(D.t_cdf(x, df), stats.t.cdf(x, df))


def test_random_arguments():
    rng = np.random.default_rng(7)
    for q, df, x in zip(
        rng.random(500), rng.gamma(2.0, 10.0, 500), rng.normal(0, 4, 500), strict=True
    ):
        assert same(D.t_ppf(q, df), stats.t.ppf(q, df))
        assert same(D.t_sf(x, df), stats.t.sf(x, df))
        assert same(D.norm_ppf(q), stats.norm.ppf(q))
        assert same(D.norm_sf(x), stats.norm.sf(x))
