"""Per-group summaries, distribution bins and box statistics for every measure."""

from __future__ import annotations

import numpy as np

from ..ingest import Table, in_group_order
from ..manifest import SiteSettings
from ..stats.summary import NORMAL_WITHIN, Summary, describe_sorted, histogram_edges
from . import MAX_CHART_GROUPS, Chart, DataTable, map_measures

MAX_OUTLIER_POINTS = 20  # per side per group: the most extreme values, enough to see them

SUMMARY_FIELDS = (
    "n", "missing", "mean", "sd", "se", "ci_low", "ci_high", "median", "median_ci_low",
    "median_ci_high", "q1", "q3", "iqr", "min", "max", "midrange", "skewness", "excess_kurtosis",
    "share_within_1sd", "share_within_2sd", "outliers", "normality_test", "normality_p",
)  # fmt: skip


def _row(group: str | None, measure: str, summary: Summary) -> dict:
    row = {"group": group, "measure": measure}
    for key in SUMMARY_FIELDS:
        row[key] = getattr(summary, key)
    row["median_ci_level"] = summary.median_ci_level
    row["reasons"] = dict(summary.reasons)
    return row


def _sorted_by_group(values: np.ndarray, codes: np.ndarray, n_groups: int, rows=None):
    """Return (values sorted within each group, group bounds, missing per group, all sorted).

    One stable integer partition by group (``rows``, the table's :meth:`Table.rows_by_group`,
    when given), one sort per group's slice, then a stable merge of the sorted runs for the
    all-groups row: cheaper than a lexsort plus a second full sort.
    """
    ordered, bounds = in_group_order(values, codes, n_groups, rows)
    for index in range(n_groups):
        ordered[bounds[index] : bounds[index + 1]].sort()
    # Timsort ("stable" for floats) merges already-sorted runs in O(n log groups).
    everything = np.sort(ordered, kind="stable")
    missing = np.bincount(codes[np.isnan(values)], minlength=n_groups)
    return ordered, bounds, missing, everything


def _counts(sorted_values: np.ndarray, edges: np.ndarray) -> list[int]:
    positions = np.searchsorted(sorted_values, edges[:-1], side="left")
    positions = np.append(positions, np.searchsorted(sorted_values, edges[-1], side="right"))
    return [int(c) for c in np.diff(positions)]


def computed_from(table: Table) -> dict:
    """Return the ``computed_from`` block: which engine made the numbers, and what was sampled."""
    exact = getattr(table, "exact", None)
    if exact is None:
        return {
            "engine": "memory",
            "rows": table.n_rows,
            "passes": 1,
            "sample_rows": None,
            "sample_per_group": None,
            "sample_reason": "every row is in memory; nothing is sampled",
            "note": "All numbers use every row.",
        }
    return {
        "engine": exact.engine,
        "rows": table.report.rows_used,
        "passes": exact.passes,
        "sample_rows": exact.sample_rows,
        "sample_per_group": exact.sample_per_group,
        "sample_reason": "the data was read in batches and not kept in memory",
        "sampled_statistics": list(SAMPLED_STATISTICS),
        "note": (
            "Summaries, histograms, box statistics, Welch's t, both ANOVAs, Brown–Forsythe (so "
            "the choice of lead test), Tukey, Games–Howell, Hedges' g, equivalence tests, "
            "Pearson's r and straight-line fits use "
            f"all {table.report.rows_used:,} rows, read in batches ({exact.passes} passes; "
            "quartiles, medians and their intervals found exactly by bucketed counting). "
            + ", ".join(SAMPLED_STATISTICS[:-1])
            + f" and {SAMPLED_STATISTICS[-1]} use a seeded sample of {exact.sample_rows:,} rows "
            f"(at most {exact.sample_per_group:,} per group)."
        ),
    }


# What the bounded row sample feeds on streamed data: statistics that need the values
# themselves (ranks, medians of deviations, resampling) and what is drawn from rows. Each
# result row built from them lists its keys under ``from_sample``.
SAMPLED_STATISTICS = (
    "Kruskal–Wallis",
    "Mann–Whitney U",
    "Hodges–Lehmann shifts",
    "Cliff's delta",
    "Dunnett's test",
    "permutation tests",
    "Spearman and Kendall correlations",
    "smooths and the curvature check",
    "scatter points",
)


