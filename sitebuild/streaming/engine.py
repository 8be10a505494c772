"""Summaries of a dataset too big for memory, from passes over its record batches.

Each pass folds batches into a small state, and states of different parts merge, so the
same code runs one batch after another on one machine or one part per task on a cluster
(:mod:`sitebuild.engines.dask`). Nothing kept grows with the number of rows: per group and
column a fixed number of moments, extremes, bucket counts and candidates, and a bounded
row sample.

What is exact and what is sampled
---------------------------------
- Exact (same as the in-memory engine, up to floating-point rounding): n, missing, mean, sd,
  se, mean interval, skewness, excess kurtosis, min, max, the shares within 1 and 2 sd,
  D'Agostino–Pearson p-values, correlations from co-moments, histogram counts.
- Exact by selection, not a sketch: median, quartiles, the median's order-statistic
  interval, Tukey fences, whiskers and outlier counts. Each needed order statistic is found
  by bucketed counting on the order-preserving integer image of the float64 values: a pass
  counts values per bucket of the top bits of (key - key of the group's min), the bucket
  holding the wanted rank is split again in the next pass, and once it holds at most a few
  thousand values they are kept and sorted. Memory per pass: a fixed number of counters per
  wanted rank; passes: typically 3-4 over the data, at most 64 / bits-per-pass.
- Groups with at most 5,000 values keep all their values and are summarised exactly as in
  memory (Shapiro–Wilk included).
- Exact for the sections too: every moment-based comparison (Welch's t, both ANOVAs,
  Tukey–Kramer, Games–Howell, Hedges' g, TOST, detectable difference), Brown–Forsythe (the
  moments of |value - group median|, merged in the finishing pass), Pearson's r and the
  straight-line fits, from :meth:`Streamed.group_moments`, :meth:`Streamed.pair_moments` and
  :meth:`Streamed.measures` (see :mod:`sitebuild.stats.from_moments`).
- Sampled: the Table handed to the sections holds a seeded uniform sample of at most
  ``SAMPLE_PER_GROUP`` rows per group (bottom-k keys) for what needs the values themselves:
  rank tests and rank correlations, Hodges–Lehmann, Cliff's delta, Dunnett, permutation
  tests, smooths and scatter points. Each results object lists those keys under
  ``from_sample``.
"""

from __future__ import annotations

import math
import weakref
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from ..cores import cores, share
from ..ingest import (
    ColumnProblem,
    IngestReport,
    check_label_lengths,
    display_key,
    unordered_warnings,
)
from ..stats.summary import (
    SHAPIRO_LIMIT,
    Summary,
    dagostino_pearson,
    describe_sorted,
    within_sd_bound,
)
from .pieces import MOMENT_FIELDS, CoMoments, Extremes, Moments, Rows, Sample
from .source import Batch, Source, batches

SMALL = SHAPIRO_LIMIT  # groups up to this many values keep every value
SAMPLE_PER_GROUP = 20_000  # rows kept per group for the sampled Table
SAMPLE_MIN_TOTAL = 200_000  # ...but at least this many in all when groups are many
EXTREMES = 20  # most extreme values kept per side per group (the outlier points drawn)
COUNTER_BUDGET = 1 << 18  # bucket counters per column and pass (2 MB)
COLLECT_CAP = 1 << 14  # a bucket with at most this many values is kept and sorted
SIGN = np.uint64(1 << 63)


def order_key(values: np.ndarray) -> np.ndarray:
    """Return uint64 keys that sort like the float64 ``values`` (IEEE 754 total order)."""
    bits = values.view(np.uint64)
    return np.where(bits & SIGN, ~bits, bits | SIGN)


def from_key(keys: np.ndarray) -> np.ndarray:
    """Return the float64 values of keys made by :func:`order_key`."""
    keys = np.asarray(keys, dtype=np.uint64)
    bits = np.where(keys & SIGN, keys & ~SIGN, ~keys)
    return bits.view(np.float64)


# ---------------------------------------------------------------- pass 1: one read of the file


@dataclass
class Discovery:
    """What one read of the rows learns: labels, counts, moments, extremes, a sample."""

    numeric: tuple[str, ...]
    sample_k: int
    labels: list = field(default_factory=list)
    index: dict = field(default_factory=dict)
    rows_read: int = 0
    dropped: int = 0
    missing: dict = field(default_factory=dict)
    problems: dict = field(default_factory=dict)  # name -> [count, examples]
    moments: dict = field(default_factory=dict)
    extremes: dict = field(default_factory=dict)
    comoments: dict = field(default_factory=dict)
    sample: Sample | None = None
    rng: np.random.Generator | None = None
    group_rows: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))

    def pairs(self):
        names = self.numeric
        return [(a, b) for i, a in enumerate(names) for b in names[i + 1 :]]


