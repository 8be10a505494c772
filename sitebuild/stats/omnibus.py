"""Omnibus tests across k groups: one-way ANOVA, Welch's ANOVA, Kruskal–Wallis and the
Brown–Forsythe test of equal spread, with their effect sizes.

Sums of squares are computed from centred data (two passes: a mean, then deviations from it),
so data with many constant leading digits keep their precision; the NIST StRD one-way ANOVA
datasets are the check. Group means are formed from values shifted by a pivot (a value near
the data, subtracted exactly), so the between-group sums see the small differences between
the means rather than the rounding of numbers near 1e12 (NIST StRD SmLs07-09).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class GroupMoments:
    """Size, mean and sum of squared deviations of one group, computed stably."""

    n: int
    mean: float
    ss: float  # sum of (x - mean)^2

    @property
    def variance(self) -> float:
        return self.ss / (self.n - 1) if self.n > 1 else math.nan


def group_moments(values: np.ndarray) -> GroupMoments:
    """Return n, mean and centred sum of squares of ``values`` (two-pass, corrected).

    Notes
    -----
    m = Σx/n; d = x − m; mean = m + Σd/n; ss = Σd² − (Σd)²/n (the corrected two-pass
    algorithm). The correction terms remove most of the rounding error of the first pass.

    References
    ----------
    Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
    variance: analysis and recommendations. The American Statistician 37(3).

    Examples
    --------
    >>> group_moments(np.array([1.0, 2.0, 3.0])).ss
    2.0
    """
    x = np.asarray(values, dtype=float)
    n = int(x.size)
    if n == 0:
        return GroupMoments(0, math.nan, math.nan)
    mean = float(x.sum() / n)
    dev = x - mean
    total = float(dev.sum())
    # Corrected two-pass sum of squares: the rounded first mean is subtracted exactly, and
    # (Σ dev)² / n removes what its rounding adds (it matters when the mean itself cannot be
    # held to the precision of the spread, e.g. values near 1e12 differing by 0.1).
    ss = max(float(np.dot(dev, dev)) - total * total / n, 0.0)
    return GroupMoments(n, mean + total / n, ss)


def _pivot(groups: Sequence[np.ndarray]) -> float:
    """A value inside the data's range (the mean of the first non-empty group, as a double).

    x − pivot is exact when x and the pivot are within a factor of two (Sterbenz's lemma), so
    shifted values keep every digit by which the groups differ, however large the offset.
    """
    for g in groups:
        x = np.asarray(g, dtype=float)
        if x.size:
            pivot = float(x.mean())
            return pivot if math.isfinite(pivot) else 0.0
    return 0.0


def moments_of(groups: Sequence[np.ndarray] | Sequence[GroupMoments]) -> list[GroupMoments]:
    """Moments of each group; the means are relative to one common pivot.

    Every statistic built here depends only on differences of means and on centred sums of
    squares, both unchanged by a common shift, so the shifted means are used as they are.
    The sums of squares come from the unshifted values. Moments given as such (streamed data,
    :mod:`sitebuild.stats.from_moments`; their means may be relative to any common pivot)
    are used as they are.
    """
    if groups and all(isinstance(g, GroupMoments) for g in groups):
        moments = list(groups)
    else:
        moments = _array_moments(groups)
    if len(moments) < 2:
        raise ValueError("need at least two groups")
    if any(m.n < 1 for m in moments):
        raise ValueError("every group needs at least one value")
    return moments


def _array_moments(groups: Sequence[np.ndarray]) -> list[GroupMoments]:
    pivot = _pivot(groups)
    moments = []
    for g in groups:
        x = np.asarray(g, dtype=float)
        own = group_moments(x)  # the spread from the values themselves: shifting could round
        # away differences far below the pivot's precision (values near 5e-324 beside 1.0)
        moments.append(GroupMoments(own.n, group_moments(x - pivot).mean, own.ss))
    return moments


def _pooled_mean(moments: list[GroupMoments]) -> float:
    n = sum(m.n for m in moments)
    # Weighted mean of group means, refined against the group means themselves (all near it).
    grand = sum(m.n * m.mean for m in moments) / n
    grand += sum(m.n * (m.mean - grand) for m in moments) / n
    return grand


@dataclass(frozen=True)
class AnovaResult:
    """One-way analysis of variance with equal variances assumed."""

    statistic: float  # F
    df1: int
    df2: int
    pvalue: float
    ss_between: float
    ss_within: float
    ms_between: float
    ms_within: float
    eta_squared: float
    omega_squared: float

    @property
    def r_squared(self) -> float:
        return self.eta_squared

    @property
    def residual_sd(self) -> float:
        return math.sqrt(self.ms_within)


def one_way_anova(groups: Sequence[np.ndarray]) -> AnovaResult:
    """Return F, degrees of freedom, p-value, sums of squares, eta² and omega² of a one-way ANOVA.

    Notes
    -----
    SS_between = Σ n_i (m_i − m)², SS_within = Σ_i Σ_j (x_ij − m_i)², both from centred values;
    F = (SS_between/(k−1)) / (SS_within/(N−k)) on (k−1, N−k) degrees of freedom.
    eta² = SS_between / SS_total; omega² = (SS_between − (k−1) MS_within) / (SS_total + MS_within)
    (less biased than eta²; may be slightly negative, reported as computed).

    References
    ----------
    Fisher, R. A. (1925). Statistical Methods for Research Workers. Oliver & Boyd.
    Hays, W. L. (1963). Statistics for Psychologists (omega squared). Holt, Rinehart & Winston.
    NIST StRD one-way ANOVA datasets (certified values), https://www.itl.nist.gov/div898/strd/.

    Examples
    --------
    >>> round(one_way_anova([np.array([1., 2, 3]), np.array([2., 3, 4])]).statistic, 4)
    1.5
    """
    moments = moments_of(groups)
    k = len(moments)
    n = sum(m.n for m in moments)
    if n - k < 1:
        raise ValueError("need more values than groups")
    grand = _pooled_mean(moments)
    ss_between = float(sum(m.n * (m.mean - grand) ** 2 for m in moments))
    ss_within = float(sum(m.ss for m in moments))
    df1, df2 = k - 1, n - k
    ms_between = ss_between / df1
    ms_within = ss_within / df2
    ss_total = ss_between + ss_within
    if ms_within > 0:
        f = ms_between / ms_within
        p = float(stats.f.sf(f, df1, df2))
    else:
        f, p = (math.inf, 0.0) if ms_between > 0 else (math.nan, math.nan)
    eta = ss_between / ss_total if ss_total > 0 else math.nan
    omega = (ss_between - df1 * ms_within) / (ss_total + ms_within) if ss_total > 0 else math.nan
    return AnovaResult(
        statistic=float(f),
        df1=df1,
        df2=df2,
        pvalue=p,
        ss_between=ss_between,
        ss_within=ss_within,
        ms_between=ms_between,
        ms_within=ms_within,
        eta_squared=float(eta),
        omega_squared=float(omega),
    )


@dataclass(frozen=True)
class WelchAnovaResult:
    """Welch's heteroscedastic one-way ANOVA."""

    statistic: float
    df1: float
    df2: float
    pvalue: float
    omega_squared: float  # estimate from Welch's F, see welch_anova Notes


def welch_anova(groups: Sequence[np.ndarray]) -> WelchAnovaResult:
    """Return Welch's F, its degrees of freedom and p-value for k groups with unequal variances.

    Notes
    -----
    w_i = n_i / s_i², W = Σ w_i, m̃ = Σ w_i m_i / W,
    A = Σ w_i (m_i − m̃)² / (k − 1), h = Σ (1 − w_i/W)² / (n_i − 1),
    F = A / (1 + 2 (k − 2) h / (k² − 1)) on (k − 1, (k² − 1) / (3 h)) degrees of freedom.
    Every group needs n_i ≥ 2 and s_i > 0. The effect size is the usual omega² estimate from F,
    (k − 1)(F − 1) / ((k − 1)(F − 1) + N), evaluated at Welch's F (an approximation).

    References
    ----------
    Welch, B. L. (1951). On the comparison of several mean values: an alternative approach.
    Biometrika 38(3/4), 330–336.

    Examples
    --------
    >>> r = welch_anova([np.array([1., 2, 3, 4]), np.array([2., 4, 6, 8]), np.array([5., 6, 7, 9])])
    >>> r.df1
    2.0
    """
    moments = moments_of(groups)
    if any(m.n < 2 or not m.ss > 0 for m in moments):
        raise ValueError("Welch's ANOVA needs at least two distinct values in every group")
    k = len(moments)
    n_total = sum(m.n for m in moments)
    w = np.array([m.n / m.variance for m in moments])
    means = np.array([m.mean for m in moments])
    ns = np.array([m.n for m in moments], dtype=float)
    big_w = w.sum()
    centre = float(np.dot(w, means) / big_w)
    centre += float(np.dot(w, means - centre) / big_w)
    a = float(np.dot(w, (means - centre) ** 2)) / (k - 1)
    h = float(np.sum((1 - w / big_w) ** 2 / (ns - 1)))
    f = a / (1 + 2 * (k - 2) * h / (k**2 - 1))
    df1 = float(k - 1)
    df2 = (k**2 - 1) / (3 * h) if h > 0 else math.inf
    p = float(stats.f.sf(f, df1, df2))
    omega = df1 * (f - 1) / (df1 * (f - 1) + n_total)
    return WelchAnovaResult(
        statistic=float(f), df1=df1, df2=float(df2), pvalue=p, omega_squared=omega
    )


@dataclass(frozen=True)
class KruskalResult:
    """Kruskal–Wallis rank test, tie-corrected."""

    statistic: float  # H
    df: int
    pvalue: float
    epsilon_squared: float
    tie_correction: float


def kruskal_wallis(
    groups: Sequence[np.ndarray],
    ranks: Sequence[np.ndarray] | None = None,
    runs: np.ndarray | None = None,
) -> KruskalResult:
    """Return the tie-corrected Kruskal–Wallis H, its df, p-value and epsilon².

    ``ranks`` (optional) are the mid-ranks of each group's values within the pooled sample,
    computed once by the caller and reused; otherwise they are computed here. ``runs``
    (optional, with ``ranks``) are the sizes of the runs of equal values in the pooled sample.

    Notes
    -----
    H = [12 / (N (N+1)) Σ R_i² / n_i − 3 (N+1)] / C, with C = 1 − Σ (t³ − t) / (N³ − N) over
    tie groups of size t; p from χ² on k − 1 df. epsilon² = H / ((N² − 1)/(N + 1)) = H / (N − 1).

    References
    ----------
    Kruskal, W. H. & Wallis, W. A. (1952). Use of ranks in one-criterion variance analysis.
    JASA 47(260), 583–621.
    Tomczak, M. & Tomczak, E. (2014). The need to report effect size estimates revisited.
    Trends in Sport Sciences 21(1) (epsilon squared for Kruskal–Wallis).

    Examples
    --------
    >>> round(kruskal_wallis([np.array([1., 2, 3]), np.array([4., 5, 6])]).statistic, 4)
    3.8571
    """
    k = len(groups)
    if k < 2:
        raise ValueError("need at least two groups")
    ns = np.array([len(g) for g in groups], dtype=float)
    if (ns < 1).any():
        raise ValueError("every group needs at least one value")
    given = ranks is not None and runs is not None  # then the values themselves are not needed
    pooled = None if given else np.concatenate([np.asarray(g, dtype=float) for g in groups])
    n = int(ns.sum())
    if ranks is None:
        all_ranks = stats.rankdata(pooled)
        bounds = np.cumsum(np.concatenate([[0], ns])).astype(int)
        ranks = [all_ranks[bounds[i] : bounds[i + 1]] for i in range(k)]
    sums = np.array([float(np.sum(r)) for r in ranks])
    if runs is None:
        _, counts = np.unique(pooled, return_counts=True)
    else:
        counts = runs  # the caller's pooled sort already has the sizes of equal-value runs
    tie_term = float(np.sum(counts.astype(float) ** 3 - counts))
    c = 1.0 - tie_term / (float(n) ** 3 - n) if n > 1 else math.nan
    # Σ R_i²/n_i − N(N+1)²/4 written as Σ n_i (R̄_i − (N+1)/2)² keeps precision for large N.
    centre = (n + 1) / 2.0
    spread = float(np.sum(ns * (sums / ns - centre) ** 2))
    h_raw = 12.0 / (n * (n + 1)) * spread
    if c > 0:
        h = h_raw / c
        p = float(stats.chi2.sf(h, k - 1))
    else:
        h, p = math.nan, math.nan
    eps = h / (n - 1) if n > 1 else math.nan
    return KruskalResult(
        statistic=float(h), df=k - 1, pvalue=p, epsilon_squared=float(eps), tie_correction=float(c)
    )


@dataclass(frozen=True)
class SpreadResult:
    """Brown–Forsythe (median-centred Levene) test of equal spread."""

    statistic: float
    df1: int
    df2: int
    pvalue: float
    center: str


def spread_test(groups: Sequence[np.ndarray], center: str = "median") -> SpreadResult:
    """Return the Brown–Forsythe (center="median") or Levene (center="mean") test of equal spread.

    Notes
    -----
    z_ij = |x_ij − c_i| with c_i the group median (Brown–Forsythe) or mean (Levene); the test is
    the one-way ANOVA F of the z_ij on (k − 1, N − k) degrees of freedom.

    References
    ----------
    Levene, H. (1960). Robust tests for equality of variances. In Contributions to Probability
    and Statistics, Stanford University Press.
    Brown, M. B. & Forsythe, A. B. (1974). Robust tests for the equality of variances.
    JASA 69(346), 364–367.

    Examples
    --------
    >>> spread_test([np.array([1., 2, 3, 4]), np.array([1., 3, 5, 7])]).df2
    6
    """
    if center not in ("median", "mean"):
        raise ValueError("center must be 'median' or 'mean'")
    pick = np.median if center == "median" else np.mean
    deviations = [np.abs(np.asarray(g, dtype=float) - pick(g)) for g in groups]
    res = one_way_anova(deviations)
    return SpreadResult(res.statistic, res.df1, res.df2, res.pvalue, center)
