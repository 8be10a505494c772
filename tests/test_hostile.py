"""Hostile text in a real browser: labels, column names, notes, dataset names and the site title
carrying HTML, ``</script>``, template syntax, ``javascript:`` and ``data:`` URLs never run and
never change the page.

Each hostile site has a benign twin of the same shape (same groups, measures, notes layout);
the pages of both must hold the same number of every active element (scripts, images, frames,
buttons, SVGs...), no dialog may open, no injected id may appear, and every chart must draw,
also after the pointer has moved over it (tooltips show labels).
"""

from __future__ import annotations

import csv
import io
import json

import pytest

import sitebuild

from browser import visit_pages
from conftest import write_project

pytestmark = pytest.mark.browser

PWNED = '<b id="pwned">owned</b>'
PAYLOADS = [
    PWNED + '<img src=x onerror="window.__pwned=1;alert(1)">',
    "</script><script>window.__pwned=2;alert(2)</script>",
    "{{ 7*7 }}{% if true %}T{% endif %}{{ self.__init__ }}",
    "javascript:alert(3)",
    "data:text/html,<script>alert(4)</script>",
    '"><svg onload="window.__pwned=5;alert(5)">',
    "' onmouseover='alert(6)' x='",
]
HOSTILE_NOTES = f"""# Notes {PAYLOADS[2]}

<script>window.__pwned=7;alert(7)</script>

{PWNED} <iframe src="javascript:alert(8)"></iframe> <img src=x onerror=alert(9)>

[a link](javascript:alert(10)) and [another](data:text/html;base64,PHNjcmlwdD5hbGVydCgxMSk8L3NjcmlwdD4=)
and <a href="javascript:alert(12)" onclick="alert(13)">raw</a> and ![picture](data:image/png;base64,AAAA)

| a | b |
|---|---|
| <svg onload=alert(14)> | {PAYLOADS[1]} |
"""
BENIGN_NOTES = """# Notes plain

Some text.

Bold words here and there.

[a link](https://example.org/) and [another](https://example.org/b)
and raw and picture

| a | b |
|---|---|
| one | two |
"""
# Elements a page may hold only as the layout puts them there.
ACTIVE = (
    "script", "img", "iframe", "frame", "object", "embed", "style", "link", "meta", "base",
    "form", "input", "button", "textarea", "video", "audio", "source", "svg", "foreignObject",
)  # fmt: skip


def toml(text: str) -> str:
    """A TOML basic string holding ``text`` (JSON's escapes are valid TOML)."""
    return json.dumps(text)


def make_site(tmp_path, name: str, title: str, dataset: str, group: str, measures, labels, notes):
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([group, *measures])
    for i in range(len(labels) * 5):
        values = [(i * (k + 3)) % 7 + 0.5 * k + i % 3 for k in range(len(measures))]
        writer.writerow([labels[i % len(labels)], *values])
    root = write_project(
        tmp_path / name,
        f"""
        [site]
        title = {toml(title)}

        [[datasets]]
        name = {toml(dataset)}
        file = "data/d.csv"
        group = {toml(group)}
        measures = {json.dumps(measures)}
        notes = "notes.md"
        """,
        {"data/d.csv": buffer.getvalue(), "notes.md": notes},
    )
    out = tmp_path / f"{name}-site"
    sitebuild.build(root, out=out, quiet=True)
    return out


PROBE = """(active) => {
  const counts = {};
  for (const tag of active) counts[tag] = document.getElementsByTagName(tag).length;
  let handlers = 0;
  for (const el of document.querySelectorAll('*'))
    for (const a of el.attributes) if (a.name.toLowerCase().startsWith('on')) handlers++;
  const links = [...document.querySelectorAll('[href],[src],[action],[formaction]')]
    .map(e => e.getAttribute('href') || e.getAttribute('src') || e.getAttribute('action') || '')
    .filter(u => /^\\s*(javascript|data|vbscript):/i.test(u));
  return {counts, handlers, links, pwned: document.getElementById('pwned') !== null,
          flag: window.__pwned === undefined ? null : String(window.__pwned),
          title: document.title};
}"""


