"""Our look: a colour-blind-safe palette, system fonts, quiet axes. Applied to every spec."""

from __future__ import annotations

import copy

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


def themed(spec: dict) -> dict:
    """Return ``spec`` with our config and a responsive width; the input is not modified."""
    out = copy.deepcopy(spec)
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
