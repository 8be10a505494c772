"""Pages from results: jinja2 layouts + results + chart specs → a dict of site files (bytes)."""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
import os
import re
from functools import lru_cache
from importlib import resources
from pathlib import Path

from .. import __version__
from ..manifest import Manifest
from .labels import display_copy, with_codes

ASSET_BUNDLE = "assets/vega-bundle.js"
MARKER = ".sitebuild-site"
NOTE_TAGS = {
    "a", "abbr", "b", "blockquote", "br", "code", "dd", "del", "div", "dl", "dt", "em", "h1",
    "h2", "h3", "h4", "h5", "h6", "hr", "i", "kbd", "li", "ol", "p", "pre", "s", "small",
    "span", "strong", "sub", "sup", "table", "tbody", "td", "tfoot", "th", "thead", "tr", "ul",
}  # fmt: skip


def packaged_layouts() -> Path:
    """Return the layouts folder: inside the installed package, or the repo's top level."""
    inside = resources.files("sitebuild") / "layouts"
    if inside.is_dir():
        return Path(str(inside))
    return Path(__file__).resolve().parents[2] / "layouts"


def _num(value, decimals: int | None = None, digits: int = 4) -> str:
    """Format a number for a page: thousands separators, '—' for None; ``decimals`` fixed
    decimals (a table column's, see :func:`_column_decimals`), else significant ``digits``."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    if not math.isfinite(value):
        return "—"
    if decimals is not None and abs(value) < 1e15:
        text = f"{value:,.{decimals}f}"
        # A tiny negative rounds to "-0.00": zero has no sign on a page.
        return text[1:] if text.startswith("-") and not text.strip("-0.,") else text
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    if magnitude >= 15 or magnitude <= -5:
        return f"{value:.{digits - 1}e}"
    decimals = max(0, digits - 1 - magnitude)
    text = f"{value:,.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def _is_p(key: str) -> bool:
    return key == "p" or key.startswith("p_") or key.endswith("_p") or "_p_" in key


def _column_decimals(table) -> dict:
    """Return fixed decimals for each numeric column of a table: three significant digits of
    the column's range, so a column never mixes 66.01 with 56.8 and values near 10,000,000
    that differ by 0.3 stay apart. Integer, p-value and single-valued columns keep the
    default (significant digits)."""
    out = {}
    for key, _ in table.columns:
        if _is_p(key):
            continue
        values = [
            v
            for row in table.rows
            if isinstance(v := row.get(key), float) and math.isfinite(v) and abs(v) < 1e15
        ]
        if len(values) < 2:
            continue
        spread = max(values) - min(values)
        if spread <= 0:
            continue
        largest = max(abs(v) for v in values)
        # Never more digits than a double holds (about 15 significant).
        cap = max(0, 14 - math.floor(math.log10(largest)))
        out[key] = min(cap, 8, max(0, 2 - math.floor(math.log10(spread))))
    return out


def _shown_columns(table) -> list:
    """Return the columns of a table to show on the page: those that hold a value in some row
    (a column empty throughout, Dunnett's p without a reference group say, only widens the
    page) and are not marked ``csv_only``. The CSV keeps every column."""
    return [
        (key, heading)
        for key, heading in table.columns
        if key not in table.csv_only and any(row.get(key) not in (None, "") for row in table.rows)
    ] or list(table.columns)


def _unit_decimals(rows) -> int | None:
    """Return the decimals for one measure's values from its summary rows (each with "sd"):
    see :func:`sitebuild.stats.findings.measure_decimals`."""
    from ..stats.findings import measure_decimals

    return measure_decimals({"groups": list(rows)})


def _pval(value) -> str:
    """The same p-value text as the findings (3 significant digits, so 0.0502 is not 0.050)."""
    from ..stats.findings import format_p

    if value is None:
        return "—"
    return format_p(value)


def _pct(value, decimals: int | None = 1) -> str:
    """A share as a percentage; ``decimals=None`` shows as many as the value needs (95%,
    97.5%)."""
    if value is None:
        return "—"
    if decimals is None:
        return f"{100 * value:.6g}%"
    return f"{100 * value:.{decimals}f}%"


def _inline_json(data) -> str:
    """Return JSON safe inside a <script> element: '<', '>' and '&' are escaped as \\u00XX."""
    from markupsafe import Markup

    text = json.dumps(
        data, sort_keys=True, allow_nan=False, ensure_ascii=False, separators=(",", ":")
    )
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    # U+2028/2029 are line ends to old JavaScript parsers; escaping them costs nothing.
    text = text.replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
    # Safe for a <script> element: nothing in it can close the element or start markup.
    return Markup(text)


# Notes are small texts; a larger file is refused with a sentence (see dataset_page).
NOTES_MAX_BYTES = 512 * 1024
# The markdown library's inline parsing takes time proportional to (delimiters in a block) x
# (the block's length): '[a](' repeated 20,000 times took minutes. A block above this product
# is shown as the plain text it is, without markdown.
BLOCK_COST = 200_000
NOTE_COST = 4_000_000  # for the whole note: past it, only cheap blocks still get markdown
SMALL_COST = 2_000
_INLINE = re.compile(r"[\[\]*_`<!(]")
# Links may go to the web, to mail, or to a place on the same page; nothing else (no
# //host or \\host share, no relative file, no other scheme).
_SAFE_LINK = re.compile(r"(?:https?://[^/\\\s]|mailto:[^/\\\s]|#)", re.IGNORECASE)


def _block_cost(block: str) -> int:
    """Return the work the markdown library may spend on a block's inline text, in its own
    rough units (delimiters x length; a table's rows are parsed one by one)."""
    lines = block.split("\n")
    if all(line.lstrip().startswith("|") for line in lines if line.strip()):
        return max((len(_INLINE.findall(line)) * len(line) for line in lines), default=0)
    return len(_INLINE.findall(block)) * len(block)


def _too_deep(block: str) -> bool:
    """True when a block nests lists or quotes deeper than the markdown library can recurse."""
    for line in block.split("\n"):
        stripped = line.lstrip(" \t")
        if len(line) - len(stripped) > MAX_INDENT:
            return True
        if len(stripped) - len(stripped.lstrip("> \t")) > 2 * MAX_QUOTES:
            return True
    return False


MAX_INDENT = 64  # columns of leading white space: 16 levels of nested lists
MAX_QUOTES = 16  # levels of nested quotes ('> > > ...')


def _defuse(text: str) -> tuple[str, dict[str, str]]:
    """Return (the note with each costly or too deeply nested block replaced by a token,
    token -> that block as escaped HTML); ordinary notes come back unchanged."""
    from markupsafe import escape

    blocks = re.split(r"(\n[ \t]*\n)", text)
    raw: dict[str, str] = {}
    budget = NOTE_COST
    for i in range(0, len(blocks), 2):
        block = blocks[i]
        cost = _block_cost(block)
        if cost > BLOCK_COST or _too_deep(block) or (cost > SMALL_COST and cost > budget):
            token = f"sitebuildrawblock{len(raw)}x"
            raw[token] = f"<p>{escape(block)}</p>"
            blocks[i] = token
        else:
            budget -= cost
    return "".join(blocks), raw


def _link_filter(tag: str, attribute: str, value: str) -> str | None:
    if tag == "a" and attribute == "href":
        return value if _SAFE_LINK.match(value.strip()) else None
    return value


def sanitise_notes(text: str) -> str:
    """Return notes markdown as HTML with only ordinary formatting, links and tables kept.

    Links keep http, https and mailto addresses and in-page anchors only. A note nested too
    deeply for the markdown library is shown as plain text.
    """
    import markdown
    import nh3

    defused, raw = _defuse(text)
    try:
        html = markdown.markdown(defused, extensions=["tables", "sane_lists"], output_format="html")
    except RecursionError:
        from markupsafe import escape

        html, raw = f"<pre>{escape(text)}</pre>", {}
    for token, block in raw.items():
        html = html.replace(f"<p>{token}</p>", block).replace(token, block)
    # Notes sit under the page's own title: demote their headings one level (h1 -> h2).
    html = re.sub(r"<(/?)h([1-6])\b", lambda m: f"<{m[1]}h{min(6, int(m[2]) + 1)}", html)
    return nh3.clean(
        html,
        tags=NOTE_TAGS,
        attributes={"a": {"href", "title"}, "th": {"align"}, "td": {"align"}},
        url_schemes={"http", "https", "mailto"},
        link_rel="noopener noreferrer",
        attribute_filter=_link_filter,
    )


def environment():
    """Return the jinja2 environment over the packaged layouts only, autoescape on.

    A project folder never supplies templates: a template is code (jinja2 can reach Python
    objects from one), and building someone else's project must never run their code. The one
    thing a project may restyle is ``layouts/style.css`` (see :func:`asset_bytes`). The
    compiled layouts are kept in the user's own cache folder (see :mod:`.template_cache`).
    """
    import jinja2

    from .template_cache import PrivateCodeCache

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader([str(packaged_layouts())]),
        bytecode_cache=PrivateCodeCache(),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    from ..stats.multiplicity import METHOD_NAMES

    env.globals["adjust_names"] = dict(METHOD_NAMES)
    env.filters.update(
        num=_num,
        pval=_pval,
        pct=_pct,
        inline_json=_inline_json,
        column_decimals=_column_decimals,
        unit_decimals=_unit_decimals,
        shown_columns=_shown_columns,
    )
    return env


@lru_cache(maxsize=1)
def chart_bundle() -> bytes:
    """Return Vega, Vega-Lite and vega-embed as one classic script (from vl-convert)."""
    import vl_convert

    return vl_convert.javascript_bundle().encode("utf-8")


def _csv(table) -> bytes:
    """Return a table as RFC 4180 CSV (CRLF line ends; a field holding a CR, LF, quote or comma
    is quoted), UTF-8 with a BOM, every text cell passed through :func:`_csv_cell`."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow([_csv_cell(heading) for _, heading in table.columns])
    for row in table.rows:
        writer.writerow(
            ["" if row.get(key) is None else _csv_cell(row.get(key)) for key, _ in table.columns]
        )
    # A BOM makes spreadsheet programs read the UTF-8 labels correctly.
    return ("\ufeff" + buffer.getvalue()).encode("utf-8")


# Characters that make a cell starting with '+' or '-' an expression rather than a signed
# number with a unit ("-20 °C", "+5 %" stay as they are; "-A1", "+1+1", "-2*cmd|..." do not).
_SIGNED_WITH_UNIT = re.compile(r"[+-]\d[\d.,]*(\s+[^=+\-*/^&(),;:!|@\"'<>{}\[\]]*)?")


def _csv_cell(value):
    """Return a cell for a CSV download: floats in full precision; text a spreadsheet would
    evaluate as a formula gets a leading ``'`` so it stays text.

    A formula is text starting (after leading white space, and with full-width forms folded
    by NFKC) with ``=``, ``@``, or ``+``/``-`` followed by anything but a number and a unit;
    text starting with a TAB or CR is guarded too (common practice for CSV injection).
    """
    if isinstance(value, float):
        return repr(value)
    text = str(value)
    if needs_formula_guard(text):
        return "'" + text
    return text


def needs_formula_guard(text: str) -> bool:
    """Return True when a spreadsheet opening this cell could evaluate it as a formula."""
    import unicodedata

    if text[:1] in ("\t", "\r"):
        return True
    folded = unicodedata.normalize("NFKC", text).lstrip()
    first = folded[:1]
    if first in ("=", "@"):
        return True
    if first in ("+", "-"):
        return not (_looks_numeric(folded) or _SIGNED_WITH_UNIT.fullmatch(folded))
    return False


def _looks_numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def build_time() -> str | None:
    """Return the build time to print, only when SOURCE_DATE_EPOCH provides it (reproducible)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if not epoch:
        return None
    import datetime

    try:
        moment = datetime.datetime.fromtimestamp(int(epoch), tz=datetime.UTC)
    except (ValueError, OverflowError):
        return None
    return moment.strftime("%Y-%m-%d %H:%M UTC")


def data_time(manifest: Manifest) -> str | None:
    """Return the date to put on a build when SOURCE_DATE_EPOCH is not set: the newest
    modification time of the data files read, so rebuilding the same files gives the same
    date (a reproducible build) and the date says how recent the data are."""
    import datetime

    times = []
    for spec in manifest.datasets:
        path = Path(spec.path)
        candidates = [path] if path.is_file() else sorted(path.rglob("*")) if path.is_dir() else []
        times += [p.stat().st_mtime for p in candidates if p.is_file()]
    if not times:
        return None
    moment = datetime.datetime.fromtimestamp(int(max(times)), tz=datetime.UTC)
    return "data of " + moment.strftime("%Y-%m-%d %H:%M UTC")


def page_parts(ds: dict, settings) -> tuple[dict, dict]:
    """Return (charts by id, tables by id) for one dataset from every section."""
    from ..sections import section_modules

    charts, tables = {}, {}
    for module in section_modules():
        for chart in module.charts(ds, settings):
            charts[chart.id] = chart
        for table in module.tables(ds, settings):
            tables[table.id] = table
    return charts, tables


def _page_meta(spec: dict, ds: dict, built_at) -> dict:
    """Return ``spec`` with the dataset and build date in its usermeta: the page's script
    writes them into a downloaded picture and its file name."""
    meta = {"dataset": ds["name"], "dataset_slug": ds["slug"], "built": built_at}
    return {**spec, "usermeta": {**spec.get("usermeta", {}), **meta}}


def dataset_page(env, common: dict, ds: dict, spec) -> tuple[dict, dict]:
    """Return (page context, CSV files) for one dataset; the context renders dataset.html."""
    ds = display_copy(ds, spec.labels)  # group names instead of codes (results keep codes)
    charts, tables = page_parts(ds, common["site"])
    tables = {key: with_codes(table, spec.labels) for key, table in tables.items()}
    csv_files = {}
    for key, table in list(tables.items()):
        name = f"tables/{ds['slug']}-{table.id}.csv"
        csv_files[name] = _csv(table)
        tables[key] = dataclasses.replace(table, href=name)
    notes_html = None
    if spec.notes_path is not None:
        size = spec.notes_path.stat().st_size
        if size > NOTES_MAX_BYTES:
            from ..errors import SitebuildError

            raise SitebuildError(
                f"{spec.notes_path.name}: the notes of dataset '{spec.name}' are {size // 1024:,} "
                f"KB; notes can be at most {NOTES_MAX_BYTES // 1024} KB — shorten them."
            )
        notes_html = sanitise_notes(spec.notes_path.read_text(encoding="utf-8", errors="replace"))
    from ..charts.bottom_line import group_dots
    from . import bottom_line as bl
    from .together import together_sentences

    rows = bl.bottom_line(ds)
    settings = common["site"]
    for row in rows:
        mini = group_dots(
            row.points,
            ds["groups"],
            row.measure,
            row.centre,
            settings.confidence,
            f"bl-{row.anchor}",
        )
        charts[mini.id] = mini
    context = {
        **common,
        "ds": ds,
        "bottom": rows,
        "cautions": bl.cautions(ds, settings),
        "data_use": bl.data_use(ds),
        "specific": {c["measure"]: bl.specific_findings(c) for c in ds.get("comparisons", [])},
        "together": together_sentences(ds, settings.alpha),
        "charts": charts,
        "tables": tables,
        "notes_html": notes_html,
        "chart_specs": {
            cid: _page_meta(c.spec, ds, common.get("built_at"))
            for cid, c in charts.items()
            if c.drawable
        },
        "current": f"{ds['slug']}.html",
    }
    return context, csv_files


def history_tables(history: list[dict]) -> list[dict]:
    """Return, per dataset, the history as table rows: rows used and each group mean by build."""
    names: list[str] = []
    for entry in history:
        for d in entry["datasets"]:
            if d["name"] not in names:
                names.append(d["name"])
    builds = [entry["build"] for entry in history]
    dates = [entry.get("built_at") for entry in history]
    out = []
    for name in names:
        per_build = [next((d for d in e["datasets"] if d["name"] == name), None) for e in history]
        rows = [("Rows used", [d["rows_used"] if d else None for d in per_build])]
        labels: list[tuple[str, str]] = []
        for d in per_build:
            for m in d["means"] if d else []:
                if (m["measure"], m["group"]) not in labels:
                    labels.append((m["measure"], m["group"]))
        for measure, group in labels:
            values = []
            for d in per_build:
                found = [
                    m["mean"]
                    for m in (d["means"] if d else [])
                    if (m["measure"], m["group"]) == (measure, group)
                ]
                values.append(found[0] if found else None)
            rows.append((f"Mean {measure}, {group}", values))
        out.append({"name": name, "builds": builds, "dates": dates, "rows": rows})
    return out


def common_context(results: dict, manifest: Manifest) -> dict:
    """Return what every page's layout needs besides its own content."""
    return {
        "results": results,
        "site": manifest.site,
        "version": __version__,
        "built_at": build_time(),
        "nav": [(ds["name"], f"{ds['slug']}.html") for ds in results["datasets"]],
    }


def overview_context(results: dict, settings) -> dict:
    """Return what the overview page needs beyond the common context: each dataset's
    bottom-line rows and data-use line, and the cautions that apply to the site as a whole."""
    from . import bottom_line as bl

    overview, uses, seen, site_cautions = {}, {}, set(), []
    for ds in results["datasets"]:
        overview[ds["slug"]] = bl.bottom_line(ds)
        uses[ds["slug"]] = bl.data_use(ds)
        for caution in bl.cautions(ds, settings):
            # Counts and group names belong to a dataset's page; the overview keeps the
            # general cautions, each once.
            if caution.key not in seen and caution.key in bl.SITE_CAUTIONS:
                seen.add(caution.key)
                site_cautions.append(caution)
            elif caution.key == "many-tests" and caution.key not in seen:
                seen.add(caution.key)
                site_cautions.append(
                    bl.Caution(
                        caution.key,
                        "Each page runs many tests, so a few results may flag by chance; p-values "
                        "are adjusted within each stated family, not across the site.",
                    )
                )
    order = {key: i for i, key in enumerate(bl.CAUTION_ORDER)}
    site_cautions.sort(key=lambda c: order.get(c.key, len(order)))
    return {"overview": overview, "uses": uses, "site_cautions": site_cautions}


def render_site(
    results: dict,
    manifest: Manifest,
    extra_pages: dict | None = None,
    bundle: bytes | None = None,
    pages=None,
) -> dict[str, bytes]:
    """Return every file of the site, path relative to the site root → bytes.

    ``bundle`` is the chart script (Vega, Vega-Lite, vega-embed); made by vl-convert when
    not given. ``pages`` (optional, see :class:`sitebuild.pipeline.PageMemo`) hands back a
    dataset page and its CSV files when nothing the page reads has changed.
    """
    from ..results import dumps, schema  # numpy comes with it: keep it off the no-op path

    env = environment()
    files: dict[str, bytes] = {}
    shown = {
        **results,
        "datasets": [
            display_copy(ds, spec.labels)
            for ds, spec in zip(results["datasets"], manifest.datasets, strict=True)
        ],
    }
    common = common_context(shown, manifest)
    for ds, spec in zip(results["datasets"], manifest.datasets, strict=True):
        name = f"{ds['slug']}.html"
        key = pages.key(ds, spec) if pages is not None else None
        kept = pages.get(key, name) if pages is not None else None
        if kept is not None:
            files.update(kept)
            continue
        context, csv_files = dataset_page(env, common, ds, spec)
        made = dict(csv_files)
        made[name] = env.get_template("dataset.html").render(**context).encode("utf-8")
        files.update(made)
        if pages is not None:
            pages.put(key, made)
    pages = dict(extra_pages or {})
    changes = results.get("changes")
    if changes is not None:
        pages.setdefault(
            "changes.html",
            (
                "changes.html",
                {
                    "changes": changes,
                    "history": history_tables(results.get("history", [])),
                    "dates": [entry.get("built_at") for entry in results.get("history", [])],
                },
            ),
        )
    for name, (template, context) in pages.items():
        files[name] = (
            env.get_template(template)
            .render(**common, **context, current=name, chart_specs={})
            .encode("utf-8")
        )
    summary = changes["summary"] if changes else None
    files["index.html"] = (
        env.get_template("index.html")
        .render(
            **common,
            **overview_context(shown, manifest.site),
            current="index.html",
            chart_specs={},
            changes_summary=summary,
        )
        .encode("utf-8")
    )
    for asset in ("style.css", "site.js", "tables.js"):
        files[f"assets/{asset}"] = asset_bytes(manifest, asset)
    files[ASSET_BUNDLE] = bundle if bundle is not None else chart_bundle()
    files["results.json"] = (dumps(results) + "\n").encode("utf-8")
    files["results.schema.json"] = (json.dumps(schema(), indent=1, sort_keys=True) + "\n").encode(
        "utf-8"
    )
    files[MARKER] = (
        f"This folder is a site written by sitebuild {__version__}. A rebuild replaces it whole.\n".encode()
    )
    return files


# The only project file a render reads besides data and notes: a style sheet is not code, and
# the pages' Content-Security-Policy keeps it from loading anything.
PROJECT_STYLE = "layouts/style.css"


def project_style(manifest: Manifest) -> Path | None:
    """Return the project's ``layouts/style.css`` when it is a regular file inside the project
    folder (a link leading out of it is ignored, like a data file would be refused)."""
    path = manifest.root / PROJECT_STYLE
    try:
        resolved = path.resolve()
        resolved.relative_to(manifest.root.resolve())
    except (OSError, ValueError):
        return None
    return resolved if resolved.is_file() else None


def asset_bytes(manifest: Manifest, asset: str) -> bytes:
    """Return a packaged asset (style.css, site.js); style.css may come from the project.

    Never a project script: ``site.js`` always comes from the installed package.
    """
    if asset == "style.css" and (own := project_style(manifest)) is not None:
        return own.read_bytes()
    return (packaged_layouts() / asset).read_bytes()


def ignored_layouts(manifest: Manifest) -> list[str]:
    """Return a notice naming the project's layout files other than ``style.css``, which are
    never used (templates and scripts from a project folder are code), or an empty list."""
    folder = manifest.root / "layouts"
    if not folder.is_dir():
        return []
    names = sorted(
        p.relative_to(manifest.root).as_posix()
        for p in folder.rglob("*")
        if (p.is_file() or p.is_symlink())
        and p.relative_to(manifest.root).as_posix() != PROJECT_STYLE
    )
    if not names:
        return []
    shown = ", ".join(names[:5]) + (f" and {len(names) - 5} more" if len(names) > 5 else "")
    return [
        f"ignored {shown}: a project may restyle its pages with layouts/style.css only; "
        "templates and scripts from a project folder are never used, as they could run code"
    ]


def layout_files(manifest: Manifest) -> list[Path]:
    """Return every layout file a render may read: the packaged ones and the project's
    style sheet."""
    found = sorted(p for p in packaged_layouts().rglob("*") if p.is_file())
    own = project_style(manifest)
    return found + ([own] if own is not None else [])
