"""How the measures move together: correlation tables, fitted smooths against x, and the
check for relationships that are strong but not straight.

Results keys: ``correlations``, ``smooths``, ``relationships`` (contract), and
``correlation_family``, ``linear_fits``, ``scatter``, ``reversals``, ``relationship_columns``.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from ..cores import share
from ..stats.correlation import CorrelationTable, correlation_tables, pearson_from_comoments
from ..stats.curvature import RULE, curvature_check, straight_line, straight_line_from_comoments
from ..stats.loess import loess
from ..stats.multiplicity import METHOD_NAMES, adjust_pvalues
from . import PARALLEL_ROWS, Chart, DataTable, sampled_caption

SCATTER_LIMIT = 800  # points shipped per scatter chart (keeps a 1M-row site under 3 MB)
SCATTER_BUDGET = 16_000  # points shipped over all scatter charts of a page (wide tables)
WIDE_PAIRS = 45  # more column pairs than this (over 10 columns) makes a table "wide"
PAIR_SMOOTH_LIMIT = 50_000  # rows used for the measure-against-measure curvature check
# The two group limits of this section; README "Limits" quotes both (tests/test_audit_fixes.py
# checks that it does).
GROUP_LIMIT = 30  # within-group correlation tables for at most this many groups
# Per-group smooths and heatmaps for at most this many (the largest) groups: the palette has 8
# colours, and more curves on one scatter cannot be told apart anyway. This is the one place
# the within-group smooth limit is set.
DRAWN_LIMIT = 8
METHOD_LABELS = {"pearson": "Pearson r", "spearman": "Spearman rho", "kendall": "Kendall tau-b"}


def _num(value) -> float | None:
    """A finite float or None (results.json never holds NaN or Infinity)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _short(value: float | None) -> float | None:
    """Round to 6 significant digits for the shipped points (keeps pages small)."""
    value = _num(value)
    return None if value is None else float(f"{value:.6g}")


def _note_for(reason: str | None, a: str, b: str) -> str | None:
    if reason is None:
        return None
    if reason == "x has no variation":
        return f"'{a}' has the same value in every row here, so no correlation can be computed"
    if reason == "y has no variation":
        return f"'{b}' has the same value in every row here, so no correlation can be computed"
    if reason.startswith("fewer than"):
        return f"{reason}, so no correlation can be computed"
    return reason


def group_sizes(table) -> np.ndarray:
    """Return the rows per group: of every row on streamed data, not of the sample."""
    exact = getattr(table, "exact", None)
    if exact is not None:
        return exact.group_rows()
    return np.bincount(table.codes, minlength=len(table.groups))


def chosen_groups(table) -> list[int]:
    """Return the indices of the groups analysed one by one: all, or the largest GROUP_LIMIT."""
    n_groups = len(table.groups)
    if n_groups <= GROUP_LIMIT:
        return list(range(n_groups))
    sizes = group_sizes(table)
    largest = np.argsort(-sizes, kind="stable")[:GROUP_LIMIT]
    return sorted(int(g) for g in largest)


