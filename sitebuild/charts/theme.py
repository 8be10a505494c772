"""Our look: a colour-blind-safe palette, system fonts, quiet axes. Applied to every spec."""

from __future__ import annotations

import copy
import math

# Okabe & Ito (2008), "Color Universal Design": distinguishable with the common colour-vision
# deficiencies. Ordered so the first few are far apart.
PALETTE = (
    "#0072B2",  # blue
    "#E69F00",  # orange
    "#009E73",  # bluish green
    "#CC79A7",  # reddish purple
    "#56B4E9",  # sky blue
    "#D55E00",  # vermillion
    "#F0E442",  # yellow
    "#000000",  # black
)
# Diverging scale for signed values in [-1, 1]: blue (negative) - off-white - orange (positive),
# built from the Okabe–Ito blue and vermillion so it stays readable with deuteranopia.
DIVERGING = ("#0b4f7c", "#5b9fcf", "#f4f1ea", "#e8a06a", "#a8470f")
INK = "#1d2733"
MUTED = "#8a94a0"
GRID = "#e3e6ea"
FONT = "system-ui, -apple-system, 'Segoe UI', 'Helvetica Neue', Arial, sans-serif"

CONFIG = {
    "background": "#ffffff",
    "font": FONT,
    "padding": 8,
    "view": {"stroke": None, "continuousWidth": 520, "continuousHeight": 260},
    "range": {"category": list(PALETTE), "diverging": list(DIVERGING)},
    "axis": {
        "labelColor": INK,
        "titleColor": INK,
        "labelFontSize": 12,
        "titleFontSize": 12,
        "titleFontWeight": 600,
        "gridColor": GRID,
        "domainColor": MUTED,
        "tickColor": MUTED,
        "titlePadding": 8,
    },
    "legend": {
        "labelColor": INK,
        "titleColor": INK,
        "labelFontSize": 12,
        "titleFontSize": 12,
        "orient": "bottom",
        "direction": "horizontal",
        "columns": 4,
    },
    "title": {"color": INK, "fontSize": 14, "fontWeight": 600, "anchor": "start"},
    "header": {"labelColor": INK, "titleColor": INK, "labelFontSize": 12},
    "mark": {"color": PALETTE[0]},
    "bar": {"color": PALETTE[0]},
    "point": {"filled": True, "size": 40},
    "line": {"strokeWidth": 2},
}


def _round_records(records: list) -> list:
    """Round each numeric field of inline records to 1/100,000 of that field's range.

    A chart cannot show more than a few thousand distinct positions, so digits beyond that only
    add bytes; rounding relative to the field's range (not the value) keeps data with a large
    common offset (10,000,000.1 vs 10,000,000.3) distinct.
    """
    if not records or not all(isinstance(r, dict) for r in records):
        return records
    spans: dict[str, tuple[float, float]] = {}
    for record in records:
        for key, value in record.items():
            if isinstance(value, float) and math.isfinite(value):
                low, high = spans.get(key, (value, value))
                spans[key] = (min(low, value), max(high, value))
    decimals = {}
    for key, (low, high) in spans.items():
        # Halves: high - low itself can exceed the largest double.
        scale = 2 * (high / 2 - low / 2) if high != low else max(abs(high), abs(low))
        usable = scale > 0 and math.isfinite(scale)
        decimals[key] = 5 - math.floor(math.log10(scale)) if usable else None
    out = []
    for record in records:
        rounded = dict(record)
        for key, places in decimals.items():
            value = rounded.get(key)
            if places is not None and isinstance(value, float) and math.isfinite(value):
                rounded[key] = round(value, places)
        out.append(rounded)
    return out


def _compact_data(node):
    """Apply :func:`_round_records` to every inline ``data.values`` list in a spec."""
    if isinstance(node, dict):
        named = node.get("datasets")
        if isinstance(named, dict):
            for name, records in named.items():
                if isinstance(records, list):
                    named[name] = _round_records(records)
        data = node.get("data")
        if isinstance(data, dict) and isinstance(data.get("values"), list):
            data["values"] = _round_records(data["values"])
        for key, value in node.items():
            if key != "data":
                _compact_data(value)
    elif isinstance(node, list):
        for item in node:
            _compact_data(item)


# Channels whose quantitative field sets a scale's extent: with no finite value there, Vega
# warns of an infinite extent and the chart's axes come out wrong.
EXTENT_CHANNELS = ("x", "x2", "y", "y2", "color", "size", "opacity")


def _values(node: dict, inherited, named: dict):
    data = node.get("data")
    if isinstance(data, dict) and "values" in data:
        return data["values"]
    if isinstance(data, dict) and "name" in data:
        return named.get(data["name"])
    return inherited


def _layer_drawable(node: dict, values, encoding: dict) -> bool:
    """False when a single view's inline data give no finite value for a scaled field."""
    if not isinstance(values, list):
        return True  # named or external data: not ours to judge
    if not values:
        return False
    for channel in EXTENT_CHANNELS:
        enc = encoding.get(channel)
        if not isinstance(enc, dict) or enc.get("type") != "quantitative" or "field" not in enc:
            continue
        field = enc["field"]
        if not any(
            isinstance(r.get(field), int | float)
            and not isinstance(r.get(field), bool)
            and math.isfinite(r[field])
            for r in values
        ):
            return False
    return True


def _prune(node: dict, inherited=None, encoding: dict | None = None, named=None) -> bool:
    """Drop layers with nothing to draw (see :func:`_layer_drawable`); return whether ``node``
    still draws anything. Filters are not evaluated: a chart leaves out a layer its filter would empty."""
    named = node.get("datasets", {}) if named is None else named
    values = _values(node, inherited, named)
    merged = {**(encoding or {}), **node.get("encoding", {})}
    if "layer" in node:
        node["layer"] = [layer for layer in node["layer"] if _prune(layer, values, merged, named)]
        return bool(node["layer"])
    if "mark" in node:
        return _layer_drawable(node, values, merged)
    return True  # facets and concatenations: drawn as given


def drawable(spec: dict) -> bool:
    """Return whether a themed spec draws anything (its layers were pruned by :func:`themed`)."""
    return bool(spec) and spec.get("usermeta", {}).get("drawable", True)


def themed(spec: dict) -> dict:
    """Return ``spec`` with our config, inline data rounded to chart precision; input unchanged.

    Layers with no finite value for a scaled field are dropped (Vega would warn of an infinite
    extent); when nothing is left, ``usermeta.drawable`` is False and the page says so
    instead of drawing empty axes.
    """
    out = copy.deepcopy(spec)
    if not _prune(out):
        out["usermeta"] = {**out.get("usermeta", {}), "drawable": False}
    _compact_data(out)
    # No schema URL: pages must not name any web address; the embed is told the mode instead.
    out.pop("$schema", None)
    config = copy.deepcopy(CONFIG)
    config.update(out.get("config", {}))
    out["config"] = config
    return out


def group_colour_scale(groups: list[str]) -> dict:
    """Return a Vega-Lite scale that gives each group the same colour on every chart."""
    return {
        "domain": list(groups),
        "range": [PALETTE[i % len(PALETTE)] for i in range(len(groups))],
    }