@dataclass(frozen=True)
class DiscoverTask:
    """Pass 1: fold batches into a :class:`Discovery`."""

    numeric: tuple[str, ...]
    sample_k: int
    seed: tuple[int, ...]
    pivots: tuple[float, ...]  # per numeric column, shared by every piece (see Moments)

    def start(self, part: int) -> Discovery:
        state = Discovery(self.numeric, self.sample_k)
        state.rng = np.random.default_rng([*self.seed, part])
        state.sample = Sample.empty(self.sample_k, self.numeric)
        for name, pivot in zip(self.numeric, self.pivots, strict=True):
            state.missing[name] = 0
            state.moments[name] = Moments.empty(0, pivot)
            state.extremes[name] = Extremes.empty(0, EXTREMES)
        for pair in state.pairs():
            state.comoments[pair] = CoMoments.empty(0)
        return state

    def add(self, state: Discovery, batch: Batch, part: int) -> Discovery:
        local = np.empty(len(batch.labels) + 1, dtype=np.int32)
        local[-1] = -1
        for i, label in enumerate(batch.labels):
            if label is None:
                local[i] = -1
            else:
                if label not in state.index:
                    state.index[label] = len(state.labels)
                    state.labels.append(label)
                local[i] = state.index[label]
        codes = local[batch.label_index]
        keep = codes >= 0
        state.rows_read += batch.rows
        state.dropped += int(batch.rows - keep.sum())
        for name, problem in batch.problems.items():
            count, examples = state.problems.get(name, (0, ()))
            state.problems[name] = (count + problem.count, (*examples, *problem.examples)[:3])
        groups = len(state.labels)
        codes = codes[keep]
        rows_here = np.bincount(codes, minlength=groups)
        rows_here[: state.group_rows.size] += state.group_rows
        state.group_rows = rows_here
        # One stable sort by group serves every column's moments, extremes and the sample.
        rows = Rows.of(codes, groups)
        columns = {n: rows.arrange(v[keep]) for n, v in batch.columns.items()}
        for name in self.numeric:
            v = columns[name]
            state.missing[name] += int(np.isnan(v).sum())
            piece = Moments.from_rows(rows, v, state.moments[name].pivot)
            state.moments[name] = state.moments[name].merge(piece)
            extremes = Extremes.from_rows(rows, v, EXTREMES)
            state.extremes[name] = state.extremes[name].merge(extremes)
        for a, b in state.pairs():
            pivots = (state.moments[a].pivot, state.moments[b].pivot)
            piece = CoMoments.from_rows(rows, columns[a], columns[b], pivots)
            state.comoments[(a, b)] = state.comoments[(a, b)].merge(piece)
        numbers = rows.arrange((np.int64(part) << 40) + batch.first_row + np.flatnonzero(keep))
        keys = state.rng.random(codes.size)
        sorted_codes = rows.arrange(codes)
        state.sample = state.sample.add_rows(rows, keys, sorted_codes, numbers, columns)
        return state

    def merge(self, a: Discovery, b: Discovery) -> Discovery:
        to_a = np.empty(len(b.labels), dtype=np.int64)
        for i, label in enumerate(b.labels):
            if label not in a.index:
                a.index[label] = len(a.labels)
                a.labels.append(label)
            to_a[i] = a.index[label]
        groups = len(a.labels)
        # Place b's groups at a's positions; positions b lacks point at an empty group.
        spread = np.full(groups, len(b.labels), dtype=np.int64)
        spread[to_a] = np.arange(len(b.labels))
        a.rows_read += b.rows_read
        a.dropped += b.dropped
        rows = np.zeros(groups, dtype=np.int64)
        rows[: a.group_rows.size] += a.group_rows
        rows[to_a] += b.group_rows[: len(b.labels)] if b.group_rows.size else 0
        a.group_rows = rows
        for name, (count, examples) in b.problems.items():
            have, seen = a.problems.get(name, (0, ()))
            a.problems[name] = (have + count, (*seen, *examples)[:3])
        for name in self.numeric:
            a.missing[name] += b.missing[name]
            grown = b.moments[name].grow(len(b.labels) + 1).take(spread)
            a.moments[name] = a.moments[name].merge(grown)
            ext = b.extremes[name].grow(len(b.labels) + 1).take(spread)
            a.extremes[name] = a.extremes[name].merge(ext)
        for pair in a.pairs():
            co = b.comoments[pair].grow(len(b.labels) + 1).take(spread)
            a.comoments[pair] = a.comoments[pair].merge(co)
        sb = b.sample
        moved = Sample(sb.k, sb.keys, to_a[sb.codes].astype(np.int32), sb.rows, sb.columns)
        a.sample = a.sample.merge(moved)
        return a


# ---------------------------------------------------------------- later passes: order statistics


@dataclass
class ColumnPlan:
    """What one later pass does for one column; arrays are indexed by label (groups, then all)."""

    kmin: np.ndarray  # uint64 key of each label's minimum
    mean: np.ndarray
    sd: np.ndarray
    collect_all: np.ndarray  # bool: keep every value (small labels)
    # Open intervals of the order-key space, one row per interval.
    i_label: np.ndarray
    i_prefix: np.ndarray  # uint64: keys whose (key - kmin) >> shift == prefix
    i_shift: np.ndarray  # uint64
    i_next: np.ndarray  # uint64: shift after this pass's split (== shift in collect mode)
    i_collect: np.ndarray  # bool: keep the values instead of counting sub-buckets
    # Finishing work (last pass): fences per label and shared histogram edges.
    fence_low: np.ndarray | None = None
    fence_high: np.ndarray | None = None
    edges: np.ndarray | None = None
    median: np.ndarray | None = None  # per label: moments of |value - median| (Brown–Forsythe)


