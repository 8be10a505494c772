"""Mergeable summaries of a column split into pieces: moments, co-moments, extremes, samples.

Every piece here can be built from any split of the rows and merged in any order with the
same result (up to rounding), which is what lets a file be read in batches and a folder be
summarised by many workers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class Grouped:
    """One batch's finite values sorted by group (stable), with each group's start and size."""

    values: np.ndarray
    starts: np.ndarray  # start of every non-empty group in ``values``
    present: np.ndarray  # indices of the non-empty groups
    n: np.ndarray  # count per group (all groups)

    @classmethod
    def of(cls, values: np.ndarray, codes: np.ndarray, groups: int) -> Grouped:
        order = np.argsort(codes, kind="stable")
        n = np.bincount(codes, minlength=groups).astype(np.int64)
        present = np.flatnonzero(n)
        starts = np.concatenate([[0], np.cumsum(n)])[present]
        return cls(values[order], starts, present, n)

    def sums(self, x: np.ndarray) -> np.ndarray:
        """Return per present group the sum of ``x`` (aligned with ``values``), pairwise-summed."""
        if not self.present.size:
            return np.zeros(0)
        # add.reduceat sums each slice with numpy's pairwise summation, unlike bincount's
        # running sum whose error grows with the group's size.
        return np.add.reduceat(x, self.starts)

    def spread(self, per_group: np.ndarray) -> np.ndarray:
        """Return the present groups' values repeated once per row."""
        return np.repeat(per_group, self.n[self.present])


@dataclass
class Rows:
    """One batch's rows put in group order once (stable), shared by every column's pieces.

    Columns are passed already arranged (``arrange``) and may hold NaN for missing values;
    sums skip them by adding zeros, so one sort serves all columns of the batch.
    """

    order: np.ndarray
    starts: np.ndarray  # start of every non-empty group
    present: np.ndarray  # the non-empty groups
    size: np.ndarray  # rows per group (all groups)
    groups: int

    @classmethod
    def of(cls, codes: np.ndarray, groups: int) -> Rows:
        order = np.argsort(codes, kind="stable")
        size = np.bincount(codes, minlength=groups).astype(np.int64)
        present = np.flatnonzero(size)
        starts = np.concatenate([[0], np.cumsum(size)])[present]
        return cls(order, starts, present, size, groups)

    def arrange(self, x: np.ndarray) -> np.ndarray:
        return x[self.order]

    def sums(self, x: np.ndarray) -> np.ndarray:
        """Per present group, the sum of ``x`` (arranged), pairwise-summed by add.reduceat."""
        if not self.present.size:
            return np.zeros(0)
        return np.add.reduceat(x, self.starts)

    def spread(self, per_present: np.ndarray) -> np.ndarray:
        return np.repeat(per_present, self.size[self.present])

    def slices(self):
        """Yield (group, start, stop) of every non-empty group."""
        ends = self.starts + self.size[self.present]
        yield from zip(self.present.tolist(), self.starts.tolist(), ends.tolist(), strict=True)


def _centred(rows: Rows, v: np.ndarray, ok: np.ndarray, pivot: float):
    """Return (count, mean of v - pivot, deviations with zeros where not ok) per present group."""
    n = rows.sums(ok.astype(np.float64))
    safe = np.maximum(n, 1.0)
    shifted = np.where(ok, v - pivot, 0.0)
    mean = rows.sums(shifted) / safe
    d = np.where(ok, shifted - rows.spread(mean), 0.0)
    # A second pass removes the rounding left in the first mean (Chan, Golub & LeVeque 1983).
    correction = rows.sums(d) / safe
    mean += correction
    d = np.where(ok, d - rows.spread(correction), 0.0)
    return n, mean, d


