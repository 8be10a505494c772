"""Correlation heatmaps and scatter plots with fitted smooths. Specs are plain dicts with
inline data under fixed field names; user text appears only as data values and titles."""

from __future__ import annotations

import numpy as np

from .theme import (
    DIVERGING,
    INK,
    MARKER_SIZE,
    MARKER_STROKE,
    MUTED,
    channel,
    focus_opacity,
    group_encoding,
    themed,
    tip,
    to_spec,
    view,
)

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
    # Ordered by the scales' domains: a sort list would be written into expression code.
    x = {"field": "a", "type": "nominal", "scale": {"domain": list(columns)}, "title": None}
    y = {"field": "b", "type": "nominal", "scale": {"domain": list(columns)}, "title": None}
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


JITTER_SEED = 16  # fixed: the same data give the same picture on every build
JITTER_WIDTH = 0.3  # share of the step between whole-number x values (either side)


def jittered(points: list[dict]) -> tuple[list[dict], bool]:
    """Return (points, whether x was jittered): a whole-number x with few distinct values
    (order lines, counts) piles points into stripes, so each point is moved sideways by a
    seeded uniform amount of at most ±0.3 of a step; ``x_value`` keeps the true value."""
    xs = [p["x"] for p in points if isinstance(p.get("x"), int | float)]
    whole = bool(xs) and all(float(v).is_integer() for v in xs)
    if not whole or len(set(xs)) > 60 or len(set(xs)) == len(xs):
        return points, False
    rng = np.random.default_rng(JITTER_SEED)
    shifts = rng.uniform(-JITTER_WIDTH, JITTER_WIDTH, size=len(points))
    out = []
    for p, d in zip(points, shifts, strict=True):
        x = p.get("x")
        moved = x + float(d) if isinstance(x, int | float) else x
        out.append({**p, "x": moved, "x_value": x})
    return out, True


def scatter_with_smooths(
    scatter: dict,
    smooths: list[dict],
    line: dict | None,
    groups: list[str],
    group_by: str | None = None,
    reference: str | None = None,
) -> dict:
    """Return a scatter of sampled points by group with LOESS lines, bands and a straight line.

    Groups are told apart by colour and shape (hollow markers, one legend titled with the group
    column's name); a whole-number x is jittered (see :func:`jittered`).
    """
    look = group_encoding(groups, group_by or "Group", reference)
    colour = look["color"]
    points, jitter = jittered(scatter["points"])
    x = channel(
        "x",
        title=scatter["x"],
        scale={"zero": False},
        # Jittered whole numbers keep whole-number ticks ("1, 2", not "1.0, 2.0").
        **({"axis": {"tickMinStep": 1, "format": "d"}} if jitter else {}),
    )
    y_title = scatter["y"]
    curve_groups = {s["group"] for s in smooths if s["group"] is not None}
    # Beyond a few groups, overlapping bands blur into one another: the group smooths are then
    # drawn as lines only (their bands stay in results.json), the all-rows smooth
    # keeps its band.
    group_bands = len(curve_groups) <= MAX_GROUP_BANDS
    # Group curves are drawn through every other grid point (and the last): about 50 points
    # across the chart are still smooth lines, and the page ships half the rows.
    group_curves = [
        {"group": s["group"], **(p if group_bands else {"x": p["x"], "fit": p["fit"]})}
        for s in smooths
        if s["group"] is not None
        for i, p in enumerate(s["points"])
        if p["fit"] is not None and (i % 2 == 0 or i == len(s["points"]) - 1)
    ]
    overall = [
        p for s in smooths if s["group"] is None for p in s["points"] if p["fit"] is not None
    ]
    fit = channel("fit")
    layers = [
        view(
            "point",
            {
                # Shape repeats the colour so groups part without colour vision (and in
                # print); one legend, as both scales share the groups and the title.
                "shape": look["shape"],
                "x": x,
                "y": channel("y", title=y_title, scale={"zero": False}),
                "color": colour,
                "opacity": focus_opacity(full=0.8),
                "tooltip": [
                    tip("group", "nominal", group_by or "Group"),
                    tip("x_value" if jitter else "x", "quantitative", scatter["x"]),
                    tip("y", "quantitative", y_title),
                ],
            },
            data={"name": "points"},
            filled=False,
            size=MARKER_SIZE,
            strokeWidth=MARKER_STROKE,
        )
    ]
    # Named datasets: each curve's rows are shipped once and shared by its band and line layers.
    datasets = {"points": points, "curves": group_curves, "overall": overall}
    has_band = "isValid(datum.low) && isValid(datum.high)"
    band = {"y": channel("low"), "y2": {"field": "high"}}
    if group_curves and group_bands:
        layers.append(
            view(
                "area",
                {"x": x, "color": colour, "opacity": focus_opacity(full=0.12), **band},
                data={"name": "curves"},
                where=has_band,
            )
        )
    if group_curves:
        layers.append(
            view(
                "line",
                {
                    "x": x,
                    "y": fit,
                    "color": colour,
                    "detail": channel("group", "nominal"),
                    "opacity": focus_opacity(),
                },
                data={"name": "curves"},
                strokeWidth=2.2,
            )
        )
    if overall:
        overall_data = {"name": "overall"}
        layers.append(
            view(
                "area", {"x": x, **band}, data=overall_data, where=has_band, color=INK, opacity=0.15
            )
        )
        # A white casing under the all-rows smooth keeps it apart from the group lines.
        layers.append(
            view("line", {"x": x, "y": fit}, data=overall_data, color="#ffffff", strokeWidth=5.5)
        )
        layers.append(
            view(
                "line",
                {
                    "x": x,
                    "y": fit,
                    "tooltip": [
                        tip("x", "quantitative", scatter["x"]),
                        tip("fit", "quantitative", "smooth, all rows"),
                        tip("low", "quantitative", "band low"),
                        tip("high", "quantitative", "band high"),
                    ],
                },
                data=overall_data,
                color=INK,
                strokeWidth=3,
            )
        )
    if line and line["slope"] is not None and overall:
        lo, hi = overall[0]["x"], overall[-1]["x"]
        ends = [{"x": v, "fit": line["intercept"] + line["slope"] * v} for v in (lo, hi)]
        layers.append(
            view(
                "line",
                {"x": x, "y": fit},
                data={"values": ends},
                color=MUTED,
                strokeDash=[6, 4],
                strokeWidth=1.6,
            )
        )
    chart = {
        "layer": layers,
        "width": "container",
        "height": 300,
        "usermeta": {"measure": y_title, "kind": "scatter", "groups": list(groups)},
    }
    return to_spec(chart, datasets, focus=True)


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
        for line in encoding.get("tooltip", []):
            if line.get("field") == "x":
                line.update(field="when", type="temporal", format="%Y-%m-%d %H:%M")
    return spec
