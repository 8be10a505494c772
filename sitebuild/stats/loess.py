"""LOESS: locally weighted regression of degree 1 or 2 with a pointwise confidence band.

Small samples are fitted exactly. Large ones are fitted on binned data: x is cut into
``bins`` equal-width bins and every bin keeps the exact weighted moments of its points
about the bin's mean x, so the local least-squares sums are exact except that each point's
tricube weight is taken at its bin's mean; the fit is computed at a few hundred vertices
(the output grid plus points at quantiles of x) and linearly interpolated between them for
residuals and traces. The error against the exact fit is checked in tests/test_loess.py.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import comb

import numpy as np

GRID_SIZE = 100
EXACT_LIMIT = 1000  # at most this many points: every point is its own bin and a vertex
BINS = 2048
VERTICES = 200  # quantile vertices added to the grid on the binned path
DELTA2_LIMIT = 500  # at most this many points: delta1, delta2 from the full operator matrix
SPAN_CANDIDATES = tuple(round(0.1 + 0.05 * i, 2) for i in range(19))  # 0.10 .. 1.00
CHUNK = 600_000  # kernel-matrix entries handled at once (bounds memory)


@dataclass(frozen=True)
class LoessFit:
    """A LOESS curve on a grid with its pointwise band, and the fit's summary numbers.

    When the fit is undefined, ``reason`` says why, the arrays are empty and numbers None.
    """

    x: np.ndarray  # grid over the observed range of x
    fit: np.ndarray
    low: np.ndarray
    high: np.ndarray
    se: np.ndarray  # standard error of the fitted value at each grid point
    span: float | None
    degree: int
    robust_iterations: int
    level: float
    n: int
    enp: float | None  # equivalent number of parameters, trace(L)
    delta1: float | None  # trace((I-L)'(I-L))
    delta2: float | None  # trace(((I-L)'(I-L))^2), None when not computed (large n)
    lookup_df: float | None  # degrees of freedom of the t quantile used for the band
    residual_scale: float | None  # sigma-hat = sqrt(RSS / delta1)
    rss: float | None
    r2: float | None  # 1 - RSS / total sum of squares
    aicc: float | None
    binned: bool
    reason: str | None = None
    # Where the local polynomial could not be fitted (too few distinct x values with weight,
    # e.g. x with a few tied values) and the smooth is a local mean or blank: where and why.
    fallback: str | None = None


@dataclass(frozen=True)
class SpanChoice:
    """The span with the smallest AICc among the candidates, and every candidate's AICc."""

    span: float
    candidates: tuple[float, ...]
    aicc: tuple[float | None, ...]


@dataclass(frozen=True)
class _Bins:
    centre: np.ndarray  # (B,) mean x of each bin (the point itself on the exact path)
    count: np.ndarray  # (B,) points per bin, for the nearest-neighbour span
    index: np.ndarray | None  # bin of each point (None on the exact path: point i is bin i)
    offset: np.ndarray | None  # x_i - centre of its bin
    lo: float = 0.0  # left edge of the first equal-width bin (binned path)
    width: float = 0.0  # bin width
    cumulative: np.ndarray | None = None  # points left of each raw bin edge (bins + 1)


@dataclass(frozen=True)
class _Moments:
    mx: np.ndarray  # (B, 2d+1): sum over the bin of w (x - c)^k
    my: np.ndarray  # (B, d+1): sum of w (x - c)^k y
    mx2: np.ndarray  # (B, 2d+1): sum of w^2 (x - c)^k, for the variance of the fit


def _tricube(u: np.ndarray) -> np.ndarray:
    a = np.minimum(np.abs(u), 1.0)
    a = 1.0 - a * a * a
    return a * a * a


def _bisquare_weights(residuals: np.ndarray) -> np.ndarray:
    """Cleveland (1979) robustness weights B(e / 6 median|e|), as statsmodels computes them."""
    size = np.abs(residuals)
    median = float(np.median(size))
    if median == 0.0:
        scaled = (size > 0).astype(np.float64)
    else:
        scaled = np.minimum(size / (6.0 * median), 1.0)
    return (1.0 - scaled * scaled) ** 2


