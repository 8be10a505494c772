"""Correlation heatmaps and scatter plots with fitted smooths. Specs are plain dicts with
inline data under fixed field names; user text appears only as data values and titles."""

from __future__ import annotations

from .theme import DIVERGING, INK, MUTED, group_colour_scale, themed

NULL_FILL = "#eceff2"


def _label(value: float | None) -> str:
    if value is None:
        return "—"
    return "0.00" if abs(value) < 0.005 else f"{value:.2f}"


def correlation_heatmap(cells: list[dict], columns: list[str], alpha: float) -> dict:
    """Return a heatmap spec of correlation cells (both triangles, no diagonal)."""
    values = []
    for c in cells:
        significant = c["p_adjusted"] is not None and c["p_adjusted"] < alpha
        for a, b in ((c["a"], c["b"]), (c["b"], c["a"])):
            values.append(
                {
                    "a": a,
                    "b": b,
                    "value": c["r"],
                    "label": _label(c["r"]),
                    "sig": bool(significant),
                    "n": c["n"],
                    "p": c["p_adjusted"],
                    "note": c["note"] or "",
                }
            )
    size = max(36 * len(columns), 120)
    x = {"field": "a", "type": "nominal", "sort": list(columns), "title": None}
    y = {"field": "b", "type": "nominal", "sort": list(columns), "title": None}
    tooltip = [
        {"field": "a", "type": "nominal", "title": "Column"},
        {"field": "b", "type": "nominal", "title": "With"},
        {"field": "label", "type": "nominal", "title": "r"},
        {"field": "n", "type": "quantitative", "title": "Pairs"},
        {"field": "p", "type": "quantitative", "title": "p adjusted", "format": ".3g"},
        {"field": "note", "type": "nominal", "title": "Note"},
    ]
    spec = {
        "data": {"values": values},
        "width": size,
        "height": size,
        "encoding": {"x": x, "y": y},
        "layer": [
            {"mark": {"type": "rect", "fill": NULL_FILL}},
            {
                "transform": [{"filter": "isValid(datum.value)"}],
                "mark": {"type": "rect"},
                "encoding": {
                    "color": {
                        "field": "value",
                        "type": "quantitative",
                        "title": "r",
                        "scale": {"domain": [-1, 1], "range": list(DIVERGING)},
                    },
                    "opacity": {"condition": {"test": "datum.sig", "value": 1}, "value": 0.3},
                    "tooltip": tooltip,
                },
            },
            # Not significant after adjustment: a dashed outline over the faded cell, so the
            # difference survives greyscale printing. strokeDash is a mark property for rects
            # (not an encoding channel), hence a layer of its own.
            {
                "transform": [{"filter": "isValid(datum.value) && !datum.sig"}],
                "mark": {
                    "type": "rect",
                    "fillOpacity": 0,
                    "stroke": MUTED,
                    "strokeWidth": 1,
                    "strokeDash": [3, 2],
                },
                "encoding": {"tooltip": tooltip},
            },
            {
                "transform": [{"filter": "datum.sig"}],
                "mark": {"type": "text", "fontSize": 11},
                "encoding": {
                    "text": {"field": "label", "type": "nominal"},
                    "color": {
                        "condition": {"test": "abs(datum.value) > 0.6", "value": "#ffffff"},
                        "value": INK,
                    },
                    "tooltip": tooltip,
                },
            },
            {
                "transform": [{"filter": "!datum.sig"}],
                "mark": {"type": "text", "fontSize": 11, "fontStyle": "italic", "color": MUTED},
                "encoding": {"text": {"field": "label", "type": "nominal"}, "tooltip": tooltip},
            },
        ],
    }
    # The layers filter the one copy of the cells (no duplicated data); a layer whose filter
    # would leave nothing is left out here, as an empty layer makes Vega warn.
    valid = [v for v in values if v["value"] is not None]
    keep = [
        True,
        bool(valid),
        any(not v["sig"] for v in valid),
        any(v["sig"] for v in values),
        any(not v["sig"] for v in values),
    ]
    spec["layer"] = [layer for layer, kept in zip(spec["layer"], keep, strict=True) if kept]
    return themed(spec)


MAX_GROUP_BANDS = 3  # group smooths drawn with their bands; more are drawn as lines only


