"""The whole site as one HTML file: styles, chart script, chart data and every page inlined.

Each page's main content becomes a section of one document. Element ids get a per-page prefix
so they stay unique, links between pages become in-page links, CSV and results.json links
become data: URLs, and the inline scripts are allowed by their SHA-256 in the page's
Content-Security-Policy (no 'unsafe-inline' for scripts).
"""

from __future__ import annotations

import base64
import hashlib
import re

from markupsafe import Markup

from ..manifest import Manifest
from . import render

# Attributes whose values are element ids (space-separated lists for the aria ones). The
# look-behind on whitespace keeps 'data-id' and words in text from matching; data never
# reaches here unescaped, so a quote cannot open an attribute inside a value.
ID_ATTRIBUTES = re.compile(
    r'(?<=\s)(id|for|aria-labelledby|aria-describedby|aria-controls|data-chart|data-for)="([^"]*)"'
)
HREF = re.compile(r'(?<=\s)href="([^"]*)"')
SCRIPT_END = re.compile(r"</(script)", re.IGNORECASE)
STYLE_END = re.compile(r"</(style)", re.IGNORECASE)


def script_text(source: str) -> str:
    """Return JavaScript safe inside an inline <script>: '</script' and '<!--' cannot occur.

    '<\\/script' means the same as '</script' inside JavaScript strings, regular expressions
    and comments (the only places it can appear in valid code); '<\\!--' likewise.
    """
    return SCRIPT_END.sub(r"<\\/\1", source).replace("<!--", "<\\!--")


def style_text(source: str) -> str:
    """Return CSS safe inside an inline <style> ('\\/' is an escaped '/' in CSS)."""
    return STYLE_END.sub(r"<\\/\1", source)


def csp_hash(text: str) -> str:
    """Return the CSP source expression allowing an inline script with exactly this text."""
    digest = hashlib.sha256(text.encode("utf-8")).digest()
    return "'sha256-" + base64.b64encode(digest).decode("ascii") + "'"


def _data_url(kind: str, data: bytes) -> str:
    return f"data:{kind};base64," + base64.b64encode(data).decode("ascii")


def _rewrite(html: str, prefix: str, anchors: dict[str, str], files: dict[str, bytes]) -> str:
    def fix_ids(match):
        values = " ".join(prefix + v for v in match[2].split())
        return f'{match[1]}="{values}"'

    def fix_href(match):
        target = match[1]
        if target.startswith("#"):
            return f'href="#{prefix}{target[1:]}"'
        page, _, fragment = target.partition("#")
        if page in anchors:
            page_prefix = anchors[page][1]
            return f'href="#{page_prefix}{fragment}"' if fragment else f'href="#{anchors[page][0]}"'
        if page.startswith("tables/") and page in files:
            return f'href="{_data_url("text/csv;charset=utf-8", files[page])}"'
        if page in ("results.json", "results.schema.json") and page in files:
            return f'href="{_data_url("application/json", files[page])}"'
        return match[0]

    return HREF.sub(fix_href, ID_ATTRIBUTES.sub(fix_ids, html))


def _main_block(env, template: str, context: dict) -> str:
    tpl = env.get_template(template)
    return "".join(tpl.blocks["main"](tpl.new_context(context)))


def render_single(
    results: dict,
    manifest: Manifest,
    files: dict[str, bytes] | None = None,
    bundle: bytes | None = None,
) -> bytes:
    """Return the site as one self-contained HTML file (UTF-8 bytes).

    ``files`` is the multi-page site from :func:`render.render_site` (made when not given);
    its CSV tables and results.json are inlined as data: links.
    """
    if files is None:
        files = render.render_site(results, manifest, bundle=bundle)
    env = render.environment()
    common = render.common_context(results, manifest)
    # page file → (section anchor, id prefix)
    anchors = {"index.html": ("page-overview", "o--")}
    for i, ds in enumerate(results["datasets"]):
        anchors[f"{ds['slug']}.html"] = (f"page-{i}-{ds['slug']}", f"d{i}--")
    if results.get("changes") is not None:
        anchors["changes.html"] = ("page-changes", "c--")

    sections = []
    chart_specs = {}
    changes = results.get("changes")
    index_context = {
        **common,
        "current": "index.html",
        "chart_specs": {},
        "changes_summary": changes["summary"] if changes else None,
        **render.overview_context(results, common["site"]),
    }
    index_html = _main_block(env, "index.html", index_context)
    sections.append((anchors["index.html"][0], _rewrite(index_html, "o--", anchors, files)))
    for ds, spec in zip(results["datasets"], manifest.datasets, strict=True):
        context, _ = render.dataset_page(env, common, ds, spec)
        prefix = anchors[f"{ds['slug']}.html"][1]
        html = _main_block(env, "dataset.html", context)
        sections.append((anchors[f"{ds['slug']}.html"][0], _rewrite(html, prefix, anchors, files)))
        chart_specs.update({prefix + cid: s for cid, s in context["chart_specs"].items()})
    if changes is not None:
        context = {
            **common,
            "current": "changes.html",
            "chart_specs": {},
            "changes": changes,
            "history": render.history_tables(results.get("history", [])),
            "dates": [entry.get("built_at") for entry in results.get("history", [])],
        }
        html = _main_block(env, "changes.html", context)
        sections.append((anchors["changes.html"][0], _rewrite(html, "c--", anchors, files)))

    index_page = files["index.html"].decode("utf-8")
    footer = re.search(r"<footer\b.*?</footer>", index_page, re.DOTALL)
    footer_html = _rewrite(footer[0], "f--", anchors, files) if footer else ""

    bundle_text = script_text(files[render.ASSET_BUNDLE].decode("utf-8"))
    site_js = script_text(files["assets/site.js"].decode("utf-8"))
    tables_js = script_text(files["assets/tables.js"].decode("utf-8"))
    page = env.get_template("single.html").render(
        **{
            **common,
            "nav": [(ds["name"], anchors[f"{ds['slug']}.html"][0]) for ds in results["datasets"]],
        },
        has_changes=changes is not None,
        css=Markup(style_text(files["assets/style.css"].decode("utf-8"))),
        sections=[(anchor, Markup(html)) for anchor, html in sections],
        footer_html=Markup(footer_html),
        chart_specs=chart_specs,
        bundle=Markup(bundle_text),
        site_js=Markup(site_js),
        tables_js=Markup(tables_js),
        script_hashes=" ".join((csp_hash(bundle_text), csp_hash(site_js), csp_hash(tables_js))),
    )
    return page.encode("utf-8")