def _make_bins(x: np.ndarray, exact: bool, bins: int) -> _Bins:
    if exact:
        return _Bins(x, np.ones(x.size, dtype=np.int64), None, None)
    lo, hi = float(x.min()), float(x.max())
    raw = np.minimum(((x - lo) * (bins / (hi - lo))).astype(np.int64), bins - 1)
    count = np.bincount(raw, minlength=bins)
    total = np.bincount(raw, weights=x, minlength=bins)
    used = count > 0
    remap = np.cumsum(used) - 1
    index = remap[raw]
    centre = total[used] / count[used]
    cumulative = np.concatenate(([0], np.cumsum(count)))
    return _Bins(centre, count[used], index, x - centre[index], lo, (hi - lo) / bins, cumulative)


def _moments(bins: _Bins, y: np.ndarray, w: np.ndarray | None, degree: int) -> _Moments:
    size = bins.centre.size
    if bins.index is None:
        weight = np.ones(size) if w is None else w
        mx = np.zeros((size, 2 * degree + 1))
        my = np.zeros((size, degree + 1))
        mx[:, 0] = weight
        my[:, 0] = weight * y
        mx2 = mx.copy()
        mx2[:, 0] = weight * weight
        return _Moments(mx, my, mx2)
    mx = np.empty((size, 2 * degree + 1))
    my = np.empty((size, degree + 1))
    mx2 = np.empty((size, 2 * degree + 1))
    # power = w · offset^k; unweighted, None stands for the ones of k = 0 (products with 1 are
    # exact, so the sums are the same as with an array of ones).
    power = None if w is None else w.copy()
    for k in range(2 * degree + 1):
        if power is None:
            mx[:, k] = np.bincount(bins.index, minlength=size)
        else:
            mx[:, k] = np.bincount(bins.index, weights=power, minlength=size)
        if k <= degree:
            my[:, k] = np.bincount(
                bins.index, weights=y if power is None else power * y, minlength=size
            )
        if w is None:
            mx2[:, k] = mx[:, k]
        else:
            mx2[:, k] = np.bincount(bins.index, weights=power * w, minlength=size)
        power = bins.offset if power is None else power * bins.offset
    return _Moments(mx, my, mx2)


def _y_moments(bins: _Bins, y: np.ndarray, degree: int) -> np.ndarray:
    """The unweighted y moments of :func:`_moments` on the binned path (same sums, same order)."""
    size = bins.centre.size
    my = np.empty((size, degree + 1))
    my[:, 0] = np.bincount(bins.index, weights=y, minlength=size)
    power = bins.offset  # (1 · offset and 1 · y are exact: the same sums as _moments)
    for k in range(1, degree + 1):
        my[:, k] = np.bincount(bins.index, weights=power * y, minlength=size)
        power = power * bins.offset
    return my


