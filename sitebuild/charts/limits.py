"""Spec limits and targets drawn on charts of a measure's values."""

from __future__ import annotations

LIMIT_COLOUR = "#b3261e"  # a red that reads on white and in greyscale as dark


def limit_layers(lower, upper, target) -> list[dict]:
    """Return rule layers for the limits (solid) and target (dashed), each a vertical line
    over the chart's whole height (the inherited group axis is overridden)."""
    layers = []
    marks = [("lower limit", lower, None), ("upper limit", upper, None), ("target", target, [5, 3])]
    for kind, value, dash in marks:
        if value is None:
            continue
        mark = {"type": "rule", "color": LIMIT_COLOUR, "strokeWidth": 1.5}
        if dash:
            mark["strokeDash"] = dash
        layers.append(
            {
                "data": {"values": [{"limit": value, "kind": kind}]},
                "mark": mark,
                "encoding": {
                    "x": {"field": "limit", "type": "quantitative"},
                    "y": {"value": 0},
                    "y2": {"value": "height"},
                    "tooltip": [
                        {"field": "kind", "title": "Line"},
                        {"field": "limit", "title": "Value"},
                    ],
                },
            }
        )
    return layers


def with_limits(spec: dict, entry: dict | None) -> dict:
    """Return a layered chart with one group per row (the box view) with the spec limits and
    target of ``entry`` (a capability entry, or None: the spec comes back unchanged) drawn
    across every group row that has data."""
    if not entry or not spec.get("layer"):
        return spec
    drawn = sorted(
        {row["group"] for layer in spec["layer"] for row in layer.get("data", {}).get("values", [])
         if isinstance(row, dict) and "group" in row}
    )  # fmt: skip
    if not drawn:
        return spec
    layers = limit_layers(entry["lower"], entry["upper"], entry["target"])
    return {**spec, "layer": spec["layer"] + layers}
