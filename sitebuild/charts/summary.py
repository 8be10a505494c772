"""Charts of per-group summaries: mean intervals, histograms and box views."""

from __future__ import annotations

from .theme import (
    INK,
    MARKER_SIZE,
    MARKER_STROKE,
    MUTED,
    channel,
    dashed_when_few,
    edge_arrows,
    focus_opacity,
    group_colour_scale,
    group_encoding,
    themed,
    tip,
    to_spec,
    view,
    with_focus,
)

ROW_HEIGHT = 26
# Groups with fewer values than this are drawn hollow and faint, and their intervals do not
# set the axis: a 3-value group's interval can be ten times wider than everyone else's
# (common practice: below about 5 values an interval says little).
MIN_DRAWN_N = 5


def _group_colour(all_groups: list[str], reference: str | None = None) -> dict:
    """Colour by group, the same colour for a group on every chart; no legend (axis names it)."""
    return {
        "field": "group",
        "type": "nominal",
        "scale": group_colour_scale(all_groups, reference),
        "legend": None,
    }


def _group_axis(groups: list[str]) -> dict:
    # Ordered by the scale's domain, not a sort list: Vega-Lite writes a sort list into
    # expression code, where a label holding U+2028 stops the chart from drawing.
    return {"field": "group", "type": "nominal", "scale": {"domain": list(groups)}, "title": None}


def value_format(rows: list[dict]) -> str:
    """Return the d3 format for a measure's values in tooltips: the measure's fixed decimals
    (see :func:`sitebuild.stats.findings.measure_decimals`), else 4 significant digits."""
    from ..stats.findings import measure_decimals

    decimals = measure_decimals({"groups": rows})
    return ".4~g" if decimals is None else f",.{decimals}f"


def axis_extent(rows: list[dict], min_n: int = MIN_DRAWN_N) -> tuple[float, float] | None:
    """Return the x range the mean chart draws: every mean, and the intervals of the groups
    with at least ``min_n`` values (5 % padding); None when nothing is finite."""
    points = []
    for r in rows:
        if r.get("mean") is None:
            continue
        points.append(r["mean"])
        if (r.get("n") or 0) >= min_n:
            points.extend(v for v in (r.get("ci_low"), r.get("ci_high")) if v is not None)
    if not points:
        return None
    low, high = min(points), max(points)
    pad = (high - low) * 0.05 or abs(high) * 0.05 or 1.0
    return low - pad, high + pad


def mean_intervals(
    rows: list[dict],
    all_groups: list[str],
    measure: str,
    group_by: str | None = None,
    reference: str | None = None,
) -> dict:
    """Return a dot-and-interval chart: each group's mean with its confidence interval.

    Groups smaller than :data:`MIN_DRAWN_N` are drawn faint with a dashed interval and do not
    set the axis; an interval running past the axis is cut at its edge, where an arrow shows
    that it goes on.
    """
    extent = axis_extent(rows)
    values = []
    for r in rows:
        if r["mean"] is None:
            continue
        low, high = r["ci_low"], r["ci_high"]
        cut_low = extent is not None and low is not None and low < extent[0]
        cut_high = extent is not None and high is not None and high > extent[1]
        values.append(
            {
                "group": r["group"],
                "mean": r["mean"],
                "low": r["ci_low"],
                "high": r["ci_high"],
                # Drawn ends: the interval cut at the axis' edges.
                "draw_low": extent[0] if cut_low else low,
                "draw_high": extent[1] if cut_high else high,
                "n": r["n"],
                "few": bool((r["n"] or 0) < MIN_DRAWN_N),
            }
        )
    arrows = [
        {"group": v["group"], "edge": v[end], "shape": shape, "n": v["n"]}
        for v in values
        for end, shape, cut in (
            ("draw_low", "triangle-left", v["low"] is not None and v["draw_low"] != v["low"]),
            ("draw_high", "triangle-right", v["high"] is not None and v["draw_high"] != v["high"]),
        )
        if cut
    ]
    shown = [r["group"] for r in rows]
    groups = group_encoding(all_groups, group_by, reference, legend=False)
    y = _group_axis(shown)
    fmt = value_format(rows)
    tooltip = [
        tip("group", "nominal", group_by or "Group"),
        tip("mean", "quantitative", f"Mean {measure}", fmt),
        tip("low", "quantitative", "CI low", fmt),
        tip("high", "quantitative", "CI high", fmt),
        tip("n", "quantitative", "n"),
    ]
    x_scale = {"zero": False, "nice": False, **({"domain": list(extent)} if extent else {})}
    colour = dict(groups["color"])
    interval = view(
        "rule",
        {
            "x": channel("draw_low", title=measure, scale=x_scale),
            "x2": {"field": "draw_high"},
            "y": y,
            "color": colour,
            "strokeDash": dashed_when_few(),
            "opacity": focus_opacity(),
            "tooltip": tooltip,
        },
        where="isValid(datum.draw_low) && isValid(datum.draw_high)",
        strokeWidth=2.5,
        clip=True,
    )
    # Filled in the group's colour; a group too small to trust is left hollow.
    mean = view(
        "point",
        {
            "x": channel("mean"),
            "y": y,
            "stroke": dict(groups["color"]),
            "fill": {**groups["color"], "condition": {"test": "datum.few", "value": "#ffffff"}},
            "shape": dict(groups["shape"]),
            "opacity": focus_opacity(few=True),
            "tooltip": tooltip,
        },
        filled=True,
        size=MARKER_SIZE * 1.3,
        strokeWidth=MARKER_STROKE + 0.4,
        clip=True,
    )
    arrows = edge_arrows(
        arrows,
        {
            "y": y,
            "tooltip": [
                tip("group", "nominal", group_by or "Group"),
                tip("n", "quantitative", "n"),
            ],
        },
        MUTED,
    )
    chart = {
        "layer": [interval, mean, *arrows],
        "data": {"name": "means"},
        # A fixed height of one row per group (a "step" height would make Vega-Lite drop
        # the fit to the container's width with a warning).
        "height": ROW_HEIGHT * max(1, len(shown)),
        "width": "container",
        "usermeta": {"measure": measure, "kind": "means", "groups": list(all_groups)},
    }
    return to_spec(chart, {"means": values}, focus=True)