def compute(table: Table, settings: SiteSettings, rng, partial: dict) -> dict:
    """Return ``summaries`` (every measure × group, plus all groups) and ``distributions``."""
    del rng, partial  # summaries are deterministic and need nothing computed before them
    level = settings.confidence
    if getattr(table, "exact", None) is not None:
        return _compute_streamed(table, level)
    n_groups = len(table.groups)

    def one(measure: str) -> tuple[list[dict], dict]:
        """The summary rows (each group, then all groups) and distribution of one measure."""
        rows: list[dict] = []
        values = table.values(measure)
        ordered, bounds, missing, everything = _sorted_by_group(
            values, table.codes, n_groups, table.rows_by_group()
        )
        edges = histogram_edges(ordered)
        per_group = []
        for index, group in enumerate(table.groups):
            chunk = ordered[bounds[index] : bounds[index + 1]]
            summary = describe_sorted(chunk, level, missing=int(missing[index]))
            rows.append(_row(group, measure, summary))
            outliers_low, outliers_high = [], []
            if summary.whisker_low is not None:
                low_n = int(np.searchsorted(chunk, summary.whisker_low, side="left"))
                outliers_low = chunk[: min(low_n, MAX_OUTLIER_POINTS)].tolist()
                high_start = int(np.searchsorted(chunk, summary.whisker_high, side="right"))
                outliers_high = chunk[max(high_start, len(chunk) - MAX_OUTLIER_POINTS) :].tolist()
            per_group.append(
                _box(group, _counts(chunk, edges), summary, outliers_low + outliers_high)
            )
        overall = describe_sorted(everything, level, missing=int(missing.sum()))
        rows.append(_row(None, measure, overall))
        distribution = {
            "measure": measure,
            "edges": [float(e) for e in edges],
            "all_counts": _counts(everything, edges),
            "groups": per_group,
        }
        return rows, distribution

    done = map_measures(one, table.spec.measures, table.n_rows)  # sorting: numpy's, GIL-free
    summaries = [row for rows, _ in done for row in rows]
    distributions = [distribution for _, distribution in done]
    return _keys(table, summaries, distributions)


def _box(group: str, counts: list[int], summary: Summary, points: list[float]) -> dict:
    return {
        "group": group,
        "counts": counts,
        "q1": summary.q1,
        "median": summary.median,
        "q3": summary.q3,
        "whisker_low": summary.whisker_low,
        "whisker_high": summary.whisker_high,
        "outlier_points": points,
        "outliers_total": summary.outliers,
    }


def _keys(table: Table, summaries: list[dict], distributions: list[dict]) -> dict:
    return {
        "summaries": summaries,
        "distributions": distributions,
        "normal_reference": {"within_1sd": NORMAL_WITHIN[1], "within_2sd": NORMAL_WITHIN[2]},
        "chebyshev_floor": {"within_1sd": 0.0, "within_2sd": 0.75},
        "computed_from": computed_from(table),
    }


def _compute_streamed(table: Table, level: float) -> dict:
    """The same keys from the streaming engine's exact pieces (every row, read in batches)."""
    pieces = table.exact.measures(table.spec.measures, level)
    summaries: list[dict] = []
    distributions: list[dict] = []
    for measure in table.spec.measures:
        got = pieces[measure]
        per_group = []
        for index, group in enumerate(table.groups):
            summary = got.summaries[index]
            summaries.append(_row(group, measure, summary))
            counts = [int(c) for c in got.counts[index]]
            per_group.append(_box(group, counts, summary, got.outlier_points[index]))
        summaries.append(_row(None, measure, got.overall))
        distributions.append(
            {
                "measure": measure,
                "edges": [float(e) for e in got.edges],
                "all_counts": [int(c) for c in got.counts.sum(axis=0)],
                "groups": per_group,
            }
        )
    return _keys(table, summaries, distributions)


def _shown_groups(ds: dict, measure: str) -> list[str]:
    """Groups drawn in charts: all of them, or the largest MAX_CHART_GROUPS by n."""
    rows = [r for r in ds["summaries"] if r["measure"] == measure and r["group"] is not None]
    if len(rows) <= MAX_CHART_GROUPS:
        return [r["group"] for r in rows]
    largest = sorted(rows, key=lambda r: -r["n"])[:MAX_CHART_GROUPS]
    keep = {r["group"] for r in largest}
    return [g for g in ds["groups"] if g in keep]


def _reference(ds: dict, measure: str) -> str | None:
    """The measure's reference group (drawn in a neutral grey), if its comparisons have one."""
    entry = next((e for e in ds.get("comparisons", []) if e.get("measure") == measure), {})
    return entry.get("reference")