@dataclass
class Moments:
    """Per-group count, mean and sums of powers of deviations M2, M3, M4, plus min and max.

    Moments are of ``value - pivot`` (``mean`` too): one constant per column, shared by all
    pieces, chosen near the data so a large common offset costs no precision in the merge
    (its δ terms would otherwise carry the rounding of means like 10,000,000.1). Arrays are
    indexed by group; ``grow`` adds empty groups.
    """

    n: np.ndarray
    mean: np.ndarray
    m2: np.ndarray
    m3: np.ndarray
    m4: np.ndarray
    low: np.ndarray
    high: np.ndarray
    pivot: float = 0.0

    @classmethod
    def empty(cls, groups: int, pivot: float = 0.0) -> Moments:
        """Return moments of no values for ``groups`` groups."""
        z = np.zeros(groups)
        return cls(
            n=np.zeros(groups, dtype=np.int64),
            mean=z.copy(),
            m2=z.copy(),
            m3=z.copy(),
            m4=z.copy(),
            low=np.full(groups, np.inf),
            high=np.full(groups, -np.inf),
            pivot=pivot,
        )

    @classmethod
    def of(cls, values: np.ndarray, codes: np.ndarray, groups: int, pivot: float = 0.0) -> Moments:
        """Return the moments of one batch: ``values`` (NaN = missing) with group ``codes``."""
        rows = Rows.of(codes, groups)
        return cls.from_rows(rows, rows.arrange(values), pivot)

    @classmethod
    def from_rows(cls, rows: Rows, values: np.ndarray, pivot: float = 0.0) -> Moments:
        """Return the moments of one batch whose ``values`` are arranged by ``rows``.

        Notes
        -----
        Two passes inside the batch (mean, then centred powers) with a correction of the mean
        by the mean of the deviations, so a large common offset costs no precision; sums are
        pairwise (numpy's reduction), so their rounding grows like log n, not n.
        """
        out = cls.empty(rows.groups, pivot)
        if not rows.present.size:
            return out
        ok = ~np.isnan(values)
        n, mean, d = _centred(rows, values, ok, pivot)
        k = rows.present
        d2 = d * d
        out.n[k] = n.astype(np.int64)
        out.mean[k] = mean
        out.m2[k] = rows.sums(d2)
        out.m3[k] = rows.sums(d2 * d)
        out.m4[k] = rows.sums(d2 * d2)
        out.low[k] = np.minimum.reduceat(np.where(ok, values, np.inf), rows.starts)
        out.high[k] = np.maximum.reduceat(np.where(ok, values, -np.inf), rows.starts)
        return out

    @property
    def means(self) -> np.ndarray:
        """Return the group means (NaN for empty groups)."""
        with np.errstate(invalid="ignore"):
            return np.where(self.n > 0, self.pivot + self.mean, np.nan)

    def grow(self, groups: int) -> Moments:
        """Return these moments with room for ``groups`` groups (new ones empty)."""
        extra = groups - self.n.shape[0]
        if extra <= 0:
            return self
        pad = Moments.empty(extra, self.pivot)
        return Moments(
            *(np.concatenate([getattr(self, k), getattr(pad, k)]) for k in MOMENT_FIELDS),
            pivot=self.pivot,
        )

    def take(self, index: np.ndarray) -> Moments:
        """Return the moments of groups ``index`` (reorders or subsets the groups)."""
        return Moments(*(getattr(self, k)[index] for k in MOMENT_FIELDS), pivot=self.pivot)

    def merge(self, other: Moments) -> Moments:
        """Return the moments of the union of both pieces' values, group by group.

        Notes
        -----
        With n = na + nb and δ = mean_b - mean_a:
        mean = mean_a + δ nb/n; M2 = M2a + M2b + δ² na nb/n;
        M3 = M3a + M3b + δ³ na nb (na - nb)/n² + 3δ (na M2b - nb M2a)/n;
        M4 = M4a + M4b + δ⁴ na nb (na² - na nb + nb²)/n³ + 6δ² (na² M2b + nb² M2a)/n²
        + 4δ (na M3b - nb M3a)/n.

        References
        ----------
        Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise
        algorithm for computing sample variances. Stanford report STAN-CS-79-773.
        Pébay, P. (2008). Formulas for robust, one-pass parallel computation of covariances and
        arbitrary-order statistical moments. Sandia report SAND2008-6212.
        """
        if self.pivot != other.pivot:
            raise ValueError("moments with different pivots cannot be merged")
        groups = max(self.n.shape[0], other.n.shape[0])
        a, b = self.grow(groups), other.grow(groups)
        na, nb = a.n.astype(np.float64), b.n.astype(np.float64)
        n = na + nb
        safe = np.where(n > 0, n, 1.0)
        delta = b.mean - a.mean
        delta = np.where((na > 0) & (nb > 0), delta, 0.0)
        mean = np.where(na > 0, a.mean, 0.0) + delta * nb / safe
        mean = np.where((na == 0) & (nb > 0), b.mean, mean)
        m2 = a.m2 + b.m2 + delta**2 * na * nb / safe
        m3 = (
            a.m3
            + b.m3
            + delta**3 * na * nb * (na - nb) / safe**2
            + 3.0 * delta * (na * b.m2 - nb * a.m2) / safe
        )
        m4 = (
            a.m4
            + b.m4
            + delta**4 * na * nb * (na * na - na * nb + nb * nb) / safe**3
            + 6.0 * delta**2 * (na * na * b.m2 + nb * nb * a.m2) / safe**2
            + 4.0 * delta * (na * b.m3 - nb * a.m3) / safe
        )
        return Moments(
            n=a.n + b.n,
            mean=mean,
            m2=m2,
            m3=m3,
            m4=m4,
            low=np.minimum(a.low, b.low),
            high=np.maximum(a.high, b.high),
            pivot=self.pivot,
        )

    def total(self) -> Moments:
        """Return the moments of all groups pooled, as one group (pairwise merge order)."""
        pieces = [self.take(np.array([g])) for g in range(self.n.shape[0])]
        if not pieces:
            return Moments.empty(1, self.pivot)
        while len(pieces) > 1:
            merged = [a.merge(b) for a, b in zip(pieces[::2], pieces[1::2], strict=False)]
            if len(pieces) % 2:
                merged.append(pieces[-1])
            pieces = merged
        return pieces[0]


