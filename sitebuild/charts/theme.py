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


def themed(spec: dict) -> dict:
    """Return ``spec`` with our config, inline data rounded to chart precision; input unchanged."""
    out = copy.deepcopy(spec)
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