def charts(ds: dict, settings: SiteSettings) -> list[Chart]:
    """Return, per measure, the mean-interval, histogram and box charts."""
    from ..charts import summary as draw
    from ..charts.limits import with_limits  # spec limits, when the manifest gives them

    out = []
    level = f"{settings.confidence:.0%}"
    for mi, measure in enumerate(ds["measures"]):
        shown = _shown_groups(ds, measure)
        rows = [r for r in ds["summaries"] if r["measure"] == measure and r["group"] in shown]
        dist = next(d for d in ds["distributions"] if d["measure"] == measure)
        fmt = draw.value_format(rows)
        look = {"group_by": ds.get("group_by"), "reference": _reference(ds, measure)}
        # Colours and shapes follow the order of every group; past the drawable limit only
        # the drawn ones get a style (a scale of 10,000 entries would outweigh the page).
        palette = ds["groups"] if len(ds["groups"]) <= MAX_CHART_GROUPS else shown
        out.append(
            Chart(
                id=f"sum-{mi}-means",
                title=f"Mean of {measure} by group",
                description=(
                    f"Each group's mean of {measure} with its {level} confidence interval. "
                    "Overlap is not a test: two intervals can overlap while the groups differ; "
                    "the comparisons below say which differ." + _extremes(rows)
                ),
                spec=draw.mean_intervals(rows, palette, measure, **look),
                table=f"sum-{mi}",
            )
        )
        out.append(
            Chart(
                id=f"sum-{mi}-hist",
                title=f"Distribution of {measure}",
                description=(
                    f"Histograms of {measure} per group on shared bins, as the share of each "
                    "group's values, so groups of different sizes compare fairly."
                ),
                spec=draw.histograms(dist, shown, palette, measure, fmt, **look),
                table=f"sum-{mi}",
            )
        )
        out.append(
            Chart(
                id=f"sum-{mi}-box",
                title=f"Spread of {measure}",
                description=(
                    f"Box view of {measure}: the box spans the middle half of values (q1 to q3), "
                    "the line is the median, whiskers reach the furthest values within 1.5 IQR, "
                    f"and dots are values beyond (at most {MAX_OUTLIER_POINTS} of the most "
                    "extreme per side and group; the table counts them all)."
                ),
                spec=with_limits(
                    draw.boxes(dist, shown, palette, measure, fmt, **look),
                    next((c for c in ds.get("capability", []) if c["measure"] == measure), None),
                ),
                table=f"sum-{mi}",
            )
        )
    return out


TABLE_COLUMNS = (
    ("group", "Group"), ("n", "n"), ("missing", "Missing"), ("mean", "Mean"), ("sd", "SD"),
    ("se", "SE"), ("ci_low", "CI low"), ("ci_high", "CI high"), ("median", "Median"),
    ("median_ci_low", "Median CI low"), ("median_ci_high", "Median CI high"), ("q1", "Q1"),
    ("q3", "Q3"), ("iqr", "IQR"), ("min", "Min"), ("max", "Max"), ("skewness", "Skewness"),
    ("excess_kurtosis", "Excess kurtosis"), ("share_within_1sd", "Within 1 SD"),
    ("share_within_2sd", "Within 2 SD"), ("outliers", "Beyond fences"),
    ("normality_test", "Normality test"), ("normality_p", "Normality p"),
)  # fmt: skip


SHAPE_KEYS = (
    "skewness", "excess_kurtosis", "share_within_1sd", "share_within_2sd", "outliers",
    "normality_test", "normality_p",
)  # fmt: skip


def _extremes(rows: list[dict]) -> str:
    """The highest and lowest group mean in words, so the chart's text alternative carries
    its main content for readers who cannot see it."""
    from ..stats.findings import format_value, measure_decimals

    ranked = sorted(
        (r for r in rows if r["group"] is not None and r["mean"] is not None),
        key=lambda r: r["mean"],
    )
    if len(ranked) < 2:
        return ""
    decimals = measure_decimals({"groups": rows})
    top, bottom = ranked[-1], ranked[0]
    return (
        f" Highest mean: {top['group']} ({format_value(top['mean'], decimals)}); lowest: "
        f"{bottom['group']} ({format_value(bottom['mean'], decimals)})."
    )


def _engine_caption(ds: dict) -> str:
    """Say on the page which numbers use every row and which a sample (streamed engines)."""
    source = ds.get("computed_from") or {}
    if source.get("engine", "memory") == "memory":
        return ""
    return " " + source["note"]


def tables(ds: dict, settings: SiteSettings) -> list[DataTable]:
    """Return one summary table per measure (all groups, then all rows combined)."""
    out = []
    for mi, measure in enumerate(ds["measures"]):
        rows = []
        for r in ds["summaries"]:
            if r["measure"] != measure:
                continue
            row = dict(r)
            row["group"] = r["group"] if r["group"] is not None else "All groups"
            rows.append(row)
        out.append(
            DataTable(
                id=f"sum-{mi}",
                title=f"Summary of {measure} by group",
                columns=TABLE_COLUMNS,
                rows=tuple(rows),
                # The shape table just above shows these; 23 columns did not fit a screen.
                csv_only=SHAPE_KEYS,
                caption=(
                    f"CI: {settings.confidence:.0%} interval for the mean (Student's t). Median CI: "
                    "distribution-free interval from order statistics. Quartiles by linear "
                    "interpolation (Hyndman & Fan type 7). Skewness, kurtosis and normality are under "
                    "'Shape of each group's values' above; the CSV has every column."
                    + _engine_caption(ds)
                ),
            )
        )
    return out
