"""Charts of per-group summaries: mean intervals, histograms and box views."""

from __future__ import annotations

from .theme import INK, MUTED, group_colour_scale, themed

ROW_HEIGHT = 26


def _group_colour(all_groups: list[str]) -> dict:
    """Colour by group, the same colour for a group on every chart; no legend (axis names it)."""
    return {
        "field": "group",
        "type": "nominal",
        "scale": group_colour_scale(all_groups),
        "legend": None,
    }


def _group_axis(groups: list[str]) -> dict:
    return {"field": "group", "type": "nominal", "sort": list(groups), "title": None}


def value_format(rows: list[dict]) -> str:
    """Return the d3 format for a measure's values in tooltips: the measure's fixed decimals
    (see :func:`sitebuild.stats.findings.measure_decimals`), else 4 significant digits."""
    from ..stats.findings import measure_decimals

    decimals = measure_decimals({"groups": rows})
    return ".4~g" if decimals is None else f",.{decimals}f"


def mean_intervals(rows: list[dict], all_groups: list[str], measure: str) -> dict:
    """Return a dot-and-interval chart: each group's mean with its confidence interval."""
    values = [
        {
            "group": r["group"],
            "mean": r["mean"],
            "low": r["ci_low"],
            "high": r["ci_high"],
            "n": r["n"],
        }
        for r in rows
        if r["mean"] is not None
    ]
    shown = [r["group"] for r in rows]
    colour = _group_colour(all_groups)
    y = _group_axis(shown)
    fmt = value_format(rows)
    tooltip = [
        {"field": "group", "title": "Group"},
        {"field": "mean", "title": "Mean", "format": fmt},
        {"field": "low", "title": "CI low", "format": fmt},
        {"field": "high", "title": "CI high", "format": fmt},
        {"field": "n", "title": "n"},
    ]
    return themed(
        {
            "data": {"values": values},
            # A fixed height of one row per group (a "step" height would make Vega-Lite drop
            # the fit to the container's width with a warning).
            "height": ROW_HEIGHT * max(1, len(shown)),
            "width": "container",
            "encoding": {"y": y},
            "layer": [
                {
                    "mark": {"type": "rule", "strokeWidth": 2},
                    "encoding": {
                        "x": {
                            "field": "low",
                            "type": "quantitative",
                            "title": measure,
                            "scale": {"zero": False},
                        },
                        "x2": {"field": "high"},
                        "color": colour,
                        "tooltip": tooltip,
                    },
                },
                {
                    "mark": {
                        "type": "point",
                        "filled": True,
                        "size": 70,
                        "stroke": INK,
                        "strokeWidth": 0.5,
                    },
                    "encoding": {
                        "x": {"field": "mean", "type": "quantitative"},
                        "color": colour,
                        "tooltip": tooltip,
                    },
                },
            ],
        }
    )


HIST_WIDTH = (
    800  # px per histogram panel (faceted views cannot fill the box); narrow screens scroll
)


def histograms(
    dist: dict, shown: list[str], all_groups: list[str], measure: str, fmt: str = ".4~g"
) -> dict:
    """Return small-multiple histograms on shared bins, one row per group, as shares."""
    edges = dist["edges"]
    values = []
    for g in dist["groups"]:
        if g["group"] not in shown:
            continue
        total = sum(g["counts"]) or 1
        for i, count in enumerate(g["counts"]):
            values.append(
                {
                    "group": g["group"],
                    "start": edges[i],
                    "end": edges[i + 1],
                    "count": count,
                    "share": count / total,
                }
            )
    return themed(
        {
            "data": {"values": values},
            "mark": {"type": "rect", "stroke": "#ffffff", "strokeWidth": 0.5},
            # A faceted view cannot take the container's width, so it gets a fixed one.
            "width": HIST_WIDTH,
            "height": 60,
            "encoding": {
                "x": {
                    "field": "start",
                    "type": "quantitative",
                    "title": measure,
                    "scale": {"zero": False},
                },
                "x2": {"field": "end"},
                "y": {
                    "field": "share",
                    "type": "quantitative",
                    "title": "Share",
                    "axis": {"format": "~%", "tickCount": 2},
                },
                "row": {
                    "field": "group",
                    "type": "nominal",
                    "sort": list(shown),
                    "title": None,
                    "header": {"labelAngle": 0, "labelAlign": "left", "labelLimit": 160},
                },
                "color": _group_colour(all_groups),
                "tooltip": [
                    {"field": "group", "title": "Group"},
                    {"field": "start", "title": "From", "format": fmt},
                    {"field": "end", "title": "To", "format": fmt},
                    {"field": "count", "title": "Count"},
                    {"field": "share", "title": "Share", "format": ".1%"},
                ],
            },
            "resolve": {"scale": {"y": "independent"}},
        }
    )


def boxes(
    dist: dict, shown: list[str], all_groups: list[str], measure: str, fmt: str = ".4~g"
) -> dict:
    """Return horizontal box views from precomputed quartiles, whiskers and outlier points."""
    boxes_data, points = [], []
    for g in dist["groups"]:
        if g["group"] not in shown or g["median"] is None:
            continue
        boxes_data.append(
            {k: g[k] for k in ("group", "q1", "median", "q3", "whisker_low", "whisker_high")}
        )
        points.extend({"group": g["group"], "value": v} for v in g["outlier_points"])
    colour = _group_colour(all_groups)
    y = _group_axis(shown)
    x_title = {"title": measure, "scale": {"zero": False}}
    outliers = {
        "data": {"values": points},
        "mark": {"type": "point", "size": 18, "opacity": 0.7, "filled": False},
        "encoding": {
            "x": {"field": "value", "type": "quantitative"},
            "color": colour,
            "tooltip": [
                {"field": "group", "title": "Group"},
                {"field": "value", "title": "Value", "format": fmt},
            ],
        },
    }
    return themed(
        {
            # A fixed height of one row per group (a "step" height would make Vega-Lite drop
            # the fit to the container's width with a warning).
            "height": ROW_HEIGHT * max(1, len(shown)),
            "width": "container",
            "encoding": {"y": y},
            "layer": [
                {
                    "data": {"values": boxes_data},
                    "mark": {"type": "rule", "color": MUTED},
                    "encoding": {
                        "x": {"field": "whisker_low", "type": "quantitative", **x_title},
                        "x2": {"field": "whisker_high"},
                    },
                },
                {
                    "data": {"values": boxes_data},
                    "mark": {"type": "bar", "size": 14, "opacity": 0.85},
                    "encoding": {
                        "x": {"field": "q1", "type": "quantitative"},
                        "x2": {"field": "q3"},
                        "color": colour,
                        "tooltip": [
                            {"field": "group", "title": "Group"},
                            {"field": "q1", "title": "Q1", "format": fmt},
                            {"field": "median", "title": "Median", "format": fmt},
                            {"field": "q3", "title": "Q3", "format": fmt},
                        ],
                    },
                },
                {
                    "data": {"values": boxes_data},
                    "mark": {"type": "tick", "color": INK, "size": 16, "thickness": 2},
                    "encoding": {"x": {"field": "median", "type": "quantitative"}},
                },
            ]
            + ([outliers] if points else []),  # an empty layer has an infinite extent
        }
    )
