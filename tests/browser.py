"""Open site pages in Debian's Chromium over file:// with every network request refused."""

from __future__ import annotations

import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path

CHROMIUM_CANDIDATES = ("/usr/bin/chromium", "/usr/bin/chromium-browser")
LAUNCH_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def chromium_path() -> str | None:
    """Return the Chromium executable, from $CHROMIUM or the Debian package's paths."""
    explicit = os.environ.get("CHROMIUM")
    if explicit and Path(explicit).exists():
        return explicit
    for candidate in CHROMIUM_CANDIDATES:
        if Path(candidate).exists():
            return candidate
    return shutil.which("chromium")


@dataclass
class PageVisit:
    """What happened when a page was opened."""

    url: str
    console_errors: list[str] = field(default_factory=list)
    # Vega-Lite reports encodings and sizes it had to drop as console warnings: the chart
    # still draws, but not as specified (a muted cell without its outline, say).
    console_warnings: list[str] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)
    blocked: list[str] = field(default_factory=list)
    dialogs: list[str] = field(default_factory=list)
    charts: int = 0
    drawn: int = 0
    failed_charts: list[str] = field(default_factory=list)
    drawn_ids: list[str] = field(default_factory=list)  # data-chart ids holding an SVG or canvas


def visit_pages(browser, urls: list[str], settle_ms: int = 15000) -> list[PageVisit]:
    """Open each URL, wait until every chart box holds an SVG or canvas, report what happened."""
    context = browser.new_context()

    def refuse(route):
        url = route.request.url
        if url.startswith("file://") or url.startswith("data:") or url.startswith("blob:"):
            route.continue_()
        else:
            visits[-1].blocked.append(url)
            route.abort()

    context.route("**/*", refuse)
    visits: list[PageVisit] = []
    for url in urls:
        visit = PageVisit(url=url)
        visits.append(visit)
        page = context.new_page()

        def on_console(message, v=visit):
            if message.type == "error":
                v.console_errors.append(message.text)
            elif message.type == "warning":
                v.console_warnings.append(message.text)

        page.on("console", on_console)
        page.on("pageerror", lambda e, v=visit: v.page_errors.append(str(e)))

        def on_dialog(dialog, v=visit):
            v.dialogs.append(dialog.message)
            dialog.dismiss()

        page.on("dialog", on_dialog)
        page.goto(url, wait_until="load")
        visit.charts = page.locator("[data-chart]").count()
        if visit.charts:
            try:
                page.wait_for_function(
                    """() => [...document.querySelectorAll('[data-chart]')].every(
                        b => b.querySelector('svg, canvas') || b.classList.contains('failed'))""",
                    timeout=settle_ms,
                )
            except Exception:  # a timeout is reported through the counts below
                pass
        visit.drawn = page.locator("[data-chart] svg, [data-chart] canvas").count()
        visit.drawn_ids = page.eval_on_selector_all(
            "[data-chart]",
            "bs => bs.filter(b => b.querySelector('svg, canvas')).map(b => b.dataset.chart)",
        )
        visit.failed_charts = page.eval_on_selector_all(
            "[data-chart]",
            "bs => bs.filter(b => !b.querySelector('svg, canvas')).map(b => b.dataset.chart + ': ' + b.textContent)",
        )
        page.close()
    context.close()
    return visits
