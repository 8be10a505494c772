"""The relationships section: JSON-ready results, adjusted p-values, charts, tables, layout."""

from __future__ import annotations

import json
import math
from pathlib import Path

import jinja2
import jsonschema
import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from sitebuild.ingest import IngestReport, Table
from sitebuild.manifest import DatasetSpec, SiteSettings
from sitebuild.sections import relationships as rel
from sitebuild.site.together import together_sentences

ROOT = Path(__file__).resolve().parents[1]
SCHEMA = json.loads((ROOT / "sitebuild/schema/sections/relationships.json").read_text())
SAFE_FIELDS = {
    "group",
    "x",
    "y",
    "fit",
    "low",
    "high",
    "a",
    "b",
    "value",
    "label",
    "sig",
    "n",
    "p",
    "note",
}
ODD = '<b onmouseover="x">t.emp[0]</b>'  # a hostile column name: HTML, dot and brackets


def _table(columns: dict, codes, groups, measures, x=None) -> Table:
    spec = DatasetSpec(
        name="trial",
        file="trial.csv",
        path=Path("trial.csv"),
        group="site",
        measures=tuple(measures),
        x=x,
    )
    n = len(codes)
    report = IngestReport(
        file="trial.csv",
        sha256="0" * 64,
        rows_read=n,
        rows_used=n,
        rows_dropped=0,
        drop_reasons={},
        missing={},
        unparsed={},
        encoding="utf-8",
        delimiter=",",
    )
    return Table(
        spec=spec,
        groups=tuple(groups),
        codes=np.asarray(codes, dtype=np.int32),
        columns={k: np.asarray(v, dtype=np.float64) for k, v in columns.items()},
        report=report,
    )


def _synthetic(n=600, seed=3):
    rng = np.random.default_rng(seed)
    codes = rng.integers(0, 3, n)
    temp = rng.uniform(5, 35, n)
    columns = {
        "growth": 10 - 0.04 * (temp - 20) ** 2 + rng.normal(0, 0.8, n),
        "yield": 0.3 * temp + rng.normal(0, 2, n),
        "flat": np.full(n, 4.0),
        ODD: temp,
    }
    columns["yield"][::17] = np.nan
    return _table(
        columns, codes, ["north", "south", "<i>east</i>"], ["growth", "yield", "flat"], x=ODD
    )


def _walk_numbers(value):
    if isinstance(value, dict):
        for v in value.values():
            yield from _walk_numbers(v)
    elif isinstance(value, list):
        for v in value:
            yield from _walk_numbers(v)
    elif isinstance(value, float):
        yield value


def test_compute_is_json_ready_and_matches_the_schema_fragment():
    out = rel.compute(_synthetic(), SiteSettings(), np.random.default_rng(0), {})
    text = json.dumps(out, allow_nan=False)  # raises on NaN or Infinity
    assert all(math.isfinite(v) for v in _walk_numbers(json.loads(text)))
    schema = {"type": "object", **SCHEMA}
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.validate(out, schema, cls=jsonschema.Draft202012Validator)
    assert {"correlations", "smooths", "relationships"} <= set(out)


def test_constant_column_and_tiny_group_give_null_with_a_reason():
    out = rel.compute(_synthetic(), SiteSettings(), np.random.default_rng(0), {})
    flat = [c for c in out["correlations"] if "flat" in (c["a"], c["b"])]
    assert flat and all(
        c["r"] is None and c["p"] is None and "same value" in c["note"] for c in flat
    )
    smooth = [s for s in out["smooths"] if s["y"] == "flat"]
    assert smooth and all(s["enp"] is None and s["points"] == [] and s["note"] for s in smooth)
    # A group with two rows: every coefficient there is undefined, with the reason.
    rng = np.random.default_rng(1)
    codes = np.r_[np.zeros(50, int), [1, 1]]
    tiny = _table(
        {"a": rng.normal(size=52), "b": rng.normal(size=52)}, codes, ["big", "small"], ["a", "b"]
    )
    small = [
        c
        for c in rel.compute(tiny, SiteSettings(), rng, {})["correlations"]
        if c["group"] == "small"
    ]
    assert len(small) == 3 and all(c["r"] is None and "fewer than 3" in c["note"] for c in small)


