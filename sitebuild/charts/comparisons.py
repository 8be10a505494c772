"""Charts of group comparisons: a forest of pairwise differences and a matrix of adjusted
p-values. Plain Vega-Lite dicts with inline data under fixed field names; group labels only
ever appear as data values."""

from __future__ import annotations

import math

from ..sections import Chart
from .summary import MIN_DRAWN_N
from .theme import (
    DIMMED,
    FOCUS,
    INK,
    PALETTE,
    REFERENCE_COLOUR,
    channel,
    dashed_when_few,
    edge_arrows,
    themed,
    tip,
    to_spec,
    view,
)

MAX_FOREST_ROWS = 60
MAX_MATRIX_GROUPS = 30

# Verdicts: colour and shape both differ, so they part in greyscale print and for readers who
# do not tell two hues apart; "differs" is the strong crimson, "equivalent" the teal.
STATUS_COLOURS = {
    "differs": PALETTE[0],  # crimson
    "equivalent": PALETTE[1],  # teal
    "inconclusive": PALETTE[2],  # ochre
    "no clear difference": REFERENCE_COLOUR,  # neutral grey
}
STATUS_SHAPES = {
    "differs": "diamond",
    "equivalent": "square",
    "inconclusive": "triangle-down",
    "no clear difference": "circle",
}
# Adjusted p bands, strongest evidence darkest; our own sequential blues from the palette.
P_BANDS = ("p < 0.001", "p < 0.01", "p < alpha", "not significant")
P_COLOURS = ("#0b4f7c", "#2f7fb8", "#8fc0e3", "#f1f1ee")


def _level(p: float, q: float, alpha: float) -> float:
    """The per-pair level at which this pair's unadjusted p is judged: alpha * p / q.

    The verdict is "adjusted p below alpha", and q < alpha exactly when p < alpha * p / q, so
    an interval at this level clears zero exactly when the verdict is "differs". For
    Bonferroni it is alpha / m; for Holm and Benjamini–Hochberg, the step's level.
    """
    if q <= 0 or p <= 0:
        return alpha
    return min(alpha * p / q, alpha) if q >= p else alpha


def decision_interval(pair: dict, alpha: float, confidence: float, welch: bool):
    """Return the (low, high) interval of a pair's estimate that agrees with its verdict.

    Notes
    -----
    Welch lead test: the pair's interval is rebuilt at the multiplicity-adjusted level
    ``a* = alpha * p / p_adjusted`` from its own standard error and Welch df (recovered from
    the unadjusted interval), ``D ± t(1 − a*/2, df)·se``; it clears zero exactly when
    ``p < a*``, i.e. when the adjusted p is below alpha. Rank lead test: a test-based interval
    (Miettinen 1976), ``se = |D| / z(1 − p/2)``, ``D ± z(1 − a*/2)·se``, which clears zero by
    the same rule; when p is 1 or the shift is 0 the given interval is widened by
    ``z(1 − a*/2) / z(1 − (1 − confidence)/2)``. None when a number is missing.

    References
    ----------
    Miettinen, O. S. (1976). Estimability and estimation in case-referent studies.
    Am. J. Epidemiol. 103(2), 226–235 (test-based confidence limits).
    Holm, S. (1979). A simple sequentially rejective multiple test procedure.
    Scand. J. Statist. 6(2), 65–70.

    Examples
    --------
    >>> pair = {"estimate": 2.0, "ci_low": 0.5, "ci_high": 3.5, "p": 0.01, "p_adjusted": 0.06,
    ...         "welch_df": 30.0}
    >>> low, high = decision_interval(pair, 0.05, 0.95, welch=True)
    >>> low < 0 < high  # adjusted p 0.06 > 0.05: the interval reaches zero
    True
    """
    from scipy import stats

    e, lo, hi = pair.get("estimate"), pair.get("ci_low"), pair.get("ci_high")
    p, q = pair.get("p"), pair.get("p_adjusted")
    if None in (e, lo, hi, p, q) or not all(map(math.isfinite, (e, lo, hi))):
        return None
    level = _level(p, q, alpha)
    df = pair.get("welch_df")
    if welch and df is not None and df > 0 and hi > lo:
        se = (hi - lo) / (2 * stats.t.ppf(1 - (1 - confidence) / 2, df))
        half = float(stats.t.ppf(1 - level / 2, df) * se)
        return e - half, e + half
    z_p = stats.norm.isf(p / 2) if 0 < p < 1 else None
    if z_p and e != 0 and math.isfinite(z_p):
        half = float(stats.norm.isf(level / 2) * abs(e) / z_p)
        return e - half, e + half
    k = float(stats.norm.isf(level / 2) / stats.norm.isf((1 - confidence) / 2))
    return e - k * (e - lo), e + k * (hi - e)


