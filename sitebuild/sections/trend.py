"""Trends over time (results.json key ``trends``): when the manifest says x is a time axis
(``time_unit``), each measure's straight-line trend per group, per time unit, with its
interval; whether the groups' trends differ (the group × time interaction F test); and a
sentence naming the steepest group in the direction that matters (``better``).

The values over time with each group's smooth are drawn by the relationships section's
scatter chart (x is the time axis), so this section adds numbers and sentences, no chart.
"""

from __future__ import annotations

import math

import numpy as np

from ..stats.findings import format_num, measure_unit, p_phrase
from ..stats.trend import trends
from . import DataTable


def _num(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def compute(table, settings, rng: np.random.Generator, partial: dict | None = None) -> dict:
    """Return ``{"trends": [...]}`` when x is a time axis (``time_unit``); ``{}`` otherwise."""
    del rng, partial
    spec = table.spec
    if not spec.time_unit or not spec.x or spec.x in spec.measures:
        return {}
    from .adjusted import SCALE_LIMIT, _moments_memory, _moments_streamed, _too_large

    out = []
    for measure in spec.measures:
        if _too_large(table, spec.x, measure):
            out.append(
                {
                    "measure": measure,
                    "x": spec.x,
                    "unit": spec.time_unit,
                    "better": spec.better.get(measure),
                    "confidence": settings.confidence,
                    "groups": [],
                    "differ": {
                        "statistic": None,
                        "df1": None,
                        "df2": None,
                        "p": None,
                        "differ": False,
                    },  # fmt: skip
                    "findings": [
                        f"'{measure}' holds values beyond ±{SCALE_LIMIT:g}, whose squares "
                        "overflow, so no trend is given."
                    ],
                }
            )
            continue
        if table.exact is not None:
            moments = _moments_streamed(table, spec.x, measure)
        else:
            moments, _ = _moments_memory(table, spec.x, measure, 1)
        result = trends(moments, settings.confidence)
        rows = [
            {
                "group": group,
                "n": t.n,
                "slope": _num(t.slope),
                "ci_low": _num(t.ci_low),
                "ci_high": _num(t.ci_high),
                "p": _num(t.pvalue),
            }
            for group, t in zip(table.groups, result.groups, strict=True)
            if t.n > 0
        ]
        entry = {
            "measure": measure,
            "x": spec.x,
            "unit": spec.time_unit,
            "better": spec.better.get(measure),
            "confidence": settings.confidence,
            "groups": rows,
            "differ": {
                "statistic": _num(result.differ_statistic),
                "df1": _num(result.differ_df1),
                "df2": _num(result.differ_df2),
                "p": _num(result.differ_p),
                "differ": bool(result.differ_p < settings.alpha)
                if math.isfinite(result.differ_p)
                else False,
            },
        }
        entry["findings"] = findings(entry)
        out.append(entry)
    return {"trends": out}


def findings(entry: dict) -> list[str]:
    """Return the sentences of one measure's trends (results shape).

    Examples
    --------
    >>> e = {"measure": "scrap (%)", "unit": "week", "better": "lower", "confidence": 0.95,
    ...      "groups": [{"group": "A", "slope": 0.4, "ci_low": 0.1, "ci_high": 0.7},
    ...                 {"group": "B", "slope": -0.2, "ci_low": -0.5, "ci_high": 0.1}],
    ...      "differ": {"statistic": 6.1, "df1": 1, "df2": 40, "p": 0.018, "differ": True}}
    >>> findings(e)[0]
    "Worsening fastest: 'A', by 0.4 percentage points per week (95% CI 0.1 to 0.7) (lower is better)."
    """
    measure, unit = entry["measure"], entry["unit"]
    u = measure_unit(measure)
    per = f"{' ' + u if u else ''} per {unit}"
    level = f"{entry['confidence']:.0%}"
    rows = [g for g in entry["groups"] if g["slope"] is not None]
    if not rows:
        return [f"'{measure}' has too few values over time in every group to give a trend."]

    def told(g) -> str:
        interval = (
            f" ({level} CI {format_num(g['ci_low'])} to {format_num(g['ci_high'])})"
            if g["ci_low"] is not None and g["ci_high"] is not None
            else " (too few values for an interval)"
        )
        return f"'{g['group']}', by {format_num(abs(g['slope']))}{per}{interval}"

    out = []
    rising = max(rows, key=lambda g: g["slope"])
    falling = min(rows, key=lambda g: g["slope"])
    better = entry.get("better")
    if better is None:
        if rising["slope"] > 0:
            out.append(f"Steepest rise: {told(rising)}.")
        if falling["slope"] < 0:
            out.append(f"Steepest fall: {told(falling)}.")
    else:
        worse, good = (rising, falling) if better == "lower" else (falling, rising)
        if (worse["slope"] > 0) == (better == "lower") and worse["slope"] != 0:
            out.append(f"Worsening fastest: {told(worse)} ({better} is better).")
        if (good["slope"] < 0) == (better == "lower") and good["slope"] != 0:
            out.append(f"Improving fastest: {told(good)}.")
    d = entry["differ"]
    out.append(
        ("The groups' trends differ" if d["differ"] else "The groups' trends do not clearly differ")
        + f" (group × time F = {format_num(d['statistic'])}, {p_phrase(d['p'])})."
    )
    out.append(
        "A straight-line trend summarises the direction over the period shown; seasonal or "
        "stepwise changes show in the smooth of the scatter chart, and a trend need not go on."
    )
    return out


def charts(dataset: dict, settings) -> list:
    """Return no charts: the scatter with smooths of the relationships section shows time."""
    return []


def tables(dataset: dict, settings) -> list[DataTable]:
    """Return, per measure, the trend table (ids trend-{mi})."""
    out = []
    for entry in dataset.get("trends", []):
        mi = dataset["measures"].index(entry["measure"])
        out.append(
            DataTable(
                id=f"trend-{mi}",
                title=f"Trend of {entry['measure']} per {entry['unit']}",
                columns=(
                    ("group", "Group"),
                    ("n", "n"),
                    ("slope", f"Change per {entry['unit']}"),
                    ("ci_low", "CI low"),
                    ("ci_high", "CI high"),
                    ("p", "p (no trend)"),
                ),
                rows=tuple(dict(g) for g in entry["groups"]),
                caption="Least-squares slope per group with its own residual spread; p-values "
                "are not adjusted across groups.",
            )
        )
    return out
