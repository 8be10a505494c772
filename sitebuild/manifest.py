"""Read and validate ``manifest.toml`` into frozen dataclasses.

Every problem becomes one :class:`SitebuildError` sentence naming the file, the key (and the
line where it can be found) and the fix.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import re
import stat
import tomllib
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

from .errors import SitebuildError

MANIFEST_NAME = "manifest.toml"
ADJUST_METHODS = ("holm", "bh", "bonferroni", "none")
ENGINES = ("auto", "memory", "stream", "dask")
DEFAULT_OUTPUT = "site_output"
CONFIDENCE_RANGE = (0.5, 0.9999)
ALPHA_RANGE = (0.0001, 0.5)

SITE_KEYS = {
    "title": "text",
    "confidence": "number",
    "alpha": "number",
    "seed": "integer",
    "adjust": "text",
    "output": "text",
    "history": "integer",
}
DATASET_KEYS = {
    "name": "text",
    "file": "text",
    "group": "text",
    "measures": "list of text",
    "x": "text",
    "notes": "text",
    "reference": "text",
    "order": "list of text",
    "equivalence_margin": "table of numbers",
    "smooth_span": 'number or "auto"',
    "smooth_degree": "integer",
    "smooth_robust": "integer",
    "permutations": "integer",
    "engine": "text",
    # Reading real-world files (see sitebuild.readers).
    "sheet": "text or integer",
    "encoding": "text",
    "decimal": "text",
    "header_row": "integer",
    "aliases": "table of text",
    "where": "table of lists",
    "min_group_size": "integer",
    "date_format": "text",
    "table": "text",
    "query": "text",
    # Practitioner keys (see _practice_keys): direction, display names, spec limits, time.
    "better": "table of text",
    "labels": "table of text",
    "limits": "table of limits",
    "target": "table of numbers",
    "time_unit": "text",
}
DEFAULT_MIN_GROUP_SIZE = 5  # common practice: below ~5 values a group's tests say little
# Pages the site writes itself; a dataset's page may never take one of these names.
RESERVED_SLUGS = frozenset({"index", "changes", "results", "assets", "about", "404"})
# Windows refuses these as file names whatever the extension.
WINDOWS_RESERVED = frozenset(
    {"con", "prn", "aux", "nul"} | {f"com{i}" for i in range(10)} | {f"lpt{i}" for i in range(10)}
)
SLUG_LENGTH = 60
DIRECTIONS = ("lower", "higher")
# x counts time in this unit (numbers, or dates read as such); trends are given per unit.
TIME_UNITS = ("second", "minute", "hour", "day", "week", "month", "year")


@dataclass(frozen=True)
class SiteSettings:
    """The ``[site]`` table: settings shared by every dataset."""

    title: str = "Group comparison"
    confidence: float = 0.95
    alpha: float = 0.05
    seed: int = 20261201
    adjust: str = "holm"
    output: str = DEFAULT_OUTPUT
    history: int = 10


@dataclass(frozen=True)
class DatasetSpec:
    """One ``[[datasets]]`` entry, with its file path resolved inside the project."""

    name: str
    file: str
    path: Path
    group: str
    measures: tuple[str, ...]
    x: str | None = None
    notes: str | None = None
    notes_path: Path | None = None
    reference: str | None = None
    order: tuple[str, ...] = ()  # groups shown first, in this order; the rest follow naturally
    equivalence_margin: dict[str, float] = field(default_factory=dict)
    smooth_span: float | str = 0.75
    smooth_degree: int = 1
    smooth_robust: int = 0
    permutations: int = 0
    engine: str = "auto"
    sheet: str | int | None = None  # spreadsheet sheet: name or 0-based index (default first)
    encoding: str | None = None  # text encoding; None = detect (BOM, UTF-8, Windows-1252)
    decimal: str | None = None  # "," or "."; None = decided per column from the values
    header_row: int = 1  # 1-based line (or spreadsheet row) that names the columns
    aliases: dict[str, str] = field(default_factory=dict)  # group label -> label it merges into
    where: dict[str, tuple] = field(default_factory=dict)  # column -> [low, high] or values
    min_group_size: int = DEFAULT_MIN_GROUP_SIZE
    date_format: str | None = None  # strftime layout of a date x, e.g. "%d/%m/%Y"
    table: str | None = None  # SQLite table
    query: str | None = None  # SQLite read-only query
    page: str | None = None  # the page name, set by load_manifest (unique within the site)
    # Which way is good per measure ("lower" or "higher"); measures not named have no direction.
    better: dict[str, str] = field(default_factory=dict)
    # Display names of group codes; results.json keeps the codes.
    labels: dict[str, str] = field(default_factory=dict)
    # Spec limits per measure: (lower, upper), either may be None for a one-sided limit.
    limits: dict[str, tuple[float | None, float | None]] = field(default_factory=dict)
    target: dict[str, float] = field(default_factory=dict)
    time_unit: str | None = None  # x is a time axis counted in this unit

    def label(self, group: str | None) -> str | None:
        """Return the display name of a group code (the code itself when it has none)."""
        return self.labels.get(group, group) if group is not None else None

    @property
    def slug(self) -> str:
        """A file-name-safe identifier for the dataset's page."""
        return self.page or slugify(self.name)

    def section(self) -> dict:
        """The manifest entry as plain data (cache keys and results.json use it)."""
        return {
            "name": self.name,
            "file": self.file,
            "group": self.group,
            "measures": list(self.measures),
            "x": self.x,
            "notes": self.notes,
            "reference": self.reference,
            "order": list(self.order),
            "equivalence_margin": dict(sorted(self.equivalence_margin.items())),
            "smooth_span": self.smooth_span,
            "smooth_degree": self.smooth_degree,
            "smooth_robust": self.smooth_robust,
            "permutations": self.permutations,
            "engine": self.engine,
            **{
                key: value
                for key, value in (
                    ("sheet", self.sheet),
                    ("encoding", self.encoding),
                    ("decimal", self.decimal),
                    ("header_row", self.header_row if self.header_row != 1 else None),
                    ("aliases", dict(sorted(self.aliases.items())) or None),
                    ("where", {k: list(v) for k, v in sorted(self.where.items())} or None),
                    ("min_group_size", self.min_group_size),
                    ("date_format", self.date_format),
                    ("table", self.table),
                    ("query", self.query),
                )
                if value is not None
            },
            "better": dict(sorted(self.better.items())),
            "labels": dict(sorted(self.labels.items())),
            "limits": {k: list(v) for k, v in sorted(self.limits.items())},
            "target": dict(sorted(self.target.items())),
            "time_unit": self.time_unit,
        }


