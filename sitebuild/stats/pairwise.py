"""Two-group comparisons and all-pairs families: Welch's t, Mann–Whitney U with the
Hodges–Lehmann shift, Tukey's HSD, Games–Howell, Dunnett, Hedges' g, Cliff's delta, TOST
equivalence, the detectable difference and a seeded permutation test.

Every function takes plain arrays or a :class:`Sample` (values sorted once, moments computed
once) so a caller comparing many pairs sorts each group only once. Differences are always
``x − y`` (first group minus second).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats

from .distributions import norm_ppf, norm_sf, t_cdf, t_ppf, t_sf
from .omnibus import group_moments
from .ordering import put_back

# Mann–Whitney's exact null distribution is used when there are no ties and both groups have
# at most this many values; the dynamic programme costs about m·n·(m·n/2) operations.
EXACT_MAX_N = 50
# The k-th pairwise difference is found by shrinking a bracket until at most this many
# candidate differences remain, which are then listed and partitioned.
_ENUMERATE_LIMIT = 1_000_000
_SAMPLE_SIZE = 131_072
# Sample quantiles are taken this many standard errors either side of the target rank.
_MARGIN_SE = 3.0


@dataclass(frozen=True, eq=False)
class Sample:
    """One group's values, sorted, with their size, mean and variance."""

    sorted: np.ndarray
    n: int
    mean: float
    variance: float

    @classmethod
    def of(cls, values: np.ndarray | Sample) -> Sample:
        """Return ``values`` as a Sample (sorted copy, stable moments); a Sample is returned as is."""
        if isinstance(values, Sample):
            return values
        x = np.asarray(values, dtype=float)
        x = x[~np.isnan(x)]  # a copy, sorted in place below
        mom = group_moments(x)
        x.sort()
        return cls(x, mom.n, mom.mean, mom.variance)

    @property
    def sd(self) -> float:
        return math.sqrt(self.variance) if self.variance >= 0 else math.nan


def _welch_se_df(x: Sample, y: Sample) -> tuple[float, float]:
    vx, vy = x.variance / x.n, y.variance / y.n
    se = math.sqrt(vx + vy)
    denom = vx**2 / (x.n - 1) + vy**2 / (y.n - 1)
    df = (vx + vy) ** 2 / denom if denom > 0 else math.inf
    return se, df


# --------------------------------------------------------------------------------------------
# Welch's t-test


@dataclass(frozen=True)
class WelchTResult:
    """Welch's unequal-variance t-test and the interval of the difference in means."""

    statistic: float
    df: float
    pvalue: float
    difference: float  # mean(x) − mean(y)
    ci_low: float
    ci_high: float
    se: float
    confidence: float


def welch_t(
    x: np.ndarray | Sample, y: np.ndarray | Sample, confidence: float = 0.95
) -> WelchTResult:
    """Return Welch's t, its Welch–Satterthwaite df, two-sided p and the CI of mean(x) − mean(y).

    Notes
    -----
    t = (m_x − m_y) / √(s_x²/n_x + s_y²/n_y);
    df = (s_x²/n_x + s_y²/n_y)² / [(s_x²/n_x)²/(n_x−1) + (s_y²/n_y)²/(n_y−1)];
    CI: (m_x − m_y) ± t_{(1+c)/2, df} · se.

    References
    ----------
    Welch, B. L. (1947). The generalization of "Student's" problem when several different
    population variances are involved. Biometrika 34(1/2), 28–35.
    Satterthwaite, F. E. (1946). Biometrics Bulletin 2(6), 110–114.

    Examples
    --------
    >>> round(welch_t(np.array([1., 2, 3, 4]), np.array([2., 4, 6, 8])).df, 3)
    4.412
    """
    xs, ys = Sample.of(x), Sample.of(y)
    if xs.n < 2 or ys.n < 2:
        raise ValueError("each group needs at least two values")
    se, df = _welch_se_df(xs, ys)
    diff = xs.mean - ys.mean
    if not se > 0:
        raise ValueError("both groups have no variation")
    t = diff / se
    p = 2 * t_sf(abs(t), df)
    q = t_ppf(0.5 + confidence / 2, df)
    return WelchTResult(t, df, p, diff, diff - q * se, diff + q * se, se, confidence)


# --------------------------------------------------------------------------------------------
# Mann–Whitney U


@dataclass(frozen=True)
class MannWhitneyResult:
    """Mann–Whitney U test of x against y."""

    statistic: float  # U of x: #{x > y} + ½ #{x = y}
    pvalue: float
    method: str  # "exact" or "normal, tie-corrected, continuity-corrected"
    tie_term: float  # Σ (t³ − t) over tie groups of the pooled sample


@dataclass(frozen=True, eq=False)
class Dominance:
    """How the values of two groups x and y lie against each other, per distinct value.

    For each distinct value of x (``x_count`` of x's values are equal to it): how many values
    of y lie below it (``y_below``) and at or below it (``y_upto``); and the same for each
    distinct value of y against x. Every rank statistic of the pair is a weighted sum over
    these, so ties make the work shorter: a measure recorded to 0.01 mm has a few thousand
    distinct values however many rows it has. The y side may be left out (``None``) when only
    the x side is needed (Mann–Whitney's U).
    """

    x_count: np.ndarray  # int64, per distinct x value, ascending
    y_below: np.ndarray
    y_upto: np.ndarray
    y_count: np.ndarray | None = None
    x_below: np.ndarray | None = None
    x_upto: np.ndarray | None = None

    @property
    def ties_between(self) -> bool:
        """True when some value occurs in both groups."""
        return bool(np.any(self.y_upto > self.y_below))

    def per_value(self) -> tuple[np.ndarray, np.ndarray]:
        """Return (#{y < x_i}, #{y ≤ x_i}) for each sorted x_i (the counts repeated)."""
        return np.repeat(self.y_below, self.x_count), np.repeat(self.y_upto, self.x_count)


