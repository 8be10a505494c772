"""Comparisons and fits from moments alone: (n, mean, variance) per group, co-moments per pair.

Like ``scipy.stats.ttest_ind_from_stats``: these take the summaries a streamed or distributed
read produces exactly (merged by Chan, Golub & LeVeque), so Welch's t, both ANOVAs, Tukey–Kramer,
Games–Howell, Hedges' g, TOST, the detectable difference, Pearson's r and the straight-line fit
are the same numbers whether the rows were in memory or not. Each function here builds the
moment objects the array versions use and calls them, so there is one formula per statistic.

Rank statistics (Mann–Whitney, Hodges–Lehmann, Cliff's delta, Kruskal–Wallis, Spearman,
Kendall), the Brown–Forsythe spread test (absolute deviations from the median), Dunnett's
test (multivariate t from the values) and the permutation test need the values themselves.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

# Pearson's r and the straight line from co-moments live beside their array versions.
from .correlation import pearson_from_comoments as pearson_from_stats
from .curvature import straight_line_from_comoments as straight_line_from_stats
from .omnibus import (
    AnovaResult,
    GroupMoments,
    SpreadResult,
    WelchAnovaResult,
    one_way_anova,
    welch_anova,
)
from .pairwise import (
    EffectInterval,
    EquivalenceResult,
    FamilyPair,
    Sample,
    WelchTResult,
    detectable_difference,
    games_howell,
    hedges_g,
    tost_welch,
    tukey_hsd,
    welch_t,
)

_NO_VALUES = np.zeros(0)


def moment_sample(n: int, mean: float, variance: float) -> Sample:
    """Return a :class:`~sitebuild.stats.pairwise.Sample` holding only moments (no values).

    Only the moment-based functions may be given it; rank functions need ``sorted``.

    Examples
    --------
    >>> moment_sample(3, 2.0, 1.0).sd
    1.0
    """
    return Sample(_NO_VALUES, int(n), float(mean), float(variance))


def _group(n: int, mean: float, variance: float) -> GroupMoments:
    n = int(n)
    return GroupMoments(n, float(mean), float(variance) * (n - 1) if n > 1 else 0.0)


def welch_t_from_stats(
    n1: int, mean1: float, var1: float, n2: int, mean2: float, var2: float,
    confidence: float = 0.95,
) -> WelchTResult:  # fmt: skip
    """Return Welch's t-test and interval of mean1 − mean2 from each group's n, mean, variance.

    Notes
    -----
    As :func:`~sitebuild.stats.pairwise.welch_t` (Welch 1947; Satterthwaite 1946).

    References
    ----------
    Welch, B. L. (1947). Biometrika 34(1/2), 28–35.

    Examples
    --------
    >>> round(welch_t_from_stats(4, 2.5, 5 / 3, 4, 5.0, 20 / 3).df, 3)
    4.412
    """
    return welch_t(moment_sample(n1, mean1, var1), moment_sample(n2, mean2, var2), confidence)


def hedges_g_from_stats(
    n1: int, mean1: float, var1: float, n2: int, mean2: float, var2: float,
    confidence: float = 0.95,
) -> EffectInterval:  # fmt: skip
    """Return Hedges' g of group 1 against group 2 and its interval, from moments.

    Notes
    -----
    As :func:`~sitebuild.stats.pairwise.hedges_g` (pooled SD, J = 1 − 3/(4(n1+n2) − 9)).

    References
    ----------
    Hedges, L. V. & Olkin, I. (1985). Statistical Methods for Meta-Analysis, ch. 5.

    Examples
    --------
    >>> round(hedges_g_from_stats(3, 2.0, 1.0, 3, 3.0, 1.0).estimate, 4)
    -0.8
    """
    return hedges_g(moment_sample(n1, mean1, var1), moment_sample(n2, mean2, var2), confidence)


def tost_from_stats(
    n1: int, mean1: float, var1: float, n2: int, mean2: float, var2: float,
    margin: float, alpha: float = 0.05,
) -> EquivalenceResult:  # fmt: skip
    """Return the two one-sided Welch tests of |mean1 − mean2| < margin, from moments.

    Notes
    -----
    As :func:`~sitebuild.stats.pairwise.tost_welch`.

    References
    ----------
    Schuirmann, D. J. (1987). J. Pharmacokinet. Biopharm. 15(6), 657–680.

    Examples
    --------
    >>> tost_from_stats(4, 2.5, 5 / 3, 4, 2.75, 1.75, margin=3).equivalent
    True
    """
    return tost_welch(moment_sample(n1, mean1, var1), moment_sample(n2, mean2, var2), margin, alpha)


def detectable_difference_from_stats(
    n1: int, var1: float, n2: int, var2: float, alpha: float = 0.05, power: float = 0.8
) -> float:
    """Return the mean difference a Welch t-test detects with ``power`` at ``alpha``.

    Notes
    -----
    As :func:`~sitebuild.stats.pairwise.detectable_difference`; means do not enter.

    References
    ----------
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.

    Examples
    --------
    >>> round(detectable_difference_from_stats(30, 77.5, 30, 77.5), 2)
    6.48
    """
    return detectable_difference(
        moment_sample(n1, 0.0, var1), moment_sample(n2, 0.0, var2), alpha, power
    )


def one_way_anova_from_stats(
    ns: Sequence[int], means: Sequence[float], variances: Sequence[float]
) -> AnovaResult:
    """Return the one-way ANOVA (F, df, p, eta², omega²) from each group's moments.

    Notes
    -----
    SS_within = Σ (n_i − 1) s_i², SS_between = Σ n_i (m_i − m)²; as
    :func:`~sitebuild.stats.omnibus.one_way_anova`.

    References
    ----------
    Fisher, R. A. (1925). Statistical Methods for Research Workers. Oliver & Boyd.

    Examples
    --------
    >>> round(one_way_anova_from_stats([3, 3], [2.0, 3.0], [1.0, 1.0]).statistic, 4)
    1.5
    """
    return one_way_anova([_group(*m) for m in zip(ns, means, variances, strict=True)])


def welch_anova_from_stats(
    ns: Sequence[int], means: Sequence[float], variances: Sequence[float]
) -> WelchAnovaResult:
    """Return Welch's heteroscedastic ANOVA from each group's moments.

    Notes
    -----
    As :func:`~sitebuild.stats.omnibus.welch_anova` (w_i = n_i / s_i²).

    References
    ----------
    Welch, B. L. (1951). Biometrika 38(3/4), 330–336.

    Examples
    --------
    >>> welch_anova_from_stats([4, 4, 4], [2.5, 5.0, 6.75], [5 / 3, 20 / 3, 2.9167]).df1
    2.0
    """
    return welch_anova([_group(*m) for m in zip(ns, means, variances, strict=True)])


def brown_forsythe_from_stats(
    ns: Sequence[int], means: Sequence[float], variances: Sequence[float]
) -> SpreadResult:
    """Return the Brown–Forsythe test of equal spread from the moments of each group's
    absolute deviations from its own median (n, mean and variance of |x − median|).

    A streamed read knows each group's exact median after its order-statistic passes, so one
    more pass merges these moments exactly.

    Notes
    -----
    The one-way ANOVA F of z_ij = |x_ij − median_i|; as
    :func:`~sitebuild.stats.omnibus.spread_test` with ``center="median"``.

    References
    ----------
    Brown, M. B. & Forsythe, A. B. (1974). Robust tests for the equality of variances.
    JASA 69(346), 364–367.

    Examples
    --------
    >>> brown_forsythe_from_stats([4, 4], [1.0, 2.0], [1 / 3, 4 / 3]).df2
    6
    """
    res = one_way_anova_from_stats(ns, means, variances)
    return SpreadResult(res.statistic, res.df1, res.df2, res.pvalue, "median")


def tukey_hsd_from_stats(
    ns: Sequence[int], means: Sequence[float], variances: Sequence[float]
) -> list[FamilyPair]:
    """Return Tukey–Kramer p-values for all pairs (a < b) from each group's moments.

    Notes
    -----
    As :func:`~sitebuild.stats.pairwise.tukey_hsd` (MS_within pooled from the variances).

    References
    ----------
    Kramer, C. Y. (1956). Biometrics 12(3), 307–310.

    Examples
    --------
    >>> round(tukey_hsd_from_stats([3, 3, 3], [2.0, 3.0, 7.0], [1.0, 1.0, 1.0])[0].pvalue, 3)
    0.483
    """
    return tukey_hsd([moment_sample(*m) for m in zip(ns, means, variances, strict=True)])


def games_howell_from_stats(
    ns: Sequence[int], means: Sequence[float], variances: Sequence[float]
) -> list[FamilyPair]:
    """Return Games–Howell p-values for all pairs (a < b) from each group's moments.

    Notes
    -----
    As :func:`~sitebuild.stats.pairwise.games_howell`.

    References
    ----------
    Games, P. A. & Howell, J. F. (1976). J. Educ. Stat. 1(2), 113–125.

    Examples
    --------
    >>> len(games_howell_from_stats([3, 3, 3], [2.0, 3.3, 7.3], [1.0, 2.3, 2.3]))
    3
    """
    return games_howell([moment_sample(*m) for m in zip(ns, means, variances, strict=True)])


def is_flat(variance: float) -> bool:
    """Return True when a group's variance says it has no variation (zero or undefined).

    Examples
    --------
    >>> is_flat(0.0), is_flat(2.5)
    (True, False)
    """
    return not (variance > 0 and math.isfinite(variance))


__all__ = [
    "brown_forsythe_from_stats",
    "detectable_difference_from_stats",
    "games_howell_from_stats",
    "hedges_g_from_stats",
    "is_flat",
    "moment_sample",
    "one_way_anova_from_stats",
    "pearson_from_stats",
    "straight_line_from_stats",
    "tost_from_stats",
    "tukey_hsd_from_stats",
    "welch_anova_from_stats",
    "welch_t_from_stats",
]