def _correlations(table, names, settings, rng, chosen: list[int]) -> tuple[list[dict], dict]:
    data = [table.values(name) for name in names]  # columns, not a copy (10M rows: 400 MB)
    # Groups beyond the limit share one extra code whose tables are dropped; all-rows scope
    # still uses every row.
    remap = np.full(len(table.groups), len(chosen), dtype=np.int64)
    remap[chosen] = np.arange(len(chosen))
    codes = remap[table.codes]
    n_codes = len(chosen) + (len(chosen) < len(table.groups))
    pairs = len(names) * (len(names) - 1) // 2
    if pairs > WIDE_PAIRS:
        # Wide tables: Kendall's tau-b (one O(n log n) pass per pair and scope) only for all
        # rows; within groups Pearson and Spearman, from matrix products.
        everything = correlation_tables(data, level=settings.confidence, rng=rng)
        within = correlation_tables(
            data,
            codes,
            n_codes,
            methods=("pearson", "spearman"),
            level=settings.confidence,
            rng=rng,
        )
        results = everything + [r for r in within if r.group is not None]
    else:
        results = correlation_tables(
            data,
            codes,
            n_codes,
            level=settings.confidence,
            rng=rng,
        )
    exact = getattr(table, "exact", None)
    if exact is not None:
        results = [_exact_pearson(exact, r, names, chosen, settings.confidence) for r in results]
    out: list[dict] = []
    for result in results:
        if result.group is not None and result.group >= len(chosen):
            continue
        group = None if result.group is None else table.groups[chosen[result.group]]
        adjusted = adjust_pvalues([c.p for _, _, c in result.pairs], settings.adjust)
        for (i, j, c), p_adj in zip(result.pairs, adjusted, strict=True):
            a, b = names[i], names[j]
            note = _note_for(c.reason, a, b)
            if c.r is not None and c.method == "kendall" and c.n_available:
                note = (
                    f"computed on a random sample of {c.n:,} of the {c.n_available:,} "
                    "complete pairs"
                )
                if c.reason:
                    note += f"; {c.reason}"
            elif c.r is not None and c.reason:
                note = c.reason  # e.g. Kendall's tau-b or Spearman's rho = ±1
            elif c.r is not None and c.ci_low is None:
                note = "the interval needs at least 4 pairs"
            if c.p is not None and c.ci_low is not None and c.ci_high is not None:
                # The interval (Fisher z) and the p-value (t or normal approximation) are
                # separate approximations; near the edge they can fall on different sides.
                test_says = c.p < 1 - settings.confidence
                interval_says = c.ci_low > 0 or c.ci_high < 0
                if test_says != interval_says:
                    split = (
                        "borderline: the unadjusted p-value and the interval, two separate "
                        "approximations, disagree about zero"
                    )
                    note = f"{note}; {split}" if note else split
            out.append(
                {
                    "group": group,
                    "a": a,
                    "b": b,
                    "method": c.method,
                    "n": int(c.n),
                    "r": _num(c.r),
                    "ci_low": _num(c.ci_low),
                    "ci_high": _num(c.ci_high),
                    "p": _num(c.p),
                    "p_adjusted": _num(p_adj),
                    "note": note,
                    **({"from_sample": RANK_KEYS} if exact and c.method != "pearson" else {}),
                }
            )
    pairs = len(names) * (len(names) - 1) // 2
    family = {
        "adjust": settings.adjust,
        "adjust_name": METHOD_NAMES[settings.adjust],
        "alpha": settings.alpha,
        "level": settings.confidence,
        "scope": "one table: one set of rows (all rows or one group) and one method",
        "size": pairs,
        "description": (
            f"p-values are adjusted ({METHOD_NAMES[settings.adjust]}) within each table: "
            f"the {pairs} pairs of one method for all rows, or for one group."
        ),
    }
    return out, family


# On streamed data Pearson's r comes from exact co-moments; Spearman and Kendall come from
# the bounded sample, and their rows list these keys under ``from_sample``.
RANK_KEYS = ["ci_low", "ci_high", "n", "note", "p", "p_adjusted", "r"]


def _exact_pearson(exact, result: CorrelationTable, names, chosen, level) -> CorrelationTable:
    """Return ``result`` with Pearson's r from the exact co-moments of every row (streamed
    data); other methods are returned as they are."""
    if result.method != "pearson":
        return result
    scope = -1 if result.group is None or result.group >= len(chosen) else chosen[result.group]
    pairs = []
    for i, j, c in result.pairs:
        a, b = names[i], names[j]
        if a not in exact.moments or b not in exact.moments:
            pairs.append((i, j, c))
            continue
        co = exact.pair_moments(a, b)
        flat = (bool(exact.flat(a)[scope]), bool(exact.flat(b)[scope]))
        exact_c = pearson_from_comoments(
            int(co.n[scope]), co.m2a[scope], co.m2b[scope], co.c[scope], level, flat
        )
        pairs.append((i, j, exact_c))
    return CorrelationTable(result.method, result.group, tuple(pairs))


def _exact_line(exact, scope: int, a: str, b: str, level: float):
    """Return the straight line of b on a in one scope (a group index, -1 for all rows) from
    the exact co-moments of every row, or None when a column has none."""
    if a not in exact.moments or b not in exact.moments:
        return None
    co = exact.pair_moments(a, b)
    mean_a = exact.moments[a].pivot + co.mean_a[scope]
    mean_b = exact.moments[b].pivot + co.mean_b[scope]
    return straight_line_from_comoments(
        int(co.n[scope]), mean_a, mean_b, co.m2a[scope], co.m2b[scope], co.c[scope], level,
        x_flat=bool(exact.flat(a)[scope]),
    )  # fmt: skip


