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
