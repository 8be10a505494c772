"""Charts of group comparisons: a forest of pairwise differences and a matrix of adjusted
p-values. Plain Vega-Lite dicts with inline data under fixed field names; group labels only
ever appear as data values."""

from __future__ import annotations

from ..sections import Chart
from .theme import INK, MUTED, PALETTE, themed

MAX_FOREST_ROWS = 60
MAX_MATRIX_GROUPS = 30

# Verdict colours: from the Okabe–Ito palette; "differs" and "equivalent" far apart in hue.
STATUS_COLOURS = {
    "differs": PALETTE[5],  # vermillion
    "equivalent": PALETTE[2],  # bluish green
    "inconclusive": PALETTE[1],  # orange
    "no clear difference": MUTED,
}
STATUS_SHAPES = {
    "differs": "diamond",
    "equivalent": "square",
    "inconclusive": "triangle-up",
    "no clear difference": "circle",
}
# Adjusted p bands, strongest evidence darkest; our own sequential blues from the palette.
P_BANDS = ("p < 0.001", "p < 0.01", "p < alpha", "not significant")
P_COLOURS = ("#0b4f7c", "#2f7fb8", "#8fc0e3", "#f1f1ee")


def forest_chart(entry: dict, mi: int) -> Chart | None:
    """Return the forest chart of pairwise estimates with their intervals, sorted by size."""
    pairs = [p for p in entry.get("pairs", []) if p.get("estimate") is not None]
    if not pairs:
        return None
    ranked = sorted(pairs, key=lambda p: -abs(p["estimate"]))[:MAX_FOREST_ROWS]
    ranked.sort(key=lambda p: p["estimate"])
    rows = [
        {
            "label": f"{p['a']} − {p['b']}",
            "x": p["estimate"],
            "low": p.get("ci_low"),
            "high": p.get("ci_high"),
            "status": p.get("conclusion", ""),
            "order": i,
        }
        for i, p in enumerate(ranked)
    ]
    est_name = ranked[0].get("estimate_name", "difference")
    y = {
        "field": "label",
        "type": "nominal",
        "sort": {"field": "order", "order": "descending"},
        "title": None,
        "axis": {"labelLimit": 220},
    }
    # Short enough for a half-width chart; the interval level is in the description.
    x_title = f"{est_name} (first minus second)"
    layers: list[dict] = []
    margin = entry.get("margin")
    if margin:
        layers.append(
            {
                "data": {"values": [{"low": -margin, "high": margin}]},
                "mark": {"type": "rect", "color": PALETTE[2], "opacity": 0.15},
                "encoding": {
                    "x": {"field": "low", "type": "quantitative"},
                    "x2": {"field": "high"},
                },
            }
        )
    layers.append(
        {
            "data": {"values": [{"x": 0}]},
            "mark": {"type": "rule", "color": INK, "strokeDash": [4, 3]},
            "encoding": {"x": {"field": "x", "type": "quantitative"}},
        }
    )
    colour = {
        "field": "status",
        "type": "nominal",
        "title": "Verdict",
        "scale": {"domain": list(STATUS_COLOURS), "range": list(STATUS_COLOURS.values())},
        "legend": {"columns": 2},
    }
    layers.append(
        {
            "mark": {"type": "rule", "strokeWidth": 2},
            "encoding": {
                "y": y,
                "x": {"field": "low", "type": "quantitative", "title": x_title},
                "x2": {"field": "high"},
                "color": colour,
            },
        }
    )
    layers.append(
        {
            "mark": {"type": "point", "filled": True, "size": 70},
            "encoding": {
                "y": y,
                "x": {"field": "x", "type": "quantitative"},
                "color": colour,
                # Shape repeats the verdict so it does not rest on colour alone (print, and
                # readers who do not tell vermillion from orange).
                "shape": {
                    "field": "status",
                    "type": "nominal",
                    "title": "Verdict",
                    "scale": {
                        "domain": list(STATUS_SHAPES),
                        "range": list(STATUS_SHAPES.values()),
                    },
                    "legend": {"columns": 2},
                },
                "tooltip": [
                    {"field": "label", "type": "nominal", "title": "Pair"},
                    {"field": "x", "type": "quantitative", "title": "Estimate", "format": ".3g"},
                    {"field": "low", "type": "quantitative", "title": "Low", "format": ".3g"},
                    {"field": "high", "type": "quantitative", "title": "High", "format": ".3g"},
                    {"field": "status", "type": "nominal", "title": "Verdict"},
                ],
            },
        }
    )
    spec = {
        "data": {"values": rows},
        "height": max(60, 22 * len(rows)),
        "width": "container",
        "layer": layers,
    }
    shown = "" if len(ranked) == len(pairs) else f" (the {len(ranked)} largest of {len(pairs)})"
    band = f"; the shaded band is the equivalence margin ±{margin:g}" if margin else ""
    family = entry.get("family") or {}
    if (family.get("size") or 0) > 1 and family.get("adjust") not in (None, "none"):
        band += (
            ". Each interval is for its pair alone, while the verdicts use p-values adjusted "
            f"across the {family['size']} comparisons, so an interval that only just clears zero "
            "can still read 'no clear difference'"
        )
    return Chart(
        id=f"cmp-{mi}-forest",
        title=f"Pairwise differences in {entry['measure']}",
        description=(
            f"Estimated {est_name} for each compared pair{shown}, sorted by size, with "
            f"{entry.get('confidence', 0.95):.0%} intervals; the dashed line marks no "
            f"difference{band}."
        ),
        spec=themed(spec),
        table=f"cmp-{mi}-pairs",
    )