@dataclass(frozen=True)
class Manifest:
    """A validated manifest: where the project lives, its settings and datasets."""

    root: Path
    path: Path
    site: SiteSettings
    datasets: tuple[DatasetSpec, ...]


def slugify(name: str) -> str:
    """Return a page name for ``name``: letters of any script kept, never empty, portable.

    NFKC-normalised and lower-cased; anything but letters, digits, '-' and '_' becomes '-';
    at most SLUG_LENGTH characters; a Windows device name or one of the site's own page names
    gets '-data' appended.

    Examples
    --------
    >>> slugify("Qualität"), slugify("Данные по цехам"), slugify("東京 工場"), slugify("Index")
    ('qualität', 'данные-по-цехам', '東京-工場', 'index-data')
    """
    text = unicodedata.normalize("NFKC", name).lower()
    slug = re.sub(r"[^\w-]+|_", "-", text).strip("-.")
    slug = re.sub(r"-{2,}", "-", slug)[:SLUG_LENGTH].strip("-") or "dataset"
    if slug in RESERVED_SLUGS or slug.split(".")[0] in WINDOWS_RESERVED:
        slug += "-data"
    return slug


def unique_slug(name: str, taken: set[str]) -> str:
    """Return :func:`slugify` of ``name``, with a short hash of the name when already taken."""
    slug = slugify(name)
    if slug not in taken:
        return slug
    suffix = hashlib.sha256(name.encode("utf-8")).hexdigest()[:6]
    return f"{slug[: SLUG_LENGTH - 7]}-{suffix}"