@pytest.mark.parametrize(
    ("ours", "theirs"), [("holm", "holm"), ("bh", "fdr_bh"), ("bonferroni", "bonferroni")]
)
def test_adjusted_p_values_match_statsmodels_multipletests_per_table(ours, theirs):
    settings = SiteSettings(adjust=ours)
    out = rel.compute(_synthetic(), settings, np.random.default_rng(0), {})
    families = {}
    for c in out["correlations"]:
        if c["p"] is not None:
            families.setdefault((c["group"], c["method"]), []).append(c)
    assert len(families) == 4 * 3
    for family in families.values():
        p = [c["p"] for c in family]
        expected = multipletests(p, method=theirs)[1]  # reference library: statsmodels
        # adjust_pvalues rounds to 15 decimal places, hence the absolute 1e-15.
        np.testing.assert_allclose(
            [c["p_adjusted"] for c in family], expected, rtol=1e-12, atol=1e-15
        )


def test_curved_relationship_is_flagged_with_a_sentence_naming_the_correlation():
    out = rel.compute(_synthetic(), SiteSettings(), np.random.default_rng(0), {})
    overall = next(r for r in out["relationships"] if r["group"] is None and r["b"] == "growth")
    assert overall["curved"] and "Pearson's r" in overall["note"]
    straight = next(r for r in out["relationships"] if r["group"] is None and r["b"] == "yield")
    assert not straight["curved"]


def test_reversal_between_pooled_and_within_group_correlations_is_flagged():
    # Simpson's reversal, constructed: inside each group y falls with x, groups shifted up-right.
    rng = np.random.default_rng(5)
    xs, ys, codes = [], [], []
    for g in range(3):
        x = rng.normal(0, 1, 200)
        xs.append(x + 4 * g)
        ys.append(-0.8 * x + 4 * g + rng.normal(0, 0.5, 200))
        codes.append(np.full(200, g))
    t = _table(
        {"dose": np.concatenate(xs), "response": np.concatenate(ys)},
        np.concatenate(codes),
        ["a", "b", "c"],
        ["dose", "response"],
    )
    out = rel.compute(t, SiteSettings(), rng, {})
    assert len(out["reversals"]) == 1
    flag = out["reversals"][0]
    assert flag["pooled_r"] > 0 > flag["within_high"]
    assert "inside every group" in flag["sentence"]


def test_scatter_is_bounded_seeded_and_keeps_every_group():
    rng = np.random.default_rng(2)
    n = 12_000
    codes = np.r_[np.zeros(n - 60, int), np.ones(60, int)]  # one small group
    x = rng.uniform(0, 1, n)
    t = _table({"x": x, "y": x + rng.normal(0, 0.1, n)}, codes, ["large", "small"], ["y"], x="x")
    first = rel.compute(t, SiteSettings(), np.random.default_rng(9), {})["scatter"][0]
    again = rel.compute(t, SiteSettings(), np.random.default_rng(9), {})["scatter"][0]
    assert first["sampled"] and first["n_total"] == n and first["n_shown"] <= rel.SCATTER_LIMIT
    assert len(first["points"]) == first["n_shown"]
    assert first["points"] == again["points"]
    assert sum(p["group"] == "small" for p in first["points"]) == 60


def _fields(node) -> set[str]:
    """Every Vega-Lite field name used anywhere in a spec."""
    found: set[str] = set()
    if isinstance(node, dict):
        if isinstance(node.get("field"), str):
            found.add(node["field"])
        for v in node.values():
            found |= _fields(v)
    elif isinstance(node, list):
        for v in node:
            found |= _fields(v)
    return found


