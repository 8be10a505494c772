"""Comparisons of groups at equal x: analysis of covariance (``y ~ group + x``) from moments.

Everything here is computed from per-group sufficient statistics (count, means and centred
sums of squares and cross-products of x and y over the rows where both are present), so the
result is the same whether rows were held in memory or streamed in batches and merged
(Chan, Golub & LeVeque 1979; Pébay 2008 for the cross-product merge).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class XYMoments:
    """One group's sufficient statistics for a straight line of y on x.

    ``sxx``, ``syy`` and ``sxy`` are centred sums Σ(x − x̄)², Σ(y − ȳ)², Σ(x − x̄)(y − ȳ)
    over the rows where both x and y are present; ``x_low``/``x_high`` the range of x there.
    """

    n: int
    mean_x: float
    mean_y: float
    sxx: float
    syy: float
    sxy: float
    x_low: float = math.nan
    x_high: float = math.nan

    @classmethod
    def of(cls, x: np.ndarray, y: np.ndarray) -> XYMoments:
        """Return the moments of paired arrays (rows with a NaN in either are left out).

        Two passes: means first, then centred sums, so a large common offset in x (dates as
        day numbers, say) costs no precision.

        Examples
        --------
        >>> XYMoments.of(np.array([1.0, 2, 3]), np.array([2.0, 4, 7])).sxy
        5.0
        """
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        ok = ~(np.isnan(x) | np.isnan(y))
        x, y = x[ok], y[ok]
        if x.size == 0:
            return cls(0, math.nan, math.nan, 0.0, 0.0, 0.0)
        mx, my = float(np.mean(x)), float(np.mean(y))
        dx, dy = x - mx, y - my
        # Correct the means by the mean deviation (a second pass, as in sitebuild.streaming).
        cx, cy = float(np.mean(dx)), float(np.mean(dy))
        mx, my = mx + cx, my + cy
        dx, dy = dx - cx, dy - cy
        return cls(
            n=int(x.size),
            mean_x=mx,
            mean_y=my,
            sxx=float(np.dot(dx, dx)),
            syy=float(np.dot(dy, dy)),
            sxy=float(np.dot(dx, dy)),
            x_low=float(np.min(x)),
            x_high=float(np.max(x)),
        )


@dataclass(frozen=True)
class AdjustedMean:
    """One group's mean of y adjusted to the overall mean of x, with its interval."""

    n: int
    mean: float  # raw mean of y (rows with both x and y)
    mean_x: float
    adjusted: float
    se: float
    ci_low: float
    ci_high: float
    x_low: float
    x_high: float
    extrapolated: bool  # the overall mean of x lies outside this group's range of x


@dataclass(frozen=True)
class AdjustedDifference:
    """The difference of two adjusted means (first minus second), with interval and t-test."""

    a: int
    b: int
    raw_difference: float  # difference of the raw means of y
    difference: float  # difference at equal x
    se: float
    ci_low: float
    ci_high: float
    statistic: float
    pvalue: float  # unadjusted; the caller adjusts within its family


@dataclass(frozen=True)
class SlopeCheck:
    """Homogeneity of slopes: the group × x interaction F test and each group's own slope."""

    statistic: float
    df1: float
    df2: float
    pvalue: float
    slopes: tuple[float, ...]  # NaN where a group has no spread in x
    slope_se: tuple[float, ...]
    slope_low: tuple[float, ...]
    slope_high: tuple[float, ...]


@dataclass(frozen=True)
class AncovaResult:
    """A common-slope analysis of covariance of y on group and x."""

    slope: float  # the common within-group slope of y on x
    slope_se: float
    slope_low: float
    slope_high: float
    df: int  # residual degrees of freedom, N − k − 1
    residual_sd: float  # √MSE of the common-slope model
    within_sd: float  # pooled within-group SD of y ignoring x (the one-way ANOVA's √MSE)
    x_share: float  # share of the within-group variation of y that x accounts for
    x_mean: float  # the overall mean of x, where the adjusted means are evaluated
    group_f: float  # F for group differences at equal x (type II)
    group_df1: int
    group_p: float
    groups: tuple[AdjustedMean, ...]
    pairs: tuple[AdjustedDifference, ...]
    slopes: SlopeCheck
    overlap: bool  # every group's range of x overlaps every other's
    confidence: float


def _t_interval(estimate: float, se: float, df: float, confidence: float) -> tuple[float, float]:
    q = float(stats.t.ppf(0.5 + confidence / 2, df)) if df > 0 else math.nan
    return estimate - q * se, estimate + q * se


def _t_p(statistic: float, df: float) -> float:
    if not math.isfinite(statistic) or df <= 0:
        return math.nan
    return float(2 * stats.t.sf(abs(statistic), df))