def _key_line(text: str, key: str, block: int | None) -> int | None:
    """Find the TOML line of ``key`` inside ``[site]`` (block None) or the n-th ``[[datasets]]``."""
    lines = text.splitlines()
    current: int | None = -1  # -1: top level, None: [site], n: n-th dataset
    seen = -1
    for number, line in enumerate(lines, start=1):
        stripped = line.strip()
        if stripped.startswith("[[datasets]]"):
            seen += 1
            current = seen
            continue
        if stripped.startswith("[site]"):
            current = None
            continue
        if stripped.startswith("["):
            current = -2
            continue
        if current == block or (block is None and current is None):
            if re.match(rf"""^["']?{re.escape(key)}["']?\s*[=.]""", stripped):
                return number
    return None


class _Checker:
    """Collects the context (file, text) so each error sentence names file, key and line."""

    def __init__(self, path: Path, text: str):
        self.path = path
        self.text = text

    def fail(self, where: str, key: str, problem: str, fix: str, block: int | None = -1):
        line = _key_line(self.text, key, block) if block != -1 else None
        at = f" (line {line})" if line else ""
        raise SitebuildError(_shown(f"{self.path.name}{at}: {where}{key} {problem}; {fix}."))

    def unknown(self, where: str, key: str, allowed: dict, block: int | None):
        close = difflib.get_close_matches(key, list(allowed), n=1, cutoff=0.5)
        line = _key_line(self.text, key, block)
        at = f" (line {line})" if line else ""
        hint = f"did you mean '{close[0]}'" if close else "valid keys are " + ", ".join(allowed)
        place = f" in {where.strip()}" if where.strip() else ""
        raise SitebuildError(_shown(f"{self.path.name}{at}: unknown key '{key}'{place}; {hint}."))


def _toml_problem(text: str, exc: Exception) -> str:
    """Return the parser's complaint, with the line where the broken part starts when the parser
    only says "at end of document" (an unclosed array, table or string)."""
    problem = _shown(str(exc))
    if re.search(r"\bline \d+", problem):
        return problem
    lines = text.splitlines()
    # The broken construct starts at the first line from which no longer prefix parses.
    for count in range(len(lines), 0, -1):
        try:
            tomllib.loads("\n".join(lines[: count - 1]))
        except tomllib.TOMLDecodeError:
            continue
        return problem.replace("(at end of document)", "").rstrip() + (
            f" (at end of document; the unclosed part starts at line {count})"
        )
    return problem


def _shown(text: str) -> str:
    """Return user text fit for a one-line message: line breaks and control characters escaped."""
    if text.isprintable():
        return text
    return "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)


def _dask_installed() -> bool:
    """Return True when the optional Dask packages can be imported (found, not imported)."""
    from importlib.util import find_spec

    return all(find_spec(name) is not None for name in ("dask", "distributed"))


def _is_number(value) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _is_limit(value) -> bool:
    """A limit entry: [lower, upper] numbers, or a table with lower and/or upper."""
    if isinstance(value, list):
        return len(value) == 2 and all(_is_number(v) for v in value)
    if isinstance(value, dict):
        return bool(value) and all(
            k in ("lower", "upper") and _is_number(v) for k, v in value.items()
        )
    return False


def _inside(root: Path, candidate: Path) -> bool:
    try:
        candidate.resolve().relative_to(root.resolve())
    except ValueError:
        return False
    return True


