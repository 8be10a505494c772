"""Trends over time per group: each group's straight-line slope of a measure on a time axis,
with its interval, and whether the groups' trends differ, from moments (exact on streamed
data too; see :mod:`sitebuild.stats.ancova`)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from scipy import stats

from .ancova import XYMoments, slope_check


@dataclass(frozen=True)
class GroupTrend:
    """One group's least-squares slope of y on time, per time unit, with its interval."""

    n: int
    slope: float
    se: float
    ci_low: float
    ci_high: float
    pvalue: float  # for a slope of zero


@dataclass(frozen=True)
class Trends:
    """Every group's trend and the test of whether the trends differ (group × time)."""

    groups: tuple[GroupTrend, ...]
    differ_statistic: float
    differ_df1: float
    differ_df2: float
    differ_p: float
    confidence: float


def group_trend(m: XYMoments, confidence: float = 0.95) -> GroupTrend:
    """Return one group's slope of y on x with its own residual variance (simple regression).

    Notes
    -----
    b = Sxy / Sxx; residual variance s² = (Syy − b Sxy) / (n − 2); se(b) = √(s² / Sxx);
    interval b ± t_{1−α/2, n−2} se(b); p from Student's t on n − 2 degrees of freedom.

    References
    ----------
    Draper, N. R. & Smith, H. (1998). Applied Regression Analysis, 3rd ed., ch. 1.

    Examples
    --------
    >>> import numpy as np
    >>> t = group_trend(XYMoments.of(np.arange(6.0), np.array([1.0, 1.9, 3.2, 3.9, 5.1, 6.0])))
    >>> round(t.slope, 3)
    1.009
    """
    nan = math.nan
    if m.n < 3 or not m.sxx > 0:
        return GroupTrend(m.n, nan, nan, nan, nan, nan)
    b = m.sxy / m.sxx
    resid = max(m.syy - b * m.sxy, 0.0) / (m.n - 2)
    se = math.sqrt(resid / m.sxx)
    q = float(stats.t.ppf(0.5 + confidence / 2, m.n - 2))
    p = float(2 * stats.t.sf(abs(b / se), m.n - 2)) if se > 0 else nan
    return GroupTrend(m.n, b, se, b - q * se, b + q * se, p)


def trends(groups: Sequence[XYMoments], confidence: float = 0.95) -> Trends:
    """Return each group's trend and the F test of whether the trends differ.

    The test is the group × time interaction of ``y ~ C(g) * t`` (see
    :func:`sitebuild.stats.ancova.slope_check`); each group's interval uses its own residual
    spread (:func:`group_trend`).

    Examples
    --------
    >>> import numpy as np
    >>> a = XYMoments.of(np.arange(8.0), np.arange(8.0) * 2 + np.array([0, .1, -.1, 0, .2, 0, -.2, 0]))
    >>> b = XYMoments.of(np.arange(8.0), np.array([5, 5.1, 4.9, 5, 5.2, 5, 4.8, 5]))
    >>> trends([a, b]).differ_p < 0.001
    True
    """
    check = slope_check(groups, confidence)
    return Trends(
        groups=tuple(group_trend(m, confidence) for m in groups),
        differ_statistic=check.statistic,
        differ_df1=check.df1,
        differ_df2=check.df2,
        differ_p=check.pvalue,
        confidence=confidence,
    )
