"""Print each page's height, where its first verdict sits and any sideways overflow.

A run, not a test: builds the example project (or opens a built site) and opens every page in
headless Chromium from file:// at 1366 × 900 and at 390 × 844, with charts drawn.

    PYTHONPATH=. python benchmarks/page_heights.py                 # build the example, measure
    PYTHONPATH=. python benchmarks/page_heights.py --site path/to/site
    PYTHONPATH=. python benchmarks/page_heights.py --shots out/    # also first-screen PNGs

"First verdict" is the top of the first bottom-line row or, on pages without a bottom line,
the first finding or lead-test paragraph.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

VERDICT = ".bottom-line tbody tr, .findings li, .lead-test"
MEASURE = """(sel) => {
  const v = document.querySelector(sel);
  const doc = document.documentElement;
  return {
    height: doc.scrollHeight,
    overflow: doc.scrollWidth - doc.clientWidth,
    verdict: v ? Math.round(v.getBoundingClientRect().top + window.scrollY) : null,
    words: (document.querySelector('main') || document.body).innerText.split(/\\s+/).filter(Boolean).length,
  };
}"""


def measure(site: Path, shots: Path | None = None) -> list[dict]:
    """Return one row per page and width: height, first-verdict position, overflow, words."""
    from playwright.sync_api import sync_playwright

    from browser import LAUNCH_ARGS, chromium_path

    rows = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium_path(), args=LAUNCH_ARGS)
        for width, height in ((1366, 900), (390, 844)):
            context = browser.new_context(viewport={"width": width, "height": height})
            for page_path in sorted(site.glob("*.html")):
                page = context.new_page()
                page.goto(page_path.as_uri(), wait_until="load")
                if page.locator("[data-chart]").count():
                    page.wait_for_function(
                        "() => [...document.querySelectorAll('[data-chart]')].every("
                        "b => b.querySelector('svg, canvas') || b.classList.contains('failed'))",
                        timeout=30000,
                    )
                found = page.evaluate(MEASURE, VERDICT)
                rows.append({"page": page_path.stem, "width": width, **found})
                if shots is not None:
                    shots.mkdir(parents=True, exist_ok=True)
                    page.screenshot(path=str(shots / f"{page_path.stem}-{width}.png"))
                page.close()
            context.close()
        browser.close()
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--site", type=Path, help="a built site (default: build the example)")
    parser.add_argument("--shots", type=Path, help="folder for first-screen screenshots")
    args = parser.parse_args()
    work = None
    site = args.site
    if site is None:
        import sitebuild

        work = Path(tempfile.mkdtemp(prefix="sitebuild-heights-"))
        shutil.copytree(ROOT / "example_project", work / "project")
        site = work / "site"
        sitebuild.build(work / "project", out=site)
    try:
        print(
            f"{'page':<36} {'width':>5} {'height px':>10} {'verdict at':>10} {'overflow':>8} {'words':>6}"
        )
        for r in measure(site, args.shots):
            verdict = "—" if r["verdict"] is None else f"{r['verdict']:,}"
            print(
                f"{r['page']:<36} {r['width']:>5} {r['height']:>10,} {verdict:>10}"
                f" {r['overflow']:>8} {r['words']:>6,}"
            )
    finally:
        if work is not None:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