def _project_path(check: _Checker, root: Path, where: str, key: str, raw: str, block: int) -> Path:
    if not raw.strip():
        check.fail(where, key, "is empty", "give a path relative to the project folder", block)
    relative = Path(raw)
    if relative.is_absolute() or ".." in relative.parts:
        check.fail(
            where,
            key,
            f"'{raw}' points outside the project folder",
            "give a path inside the project folder, relative to manifest.toml",
            block,
        )
    if "\0" in raw:
        check.fail(where, key, "holds a NUL character", "remove it from the path", block)
    resolved = root / relative
    if not _inside(root, resolved):
        check.fail(
            where,
            key,
            f"'{raw}' resolves outside the project folder (through a link)",
            "copy the file into the project folder",
            block,
        )
    if key == "file" and any(c in raw for c in "*?["):
        import glob

        matches = [Path(p) for p in glob.glob(str(resolved), recursive=True)]
        base = resolved
        while any(c in base.as_posix() for c in "*?["):
            base = base.parent
        if not _inside(root, base):
            check.fail(
                where,
                key,
                f"'{raw}' resolves outside the project folder (through a link)",
                "copy the files into the project folder",
                block,
            )
        if not any(p.is_file() and _inside(root, p) for p in matches):
            check.fail(
                where,
                key,
                f"'{raw}' matches no file",
                'check the pattern (e.g. "data/*.csv") or add the files',
                block,
            )
        return resolved
    # A folder is a dataset of Parquet parts (read by the stream or dask engine). Judged by
    # type, never by opening: a FIFO would block the build, a device never end.
    try:
        mode = resolved.stat().st_mode
    except OSError:
        mode = None
    if mode is not None and not (stat.S_ISREG(mode) or (key == "file" and stat.S_ISDIR(mode))):
        kind = "a folder" if stat.S_ISDIR(mode) else "not a regular file"
        check.fail(
            where,
            key,
            f"names '{raw}', which is {kind}",
            "name a data file" if key == "file" else "name a markdown file",
            block,
        )
    if mode is None:
        check.fail(
            where,
            key,
            f"names '{raw}', which does not exist",
            "check the spelling or add the file to the project folder",
            block,
        )
    return resolved


def _check_types(check: _Checker, table: dict, allowed: dict, where: str, block: int | None):
    for key, value in table.items():
        if key not in allowed:
            check.unknown(where, key, allowed, block)
        kind = allowed[key]
        ok = {
            "text": isinstance(value, str),
            "number": _is_number(value),
            "integer": isinstance(value, int) and not isinstance(value, bool),
            "list of text": isinstance(value, list) and all(isinstance(v, str) for v in value),
            "table of numbers": isinstance(value, dict)
            and all(_is_number(v) for v in value.values()),
            'number or "auto"': _is_number(value) or value == "auto",
            "text or integer": isinstance(value, str)
            or (isinstance(value, int) and not isinstance(value, bool)),
            "table of text": isinstance(value, dict)
            and all(isinstance(v, str) for v in value.values()),
            "table of lists": isinstance(value, dict)
            and all(isinstance(v, list) and v for v in value.values()),
            "table of limits": isinstance(value, dict)
            and all(_is_limit(v) for v in value.values()),
        }[kind]
        if not ok:
            shown = type(value).__name__
            check.fail(where, key, f"must be {kind}, not {shown}", f"write it as {kind}", block)


def _reading_keys(check: _Checker, entry: dict, label: str, index: int, measures) -> dict:
    """Return the validated keys that say how to read the file (sheet, encoding, where...)."""
    decimal = entry.get("decimal")
    if decimal is not None and decimal not in (",", "."):
        check.fail(label, "decimal", f"is '{decimal}'", 'use "," or "."', index)
    header_row = entry.get("header_row", 1)
    if not 1 <= header_row <= 10_000:
        check.fail(
            label,
            "header_row",
            f"is {header_row}",
            "give the 1-based line of the column names",
            index,
        )
    sheet = entry.get("sheet")
    if isinstance(sheet, int) and sheet < 0:
        check.fail(
            label, "sheet", f"is {sheet}", "count sheets from 0, or give the sheet's name", index
        )
    size = entry.get("min_group_size", DEFAULT_MIN_GROUP_SIZE)
    if not 2 <= size <= 1_000_000:
        check.fail(
            label, "min_group_size", f"is {size}", "use a whole number from 2 up, e.g. 5", index
        )
    where = {}
    for column, wanted in entry.get("where", {}).items():
        if not all(isinstance(w, str | int | float) and not isinstance(w, bool) for w in wanted):
            check.fail(
                label,
                "where",
                f"for '{column}' holds something other than numbers or text",
                'write [low, high] or a list of values, e.g. { shift = ["early", "late"] }',
                index,
            )
        where[column] = tuple(wanted)
    encoding = entry.get("encoding")
    if encoding is not None:
        import codecs

        try:
            codecs.lookup(encoding)
        except LookupError:
            check.fail(
                label,
                "encoding",
                f"is '{encoding}', which is not an encoding we know",
                'use e.g. "utf-8", "windows-1252" or "utf-16"',
                index,
            )
    if entry.get("table") is not None and entry.get("query") is not None:
        check.fail(label, "query", "is given with table", "give one of table or query", index)
    query = entry.get("query")
    if query is not None and not re.match(r"(?is)^\s*(select|with)\b", query):
        check.fail(
            label,
            "query",
            "is not a SELECT query",
            "write a query that starts with SELECT (the database is opened read-only)",
            index,
        )
    return {
        "sheet": sheet,
        "encoding": encoding,
        "decimal": decimal,
        "header_row": header_row,
        "aliases": {str(k).strip(): v.strip() for k, v in entry.get("aliases", {}).items()},
        "where": where,
        "min_group_size": size,
        "date_format": entry.get("date_format"),
        "table": entry.get("table"),
        "query": query,
    }