def _band(p: float | None, alpha: float) -> str:
    if p is None:
        return "not significant"
    if p < 0.001 and 0.001 <= alpha:
        return P_BANDS[0]
    if p < 0.01 and 0.01 <= alpha:
        return P_BANDS[1]
    return P_BANDS[2] if p < alpha else P_BANDS[3]


def pvalue_matrix_chart(entry: dict, mi: int) -> Chart | None:
    """Return the matrix of adjusted p-values of all pairs (a cell per pair)."""
    if entry.get("mode") != "all pairs":
        return None
    groups = [g["group"] for g in entry.get("groups", [])]
    if len(groups) < 2 or len(groups) > MAX_MATRIX_GROUPS:
        return None
    alpha = entry.get("alpha", 0.05)
    cells = []
    position = {g: i for i, g in enumerate(groups)}
    for p in entry["pairs"]:
        q = p.get("p_adjusted")
        text = "—" if q is None else ("<.001" if q < 0.001 else f"{q:.2g}")
        # One cell per pair, below the diagonal: the mirror image would only repeat it.
        row, col = sorted((p["a"], p["b"]), key=lambda g: -position.get(g, 0))
        cells.append({"row": row, "col": col, "value": q, "band": _band(q, alpha), "text": text})
    size = max(160, min(560, 34 * len(groups)))
    axis = {"labelLimit": 140}
    spec = {
        "data": {"values": cells},
        "width": size,
        "height": size,
        "encoding": {
            "x": {
                "field": "col",
                "type": "nominal",
                "sort": groups,
                "title": None,
                "axis": {**axis, "labelAngle": -40},
            },
            "y": {"field": "row", "type": "nominal", "sort": groups, "title": None, "axis": axis},
        },
        "layer": [
            {
                "mark": {"type": "rect", "stroke": "#ffffff", "strokeWidth": 1},
                "encoding": {
                    "color": {
                        "field": "band",
                        "type": "ordinal",
                        "title": "Adjusted p",
                        "scale": {"domain": list(P_BANDS), "range": list(P_COLOURS)},
                    },
                    "tooltip": [
                        {"field": "row", "type": "nominal", "title": "Group"},
                        {"field": "col", "type": "nominal", "title": "Against"},
                        {
                            "field": "value",
                            "type": "quantitative",
                            "title": "Adjusted p",
                            "format": ".3g",
                        },
                    ],
                },
            },
            {
                "mark": {"type": "text", "fontSize": 11},
                "encoding": {
                    "text": {"field": "text", "type": "nominal"},
                    "color": {
                        "condition": {
                            "test": "datum.band === 'p < 0.001' || datum.band === 'p < 0.01'",
                            "value": "#ffffff",
                        },
                        "value": INK,
                    },
                },
            },
        ],
    }
    family = entry.get("family") or {}
    return Chart(
        id=f"cmp-{mi}-pmatrix",
        title=f"Adjusted p-values for {entry['measure']}",
        description=(
            f"Each cell is the p-value of one pair after {family.get('adjust_name', 'adjustment')}; "
            f"darker cells are stronger evidence of a difference at alpha = {alpha:g}."
        ),
        spec=themed(spec),
        table=f"cmp-{mi}-pairs",
    )


def measure_charts(entry: dict, mi: int, settings=None) -> list[Chart]:
    """Return the charts for one measure's comparison entry (forest, then p-value matrix)."""
    del settings
    return [c for c in (forest_chart(entry, mi), pvalue_matrix_chart(entry, mi)) if c is not None]