@dataclass(frozen=True)
class ScanTask:
    """A later pass: counts and candidates for the open intervals, shares within sd, bins."""

    label_code: dict  # label text -> final group code
    groups: int
    plans: dict  # column name -> ColumnPlan
    first: bool  # the first later pass also counts shares within 1 and 2 sd and keeps small groups

    def start(self, part: int) -> dict:
        del part
        state = {}
        for name, plan in self.plans.items():
            widths = (plan.i_shift - plan.i_next).astype(np.int64)
            offsets = np.concatenate([[0], np.cumsum(np.where(plan.i_collect, 0, 1 << widths))])
            labels = self.groups + 1
            state[name] = {
                "offsets": offsets,
                "counts": np.zeros(int(offsets[-1]), dtype=np.int64),
                "key_low": np.full(plan.i_label.size, np.iinfo(np.uint64).max, dtype=np.uint64),
                "key_high": np.zeros(plan.i_label.size, dtype=np.uint64),
                "kept": [],
                "within": np.zeros((2, labels), dtype=np.int64),
                "small": [],
                "below": np.zeros(labels, dtype=np.int64),
                "above": np.zeros(labels, dtype=np.int64),
                "whisker_low": np.full(labels, np.inf),
                "whisker_high": np.full(labels, -np.inf),
                "bins": None
                if plan.edges is None
                else np.zeros((self.groups, plan.edges.size - 1), dtype=np.int64),
                "spread": None if plan.median is None else Moments.empty(self.groups),
            }
        return state

    def add(self, state: dict, batch: Batch, part: int) -> dict:
        del part
        lookup = np.array(
            [self.label_code.get(label, -1) if label is not None else -1 for label in batch.labels]
            + [-1],
            dtype=np.int64,
        )
        codes = lookup[batch.label_index]
        keep = codes >= 0
        codes = codes[keep]
        for name, plan in self.plans.items():
            v = batch.columns[name][keep]
            ok = ~np.isnan(v)
            v, c = v[ok], codes[ok]
            acc = state[name]
            keys = order_key(v)
            self._scan(acc, plan, v, keys, c)
            self._scan_all(acc, plan, v, keys)
            if plan.edges is not None:
                bins = np.searchsorted(plan.edges[:-1], v, side="right") - 1
                width = plan.edges.size - 1
                acc["bins"] += np.bincount(c * width + bins, minlength=self.groups * width).reshape(
                    self.groups, width
                )
        return state

    def _scan(self, acc, plan: ColumnPlan, v, keys, lab) -> None:
        labels = self.groups + 1
        if self.first:
            d = np.abs(v - plan.mean[lab])
            # Each label's bounds, then looked up per row (the same numbers as per row).
            within_1 = within_sd_bound(1, plan.sd, plan.mean)[lab]
            acc["within"][0] += np.bincount(lab[d <= within_1], minlength=labels)
            del within_1
            within_2 = within_sd_bound(2, plan.sd, plan.mean)[lab]
            acc["within"][1] += np.bincount(lab[d <= within_2], minlength=labels)
            small = plan.collect_all[lab]
            if small.any():
                acc["small"].append((lab[small], v[small]))
        if plan.median is not None and lab.size:
            # Absolute deviations from the group's exact median, merged like any moments:
            # the Brown–Forsythe test is the one-way ANOVA of these.
            deviations = np.abs(v - plan.median[lab])
            piece = Moments.of(deviations, lab.astype(np.int32), self.groups)
            acc["spread"] = acc["spread"].merge(piece)
        if plan.fence_low is not None:
            low = v < plan.fence_low[lab]
            high = v > plan.fence_high[lab]
            acc["below"] += np.bincount(lab[low], minlength=labels)
            acc["above"] += np.bincount(lab[high], minlength=labels)
            np.minimum.at(acc["whisker_low"], lab[~low], v[~low])
            np.maximum.at(acc["whisker_high"], lab[~high], v[~high])
        if plan.i_label.size == 0:
            return
        rel = keys - plan.kmin[lab]
        # Intervals of the labels seen here, one "slot" at a time: slot j holds each label's
        # j-th open interval, so the work is a few vector operations per slot, never per row.
        for slot in _slots(plan.i_label, labels):
            slot[self.groups] = -1  # the all-groups row has its own scan
            index = slot[lab]
            present = index >= 0
            at = np.where(present, index, 0)
            member = present & ((rel >> plan.i_shift[at]) == plan.i_prefix[at])
            if not member.any():
                continue
            ids = at[member]
            collect = plan.i_collect[ids]
            if collect.any():
                acc["kept"].append((ids[collect], v[member][collect]))
            count = ~collect
            if count.any():
                ids_c = ids[count]
                r = rel[member][count]
                shift, nxt = plan.i_shift[ids_c], plan.i_next[ids_c]
                sub = (r >> nxt) - (plan.i_prefix[ids_c] << (shift - nxt))
                # The lowest and highest key met per interval: an interval holding a single
                # distinct value (ties, integer data) is then resolved without more splitting.
                np.minimum.at(acc["key_low"], ids_c, r)
                np.maximum.at(acc["key_high"], ids_c, r)
                offsets = acc["offsets"]
                acc["counts"] += np.bincount(
                    offsets[ids_c] + sub.astype(np.int64), minlength=acc["counts"].size
                )

    def _scan_all(self, acc, plan: ColumnPlan, v, keys) -> None:
        """:meth:`_scan` for the all-groups row: the same work with one label, as scalars."""
        lab = self.groups
        if self.first:
            d = np.abs(v - plan.mean[lab])
            sd = plan.sd[lab]
            centre = plan.mean[lab]
            acc["within"][0, lab] += np.count_nonzero(d <= within_sd_bound(1, sd, centre))
            acc["within"][1, lab] += np.count_nonzero(d <= within_sd_bound(2, sd, centre))
            if plan.collect_all[lab] and v.size:
                acc["small"].append((np.full(v.size, lab, dtype=np.int64), v))
        if plan.fence_low is not None:
            low = v < plan.fence_low[lab]
            high = v > plan.fence_high[lab]
            acc["below"][lab] += np.count_nonzero(low)
            acc["above"][lab] += np.count_nonzero(high)
            acc["whisker_low"][lab] = min(acc["whisker_low"][lab], v[~low].min(initial=np.inf))
            acc["whisker_high"][lab] = max(acc["whisker_high"][lab], v[~high].max(initial=-np.inf))
        mine = np.flatnonzero(plan.i_label == lab)
        if not mine.size:
            return
        rel = keys - plan.kmin[lab]
        for i in mine.tolist():
            member = (rel >> plan.i_shift[i]) == plan.i_prefix[i]
            if not member.any():
                continue
            if plan.i_collect[i]:
                acc["kept"].append((np.full(np.count_nonzero(member), i), v[member]))
                continue
            r = rel[member]
            shift, nxt = plan.i_shift[i], plan.i_next[i]
            sub = ((r >> nxt) - (plan.i_prefix[i] << (shift - nxt))).astype(np.int64)
            acc["key_low"][i] = min(acc["key_low"][i], r.min())
            acc["key_high"][i] = max(acc["key_high"][i], r.max())
            start = int(acc["offsets"][i])
            width = int(acc["offsets"][i + 1]) - start
            acc["counts"][start : start + width] += np.bincount(sub, minlength=width)

    def merge(self, a: dict, b: dict) -> dict:
        for name, acc in a.items():
            other = b[name]
            acc["counts"] += other["counts"]
            np.minimum(acc["key_low"], other["key_low"], out=acc["key_low"])
            np.maximum(acc["key_high"], other["key_high"], out=acc["key_high"])
            acc["kept"] += other["kept"]
            acc["within"] += other["within"]
            acc["small"] += other["small"]
            acc["below"] += other["below"]
            acc["above"] += other["above"]
            np.minimum(acc["whisker_low"], other["whisker_low"], out=acc["whisker_low"])
            np.maximum(acc["whisker_high"], other["whisker_high"], out=acc["whisker_high"])
            if acc["bins"] is not None:
                acc["bins"] += other["bins"]
            if acc["spread"] is not None:
                acc["spread"] = acc["spread"].merge(other["spread"])
        return a