def _reversals(correlations: list[dict], names: list[str], n_groups: int) -> list[dict]:
    """Pairs whose pooled Pearson r points one way and every within-group r the other."""
    if n_groups < 2:
        return []
    pearson = [c for c in correlations if c["method"] == "pearson"]
    out = []
    for i, a in enumerate(names):
        for b in names[i + 1 :]:
            pooled = next(
                (c for c in pearson if c["group"] is None and c["a"] == a and c["b"] == b), None
            )
            within = [c for c in pearson if c["group"] is not None and c["a"] == a and c["b"] == b]
            rs = [c["r"] for c in within if c["r"] is not None]
            if pooled is None or pooled["r"] is None or len(rs) < 2:
                continue
            r0 = pooled["r"]
            # Common practice: ignore tiny coefficients, whose sign is noise.
            if abs(r0) < 0.1 or not all(r * r0 < 0 and abs(r) >= 0.1 for r in rs):
                continue
            pooled_way = "rise together" if r0 > 0 else "move in opposite directions"
            within_way = "move in opposite directions" if r0 > 0 else "rise together"
            sentence = (
                f"Across all rows '{a}' and '{b}' {pooled_way} (r = {r0:.2f}), but inside "
                f"every group they {within_way} (r from {min(rs):.2f} to {max(rs):.2f}). "
                "The pooled figure mostly reflects differences between the groups, not the "
                "pattern inside any one of them."
            )
            out.append(
                {
                    "a": a,
                    "b": b,
                    "pooled_r": r0,
                    "within_low": min(rs),
                    "within_high": max(rs),
                    "groups": len(rs),
                    "sentence": sentence,
                }
            )
    return out


def _curve_note(a: str, b: str, line_r2, check, r: float | None = None) -> str | None:
    if check.reason:
        return check.reason
    if not check.curved:
        return None
    if r is None:
        size = ""
    elif abs(r) < 0.3:
        size = f"Pearson's r is only {r:.2f}, yet "
    else:
        size = f"Pearson's r is {r:.2f}, and beyond that straight-line trend "
    return (
        f"{size}'{b}' follows a clear curve against '{a}': the smooth explains "
        f"{100 * check.smooth_adj_r2:.0f}% of its variation, a straight line only "
        f"{_share(line_r2)}. A correlation coefficient measures only the "
        "straight-line part of a relationship."
    )


def _share(r2: float) -> str:
    """R² as a whole percentage, with "under 1%" rather than "0%"."""
    share = 100 * max(r2, 0.0)
    return "under 1%" if share < 0.5 else f"{share:.0f}%"


def _relationship(
    group, a, b, xv, yv, fit, level, r=None, line=None, exact_line=None
) -> tuple[dict, dict]:
    """Return the curvature entry (line and smooth on the rows given, or ``line`` when
    already fitted) and the line entry (from ``exact_line`` when given: every row of
    streamed data)."""
    line = straight_line(xv, yv, level) if line is None else line
    if fit.reason or line.reason:
        check = curvature_check(None, None, line.n, None)
        reason = line.reason or fit.reason
    else:
        check = curvature_check(line.r2, fit.r2, line.n, fit.delta1)
        reason = None
    entry = {
        "group": group,
        "a": a,
        "b": b,
        "n": int(line.n),
        "linear_r2": _num(check.linear_r2 if not reason else line.r2),
        "smooth_r2": _num(check.smooth_r2 if not reason else fit.r2),
        "linear_adj_r2": _num(check.linear_adj_r2),
        "smooth_adj_r2": _num(check.smooth_adj_r2),
        "curved": bool(check.curved),
        "note": reason if reason else _curve_note(a, b, line.r2, check, r),
    }
    if exact_line is not None:
        line = exact_line
        entry["from_sample"] = sorted(set(entry) - {"group", "a", "b"})
    line_entry = {
        "group": group,
        "x": a,
        "y": b,
        "n": int(line.n),
        "slope": _num(line.slope),
        "slope_low": _num(line.slope_low),
        "slope_high": _num(line.slope_high),
        "intercept": _num(line.intercept),
        "p": _num(line.p),
        "r2": _num(line.r2),
        "level": level,
        "note": line.reason,
    }
    return entry, line_entry