def _f_p(statistic: float, df1: float, df2: float) -> float:
    if not math.isfinite(statistic) or df1 <= 0 or df2 <= 0:
        return math.nan
    return float(stats.f.sf(statistic, df1, df2))


def slope_check(groups: Sequence[XYMoments], confidence: float = 0.95) -> SlopeCheck:
    """Return the group × x interaction F test and each group's own slope, from moments.

    Notes
    -----
    Separate slopes b_g = Sxy_g / Sxx_g leave SSE_sep = Σ (Syy_g − Sxy_g² / Sxx_g) on
    N − k − s degrees of freedom (s groups with spread in x). The common slope leaves
    SSE_common = W_yy − W_xy² / W_xx (W the within-group sums). F = [(SSE_common − SSE_sep) /
    (s − 1)] / [SSE_sep / (N − k − s)], the extra-sum-of-squares test of the interaction term
    in ``y ~ C(g) * x``. A group's slope has standard error √(MSE_sep / Sxx_g).

    References
    ----------
    Snedecor, G. W. & Cochran, W. G. (1989). Statistical Methods, 8th ed., §18.3 (comparison
    of regression lines).

    Examples
    --------
    >>> a = XYMoments.of(np.array([1.0, 2, 3, 4]), np.array([1.0, 2.1, 2.9, 4.2]))
    >>> b = XYMoments.of(np.array([1.0, 2, 3, 4]), np.array([2.0, 3.9, 6.1, 8.0]))
    >>> slope_check([a, b]).pvalue < 0.001
    True
    """
    with_x = [g for g in groups if g.n > 0 and g.sxx > 0]
    big_n = sum(g.n for g in groups if g.n > 0)
    k = sum(1 for g in groups if g.n > 0)
    s = len(with_x)
    wxx = sum(g.sxx for g in groups if g.n > 0)
    wxy = sum(g.sxy for g in groups if g.n > 0)
    wyy = sum(g.syy for g in groups if g.n > 0)
    sse_common = wyy - wxy * wxy / wxx if wxx > 0 else math.nan
    sse_sep = sum(g.syy for g in groups if g.n > 0) - sum(g.sxy * g.sxy / g.sxx for g in with_x)
    sse_sep = max(sse_sep, 0.0)
    df2 = big_n - k - s
    df1 = s - 1
    mse_sep = sse_sep / df2 if df2 > 0 else math.nan
    if df1 > 0 and df2 > 0 and mse_sep > 0:
        statistic = max(sse_common - sse_sep, 0.0) / df1 / mse_sep
    else:
        statistic = math.nan
    slopes, ses, lows, highs = [], [], [], []
    for g in groups:
        if g.n > 0 and g.sxx > 0:
            b = g.sxy / g.sxx
            se = math.sqrt(mse_sep / g.sxx) if math.isfinite(mse_sep) else math.nan
            low, high = _t_interval(b, se, df2, confidence)
        else:
            b = se = low = high = math.nan
        slopes.append(b)
        ses.append(se)
        lows.append(low)
        highs.append(high)
    return SlopeCheck(
        statistic=statistic,
        df1=float(df1),
        df2=float(df2),
        pvalue=_f_p(statistic, df1, df2),
        slopes=tuple(slopes),
        slope_se=tuple(ses),
        slope_low=tuple(lows),
        slope_high=tuple(highs),
    )