def _slots(i_label: np.ndarray, labels: int) -> list[np.ndarray]:
    """Return per slot j an array over labels: the index of the label's j-th interval or -1."""
    order = np.argsort(i_label, kind="stable")
    sorted_labels = i_label[order]
    starts = np.searchsorted(sorted_labels, np.arange(labels))
    rank = np.arange(order.size) - starts[sorted_labels]
    out = []
    for j in range(int(rank.max(initial=-1)) + 1):
        slot = np.full(labels, -1, dtype=np.int64)
        chosen = rank == j
        slot[sorted_labels[chosen]] = order[chosen]
        out.append(slot)
    return out


# ---------------------------------------------------------------- runner and assembly

Runner = Callable[[Source, object], object]


def run_local(source: Source, task) -> object:
    """Run one pass over every part and return the merged state.

    Each part folds its own batches into its own state (with its own seeded generator), and
    the states merge in part order. On several cores the parts of a folder are read and
    folded side by side (``cores.share``), as many at a time as there are cores, so only that
    many states and batches are held at once; the merge order, and so every number, is the
    same as one part after another.
    """

    def fold(part: int) -> object:
        state = task.start(part)
        for batch in batches(source, part):
            state = task.add(state, batch, part)
        return state

    parts = range(len(source.parts))
    width = cores()
    merged = None
    for start in range(0, len(parts), width):
        for state in share(fold, parts[start : start + width]):
            merged = state if merged is None else task.merge(merged, state)
    return merged


class LocalRunner:
    """Runs passes in this process. A CSV is parsed once: the first pass also writes the parsed
    rows (group index and float columns) to a temporary Arrow IPC file that later passes read
    instead, deleted when the summaries are gone."""

    def __init__(self):
        self.spill: Source | None = None
        self._folder: str | None = None

    def __call__(self, source: Source, task) -> object:
        if not (isinstance(task, DiscoverTask) and source.kind == "csv"):
            return run_local(source, task)
        import tempfile

        from .source import write_spill

        if self._folder is None:
            self._folder = tempfile.mkdtemp(prefix="sitebuild-stream-")
        path = f"{self._folder}/rows.arrow"
        state = task.start(0)
        holder = {"state": state}

        def parsed():
            for batch in batches(source, 0):
                holder["state"] = task.add(holder["state"], batch, 0)
                index = holder["state"].index
                lookup = np.array(
                    [index.get(label, -1) if label is not None else -1 for label in batch.labels]
                    + [-1],
                    dtype=np.int32,
                )
                yield lookup[batch.label_index], batch.columns

        write_spill(path, parsed())
        state = holder["state"]
        self.spill = Source(
            kind="spill",
            parts=(path,),
            group=source.group,
            numeric=source.numeric,
            file=source.file,
            labels=tuple(state.labels),
        )
        return state

    def cleanup(self) -> None:
        """Delete the temporary spill file."""
        if self._folder is not None:
            import shutil

            shutil.rmtree(self._folder, ignore_errors=True)
            self._folder = None


@dataclass
class Targets:
    """Order statistics wanted for one column: label, 0-based rank, and where the search is."""

    label: np.ndarray
    rank: np.ndarray
    below: np.ndarray
    prefix: np.ndarray
    shift: np.ndarray
    value: np.ndarray
    done: np.ndarray
    collect: np.ndarray


def _bits(span: np.ndarray) -> np.ndarray:
    """Return the bit length of each uint64 (0 for 0)."""
    out = np.zeros(span.shape, dtype=np.uint64)
    s = span.copy()
    for step in (32, 16, 8, 4, 2, 1):
        big = s >= (np.uint64(1) << np.uint64(step))
        out[big] += np.uint64(step)
        s[big] >>= np.uint64(step)
    out[s > 0] += np.uint64(1)
    return out


