"""The example pages as a reader meets them in Chromium: answer first, short, phone-safe, printable."""

from __future__ import annotations

import io
import re

import pytest

pytestmark = pytest.mark.browser

DATASET_PAGES = (
    "hydroponic-growing-trial",
    "warehouse-order-picking",
    "seed-coating-germination-test",
)
# Page heights at 1366 × 900 before the bottom-line layout (commit e226da7, measured with
# benchmarks/page_heights.py): the default view must be at most 40 % of these.
HEIGHT_BEFORE = {
    "hydroponic-growing-trial": 21154,
    "warehouse-order-picking": 11844,
    "seed-coating-germination-test": 11473,
}
ALL_DRAWN = """() => [...document.querySelectorAll('[data-chart]')].every(
    b => b.querySelector('svg, canvas') || b.classList.contains('failed'))"""


def open_page(context, site, name):
    page = context.new_page()
    page.route(
        "**/*",
        lambda route: (
            route.continue_()
            if route.request.url.startswith(("file:", "data:", "blob:"))
            else route.abort()
        ),
    )
    page.goto((site / f"{name}.html").as_uri(), wait_until="load")
    if page.locator("[data-chart]").count():
        page.wait_for_function(ALL_DRAWN, timeout=30000)
    return page


@pytest.fixture(scope="module")
def desktop(browser):
    context = browser.new_context(viewport={"width": 1366, "height": 900})
    yield context
    context.close()


def test_bottom_line_is_the_first_section_and_inside_the_first_screen(desktop, example_site):
    for name in DATASET_PAGES:
        page = open_page(desktop, example_site, name)
        first_h2 = page.locator("main h2").first
        assert first_h2.inner_text().strip() == "Bottom line", name
        assert first_h2.evaluate("h => h.closest('section').classList.contains('bottom-line')")
        top = page.evaluate(
            "() => document.querySelector('.bottom-line .bl-row').getBoundingClientRect().top"
        )
        assert 0 < top < 900, f"{name}: first bottom-line row at {top:.0f} px"
        rows = page.locator(".bottom-line .bl-row").count()
        measures = page.locator("section.measure").count()
        assert rows == measures >= 2, name
        # Each row links to its measure's details.
        hrefs = page.eval_on_selector_all(
            ".bottom-line .bl-row th a", "links => links.map(a => a.getAttribute('href'))"
        )
        assert hrefs == [f"#m{i}" for i in range(measures)]
        page.close()


def test_default_page_height_is_at_most_forty_percent_of_before(desktop, example_site):
    for name in DATASET_PAGES:
        page = open_page(desktop, example_site, name)
        height = page.evaluate("() => document.documentElement.scrollHeight")
        share = height / HEIGHT_BEFORE[name]
        print(f"{name}: {height:,} px at 1366 × 900, {share:.0%} of {HEIGHT_BEFORE[name]:,} px")
        assert share <= 0.40, f"{name}: {height} px is {share:.0%} of before"
        page.close()


def test_no_sideways_overflow_on_a_390_pixel_screen(browser, example_site):
    context = browser.new_context(viewport={"width": 390, "height": 844})
    names = [p.stem for p in sorted(example_site.glob("*.html"))]
    assert len(names) >= 5
    for name in names:
        page = open_page(context, example_site, name)
        over = page.evaluate(
            "() => document.documentElement.scrollWidth - document.documentElement.clientWidth"
        )
        assert over <= 0, f"{name}: page is {over} px wider than a 390 px screen"
        page.close()
    context.close()


LEGEND_OVERFLOW = """() => {
    document.querySelectorAll('details').forEach(d => { d.open = true; });
    const out = [];
    document.querySelectorAll('[data-chart]').forEach(box => {
        const edge = box.getBoundingClientRect().right;
        const left = box.getBoundingClientRect().left;
        box.querySelectorAll('.role-legend, .role-axis-title').forEach(part => {
            const r = part.getBoundingClientRect();
            if (r.width && (r.right > edge + 1 || r.left < left - 1)) {
                out.push(box.dataset.chart + ': ' + part.getAttribute('class'));
            }
        });
    });
    return out;
}"""


def test_chart_legends_and_axis_titles_stay_inside_their_box_on_a_390_pixel_screen(
    browser, example_site
):
    # Folded charts are drawn while folded; opened on a phone, their legends must still fit.
    context = browser.new_context(viewport={"width": 390, "height": 844})
    for name in DATASET_PAGES:
        page = open_page(context, example_site, name)
        assert page.evaluate(LEGEND_OVERFLOW) == [], (
            f"{name}: a legend or axis title runs past its chart"
        )
        page.close()
    context.close()


