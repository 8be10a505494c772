"""A date column as x, end to end: days since the first date in results.json (slopes per
day, checked against numpy), a date axis drawn in headless Chromium from file://, and a page
whose name is Cyrillic linked from the index."""

from __future__ import annotations

import datetime as dt
import json
import urllib.parse

import numpy as np
import pytest

import sitebuild

from conftest import write_project

SEED = 1303


def delivery_rows():
    """Invented depot rounds: (depot, date, delay) with a known drift of 0.2 min per day."""
    rng = np.random.default_rng(SEED)
    start = dt.date(2026, 4, 1)
    rows = []
    for depot in ("Hafen", "Ring", "Altstadt"):
        for _ in range(30):
            day = int(rng.integers(0, 90))
            delay = 10 + 0.2 * day + float(rng.normal(0, 2))
            rows.append((depot, start + dt.timedelta(days=day), round(delay, 2)))
    return rows


@pytest.fixture(scope="module")
def date_site(tmp_path_factory):
    root = tmp_path_factory.mktemp("dates") / "p"
    rows = delivery_rows()
    # dd/mm/yyyy as a spreadsheet program in a European locale writes it.
    text = "depot;date;delay\n" + "".join(
        f"{g};{d:%d/%m/%Y};{str(v).replace('.', ',')}\n" for g, d, v in rows
    )
    write_project(
        root,
        """
        [site]
        title = "Depots"
        [[datasets]]
        name = "Доставка по складам"
        file = "data/d.csv"
        group = "depot"
        measures = ["delay"]
        x = "date"
        date_format = "%d/%m/%Y"
        """,
        {"data/d.csv": text},
    )
    sitebuild.build(root, quiet=True)
    return root / "site_output", rows


def test_date_x_is_days_and_the_slope_is_per_day(date_site):
    out, rows = date_site
    results = json.loads((out / "results.json").read_text(encoding="utf-8"))
    ds = results["datasets"][0]
    first = min(d for _, d, _ in rows)
    assert ds["source"]["x_time"] == {
        "origin": first.isoformat(),
        "origin_ms": (first - dt.date(1970, 1, 1)).days * 86_400_000,
        "unit": "day",
    }
    days = np.array([(d - first).days for _, d, _ in rows], dtype=float)
    delays = np.array([v for _, _, v in rows])
    fit = next(f for f in ds["linear_fits"] if f["group"] is None)
    # Reference: numpy's least-squares polynomial fit on the same days and delays.
    slope, intercept = np.polyfit(days, delays, 1)
    assert fit["slope"] == pytest.approx(slope, rel=1e-9)
    assert fit["intercept"] == pytest.approx(intercept, rel=1e-9)
    page = (out / f"{ds['slug']}.html").read_text(encoding="utf-8")
    assert "slopes are per day" in page


def test_page_name_in_cyrillic_is_linked_from_the_index(date_site):
    out, _ = date_site
    assert (out / "доставка-по-складам.html").is_file()
    index = (out / "index.html").read_text(encoding="utf-8")
    assert "доставка-по-складам.html" in urllib.parse.unquote(index)


@pytest.mark.browser
def test_date_axis_draws_offline_with_dates_on_it(browser, date_site):
    from browser import visit_pages

    out, _ = date_site
    page = out / "доставка-по-складам.html"
    visits = visit_pages(browser, [p.as_uri() for p in sorted(out.glob("*.html"))])
    for v in visits:
        assert v.page_errors == [] and v.console_errors == [] and v.console_warnings == []
        assert v.blocked == [] and v.failed_charts == [] and v.drawn >= v.charts
    context = browser.new_context()
    tab = context.new_page()
    tab.goto(page.as_uri(), wait_until="load")
    tab.wait_for_function(
        "() => [...document.querySelectorAll('[data-chart]')].every(b => b.querySelector('svg, canvas'))",
        timeout=15000,
    )
    texts = tab.eval_on_selector_all("[data-chart] svg text", "ts => ts.map(t => t.textContent)")
    context.close()
    # A temporal axis labels months (April, May, June 2026), not day numbers 0..90.
    assert any(month in " ".join(texts) for month in ("April", "May", "June", "Apr", "Jun"))