def quantile_ranks(n: int, level: float) -> list[int]:
    """Return the 0-based ranks a summary of n sorted values reads (quartiles, median CI)."""
    from ..stats.summary import median_ci_ranks

    ranks = set()
    for q in (0.25, 0.5, 0.75):
        low = math.floor((n - 1) * q)
        ranks.update({low, min(low + 1, n - 1)})
    found = median_ci_ranks(n, level)
    if found is not None:
        ranks.update({found[0] - 1, found[1] - 1})
    return sorted(ranks)


def _type7(values: dict, n: int, q: float) -> float:
    position = (n - 1) * q
    low = math.floor(position)
    high = min(low + 1, n - 1)
    weight = position - low
    below, above = float(values[low]), float(values[high])
    step = above - below
    if math.isfinite(step):
        return below + step * weight
    return below * (1.0 - weight) + above * weight  # as stats.summary._quantile_sorted


def _numpy_linear(values: dict, n: int, q: float) -> float:
    """numpy.percentile's default (linear) interpolation, with its own lerp arithmetic."""
    position = (n - 1) * q
    low = math.floor(position)
    high = min(low + 1, n - 1)
    t = position - low
    a, b = values[low], values[high]
    diff = b - a
    return float(b - diff * (1 - t)) if t >= 0.5 else float(a + diff * t)


@dataclass
class MeasurePieces:
    """Everything the summaries section shows for one measure, computed from passes."""

    summaries: list[Summary]  # per group, display order
    overall: Summary
    edges: np.ndarray
    counts: np.ndarray  # groups × bins
    outlier_points: list[list[float]]
    spread: Moments | None = None  # per group: moments of |value - group median|


