"""Our look: a colour-blind-safe palette, system fonts, quiet axes. Applied to every spec."""

from __future__ import annotations

import copy
import functools
import math
import os

# Our group palette, in our own order: crimson, teal, ochre, violet, sky, brown, navy, orange.
# Chosen so that every two of them, and each against the neutral reference grey, stay at least
# 10 CIELAB units apart after simulating protanopia, deuteranopia and tritanopia with the
# matrices of Machado, Oliveira & Fernandes (2009) at full severity (tests/test_theme.py checks
# this), and at least 29 apart for normal vision. Each has a contrast of 2.5:1 or more on white.
PALETTE = (
    "#b8323f",  # crimson
    "#0f7c80",  # teal
    "#c98a00",  # ochre
    "#6a3d9a",  # violet
    "#3fa6d6",  # sky
    "#7f3b08",  # dark brown
    "#1f4e79",  # navy
    "#e8743b",  # orange
)
# A reference (baseline) group is drawn in this neutral grey, outside the palette's cycle.
REFERENCE_COLOUR = "#8a8f96"
# Our shape order. Six shapes against eight colours: group i gets colour i mod 8 and shape
# i mod 6, so the first 24 groups all get a different (colour, shape) pair.
SHAPES = ("triangle-down", "diamond", "square", "circle", "triangle-up", "triangle-right")
REFERENCE_SHAPE = "circle"
# Markers are drawn hollow (an outline), large enough for the shape to be told apart.
MARKER_SIZE = 70
MARKER_STROKE = 1.8
# Diverging scale for signed values in [-1, 1]: navy (negative) - off-white - brown (positive).
DIVERGING = ("#0b3a5c", "#5b8fc0", "#f4f1ea", "#d99a5b", "#7f3b08")
INK = "#1d2733"
MUTED = "#8a94a0"
GRID = "#e8ebef"
BAND = "#f3efe6"  # the pale band behind a chart's title in pictures made for slides
FONT = "system-ui, -apple-system, 'Segoe UI', 'Helvetica Neue', Arial, sans-serif"
MIN_WIDTH = 280  # px: a chart never gets narrower than this (a phone is 390 px wide)

