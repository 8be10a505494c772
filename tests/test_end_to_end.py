"""Build the example project and check the site as a whole: schema, links, offline, numbers."""

from __future__ import annotations

import json
import re
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlparse

import jsonschema
import numpy as np
import pandas as pd
import pytest

from sitebuild.results import schema

from conftest import EXAMPLE


class Links(HTMLParser):
    """Collect every URL a page refers to, by tag and attribute."""

    def __init__(self):
        super().__init__()
        self.refs: list[tuple[str, str, str]] = []
        self.ids: set[str] = set()

    def handle_starttag(self, tag, attrs):
        for name, value in attrs:
            if name == "id" and value:
                self.ids.add(value)
            if name in ("href", "src") and value is not None:
                self.refs.append((tag, name, value))


def parse(path: Path) -> Links:
    links = Links()
    links.feed(path.read_text(encoding="utf-8"))
    return links


def test_results_validate_against_the_shipped_schema(example_site):
    results = json.loads((example_site / "results.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema()).validate(results)
    shipped = json.loads((example_site / "results.schema.json").read_text(encoding="utf-8"))
    assert shipped == schema()
    text = (example_site / "results.json").read_text(encoding="utf-8")
    assert "NaN" not in text and "Infinity" not in text


def test_every_internal_link_resolves_and_nothing_points_at_the_web(example_site):
    pages = sorted(example_site.glob("*.html"))
    assert len(pages) >= 4
    parsed = {p.name: parse(p) for p in pages}
    for page, links in parsed.items():
        for tag, _attr, url in links.refs:
            scheme = urlparse(url).scheme
            if tag in ("script", "link", "img", "iframe", "source", "video", "audio"):
                assert scheme not in ("http", "https", "//"), f"{page}: {tag} loads {url}"
                assert not url.startswith("//")
            if scheme in ("http", "https", "mailto"):
                continue
            target, _, fragment = url.partition("#")
            file = example_site / unquote(target) if target else example_site / page
            assert file.is_file(), f"{page}: link to missing {url}"
            if fragment and file.suffix == ".html":
                assert fragment in parsed[file.name].ids, f"{page}: anchor {url} missing"


def test_the_chart_script_is_written_once_and_loaded_classically(example_site):
    bundle = example_site / "assets" / "vega-bundle.js"
    assert bundle.stat().st_size > 500_000
    page = (example_site / "hydroponic-growing-trial.html").read_text(encoding="utf-8")
    assert '<script src="assets/vega-bundle.js"></script>' in page
    assert 'type="module"' not in page


def test_tables_are_downloadable_as_csv(example_site):
    csvs = sorted((example_site / "tables").glob("*.csv"))
    assert csvs
    frame = pd.read_csv(csvs[0], encoding="utf-8-sig")
    assert "Mean" in frame.columns and len(frame) >= 2


def reference_frame() -> pd.DataFrame:
    """The growing-trial data read independently with pandas (the reference reader)."""
    frame = pd.read_csv(
        EXAMPLE / "data" / "growing_trial.csv", dtype={"mix": str}, keep_default_na=False
    )
    return frame


def test_summaries_match_numpy_and_scipy_on_the_example_data(example_site):
    from scipy import stats

    results = json.loads((example_site / "results.json").read_text(encoding="utf-8"))
    ds = next(d for d in results["datasets"] if d["name"] == "Hydroponic growing trial")
    frame = reference_frame()
    frame = frame[frame["mix"].str.strip() != ""]
    measure = "leaf mass (g)"
    values = pd.to_numeric(frame[measure].replace({"n/a": ""}), errors="coerce")
    checked = 0
    for row in ds["summaries"]:
        if row["measure"] != measure or row["group"] is None:
            continue
        x = values[frame["mix"] == row["group"]].dropna().to_numpy()
        # Reference: numpy / scipy.stats on the same values.
        assert row["n"] == len(x)
        assert row["mean"] == pytest.approx(np.mean(x), rel=1e-12)
        assert row["sd"] == pytest.approx(np.std(x, ddof=1), rel=1e-12)
        assert row["median"] == pytest.approx(np.median(x), rel=1e-12)
        assert row["skewness"] == pytest.approx(stats.skew(x, bias=False), rel=1e-9)
        checked += 1
    assert checked == len(ds["groups"]) == 5


def test_page_reports_what_reading_left_out(example_site):
    page = (example_site / "hydroponic-growing-trial.html").read_text(encoding="utf-8")
    assert "could not be read as numbers" in page
    assert "12..5" in page
    assert re.search(r"1 row not used: missing group label", page)
    assert "99.7 % of rows used (393 of 394)" in page


def test_hostile_labels_stay_text(tmp_path):
    import sitebuild

    from conftest import write_project

    hostile = "<img src=x onerror=alert(1)>"
    rows = (
        "\n".join(f'"{hostile}",{i},{i % 3}' for i in range(6))
        + "\n"
        + "\n".join(f"</script><script>alert(2)</script>,{i},{i}" for i in range(6))
    )
    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "{{ 7*7 }} <b>site</b>"
        [[datasets]]
        name = "<script>alert(3)</script>"
        file = "data/d.csv"
        group = "g"
        measures = ["v", "w.x[0]"]
        """,
        {"data/d.csv": "g,v,w.x[0]\n" + rows + "\n"},
    )
    sitebuild.build(root, out=tmp_path / "site")
    pages = {p.name: p.read_text(encoding="utf-8") for p in (tmp_path / "site").glob("*.html")}
    assert "script-alert-3-script.html" in pages  # the page name is a plain slug
    for name, text in pages.items():
        assert "<img src=x" not in text, name
        assert "<script>alert" not in text, name
        assert "</script><script>" not in text, name
        assert "<b>site</b>" not in text, name
        assert "49" not in text.split("<title>")[1].split("</title>")[0], "template syntax ran"
    dataset_page = pages["script-alert-3-script.html"]
    assert "&lt;img src=x onerror=alert(1)&gt;" in dataset_page
    assert "{{ 7*7 }}" in dataset_page