def load_manifest(project: str | Path) -> Manifest:
    """Return the validated manifest of the project folder ``project``."""
    root = Path(project)
    if not root.exists():
        raise SitebuildError(
            f"{root}: the project folder does not exist; check the path or create it with "
            "'sitebuild new'."
        )
    if root.is_file() and root.name == MANIFEST_NAME:
        root = root.parent
    path = root / MANIFEST_NAME
    if not path.is_file():
        raise SitebuildError(
            f"{root}: no {MANIFEST_NAME} in this folder; add one (see README) or create a "
            "project with 'sitebuild new'."
        )
    raw_bytes = path.read_bytes()
    try:
        text = raw_bytes.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise SitebuildError(
            f"{MANIFEST_NAME}: the file is not UTF-8 text (byte {exc.start}); save it as UTF-8."
        ) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SitebuildError(
            f"{MANIFEST_NAME}: not valid TOML: {_toml_problem(text, exc)}; fix the syntax at "
            "that line."
        ) from None
    check = _Checker(path, text)
    for key in data:
        if key not in ("site", "datasets"):
            check.unknown("", key, {"site": 0, "datasets": 0}, -1)

    site_table = data.get("site", {})
    if not isinstance(site_table, dict):
        check.fail("", "site", "must be a table", "write it as [site]")
    _check_types(check, site_table, SITE_KEYS, "[site] ", None)
    site = SiteSettings(**site_table)
    # Sane ranges, not just (0, 1): a confidence of 0.9999999999999999 overflows the interval
    # arithmetic, and one below 0.5 or an alpha above 0.5 is a slip, never a design.
    for key, low, high, example in (
        ("confidence", CONFIDENCE_RANGE[0], CONFIDENCE_RANGE[1], "0.95"),
        ("alpha", ALPHA_RANGE[0], ALPHA_RANGE[1], "0.05"),
    ):
        value = getattr(site, key)
        if math.isnan(value) or not low <= value <= high:
            check.fail(
                "[site] ",
                key,
                f"is {value}, outside {low} to {high}",
                f"use a value in that range, e.g. {example}",
                None,
            )
    if site.adjust not in ADJUST_METHODS:
        close = difflib.get_close_matches(site.adjust.lower(), ADJUST_METHODS, n=1)
        hint = f" (did you mean '{close[0]}'?)" if close else ""
        check.fail(
            "[site] ",
            "adjust",
            f"is '{site.adjust}', which is not a method we know{hint}",
            "use one of " + ", ".join(ADJUST_METHODS),
            None,
        )
    if site.seed < 0:
        check.fail("[site] ", "seed", f"is {site.seed}", "use a whole number, 0 or more", None)
    if not 1 <= site.history <= 1000:
        check.fail("[site] ", "history", "must be between 1 and 1000", "use e.g. 10", None)
    if not site.title.strip():
        check.fail("[site] ", "title", "is empty", "give the site a title", None)

    entries = data.get("datasets")
    if not isinstance(entries, list) or not entries:
        raise SitebuildError(
            f"{MANIFEST_NAME}: no [[datasets]] entries; add at least one with name, file, "
            "group and measures."
        )
    datasets = []
    names: dict[str, int] = {}
    slugs: dict[str, str] = {}
    for index, entry in enumerate(entries):
        if not isinstance(entry, dict):
            check.fail("", "datasets", "must be an array of tables", "write [[datasets]]")
        label = f"[[datasets]] #{index + 1} "
        _check_types(check, entry, DATASET_KEYS, label, index)
        for required in ("name", "file", "group", "measures"):
            if required not in entry:
                raise SitebuildError(
                    f"{MANIFEST_NAME}: {label.strip()} has no '{required}' key; add "
                    f"{required} = ... to that entry."
                )
        name = entry["name"].strip()
        if not name:
            check.fail(label, "name", "is empty", "give the dataset a name", index)
        label = f"dataset '{name}': "
        if name in names:
            check.fail(
                label,
                "name",
                f"is used by dataset #{names[name] + 1} too",
                "give each dataset its own name",
                index,
            )
        names[name] = index
        measures = tuple(entry["measures"])
        if not measures:
            check.fail(label, "measures", "is empty", "list at least one numeric column", index)
        if len(set(measures)) != len(measures):
            check.fail(label, "measures", "lists a column twice", "list each column once", index)
        if entry["group"] in measures:
            check.fail(
                label,
                "measures",
                f"includes the group column '{entry['group']}'",
                "list only numeric columns to compare, not the column that names the groups",
                index,
            )
        x = entry.get("x")
        if x is not None and x == entry["group"]:
            check.fail(label, "x", "is the group column", "choose a numeric column", index)
        data_path = _project_path(check, root, label, "file", entry["file"], index)
        notes = entry.get("notes")
        notes_path = None
        if notes is not None:
            notes_path = _project_path(check, root, label, "notes", notes, index)
        margins = dict(entry.get("equivalence_margin", {}))
        for measure, margin in margins.items():
            if measure not in measures:
                check.fail(
                    label,
                    "equivalence_margin",
                    f"names '{measure}', which is not one of the measures",
                    "use a measure listed in measures",
                    index,
                )
            if not margin > 0 or math.isinf(margin):
                check.fail(
                    label,
                    "equivalence_margin",
                    f"for '{measure}' is {margin}",
                    "give a positive margin in the measure's units",
                    index,
                )
        order = tuple(entry.get("order", ()))
        if len(set(order)) != len(order):
            check.fail(label, "order", "lists a group twice", "list each group once", index)
        span = entry.get("smooth_span", 0.75)
        if span != "auto" and not 0 < span <= 1:
            check.fail(label, "smooth_span", f"is {span}", 'use a share in (0, 1] or "auto"', index)
        degree = entry.get("smooth_degree", 1)
        if degree not in (1, 2):
            check.fail(label, "smooth_degree", f"is {degree}", "use 1 or 2", index)
        robust = entry.get("smooth_robust", 0)
        if not 0 <= robust <= 10:
            check.fail(label, "smooth_robust", f"is {robust}", "use 0 to 10 iterations", index)
        permutations = entry.get("permutations", 0)
        if not 0 <= permutations <= 1_000_000:
            check.fail(label, "permutations", f"is {permutations}", "use 0 (off) to 1000000", index)
        engine = entry.get("engine", "auto")
        if engine not in ENGINES:
            check.fail(label, "engine", f"is '{engine}'", "use one of " + ", ".join(ENGINES), index)
        reading = _reading_keys(check, entry, label, index, measures)
        practice = _practice_keys(check, entry, measures, label, index)
        if engine == "dask" and not _dask_installed():
            check.fail(
                label,
                "engine",
                'is "dask", but Dask is not installed',
                "install the dask extra: pip install 'sitebuild[dask]' (or use engine = "
                '"stream")',
                index,
            )
        spec = DatasetSpec(
            **practice,
            name=name,
            file=entry["file"],
            path=data_path,
            group=entry["group"],
            measures=measures,
            x=x,
            notes=notes,
            notes_path=notes_path,
            reference=entry.get("reference"),
            order=order,
            equivalence_margin={k: float(v) for k, v in margins.items()},
            smooth_span=float(span) if span != "auto" else "auto",
            smooth_degree=degree,
            smooth_robust=robust,
            permutations=permutations,
            engine=engine,
            page=unique_slug(name, set(slugs)),
            **reading,
        )
        slugs[spec.slug] = name
        datasets.append(spec)
    return Manifest(root=root, path=path, site=site, datasets=tuple(datasets))