CONFIG = {
    "background": "#ffffff",
    "font": FONT,
    "padding": {"left": 4, "right": 12, "top": 6, "bottom": 4},
    "view": {"stroke": None, "continuousWidth": 520, "continuousHeight": 260},
    "range": {"category": list(PALETTE), "diverging": list(DIVERGING)},
    "axis": {
        "labelColor": INK,
        "titleColor": INK,
        "labelFontSize": 12,
        "titleFontSize": 12,
        "titleFontWeight": 600,
        "gridColor": GRID,
        "gridDash": [2, 3],
        "domain": False,
        "tickColor": GRID,
        "tickSize": 4,
        "titlePadding": 10,
    },
    # Numbers on a narrow range ("498.8", "499.0") never run into each other: labels that
    # would touch are left out, and the end labels stay inside the plot.
    "axisQuantitative": {"labelOverlap": "greedy", "labelSeparation": 8, "labelFlush": True},
    # Category axes (group names) carry no grid: the marks sit on their own row.
    "axisBand": {"grid": False, "ticks": False, "labelPadding": 6},
    "axisX": {"titleAnchor": "end", "titleAlign": "right"},
    "axisY": {
        "titleAnchor": "end",
        "titleAngle": 0,
        "titleAlign": "left",
        "titleBaseline": "bottom",
        "titleY": -8,
        "titleX": 0,
    },
    "legend": {
        "labelColor": INK,
        "titleColor": INK,
        "labelFontSize": 12,
        "titleFontSize": 12,
        "titleFontWeight": 600,
        "orient": "top",
        "direction": "horizontal",
        "columns": 4,
        "symbolStrokeWidth": MARKER_STROKE,
        "symbolSize": 90,
        "labelLimit": 160,
        "padding": 2,
        "offset": 24,
    },
    "title": {
        "color": INK,
        "fontSize": 15,
        "fontWeight": 700,
        "anchor": "start",
        "subtitleColor": MUTED,
        "subtitleFontSize": 12,
        "offset": 10,
    },
    "header": {"labelColor": INK, "titleColor": INK, "labelFontSize": 12},
    "mark": {"color": PALETTE[0]},
    "bar": {"color": PALETTE[0]},
    "point": {"filled": False, "size": MARKER_SIZE, "strokeWidth": MARKER_STROKE},
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


def _copy_spec(node):
    """Copy a spec's dicts and lists, except the data records themselves.

    A record list (``values``, a named dataset) is copied as a list but its records are
    shared: nothing here changes a record in place (:func:`_round_records` makes new ones),
    and copying thousands of records key by key costs more than the rest of a chart.
    """
    if isinstance(node, list):
        return [_copy_spec(item) for item in node]
    if not isinstance(node, dict):
        return node
    out = {}
    for key, value in node.items():
        if key == "values" and isinstance(value, list):
            out[key] = list(value)
        elif key == "datasets" and isinstance(value, dict):
            out[key] = {
                name: list(rows) if isinstance(rows, list) else _copy_spec(rows)
                for name, rows in value.items()
            }
        else:
            out[key] = _copy_spec(value)
    return out


def themed(spec: dict) -> dict:
    """Return ``spec`` with our config, inline data rounded to chart precision; input unchanged.

    Layers with no finite value for a scaled field are dropped (Vega would warn of an infinite
    extent); when nothing is left, ``usermeta.drawable`` is False and the page says so
    instead of drawing empty axes.
    """
    out = _copy_spec(spec)
    if not _prune(out):
        out["usermeta"] = {**out.get("usermeta", {}), "drawable": False}
    _compact_data(out)
    # No schema URL: pages must not name any web address; the embed is told the mode instead.
    out.pop("$schema", None)
    config = copy.deepcopy(CONFIG)
    config.update(out.get("config", {}))
    out["config"] = config
    return out


def group_styles(groups: list[str], reference: str | None = None) -> list[tuple[str, str]]:
    """Return each group's (colour, shape), in the order given; the reference group is grey.

    Groups other than the reference take palette colour k mod 8 and shape k mod 6 (k counts
    them in order), so up to 24 groups get 24 different pairs and a group keeps its pair on
    every chart of a page.
    """
    out, k = [], 0
    for g in groups:
        if reference is not None and g == reference:
            out.append((REFERENCE_COLOUR, REFERENCE_SHAPE))
            continue
        out.append((PALETTE[k % len(PALETTE)], SHAPES[k % len(SHAPES)]))
        k += 1
    return out


def group_colour_scale(groups: list[str], reference: str | None = None) -> dict:
    """Return a Vega-Lite scale that gives each group the same colour on every chart."""
    return {"domain": list(groups), "range": [c for c, _ in group_styles(groups, reference)]}


def group_shape_scale(groups: list[str], reference: str | None = None) -> dict:
    """Return a Vega-Lite scale that gives each group the same shape on every chart."""
    return {"domain": list(groups), "range": [s for _, s in group_styles(groups, reference)]}


def group_encoding(
    groups: list[str], title: str | None, reference: str | None = None, legend: bool = True
) -> dict:
    """Return the colour and shape channels of a group field (one shared legend).

    The legend's title is the group column's name, so it reads as the data does.
    """
    shown = {"title": title} if legend else {"legend": None}
    return {
        "color": {
            "field": "group",
            "type": "nominal",
            "scale": group_colour_scale(groups, reference),
            **shown,
        },
        "shape": {
            "field": "group",
            "type": "nominal",
            "scale": group_shape_scale(groups, reference),
            **shown,
        },
    }


# The page-wide highlight: every chart has a variable parameter "focus" holding the label of
# the group the reader picked (or null). The page's script sets it in every chart at once; the
# marks read it only through these tests, so no label is ever written into an expression.
FOCUS = "focus"
DIMMED = 0.15
FEW_OPACITY = 0.6


def focus_opacity(few: bool = False, full: float = 1.0) -> dict:
    """Return an opacity channel: ``full`` for the picked group (or when none is picked),
    faint for the others; with ``few``, rows flagged ``few`` are drawn at :data:`FEW_OPACITY`."""
    conditions = [{"test": f"{FOCUS} != null && datum.group !== {FOCUS}", "value": DIMMED}]
    if few:
        conditions.append({"test": "datum.few", "value": FEW_OPACITY * full})
    return {"condition": conditions, "value": full}


def with_focus(spec: dict, groups: list[str] | None = None) -> dict:
    """Return ``spec`` with the page-wide ``focus`` parameter (and its groups in usermeta)."""
    out = dict(spec)
    out["params"] = [*spec.get("params", []), {"name": FOCUS, "value": None}]
    if groups is not None:
        out["usermeta"] = {**spec.get("usermeta", {}), "groups": list(groups)}
    return out


def view(mark: str, encoding: dict, data: dict | None = None, where: str | None = None, **look):
    """Return one layer of a layered Vega-Lite chart: a ``mark`` of that type with ``look``
    (its properties), ``encoding``, optional ``data`` and an optional filter expression
    ``where`` (rows for which it is false are not drawn).

    Examples
    --------
    >>> view("rule", {"x": {"field": "x", "type": "quantitative"}}, color="#000")
    {'mark': {'type': 'rule', 'color': '#000'}, 'encoding': {'x': {'field': 'x', 'type': 'quantitative'}}}
    """
    layer: dict = {} if data is None else {"data": data}
    layer["mark"] = {"type": mark, **look}
    layer["encoding"] = encoding
    if where is not None:
        layer["transform"] = [{"filter": where}]
    return layer


def channel(field: str, kind: str = "quantitative", **more) -> dict:
    """Return an encoding channel: a ``field`` of type ``kind`` with ``more`` (title, scale,
    axis, format ...). A ``None`` value is kept: it switches that part off in Vega-Lite."""
    return {"field": field, "type": kind, **more}


def tip(field: str, kind: str, title: str, fmt: str | None = None) -> dict:
    """Return one tooltip line: ``title`` and the row's ``field`` (formatted with ``fmt``)."""
    return {"field": field, "type": kind, "title": title, **({"format": fmt} if fmt else {})}


def edge_arrows(arrows: list[dict], encoding: dict, colour: str = INK) -> list:
    """Return point layers marking intervals cut at the axis' edge: a left-pointing
    triangle for rows of ``arrows`` with ``shape`` "triangle-left", a right-pointing one for
    the rest; ``encoding`` adds channels (y, tooltip). One layer per side, and only for a side
    that has rows (an empty layer makes Vega warn)."""
    layers = []
    for shape in ("triangle-left", "triangle-right"):
        rows = [a for a in arrows if a["shape"] == shape]
        if rows:
            layers.append(
                view(
                    "point",
                    {"x": channel("edge"), **encoding},
                    data={"values": rows},
                    filled=True,
                    size=60,
                    shape=shape,
                    color=colour,
                )
            )
    return layers


def dashed_when_few() -> dict:
    """Return a stroke-dash channel: dashed for rows flagged ``few``, solid otherwise."""
    return {"condition": {"test": "datum.few", "value": [3, 3]}, "value": [1, 0]}


# Charts are Vega-Lite dicts made here directly. The tests check every spec made by
# :func:`to_spec` against the Vega-Lite schema (SITEBUILD_CHECK_CHARTS=1, using the schema
# and validator that altair ships); builds skip the check.
CHECK_CHARTS_ENV = "SITEBUILD_CHECK_CHARTS"


@functools.cache
def _vega_lite_validator(top: str):
    import jsonschema
    from altair.vegalite.v6.schema.core import load_schema

    whole = load_schema()
    # Checked against the one top-level kind the spec is (not the schema's root, which tries
    # every kind in turn: ten times slower).
    schema = {"$ref": f"#/definitions/{top}", "definitions": whole["definitions"]}
    return jsonschema.validators.validator_for(whole)(schema)


def check_spec(spec: dict) -> None:
    """Raise ``ValueError`` when ``spec`` is not a valid Vega-Lite specification."""
    import jsonschema

    top = "TopLevelLayerSpec" if "layer" in spec else "TopLevelUnitSpec"
    error = jsonschema.exceptions.best_match(_vega_lite_validator(top).iter_errors(spec))
    if error is not None:
        raise ValueError(f"not a valid Vega-Lite spec: {error.message}")


def to_spec(chart: dict, datasets: dict | None = None, focus: bool = False) -> dict:
    """Return a layered chart as a themed Vega-Lite dict (see :func:`themed`), with
    ``datasets`` (name -> records) as its named data and, with ``focus``, the page-wide
    ``focus`` parameter (the highlighted group's label, or null) at its top level."""
    spec = with_focus(chart) if focus else dict(chart)
    if datasets:
        spec["datasets"] = {**spec.get("datasets", {}), **datasets}
    out = themed(spec)
    if os.environ.get(CHECK_CHARTS_ENV) == "1":
        # Every part of the spec, with the first rows of each dataset: checking thousands of
        # records against the schema's alternatives takes half a second and adds nothing.
        named = out.get("datasets", {})
        check_spec({**out, "datasets": {name: rows[:3] for name, rows in named.items()}})
    return out