def test_charts_compile_use_safe_fields_and_keep_user_text_as_data():
    import vl_convert

    settings = SiteSettings()
    out = rel.compute(_synthetic(), settings, np.random.default_rng(0), {})
    charts = rel.charts(out, settings)
    ids = [c.id for c in charts]
    assert ids[0] == "rel-heat-all" and "rel-heat-g3" in ids and "rel-scatter-1" in ids
    table_ids = {t.id for t in rel.tables(out, settings)}
    assert {"rel-corr-all", "rel-corr-g1", "rel-curves", "rel-lines"} <= table_ids
    for chart in charts:
        assert chart.table in table_ids
        svg = vl_convert.vegalite_to_svg(chart.spec)
        assert "<svg" in svg and "onmouseover" not in svg.replace("&quot;", '"').split(">")[0]
        fields = _fields(chart.spec)
        assert fields <= SAFE_FIELDS, fields
        for layer in chart.spec.get("layer", []):
            assert len(layer.get("data", {}).get("values", [])) <= rel.SCATTER_LIMIT
        for records in chart.spec.get("datasets", {}).values():
            assert len(records) <= rel.SCATTER_LIMIT * 2  # points, or curves of 100 grid points


def _render(out, settings, charts, tables):
    loader = jinja2.DictLoader(
        {
            "macros.html": (
                '{% macro chart(c) %}<figure data-id="{{ c.id }}"><figcaption>{{ c.description }}'
                "</figcaption></figure>{% endmacro %}"
                '{% macro table(t) %}<table data-id="{{ t.id }}"><caption>{{ t.title }}</caption>'
                "</table>{% endmacro %}"
            ),
            "sections/relationships.html": (
                ROOT / "layouts/sections/relationships.html"
            ).read_text(),
        }
    )
    env = jinja2.Environment(loader=loader, autoescape=True, undefined=jinja2.StrictUndefined)
    env.filters["num"] = lambda v: "—" if v is None else f"{v:.3g}"
    env.filters["pval"] = lambda v: "—" if v is None else ("< 0.001" if v < 0.001 else f"{v:.3f}")
    env.filters["pct"] = lambda v, *digits: f"{100 * v:.0f}%"
    return env.get_template("sections/relationships.html").render(
        ds=out,
        charts={c.id: c for c in charts},
        tables={t.id: t for t in tables},
        site=settings,
        together=together_sentences(out, settings.alpha),
    )


def test_layout_renders_every_chart_and_table_and_escapes_user_text():
    settings = SiteSettings()
    rng = np.random.default_rng(0)
    out = rel.compute(_synthetic(n=7000), settings, rng, {})
    charts, tables = rel.charts(out, settings), rel.tables(out, settings)
    html = _render(out, settings, charts, tables)
    assert html.count('<section class="relationships" id="relationships"') == 1
    for item in [*charts, *tables]:
        assert f'data-id="{item.id}"' in html
    assert "<i>east</i>" not in html and "&lt;i&gt;east&lt;/i&gt;" in html
    assert 'onmouseover="x"' not in html
    assert f"random sample of {rel.SCATTER_LIMIT:,} of the\n      7,000 points" in html  # said
    assert "pointwise" in html and "Holm" in html and "straight line" in html


def test_no_x_means_correlations_only():
    rng = np.random.default_rng(4)
    t = _table(
        {"a": rng.normal(size=80), "b": rng.normal(size=80), "c": rng.normal(size=80)},
        rng.integers(0, 2, 80),
        ["p", "q"],
        ["a", "b", "c"],
    )
    settings = SiteSettings()
    out = rel.compute(t, settings, rng, {})
    assert out["smooths"] == [] and out["scatter"] == [] and out["linear_fits"] == []
    assert len(out["correlations"]) == 3 * 3 * 3
    assert all(r["group"] is None for r in out["relationships"])
    html = _render(out, settings, rel.charts(out, settings), rel.tables(out, settings))
    assert "rel-heat-all" in html and "rel-scatter" not in html