def _smooth_entry(group, x_name, y_name, fit) -> dict:
    points = [
        {"x": _short(a), "fit": _short(f), "low": _short(lo), "high": _short(hi)}
        for a, f, lo, hi in zip(fit.x, fit.fit, fit.low, fit.high, strict=True)
    ]
    note = fit.reason
    if fit.binned and not note:
        note = "fitted on binned data (all rows used)"
    if fit.fallback:
        note = f"{note}; {fit.fallback}" if note else fit.fallback
    return {
        "group": group,
        "x": x_name,
        "y": y_name,
        "method": "loess",
        "span": _num(fit.span),
        "degree": fit.degree,
        "robust_iterations": fit.robust_iterations,
        "n": int(fit.n),
        "enp": _num(fit.enp),
        "residual_scale": _num(fit.residual_scale),
        "lookup_df": _num(fit.lookup_df),
        "level": fit.level,
        "binned": bool(fit.binned),
        "fallback": fit.fallback,  # where the local fit became a local mean or blank, and why
        "note": note,
        "points": points,
    }


def _sample(codes: np.ndarray, n_groups: int, limit: int, rng) -> np.ndarray:
    """Row positions of a group-stratified sample: proportional quotas, small groups whole."""
    n = codes.size
    if n <= limit:
        return np.arange(n)
    # Small integer codes sort by radix (linear time).
    key = codes.astype(np.int16) if n_groups < 32_000 else codes
    order = np.argsort(key, kind="stable")
    bounds = np.searchsorted(key[order], np.arange(n_groups + 1))
    sizes = np.diff(bounds)
    # Every group gets at least a fair share floor so small groups stay visible.
    floor = np.minimum(sizes, limit // max(2 * n_groups, 1))
    rest = limit - int(floor.sum())
    room = sizes - floor
    share = room * rest / max(int(room.sum()), 1)
    extra = np.floor(share).astype(np.int64)
    # Largest remainders take the rows left over by rounding down, so the total is the limit.
    left = rest - int(extra.sum())
    extra[np.argsort(-(share - extra), kind="stable")[:left]] += 1
    quota = np.minimum(sizes, floor + extra)
    picks = [
        order[bounds[g] + np.sort(rng.choice(sizes[g], size=int(quota[g]), replace=False))]
        for g in range(n_groups)
        if quota[g]
    ]
    return np.sort(np.concatenate(picks)) if picks else np.zeros(0, dtype=np.int64)


def compute(table, settings, rng: np.random.Generator, partial: dict | None = None) -> dict:
    """Return this section's results.json keys for one dataset (JSON-ready)."""
    spec = table.spec
    x_name = spec.x
    measures = [m for m in spec.measures if m != x_name]
    names = list(dict.fromkeys([*spec.measures, *([x_name] if x_name else [])]))
    chosen = chosen_groups(table)
    groups = [table.groups[g] for g in chosen]
    sizes = group_sizes(table)
    drawn = sorted(sorted(chosen, key=lambda g: -sizes[g])[:DRAWN_LIMIT])
    summarised = None
    if len(chosen) < len(table.groups):
        summarised = (
            f"{len(table.groups):,} groups: correlations and scatter points within groups are "
            f"shown for the {len(chosen)} largest groups only; the all-rows figures use every row."
        )
    if len(drawn) < len(chosen):
        summarised = (summarised + " " if summarised else "") + (
            f"Smooth curves and correlation heatmaps within groups are drawn for the "
            f"{len(drawn)} largest groups; the tables list every group shown."
        )
    wide = len(names) * (len(names) - 1) // 2 > WIDE_PAIRS
    if wide and len(drawn) < len(table.groups):
        summarised = (summarised + " " if summarised else "") + (
            f"With {len(names)} columns, within-group correlations are computed for the "
            f"{len(drawn)} largest groups, by Pearson and Spearman only (Kendall for all rows)."
        )
    elif wide:
        summarised = (summarised + " " if summarised else "") + (
            f"With {len(names)} columns, within-group correlations use Pearson and Spearman only "
            "(Kendall for all rows)."
        )
    order, bounds = table.rows_by_group()  # kept by the table, shared with other sections
    level = settings.confidence
    span = spec.smooth_span

    # Each scope's x is one array for every measure, so the smooths share its bins.
    x_scopes: list = []
    labels: list = []
    shared: dict = {}
    if x_name:
        x_all = table.values(x_name)
        xs = x_all[order]  # rows in group order, once for every measure
        x_scopes = [x_all] + [xs[bounds[g] : bounds[g + 1]] for g in drawn]
        labels = [None] + [table.groups[g] for g in drawn]
        del xs  # the scopes hold what they need (views)

    def smooth(measure: str) -> list[tuple]:
        """(label, smooth, straight line) of each scope of ``measure``: all rows, then each
        drawn group; the scopes' rows are let go as soon as they are fitted."""
        y_all = table.values(measure)
        ys = y_all[order]
        y_scopes = [y_all] + [ys[bounds[g] : bounds[g + 1]] for g in drawn]
        del ys
        fitted = []
        for label, xv, yv in zip(labels, x_scopes, y_scopes, strict=True):
            keep = ~(np.isnan(xv) | np.isnan(yv))
            if not keep.all():
                xv, yv = xv[keep], yv[keep]
            del keep
            fit = loess(xv, yv, span, spec.smooth_degree, spec.smooth_robust, level, shared=shared)
            fitted.append((label, fit, straight_line(xv, yv, level)))
        return fitted

    def correlate():
        return _correlations(table, names, settings, rng, drawn if wide else chosen)

    # The smooths draw no random numbers, so on large tables free cores fit them (one job per
    # measure) while the correlations (which do) run here; the results are the same either
    # way. Two threads may both make a scope's shared bins: the same arrays, made twice.
    jobs = [correlate] + ([functools.partial(smooth, m) for m in measures] if x_name else [])
    (correlations, family), *smoothed = share(
        lambda job: job(), jobs, parallel=table.n_rows >= PARALLEL_ROWS
    )
    pearson_r = {}
    for c in correlations:
        if c["method"] == "pearson":
            pearson_r[(c["group"], c["a"], c["b"])] = c["r"]
            pearson_r[(c["group"], c["b"], c["a"])] = c["r"]
    smooths: list[dict] = []
    relationships: list[dict] = []
    linear_fits: list[dict] = []
    scatter: list[dict] = []
    exact = getattr(table, "exact", None)
    if x_name:
        x_all = table.values(x_name)
        for measure, fitted in zip(measures, smoothed, strict=True):
            y_all = table.values(measure)
            for label, fit, line in fitted:
                smooth = _smooth_entry(label, x_name, measure, fit)
                if exact is not None:
                    smooth["from_sample"] = sorted(set(smooth) - {"group", "x", "y", "method"})
                smooths.append(smooth)
                r = pearson_r.get((label, x_name, measure))
                exact_line = None
                if exact is not None:
                    scope = -1 if label is None else table.groups.index(label)
                    exact_line = _exact_line(exact, scope, x_name, measure, level)
                rel, line = _relationship(
                    label, x_name, measure, None, None, fit, level, r, line, exact_line
                )
                relationships.append(rel)
                linear_fits.append(line)
            complete = ~(np.isnan(x_all) | np.isnan(y_all))
            if summarised:
                complete &= np.isin(table.codes, chosen)
            complete = np.flatnonzero(complete)
            if not complete.size:
                continue  # nothing to draw
            n_codes = len(table.groups)
            limit = min(SCATTER_LIMIT, max(300, SCATTER_BUDGET // max(1, len(measures))))
            picked = complete[_sample(table.codes[complete], n_codes, limit, rng)]
            scatter.append(
                {
                    "x": x_name,
                    "y": measure,
                    "n_total": int(complete.size),
                    "n_shown": int(picked.size),
                    "sampled": bool(picked.size < complete.size),
                    **(
                        {"from_sample": ["n_shown", "n_total", "points", "sampled"]}
                        if exact is not None
                        else {}
                    ),
                    "points": [
                        {"group": table.groups[c], "x": _short(a), "y": _short(b)}
                        for c, a, b in zip(
                            table.codes[picked].tolist(),
                            x_all[picked].tolist(),
                            y_all[picked].tolist(),
                            strict=True,
                        )
                    ],
                }
            )
    # Measure against measure, all rows only (cheap: a bounded seeded sample of rows).
    for i, a in enumerate(measures):
        for b in measures[i + 1 :]:
            xa, yb = table.values(a), table.values(b)
            rows = np.flatnonzero(~(np.isnan(xa) | np.isnan(yb)))
            if rows.size > PAIR_SMOOTH_LIMIT:
                rows = np.sort(rng.choice(rows, size=PAIR_SMOOTH_LIMIT, replace=False))
            xv, yv = xa[rows], yb[rows]
            fit = loess(xv, yv, span, spec.smooth_degree, spec.smooth_robust, level)
            rel, _ = _relationship(None, a, b, xv, yv, fit, level, pearson_r.get((None, a, b)))
            total = int(np.sum(~(np.isnan(xa) | np.isnan(yb))))
            if rows.size < total:
                sampled = f"checked on a random sample of {rows.size:,} of {total:,} rows"
                rel["note"] = f"{rel['note']} ({sampled})" if rel["note"] else sampled
                rel["sample"] = sampled
            if exact is not None:
                rel["from_sample"] = sorted(set(rel) - {"group", "a", "b"})
            relationships.append(rel)
    return {
        "correlations": correlations,
        "smooths": smooths,
        "relationships": relationships,
        "correlation_family": family,
        "linear_fits": linear_fits,
        "scatter": scatter,
        "reversals": _reversals(correlations, names, len(groups)),
        "relationship_columns": {
            "columns": names,
            "measures": measures,
            "x": x_name,
            "groups": groups,
            "curve_rule": RULE,
            "summarised": summarised,
            "drawn_groups": [table.groups[g] for g in drawn],
        },
    }


def charts(dataset: dict, settings) -> list[Chart]:
    """Return the heatmaps (all rows, each group) and one scatter with smooths per measure."""
    from ..charts.relationships import (
        MAX_GROUP_BANDS,
        correlation_heatmap,
        scatter_with_smooths,
    )

    info = dataset.get("relationship_columns")
    if not info:
        return []
    out = []
    drawn = set(info.get("drawn_groups", info["groups"]))
    scopes = [(None, "all")] + [
        (g, f"g{k + 1}") for k, g in enumerate(info["groups"]) if g in drawn
    ]
    for group, suffix in scopes:
        cells = [
            c for c in dataset["correlations"] if c["method"] == "pearson" and c["group"] == group
        ]
        if not cells:
            continue
        where = "all rows" if group is None else f"group '{group}'"
        out.append(
            Chart(
                id=f"rel-heat-{suffix}",
                title="Pearson correlations, " + where,
                description=(
                    f"Heatmap of Pearson correlations between every pair of columns for {where};"
                    " each cell prints r, faded, dashed cells with italic values are not significant after adjustment."
                ),
                spec=correlation_heatmap(cells, info["columns"], settings.alpha),
                table=f"rel-corr-{suffix}",
            )
        )
    for k, scatter in enumerate(dataset.get("scatter", [])):
        y = scatter["y"]
        smooths = [s for s in dataset["smooths"] if s["y"] == y]
        line = next((f for f in dataset["linear_fits"] if f["y"] == y and f["group"] is None), None)
        shown = (
            f"a random sample of {scatter['n_shown']:,} of {scatter['n_total']:,} points"
            if scatter["sampled"]
            else f"all {scatter['n_total']:,} points"
        )
        out.append(
            Chart(
                id=f"rel-scatter-{k + 1}",
                title=f"{y} against {scatter['x']}",
                description=(
                    f"Scatter of {shown}, coloured and shaped by group, with a LOESS smooth "
                    + (
                        "and its pointwise band for each group and for all rows"
                        if len({s["group"] for s in smooths if s["group"] is not None})
                        <= MAX_GROUP_BANDS
                        else "for each group (drawn without bands, which would blur into one "
                        "another; they are in results.json) and one with its pointwise band for "
                        "all rows"
                    )
                    + ", and the straight-line fit for all rows."
                    + "".join(
                        f" Smooth for {s['group'] or 'all rows'}: {s['fallback']}."
                        for s in smooths
                        if s.get("fallback")
                    )
                ),
                spec=_drawn_on_time(
                    scatter_with_smooths(
                        scatter,
                        smooths,
                        line,
                        info["groups"],
                        group_by=dataset.get("group_by"),
                        reference=next(
                            (
                                e.get("reference")
                                for e in dataset.get("comparisons", [])
                                if e.get("measure") == y
                            ),
                            None,
                        ),
                    ),
                    dataset,
                ),
                table="rel-lines",
            )
        )
    return out


def _drawn_on_time(spec: dict, dataset: dict) -> dict:
    """Return ``spec`` with a date axis when x holds dates (source.x_time), else unchanged."""
    from ..charts.relationships import with_date_axis

    x_time = dataset.get("source", {}).get("x_time")
    return with_date_axis(spec, x_time["origin_ms"]) if x_time else spec


CURVED_LINE_NOTE = "curved: a single slope does not describe this relationship (see above)"


def tables(dataset: dict, settings) -> list[DataTable]:
    """Return the correlation table per scope, the curvature table and the straight lines."""
    info = dataset.get("relationship_columns")
    if not info:
        return []
    family = dataset["correlation_family"]
    columns = (
        ("a", "Column"),
        ("b", "With"),
        ("method", "Method"),
        ("n", "Pairs"),
        ("r", "Coefficient"),
        ("ci_low", "Interval low"),
        ("ci_high", "Interval high"),
        ("p", "p"),
        ("p_adjusted", "p adjusted"),
        ("note", "Note"),
    )
    out = []
    scopes = [(None, "all")] + [(g, f"g{k + 1}") for k, g in enumerate(info["groups"])]
    for group, suffix in scopes:
        rows = tuple(
            {key: c[key] for key, _ in columns} | {"method": METHOD_LABELS[c["method"]]}
            for c in dataset["correlations"]
            if c["group"] == group
        )
        if not rows:
            continue
        where = "all rows" if group is None else f"group '{group}'"
        out.append(
            DataTable(
                id=f"rel-corr-{suffix}",
                title=f"Correlations, {where}",
                columns=columns,
                rows=rows,
                caption=(
                    f"{round(100 * settings.confidence)}% intervals by Fisher's z (Spearman with "
                    "the Bonett–Wright standard error, Kendall with that of Fieller, Hartley & Pearson); "
                    + family["description"]
                    + sampled_caption(dataset, "the Spearman and Kendall coefficients")
                ),
            )
        )
    if dataset["relationships"]:
        out.append(
            DataTable(
                id="rel-curves",
                title="Straight line or curve?",
                columns=(
                    ("group", "Group"),
                    ("a", "Across"),
                    ("b", "Measure"),
                    ("n", "Rows"),
                    ("linear_r2", "Line R²"),
                    ("smooth_r2", "Smooth R²"),
                    ("linear_adj_r2", "Line adjusted R²"),
                    ("smooth_adj_r2", "Smooth adjusted R²"),
                    ("curved", "Curved"),
                    ("note", "Note"),
                ),
                rows=tuple(
                    r
                    | {
                        "group": "all rows" if r["group"] is None else r["group"],
                        # A curve's sentence is printed above the table; repeating it in
                        # every row made the table several screens tall.
                        "note": r.get("sample", "") if r["curved"] else r["note"],
                    }
                    for r in dataset["relationships"]
                ),
                caption="The rule: "
                + info["curve_rule"]
                + ". Each curve is described above."
                + sampled_caption(dataset, "the smooths and this check"),
            )
        )
    curved = {(r["group"], r["a"], r["b"]) for r in dataset["relationships"] if r["curved"]}
    if dataset["linear_fits"]:
        out.append(
            DataTable(
                id="rel-lines",
                title="Straight-line fits",
                columns=(
                    ("group", "Group"),
                    ("y", "Measure"),
                    ("x", "Across"),
                    ("n", "Rows"),
                    ("slope", "Slope"),
                    ("slope_low", "Slope interval low"),
                    ("slope_high", "Slope interval high"),
                    ("intercept", "Intercept"),
                    ("r2", "R²"),
                    ("p", "p (slope = 0)"),
                    ("note", "Note"),
                ),
                rows=tuple(
                    f
                    | {
                        "group": "all rows" if f["group"] is None else f["group"],
                        "note": CURVED_LINE_NOTE
                        if (f["group"], f["x"], f["y"]) in curved
                        else f["note"],
                    }
                    for f in dataset["linear_fits"]
                ),
                caption=(
                    f"Least-squares lines with {round(100 * settings.confidence)}% t intervals for "
                    "the slope."
                    + (
                        f" '{info['x']}' holds dates: slopes are per day, the intercept is the "
                        f"value on {dataset['source']['x_time']['origin']}."
                        if dataset.get("source", {}).get("x_time")
                        else ""
                    )
                ),
            )
        )
    return out
