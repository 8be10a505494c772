"""The bottom line's mini chart: each group's centre as a dot with its interval as a line."""

from __future__ import annotations

from ..sections import Chart
from .theme import INK, MUTED, PALETTE, group_colour_scale, themed

MINI_WIDTH = 200
ROW_HEIGHT = 14


def group_dots(
    points, groups: list[str], measure: str, centre: str, confidence: float, chart_id: str
) -> Chart:
    """Return a small dot-and-interval chart of each group's centre, highest at the top.

    ``points`` are :class:`sitebuild.site.bottom_line.GroupPoint` (group, value, low, high);
    ``groups`` is the dataset's full group list, so each group keeps its colour on every chart.
    """
    rows = [
        {"group": p.group, "value": p.value, "low": p.low, "high": p.high, "order": i}
        for i, p in enumerate(points)
        if p.value is not None
    ]
    y = {
        "field": "group",
        "type": "nominal",
        "sort": {"field": "order", "order": "ascending"},
        "title": None,
        "axis": {"labelLimit": 90, "labelFontSize": 10, "ticks": False, "domain": False},
    }
    colour = {
        "field": "group",
        "type": "nominal",
        "scale": group_colour_scale(groups),
        "legend": None,
    }
    layers = [
        {
            "mark": {"type": "rule", "strokeWidth": 2, "color": MUTED},
            "encoding": {
                "y": y,
                "x": {"field": "low", "type": "quantitative"},
                "x2": {"field": "high"},
            },
        },
        {
            "mark": {
                "type": "point",
                "filled": True,
                "size": 45,
                "stroke": INK,
                "strokeWidth": 0.5,
            },
            "encoding": {
                "y": y,
                "x": {
                    "field": "value",
                    "type": "quantitative",
                    "title": None,
                    "scale": {"zero": False},
                    "axis": {"labelFontSize": 10, "tickCount": 4, "grid": False},
                },
                "color": colour,
                "tooltip": [
                    {"field": "group", "type": "nominal", "title": "Group"},
                    {
                        "field": "value",
                        "type": "quantitative",
                        "title": centre.capitalize(),
                        "format": ".4~g",
                    },
                    {"field": "low", "type": "quantitative", "title": "Low", "format": ".4~g"},
                    {"field": "high", "type": "quantitative", "title": "High", "format": ".4~g"},
                ],
            },
        },
    ]
    has_interval = any(r["low"] is not None and r["high"] is not None for r in rows)
    if not has_interval:
        layers = layers[1:]
    spec = {
        "data": {"values": rows},
        "width": MINI_WIDTH,
        "height": max(28, ROW_HEIGHT * len(rows)),
        "layer": layers,
        "config": {"padding": 2, "point": {"color": PALETTE[0]}},
    }
    shown = ", ".join(
        f"{r['group']} {r['value']:.4g}" for r in rows[:3]
    )  # text alternative: the top few
    return Chart(
        id=chart_id,
        title=f"{centre.capitalize()} of {measure} by group",
        description=(
            f"Each group's {centre} of {measure} as a dot with its {confidence:.0%} interval, "
            f"highest first ({shown}{', …' if len(rows) > 3 else ''})."
        ),
        spec=themed(spec),
    )