def test_many_groups_draw_curves_and_heatmaps_for_the_largest_only():
    # More groups than DRAWN_LIMIT: per-group smooths and heatmaps for the largest groups only,
    # every group keeps its correlation table, and the page note says so.
    rng = np.random.default_rng(5)
    groups = [f"L{i}" for i in range(12)]
    sizes = [40 + 5 * i for i in range(12)]
    codes = np.repeat(np.arange(12), sizes)
    x = rng.uniform(0, 1, codes.size)
    t = _table({"x": x, "y": x**2 + rng.normal(0, 0.1, codes.size)}, codes, groups, ["y"], x="x")
    out = rel.compute(t, SiteSettings(), np.random.default_rng(1), {})
    largest = sorted(groups, key=lambda g: -sizes[groups.index(g)])[: rel.DRAWN_LIMIT]
    smoothed = {s["group"] for s in out["smooths"]} - {None}
    assert smoothed == set(largest)
    assert set(out["relationship_columns"]["drawn_groups"]) == set(largest)
    assert "drawn for the 8 largest groups" in out["relationship_columns"]["summarised"]
    heatmaps = [c for c in rel.charts(out, SiteSettings()) if c.id.startswith("rel-heat-g")]
    assert len(heatmaps) == rel.DRAWN_LIMIT
    group_tables = [tb for tb in rel.tables(out, SiteSettings()) if tb.id.startswith("rel-corr-g")]
    assert len(group_tables) == 12


def test_wide_tables_keep_kendall_for_all_rows_only():
    # Over WIDE_PAIRS column pairs: within groups only Pearson and Spearman; all rows keep all
    # three, and the values still match scipy (reference) for one pair.
    from scipy import stats

    rng = np.random.default_rng(8)
    n = 300
    codes = np.repeat(np.arange(3), n // 3)
    cols = {f"m{i}": rng.normal(size=n) + 0.3 * i * np.linspace(0, 1, n) for i in range(12)}
    t = _table(cols, codes, ["a", "b", "c"], list(cols))
    out = rel.compute(t, SiteSettings(), np.random.default_rng(1), {})
    methods_within = {c["method"] for c in out["correlations"] if c["group"] is not None}
    methods_all = {c["method"] for c in out["correlations"] if c["group"] is None}
    assert methods_within == {"pearson", "spearman"}
    assert methods_all == {"pearson", "spearman", "kendall"}
    assert "Kendall for all rows" in out["relationship_columns"]["summarised"]
    row = next(
        c
        for c in out["correlations"]
        if c["group"] == "b" and c["method"] == "spearman" and {c["a"], c["b"]} == {"m0", "m5"}
    )
    part = codes == 1
    assert row["r"] == pytest.approx(
        stats.spearmanr(cols["m0"][part], cols["m5"][part])[0], rel=1e-12
    )


def test_a_correlation_whose_interval_and_p_disagree_is_marked_borderline(tmp_path):
    # Kendall's interval (Fieller-Hartley-Pearson SE) and its p-value (tie-corrected normal
    # approximation) are separate approximations; search seeds for a sample where they split.
    from scipy import stats

    import sitebuild

    from conftest import write_project

    for seed in range(200):
        rng = np.random.default_rng(seed)
        x = rng.integers(0, 4, 40).astype(float)
        y = np.round(0.3 * x + rng.normal(0, 1, 40), 0)
        tau = stats.kendalltau(x, y)
        se = (0.437 / (40 - 4)) ** 0.5
        z = np.arctanh(tau.statistic)
        excludes = abs(z) > 1.959963984540054 * se
        if (tau.pvalue < 0.05) != excludes:
            break
    else:
        raise AssertionError("no disagreeing sample in 200 seeds")
    text = "g,x,y\n" + "".join(f"A,{a},{b}\n" for a, b in zip(x, y, strict=True))
    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "T"
        [[datasets]]
        name = "D"
        file = "d.csv"
        group = "g"
        measures = ["y"]
        x = "x"
        """,
        {"d.csv": text},
    )
    out = tmp_path / "site"
    sitebuild.build(root, out=out, quiet=True)
    ds = json.loads((out / "results.json").read_text("utf-8"))["datasets"][0]
    row = next(c for c in ds["correlations"] if c["method"] == "kendall" and c["group"] is None)
    assert row["p"] == pytest.approx(tau.pvalue, rel=1e-9)  # reference: scipy.stats.kendalltau
    assert "borderline" in (row["note"] or "")