def equivalence_interval(pair: dict, alpha: float, confidence: float):
    """Return the 1 − 2a* interval of the mean difference that agrees with the equivalence
    verdict (two one-sided Welch tests at the adjusted level a* = alpha * p / p_adjusted):
    it lies inside ±margin exactly when the adjusted TOST p is below alpha. None when a
    number is missing.

    References
    ----------
    Schuirmann, D. J. (1987). J. Pharmacokinet. Biopharm. 15(6), 657–680 (TOST and the
    1 − 2α interval).

    Examples
    --------
    >>> pair = {"mean_difference": 0.2, "mean_ci_low": -0.8, "mean_ci_high": 1.2,
    ...         "welch_df": 40.0, "tost_p": 0.01, "tost_p_adjusted": 0.01}
    >>> low, high = equivalence_interval(pair, 0.05, 0.95)
    >>> high - low < 2.0  # a 90 % interval: narrower than the 95 % one
    True
    """
    from scipy import stats

    d, lo, hi = pair.get("mean_difference"), pair.get("mean_ci_low"), pair.get("mean_ci_high")
    p, q, df = pair.get("tost_p"), pair.get("tost_p_adjusted"), pair.get("welch_df")
    if None in (d, lo, hi, p, q, df) or not df > 0 or not hi > lo:
        return None
    level = _level(p, q, alpha)
    se = (hi - lo) / (2 * stats.t.ppf(1 - (1 - confidence) / 2, df))
    half = float(stats.t.ppf(1 - level, df) * se)
    return d - half, d + half