@dataclass
class Streamed:
    """Exact summaries of a dataset read in batches; handed to sections as ``Table.exact``."""

    source: Source
    groups: tuple[str, ...]
    label_code: dict
    moments: dict  # column -> Moments (groups in display order)
    extremes: dict
    comoments: dict  # (column a, column b) -> CoMoments
    missing_by_group: dict  # column -> int array per group
    engine: str
    sample_rows: int
    sample_per_group: int
    passes: int = 1
    runner: Runner = field(default=run_local, repr=False)
    _measures: dict = field(default_factory=dict, repr=False)

    def pearson(self, a: str, b: str) -> np.ndarray:
        """Return Pearson's r of columns a and b per group, from exact co-moments."""
        return self.pair_moments(a, b).pearson()[:-1]

    def pair_moments(self, a: str, b: str) -> CoMoments:
        """Return the exact co-moments of columns a and b (in that role) per group, then all
        rows as one more entry."""
        if (a, b) in self.comoments:
            return self.comoments[(a, b)].with_total()
        return self.comoments[(b, a)].swapped().with_total()

    def group_moments(self, name: str) -> list[tuple[int, float, float]]:
        """Return (n, mean, variance) of column ``name`` per group in display order, exact
        over every row (variance NaN below 2 values)."""
        m = self.moments[name]
        n = m.n.astype(np.int64)
        with np.errstate(invalid="ignore", divide="ignore"):
            variance = np.where(n > 1, m.m2 / np.maximum(n - 1, 1), np.nan)
        return list(zip(n.tolist(), m.means.tolist(), variance.tolist(), strict=True))

    def group_rows(self) -> np.ndarray:
        """Return the rows of each group (display order), missing values included."""
        name = next(iter(self.moments))
        return self.moments[name].n + self.missing_by_group[name]

    def flat(self, name: str) -> np.ndarray:
        """Return per group, then all rows, whether column ``name`` holds one value only."""
        m = self.moments[name]
        low = np.append(m.low, m.low.min(initial=np.inf))
        high = np.append(m.high, m.high.max(initial=-np.inf))
        return low == high

    def measures(self, names, level: float) -> dict[str, MeasurePieces]:
        """Return the :class:`MeasurePieces` of each measure (passes over the data run once)."""
        key = (tuple(names), level)
        if key not in self._measures:
            self._measures[key] = self._compute(tuple(names), level)
        return self._measures[key]

    def _compute(self, names: tuple[str, ...], level: float) -> dict[str, MeasurePieces]:
        from scipy import stats

        G = len(self.groups)
        labels = G + 1
        stat = {}
        plans, targets = {}, {}
        for name in names:
            per = self.moments[name]
            total = per.total()
            every = Moments(
                *(np.concatenate([getattr(per, k), getattr(total, k)]) for k in MOMENT_FIELDS),
                pivot=per.pivot,
            )
            stat[name] = every
            n = every.n
            with np.errstate(invalid="ignore", divide="ignore"):
                sd = np.sqrt(every.m2 / np.maximum(n - 1, 1))
            lows = np.where(n > 0, every.low, 0.0)
            highs = np.where(n > 0, every.high, 0.0)
            kmin = order_key(lows)
            span = order_key(highs) - kmin
            big = n > SMALL
            t_label, t_rank = [], []
            for label in np.flatnonzero(big):
                for rank in quantile_ranks(int(n[label]), level):
                    t_label.append(label)
                    t_rank.append(rank)
            t_label = np.array(t_label, dtype=np.int64)
            count = t_label.size
            targets[name] = Targets(
                label=t_label,
                rank=np.array(t_rank, dtype=np.int64),
                below=np.zeros(count, dtype=np.int64),
                prefix=np.zeros(count, dtype=np.uint64),
                shift=_bits(span)[t_label] if count else np.zeros(0, dtype=np.uint64),
                value=np.full(count, np.nan),
                done=np.zeros(count, dtype=bool),
                collect=np.zeros(count, dtype=bool),
            )
            plans[name] = (kmin, every.means, sd, (n > 0) & ~big)
        first = True
        results: dict = {name: {} for name in names}
        while True:
            column_plans = {}
            for name in names:
                kmin, mean, sd, small = plans[name]
                column_plans[name] = _interval_plan(targets[name], kmin, mean, sd, small, labels)
            if not first and all(p.i_label.size == 0 for p in column_plans.values()):
                break
            task = ScanTask(self.label_code, G, column_plans, first)
            state = self.runner(self.source, task)
            self.passes += 1
            for name in names:
                acc = state[name]
                if first:
                    results[name]["within"] = acc["within"]
                    results[name]["small"] = _gather_small(acc["small"], labels)
                _advance(targets[name], column_plans[name], acc)
            first = False
        # Order statistics known: fences and histogram edges, then one finishing pass.
        finishing = {}
        values_at: dict = {}
        for name in names:
            every, t = stat[name], targets[name]
            small = results[name]["small"]
            at = {}
            for label, rank, value in zip(t.label, t.rank, t.value, strict=True):
                at.setdefault(int(label), {})[int(rank)] = float(value)
            values_at[name] = at
            q1 = np.full(labels, np.nan)
            q3 = np.full(labels, np.nan)
            median = np.full(labels, np.nan)
            for label in range(labels):
                n = int(every.n[label])
                if n == 0:
                    continue
                ranks = at.get(label) or dict(enumerate(small.get(label, np.zeros(0)).tolist()))
                q1[label], q3[label] = _type7(ranks, n, 0.25), _type7(ranks, n, 0.75)
                median[label] = _type7(ranks, n, 0.5)
            iqr = q3 - q1
            n_all = int(every.n[G])
            if n_all == 0:
                edges = np.array([0.0, 1.0])
            else:
                ranks = at.get(G) or dict(enumerate(small.get(G, np.zeros(0)).tolist()))
                from ..stats.summary import histogram_edges_from

                edges = histogram_edges_from(
                    n_all,
                    float(every.low[G]),
                    float(every.high[G]),
                    _numpy_linear(ranks, n_all, 0.25),
                    _numpy_linear(ranks, n_all, 0.75),
                )
            kmin, mean, sd, _ = plans[name]
            empty = np.zeros(0, dtype=np.int64)
            finishing[name] = ColumnPlan(
                kmin=kmin,
                mean=mean,
                sd=sd,
                collect_all=np.zeros(labels, dtype=bool),
                i_label=empty,
                i_prefix=empty.astype(np.uint64),
                i_shift=empty.astype(np.uint64),
                i_next=empty.astype(np.uint64),
                i_collect=empty.astype(bool),
                fence_low=np.nan_to_num(q1 - 1.5 * iqr, nan=np.inf),
                fence_high=np.nan_to_num(q3 + 1.5 * iqr, nan=-np.inf),
                edges=edges,
                median=median,
            )
        state = self.runner(self.source, ScanTask(self.label_code, G, finishing, False))
        self.passes += 1
        out = {}
        for name in names:
            acc = state[name]
            every = stat[name]
            summaries = []
            points = []
            for label in range(labels):
                n = int(every.n[label])
                missing = (
                    int(self.missing_by_group[name][label])
                    if label < G
                    else int(self.missing_by_group[name].sum())
                )
                if n <= SMALL:
                    values = results[name]["small"].get(label, np.zeros(0))
                    summary = describe_sorted(values, level, missing=missing)
                else:
                    summary = _large_summary(
                        every, label, level, values_at[name][label], results[name]["within"],
                        acc, missing, stats,
                    )  # fmt: skip
                if label < G:
                    summaries.append(summary)
                    points.append(self._points(name, label, summary, acc, results[name]))
                else:
                    overall = summary
            out[name] = MeasurePieces(
                summaries=summaries,
                overall=overall,
                edges=finishing[name].edges,
                counts=acc["bins"],
                outlier_points=points,
                spread=acc["spread"],
            )
        return out

    def _points(self, name, label, summary: Summary, acc, results) -> list[float]:
        """The most extreme values beyond the whiskers, at most EXTREMES per side."""
        if summary.whisker_low is None:
            return []
        n = summary.n
        if n <= SMALL:
            chunk = results["small"].get(label, np.zeros(0))
            low_n = int(np.searchsorted(chunk, summary.whisker_low, side="left"))
            high_start = int(np.searchsorted(chunk, summary.whisker_high, side="right"))
            return (
                chunk[: min(low_n, EXTREMES)].tolist()
                + chunk[max(high_start, n - EXTREMES) :].tolist()
            )
        low_n = int(acc["below"][label])
        high_n = int(acc["above"][label])
        ext = self.extremes[name]
        low = ext.small[label][: min(low_n, EXTREMES)]
        high = ext.large[label][EXTREMES - min(high_n, EXTREMES) :]
        return low.tolist() + high.tolist()


def _gather_small(pieces, labels: int) -> dict[int, np.ndarray]:
    if not pieces:
        return {}
    lab = np.concatenate([p[0] for p in pieces])
    val = np.concatenate([p[1] for p in pieces])
    order = np.lexsort((val, lab))
    lab, val = lab[order], val[order]
    bounds = np.searchsorted(lab, np.arange(labels + 1))
    return {
        label: val[bounds[label] : bounds[label + 1]]
        for label in range(labels)
        if bounds[label + 1] > bounds[label]
    }


