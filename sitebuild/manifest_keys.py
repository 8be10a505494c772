"""Every manifest key with its meaning and default, for ``sitebuild manifest`` (an installed
user has no README). A test keeps this list and :mod:`sitebuild.manifest` in step."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class KeyHelp:
    """One manifest key: where it goes, its default (None: required or unset) and meaning."""

    table: str  # "site" or "datasets"
    key: str
    default: str
    meaning: str


KEYS: tuple[KeyHelp, ...] = (
    KeyHelp("site", "title", '"Group comparison"', "shown at the top of every page"),
    KeyHelp("site", "confidence", "0.95", "confidence level of every interval"),
    KeyHelp("site", "alpha", "0.05", "significance level adjusted p-values are judged against"),
    KeyHelp("site", "seed", "20261201", "seed for everything random (samples, permutations)"),
    KeyHelp("site", "adjust", '"holm"', "p-value adjustment: holm, bh, bonferroni or none"),
    KeyHelp("site", "output", '"site_output"', "folder the site is written to, in the project"),
    KeyHelp("site", "history", "10", "how many earlier builds the changes page remembers"),
    KeyHelp("datasets", "name", "required", "the dataset's page title; unique"),
    KeyHelp(
        "datasets",
        "file",
        "required",
        "data file, folder or pattern (data/*.csv): .csv .tsv .txt (also .gz), .xlsx .xlsm "
        ".xls .ods, .parquet, .jsonl, .sqlite",
    ),
    KeyHelp("datasets", "group", "required", "the column whose values name the groups"),
    KeyHelp("datasets", "measures", "required", "numeric columns to summarise and compare"),
    KeyHelp("datasets", "x", "none", "a numeric or date column each measure is plotted against"),
    KeyHelp("datasets", "notes", "none", "a markdown file shown at the top of the page"),
    KeyHelp("datasets", "reference", "none", "a group every other group is compared with"),
    KeyHelp("datasets", "order", "[]", "groups shown first, in this order"),
    KeyHelp(
        "datasets",
        "equivalence_margin",
        "{}",
        "per measure, a difference small enough to call groups equivalent",
    ),
    KeyHelp("datasets", "smooth_span", "0.75", 'share of rows in each local smooth, or "auto"'),
    KeyHelp("datasets", "smooth_degree", "1", "degree of the local smooth: 1 or 2"),
    KeyHelp("datasets", "smooth_robust", "0", "robustness passes of the smooth (0 to 10)"),
    KeyHelp("datasets", "permutations", "0", "permutation-test resamples per pair (0: off)"),
    KeyHelp("datasets", "engine", '"auto"', "auto, memory, stream or dask (for very large data)"),
    KeyHelp(
        "datasets", "sheet", "the first sheet", "spreadsheet sheet: its name or 0-based number"
    ),
    KeyHelp(
        "datasets",
        "encoding",
        "detected",
        "text encoding; detected as byte-order mark, then UTF-8, then Windows-1252",
    ),
    KeyHelp("datasets", "decimal", "detected per column", 'decimal mark of numbers: "," or "."'),
    KeyHelp("datasets", "header_row", "1", "the line (1-based) that names the columns"),
    KeyHelp(
        "datasets",
        "aliases",
        "{}",
        'group labels to merge, e.g. { "cardiology" = "Cardiology" }',
    ),
    KeyHelp(
        "datasets",
        "where",
        "{}",
        "rows to keep: { column = [low, high] } (numbers or ISO dates, inclusive) or "
        '{ column = ["a", "b"] } (any of these values)',
    ),
    KeyHelp(
        "datasets",
        "min_group_size",
        "5",
        "groups with fewer values are shown but left out of the tests",
    ),
    KeyHelp("datasets", "date_format", "ISO 8601", 'layout of dates in x, e.g. "%d/%m/%Y"'),
    KeyHelp("datasets", "table", "none", "SQLite: the table to read"),
    KeyHelp("datasets", "query", "none", "SQLite: a SELECT query to read (opened read-only)"),
    KeyHelp("datasets", "better", "{}", 'per measure, "lower" or "higher": which way is good'),
    KeyHelp("datasets", "labels", "{}", 'names shown for group codes, e.g. { "01" = "clay" }'),
    KeyHelp(
        "datasets",
        "limits",
        "{}",
        "spec limits per measure: [lower, upper], { lower = .. } or { upper = .. }",
    ),
    KeyHelp("datasets", "target", "{}", "the value aimed at per measure, inside the limits"),
    KeyHelp("datasets", "time_unit", "none", "x is time counted in this unit (day, week...)"),
)


def describe(extra: dict[str, dict[str, str]] | None = None) -> str:
    """Return the text ``sitebuild manifest`` prints: every key, its default and meaning.

    ``extra`` maps "site"/"datasets" to the validator's key tables; a key there without an
    entry in :data:`KEYS` is still listed (with its type), so no key is ever missing.
    """
    lines = [
        "manifest.toml keys (TOML; paths are relative to the manifest and stay inside its folder)",
        "",
    ]
    for table, heading in (("site", "[site]"), ("datasets", "[[datasets]] (one per data file)")):
        lines.append(heading)
        known = [k for k in KEYS if k.table == table]
        width = max(len(k.key) for k in known) + 2
        for k in known:
            lines.append(f"  {k.key:<{width}}{k.meaning} (default: {k.default})")
        for key, kind in (extra or {}).get(table, {}).items():
            if key not in {k.key for k in known}:
                lines.append(f"  {key:<{width}}{kind}")
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"
