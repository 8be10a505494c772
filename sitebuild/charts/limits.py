"""Spec limits and targets drawn on charts of a measure's values."""

from __future__ import annotations

LIMIT_COLOUR = "#b3261e"  # a red that reads on white and in greyscale as dark


def limit_layers(groups: list[str], lower, upper, target) -> list[dict]:
    """Return rule layers for the limits (solid) and target (dashed), one segment per group
    row so they share the group axis of the chart they are added to."""
    layers = []
    marks = [("lower limit", lower, None), ("upper limit", upper, None), ("target", target, [5, 3])]
    for kind, value, dash in marks:
        if value is None:
            continue
        rows = [{"group": g, "limit": value, "kind": kind} for g in groups]
        mark = {"type": "rule", "color": LIMIT_COLOUR, "strokeWidth": 1.5}
        if dash:
            mark["strokeDash"] = dash
        layers.append(
            {
                "data": {"values": rows},
                "mark": mark,
                "encoding": {
                    "x": {"field": "limit", "type": "quantitative"},
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
    layers = limit_layers(drawn, entry["lower"], entry["upper"], entry["target"])
    return {**spec, "layer": spec["layer"] + layers}
