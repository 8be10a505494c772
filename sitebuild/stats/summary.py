"""Per-group descriptive statistics: centre, spread, shape, intervals and a normality check."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

SHAPIRO_LIMIT = 5000
NORMAL_WITHIN = {1: 0.6826894921370859, 2: 0.9544997361036416}  # P(|Z| <= k), Z standard normal
# A value counts as within k SD when |x − mean| ≤ k·sd up to this many units of rounding of
# the numbers involved: the mean is rounded to a double (error ~ eps·|mean|) and so is each
# value, so a value exactly k SD away (NIST StRD NumAcc2-4) may land either side otherwise.
SD_BOUNDARY_ULPS = 4


@dataclass(frozen=True)
class Summary:
    """Descriptive statistics of one sample; None where a value is undefined (see ``reasons``)."""

    n: int
    missing: int
    mean: float | None
    sd: float | None
    se: float | None
    ci_low: float | None
    ci_high: float | None
    median: float | None
    median_ci_low: float | None
    median_ci_high: float | None
    median_ci_level: float | None
    q1: float | None
    q3: float | None
    iqr: float | None
    min: float | None
    max: float | None
    skewness: float | None
    excess_kurtosis: float | None
    share_within_1sd: float | None
    share_within_2sd: float | None
    outliers: int | None
    whisker_low: float | None
    whisker_high: float | None
    normality_test: str | None
    normality_p: float | None
    reasons: dict[str, str] = field(default_factory=dict)

    @property
    def midrange(self) -> float | None:
        """Return the point halfway between the smallest and largest value (None without values).

        Derived from ``min`` and ``max``, which every engine fills exactly, so no engine needs
        its own code for it.

        Notes
        -----
        midrange = min/2 + max/2 (halved first, so extremes near the largest double do not
        overflow).

        References
        ----------
        Dixon, W. J. & Massey, F. J. (1969). Introduction to Statistical Analysis, 3rd ed.,
        McGraw-Hill (the mid-range as a measure of location).

        Examples
        --------
        >>> describe(np.array([1.0, 2.0, 9.0])).midrange
        5.0
        """
        if self.min is None or self.max is None:
            return None
        return 0.5 * self.min + 0.5 * self.max


def median_ci_ranks(n: int, level: float) -> tuple[int, int, float] | None:
    """Return 1-based ranks (l, u) and exact coverage of the order-statistic interval for the median.

    Notes
    -----
    The number B of values below the population median is Binomial(n, 1/2), so
    P(x_(l) <= M < x_(u)) = P(l <= B <= u - 1). Take the largest l with
    P(B <= l - 1) <= (1 - level)/2 and u = n + 1 - l; the coverage is 1 - 2 P(B <= l - 1),
    at least ``level``. None when even (x_(1), x_(n)) covers less than ``level``.

    References
    ----------
    Conover, W. J. (1999). Practical Nonparametric Statistics, 3rd ed., section 3.2.
    """
    from scipy.stats import binom

    tail = (1.0 - level) / 2.0
    if n < 1:
        return None
    j = int(binom.ppf(tail, n, 0.5))
    while j >= 0 and binom.cdf(j, n, 0.5) > tail:
        j -= 1
    if j < 0:
        return None
    lower = j + 1
    upper = n + 1 - lower
    coverage = 1.0 - 2.0 * float(binom.cdf(j, n, 0.5))
    return lower, upper, coverage


def within_sd_bound(k: float, sd, mean):
    """Return the largest |x − mean| still counted as within ``k`` standard deviations.

    Notes
    -----
    bound = k·sd + u·eps·(|mean| + k·sd), u = ``SD_BOUNDARY_ULPS``, eps the double precision
    unit roundoff: deviations are known only to about eps·|x| (the data's own representation
    error and the rounding of the mean), so a tie with the boundary is resolved as "within".
    Works on floats and numpy arrays alike.

    References
    ----------
    NIST StRD univariate datasets NumAcc2-NumAcc4 (every value exactly 0 or 1 SD from the
    certified mean), https://www.itl.nist.gov/div898/strd/.

    Examples
    --------
    >>> bool(within_sd_bound(1, 0.1, 1000000.2) > 0.1)
    True
    """
    eps = np.finfo(np.float64).eps
    return k * sd + SD_BOUNDARY_ULPS * eps * (np.abs(mean) + k * sd)


def _quantile_sorted(values: np.ndarray, q: float) -> float:
    """Hyndman & Fan (1996) type 7 quantile of sorted values (numpy's default 'linear')."""
    position = (len(values) - 1) * q
    low = math.floor(position)
    high = min(low + 1, len(values) - 1)
    weight = position - low
    below, above = float(values[low]), float(values[high])
    step = above - below
    if math.isfinite(step):
        return below + step * weight
    # The gap itself exceeds the largest double (e.g. -1e308 to 1e308): weight the ends instead.
    return below * (1.0 - weight) + above * weight


def spread_fields(out: dict, reasons: dict, sd: float, n: int, mean: float, level: float) -> bool:
    """Fill sd, se and the Student-t mean interval into ``out``; False when sd overflowed.

    Where the sd, or the interval's ends, exceed the largest double, the fields stay None and
    ``reasons`` says why (shape fields too, which need the sd).
    """
    from .distributions import t_ppf

    if not math.isfinite(sd):
        for key in ("sd", "se", "ci", "share_within", "skewness", "excess_kurtosis"):
            reasons[key] = "the spread exceeds the largest double-precision number"
        reasons["normality"] = reasons["sd"]
        return False
    out["sd"] = sd
    out["se"] = sd / math.sqrt(n)
    half = t_ppf((1 + level) / 2, n - 1) * out["se"]
    out["ci_low"], out["ci_high"] = mean - half, mean + half
    if not (math.isfinite(out["ci_low"]) and math.isfinite(out["ci_high"])):
        out["ci_low"] = out["ci_high"] = None
        reasons["ci"] = "the interval exceeds the largest double-precision number"
    return True


def describe_sorted(values: np.ndarray, level: float = 0.95, missing: int = 0) -> Summary:
    """Return the :class:`Summary` of a sample whose finite values are already sorted ascending.

    Notes
    -----
    - Mean and central moments by two passes (mean first, then centred sums), so a large
      common offset (e.g. 10,000,000.1 and 10,000,000.3) loses no precision.
    - sd uses n - 1; se = sd/√n; mean interval: mean ± t_{(1+level)/2, n-1} · se (Student 1908).
    - Quartiles: Hyndman & Fan (1996) definition 7 (linear interpolation, numpy's default).
    - Median interval: order statistics from Binomial(n, 1/2) (:func:`median_ci_ranks`).
    - Skewness: adjusted Fisher–Pearson G1 = g1 √(n(n-1))/(n-2); excess kurtosis: G2 =
      ((n+1) g2 + 6)(n-1)/((n-2)(n-3)) (Joanes & Gill 1998, types "G1" and "G2").
    - Outliers: values beyond Tukey's fences q1 - 1.5 IQR and q3 + 1.5 IQR (Tukey 1977).
    - Normality: Shapiro–Wilk (1965) for 3 <= n <= 5000; D'Agostino–Pearson (1973) K² above.

    References
    ----------
    Joanes, D. N. & Gill, C. A. (1998). Comparing measures of sample skewness and kurtosis.
    JRSS D 47(1). Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages.
    The American Statistician 50(4).

    Examples
    --------
    >>> describe_sorted(np.array([1.0, 2.0, 3.0, 4.0])).sd
    1.2909944487358056
    """
    from scipy import stats

    reasons: dict[str, str] = {}
    n = int(values.shape[0])
    out: dict = dict.fromkeys(Summary.__dataclass_fields__)
    out.update(n=n, missing=int(missing), reasons=reasons)
    if n == 0:
        reasons["all"] = "no values"
        return Summary(**out)
    # Moments are taken on values divided by a power of two near the largest magnitude: the
    # division is exact, so ordinary data give the very same numbers, while values near the
    # float limits (1e308, 5e-324) can no longer overflow or underflow in sums and powers.
    largest = max(abs(float(values[0])), abs(float(values[-1])))
    unit = math.ldexp(1.0, math.frexp(largest)[1] - 1) if largest > 0 else 1.0
    scaled = values / unit
    mean_s = float(scaled.mean())
    # Shapiro–Wilk (small samples) reads the scaled values below; on larger ones they become
    # the deviations in place (at 10M values each such array is 80 MB).
    deviations = scaled - mean_s if n <= SHAPIRO_LIMIT else np.subtract(scaled, mean_s, out=scaled)
    # A second correction pass removes the rounding left in the first mean (Chan et al. 1983).
    correction = float(deviations.mean())
    mean_s += correction
    deviations -= correction
    mean = mean_s * unit
    out.update(mean=mean, min=float(values[0]), max=float(values[-1]))
    out["median"] = _quantile_sorted(values, 0.5)
    out["q1"] = _quantile_sorted(values, 0.25)
    out["q3"] = _quantile_sorted(values, 0.75)
    out["iqr"] = out["q3"] - out["q1"]
    if not math.isfinite(out["iqr"]):
        out["iqr"] = None
        reasons["iqr"] = "the quartiles are further apart than the largest double-precision number"
    spread = out["iqr"] if out["iqr"] is not None else math.inf
    fence_low = out["q1"] - 1.5 * spread
    fence_high = out["q3"] + 1.5 * spread
    lo = int(np.searchsorted(values, fence_low, side="left"))
    hi = int(np.searchsorted(values, fence_high, side="right"))
    out["outliers"] = lo + (n - hi)
    out["whisker_low"] = float(values[lo]) if lo < n else None
    out["whisker_high"] = float(values[hi - 1]) if hi > 0 else None
    ranks = median_ci_ranks(n, level)
    if ranks is None:
        reasons["median_ci"] = f"too few values for a distribution-free {level:.0%} interval"
    else:
        out["median_ci_low"] = float(values[ranks[0] - 1])
        out["median_ci_high"] = float(values[ranks[1] - 1])
        out["median_ci_level"] = ranks[2]
    if n < 2:
        for key in ("sd", "se", "ci", "share_within", "skewness", "excess_kurtosis"):
            reasons[key] = "needs at least 2 values"
        reasons["normality"] = "needs at least 3 values"
        return Summary(**out)
    squares = deviations * deviations
    m2 = float(squares.sum())
    sd_s = math.sqrt(m2 / (n - 1))
    if not spread_fields(out, reasons, sd_s * unit, n, mean, level):
        return Summary(**out)
    # The scaled values lie within [-1, 1], so the largest magnitude is 1 here.
    if sd_s == 0 or sd_s <= max(abs(mean_s), 1.0) * 1e-14:
        out.update(sd=0.0, se=0.0, ci_low=mean, ci_high=mean)
        out["share_within_1sd"] = out["share_within_2sd"] = 1.0
        for key in ("skewness", "excess_kurtosis", "normality"):
            reasons[key] = "all values are equal"
        return Summary(**out)
    within = np.abs(deviations)
    out["share_within_1sd"] = (
        float(np.count_nonzero(within <= within_sd_bound(1, sd_s, mean_s))) / n
    )
    out["share_within_2sd"] = (
        float(np.count_nonzero(within <= within_sd_bound(2, sd_s, mean_s))) / n
    )
    del within
    biased_var = m2 / n
    m3 = float((squares * deviations).mean())
    m4 = float((squares * squares).mean())
    g1 = m3 / biased_var**1.5
    g2 = m4 / biased_var**2 - 3.0
    if n >= 3:
        out["skewness"] = g1 * math.sqrt(n * (n - 1)) / (n - 2)
    else:
        reasons["skewness"] = "needs at least 3 values"
    if n >= 4:
        out["excess_kurtosis"] = ((n + 1) * g2 + 6.0) * (n - 1) / ((n - 2) * (n - 3))
    else:
        reasons["excess_kurtosis"] = "needs at least 4 values"
    if n < 3:
        reasons["normality"] = "needs at least 3 values"
    elif n <= SHAPIRO_LIMIT:
        out["normality_test"] = "shapiro-wilk"
        # Shapiro–Wilk is scale-free; the scaled values keep its sums inside double range.
        out["normality_p"] = float(stats.shapiro(scaled).pvalue)
    elif n >= 8:
        out["normality_test"] = "dagostino-pearson"
        out["normality_p"] = dagostino_pearson(n, g1, m4 / biased_var**2).pvalue
    return Summary(**out)


@dataclass(frozen=True)
class NormalityTest:
    """D'Agostino–Pearson omnibus test: K² statistic, its p-value and the two z-scores."""

    statistic: float
    pvalue: float
    z_skewness: float
    z_kurtosis: float


def dagostino_pearson(n: int, skewness: float, kurtosis: float) -> NormalityTest:
    """Return the D'Agostino–Pearson K² normality test from n and the sample's moment ratios.

    ``skewness`` is the biased g1 = m3 / m2^1.5 and ``kurtosis`` the non-excess b2 = m4 / m2²
    (central moments with divisor n), so the test needs only mergeable moments, not the values.

    Notes
    -----
    Z1 transforms g1 by D'Agostino (1970); Z2 transforms b2 by Anscombe & Glynn (1983);
    K² = Z1² + Z2², referred to χ² with 2 degrees of freedom, so p = exp(-K²/2). Valid for
    n >= 8 (the kurtosis transform is coarse below n = 20). Gives the same result as
    ``scipy.stats.normaltest`` on the values.

    References
    ----------
    D'Agostino, R. B. (1970). Transformation to normality of the null distribution of g1.
    Biometrika 57(3). Anscombe, F. J. & Glynn, W. J. (1983). Distribution of the kurtosis
    statistic b2 for normal samples. Biometrika 70(1). D'Agostino, R. B. & Pearson, E. S.
    (1973). Tests for departure from normality. Biometrika 60(3).

    Examples
    --------
    >>> round(dagostino_pearson(100, 0.0, 3.0).pvalue, 3)
    0.564
    """
    y = skewness * math.sqrt((n + 1) * (n + 3) / (6.0 * (n - 2)))
    beta2 = (
        3.0 * (n * n + 27 * n - 70) * (n + 1) * (n + 3) / ((n - 2.0) * (n + 5) * (n + 7) * (n + 9))
    )
    w2 = -1.0 + math.sqrt(2.0 * (beta2 - 1.0))
    delta = 1.0 / math.sqrt(0.5 * math.log(w2))
    alpha = math.sqrt(2.0 / (w2 - 1.0))
    y = 1.0 if y == 0 else y
    z1 = delta * math.log(y / alpha + math.sqrt((y / alpha) ** 2 + 1.0))
    expected = 3.0 * (n - 1) / (n + 1)
    var_b2 = 24.0 * n * (n - 2) * (n - 3) / ((n + 1) * (n + 1.0) * (n + 3) * (n + 5))
    x = (kurtosis - expected) / math.sqrt(var_b2)
    root_beta1 = (
        6.0 * (n * n - 5 * n + 2) / ((n + 7) * (n + 9))
        * math.sqrt(6.0 * (n + 3) * (n + 5) / (n * (n - 2) * (n - 3)))
    )  # fmt: skip
    a = 6.0 + 8.0 / root_beta1 * (2.0 / root_beta1 + math.sqrt(1.0 + 4.0 / root_beta1**2))
    term1 = 1.0 - 2.0 / (9.0 * a)
    denom = 1.0 + x * math.sqrt(2.0 / (a - 4.0))
    if denom == 0:
        z2 = math.nan
    else:
        term2 = math.copysign(((1.0 - 2.0 / a) / abs(denom)) ** (1.0 / 3.0), denom)
        z2 = (term1 - term2) / math.sqrt(2.0 / (9.0 * a))
    k2 = z1 * z1 + z2 * z2
    return NormalityTest(statistic=k2, pvalue=math.exp(-0.5 * k2), z_skewness=z1, z_kurtosis=z2)


def describe(values: np.ndarray, level: float = 0.95) -> Summary:
    """Return the :class:`Summary` of a sample; NaN entries count as missing.

    Examples
    --------
    >>> describe(np.array([3.0, 1.0, np.nan, 2.0])).median
    2.0
    """
    values = np.asarray(values, dtype=np.float64)
    keep = ~np.isnan(values)
    return describe_sorted(np.sort(values[keep]), level, missing=int((~keep).sum()))


def histogram_edges(values: np.ndarray, max_bins: int = 40) -> np.ndarray:
    """Return shared bin edges for a measure: Freedman–Diaconis width, at most ``max_bins`` bins.

    Notes: width = 2 IQR n^(-1/3) (Freedman & Diaconis 1981); falls back to Sturges' rule when
    the IQR is zero.
    """
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return np.array([0.0, 1.0])
    low, high = float(finite.min()), float(finite.max())
    if low == high:
        return np.array([low - 0.5, high + 0.5])
    q1, q3 = np.percentile(finite, [25, 75])
    return histogram_edges_from(finite.size, low, high, float(q1), float(q3), max_bins)


def histogram_edges_from(
    n: int, low: float, high: float, q1: float, q3: float, max_bins: int = 40
) -> np.ndarray:
    """Return the edges :func:`histogram_edges` gives, from n, min, max and the quartiles.

    The quartiles are numpy's default (linear) percentiles; a streamed summary that knows
    only these five numbers gets the same bins as the in-memory one.

    Examples
    --------
    >>> histogram_edges_from(1000, 0.0, 10.0, 2.5, 7.5).size  # width 1.0: 10 bins
    11
    """
    if n == 0:
        return np.array([0.0, 1.0])
    if low == high:
        return np.array([low - 0.5, high + 0.5])
    # Halves first: (high - low) itself can exceed the largest double (1e308 - -1e308).
    width_half = (q3 / 2 - q1 / 2) * 2 * n ** (-1 / 3)
    span_half = high / 2 - low / 2
    ratio = span_half / width_half if width_half > 0 else 0.0
    bins = int(math.ceil(ratio)) if math.isfinite(ratio) else max_bins
    if bins <= 0:
        bins = int(math.ceil(math.log2(n) + 1))
    bins = max(5, min(max_bins, bins))
    edges = np.linspace(low / 2, high / 2, bins + 1) * 2
    edges[0], edges[-1] = low, high  # exact ends, so the extremes fall inside the bins
    return edges
