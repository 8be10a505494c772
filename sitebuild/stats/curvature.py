"""Straight line or curve? A least-squares line, and the rule that flags relationships that
are strong but not straight (a smooth explains clearly more than the line)."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .loess import loess

# The rule's thresholds (our choice, documented on the page): the smooth must explain at
# least half the variance and at least 0.2 more than the line, both after adjustment for
# the degrees of freedom each one uses.
MIN_SMOOTH_R2 = 0.5
MIN_GAIN = 0.2
# ...and the gain must pass an approximate F-test of line against smooth, so that a handful
# of noisy points cannot look curved by chance (the false-alarm rate is measured in tests).
GAIN_ALPHA = 0.01
RULE = (
    "curved when the smooth's adjusted R² is at least 0.5 and at least 0.2 above the "
    "straight line's adjusted R², and an approximate F-test of the line against the smooth "
    "gives p below 0.01"
)


@dataclass(frozen=True)
class StraightLine:
    """Least-squares line y = intercept + slope x with a t interval for the slope."""

    n: int
    slope: float | None
    intercept: float | None
    slope_low: float | None
    slope_high: float | None
    slope_se: float | None
    p: float | None  # two-sided, H0: slope = 0
    r2: float | None
    level: float
    reason: str | None = None


@dataclass(frozen=True)
class CurvatureCheck:
    """Whether a smooth explains clearly more than a straight line, and the numbers behind it."""

    n: int
    linear_r2: float | None
    smooth_r2: float | None
    linear_adj_r2: float | None
    smooth_adj_r2: float | None
    smooth_df: float | None  # residual degrees of freedom charged to the smooth
    curved: bool
    reason: str | None = None


def straight_line(x, y, level: float = 0.95) -> StraightLine:
    """Return the ordinary least-squares line of y on x with a t interval for the slope.

    Notes
    -----
    slope = Sxy / Sxx, intercept = ybar - slope xbar, se = sqrt(RSS / (n - 2) / Sxx),
    interval slope -/+ t_{(1+level)/2, n-2} se, R^2 = 1 - RSS / Syy.

    References
    ----------
    Draper, N. R. & Smith, H. (1998). Applied Regression Analysis, 3rd ed., Wiley, ch. 1.

    Examples
    --------
    >>> round(straight_line([1, 2, 3, 4], [2, 4, 6, 8.5]).slope, 3)
    2.15
    """
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    keep = np.isfinite(x) & np.isfinite(y)
    if not keep.all():
        x, y = x[keep], y[keep]
    n = int(x.size)
    empty = StraightLine(n, None, None, None, None, None, None, None, level)
    if n < 3:
        return replace(empty, reason="fewer than 3 complete pairs")
    if x.min() == x.max():
        return replace(empty, reason="x has no variation")
    xbar, ybar = float(x.mean()), float(y.mean())
    dx = x - xbar
    dy = y - ybar
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        sxx = float(dx @ dx)
        syy = float(dy @ dy)
        sxy = float(dx @ dy)
    return straight_line_from_comoments(n, xbar, ybar, sxx, syy, sxy, level)


def straight_line_from_comoments(
    n: int, mean_x: float, mean_y: float, sxx: float, syy: float, sxy: float,
    level: float = 0.95, x_flat: bool = False,
) -> StraightLine:  # fmt: skip
    """Return the least-squares line of y on x from the n complete pairs' centred co-moments.

    ``sxx``, ``syy``, ``sxy`` are Σ(x − x̄)², Σ(y − ȳ)², Σ(x − x̄)(y − ȳ): a streamed read
    merges them exactly, so the line is the same as from the rows themselves.

    Notes
    -----
    As :func:`straight_line`: slope = Sxy / Sxx, RSS = Syy − slope² Sxx.

    References
    ----------
    Draper, N. R. & Smith, H. (1998). Applied Regression Analysis, 3rd ed., Wiley, ch. 1.

    Examples
    --------
    >>> round(straight_line_from_comoments(4, 2.5, 5.125, 5.0, 23.6875, 10.75).slope, 3)
    2.15
    """
    n = int(n)
    empty = StraightLine(n, None, None, None, None, None, None, None, level)
    if n < 3:
        return replace(empty, reason="fewer than 3 complete pairs")
    if x_flat or sxx == 0:
        return replace(empty, reason="x has no variation")
    # Squares that underflow to zero or overflow to infinity leave no usable line.
    if not (0.0 < sxx < np.inf and np.isfinite(syy) and np.isfinite(sxy)):
        return replace(empty, reason="the values are too extreme to fit a line in double precision")
    slope = sxy / sxx
    intercept = mean_y - slope * mean_x
    rss = max(syy - slope * slope * sxx, 0.0)
    r2 = 1.0 - rss / syy if syy > 0 else None
    from scipy import stats

    df = n - 2
    se = float(np.sqrt(rss / df / sxx))
    if se == 0.0:
        return StraightLine(n, slope, intercept, slope, slope, 0.0, 0.0, r2, level)
    quantile = float(stats.t.ppf(0.5 + level / 2.0, df))
    p = float(2.0 * stats.t.sf(abs(slope / se), df))
    return StraightLine(
        n, slope, intercept, slope - quantile * se, slope + quantile * se, se, p, r2, level
    )


def _adjusted(r2: float, n: int, residual_df: float) -> float | None:
    if residual_df <= 0 or n < 2:
        return None
    return 1.0 - (1.0 - r2) * (n - 1) / residual_df


def curvature_check(
    linear_r2: float | None,
    smooth_r2: float | None,
    n: int,
    smooth_df: float | None,
) -> CurvatureCheck:
    """Return whether the relationship is strong but not straight, by adjusted R².

    Notes
    -----
    Adjusted R² = 1 - (1 - R²)(n - 1) / df_resid, with df_resid = n - 2 for the line and,
    for the smooth, its residual degrees of freedom delta1 = tr((I - L)'(I - L)) (about
    n - 1.25 enp; Cleveland & Devlin 1988), so a wiggly smooth pays for its flexibility.
    Curved when adj R²_smooth >= 0.5 and adj R²_smooth - adj R²_line >= 0.2 (thresholds
    are our own choice; the false-alarm rate on pure noise is measured in the tests).

    References
    ----------
    Cleveland, W. S. & Devlin, S. J. (1988). JASA 83(403), 596-610 (delta1).
    Ezekiel, M. (1930). Methods of Correlation Analysis, Wiley (adjusted R²).

    Examples
    --------
    >>> curvature_check(0.01, 0.9, 100, 94.0).curved
    True
    """
    if linear_r2 is None or smooth_r2 is None or smooth_df is None:
        return CurvatureCheck(
            n, linear_r2, smooth_r2, None, None, smooth_df, False, "a fit is undefined"
        )
    adj_line = _adjusted(linear_r2, n, n - 2)
    adj_smooth = _adjusted(smooth_r2, n, smooth_df)
    if adj_line is None or adj_smooth is None:
        return CurvatureCheck(
            n,
            linear_r2,
            smooth_r2,
            adj_line,
            adj_smooth,
            smooth_df,
            False,
            "too few points for the smooth's degrees of freedom",
        )
    curved = adj_smooth >= MIN_SMOOTH_R2 and adj_smooth - adj_line >= MIN_GAIN
    if curved:
        curved = gain_p(linear_r2, smooth_r2, n, smooth_df) < GAIN_ALPHA
    return CurvatureCheck(n, linear_r2, smooth_r2, adj_line, adj_smooth, smooth_df, curved)


def gain_p(linear_r2: float, smooth_r2: float, n: int, smooth_df: float) -> float:
    """Return the p-value of the approximate F-test that the smooth fits no better than the line.

    Notes
    -----
    F = [(R²_s − R²_l) / (d_l − d_s)] / [(1 − R²_s) / d_s] on (d_l − d_s, d_s) degrees of
    freedom, with d_l = n − 2 and d_s = delta1, the smooth's residual degrees of freedom; the
    F reference distribution is the approximation Cleveland & Devlin (1988, section 4) use for
    comparing a loess fit with a parametric one.

    References
    ----------
    Cleveland, W. S. & Devlin, S. J. (1988). Locally weighted regression. JASA 83(403).

    Examples
    --------
    >>> gain_p(0.0, 0.9, 50, 44.0) < 1e-6
    True
    """
    from scipy import stats

    extra = (n - 2) - smooth_df
    if extra <= 0 or smooth_df <= 0:
        return 1.0
    if smooth_r2 >= 1.0:
        return 0.0
    f = ((smooth_r2 - linear_r2) / extra) / ((1.0 - smooth_r2) / smooth_df)
    return float(stats.f.sf(f, extra, smooth_df)) if f > 0 else 1.0


def strong_but_not_straight(
    x,
    y,
    span: float | str = 0.75,
    degree: int = 1,
    robust_iterations: int = 0,
) -> CurvatureCheck:
    """Return :func:`curvature_check` for a straight line and a LOESS fit of y on x.

    Notes
    -----
    Fits :func:`straight_line` and :func:`sitebuild.stats.loess.loess` (same settings),
    then applies the adjusted-R² rule of :func:`curvature_check`.

    References
    ----------
    See :func:`curvature_check`.

    Examples
    --------
    >>> x = np.linspace(-1, 1, 101)
    >>> strong_but_not_straight(x, x**2).curved
    True
    """
    line = straight_line(x, y)
    smooth = loess(x, y, span=span, degree=degree, robust_iterations=robust_iterations)
    if line.reason or smooth.reason:
        return CurvatureCheck(
            line.n,
            line.r2,
            smooth.r2,
            None,
            None,
            smooth.delta1,
            False,
            line.reason or smooth.reason,
        )
    return curvature_check(line.r2, smooth.r2, line.n, smooth.delta1)