MOMENT_FIELDS = ("n", "mean", "m2", "m3", "m4", "low", "high")


@dataclass
class CoMoments:
    """Per-group co-moment of two columns over rows where both are present.

    ``c`` is Σ (a - mean_a)(b - mean_b); ``m2a``/``m2b`` the sums of squared deviations on the
    same rows, so Pearson's r = c / √(m2a m2b).
    """

    n: np.ndarray
    mean_a: np.ndarray
    mean_b: np.ndarray
    m2a: np.ndarray
    m2b: np.ndarray
    c: np.ndarray

    @classmethod
    def empty(cls, groups: int) -> CoMoments:
        z = np.zeros(groups)
        return cls(
            np.zeros(groups, dtype=np.int64), z.copy(), z.copy(), z.copy(), z.copy(), z.copy()
        )

    @classmethod
    def of(
        cls,
        a: np.ndarray,
        b: np.ndarray,
        codes: np.ndarray,
        groups: int,
        pivots: tuple[float, float] = (0.0, 0.0),
    ) -> CoMoments:
        """Return the co-moments of one batch (rows where either is NaN are left out).

        Means are of ``a - pivots[0]`` and ``b - pivots[1]`` (see :class:`Moments`).
        """
        rows = Rows.of(codes, groups)
        return cls.from_rows(rows, rows.arrange(a), rows.arrange(b), pivots)

    @classmethod
    def from_rows(cls, rows: Rows, a, b, pivots=(0.0, 0.0)) -> CoMoments:
        """Return the co-moments of a batch whose columns are arranged by ``rows``."""
        out = cls.empty(rows.groups)
        if not rows.present.size:
            return out
        ok = ~(np.isnan(a) | np.isnan(b))
        n, mean_a, da = _centred(rows, a, ok, pivots[0])
        _, mean_b, db = _centred(rows, b, ok, pivots[1])
        k = rows.present
        out.n[k] = n.astype(np.int64)
        out.mean_a[k], out.mean_b[k] = mean_a, mean_b
        out.m2a[k], out.m2b[k], out.c[k] = (
            rows.sums(da * da),
            rows.sums(db * db),
            rows.sums(da * db),
        )
        return out

    def grow(self, groups: int) -> CoMoments:
        extra = groups - self.n.shape[0]
        if extra <= 0:
            return self
        pad = CoMoments.empty(extra)
        return CoMoments(
            *(np.concatenate([getattr(self, k), getattr(pad, k)]) for k in COMOMENT_FIELDS)
        )

    def take(self, index: np.ndarray) -> CoMoments:
        return CoMoments(*(getattr(self, k)[index] for k in COMOMENT_FIELDS))

    def merge(self, other: CoMoments) -> CoMoments:
        """Return the co-moments of the union of both pieces.

        Notes: with δa, δb the differences of means, C = Ca + Cb + δa δb na nb / n
        (Pébay 2008, eq. 3.12; Chan, Golub & LeVeque 1979 for the squared terms).
        """
        groups = max(self.n.shape[0], other.n.shape[0])
        x, y = self.grow(groups), other.grow(groups)
        na, nb = x.n.astype(np.float64), y.n.astype(np.float64)
        n = na + nb
        safe = np.where(n > 0, n, 1.0)
        both = (na > 0) & (nb > 0)
        da = np.where(both, y.mean_a - x.mean_a, 0.0)
        db = np.where(both, y.mean_b - x.mean_b, 0.0)
        only_b = (na == 0) & (nb > 0)
        mean_a = np.where(only_b, y.mean_a, x.mean_a + da * nb / safe)
        mean_b = np.where(only_b, y.mean_b, x.mean_b + db * nb / safe)
        w = na * nb / safe
        return CoMoments(
            n=x.n + y.n,
            mean_a=mean_a,
            mean_b=mean_b,
            m2a=x.m2a + y.m2a + da * da * w,
            m2b=x.m2b + y.m2b + db * db * w,
            c=x.c + y.c + da * db * w,
        )

    def swapped(self) -> CoMoments:
        """Return the co-moments with the two columns' roles exchanged."""
        return CoMoments(self.n, self.mean_b, self.mean_a, self.m2b, self.m2a, self.c)

    def with_total(self) -> CoMoments:
        """Return these groups followed by one more: all groups pooled (pairwise merge order)."""
        pieces = [self.take(np.array([g])) for g in range(self.n.shape[0])]
        if not pieces:
            return CoMoments.empty(1)
        while len(pieces) > 1:
            merged = [a.merge(b) for a, b in zip(pieces[::2], pieces[1::2], strict=False)]
            if len(pieces) % 2:
                merged.append(pieces[-1])
            pieces = merged
        return CoMoments(
            *(np.concatenate([getattr(self, k), getattr(pieces[0], k)]) for k in COMOMENT_FIELDS)
        )

    def pearson(self) -> np.ndarray:
        """Return Pearson's r per group (NaN where undefined)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return self.c / np.sqrt(self.m2a * self.m2b)


COMOMENT_FIELDS = ("n", "mean_a", "mean_b", "m2a", "m2b", "c")


@dataclass
class Extremes:
    """The ``k`` smallest and ``k`` largest values of each group (sorted, NaN-padded)."""

    k: int
    small: np.ndarray  # groups × k, ascending, NaN where the group has fewer values
    large: np.ndarray  # groups × k, ascending, NaN-padded at the start

    @classmethod
    def empty(cls, groups: int, k: int) -> Extremes:
        return cls(k, np.full((groups, k), np.nan), np.full((groups, k), np.nan))

    @classmethod
    def of(cls, values: np.ndarray, codes: np.ndarray, groups: int, k: int) -> Extremes:
        """Return the extremes of one batch (NaN values are left out)."""
        rows = Rows.of(codes, groups)
        return cls.from_rows(rows, rows.arrange(values), k)

    @classmethod
    def from_rows(cls, rows: Rows, values: np.ndarray, k: int) -> Extremes:
        """Return the extremes of a batch whose ``values`` are arranged by ``rows``."""
        out = cls.empty(rows.groups, k)
        # One partition per group (a loop over groups, not rows): O(rows) per batch.
        for group, start, stop in rows.slices():
            chunk = values[start:stop]
            chunk = chunk[~np.isnan(chunk)]
            if chunk.size <= k:
                ordered = np.sort(chunk)
                out.small[group, : ordered.size] = ordered
                out.large[group, k - ordered.size :] = ordered
                continue
            out.small[group] = np.sort(np.partition(chunk, k - 1)[:k])
            out.large[group] = np.sort(np.partition(chunk, chunk.size - k)[chunk.size - k :])
        return out

    def grow(self, groups: int) -> Extremes:
        extra = groups - self.small.shape[0]
        if extra <= 0:
            return self
        pad = Extremes.empty(extra, self.k)
        return Extremes(
            self.k, np.vstack([self.small, pad.small]), np.vstack([self.large, pad.large])
        )

    def take(self, index: np.ndarray) -> Extremes:
        return Extremes(self.k, self.small[index], self.large[index])

    def merge(self, other: Extremes) -> Extremes:
        groups = max(self.small.shape[0], other.small.shape[0])
        a, b = self.grow(groups), other.grow(groups)
        # np.sort puts NaN last: the first k of the union are the k smallest.
        small = np.sort(np.hstack([a.small, b.small]), axis=1)[:, : self.k]
        both = np.hstack([a.large, b.large])
        large = -np.sort(-both, axis=1)[:, : self.k][:, ::-1]  # k largest, ascending
        return Extremes(self.k, small, large)


@dataclass
class Sample:
    """A seeded uniform sample without replacement of at most ``k`` rows per group.

    Every row gets a uniform random key; a group's sample is its ``k`` rows with the smallest
    keys (bottom-k sampling), so samples of pieces merge by keeping the smallest keys again.

    References
    ----------
    Cohen, E. & Kaplan, H. (2007). Summarizing data using bottom-k sketches. PODC '07.
    """

    k: int
    keys: np.ndarray  # float64 per kept row
    codes: np.ndarray  # int32 per kept row (group index)
    rows: np.ndarray  # int64 row number in the file, to restore file order
    columns: dict[str, np.ndarray]

    @classmethod
    def empty(cls, k: int, names) -> Sample:
        return cls(
            k,
            np.zeros(0),
            np.zeros(0, dtype=np.int32),
            np.zeros(0, dtype=np.int64),
            {n: np.zeros(0) for n in names},
        )

    def add(self, keys, codes, rows, columns) -> Sample:
        """Return the sample of these rows together with the ones already kept."""
        if self.keys.size:
            # Rows whose key is above their group's current k-th key cannot enter: skip them
            # before any sorting, so later batches cost little.
            groups = int(max(codes.max(initial=-1), self.codes.max(initial=-1))) + 1
            limit = self._limits(groups)
            enter = keys < limit[codes]
            keys, codes, rows = keys[enter], codes[enter], rows[enter]
            columns = {n: v[enter] for n, v in columns.items()}
        return self._keep(
            np.concatenate([self.keys, keys]),
            np.concatenate([self.codes, codes]),
            np.concatenate([self.rows, rows]),
            {n: np.concatenate([self.columns[n], columns[n]]) for n in self.columns},
        )

    def merge(self, other: Sample) -> Sample:
        return self.add(other.keys, other.codes, other.rows, other.columns)

    def add_rows(self, rows: Rows, keys, codes, numbers, columns) -> Sample:
        """Like :meth:`add` for a batch arranged by ``rows``: only each group's k smallest
        keys of the batch are candidates, found by one partition per group."""
        chosen = []
        for _, start, stop in rows.slices():
            if stop - start <= self.k:
                chosen.append(np.arange(start, stop))
            else:
                part = np.argpartition(keys[start:stop], self.k - 1)[: self.k]
                chosen.append(start + part)
        if not chosen:
            return self
        pick = np.concatenate(chosen)
        return self.add(
            keys[pick], codes[pick], numbers[pick], {n: v[pick] for n, v in columns.items()}
        )

    def _limits(self, groups: int) -> np.ndarray:
        limit = np.full(groups, np.inf)
        counts = np.bincount(self.codes, minlength=groups)
        order = np.lexsort((self.keys, self.codes))
        bounds = np.searchsorted(self.codes[order], np.arange(groups + 1))
        full = np.flatnonzero(counts >= self.k)
        limit[full] = self.keys[order][bounds[full] + self.k - 1]
        return limit

    def _keep(self, keys, codes, rows, columns) -> Sample:
        order = np.lexsort((keys, codes))
        c = codes[order]
        bounds = np.searchsorted(c, np.arange(int(c.max(initial=-1)) + 2))
        rank = np.arange(c.size) - bounds[c] if c.size else np.zeros(0, dtype=np.int64)
        kept = order[rank < self.k]
        return Sample(
            self.k, keys[kept], codes[kept], rows[kept], {n: v[kept] for n, v in columns.items()}
        )

    def remap(self, new_code: np.ndarray) -> Sample:
        """Return the sample with group codes renumbered (``new_code[old]``), in file order."""
        order = np.argsort(self.rows, kind="stable")
        return Sample(
            self.k,
            self.keys[order],
            new_code[self.codes[order]].astype(np.int32),
            self.rows[order],
            {n: v[order] for n, v in self.columns.items()},
        )
