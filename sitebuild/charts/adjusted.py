"""Chart of a comparison at equal x: each group's raw mean beside its mean at equal x."""

from __future__ import annotations

from .summary import ROW_HEIGHT, value_format
from .theme import INK, group_colour_scale, themed


def raw_and_adjusted(entry: dict, all_groups: list[str]) -> dict:
    """Return a dot chart: per group, the raw mean (hollow) and the mean at equal x (filled)
    with its confidence interval, on one axis in the measure's units."""
    rows = [g for g in entry["groups"] if g.get("adjusted") is not None]
    values = [
        {
            "group": g["group"],
            "raw": g["mean"],
            "value": g["adjusted"],
            "low": g["ci_low"],
            "high": g["ci_high"],
            "n": g["n"],
        }
        for g in rows
    ]
    shown = [g["group"] for g in rows]
    fmt = value_format(entry["groups"])
    colour = {
        "field": "group",
        "type": "nominal",
        "scale": group_colour_scale(all_groups),
        "legend": None,
    }
    tooltip = [
        {"field": "group", "title": "Group"},
        {"field": "raw", "title": "Raw mean", "format": fmt},
        {"field": "value", "title": f"Mean at equal {entry['x']}"[:60], "format": fmt},
        {"field": "low", "title": "CI low", "format": fmt},
        {"field": "high", "title": "CI high", "format": fmt},
        {"field": "n", "title": "n"},
    ]
    return themed(
        {
            "data": {"values": values},
            "height": ROW_HEIGHT * max(1, len(shown)),
            "width": "container",
            "encoding": {
                "y": {
                    "field": "group",
                    "type": "nominal",
                    "scale": {"domain": shown},
                    "title": None,
                }
            },
            "layer": [
                {
                    "mark": {"type": "rule", "strokeWidth": 2},
                    "encoding": {
                        "x": {
                            "field": "low",
                            "type": "quantitative",
                            "title": entry["measure"],
                            "scale": {"zero": False},
                        },
                        "x2": {"field": "high"},
                        "color": colour,
                        "tooltip": tooltip,
                    },
                },
                {
                    "mark": {"type": "point", "filled": False, "size": 70, "strokeWidth": 1.5},
                    "encoding": {
                        "x": {"field": "raw", "type": "quantitative"},
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
                        "x": {"field": "value", "type": "quantitative"},
                        "color": colour,
                        "tooltip": tooltip,
                    },
                },
            ],
        }
    )