def _radius(bins: _Bins, at: np.ndarray, q: int) -> np.ndarray:
    """Distance from each point in ``at`` to its q-th nearest observation."""
    c = bins.centre
    if bins.index is None:
        out = np.empty(at.size)
        step = max(1, CHUNK // max(c.size, 1))
        for start in range(0, at.size, step):
            part = np.abs(c[None, :] - at[start : start + step, None])
            out[start : start + step] = np.partition(part, q - 1, axis=1)[:, q - 1]
        return out
    # Binned: bisection on d for F(z + d) - F(z - d) = q - 1/2, with F the count of points
    # left of t, linear inside each bin (points spread evenly over their bin); the half
    # puts the q-th point in the middle of its share.
    cum = bins.cumulative
    total_bins = cum.size - 1

    def below(t: np.ndarray) -> np.ndarray:
        where = (t - bins.lo) / bins.width
        b = np.clip(np.floor(where), 0, total_bins - 1).astype(np.int64)
        share = np.clip(where - b, 0.0, 1.0)
        return cum[b] + (cum[b + 1] - cum[b]) * share

    low = np.zeros(at.size)
    high = np.maximum(np.abs(at - c[0]), np.abs(c[-1] - at)) + bins.width
    for _ in range(60):
        mid = 0.5 * (low + high)
        enough = below(at + mid) - below(at - mid) >= q - 0.5
        high = np.where(enough, mid, high)
        low = np.where(enough, low, mid)
    return high


@dataclass(frozen=True)
class _Local:
    fit: np.ndarray  # fitted value at each evaluation point
    a: np.ndarray  # (V, d+1) first row of A^-1 (scaled coordinates)
    norm2: np.ndarray | None  # squared norm of the operator row, sum_i l_i(z)^2
    rows: np.ndarray | None  # full operator rows (exact path, when asked)
    flat: np.ndarray | None = None  # True where the local polynomial fell back to a local mean


def _local_fit(
    bins: _Bins,
    moments: _Moments,
    at: np.ndarray,
    span: float,
    degree: int,
    n: int,
    want_norm: bool,
    want_rows: bool = False,
) -> _Local:
    """Weighted local polynomial fits at ``at`` from the bins' moments (see module notes)."""
    q = min(n, max(int(span * n + 1e-10), degree + 2))
    rows_parts: list = []
    h = _radius(bins, at, q)
    scale = float(np.ptp(bins.centre)) or 1.0
    h = np.maximum(h, 1e-12 * scale)
    d = degree
    m_all = np.hstack([moments.mx, moments.my])
    kx = 2 * d + 1
    centre = bins.centre
    v = at.size
    s = np.empty((v, 2 * d + 1))
    t = np.empty((v, d + 1))
    g = np.empty((v, 2 * d + 1)) if want_norm else None
    rows = np.zeros((v, centre.size)) if want_rows else None
    # Centres are sorted and the kernel is zero beyond h, so each chunk of evaluation points
    # only needs the bins between its leftmost z - h and rightmost z + h.
    step = 32
    for start in range(0, v, step):
        stop = min(v, start + step)
        z = at[start:stop]
        hz = h[start:stop]
        left = int(np.searchsorted(centre, float(np.min(z - hz)), "left"))
        right = int(np.searchsorted(centre, float(np.max(z + hz)), "right"))
        u = (centre[None, left:right] - z[:, None]) / hz[:, None]
        k = _tricube(u)
        inv_h = 1.0 / hz
        # q_p[v, c] = sum_b K u^p m[b, c]; then binomial shifts from bin centre to z.
        up = np.ones_like(u)
        qs = []
        qs2 = []
        for _p in range(2 * d + 1):
            kp = k * up
            qs.append(kp @ m_all[left:right])
            if want_norm:
                qs2.append((kp * k) @ moments.mx2[left:right])
            up = up * u
        for j in range(2 * d + 1):
            s[start:stop, j] = sum(
                comb(j, kk) * inv_h**kk * qs[j - kk][:, kk] for kk in range(j + 1)
            )
            if want_norm:
                g[start:stop, j] = sum(
                    comb(j, kk) * inv_h**kk * qs2[j - kk][:, kk] for kk in range(j + 1)
                )
        for j in range(d + 1):
            t[start:stop, j] = sum(
                comb(j, kk) * inv_h**kk * qs[j - kk][:, kx + kk] for kk in range(j + 1)
            )
        if want_rows:
            rows[start:stop, left:right] = k * moments.mx[None, left:right, 0]
            rows_parts.append(((slice(start, stop), slice(left, right)), u))
    a_mat = np.empty((v, d + 1, d + 1))
    for j in range(d + 1):
        for m in range(d + 1):
            a_mat[:, j, m] = s[:, j + m]
    e0 = np.zeros((v, d + 1))
    e0[:, 0] = 1.0
    # A is symmetric positive semi-definite; where it is near singular (too few distinct x
    # with weight), fall back to the local weighted mean, as a degree-0 fit.
    with np.errstate(all="ignore"):
        cond = np.linalg.cond(a_mat)
    good = np.isfinite(cond) & (cond < 1e12)
    a = np.zeros((v, d + 1))
    if good.any():
        a[good] = np.linalg.solve(a_mat[good], e0[good][..., None])[..., 0]
    bad = ~good
    if bad.any():
        a[bad, 0] = 1.0 / np.where(s[bad, 0] > 0, s[bad, 0], np.nan)
    fit = np.einsum("vj,vj->v", a, t)
    norm2 = None
    if want_norm:
        norm2 = np.zeros(v)
        for j in range(d + 1):
            for m in range(d + 1):
                norm2 += a[:, j] * a[:, m] * g[:, j + m]
    if want_rows:
        for (row_part, col_part), u in rows_parts:
            poly = np.zeros_like(u)
            up = np.ones_like(u)
            for j in range(d + 1):
                poly += a[row_part, j : j + 1] * up
                up = up * u
            rows[row_part, col_part] *= poly
    return _Local(fit, a, norm2, rows, bad)


def _undefined(n: int, span, degree: int, robust: int, level: float, reason: str) -> LoessFit:
    empty = np.zeros(0)
    return LoessFit(
        empty,
        empty,
        empty,
        empty,
        empty,
        span if span != "auto" else None,
        degree,
        robust,
        level,
        n,
        None,
        None,
        None,
        None,
        None,
        None,
        None,
        None,
        False,
        reason,
    )


def _check(x, y, degree: int) -> tuple[np.ndarray, np.ndarray, str | None]:
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    if x.shape != y.shape or x.ndim != 1:
        raise ValueError("x and y must be one-dimensional and of the same length")
    keep = np.isfinite(x) & np.isfinite(y)
    if not keep.all():
        x, y = x[keep], y[keep]
    del keep
    if degree not in (1, 2):
        raise ValueError("degree must be 1 or 2")
    if x.size < degree + 3:
        return x, y, f"fewer than {degree + 3} complete pairs"
    if np.unique(x[: min(x.size, 10_000)]).size < degree + 2 and np.unique(x).size < degree + 2:
        return x, y, f"x takes fewer than {degree + 2} distinct values"
    y_low, y_high = float(y.min()), float(y.max())
    if y_low == y_high:
        return x, y, "y has no variation"
    # Local fits square and raise distances to the fourth power: keep them inside double range.
    x_low, x_high = float(x.min()), float(x.max())
    x_peak = max(abs(x_low), abs(x_high))
    extreme = max(x_peak, abs(y_low), abs(y_high)) > 1e75
    if extreme or not x_high - x_low > 1e-75 * max(1.0, x_peak):
        return (
            x,
            y,
            "the values are too extreme (or x spans too small a range) to fit a smooth in double precision",
        )
    return x, y, None


class _Smoother:
    """One data set prepared for fitting at several spans (bins and moments are reused)."""

    def __init__(self, x, y, degree, exact_limit, bins, shared: dict | None = None):
        self.degree = degree
        self.n = x.size
        self.exact = self.n <= exact_limit
        if self.exact:
            # Sorted, so that each chunk of evaluation points touches a narrow window.
            order = np.argsort(x, kind="stable")
            x, y = x[order], y[order]
        self.x, self.y = x, y
        # What depends on x alone (bins, grid, vertices, the x moments) is the same for every
        # measure fitted on this very array: taken from ``shared`` when it was made for it.
        key = (id(x), degree, bins)
        kept = None if shared is None or self.exact else shared.get(key)
        if kept is not None and kept[0] is x:
            _, self.bins, self.grid, self.vertices, mx = kept
            self.start = _Moments(mx, _y_moments(self.bins, y, degree), mx)
        else:
            self.bins = _make_bins(x, self.exact, bins)
            self.grid = np.linspace(x.min(), x.max(), GRID_SIZE)
            if self.exact:
                self.vertices = None
            else:
                cum = np.cumsum(self.bins.count)
                targets = (np.arange(VERTICES) + 0.5) * (self.n / VERTICES)
                quantile_points = self.bins.centre[np.searchsorted(cum, targets)]
                self.vertices = np.unique(np.concatenate([self.grid, quantile_points]))
            self.start = _moments(self.bins, y, None, degree)  # unweighted
            if shared is not None and not self.exact:
                # x itself is kept with them, so its id cannot pass to another array.
                shared[key] = (x, self.bins, self.grid, self.vertices, self.start.mx)
        if not self.exact:
            self.yy = float(y @ y)
        # The RSS uses unweighted moments up to degree 1 (value and slope in each bin).
        self.plain = _Moments(self.start.mx[:, :3], self.start.my[:, :2], self.start.mx2[:, :3])
        centred = y - y.mean()
        self.tss = float(centred @ centred)

    def evaluate(self, moments, span, want_norm, want_fitted):
        """Return (fitted at the data or None, RSS, tr(L), tr(L'L) or None, local at grid)."""
        n, d = self.n, self.degree
        if self.exact:
            at = np.concatenate([self.x, self.grid])
            local = _local_fit(self.bins, moments, at, span, d, n, want_norm)
            fitted = local.fit[:n]
            residuals = self.y - fitted
            trace = float(np.sum(local.a[:n, 0] * moments.mx[:, 0]))
            norms = float(np.sum(local.norm2[:n])) if want_norm else None
            grid = _Local(
                local.fit[n:],
                local.a[n:],
                local.norm2[n:] if want_norm else None,
                None,
                local.flat[n:],
            )
            return fitted, float(residuals @ residuals), trace, norms, grid
        vertices = self.vertices
        local = _local_fit(self.bins, moments, vertices, span, d, n, want_norm)
        # Between vertices the fit is linear: value and slope at each bin centre.
        centre = self.bins.centre
        segment = np.clip(np.searchsorted(vertices, centre) - 1, 0, vertices.size - 2)
        slope = np.diff(local.fit) / np.diff(vertices)
        slope_b = slope[segment]
        value_b = local.fit[segment] + slope_b * (centre - vertices[segment])
        # RSS of the piecewise-linear fit from each bin's moments:
        # sum (y - f - s d)^2 = sum y^2 - 2 (f Sy + s Sdy) + f^2 n + 2 f s Sd + s^2 Sdd.
        mx, my = self.plain.mx, self.plain.my
        rss = self.yy - 2.0 * float(value_b @ my[:, 0] + slope_b @ my[:, 1])
        rss += float(
            (value_b * value_b) @ mx[:, 0]
            + 2.0 * (value_b * slope_b) @ mx[:, 1]
            + (slope_b * slope_b) @ mx[:, 2]
        )
        rss = max(rss, 0.0)
        fitted = None
        if want_fitted:
            index = self.bins.index
            fitted = value_b[index] + slope_b[index] * self.bins.offset
        a0 = np.interp(centre, vertices, local.a[:, 0])
        trace = float(np.sum(a0 * moments.mx[:, 0]))
        norms = None
        if want_norm:
            norms = float(np.interp(centre, vertices, local.norm2) @ self.bins.count)
        pick = np.searchsorted(vertices, self.grid)
        grid = _Local(
            local.fit[pick],
            local.a[pick],
            local.norm2[pick] if want_norm else None,
            None,
            local.flat[pick],
        )
        return fitted, rss, trace, norms, grid


def _aicc(rss: float, n: int, enp: float) -> float | None:
    if rss <= 0 or n - enp - 2 <= 0:
        return None
    return float(np.log(rss / n) + 1.0 + 2.0 * (enp + 1.0) / (n - enp - 2.0))


def choose_span(
    x,
    y,
    degree: int = 1,
    candidates: tuple[float, ...] = SPAN_CANDIDATES,
    exact_limit: int = EXACT_LIMIT,
    bins: int = BINS,
) -> SpanChoice:
    """Return the span among ``candidates`` that minimises AICc for a LOESS fit.

    Notes
    -----
    AICc = log(sigma^2) + 1 + 2 (tr(L) + 1) / (n - tr(L) - 2), sigma^2 = RSS / n, where L is
    the smoother matrix (fits without robustness iterations). Candidates leaving fewer than
    degree + 2 points in a neighbourhood, or with n - tr(L) - 2 <= 0, are skipped.

    References
    ----------
    Hurvich, C. M., Simonoff, J. S. & Tsai, C.-L. (1998). Smoothing parameter selection in
    nonparametric regression using an improved Akaike information criterion. JRSS B 60(2).

    Examples
    --------
    >>> x = np.linspace(0, 6, 200); y = np.sin(x) + np.random.default_rng(1).normal(0, .2, 200)
    >>> 0.1 <= choose_span(x, y).span <= 1.0
    True
    """
    x, y, reason = _check(x, y, degree)
    if reason:
        raise ValueError(reason)
    smoother = _Smoother(x, y, degree, exact_limit, bins)
    return _choose(smoother, candidates)


def _choose(smoother: _Smoother, candidates) -> SpanChoice:
    moments = smoother.start
    scores: list[float | None] = []
    for span in candidates:
        if int(span * smoother.n + 1e-10) < smoother.degree + 2:
            scores.append(None)
            continue
        _, rss, trace, _, _ = smoother.evaluate(moments, span, False, False)
        scores.append(_aicc(rss, smoother.n, trace))
    usable = [(s, c) for s, c in zip(scores, candidates, strict=True) if s is not None]
    best = min(usable)[1] if usable else max(candidates)
    return SpanChoice(float(best), tuple(candidates), tuple(scores))


def loess(
    x,
    y,
    span: float | str = 0.75,
    degree: int = 1,
    robust_iterations: int = 0,
    level: float = 0.95,
    exact_limit: int = EXACT_LIMIT,
    bins: int = BINS,
    shared: dict | None = None,
) -> LoessFit:
    """Return a LOESS fit on a 100-point grid over the range of x, with a pointwise band.

    Notes
    -----
    At each point z the fit is the intercept of a weighted least-squares polynomial of
    degree 1 or 2 in (x - z), with tricube weights (1 - (|x - z| / h)^3)^3, h the distance
    to the q-th nearest x, q = floor(span n) (Cleveland 1979; Cleveland & Devlin 1988).
    Robustness iterations multiply the weights by the bisquare (1 - (e / 6 m)^2)^2 of each
    residual e, m the median absolute residual (Cleveland 1979); missing pairs are dropped.

    The fit is linear in y, yhat = L y. Band: fit(z) -/+ t_{(1+level)/2, rho} sigma ||l(z)||,
    with l(z) the operator row at z, sigma^2 = RSS / delta1, delta1 = tr((I-L)'(I-L)) =
    n - 2 tr(L) + tr(L'L), and rho = delta1^2 / delta2 the lookup degrees of freedom,
    delta2 = tr(((I-L)'(I-L))^2) (Cleveland & Devlin 1988, section 3). delta2 comes from the
    full operator when n <= 500; above that rho = delta1 is used (rho is then in the
    hundreds or more, where the t quantile moves by well under 1%). The band treats the
    robustness weights as fixed and covers the expected smooth, not the true curve: it is
    pointwise, not simultaneous. enp = tr(L) is the equivalent number of parameters.

    ``span="auto"`` picks the span by AICc (see :func:`choose_span`). Above ``exact_limit``
    points the fit is binned (see the module notes). ``shared`` (a dict the caller keeps
    across calls) lets fits of several measures on the same x array share what depends on x
    alone; the results are the same with or without it.

    References
    ----------
    Cleveland, W. S. (1979). Robust locally weighted regression and smoothing scatterplots.
    JASA 74(368), 829-836.
    Cleveland, W. S. & Devlin, S. J. (1988). Locally weighted regression: an approach to
    regression analysis by local fitting. JASA 83(403), 596-610.

    Examples
    --------
    >>> x = np.linspace(0, 1, 50); fit = loess(x, 2 * x + 1)
    >>> round(float(fit.fit[0]), 6), round(fit.r2, 6)
    (1.0, 1.0)
    """
    x, y, reason = _check(x, y, degree)
    if reason:
        return _undefined(int(x.size), span, degree, robust_iterations, level, reason)
    smoother = _Smoother(x, y, degree, exact_limit, bins, shared)
    n = smoother.n
    if span == "auto":
        span = _choose(smoother, SPAN_CANDIDATES).span
    span = float(span)
    if not 0 < span <= 1:
        raise ValueError("span must be in (0, 1] or 'auto'")
    x, y = smoother.x, smoother.y  # sorted on the exact path
    moments = smoother.start
    for _ in range(robust_iterations):
        fitted, _, _, _, _ = smoother.evaluate(moments, span, False, True)
        weights = _bisquare_weights(y - fitted)
        moments = _moments(smoother.bins, y, weights, degree)
    _, rss, trace, norms, grid = smoother.evaluate(moments, span, True, False)
    delta2 = None
    if smoother.exact and n <= DELTA2_LIMIT:
        rows = _local_fit(smoother.bins, moments, x, span, degree, n, False, True).rows
        resid_op = np.eye(n) - rows
        m = resid_op.T @ resid_op
        delta1 = float(np.trace(m))
        delta2 = float(np.sum(m * m))
        lookup = delta1 * delta1 / delta2 if delta2 > 0 else None
    else:
        delta1 = float(n - 2.0 * trace + norms)
        lookup = delta1
    from scipy import special, stats

    if delta1 > 0 and lookup and lookup > 0:
        sigma = float(np.sqrt(rss / delta1))
        quantile = float(stats.t.ppf(0.5 + level / 2.0, lookup))
    else:
        sigma = None
        quantile = float(special.ndtri(0.5 + level / 2.0))
    se = np.sqrt(np.maximum(grid.norm2, 0.0)) * (sigma if sigma is not None else np.nan)
    r2 = 1.0 - rss / smoother.tss if smoother.tss > 0 else None
    fallback = _fallback_note(smoother.grid, grid, degree, x)
    return LoessFit(
        x=smoother.grid,
        fit=grid.fit,
        low=grid.fit - quantile * se,
        high=grid.fit + quantile * se,
        se=se,
        span=span,
        degree=degree,
        robust_iterations=robust_iterations,
        level=level,
        n=n,
        enp=float(trace),
        delta1=delta1,
        delta2=delta2,
        lookup_df=float(lookup) if lookup else None,
        residual_scale=sigma,
        rss=rss,
        r2=float(r2) if r2 is not None else None,
        aicc=_aicc(rss, n, trace),
        binned=not smoother.exact,
        reason=None
        if sigma is not None
        else "the band is undefined (no residual degrees of freedom)",
        fallback=fallback,
    )


def _fallback_note(at: np.ndarray, local: _Local, degree: int, x: np.ndarray) -> str | None:
    """Say where on the grid the local polynomial was replaced by a local mean or left blank.

    With few distinct x values (ties) a neighbourhood can hold weight at fewer than
    degree + 1 distinct x values; no local line (or parabola) exists there, so the fit is the
    neighbourhood's weighted mean (a flat step), or blank where nothing has weight. The
    method changes there, and the results say so rather than change it silently.
    """
    flat = local.flat if local.flat is not None else np.zeros(at.size, dtype=bool)
    blank = ~np.isfinite(local.fit)
    flat = flat & ~blank
    if not flat.any() and not blank.any():
        return None
    distinct = int(np.unique(x).size)
    what = "line" if degree == 1 else "parabola"
    parts = []
    for mask, how in (
        (flat, "the smooth is the local weighted mean (flat)"),
        (blank, "no value has weight, so the smooth is left blank"),
    ):
        if mask.any():
            parts.append(
                f"at {int(mask.sum())} of {at.size} grid points (x {at[mask].min():.4g} to "
                f"{at[mask].max():.4g}) {how}"
            )
    return (
        f"x takes only {distinct:,} distinct values, so near some points the neighbourhood "
        f"has too few of them with weight to fit a local {what}: " + "; ".join(parts)
    )