def _measure_key(check: _Checker, key: str, measure: str, measures, label: str, index: int):
    """Fail unless ``measure`` (a key of the table ``key``) is one of the measures."""
    if measure in measures:
        return
    close = difflib.get_close_matches(measure, list(measures), n=1, cutoff=0.5)
    hint = f"did you mean '{close[0]}'" if close else "use a measure listed in measures"
    check.fail(label, key, f"names '{measure}', which is not one of the measures", hint, index)


def _practice_keys(check: _Checker, entry: dict, measures, label: str, index: int) -> dict:
    """Return the validated better / labels / limits / target / time_unit of one dataset."""
    better = dict(entry.get("better", {}))
    for measure, way in better.items():
        _measure_key(check, "better", measure, measures, label, index)
        if way not in DIRECTIONS:
            close = difflib.get_close_matches(str(way).lower(), DIRECTIONS, n=1, cutoff=0.4)
            hint = f"did you mean '{close[0]}'" if close else 'use "lower" or "higher"'
            check.fail(label, "better", f"for '{measure}' is '{way}'", hint, index)
    labels = dict(entry.get("labels", {}))
    seen: dict[str, str] = {}
    for code, shown in labels.items():
        if not shown.strip():
            check.fail(label, "labels", f"gives group '{code}' an empty name", "give a name", index)
        if shown in seen:
            check.fail(
                label,
                "labels",
                f"gives '{seen[shown]}' and '{code}' the same name '{shown}'",
                "give each group its own name",
                index,
            )
        seen[shown] = code
    limits: dict[str, tuple[float | None, float | None]] = {}
    for measure, value in dict(entry.get("limits", {})).items():
        _measure_key(check, "limits", measure, measures, label, index)
        if isinstance(value, list):
            low, high = float(value[0]), float(value[1])
        else:
            low, high = value.get("lower"), value.get("upper")
            low = float(low) if low is not None else None
            high = float(high) if high is not None else None
        bad = [v for v in (low, high) if v is not None and not math.isfinite(v)]
        if bad or (low is not None and high is not None and not low < high):
            check.fail(
                label,
                "limits",
                f"for '{measure}' is not a range with the lower limit below the upper",
                "write [lower, upper], { lower = ... } or { upper = ... }",
                index,
            )
        limits[measure] = (low, high)
    target = {k: float(v) for k, v in dict(entry.get("target", {})).items()}
    for measure, value in target.items():
        _measure_key(check, "target", measure, measures, label, index)
        low, high = limits.get(measure, (None, None))
        if (
            not math.isfinite(value)
            or (low is not None and value < low)
            or (high is not None and value > high)
        ):
            check.fail(
                label,
                "target",
                f"for '{measure}' is {value:g}, outside its limits",
                "give a target between the lower and upper limits",
                index,
            )
    unit = entry.get("time_unit")
    if unit is not None:
        if not entry.get("x"):
            check.fail(label, "time_unit", "is set but there is no x", "add x = ...", index)
        if unit not in TIME_UNITS:
            close = difflib.get_close_matches(unit.rstrip("s"), list(TIME_UNITS), n=1)
            hint = f"did you mean '{close[0]}'" if close else "use one of " + ", ".join(TIME_UNITS)
            check.fail(label, "time_unit", f"is '{unit}'", hint, index)
    return {"better": better, "labels": labels, "limits": limits, "target": target,
            "time_unit": unit}  # fmt: skip