def test_printed_page_holds_text_from_inside_a_folded_part(desktop, example_site):
    import pypdf  # in the test extra: a missing one fails, never skips

    page = open_page(desktop, example_site, "hydroponic-growing-trial")
    folded = page.locator("details.summaries").first
    assert folded.get_attribute("open") is None
    # Text that only the folded spread section holds, and its closed state is what a
    # reader would print.
    summary = folded.locator("details.shape > summary")
    inside = summary.text_content().strip()
    assert len(inside) > 40 and not summary.is_visible()
    pdf = page.pdf(format="A4")
    text = " ".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(pdf)).pages)
    flat = re.sub(r"\s+", " ", text)
    assert re.sub(r"\s+", " ", inside)[:40] in flat
    # After printing, the folded parts are folded again.
    page.wait_for_function("() => !document.querySelector('details.summaries').open")
    page.close()


def test_bottom_line_prints_on_one_page(browser, example_site):
    # A4 at Chromium's default print margins leaves about 718 × 1047 CSS pixels.
    context = browser.new_context(viewport={"width": 718, "height": 1047})
    for name in DATASET_PAGES:
        page = open_page(context, example_site, name)
        page.emulate_media(media="print")
        height = page.evaluate(
            "() => document.querySelector('.bottom-line').getBoundingClientRect().height"
        )
        assert height <= 1047, f"{name}: printed bottom line is {height:.0f} px tall"
        page.close()
    context.close()


def test_sorting_a_table_by_a_numeric_column_orders_it_numerically(desktop, example_site):
    page = open_page(desktop, example_site, "hydroponic-growing-trial")
    block = page.locator("#tbl-cmp-0-pairs")
    block.evaluate("b => b.closest('details').open = true")
    headings = block.locator("thead th")
    # The first column whose every cell holds a number (the pairs' estimates, say).
    column = block.locator("tbody").evaluate(
        """body => [...body.rows[0].cells].findIndex((_, i) =>
            [...body.rows].every(r => r.cells[i].hasAttribute('data-v')))"""
    )
    assert column >= 0
    button = headings.nth(column).locator("button.sort")

    def values():
        return block.locator("tbody tr").evaluate_all(
            f"rows => rows.map(r => r.cells[{column}].getAttribute('data-v'))"
            ".filter(v => v !== null).map(Number)"
        )

    button.click()
    ascending = values()
    assert len(ascending) >= 5 and ascending == sorted(ascending)
    assert headings.nth(column).get_attribute("aria-sort") == "ascending"
    button.press("Enter")  # a keyboard user sorts the other way
    descending = values()
    assert descending == sorted(ascending, reverse=True)
    assert headings.nth(column).get_attribute("aria-sort") == "descending"
    page.close()


def test_long_table_filter_keeps_matching_rows(desktop, example_site):
    page = open_page(desktop, example_site, "hydroponic-growing-trial")
    block = page.locator("#tbl-rel-lines")
    block.evaluate("b => b.closest('details').open = true")
    box = block.locator("input[type=search]")
    box.fill("Kelp")
    shown = block.locator("tbody tr:not([hidden])").all_inner_texts()
    assert shown and all("Kelp" in row for row in shown)
    assert block.locator("tbody tr[hidden]").count() > 0
    page.close()


def test_general_cautions_appear_once_per_page(desktop, example_site):
    from sitebuild.stats.findings import CAUTIONS

    for name in (*DATASET_PAGES, "index"):
        page = open_page(desktop, example_site, name)
        text = page.evaluate("() => document.body.textContent")
        cautions = page.locator(".how-to-read [data-caution]").all_text_contents()
        keys = page.eval_on_selector_all(
            ".how-to-read [data-caution]", "items => items.map(i => i.dataset.caution)"
        )
        assert "observational" in keys and "decision" in keys, name
        for caution in cautions:
            assert text.count(caution.strip()) == 1, f"{name}: repeated: {caution}"
        # The findings' own copies of the general cautions are not repeated per measure.
        for sentence in CAUTIONS:
            assert sentence not in text, f"{name}: {sentence}"
        assert len(re.findall(r"association, not", text)) == 1, name
        page.close()