def scatter_with_smooths(
    scatter: dict, smooths: list[dict], line: dict | None, groups: list[str]
) -> dict:
    """Return a scatter of sampled points by group with LOESS lines, bands and a straight line."""
    colour = {
        "field": "group",
        "type": "nominal",
        "title": "Group",
        "scale": group_colour_scale(groups),
    }
    x = {"field": "x", "type": "quantitative", "title": scatter["x"], "scale": {"zero": False}}
    y_title = scatter["y"]
    curve_groups = {s["group"] for s in smooths if s["group"] is not None}
    # Beyond a few groups, overlapping bands blur into one another: the group smooths are then
    # drawn as lines only (their bands stay in results.json), the all-rows smooth
    # keeps its band.
    group_bands = len(curve_groups) <= MAX_GROUP_BANDS
    group_curves = [
        {"group": s["group"], **(p if group_bands else {"x": p["x"], "fit": p["fit"]})}
        for s in smooths
        if s["group"] is not None
        for p in s["points"]
        if p["fit"] is not None
    ]
    overall = [
        p for s in smooths if s["group"] is None for p in s["points"] if p["fit"] is not None
    ]
    layers: list[dict] = [
        {
            "data": {"name": "points"},
            "mark": {"type": "point", "filled": True, "size": 16, "opacity": 0.45},
            "encoding": {
                # Shape repeats the colour so groups part without colour vision (and in
                # print); one legend, as both scales share the groups and the title.
                "shape": {
                    "field": "group",
                    "type": "nominal",
                    "title": "Group",
                    "scale": {"domain": list(groups)},
                },
                "x": x,
                "y": {
                    "field": "y",
                    "type": "quantitative",
                    "title": y_title,
                    "scale": {"zero": False},
                },
                "color": colour,
                "tooltip": [
                    {"field": "group", "type": "nominal", "title": "Group"},
                    {"field": "x", "type": "quantitative", "title": scatter["x"]},
                    {"field": "y", "type": "quantitative", "title": y_title},
                ],
            },
        }
    ]
    # Named datasets: each curve's rows are shipped once and shared by its band and line layers.
    datasets = {"points": scatter["points"], "curves": group_curves, "overall": overall}
    has_band = {"filter": "isValid(datum.low) && isValid(datum.high)"}
    if group_curves and group_bands:
        layers.append(
            {
                "data": {"name": "curves"},
                "transform": [has_band],
                "mark": {"type": "area", "opacity": 0.12},
                "encoding": {
                    "x": x,
                    "y": {"field": "low", "type": "quantitative"},
                    "y2": {"field": "high"},
                    "color": colour,
                },
            }
        )
    if group_curves:
        layers.append(
            {
                "data": {"name": "curves"},
                "mark": {"type": "line", "strokeWidth": 1.8},
                "encoding": {
                    "x": x,
                    "y": {"field": "fit", "type": "quantitative"},
                    "color": colour,
                    "detail": {"field": "group", "type": "nominal"},
                },
            }
        )
    if overall:
        layers.append(
            {
                "data": {"name": "overall"},
                "transform": [has_band],
                "mark": {"type": "area", "color": INK, "opacity": 0.15},
                "encoding": {
                    "x": x,
                    "y": {"field": "low", "type": "quantitative"},
                    "y2": {"field": "high"},
                },
            }
        )
        # A white casing under the all-rows smooth keeps it apart from the group lines.
        layers.append(
            {
                "data": {"name": "overall"},
                "mark": {"type": "line", "color": "#ffffff", "strokeWidth": 5.5},
                "encoding": {"x": x, "y": {"field": "fit", "type": "quantitative"}},
            }
        )
        layers.append(
            {
                "data": {"name": "overall"},
                "mark": {"type": "line", "color": INK, "strokeWidth": 3},
                "encoding": {
                    "x": x,
                    "y": {"field": "fit", "type": "quantitative"},
                    "tooltip": [
                        {"field": "x", "type": "quantitative", "title": scatter["x"]},
                        {"field": "fit", "type": "quantitative", "title": "smooth, all rows"},
                        {"field": "low", "type": "quantitative", "title": "band low"},
                        {"field": "high", "type": "quantitative", "title": "band high"},
                    ],
                },
            }
        )
    if line and line["slope"] is not None and overall:
        lo, hi = overall[0]["x"], overall[-1]["x"]
        ends = [{"x": v, "fit": line["intercept"] + line["slope"] * v} for v in (lo, hi)]
        layers.append(
            {
                "data": {"values": ends},
                "mark": {"type": "line", "color": MUTED, "strokeDash": [6, 4], "strokeWidth": 1.6},
                "encoding": {"x": x, "y": {"field": "fit", "type": "quantitative"}},
            }
        )
    spec = {"width": "container", "height": 300, "datasets": datasets, "layer": layers}
    return themed(spec)


def with_date_axis(spec: dict, origin_ms: int) -> dict:
    """Return a scatter spec whose x (days since ``origin_ms``) is drawn as a date axis.

    The numbers stay days (smooths and slopes are computed on them); each layer turns them
    into milliseconds since 1970 for Vega-Lite's temporal scale.
    """
    when = {"calculate": f"{int(origin_ms)} + datum.x * 86400000", "as": "when"}
    for layer in spec.get("layer", []):
        encoding = layer.get("encoding", {})
        if "x" not in encoding:
            continue
        layer["transform"] = [when, *layer.get("transform", [])]
        title = encoding["x"].get("title")
        encoding["x"] = {"field": "when", "type": "temporal", "title": title}
        for tip in encoding.get("tooltip", []):
            if tip.get("field") == "x":
                tip.update(field="when", type="temporal", format="%Y-%m-%d %H:%M")
    return spec