def _interval_plan(t: Targets, kmin, mean, sd, small, labels: int) -> ColumnPlan:
    """Return the pass plan for the open targets: one interval per distinct (label, prefix)."""
    open_ = ~t.done
    keys = {}
    for i in np.flatnonzero(open_):
        keys.setdefault((int(t.label[i]), int(t.prefix[i]), int(t.shift[i]), bool(t.collect[i])), i)
    rows = list(keys)
    count = len(rows)
    i_label = np.array([r[0] for r in rows], dtype=np.int64)
    i_prefix = np.array([r[1] for r in rows], dtype=np.uint64)
    i_shift = np.array([r[2] for r in rows], dtype=np.uint64)
    i_collect = np.array([r[3] for r in rows], dtype=bool)
    splitting = max(1, int((~i_collect).sum()))
    bits = int(max(4, min(20, math.floor(math.log2(COUNTER_BUDGET / splitting)))))
    i_next = np.where(
        i_collect, i_shift, np.maximum(i_shift.astype(np.int64) - bits, 0).astype(np.uint64)
    ).astype(np.uint64)
    del count
    return ColumnPlan(
        kmin=kmin,
        mean=mean,
        sd=sd,
        collect_all=small,
        i_label=i_label,
        i_prefix=i_prefix,
        i_shift=i_shift,
        i_next=i_next,
        i_collect=i_collect,
    )


def _advance(t: Targets, plan: ColumnPlan, acc) -> None:
    """Move every open target one step: into a sub-bucket, or to its value."""
    if plan.i_label.size == 0:
        return
    lookup = {
        (int(lab), int(p), int(s), bool(c)): i
        for i, (lab, p, s, c) in enumerate(
            zip(plan.i_label, plan.i_prefix, plan.i_shift, plan.i_collect, strict=True)
        )
    }
    kept = {}
    if acc["kept"]:
        ids = np.concatenate([k[0] for k in acc["kept"]])
        vals = np.concatenate([k[1] for k in acc["kept"]])
        order = np.lexsort((vals, ids))
        ids, vals = ids[order], vals[order]
        bounds = np.searchsorted(ids, np.arange(plan.i_label.size + 1))
        kept = {i: vals[bounds[i] : bounds[i + 1]] for i in range(plan.i_label.size)}
    offsets = acc["offsets"]
    for i in np.flatnonzero(~t.done):
        key = (int(t.label[i]), int(t.prefix[i]), int(t.shift[i]), bool(t.collect[i]))
        j = lookup[key]
        within = int(t.rank[i] - t.below[i])
        if plan.i_collect[j]:
            t.value[i] = kept[j][within]
            t.done[i] = True
            continue
        if acc["key_low"][j] == acc["key_high"][j]:
            t.value[i] = float(from_key(np.array([plan.kmin[t.label[i]] + acc["key_low"][j]]))[0])
            t.done[i] = True
            continue
        counts = acc["counts"][offsets[j] : offsets[j + 1]]
        cum = np.cumsum(counts)
        b = int(np.searchsorted(cum, within, side="right"))
        t.below[i] += int(cum[b] - counts[b])
        nxt = plan.i_next[j]
        t.prefix[i] = (t.prefix[i] << (plan.i_shift[j] - nxt)) + np.uint64(b)
        t.shift[i] = nxt
        if nxt == 0:
            t.value[i] = float(from_key(np.array([plan.kmin[t.label[i]] + t.prefix[i]]))[0])
            t.done[i] = True
        elif counts[b] <= COLLECT_CAP:
            t.collect[i] = True


def _large_summary(every: Moments, label, level, at: dict, within, acc, missing, stats) -> Summary:
    """Return the Summary of a group with more than SMALL values, from its pieces."""
    n = int(every.n[label])
    mean = float(every.means[label])
    m2 = float(every.m2[label])
    out: dict = dict.fromkeys(Summary.__dataclass_fields__)
    reasons: dict[str, str] = {}
    out.update(n=n, missing=missing, reasons=reasons, mean=mean)
    low, high = float(every.low[label]), float(every.high[label])
    out.update(min=low, max=high)
    out["median"] = _type7(at, n, 0.5)
    out["q1"] = _type7(at, n, 0.25)
    out["q3"] = _type7(at, n, 0.75)
    out["iqr"] = out["q3"] - out["q1"]
    if not math.isfinite(out["iqr"]):
        out["iqr"] = None
        reasons["iqr"] = "the quartiles are further apart than the largest double-precision number"
    below, above = int(acc["below"][label]), int(acc["above"][label])
    out["outliers"] = below + above
    out["whisker_low"] = float(acc["whisker_low"][label]) if below < n else None
    out["whisker_high"] = float(acc["whisker_high"][label]) if above < n else None
    from ..stats.summary import median_ci_ranks, spread_fields

    ranks = median_ci_ranks(n, level)
    out["median_ci_low"] = at[ranks[0] - 1]
    out["median_ci_high"] = at[ranks[1] - 1]
    out["median_ci_level"] = ranks[2]
    sd = math.sqrt(m2 / (n - 1))
    if not spread_fields(out, reasons, sd, n, mean, level):
        return Summary(**out)
    # The same "all equal" rule as describe_sorted: sd against the power of two just below
    # the largest magnitude (the unit it scales values by).
    largest = max(abs(low), abs(high))
    unit = math.ldexp(1.0, math.frexp(largest)[1] - 1) if largest > 0 else 1.0
    if sd == 0 or sd / unit <= max(abs(mean / unit), 1.0) * 1e-14:
        out.update(sd=0.0, se=0.0, ci_low=mean, ci_high=mean)
        out["share_within_1sd"] = out["share_within_2sd"] = 1.0
        for key in ("skewness", "excess_kurtosis", "normality"):
            reasons[key] = "all values are equal"
        return Summary(**out)
    out["share_within_1sd"] = float(within[0][label]) / n
    out["share_within_2sd"] = float(within[1][label]) / n
    biased_var = m2 / n
    g1 = float(every.m3[label]) / n / biased_var**1.5
    b2 = float(every.m4[label]) / n / biased_var**2
    out["skewness"] = g1 * math.sqrt(n * (n - 1)) / (n - 2)
    out["excess_kurtosis"] = ((n + 1) * (b2 - 3.0) + 6.0) * (n - 1) / ((n - 2) * (n - 3))
    out["normality_test"] = "dagostino-pearson"
    out["normality_p"] = dagostino_pearson(n, g1, b2).pvalue
    return Summary(**out)