HIST_WIDTH = 800  # px per histogram panel; the page's script narrows it to the box


def histograms(
    dist: dict,
    shown: list[str],
    all_groups: list[str],
    measure: str,
    fmt: str = ".4~g",
    group_by: str | None = None,
    reference: str | None = None,
) -> dict:
    """Return small-multiple histograms on shared bins, one row per group, as shares."""
    edges = dist["edges"]
    values = []
    position = {g: i for i, g in enumerate(shown)}
    for g in dist["groups"]:
        if g["group"] not in position:
            continue
        total = sum(g["counts"]) or 1
        for i, count in enumerate(g["counts"]):
            if count == 0 and i > 0:
                continue  # an empty bin draws nothing (its first bin keeps the group's panel)
            values.append(
                {
                    "group": g["group"],
                    "position": position[g["group"]],
                    "start": edges[i],
                    "end": edges[i + 1],
                    "count": count,
                    "share": count / total,
                }
            )
    return themed(
        with_focus(
            {
                "data": {"values": values},
                "mark": {"type": "rect", "stroke": "#ffffff", "strokeWidth": 0.5},
                # A faceted view cannot take the container's width, so it gets a fixed one that
                # the page's script narrows to the box it is drawn in (usermeta.fit_width).
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
                        "title": None,  # it would repeat over every panel; the description says "share"
                        "axis": {"format": "~%", "tickCount": 2},
                    },
                    "row": {
                        "field": "group",
                        "type": "nominal",
                        # By each group's position (a sort list would become expression code).
                        "sort": {"field": "position", "op": "min"},
                        "title": None,
                        # Names above each panel, so the panels keep the width on a phone.
                        "header": {
                            "labelAngle": 0,
                            "labelAlign": "left",
                            "labelAnchor": "start",
                            "labelOrient": "top",
                            "labelLimit": 320,
                            "labelPadding": 2,
                            "labelFontWeight": 600,
                        },
                    },
                    "color": _group_colour(all_groups, reference),
                    "opacity": focus_opacity(),
                    "tooltip": [
                        {"field": "group", "title": group_by or "Group"},
                        {"field": "start", "title": "From", "format": fmt},
                        {"field": "end", "title": "To", "format": fmt},
                        {"field": "count", "title": "Count"},
                        {"field": "share", "title": "Share", "format": ".1%"},
                    ],
                },
                "resolve": {"scale": {"y": "independent"}},
                "usermeta": {"measure": measure, "kind": "histograms", "fit_width": True},
            },
            all_groups,
        )
    )


def boxes(
    dist: dict,
    shown: list[str],
    all_groups: list[str],
    measure: str,
    fmt: str = ".4~g",
    group_by: str | None = None,
    reference: str | None = None,
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
    colour = _group_colour(all_groups, reference)
    y = _group_axis(shown)
    x_title = {"title": measure, "scale": {"zero": False}}
    outliers = {
        "data": {"values": points},
        "mark": {"type": "point", "size": 30, "filled": False, "strokeWidth": 1.2},
        "encoding": {
            "x": {"field": "value", "type": "quantitative"},
            "color": colour,
            "opacity": focus_opacity(full=0.8),
            "tooltip": [
                {"field": "group", "title": group_by or "Group"},
                {"field": "value", "title": "Value", "format": fmt},
            ],
        },
    }
    return themed(
        with_focus(
            {
                # A fixed height of one row per group (a "step" height would make Vega-Lite drop
                # the fit to the container's width with a warning).
                "height": ROW_HEIGHT * max(1, len(shown)),
                "width": "container",
                "encoding": {"y": y},
                "usermeta": {"measure": measure, "kind": "boxes"},
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
                        "mark": {"type": "bar", "size": 14},
                        "encoding": {
                            "x": {"field": "q1", "type": "quantitative"},
                            "x2": {"field": "q3"},
                            "color": colour,
                            "opacity": focus_opacity(full=0.85),
                            "tooltip": [
                                {"field": "group", "title": group_by or "Group"},
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
            },
            all_groups,
        )
    )