def distinct_values(ordered: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return (the distinct values, how many times each occurs) of a sorted array.

    Examples
    --------
    >>> values, counts = distinct_values(np.array([1.0, 1.0, 2.0, 5.0, 5.0, 5.0]))
    >>> values.tolist(), counts.tolist()
    ([1.0, 2.0, 5.0], [2, 1, 3])
    """
    if ordered.size == 0:
        return ordered, np.zeros(0, dtype=np.int64)
    starts = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
    return ordered[starts], np.diff(np.append(starts, ordered.size))


def dominance_counts(xs: Sample, ys: Sample) -> Dominance:
    """Return the :class:`Dominance` of two sorted samples, by searching each one's distinct
    values in the other.

    Examples
    --------
    >>> dom = dominance_counts(Sample.of(np.array([1.0, 2, 2])), Sample.of(np.array([2.0, 5])))
    >>> dom.x_count.tolist(), dom.y_below.tolist(), dom.y_upto.tolist()
    ([1, 2], [0, 0], [0, 1])
    """
    x_values, x_count = distinct_values(xs.sorted)
    y_values, y_count = distinct_values(ys.sorted)
    return Dominance(
        x_count,
        np.searchsorted(ys.sorted, x_values, side="left"),
        np.searchsorted(ys.sorted, x_values, side="right"),
        y_count,
        np.searchsorted(xs.sorted, y_values, side="left"),
        np.searchsorted(xs.sorted, y_values, side="right"),
    )


def _pooled_ranks(samples: Sequence[Sample]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (mid-ranks, value codes, run sizes) of the groups' values pooled.

    The pooled values are the groups' sorted values one after another, so the stable sort
    only merges sorted runs. ``ranks`` and ``codes`` follow that pooled order (group 0's
    sorted values first); ``codes`` index the distinct values, ``runs`` count each one. Mid-ranks
    are (first + last + 1)/2 of each run of equal values (1-based), as
    scipy.stats.rankdata(method="average") gives.
    """
    pooled = np.concatenate([s.sorted for s in samples])
    size = pooled.size
    order = np.argsort(pooled, kind="stable")
    ordered = pooled  # sorted in place: the runs merged, the values in that order
    ordered.sort(kind="stable")
    del pooled  # (temporaries are let go early: at 10M rows each is 80 MB)
    new_value = np.empty(size, dtype=bool)
    new_value[:1] = True
    np.not_equal(ordered[1:], ordered[:-1], out=new_value[1:])
    del ordered
    starts = np.flatnonzero(new_value)
    runs = np.diff(np.append(starts, size))
    index_type = np.int32 if size < 2**31 else np.int64  # half the memory of int64
    code_sorted = np.cumsum(new_value, dtype=index_type)
    del new_value
    code_sorted -= 1
    per_value = (2 * starts + runs + 1) / 2.0
    del starts
    ranks = np.empty(size, dtype=np.float64)
    put_back(ranks, order, per_value, code_sorted)
    del per_value
    codes = np.empty(size, dtype=index_type)
    codes[order] = code_sorted
    return ranks, codes, runs


def pooled_ranks(samples: Sequence[Sample]) -> tuple[list[np.ndarray], np.ndarray]:
    """Return each group's mid-ranks (of its sorted values) in the pooled sample, and the
    sizes of the pooled sample's runs of equal values: what Kruskal–Wallis needs.

    Examples
    --------
    >>> ranks, runs = pooled_ranks([Sample.of(np.array([1., 2, 2])), Sample.of(np.array([2., 5]))])
    >>> [r.tolist() for r in ranks], runs.tolist()
    ([[1.0, 3.0, 3.0], [3.0, 5.0]], [1, 3, 1])
    """
    ranks, _, runs = _pooled_ranks(samples)
    bounds = np.cumsum([0] + [s.n for s in samples])
    return [ranks[bounds[g] : bounds[g + 1]] for g in range(len(samples))], runs


@dataclass(frozen=True, eq=False)
class SharedRanks:
    """Mid-ranks, value codes and cumulative counts of several groups, from one pooled sort.

    Every pairwise rank statistic of a family reads these instead of searching one group's
    sorted values in another's: a pair's dominance counts and tie term become lookups.
    """

    ranks: list[np.ndarray]  # per group: mid-ranks of its sorted values in the pooled sample
    codes: list[np.ndarray]  # per group: its distinct values' indexes among the pooled ones
    counts: list[np.ndarray]  # per group: how many of its values take each of those
    cumulative: list[np.ndarray]  # per group g: [c] = #{values of g with code < c}, c = 0..U
    tied: list[np.ndarray]  # per group: its count of each value tied in the pooled sample
    runs: np.ndarray  # size of each run of equal values in the pooled sample, by value
    peaks: tuple[float, ...]  # per group: its largest count of one tied value

    @classmethod
    def of(cls, samples: Sequence[Sample]) -> SharedRanks:
        """Return the shared ranks of ``samples`` (each already sorted) from one stable sort.

        Notes
        -----
        Ranks, codes and runs as in :func:`_pooled_ranks` (a stable sort that merges the
        groups' sorted runs).

        Examples
        --------
        >>> shared = SharedRanks.of([Sample.of(np.array([1., 2, 2])), Sample.of(np.array([2., 5]))])
        >>> shared.ranks[1].tolist(), shared.dominance(0, 1).y_below.tolist()
        ([3.0, 5.0], [0, 0])
        """
        size = sum(s.n for s in samples)
        bounds = np.cumsum([0] + [s.n for s in samples])
        ranks, codes, runs = _pooled_ranks(samples)
        distinct = runs.size
        tied_codes = np.flatnonzero(runs > 1)
        count_type = np.int32 if size < 2**31 else np.int64
        distinct_codes, distinct_counts, cumulative, tied = [], [], [], []
        for g in range(len(samples)):
            own = codes[bounds[g] : bounds[g + 1]]
            counts = np.bincount(own, minlength=distinct)
            total = np.zeros(distinct + 1, dtype=count_type)
            np.cumsum(counts, out=total[1:])
            present = np.flatnonzero(counts)  # the group's distinct values, ascending
            distinct_codes.append(present)
            distinct_counts.append(counts[present])
            cumulative.append(total)
            tied.append(counts[tied_codes].astype(float))
        del codes
        group_ranks = [ranks[bounds[g] : bounds[g + 1]] for g in range(len(samples))]
        peaks = tuple(float(t.max()) if t.size else 0.0 for t in tied)
        return cls(group_ranks, distinct_codes, distinct_counts, cumulative, tied, runs, peaks)

    def dominance(self, i: int, j: int) -> Dominance:
        """Return the :class:`Dominance` of group i against group j, by lookups."""
        x_codes, y_codes = self.codes[i], self.codes[j]
        x_cum, y_cum = self.cumulative[i], self.cumulative[j]
        return Dominance(
            self.counts[i],
            y_cum[x_codes].astype(np.int64),
            y_cum[x_codes + 1].astype(np.int64),
            self.counts[j],
            x_cum[y_codes].astype(np.int64),
            x_cum[y_codes + 1].astype(np.int64),
        )

    def tie_term(self, i: int, j: int) -> float:
        """Return Σ(t³ − t) over the values tied in groups i and j pooled."""
        t = self.tied[i] + self.tied[j]
        if not t.size:
            return 0.0
        # Below 2^17 a count's cube is below 2^53, so t·t·t is exact and equals t**3 (a slow
        # power call per value); larger counts keep the power, rounded once.
        if self.peaks[i] + self.peaks[j] < 2.0**17:
            return float(np.sum(t * t * t - t))
        return float(np.sum(t**3 - t))


def _tie_term(xs: Sample, ys: Sample, any_between: bool) -> float:
    within = bool(np.any(np.diff(xs.sorted) == 0) or np.any(np.diff(ys.sorted) == 0))
    if not (within or any_between):
        return 0.0
    _, counts = np.unique(np.concatenate([xs.sorted, ys.sorted]), return_counts=True)
    counts = counts[counts > 1].astype(float)
    return float(np.sum(counts**3 - counts))


def mwu_exact_cdf(m: int, n: int, upto: int) -> np.ndarray:
    """Return P(U ≤ u) for u = 0..upto under the null, for group sizes m and n without ties.

    Notes
    -----
    With the largest of the m + n values in x (probability m/(m+n)) it exceeds all n y's:
    f_{m,n}(u) = m/(m+n) f_{m−1,n}(u − n) + n/(m+n) f_{m,n−1}(u), f_{0,n} = f_{m,0} = δ_0.
    Working with probabilities keeps every term positive (no cancellation).

    References
    ----------
    Mann, H. B. & Whitney, D. R. (1947). On a test of whether one of two random variables is
    stochastically larger than the other. Ann. Math. Statist. 18(1), 50–60.

    Examples
    --------
    >>> float(mwu_exact_cdf(2, 2, 0)[0])
    0.16666666666666666
    """
    size = upto + 1
    # row[j] holds f_{i, j} truncated to u ≤ upto.
    base = np.zeros(size)
    base[0] = 1.0
    row = [base.copy() for _ in range(n + 1)]
    for i in range(1, m + 1):
        new = [base.copy()]
        for j in range(1, n + 1):
            shifted = np.zeros(size)
            if j < size:
                shifted[j:] = row[j][: size - j]
            new.append(i / (i + j) * shifted + j / (i + j) * new[j - 1])
        row = new
    return np.minimum(1.0, np.cumsum(row[n]))


def mann_whitney_u(
    x: np.ndarray | Sample,
    y: np.ndarray | Sample,
    tie_term: float | None = None,
    dominance: tuple[np.ndarray, np.ndarray] | None = None,
) -> MannWhitneyResult:
    """Return U of x, its two-sided p-value and the method used (exact or normal).

    ``tie_term`` (optional) is Σ(t³ − t) over tie groups of the pooled pair, when the caller
    has it already; otherwise it is computed here. ``dominance`` (optional) is the pair's
    :class:`Dominance`, shared with :func:`cliffs_delta`.

    Notes
    -----
    U = Σ_i Σ_j [x_i > y_j] + ½ [x_i = y_j]. Exact null distribution (see mwu_exact_cdf) when
    there are no ties and both n ≤ 50; otherwise the normal approximation with
    σ² = m n / 12 · [(N + 1) − Σ(t³ − t)/(N (N − 1))] and a continuity correction of ½.
    Two-sided p = min(1, 2 · P(U ≤ min(U, mn − U))).

    References
    ----------
    Mann, H. B. & Whitney, D. R. (1947). Ann. Math. Statist. 18(1), 50–60.
    Lehmann, E. L. (1975). Nonparametrics: Statistical Methods Based on Ranks. Holden-Day.

    Examples
    --------
    >>> mann_whitney_u(np.array([1., 2, 3]), np.array([4., 5, 6])).statistic
    0.0
    """
    xs, ys = Sample.of(x), Sample.of(y)
    if xs.n < 1 or ys.n < 1:
        raise ValueError("each group needs at least one value")
    dom = dominance if dominance is not None else dominance_counts(xs, ys)
    # 2U = Σ_i (#{y < x_i} + #{y ≤ x_i}), an exact integer (below 2^63 for groups of up to
    # about two billion values each).
    twice = int(np.dot(dom.x_count, dom.y_below + dom.y_upto))
    u = twice / 2
    if tie_term is None:
        tie_term = _tie_term(xs, ys, dom.ties_between)
    return _mwu_from_u(xs.n, ys.n, u, tie_term)


def _mwu_from_u(m: int, n: int, u: float, tie_term: float) -> MannWhitneyResult:
    mn = m * n
    if tie_term == 0 and max(m, n) <= EXACT_MAX_N:
        low = int(round(min(u, mn - u)))
        p = float(min(1.0, 2 * mwu_exact_cdf(m, n, low)[low]))
        return MannWhitneyResult(u, p, "exact", 0.0)
    big_n = m + n
    var = mn / 12.0 * ((big_n + 1) - tie_term / (big_n * (big_n - 1)))
    if not var > 0:
        return MannWhitneyResult(u, math.nan, "normal, tie-corrected", tie_term)
    z = max(0.0, abs(u - mn / 2.0) - 0.5) / math.sqrt(var)
    p = min(1.0, 2 * norm_sf(z))
    return MannWhitneyResult(u, p, "normal, tie-corrected, continuity-corrected", tie_term)


# --------------------------------------------------------------------------------------------
# k-th smallest pairwise difference and the Hodges–Lehmann shift


def _first_at_most(xs: np.ndarray, ys: np.ndarray, t: float, strict: bool) -> np.ndarray:
    """For each x_i, the first index j (ys ascending) with fl(x_i − y_j) ≤ t (or < t if strict).

    fl(x_i − y_j) falls as y_j rises, so the qualifying j form a suffix. searchsorted on
    x_i − t finds it up to rounding; the loop then checks the computed differences themselves
    so counts agree exactly with the differences that are later listed. ``ys`` carries a −inf
    sentinel in front and +inf behind (see _padded), so neighbours never need bounds checks.
    """
    inner = ys[1:-1]
    j = np.searchsorted(inner, xs - t, side="right" if strict else "left")
    for _ in range(64):
        before = xs - ys[j]  # difference with y_{j-1} (padded index j)
        at = xs - ys[j + 1]  # difference with y_j
        if strict:
            left, right = before < t, ~(at < t)
        else:
            left, right = before <= t, ~(at <= t)
        move_left, move_right = left.any(), right.any()
        if not (move_left or move_right):
            break
        # Jump over whole runs of equal y values, never past the sentinels.
        if move_left:
            j = np.where(left, np.searchsorted(inner, ys[j], side="left"), j)
        if move_right:
            j = np.where(right, np.searchsorted(inner, ys[j + 1], side="right"), j)
    return j


def _padded(ys: np.ndarray) -> np.ndarray:
    return np.concatenate([[-np.inf], ys, [np.inf]])


def _sample_indices(k_lo: int, k_hi: int, below: int, total: int, s: int) -> tuple[int, int]:
    """Sample order statistics just outside the target ranks (a few standard errors)."""
    f_lo, f_hi = (k_lo - below) / total, (k_hi - below) / total
    lo_i = int(math.floor(f_lo * s - _MARGIN_SE * math.sqrt(s * f_lo * (1 - f_lo)) - 3))
    hi_i = int(math.ceil(f_hi * s + _MARGIN_SE * math.sqrt(s * f_hi * (1 - f_hi)) + 3))
    return lo_i, hi_i


def _shrink(
    xs: np.ndarray,
    ys: np.ndarray,
    k_lo: int,
    k_hi: int,
    a: np.ndarray,
    b: np.ndarray,
    below: int,
    raw: np.ndarray,
    total: int,
    partitioned: bool = False,
) -> tuple[np.ndarray, np.ndarray, int, float | None]:
    """One round: new row bounds from quantiles of the (unsorted) sample ``raw`` of candidate
    differences, just outside ranks k_lo..k_hi. ``partitioned``: ``raw`` is already
    partitioned at the indices _sample_indices gives for this cluster.

    Returns (a, b, below, value) where value is set when every candidate left is one value.
    """
    n = ys.size - 2
    s = raw.size
    lo_i, hi_i = _sample_indices(k_lo, k_hi, below, total, s)
    wanted = [i for i in (lo_i, hi_i) if 0 <= i < s]
    vals = raw if partitioned or not wanted else np.partition(raw, wanted)
    lo = hi = None
    if lo_i >= 0:
        lo = float(vals[lo_i])
        nb = np.minimum(_first_at_most(xs, ys, lo, strict=True), b)
        nbelow = int(n * xs.size - nb.sum())
        if nbelow <= k_lo:
            b, below = np.maximum(nb, a), nbelow
        else:
            lo = None  # the sample missed; keep the old lower bound
    if hi_i < s:
        hi = float(vals[hi_i])
        na = np.maximum(_first_at_most(xs, ys, hi, strict=False), a)
        if int(n * xs.size - na.sum()) > k_hi:
            a = np.minimum(na, b)
        else:
            hi = None
    same = lo if (lo is not None and hi is not None and lo == hi) else None
    return a, b, below, same


def _select(
    xs: np.ndarray,
    ys: np.ndarray,
    ks: list[int],
    a: np.ndarray,
    b: np.ndarray,
    below: int,
    rng: np.random.Generator,
) -> list[float]:
    """The ks-th smallest (0-based, close together) of {fl(x_i − y_j)}, given row bounds
    [a_i, b_i) (indices into the padded ys, offset by one) and the count ``below`` of
    differences under the bracket."""
    s = _SAMPLE_SIZE
    k_lo, k_hi = min(ks), max(ks)
    while True:
        counts = b - a
        total = int(counts.sum())
        if total <= _ENUMERATE_LIMIT:
            rows = np.repeat(np.arange(xs.size), counts)
            starts = np.cumsum(counts) - counts
            cols = np.arange(total) - np.repeat(starts - a, counts) + 1
            values = xs[rows] - ys[cols]
            picks = [k - below for k in ks]
            part = np.partition(values, picks)
            return [float(part[i]) for i in picks]
        cum = np.cumsum(counts)
        # Systematic sample with a random start: positions come out sorted, which makes the
        # row lookup a fast merge, and every stretch of candidates is evenly represented.
        step = total / s
        pos = np.minimum((rng.random() + np.arange(s)) * step, total - 1).astype(np.int64)
        row = np.searchsorted(cum, pos, side="right")
        col = a[row] + (pos - (cum[row] - counts[row])) + 1
        raw = xs[row] - ys[col]
        centre = (0.5 * (k_lo + k_hi) - below) / total
        a, b, below, same = _shrink(xs, ys, k_lo, k_hi, a, b, below, raw, total)
        if same is not None:
            return [same] * len(ks)  # every candidate left is this one value
        if int((b - a).sum()) > 0.5 * total:
            # Poor progress means heavy ties (few distinct values in the bracket). Test the
            # sample value at the target rank itself: it is the answer, or every candidate
            # on one side of it (including it) leaves the bracket.
            at = min(s - 1, max(0, int(centre * s)))
            pivot = float(np.partition(raw, at)[at])
            n_all = (ys.size - 2) * xs.size
            lt = _first_at_most(xs, ys, pivot, strict=True)
            le = _first_at_most(xs, ys, pivot, strict=False)
            count_lt, count_le = int(n_all - lt.sum()), int(n_all - le.sum())
            if count_lt <= k_lo and k_hi < count_le:
                return [pivot] * len(ks)
            if count_le <= k_lo:
                b = np.maximum(np.minimum(b, le), a)
                below = int(n_all - b.sum())
            elif count_lt > k_hi:
                a = np.minimum(np.maximum(a, lt), b)
            else:
                # The pivot splits the cluster: finish each rank on its own.
                return [_select(xs, ys, [k], a, b, below, rng)[0] for k in ks]


def kth_pairwise_differences(
    x: np.ndarray | Sample,
    y: np.ndarray | Sample,
    ks: Sequence[int],
    rng: np.random.Generator | None = None,
) -> list[float]:
    """Return the k-th smallest (0-based) of the m·n differences x_i − y_j, for each k in ks.

    Notes
    -----
    The differences are never all listed. With both groups sorted, the number of differences
    ≤ t is Σ_i #{j: y_j ≥ x_i − t}, an O(m log n) count. A bracket [lo, hi] around the k-th
    value is shrunk by drawing candidate differences from inside it, taking sample quantiles
    just either side of the target rank and confirming them by an exact count; once at most
    10⁶ candidates remain they are listed and partitioned. Work is O((m + n) log n) per round
    and a few rounds suffice. The random draws only steer the search: the answer is exact and
    the same for any ``rng``. Ranks within 10⁶ of each other share one search.

    References
    ----------
    Johnson, D. B. & Mizoguchi, T. (1978). Selecting the Kth element in X + Y and
    X1 + X2 + ... + Xm. SIAM J. Comput. 7(2), 147–153 (the counting idea).
    Monahan, J. F. (1984). Algorithm 616: fast computation of the Hodges–Lehmann location
    estimator. ACM TOMS 10(3), 265–270 (randomised bracketing).

    Examples
    --------
    >>> kth_pairwise_differences(np.array([1., 5]), np.array([0., 2]), [0, 3])
    [-1.0, 5.0]
    """
    xs = Sample.of(x).sorted
    ys = _padded(Sample.of(y).sorted)
    m, n = xs.size, ys.size - 2
    ks = [int(k) for k in ks]
    if any(not 0 <= k < m * n for k in ks):
        raise ValueError("k out of range")
    gen = rng if rng is not None else np.random.default_rng(0)
    a = np.zeros(m, dtype=np.int64)
    b = np.full(m, n, dtype=np.int64)
    total = m * n
    clusters: list[list[int]] = []
    for k in sorted(set(ks)):
        if clusters and k - clusters[-1][0] < _ENUMERATE_LIMIT // 2:
            clusters[-1].append(k)
        else:
            clusters.append([k])
    raw = None
    if total > _ENUMERATE_LIMIT:
        # One shared first sample of random pairs brackets every cluster of ranks.
        s = _SAMPLE_SIZE
        raw = xs[gen.integers(0, m, size=s)] - ys[gen.integers(0, n, size=s) + 1]
        wanted = sorted(
            {
                i
                for g in clusters
                for i in _sample_indices(min(g), max(g), 0, total, s)
                if 0 <= i < s
            }
        )
        if wanted:
            raw = np.partition(raw, wanted)  # one partition serves every cluster
    found: dict[int, float] = {}
    for group in clusters:
        ca, cb, cbelow = a, b, 0
        if raw is not None:
            ca, cb, cbelow, same = _shrink(
                xs, ys, min(group), max(group), a, b, 0, raw, total, partitioned=True
            )
            if same is not None:
                found.update((k, same) for k in group)
                continue
        found.update(zip(group, _select(xs, ys, group, ca, cb, cbelow, gen), strict=True))
    return [found[k] for k in ks]


@dataclass(frozen=True)
class ShiftEstimate:
    """Hodges–Lehmann estimate of the shift x − y and its distribution-free interval."""

    estimate: float
    ci_low: float | None
    ci_high: float | None
    confidence: float
    method: str
    reason: str | None = None  # why the interval is undefined, when it is


def _ci_rank(m: int, n: int, confidence: float, tie_term: float) -> int:
    """1-based rank k so that [d_(k), d_(mn−k+1)] covers the shift with the stated confidence."""
    alpha = 1 - confidence
    mn = m * n
    if tie_term == 0 and max(m, n) <= EXACT_MAX_N:
        cdf = mwu_exact_cdf(m, n, mn // 2)
        # Largest k with P(U ≤ k − 1) ≤ α/2.
        return int(np.searchsorted(cdf, alpha / 2 + 1e-12, side="right"))
    big_n = m + n
    sd = math.sqrt(mn / 12.0 * ((big_n + 1) - tie_term / (big_n * (big_n - 1))))
    return int(math.floor(mn / 2.0 - norm_ppf(1 - alpha / 2) * sd))


def hodges_lehmann(
    x: np.ndarray | Sample,
    y: np.ndarray | Sample,
    confidence: float = 0.95,
    rng: np.random.Generator | None = None,
    tie_term: float | None = None,
) -> ShiftEstimate:
    """Return the Hodges–Lehmann shift (median of all x_i − y_j) and its distribution-free CI.

    Notes
    -----
    estimate = median{x_i − y_j}; CI = [d_(k), d_(mn−k+1)] with k the lower critical value of
    Mann–Whitney's U: exact (largest k with P(U ≤ k−1) ≤ α/2) without ties and n ≤ 50, else
    k = ⌊mn/2 − z_{1−α/2} σ_U⌋ with the tie-corrected σ_U. Order statistics come from
    :func:`kth_pairwise_differences`, never from listing all m·n differences.

    References
    ----------
    Hodges, J. L. & Lehmann, E. L. (1963). Estimates of location based on rank tests.
    Ann. Math. Statist. 34(2), 598–611.
    Lehmann, E. L. (1975). Nonparametrics, ch. 2 (the interval).

    Examples
    --------
    >>> hodges_lehmann(np.array([3., 4, 5]), np.array([1., 2, 3])).estimate
    2.0
    """
    xs, ys = Sample.of(x), Sample.of(y)
    m, n = xs.n, ys.n
    mn = m * n
    if tie_term is None:
        tie_term = _tie_term(xs, ys, dominance_counts(xs, ys).ties_between)
    k = _ci_rank(m, n, confidence, tie_term)
    method = "exact" if tie_term == 0 and max(m, n) <= EXACT_MAX_N else "normal approximation"
    mids = [(mn - 1) // 2, mn // 2]
    ks = mids + ([k - 1, mn - k] if k >= 1 else [])
    values = kth_pairwise_differences(xs, ys, ks, rng)
    estimate = 0.5 * (values[0] + values[1])
    if k < 1:
        return ShiftEstimate(
            estimate,
            None,
            None,
            confidence,
            method,
            f"too few values for a {confidence:.0%} interval of the shift",
        )
    return ShiftEstimate(estimate, values[2], values[3], confidence, method)


# --------------------------------------------------------------------------------------------
# Effect sizes


@dataclass(frozen=True)
class EffectInterval:
    """An effect size with its confidence interval (None where undefined, with the reason)."""

    name: str
    estimate: float | None
    ci_low: float | None
    ci_high: float | None
    confidence: float
    reason: str | None = None


def hedges_g(
    x: np.ndarray | Sample, y: np.ndarray | Sample, confidence: float = 0.95
) -> EffectInterval:
    """Return Hedges' g (bias-corrected standardised mean difference) with its large-sample CI.

    Notes
    -----
    s_p = √[((n_x−1)s_x² + (n_y−1)s_y²)/(n_x+n_y−2)], d = (m_x − m_y)/s_p,
    g = J d with J = 1 − 3/(4(n_x+n_y) − 9);
    Var(g) ≈ (n_x+n_y)/(n_x n_y) + g²/(2(n_x+n_y)); CI g ± z_{(1+c)/2} √Var(g).

    References
    ----------
    Hedges, L. V. (1981). Distribution theory for Glass's estimator of effect size and related
    estimators. J. Educ. Stat. 6(2), 107–128.
    Hedges, L. V. & Olkin, I. (1985). Statistical Methods for Meta-Analysis, ch. 5.
    Academic Press.

    Examples
    --------
    >>> round(hedges_g(np.array([1., 2, 3]), np.array([2., 3, 4])).estimate, 4)
    -0.8
    """
    xs, ys = Sample.of(x), Sample.of(y)
    nx, ny = xs.n, ys.n
    if nx < 2 or ny < 2:
        return EffectInterval("Hedges' g", None, None, None, confidence, "fewer than 2 values")
    pooled = ((nx - 1) * xs.variance + (ny - 1) * ys.variance) / (nx + ny - 2)
    if not pooled > 0:
        return EffectInterval(
            "Hedges' g", None, None, None, confidence, "no variation in either group"
        )
    d = (xs.mean - ys.mean) / math.sqrt(pooled)
    j = 1 - 3 / (4 * (nx + ny) - 9)
    g = j * d
    se = math.sqrt((nx + ny) / (nx * ny) + g**2 / (2 * (nx + ny)))
    z = norm_ppf(0.5 + confidence / 2)
    return EffectInterval("Hedges' g", g, g - z * se, g + z * se, confidence)


def cliffs_delta(
    x: np.ndarray | Sample,
    y: np.ndarray | Sample,
    confidence: float = 0.95,
    dominance: tuple[np.ndarray, np.ndarray] | None = None,
) -> EffectInterval:
    """Return Cliff's delta, P(X > Y) − P(X < Y), with Cliff's asymmetric confidence interval.

    ``dominance`` (optional) is as in :func:`mann_whitney_u`.

    Notes
    -----
    d_ij = sign(x_i − y_j), δ = mean(d_ij), d_i· = mean_j d_ij, d_·j = mean_i d_ij;
    s² = [n² Σ_i (d_i· − δ)² + m² Σ_j (d_·j − δ)² − Σ_ij (d_ij − δ)²] / [m n (m−1)(n−1)],
    floored at (1 − δ²)/(mn − 1) so it never goes negative (our choice);
    CI = [δ − δ³ ∓ z s √((1 − δ²)² + z² s²)] / (1 − δ² + z² s²).
    Undefined when |δ| = 1 (complete separation).

    References
    ----------
    Cliff, N. (1993). Dominance statistics: ordinal analyses to answer ordinal questions.
    Psychological Bulletin 114(3), 494–509.

    Examples
    --------
    >>> cliffs_delta(np.array([1., 2, 3, 4]), np.array([2., 3, 4, 5])).estimate
    -0.4375
    """
    xs, ys = Sample.of(x), Sample.of(y)
    m, n = xs.n, ys.n
    if m < 2 or n < 2:
        return EffectInterval("Cliff's delta", None, None, None, confidence, "fewer than 2 values")
    dom = dominance if dominance is not None else dominance_counts(xs, ys)
    if dom.y_count is None:
        raise ValueError("Cliff's delta needs both sides of the dominance counts")
    mn = m * n
    # Exact integers: Σ_ij sign(x_i − y_j) and the number of pairs that are not tied.
    row_signs = dom.y_below + dom.y_upto
    row_signs -= n  # per distinct x: #{y < x} − #{y > x}
    total = int(np.dot(dom.x_count, row_signs))
    nonzero = float(mn - int(np.dot(dom.x_count, dom.y_upto - dom.y_below)))  # Σ d_ij²
    delta = total / mn
    col_signs = dom.x_below + dom.x_upto
    np.subtract(m, col_signs, out=col_signs)  # per distinct y: #{x > y} − #{x < y}
    # Σ_i (d_i· − δ)² and Σ_j (d_·j − δ)², each distinct value weighted by its count.
    row = np.divide(row_signs, n)
    del row_signs
    row -= delta
    np.square(row, out=row)
    row_squares = float(np.dot(dom.x_count, row))
    col = np.divide(col_signs, m)
    del col_signs
    col -= delta
    np.square(col, out=col)
    col_squares = float(np.dot(dom.y_count, col))
    del row, col
    if abs(delta) >= 1.0:
        return EffectInterval(
            "Cliff's delta",
            delta,
            None,
            None,
            confidence,
            "complete separation: every value of one group is above every value of the other",
        )
    s2 = (n**2 * row_squares + m**2 * col_squares - (nonzero - mn * delta**2)) / (
        mn * (m - 1) * (n - 1)
    )
    s2 = max(s2, (1 - delta**2) / (mn - 1))
    s = math.sqrt(s2)
    z = norm_ppf(0.5 + confidence / 2)
    one = 1 - delta**2
    root = z * s * math.sqrt(one**2 + z**2 * s2)
    den = one + z**2 * s2
    low = (delta - delta**3 - root) / den
    high = (delta - delta**3 + root) / den
    return EffectInterval("Cliff's delta", delta, max(-1.0, low), min(1.0, high), confidence)


def size_label(name: str, value: float | None) -> str | None:
    """Return a rough size word for an effect (common practice rules of thumb, not a verdict).

    Notes
    -----
    Hedges' g: |g| < 0.2 negligible, < 0.5 small, < 0.8 medium, else large (Cohen 1988).
    Cliff's delta: |δ| < 0.147 negligible, < 0.33 small, < 0.474 medium, else large
    (Romano et al. 2006). eta², omega², epsilon²: < 0.01 negligible, < 0.06 small, < 0.14
    medium, else large (Cohen 1988).

    Examples
    --------
    >>> size_label("Hedges' g", -0.6)
    'medium'
    """
    if value is None or not math.isfinite(value):
        return None
    cuts = {
        "Hedges' g": (0.2, 0.5, 0.8),
        "Cliff's delta": (0.147, 0.33, 0.474),
    }.get(name, (0.01, 0.06, 0.14))
    v = abs(value)
    for word, cut in zip(("negligible", "small", "medium"), cuts, strict=True):
        if v < cut:
            return word
    return "large"


# --------------------------------------------------------------------------------------------
# Equivalence, sensitivity and permutation


@dataclass(frozen=True)
class EquivalenceResult:
    """Two one-sided Welch t-tests against ±margin."""

    margin: float
    p_lower: float  # H0: difference ≤ −margin
    p_upper: float  # H0: difference ≥ +margin
    pvalue: float  # max of the two
    equivalent: bool  # pvalue < alpha
    alpha: float


def tost_welch(
    x: np.ndarray | Sample, y: np.ndarray | Sample, margin: float, alpha: float = 0.05
) -> EquivalenceResult:
    """Return the two one-sided tests (TOST) of |mean(x) − mean(y)| < margin, Welch form.

    Notes
    -----
    t_L = (D + margin)/se, p_L = P(T_df > t_L); t_U = (D − margin)/se, p_U = P(T_df < t_U);
    p = max(p_L, p_U); equivalent when p < α (same as the 1 − 2α CI lying inside ±margin).
    se and df as in Welch's t-test.

    References
    ----------
    Schuirmann, D. J. (1987). A comparison of the two one-sided tests procedure and the power
    approach for assessing the equivalence of average bioavailability.
    J. Pharmacokinet. Biopharm. 15(6), 657–680.

    Examples
    --------
    >>> tost_welch(np.array([1., 2, 3, 4]), np.array([1.5, 2, 3, 4.5]), margin=3).equivalent
    True
    """
    if not margin > 0:
        raise ValueError("margin must be positive")
    xs, ys = Sample.of(x), Sample.of(y)
    se, df = _welch_se_df(xs, ys)
    diff = xs.mean - ys.mean
    p_lower = t_sf((diff + margin) / se, df)
    p_upper = t_cdf((diff - margin) / se, df)
    p = max(p_lower, p_upper)
    return EquivalenceResult(margin, p_lower, p_upper, p, bool(p < alpha), alpha)


def detectable_difference(
    x: np.ndarray | Sample, y: np.ndarray | Sample, alpha: float = 0.05, power: float = 0.8
) -> float:
    """Return the smallest true mean difference a two-sided Welch t-test would detect with
    the given power at alpha, for these group sizes and standard deviations.

    Notes
    -----
    δ = (t_{1−α/2, df} + t_{power, df}) · se, with Welch's se and df from the observed SDs.
    This is the usual normal-theory approximation with t quantiles; it ignores the chance of
    rejecting in the wrong tail. Checked against the noncentral t power in the tests.

    References
    ----------
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.
    Chow, S.-C., Shao, J. & Wang, H. (2008). Sample Size Calculations in Clinical Research,
    ch. 3 (two-sample means).

    Examples
    --------
    >>> round(detectable_difference(np.arange(30.0), np.arange(30.0) + 1), 2)
    6.48
    """
    xs, ys = Sample.of(x), Sample.of(y)
    se, df = _welch_se_df(xs, ys)
    return (t_ppf(1 - alpha / 2, df) + t_ppf(power, df)) * se


@dataclass(frozen=True)
class PermutationResult:
    """Permutation test of the difference in means."""

    statistic: float  # mean(x) − mean(y)
    pvalue: float
    count: int


def permutation_test(
    x: np.ndarray | Sample, y: np.ndarray | Sample, count: int, rng: np.random.Generator
) -> PermutationResult:
    """Return the two-sided permutation p-value of mean(x) − mean(y) from ``count`` relabellings.

    Notes
    -----
    p = (1 + #{b: |D_b| ≥ |D_obs|}) / (1 + B), with D_b the difference after randomly
    reassigning the pooled values to groups of the original sizes (Phipson & Smyth 2010:
    never zero, valid for random permutations). A tiny tolerance absorbs rounding.

    References
    ----------
    Fisher, R. A. (1935). The Design of Experiments. Oliver & Boyd.
    Phipson, B. & Smyth, G. K. (2010). Permutation p-values should never be zero.
    Stat. Appl. Genet. Mol. Biol. 9(1), Article 39.

    Examples
    --------
    >>> r = permutation_test(np.array([1., 2, 3]), np.array([4., 5, 6]), 99, np.random.default_rng(1))
    >>> r.count
    99
    """
    xs, ys = Sample.of(x), Sample.of(y)
    pooled = np.concatenate([xs.sorted, ys.sorted])
    pooled = pooled - pooled.mean()  # centring keeps the sums precise
    m, total = xs.n, float(pooled.sum())
    big_n = pooled.size
    observed = float(pooled[:m].mean() - pooled[m:].mean())
    hits = 0
    done = 0
    batch = max(1, min(count, 4_000_000 // max(big_n, 1)))
    tol = 1e-9 * (abs(observed) + float(np.abs(pooled).max()) + 1e-300)
    while done < count:
        size = min(batch, count - done)
        keys = rng.random((size, big_n))
        pick = np.argpartition(keys, m - 1, axis=1)[:, :m] if m < big_n else None
        sx = pooled[pick].sum(axis=1) if pick is not None else np.full(size, total)
        diffs = sx / m - (total - sx) / (big_n - m)
        hits += int(np.sum(np.abs(diffs) >= abs(observed) - tol))
        done += size
    return PermutationResult(xs.mean - ys.mean, (1 + hits) / (1 + count), count)


# --------------------------------------------------------------------------------------------
# All-pairs and many-to-one families


@dataclass(frozen=True)
class FamilyPair:
    """One pair in a multiple-comparison family: indices into the groups, statistic, p."""

    a: int
    b: int
    statistic: float
    df: float
    pvalue: float


def tukey_hsd(groups: Sequence[np.ndarray | Sample]) -> list[FamilyPair]:
    """Return Tukey's HSD (Tukey–Kramer for unequal n) p-values for all pairs (a < b).

    Notes
    -----
    q_ab = |m_a − m_b| / √(MS_within/2 · (1/n_a + 1/n_b)); p = P(Q_{k, N−k} > q_ab) from the
    studentized range distribution. Family-wise error is controlled by the method itself.

    References
    ----------
    Tukey, J. W. (1953). The problem of multiple comparisons. Unpublished manuscript.
    Kramer, C. Y. (1956). Extension of multiple range tests to group means with unequal
    numbers of replications. Biometrics 12(3), 307–310.

    Examples
    --------
    >>> round(tukey_hsd([np.array([1., 2, 3]), np.array([2., 3, 4]), np.array([6., 7, 8])])[0].pvalue, 3)
    0.483
    """
    samples = [Sample.of(g) for g in groups]
    k = len(samples)
    big_n = sum(s.n for s in samples)
    ms_within = sum((s.n - 1) * s.variance for s in samples) / (big_n - k)
    df = big_n - k
    pairs: list[tuple[int, int]] = [(i, j) for i in range(k) for j in range(i + 1, k)]
    q = np.array(
        [
            abs(samples[i].mean - samples[j].mean)
            / math.sqrt(ms_within / 2 * (1 / samples[i].n + 1 / samples[j].n))
            for i, j in pairs
        ]
    )
    p = np.clip(stats.studentized_range.sf(q, k, df), 0.0, 1.0)
    return [
        FamilyPair(i, j, float(qq), float(df), float(pp))
        for (i, j), qq, pp in zip(pairs, q, p, strict=True)
    ]


def games_howell(groups: Sequence[np.ndarray | Sample]) -> list[FamilyPair]:
    """Return Games–Howell p-values for all pairs (a < b), for unequal variances.

    Notes
    -----
    q_ab = |m_a − m_b| / √((s_a²/n_a + s_b²/n_b)/2), df_ab = Welch–Satterthwaite df;
    p = P(Q_{k, df_ab} > q_ab).

    References
    ----------
    Games, P. A. & Howell, J. F. (1976). Pairwise multiple comparison procedures with unequal
    n's and/or variances: a Monte Carlo study. J. Educ. Stat. 1(2), 113–125.

    Examples
    --------
    >>> len(games_howell([np.array([1., 2, 3]), np.array([2., 3, 5]), np.array([6., 7, 9])]))
    3
    """
    samples = [Sample.of(g) for g in groups]
    k = len(samples)
    out = []
    for i in range(k):
        for j in range(i + 1, k):
            se, df = _welch_se_df(samples[i], samples[j])
            q = abs(samples[i].mean - samples[j].mean) / (se / math.sqrt(2))
            p = float(np.clip(stats.studentized_range.sf(q, k, df), 0.0, 1.0))
            out.append(FamilyPair(i, j, float(q), float(df), p))
    return out


def dunnett(
    groups: Sequence[np.ndarray | Sample], reference: int, rng: np.random.Generator
) -> list[FamilyPair]:
    """Return Dunnett's many-to-one p-values of each group against group ``reference``.

    Notes
    -----
    t_i = (m_i − m_0) / √(MS_within (1/n_i + 1/n_0)); p from the multivariate t distribution
    of the k − 1 correlated statistics (scipy.stats.dunnett, quasi-Monte Carlo integration
    seeded from ``rng``).

    References
    ----------
    Dunnett, C. W. (1955). A multiple comparison procedure for comparing several treatments
    with a control. JASA 50(272), 1096–1121.

    Examples
    --------
    >>> g = [np.array([1., 2, 3]), np.array([2., 3, 4]), np.array([6., 7, 8])]
    >>> len(dunnett(g, 0, np.random.default_rng(1)))
    2
    """
    samples = [Sample.of(g) for g in groups]
    others = [i for i in range(len(samples)) if i != reference]
    res = stats.dunnett(
        *[samples[i].sorted for i in others], control=samples[reference].sorted, rng=rng
    )
    df = sum(s.n for s in samples) - len(samples)
    return [
        FamilyPair(i, reference, float(t), float(df), float(min(1.0, p)))
        for i, t, p in zip(others, res.statistic, res.pvalue, strict=True)
    ]


__all__ = [
    "EXACT_MAX_N",
    "EffectInterval",
    "EquivalenceResult",
    "FamilyPair",
    "MannWhitneyResult",
    "PermutationResult",
    "Sample",
    "SharedRanks",
    "pooled_ranks",
    "ShiftEstimate",
    "WelchTResult",
    "cliffs_delta",
    "detectable_difference",
    "Dominance",
    "distinct_values",
    "dominance_counts",
    "dunnett",
    "games_howell",
    "hedges_g",
    "hodges_lehmann",
    "kth_pairwise_differences",
    "mann_whitney_u",
    "mwu_exact_cdf",
    "permutation_test",
    "size_label",
    "tost_welch",
    "tukey_hsd",
    "welch_t",
]