def pivots_of(source: Source) -> tuple[float, ...]:
    """Return one value near the data per numeric column: the median of the first batch's
    first 1,001 finite values (0 when there are none)."""
    first = next(batches(source, 0, batch_rows=65536, block_bytes=1 << 20), None)
    out = []
    for name in source.numeric:
        values = first.columns[name] if first is not None else np.zeros(0)
        values = values[np.isfinite(values)][:1001]
        out.append(float(np.median(values)) if values.size else 0.0)
    return tuple(out)


def discover(spec, source: Source, runner: Runner, seed) -> tuple[Discovery, Source]:
    """Run pass 1; on a CSV that turns out not to be UTF-8, read it again as Latin-1."""
    sample_k = SAMPLE_PER_GROUP
    try:
        pivots = pivots_of(source)
    except UnicodeError:
        pivots = tuple(0.0 for _ in source.numeric)
    task = DiscoverTask(source.numeric, sample_k, tuple(seed), pivots)
    try:
        return runner(source, task), source
    except UnicodeError:
        if source.kind != "csv" or source.encoding == "latin-1":
            raise
        from dataclasses import replace

        warning = f"{spec.file} is not UTF-8; it was read as Latin-1 — check that accented labels look right."
        source = replace(source, encoding="latin-1", warnings=(*source.warnings, warning))
        return runner(source, task), source


def read_streamed(spec, rng: np.random.Generator | None = None, runner: Runner | None = None,
                  engine: str = "stream", sha256: str | None = None):  # fmt: skip
    """Return a :class:`sitebuild.ingest.Table` whose rows are a bounded seeded sample and whose
    ``exact`` field is a :class:`Streamed` summary of every row."""
    from ..ingest import Table
    from .source import open_source, source_sha256

    source = open_source(spec)
    has_body = source.body
    if rng is None:
        import zlib

        rng = np.random.default_rng(zlib.crc32(spec.name.encode("utf-8")))
    seed = [int(s) for s in rng.integers(0, 2**32, size=2)]
    runner = runner or LocalRunner()
    state, source = discover(spec, source, runner, seed)
    scan_source = source
    if isinstance(runner, LocalRunner) and runner.spill is not None:
        scan_source = runner.spill
    groups_count = len(state.labels)
    key = display_key(spec.order)
    order = sorted(range(groups_count), key=lambda i: key(state.labels[i]))
    new_code = np.empty(groups_count, dtype=np.int32)
    new_code[order] = np.arange(groups_count, dtype=np.int32)
    groups = tuple(state.labels[i] for i in order)
    index = np.array(order, dtype=np.int64)
    moments = {n: m.grow(groups_count).take(index) for n, m in state.moments.items()}
    extremes = {n: e.grow(groups_count).take(index) for n, e in state.extremes.items()}
    comoments = {p: c.grow(groups_count).take(index) for p, c in state.comoments.items()}
    sample = state.sample.remap(new_code) if groups_count else state.sample
    rows_used = state.rows_read - state.dropped
    label_code = {label: int(new_code[i]) for i, label in enumerate(state.labels)}
    streamed = Streamed(
        source=scan_source,
        groups=groups,
        label_code=label_code,
        moments=moments,
        extremes=extremes,
        comoments=comoments,
        missing_by_group={},
        engine=engine,
        sample_rows=int(sample.codes.size),
        sample_per_group=sample.k,
        runner=runner,
    )
    unparsed = {
        name: ColumnProblem(count=count, examples=tuple(examples))
        for name, (count, examples) in state.problems.items()
        if count
    }
    unparsed = {n: unparsed[n] for n in source.numeric if n in unparsed}
    check_label_lengths(spec, groups)
    warnings = list(source.warnings)
    if state.rows_read == 0:
        if has_body:
            from ..ingest import no_rows_error

            raise no_rows_error(spec)
        warnings.append(f"{spec.file} has a header but no data rows.")
    warnings.extend(unordered_warnings(spec, groups))
    for name in source.numeric:
        if rows_used and state.missing[name] == rows_used:
            warnings.append(f"column '{name}' has no values (all {rows_used:,} are missing).")
    report = IngestReport(
        file=spec.file,
        sha256=sha256 or source_sha256(spec.path),
        rows_read=state.rows_read,
        rows_used=rows_used,
        rows_dropped=state.dropped,
        drop_reasons={"missing group label": state.dropped} if state.dropped else {},
        missing={n: int(state.missing[n]) for n in source.numeric},
        unparsed=unparsed,
        encoding=source.encoding,
        delimiter=source.delimiter,
        warnings=tuple(warnings),
    )
    streamed.missing_by_group.update(_missing_by_group(state, index, groups_count))
    if isinstance(runner, LocalRunner):
        weakref.finalize(streamed, runner.cleanup)
    return Table(
        spec=spec,
        groups=groups,
        codes=sample.codes.astype(np.int32),
        columns={n: sample.columns[n] for n in source.numeric},
        report=report,
        exact=streamed,
    )


def _missing_by_group(state: Discovery, index: np.ndarray, groups: int) -> dict:
    """Missing values per group and column: rows of the group minus its finite values."""
    rows = np.zeros(groups, dtype=np.int64)
    rows[: state.group_rows.size] = state.group_rows
    rows = rows[index]
    return {name: rows - m.grow(groups).take(index).n for name, m in state.moments.items()}