def forest_chart(entry: dict, mi: int) -> Chart | None:
    """Return the forest chart of pairwise estimates with intervals that agree with the
    verdicts (see :func:`decision_interval`), sorted by size."""
    pairs = [p for p in entry.get("pairs", []) if p.get("estimate") is not None]
    if not pairs:
        return None
    ranked = sorted(pairs, key=lambda p: -abs(p["estimate"]))[:MAX_FOREST_ROWS]
    ranked.sort(key=lambda p: p["estimate"])
    alpha = entry.get("alpha", 0.05)
    confidence = entry.get("confidence", 0.95)
    welch = entry.get("centre", "mean") == "mean"
    margin = entry.get("margin")
    rows = []
    for i, p in enumerate(ranked):
        band = decision_interval(p, alpha, confidence, welch)
        eq = equivalence_interval(p, alpha, confidence) if margin else None
        rows.append(
            {
                "label": f"{p['a']} − {p['b']}",
                "a": p["a"],
                "b": p["b"],
                "x": p["estimate"],
                "low": band[0] if band else None,
                "high": band[1] if band else None,
                "eq_low": eq[0] if eq else None,
                "eq_high": eq[1] if eq else None,
                "q": p.get("p_adjusted"),
                "n_a": p.get("n_a"),
                "n_b": p.get("n_b"),
                "status": p.get("conclusion", ""),
                "order": i,
            }
        )
    # Pairs with a group too small to trust do not set the axis (their interval can be ten
    # times wider than the rest); their intervals are cut at its edge, marked by an arrow.
    for r in rows:
        r["few"] = bool(min(r["n_a"] or 0, r["n_b"] or 0) < MIN_DRAWN_N)
    span = [0.0, *([-margin, margin] if margin else [])]
    for r in rows:
        span.append(r["x"])
        if not r["few"]:
            span.extend(
                v for v in (r["low"], r["high"], r["eq_low"], r["eq_high"]) if v is not None
            )
    low_edge, high_edge = min(span), max(span)
    pad = (high_edge - low_edge) * 0.05 or 1.0
    low_edge, high_edge = low_edge - pad, high_edge + pad
    arrows = []
    for r in rows:
        r["draw_low"] = None if r["low"] is None else max(r["low"], low_edge)
        r["draw_high"] = None if r["high"] is None else min(r["high"], high_edge)
        for key, edge, shape in (
            ("low", low_edge, "triangle-left"),
            ("high", high_edge, "triangle-right"),
        ):
            value = r[key]
            if value is not None and (value < edge if key == "low" else value > edge):
                arrows.append(
                    {"label": r["label"], "order": r["order"], "edge": edge, "shape": shape}
                )
        for key in ("eq_low", "eq_high"):
            if r[key] is not None:
                r[key] = min(max(r[key], low_edge), high_edge)
    est_name = ranked[0].get("estimate_name", "difference")
    measure = entry["measure"]
    y = channel(
        "label",
        "nominal",
        sort={"field": "order", "order": "descending"},
        title=None,
        axis={"labelLimit": 220},
    )
    # The measure's name carries its unit ("leaf mass (g)"); short enough for a half-width chart.
    x_title = f"{est_name} in {measure}, first minus second"
    occurring = [s for s in STATUS_COLOURS if any(r["status"] == s for r in rows)]

    def picked(full: float) -> dict:
        # Dim the pairs that do not involve the picked group.
        test = f"{FOCUS} != null && datum.a !== {FOCUS} && datum.b !== {FOCUS}"
        return {"condition": {"test": test, "value": DIMMED}, "value": full}

    colour = channel(
        "status",
        "nominal",
        title="Verdict",
        scale={"domain": occurring, "range": [STATUS_COLOURS[s] for s in occurring]},
    )
    layers = []
    if margin:
        layers.append(
            view(
                "rect",
                {"x": channel("low"), "x2": {"field": "high"}},
                data={"values": [{"low": -margin, "high": margin}]},
                color=PALETTE[1],
                opacity=0.12,
            )
        )
    layers.append(
        view("rule", {"x": channel("x")}, data={"values": [{"x": 0}]}, color=INK, strokeDash=[4, 3])
    )
    if margin and any(r["eq_low"] is not None for r in rows):
        layers.append(
            view(
                "bar",
                {
                    "y": y,
                    "x": channel("eq_low"),
                    "x2": {"field": "eq_high"},
                    "opacity": picked(0.35),
                },
                where="isValid(datum.eq_low) && isValid(datum.eq_high)",
                size=9,
                color=PALETTE[1],
            )
        )
    layers.append(
        view(
            "rule",
            {
                "y": y,
                "x": channel(
                    "draw_low",
                    title=x_title,
                    scale={"domain": [low_edge, high_edge], "nice": False, "zero": False},
                ),
                "x2": {"field": "draw_high"},
                "strokeDash": dashed_when_few(),
                "color": colour,
                "opacity": picked(1),
            },
            where="isValid(datum.draw_low) && isValid(datum.draw_high)",
            strokeWidth=2.5,
        )
    )
    fmt = ".4~g"
    layers.append(
        view(
            "point",
            {
                "y": y,
                "x": channel("x"),
                "color": colour,
                "shape": channel(
                    "status",
                    "nominal",
                    title="Verdict",
                    scale={"domain": occurring, "range": [STATUS_SHAPES[s] for s in occurring]},
                ),
                "opacity": picked(1),
                "tooltip": [
                    tip("label", "nominal", "Pair"),
                    tip("x", "quantitative", f"{est_name} ({measure})", fmt),
                    tip("low", "quantitative", "Interval low", fmt),
                    tip("high", "quantitative", "Interval high", fmt),
                    tip("q", "quantitative", "Adjusted p", ".3g"),
                    tip("n_a", "quantitative", "n (first)"),
                    tip("n_b", "quantitative", "n (second)"),
                    tip("status", "nominal", "Verdict"),
                ],
            },
            filled=True,
            size=90,
            stroke="#ffffff",
            strokeWidth=1,
        )
    )
    layers.extend(edge_arrows(arrows, {"y": y}))
    groups = sorted({r["a"] for r in rows} | {r["b"] for r in rows})
    chart = {
        "layer": layers,
        "data": {"name": "pairs"},
        "height": max(60, 22 * len(rows)),
        "width": "container",
        "usermeta": {"measure": measure, "kind": "forest", "groups": groups},
    }
    shown = "" if len(ranked) == len(pairs) else f" (the {len(ranked)} largest of {len(pairs)})"
    family = entry.get("family") or {}
    adjusted = (family.get("size") or 0) > 1 and family.get("adjust") not in (None, "none")
    if adjusted:
        what = (
            f"intervals widened for the {family['size']} comparisons to the level of their "
            f"{family.get('adjust_name', 'adjusted')} p-values, so an interval clears zero "
            "exactly when its verdict is 'differs'"
        )
    else:
        what = f"{confidence:.0%} intervals, which clear zero exactly when the verdict is 'differs'"
    band = ""
    if margin:
        band = (
            f"; the shaded band is the equivalence margin ±{margin:g}, and the pale bar on each "
            "row is the difference in means' 1 − 2α interval at the adjusted level, which lies "
            "inside the band exactly when the verdict is 'equivalent'"
        )
    return Chart(
        id=f"cmp-{mi}-forest",
        title=f"Pairwise differences in {measure}",
        description=(
            f"Estimated {est_name} for each compared pair{shown}, sorted by size, with "
            f"{what}; the dashed line marks no difference{band}."
        ),
        spec=to_spec(chart, {"pairs": rows}, focus=True),
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
                # Order by the scale's domain, not a sort list: Vega-Lite writes a sort list
                # into expression code, where a label with U+2028 breaks the chart.
                "scale": {"domain": groups},
                "title": None,
                "axis": {**axis, "labelAngle": -40},
            },
            "y": {
                "field": "row",
                "type": "nominal",
                "scale": {"domain": groups},
                "title": None,
                "axis": axis,
            },
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