def inspect(browser, url: str) -> dict:
    """Open the page offline, wait for the charts, sweep the pointer over each, then probe."""
    context = browser.new_context()
    context.route(
        "**/*",
        lambda route: (
            route.continue_()
            if route.request.url.startswith(("file://", "data:", "blob:"))
            else route.abort()
        ),
    )
    page = context.new_page()
    dialogs: list[str] = []
    page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
    page.goto(url, wait_until="load")
    if page.locator("[data-chart]").count():
        page.wait_for_function(
            """() => [...document.querySelectorAll('[data-chart]')].every(
                b => b.querySelector('svg, canvas') || b.classList.contains('failed'))""",
            timeout=20000,
        )
    for box in page.locator("[data-chart]").all()[:12]:
        area = box.bounding_box()
        if not area:
            continue
        box.scroll_into_view_if_needed()
        area = box.bounding_box()
        for fx in (0.2, 0.4, 0.6, 0.8):
            for fy in (0.25, 0.5, 0.75):
                page.mouse.move(area["x"] + area["width"] * fx, area["y"] + area["height"] * fy)
    found = page.evaluate(PROBE, list(ACTIVE))
    found["dialogs"] = dialogs
    context.close()
    return found


def pages_by_role(out):
    pages = sorted(out.glob("*.html"))
    fixed = {p.name: p for p in pages if p.name in ("index.html", "changes.html")}
    others = [p for p in pages if p.name not in fixed]
    assert len(others) == 1
    return {**fixed, "dataset": others[0]}


def test_hostile_text_never_runs_or_alters_the_page(browser, tmp_path):
    hostile = make_site(
        tmp_path,
        "hostile",
        title=PAYLOADS[2] + PWNED,
        dataset="Report " + PAYLOADS[0] + PAYLOADS[2],
        group="grp" + PAYLOADS[5],
        measures=["v" + PAYLOADS[1], "w.x[0]" + PAYLOADS[0]],
        labels=PAYLOADS,
        notes=HOSTILE_NOTES,
    )
    benign = make_site(
        tmp_path,
        "benign",
        title="Plain title",
        dataset="Report plain",
        group="grp",
        measures=["v", "w"],
        labels=[f"G{i}" for i in range(len(PAYLOADS))],
        notes=BENIGN_NOTES,
    )
    bad_pages, good_pages = pages_by_role(hostile), pages_by_role(benign)
    assert bad_pages.keys() == good_pages.keys()

    # Console errors, network attempts, dialogs and undrawn charts, as the example site checks.
    visits = visit_pages(browser, [p.as_uri() for p in bad_pages.values()])
    for v in visits:
        assert v.page_errors == [] and v.console_errors == [] and v.console_warnings == [], v
        assert v.blocked == [] and v.dialogs == [], v
        assert v.failed_charts == [] and v.drawn >= v.charts, v

    for role, page in bad_pages.items():
        bad = inspect(browser, page.as_uri())
        good = inspect(browser, good_pages[role].as_uri())
        assert bad["dialogs"] == [], f"{role}: a dialog opened: {bad['dialogs']}"
        assert bad["flag"] is None, f"{role}: injected script ran ({bad['flag']})"
        assert not bad["pwned"], f"{role}: injected element #pwned is in the page"
        assert bad["links"] == [], f"{role}: javascript:/data: URL kept: {bad['links']}"
        assert bad["handlers"] == good["handlers"], f"{role}: inline event handlers appeared"
        assert bad["counts"] == good["counts"], f"{role}: elements differ from the benign twin"
        assert "{{ 7*7 }}" in bad["title"] and "49" not in bad["title"], bad["title"]


AWKWARD = ["depth (mm)", "a.b", "w[0]", 'say "hi"', "it's", "重量", "Größe ø", "x\\y"]


def test_awkward_column_names_draw_every_chart(browser, tmp_path):
    # Vega-Lite reads dots and brackets in field names as paths: charts must not use them.
    out = make_site(
        tmp_path,
        "awkward",
        title="Awkward names",
        dataset="Awkward",
        group="grp.name[0]",
        measures=AWKWARD,
        labels=["Δ one", "two.2", "[three]", "四"],
        notes="Plain notes.\n",
    )
    visits = visit_pages(browser, [p.as_uri() for p in sorted(out.glob("*.html"))])
    dataset = [v for v in visits if v.url.endswith("awkward.html")]
    assert dataset and dataset[0].charts >= 3 * len(AWKWARD)
    for v in visits:
        assert v.page_errors == [] and v.console_errors == [] and v.console_warnings == [], v
        assert v.failed_charts == [] and v.drawn >= v.charts, v