def ancova(
    groups: Sequence[XYMoments],
    confidence: float = 0.95,
    pairs: Sequence[tuple[int, int]] | None = None,
) -> AncovaResult:
    """Return the common-slope analysis of covariance of y on group and x, from moments.

    ``pairs`` lists the (a, b) group indices to compare (default: every pair a < b). Groups
    with no rows keep their place with NaN estimates.

    Notes
    -----
    With W_xx = Σ Sxx_g, W_xy = Σ Sxy_g, W_yy = Σ Syy_g (within-group sums):

    - common slope b = W_xy / W_xx; SSE = W_yy − b W_xy on ν = N − k − 1 degrees of freedom,
      MSE = SSE / ν; se(b) = √(MSE / W_xx);
    - adjusted mean of group g at the overall mean x̄ of x:
      ȳ_g − b (x̄_g − x̄), variance MSE [1/n_g + (x̄_g − x̄)² / W_xx];
    - difference of two adjusted means: (ȳ_a − ȳ_b) − b (x̄_a − x̄_b), variance
      MSE [1/n_a + 1/n_b + (x̄_a − x̄_b)² / W_xx], Student's t on ν degrees of freedom;
    - group F at equal x (type II): [(SSE_x − SSE) / (k − 1)] / MSE, where SSE_x =
      T_yy − T_xy² / T_xx is the residual of y on x alone (T the total sums);
    - share of within-group variation x accounts for: W_xy² / (W_xx W_yy) (partial R² of x).

    References
    ----------
    Snedecor, G. W. & Cochran, W. G. (1989). Statistical Methods, 8th ed., ch. 18 (analysis of
    covariance). Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979) for the pooled moments.

    Examples
    --------
    >>> a = XYMoments.of(np.array([1.0, 2, 3]), np.array([10.0, 12, 14]))
    >>> b = XYMoments.of(np.array([3.0, 4, 5]), np.array([15.0, 17, 19.5]))
    >>> round(ancova([a, b]).pairs[0].difference, 3)  # raw gap −5.17 shrinks at equal x
    -0.917
    """
    present = [g for g in groups if g.n > 0]
    k = len(present)
    big_n = sum(g.n for g in present)
    wxx = sum(g.sxx for g in present)
    wxy = sum(g.sxy for g in present)
    wyy = sum(g.syy for g in present)
    x_mean = sum(g.n * g.mean_x for g in present) / big_n if big_n else math.nan
    y_mean = sum(g.n * g.mean_y for g in present) / big_n if big_n else math.nan
    df = big_n - k - 1
    slope = wxy / wxx if wxx > 0 else math.nan
    sse = max(wyy - slope * wxy, 0.0) if wxx > 0 else math.nan
    mse = sse / df if df > 0 else math.nan
    slope_se = math.sqrt(mse / wxx) if wxx > 0 and math.isfinite(mse) else math.nan
    slope_low, slope_high = _t_interval(slope, slope_se, df, confidence)
    # Total sums: within plus between (centred on the overall means).
    txx = wxx + sum(g.n * (g.mean_x - x_mean) ** 2 for g in present)
    txy = wxy + sum(g.n * (g.mean_x - x_mean) * (g.mean_y - y_mean) for g in present)
    tyy = wyy + sum(g.n * (g.mean_y - y_mean) ** 2 for g in present)
    sse_x = tyy - txy * txy / txx if txx > 0 else math.nan
    if k > 1 and mse > 0:
        group_f = max(sse_x - sse, 0.0) / (k - 1) / mse
    else:
        group_f = math.nan
    adjusted = []
    for g in groups:
        if g.n == 0:
            nan = math.nan
            adjusted.append(AdjustedMean(0, nan, nan, nan, nan, nan, nan, nan, nan, False))
            continue
        adj = g.mean_y - slope * (g.mean_x - x_mean)
        se = math.sqrt(mse * (1 / g.n + (g.mean_x - x_mean) ** 2 / wxx)) if wxx > 0 else math.nan
        low, high = _t_interval(adj, se, df, confidence)
        outside = bool(math.isfinite(g.x_low) and not (g.x_low <= x_mean <= g.x_high))
        adjusted.append(
            AdjustedMean(g.n, g.mean_y, g.mean_x, adj, se, low, high, g.x_low, g.x_high, outside)
        )
    if pairs is None:
        pairs = [(i, j) for i in range(len(groups)) for j in range(i + 1, len(groups))]
    out_pairs = []
    for i, j in pairs:
        ga, gb = groups[i], groups[j]
        raw = ga.mean_y - gb.mean_y
        if ga.n == 0 or gb.n == 0 or not wxx > 0:
            nan = math.nan
            out_pairs.append(AdjustedDifference(i, j, raw, nan, nan, nan, nan, nan, nan))
            continue
        dx = ga.mean_x - gb.mean_x
        diff = raw - slope * dx
        se = math.sqrt(mse * (1 / ga.n + 1 / gb.n + dx * dx / wxx))
        statistic = diff / se if se > 0 else math.nan
        low, high = _t_interval(diff, se, df, confidence)
        out_pairs.append(
            AdjustedDifference(i, j, raw, diff, se, low, high, statistic, _t_p(statistic, df))
        )
    lows = [g.x_low for g in present if math.isfinite(g.x_low)]
    highs = [g.x_high for g in present if math.isfinite(g.x_high)]
    overlap = bool(lows and max(lows) < min(highs))
    return AncovaResult(
        slope=slope,
        slope_se=slope_se,
        slope_low=slope_low,
        slope_high=slope_high,
        df=int(df),
        residual_sd=math.sqrt(mse) if mse >= 0 else math.nan,
        within_sd=math.sqrt(wyy / (big_n - k)) if big_n > k else math.nan,
        x_share=wxy * wxy / (wxx * wyy) if wxx > 0 and wyy > 0 else math.nan,
        x_mean=x_mean,
        group_f=group_f,
        group_df1=k - 1,
        group_p=_f_p(group_f, k - 1, df),
        groups=tuple(adjusted),
        pairs=tuple(out_pairs),
        slopes=slope_check(groups, confidence),
        overlap=overlap,
        confidence=confidence,
    )
