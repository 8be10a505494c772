"""The charts of the practitioner sections draw in Chromium from file://, network refused."""

from __future__ import annotations

import json

import pytest
from test_browser import assert_clean

from browser import visit_pages

pytestmark = pytest.mark.browser


def test_equal_x_and_spec_limit_charts_draw(browser, example_site):
    results = json.loads((example_site / "results.json").read_text(encoding="utf-8"))
    pages = {ds["name"]: example_site / f"{ds['slug']}.html" for ds in results["datasets"]}
    hydro = pages["Hydroponic growing trial"]
    picking = pages["Warehouse order picking"]
    visits = visit_pages(browser, [hydro.as_uri(), picking.as_uri()])
    assert_clean(visits)
    hydro_visit, picking_visit = visits
    # Raw and adjusted means, one chart per measure, on both pages.
    assert {"eqx-0-means", "eqx-1-means", "eqx-2-means"} <= set(hydro_visit.drawn_ids)
    assert {"eqx-0-means", "eqx-1-means"} <= set(picking_visit.drawn_ids)
    # The box view of the measure with limits draws, and its spec carries the limit lines.
    assert "sum-2-box" in hydro_visit.drawn_ids
    text = hydro.read_text(encoding="utf-8")
    assert '"kind":"lower limit"' in text and '"kind":"target"' in text


DEGENERATE = {
    "one group": "g,v,x\nA,1,1\nA,2,2\nA,3,3\n",
    "one row each": "g,v,x\nA,1,1\nB,2,2\nC,3,3\n",
    "x missing": "g,v,x\nA,1,\nA,2,\nB,3,\nB,4,\n",
    "constant v": "g,v,x\nA,1,1\nA,1,2\nB,1,3\nB,1,4\nB,1,5\n",
    "no overlap in x": "g,v,x\nA,1,1\nA,2,2\nA,2.5,3\nB,10,10\nB,11,11\nB,12.5,12\n",
}


def test_awkward_data_with_x_limits_and_time_draws_without_warnings(browser, tmp_path):
    import sitebuild

    from conftest import write_project

    blocks, files = [], {}
    for i, (name, text) in enumerate(DEGENERATE.items()):
        files[f"data/d{i}.csv"] = text
        blocks.append(
            f'[[datasets]]\nname = "{name}"\nfile = "data/d{i}.csv"\ngroup = "g"\n'
            'measures = ["v"]\nx = "x"\nlimits = { v = [0, 10] }\ntarget = { v = 5 }\n'
            'time_unit = "day"\nbetter = { v = "lower" }\nlabels = { A = "alpha <b>" }\n'
        )
    root = write_project(tmp_path / "p", "\n".join(blocks), files)
    out = tmp_path / "site"
    sitebuild.build(root, out=out)
    visits = visit_pages(browser, [p.as_uri() for p in sorted(out.glob("*.html"))])
    assert_clean(visits)
    page = (out / "one-group.html").read_text(encoding="utf-8")
    assert "alpha &lt;b&gt;" in page and "alpha <b>" not in page  # a label stays text
