"""Comparisons at equal x (results.json key ``adjusted``): each measure's group means adjusted
to the overall mean of the explanatory column ``x`` by an analysis of covariance
(``measure ~ group + x``), beside the raw comparison.

Which comparison leads (the findings and the page put it first): the comparison at equal x
leads when the groups differ in x (the Kruskal–Wallis check of the comparisons section,
p < alpha) or when x accounts for at least ``MATERIAL_SHARE`` of the variation of the
measure within groups; otherwise the raw comparison leads and this one is a check beside it.

When the relationship of the measure with x is curved (the curve flag of the relationships
section) the adjustment uses a quadratic in x, y ~ group + x + (x − x̄)², and says so. On
streamed data only the straight-line adjustment is exact (the engines keep the co-moments of
x and y, not of x²), so there it stays a straight line and the page says it is approximate.

Pairwise p-values are adjusted within the measure's family by the site's ``adjust`` method.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..stats import practice_findings
from ..stats.ancova import XYMoments, ancova
from ..stats.multiplicity import METHOD_NAMES, adjust_pvalues
from . import DataTable, map_measures

# x "explains a material share" of a measure when it accounts for at least this share of the
# within-group variation (partial R²; 0.10 sits between the usual "medium" marks of 0.06 and
# 0.14 for partial eta squared, Cohen 1988: common practice, not a law).
MATERIAL_SHARE = 0.10
MAX_PAIRS_GROUPS = 30
SCALE_LIMIT = 1e75  # as the comparisons section: squares of larger values overflow float64  # as the comparisons section: above it, no pairwise table


def _num(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _moments_memory(
    table, x: str, measure: str, degree: int, rows: GroupRows | None = None
) -> tuple[list[XYMoments], tuple]:
    rows = rows if rows is not None else GroupRows.of(table, x)
    ys = table.values(measure)
    if rows.x_complete and not np.isnan(ys).any():
        centre = rows.x_mean
    else:
        both = ~(np.isnan(table.values(x)) | np.isnan(ys))
        centre = float(np.mean(table.values(x)[both])) if both.any() else 0.0
        del both
    ys = ys[rows.order]  # (XYMoments.of leaves out the rows with a NaN)
    groups = []
    for code in range(len(table.groups)):
        part = slice(rows.bounds[code], rows.bounds[code + 1])
        groups.append(XYMoments.of(rows.x[part], ys[part], degree, centre))
    # Means are evaluated at the overall means of the covariates: for the curve, averaged over
    # the x values of all rows together (not at the curve's value at x̄, which would sit at
    # its peak or trough and move every mean away from the data).
    return groups, None


@dataclass(frozen=True)
class GroupRows:
    """The rows in group order (each group's in their original order), and x in that order:
    made once and shared by every measure."""

    order: np.ndarray
    bounds: np.ndarray
    x: np.ndarray
    x_complete: bool
    x_mean: float  # over every row, when x is complete

    @classmethod
    def of(cls, table, x: str) -> GroupRows:
        order, bounds = table.rows_by_group()
        xs = table.values(x)
        complete = not np.isnan(xs).any()
        centre = float(np.mean(xs)) if complete and xs.size else 0.0
        return cls(order, bounds, xs[order], complete, centre)


def _moments_streamed(table, x: str, measure: str) -> list[XYMoments]:
    """Straight-line moments of every row, from the engine's exact co-moments."""
    exact = table.exact
    if (x, measure) in exact.comoments:
        co, swap = exact.comoments[(x, measure)], False
    else:
        co, swap = exact.comoments[(measure, x)], True
    px, py = exact.moments[x].pivot, exact.moments[measure].pivot
    low, high = exact.moments[x].low, exact.moments[x].high
    out = []
    for i in range(len(table.groups)):
        mean_x, mean_y = float(co.mean_a[i]), float(co.mean_b[i])
        sxx, syy = float(co.m2a[i]), float(co.m2b[i])
        if swap:
            mean_x, mean_y, sxx, syy = mean_y, mean_x, syy, sxx
        out.append(
            XYMoments.line(
                int(co.n[i]),
                px + mean_x,
                py + mean_y,
                sxx,
                syy,
                float(co.c[i]),
                float(low[i]) if math.isfinite(low[i]) else math.nan,
                float(high[i]) if math.isfinite(high[i]) else math.nan,
            )
        )
    return out


def _too_large(table, x: str, measure: str) -> bool:
    """True when x or the measure holds values whose squares or cross-products overflow."""
    if table.exact is not None:
        spans = [table.exact.moments[c] for c in (x, measure)]
        return any(
            np.any(np.abs(m.low[np.isfinite(m.low)]) > SCALE_LIMIT)
            or np.any(np.abs(m.high[np.isfinite(m.high)]) > SCALE_LIMIT)
            for m in spans
        )
    for column in (x, measure):
        values = table.values(column)
        if not values.size:
            continue
        # fmin and fmax pass over NaN, with no copy (an all-NaN column gives NaN: not large).
        low, high = float(np.fmin.reduce(values)), float(np.fmax.reduce(values))
        if abs(low) > SCALE_LIMIT or abs(high) > SCALE_LIMIT:
            return True
    return False


def _curved(partial: dict, x: str, measure: str) -> bool:
    return any(
        r.get("group") is None and r.get("a") == x and r.get("b") == measure and r.get("curved")
        for r in (partial or {}).get("relationships", [])
    )


def _x_balance(partial: dict, table, settings) -> dict | None:
    for entry in (partial or {}).get("comparisons", []):
        if entry.get("x_balance"):
            return entry["x_balance"]
    from .comparisons import _x_balance as balance

    return balance(table, settings)


def _raw_verdicts(partial: dict, measure: str) -> dict:
    for entry in (partial or {}).get("comparisons", []):
        if entry.get("measure") == measure:
            return {(p["a"], p["b"]): p for p in entry.get("pairs", []) if "a" in p and "b" in p}
    return {}


def _entry(table, measure: str, settings, partial: dict, balance: dict | None, rows=None) -> dict:
    spec = table.spec
    x = spec.x
    curved = _curved(partial, x, measure)
    streamed = table.exact is not None
    degree = 2 if curved and not streamed else 1
    huge = _too_large(table, x, measure)
    if huge:
        moments, at = [], None
    elif streamed:
        moments, at = _moments_streamed(table, x, measure), None
    else:
        moments, at = _moments_memory(table, x, measure, degree, rows)
    names = list(table.groups)
    present = [i for i, g in enumerate(moments) if g.n > 0]
    base = {
        "measure": measure,
        "x": x,
        "model": "curve" if degree == 2 else "straight line",
        # Where the means are compared: one value of x, or (for the curve) the x values of
        # all rows together.
        "evaluated_at": (
            f"over the '{x}' values of all rows together"
            if degree == 2
            else f"at the overall mean of '{x}'"
        ),
        "curved": curved,
        "approximate": bool(curved and degree == 1),
        "better": spec.better.get(measure),
        "confidence": settings.confidence,
        "alpha": settings.alpha,
        "adjust": settings.adjust,
        "adjust_name": METHOD_NAMES[settings.adjust],
    }
    n_total = sum(moments[i].n for i in present)
    if huge or len(present) < 2 or n_total - len(present) - degree < 2:
        empty = {
            **base,
            "reason": (
                f"values beyond ±{SCALE_LIMIT:g} cannot be squared safely, so they are not compared"
                if huge
                else "fewer than two groups, or too few rows with both values, to compare them"
            ),
            "leads": False,
            "differs_in_x": bool(balance and balance.get("differs")),
            "lead_reason": None,
            "groups": [],
            "pairs": [],
            "slopes": None,
            "headline": None,
        }
        empty["findings"] = practice_findings.adjusted_findings(empty)
        return empty
    reference = spec.reference if spec.reference in names else None
    if reference is not None:
        r = names.index(reference)
        pairs_idx = [(i, r) for i in present if i != r]
        mode = "reference"
    elif len(present) <= MAX_PAIRS_GROUPS:
        pairs_idx = [(i, j) for n, i in enumerate(present) for j in present[n + 1 :]]
        mode = "all pairs"
    else:
        pairs_idx = []
        mode = "none"
    result = ancova(moments, settings.confidence, pairs_idx, at)
    raw = _raw_verdicts(partial, measure)
    p_adj = adjust_pvalues([_num(p.pvalue) for p in result.pairs], settings.adjust)
    pairs = []
    for p, q in zip(result.pairs, p_adj, strict=True):
        a, b = names[p.a], names[p.b]
        before = raw.get((a, b), {})
        share = None
        if p.raw_difference and math.isfinite(p.difference):
            share = (p.raw_difference - p.difference) / p.raw_difference
        pairs.append(
            {
                "a": a,
                "b": b,
                "n_a": moments[p.a].n,
                "n_b": moments[p.b].n,
                "raw_difference": _num(p.raw_difference),
                "difference": _num(p.difference),
                "se": _num(p.se),
                "ci_low": _num(p.ci_low),
                "ci_high": _num(p.ci_high),
                "statistic": _num(p.statistic),
                "p": _num(p.pvalue),
                "p_adjusted": _num(q),
                "significant": bool(q is not None and q < settings.alpha),
                "raw_significant": before.get("significant"),
                "x_accounts_for": _num(share),
            }
        )
    slopes = result.slopes
    groups = []
    for i, g in enumerate(result.groups):
        if g.n == 0:
            continue
        groups.append(
            {
                "group": names[i],
                "n": g.n,
                "mean": _num(g.mean),
                "sd": _num(math.sqrt(moments[i].syy / (g.n - 1))) if g.n > 1 else None,
                "mean_x": _num(g.mean_x),
                "adjusted": _num(g.adjusted),
                "se": _num(g.se),
                "ci_low": _num(g.ci_low),
                "ci_high": _num(g.ci_high),
                "x_low": _num(g.x_low),
                "x_high": _num(g.x_high),
                "extrapolated": g.extrapolated,
                "slope": _num(slopes.slopes[i]),
                "slope_low": _num(slopes.slope_low[i]),
                "slope_high": _num(slopes.slope_high[i]),
            }
        )
    differs_in_x = bool(balance and balance.get("differs"))
    material = bool(result.x_share is not None and result.x_share >= MATERIAL_SHARE)
    if differs_in_x and material:
        lead_reason = (
            f"the groups differ in '{x}', and '{x}' accounts for "
            f"{result.x_share:.0%} of the variation of '{measure}' within groups"
        )
    elif differs_in_x:
        lead_reason = f"the groups differ in '{x}'"
    elif material:
        lead_reason = (
            f"'{x}' accounts for {result.x_share:.0%} of the variation of '{measure}' within "
            f"groups (at least {MATERIAL_SHARE:.0%})"
        )
    else:
        lead_reason = None
    entry = {
        **base,
        "reason": None,
        "leads": lead_reason is not None,
        "differs_in_x": differs_in_x,
        "lead_reason": lead_reason,
        "mode": mode,
        "slope": _num(result.slope),
        "slope_low": _num(result.slope_low),
        "slope_high": _num(result.slope_high),
        "df": result.df,
        "residual_sd": _num(result.residual_sd),
        "within_sd": _num(result.within_sd),
        "x_share": _num(result.x_share),
        "x_mean": _num(result.x_mean),
        "group_f": _num(result.group_f),
        "group_df1": result.group_df1,
        "group_df2": result.df,
        "group_p": _num(result.group_p),
        "overlap": result.overlap,
        "groups": groups,
        "pairs": pairs,
        "slopes": {
            "statistic": _num(slopes.statistic),
            "df1": _num(slopes.df1),
            "df2": _num(slopes.df2),
            "p": _num(slopes.pvalue),
            "differ": bool(slopes.pvalue is not None and slopes.pvalue < settings.alpha),
        },
    }
    entry["findings"] = practice_findings.adjusted_findings(entry)
    entry["headline"] = practice_findings.adjusted_headline(entry)
    if streamed:
        # Whether the groups differ in x is a rank test on the bounded sample, and each
        # group's x range is over all its rows rather than its complete pairs: list them.
        entry["from_sample"] = [
            "differs_in_x",
            "findings",
            "headline",
            "lead_reason",
            "leads",
            "overlap",
        ]
        for row in groups:
            row["from_sample"] = ["extrapolated", "x_high", "x_low"]
    return entry


def compute(table, settings, rng: np.random.Generator, partial: dict | None = None) -> dict:
    """Return ``{"adjusted": [...]}`` (one entry per measure) when the dataset has ``x``;
    ``{}`` otherwise. Reads the curve flags and x-balance check of earlier sections."""
    del rng
    x = table.spec.x
    if not x or x in table.spec.measures:
        return {}
    balance = _x_balance(partial, table, settings)
    rows = GroupRows.of(table, x) if table.exact is None else None

    def entry(measure: str) -> dict:
        return _entry(table, measure, settings, partial or {}, balance, rows)

    return {"adjusted": map_measures(entry, table.spec.measures, table.n_rows)}


def charts(dataset: dict, settings) -> list:
    """Return, per measure, the raw-and-adjusted means chart (ids eqx-{mi}-means)."""
    from ..charts import adjusted as draw
    from . import Chart

    out = []
    for mi, entry in enumerate(dataset.get("adjusted", [])):
        if not entry.get("groups"):
            continue
        level = f"{entry['confidence']:.0%}"
        out.append(
            Chart(
                id=f"eqx-{mi}-means",
                title=f"{entry['measure']}: raw means and means at equal {entry['x']}",
                description=(
                    f"Each group's raw mean of {entry['measure']} (hollow) and its mean "
                    f"{entry['evaluated_at']} (filled) with a {level} confidence interval."
                ),
                spec=draw.raw_and_adjusted(entry, dataset.get("groups", [])),
                table=f"eqx-{mi}-groups",
            )
        )
    return out


def tables(dataset: dict, settings) -> list[DataTable]:
    """Return, per measure, the adjusted-means and adjusted-differences tables."""
    out: list[DataTable] = []
    for mi, entry in enumerate(dataset.get("adjusted", [])):
        if not entry.get("groups"):
            continue
        x = entry["x"]
        out.append(
            DataTable(
                id=f"eqx-{mi}-groups",
                title=f"Means of {entry['measure']} at equal {x}",
                columns=(
                    ("group", "Group"),
                    ("n", "n"),
                    ("mean_x", f"Mean {x}"),
                    ("x_low", f"Lowest {x}"),
                    ("x_high", f"Highest {x}"),
                    ("mean", "Raw mean"),
                    ("adjusted", f"Mean at equal {x}"),
                    ("ci_low", "CI low"),
                    ("ci_high", "CI high"),
                    ("slope", f"Own slope per unit of {x}"),
                    ("slope_low", "Slope CI low"),
                    ("slope_high", "Slope CI high"),
                ),
                rows=tuple(dict(g) for g in entry["groups"]),
                caption=(
                    f"Means {entry['evaluated_at']}, from one common "
                    + ("curve" if entry["model"] == "curve" else "slope")
                    + " for all groups (analysis of covariance). Own slopes are each group's "
                    "separate fit, for the check of equal slopes."
                ),
            )
        )
        if entry.get("pairs"):
            out.append(
                DataTable(
                    id=f"eqx-{mi}-pairs",
                    title=f"Differences in {entry['measure']} at equal {x}",
                    columns=(
                        ("a", "Group"),
                        ("b", "Compared with"),
                        ("raw_difference", "Raw difference"),
                        ("difference", f"Difference at equal {x}"),
                        ("ci_low", "CI low"),
                        ("ci_high", "CI high"),
                        ("p", "p"),
                        ("p_adjusted", "Adjusted p"),
                        ("x_accounts_for", f"Share of the raw gap from {x}"),
                    ),
                    rows=tuple(dict(p) for p in entry["pairs"]),
                    caption=f"p-values adjusted by {entry['adjust_name']} within this measure's "
                    f"{len(entry['pairs'])} comparisons; Student's t on {entry['df']} degrees "
                    "of freedom.",
                )
            )
    return out
