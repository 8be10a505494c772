"""Every page opened in Debian's Chromium from file://, network refused: charts draw, no errors."""

from __future__ import annotations

import shutil
import zipfile
from pathlib import Path

import pytest

from browser import visit_pages
from conftest import write_project

pytestmark = pytest.mark.browser


def assert_clean(visits):
    assert visits
    for v in visits:
        name = v.url.rsplit("/", 1)[-1]
        assert v.page_errors == [], f"{name}: {v.page_errors}"
        assert v.console_errors == [], f"{name}: {v.console_errors}"
        assert v.console_warnings == [], f"{name}: {v.console_warnings}"
        assert v.blocked == [], f"{name} tried the network: {v.blocked}"
        assert v.dialogs == [], f"{name} opened a dialog: {v.dialogs}"
        assert v.failed_charts == [], f"{name}: {v.failed_charts}"
        assert v.drawn >= v.charts, f"{name}: {v.drawn} of {v.charts} charts drawn"


def test_every_example_page_draws_every_chart_offline(browser, example_site):
    pages = sorted(example_site.glob("*.html"))
    visits = visit_pages(browser, [p.as_uri() for p in pages])
    assert_clean(visits)
    dataset_pages = [v for v in visits if not v.url.endswith(("index.html", "changes.html"))]
    assert all(v.charts >= 6 for v in dataset_pages)


def test_hostile_text_never_runs(browser, tmp_path):
    import sitebuild

    hostile = "<img src=x onerror=alert(1)>"
    rows = [f'"{hostile}",{i},{i * 0.5}' for i in range(8)]
    rows += [f'"</script><script>alert(2)</script>",{i},{i}' for i in range(8)]
    rows += [f"javascript:alert(4),{i},{i * 2}" for i in range(8)]
    notes = "# Notes\n\n<script>alert(5)</script>\n\n[click](javascript:alert(6)) <img src=x onerror=alert(7)>\n"
    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "{{ 7*7 }} {% if 1 %}x{% endif %}"
        [[datasets]]
        name = "<b onmouseover=alert(8)>bold</b>"
        file = "data/d.csv"
        group = "g\\"><svg onload=alert(9)>"
        measures = ["v.a[0]", "w 'quoted'"]
        notes = "notes.md"
        """,
        {
            "data/d.csv": '"g""><svg onload=alert(9)>",v.a[0],w \'quoted\'\n'
            + "\n".join(rows)
            + "\n",
            "notes.md": notes,
        },
    )
    out = tmp_path / "site"
    sitebuild.build(root, out=out)
    visits = visit_pages(browser, [p.as_uri() for p in sorted(out.glob("*.html"))])
    assert_clean(visits)


@pytest.fixture(scope="module")
def handover(tmp_path_factory):
    """The example project built with --zip and --single-file, as a user would."""
    from sitebuild.cli import main

    from conftest import EXAMPLE

    work = tmp_path_factory.mktemp("handover")
    project = work / "project"
    shutil.copytree(EXAMPLE, project, ignore=shutil.ignore_patterns("site_output", ".sitebuild*"))
    code = main(
        ["build", str(project), "--out", str(work / "site"), "--quiet",
         "--zip", str(work / "mail" / "results.zip"), "--single-file", str(work / "mail" / "results.html")]
    )  # fmt: skip
    assert code == 0
    return work / "mail"


def test_zipped_site_opens_offline_after_unzipping_elsewhere(browser, handover, tmp_path):
    archive = handover / "results.zip"
    with zipfile.ZipFile(archive) as z:
        assert z.testzip() is None
    unpacked = tmp_path / "elsewhere"
    shutil.unpack_archive(archive, unpacked)
    pages = sorted(Path(unpacked).rglob("*.html"))
    assert any(p.name == "index.html" for p in pages)
    visits = visit_pages(browser, [p.as_uri() for p in pages])
    assert_clean(visits)
    assert sum(v.charts for v in visits) >= 40


def test_single_file_opens_offline_with_every_chart(browser, handover):
    single = handover / "results.html"
    text = single.read_text(encoding="utf-8")
    assert 'src="assets/' not in text and 'href="assets/' not in text  # nothing beside it needed
    visits = visit_pages(browser, [single.as_uri()], settle_ms=30000)
    assert_clean(visits)
    assert visits[0].charts >= 40


DEGENERATE = {
    "one-group": "g,v,w,x\n" + "".join(f"A,{i % 5},{i * 0.3},{i}\n" for i in range(20)),
    "one-row-per-group": "g,v,w,x\nA,1,2,1\nB,2,3,2\nC,3,1,3\n",
    "constant-measure": "g,v,w,x\n" + "".join(f"{'AB'[i % 2]},7,{i},{i}\n" for i in range(20)),
    "measure-all-missing": "g,v,w,x\n" + "".join(f"{'AB'[i % 2]},,{i},{i}\n" for i in range(20)),
    "constant-x": "g,v,w,x\n" + "".join(f"{'AB'[i % 2]},{i},{i % 3},5\n" for i in range(20)),
    "header-only": "g,v,w,x\n",
    "no-outliers-two-rows": "g,v,w,x\nA,1,2,1\nA,2,3,2\nB,3,4,3\nB,4,4,4\n",
}


@pytest.mark.parametrize("name", sorted(DEGENERATE))
def test_degenerate_data_draws_without_warnings(browser, tmp_path, name):
    # Charts with empty layers or constant fields make Vega-Lite warn and drop parts of a
    # chart; every page must still draw exactly as specified.
    import sitebuild

    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "Edge cases"
        [[datasets]]
        name = "Edge"
        file = "data/d.csv"
        group = "g"
        measures = ["v", "w"]
        x = "x"
        """,
        {"data/d.csv": DEGENERATE[name]},
    )
    out = tmp_path / "site"
    sitebuild.build(root, out=out, quiet=True)
    assert_clean(visit_pages(browser, [p.as_uri() for p in sorted(out.glob("*.html"))]))
