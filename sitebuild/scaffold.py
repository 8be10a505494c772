"""``sitebuild new``: a project folder that builds at once, to copy and adapt.

The dataset is an invented bakery trial made here from a fixed seed, so every new project
starts with the same small file.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

from .errors import SitebuildError

SEED = 7310
FLOURS = (("stoneground wheat", 1510.0), ("spelt blend", 1440.0), ("rye blend", 1290.0))

MANIFEST = """\
# A sitebuild project: this file says which data to read and how to compare the groups.
# Build the site with:   sitebuild build {folder}
# Paths are relative to this file and must stay inside this folder.

[site]
# Shown at the top of every page.
title = "Bakery proofing trial"
# Confidence level of every interval on the site.
confidence = 0.95
# Significance level an adjusted p-value is judged against.
alpha = 0.05
# Seed for everything random (sampled chart points, permutation tests).
seed = {seed}
# How p-values are adjusted for multiple tests: holm, bh, bonferroni or none.
adjust = "holm"
# Where the site is written (a folder inside the project unless you pass --out).
output = "site"
# How many earlier builds the change page keeps headline numbers for.
history = 10

# One [[datasets]] block per data file; copy this block to add another.
[[datasets]]
# The name used for the dataset's page; must be unique.
name = "Loaves by flour"
# The data file: comma-, semicolon- or tab-separated text, Parquet or JSON Lines.
file = "data/loaves.csv"
# The column whose values name the groups to compare.
group = "flour"
# Numeric columns to summarise and compare between groups.
measures = ["loaf volume (ml)", "crust score"]
# Optional explanatory column: each measure is plotted and smoothed against it.
x = "proofing time (min)"
# Optional markdown note shown at the top of the dataset's page.
notes = "notes/loaves.md"
# Optional: which way is good per measure ("lower" or "higher"); the findings then name
# the best and worst group and say better/worse instead of higher/lower.
better = {{ "loaf volume (ml)" = "higher" }}
# Optional: names shown for group codes on pages, charts and CSV files (results.json keeps
# the codes).
# labels = {{ "rye blend" = "rye, house blend" }}
# Optional: spec limits per measure, as [lower, upper], {{ lower = ... }} or {{ upper = ... }},
# and a target; the page counts values outside and gives Cp and Cpk per group.
# limits = {{ "loaf volume (ml)" = [1350, 1950] }}
# target = {{ "loaf volume (ml)" = 1650 }}
# Optional: x is a time axis counted in this unit (second, minute, hour, day, week, month,
# year); each group's trend is then given per unit.
# time_unit = "day"
"""

NOTES = """\
# About this data

An invented trial made by `sitebuild new`: {n} loaves, {per} per flour, each proofed for
between 40 and 90 minutes, then measured for volume and scored for crust colour (1 to 10)
by one taster. Replace `data/loaves.csv` with your own file and edit `manifest.toml`.
"""


@dataclass(frozen=True)
class NewProject:
    """The folder made by :func:`new_project` and the files in it (relative paths)."""

    root: Path
    files: tuple[str, ...]


def loaves_csv(rng, per_flour: int = 12) -> str:
    """Return the invented bakery trial as CSV text, drawn from ``rng``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["loaf", "flour", "proofing time (min)", "loaf volume (ml)", "crust score"])
    number = 0
    for flour, volume in FLOURS:
        for _ in range(per_flour):
            number += 1
            proof = float(rng.uniform(40, 90))
            # Volume rises with proofing, then levels off: a gentle curve for the smooth.
            grown = volume + 260 * (1 - 2.718281828 ** (-(proof - 40) / 25))
            loaf_volume = grown + float(rng.normal(0, 45))
            crust = min(10, max(1, round(float(rng.normal(6.2 if "rye" in flour else 5.4, 1.1)))))
            writer.writerow([f"L{number:03d}", flour, f"{proof:.0f}", f"{loaf_volume:.0f}", crust])
    return buffer.getvalue()


def new_project(folder: str | Path) -> NewProject:
    """Create a project folder with a commented manifest, a data file and a notes file."""
    import numpy as np

    root = Path(folder)
    if root.exists() and not root.is_dir():
        raise SitebuildError(
            f"{root}: exists and is a file; choose a new folder name for 'sitebuild new'."
        )
    per = 12
    contents = {
        "manifest.toml": MANIFEST.format(folder=root.as_posix(), seed=SEED),
        "data/loaves.csv": loaves_csv(np.random.default_rng(SEED), per),
        "notes/loaves.md": NOTES.format(n=per * len(FLOURS), per=per),
        ".gitignore": "site/\n.sitebuild_cache/\n",
    }
    # A folder that already holds the user's files is fine; nothing in it is overwritten.
    taken = [name for name in contents if (root / name).exists()]
    if taken:
        raise SitebuildError(
            f"{root}: already holds {', '.join(taken)}, which 'sitebuild new' never overwrites; "
            "choose another folder, or use 'sitebuild new FOLDER --from your-data.csv' "
            "(nothing was changed)."
        )
    try:
        for name, text in contents.items():
            path = root / name
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise SitebuildError(
            f"{root}: cannot create the project here ({exc.strerror}); choose another folder."
        ) from None
    return NewProject(root=root, files=tuple(contents))


FROM_MANIFEST = """\
# A sitebuild project proposed from {data}. Check the guesses below, then rebuild with:
#   sitebuild build {folder}
# Every key, its meaning and default: sitebuild manifest

[site]
title = {title}
# Where the site is written, inside this folder.
output = "site"

[[datasets]]
name = {title}
file = {file}
{sheet}# The column whose values name the groups: proposed because it is text with {distinct}
# distinct values{group_alternatives}.
group = {group}
# Numeric columns to summarise and compare{measure_note}.
measures = [{measures}]
{x}# Groups with fewer values than this are shown but left out of the tests.
min_group_size = 5
"""

MAX_PROPOSED_GROUPS = 30  # more distinct values than this is rarely a grouping column


@dataclass(frozen=True)
class ProposedProject:
    """The folder :func:`new_from_data` wrote into, and a sentence saying what it proposed."""

    root: Path
    proposal: str


def _toml(text: str) -> str:
    import json

    return json.dumps(text, ensure_ascii=False)


def new_from_data(folder: str | Path, data: str | Path) -> ProposedProject:
    """Write ``folder/manifest.toml`` proposing a group column and measures for ``data``.

    The folder may exist and hold the data already; nothing is overwritten. A data file from
    elsewhere is copied to ``folder/data/``. The group column is a text column with few
    distinct values (fewest first); the measures are the columns that read as numbers; a
    date column, if any, becomes ``x``.
    """
    import shutil

    from .readers.sources import SPREADSHEET_SUFFIXES

    root = Path(folder)
    source = Path(data)
    if not source.is_file():
        raise SitebuildError(f"{source}: no such data file; give the path of a .csv or .xlsx file.")
    if root.exists() and not root.is_dir():
        raise SitebuildError(f"{root}: exists and is a file; choose a folder for 'sitebuild new'.")
    manifest = root / "manifest.toml"
    if manifest.exists():
        raise SitebuildError(
            f"{manifest}: already exists and is never overwritten; edit it, or choose a new folder."
        )
    root.mkdir(parents=True, exist_ok=True)
    try:
        relative = source.resolve().relative_to(root.resolve())
    except ValueError:
        relative = Path("data") / source.name
        target = root / relative
        if target.exists() and target.read_bytes() != source.read_bytes():
            raise SitebuildError(
                f"{target}: a different file of that name is already there and is never "
                "overwritten; move it away or rename your data file."
            ) from None
        if not target.exists():
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(source, target)
    frame, header_row = _read_everything(root / relative)
    group, distinct, others = _propose_group(frame, relative.as_posix())
    measures, x = _propose_measures(frame, group)
    if not measures:
        raise SitebuildError(
            f"{relative.as_posix()}: no column reads as numbers, so there is nothing to compare; "
            "check the file's delimiter and decimal mark."
        )
    title = source.stem.replace("_", " ").replace("-", " ").strip().capitalize() or "Data"
    sheet = ""
    if source.suffix.lower() in SPREADSHEET_SUFFIXES:
        sheet = "# The sheet to read: its name or 0-based number.\nsheet = 0\n"
    if header_row > 1:
        sheet += (
            f"# The column names are on line {header_row}; the lines above are titles.\n"
            f"header_row = {header_row}\n"
        )
    x_text = ""
    if x is not None:
        x_text = (
            "# Dates: each measure is plotted and smoothed against time (slopes per day).\n"
            f"x = {_toml(x)}\n"
        )
    text = FROM_MANIFEST.format(
        data=source.name,
        folder=root.as_posix(),
        title=_toml(title),
        file=_toml(relative.as_posix()),
        sheet=sheet,
        distinct=distinct,
        group_alternatives=(
            "; other candidates: " + ", ".join(f"'{o}'" for o in others) if others else ""
        ),
        group=_toml(group),
        measure_note=" (every column that reads as numbers; remove ids and codes)",
        measures=", ".join(_toml(m) for m in measures),
        x=x_text,
    )
    manifest.write_text(text, encoding="utf-8")
    proposal = (
        f"groups from '{group}', measures {', '.join(repr(m) for m in measures)}"
        + (f", x '{x}' (dates)" if x else "")
        + "."
    )
    return ProposedProject(root=root, proposal=proposal)


def _read_everything(path: Path):
    """Return (every column of a data file as read, the 1-based header line found)."""
    import pandas as pd

    from .manifest import DatasetSpec
    from .readers.sources import full_suffix, read_source

    suffix = full_suffix(path)
    if suffix in (".parquet", ".pq"):
        return pd.read_parquet(path), 1
    if suffix in (".jsonl", ".ndjson"):
        return pd.read_json(path, lines=True, dtype=False), 1
    # Exports often carry title lines above the header: the header is the first line whose
    # names are all present and distinct.
    for header_row in range(1, 11):
        spec = DatasetSpec(
            name="new", file=path.name, path=path, group="", measures=(), header_row=header_row
        )
        try:
            frame = read_source(spec)[0]
        except SitebuildError:
            continue
        names = [str(c) for c in frame.columns]
        named = all(n.strip() and not n.startswith("Unnamed:") for n in names)
        if named and len(set(names)) == len(names) and len(names) >= 2:
            return frame, header_row
    raise SitebuildError(
        f"{path.name}: no line among the first 10 names two or more distinct columns; export "
        "the data with one header line of column names."
    )


def _numeric_share(column) -> float:
    import numpy as np

    from .ingest import MISSING_TOKENS
    from .readers.decimals import as_floats, choose_decimal

    if column.dtype.kind in "fiu":
        return 1.0
    text = column.astype("string").str.strip()
    text = text[text.notna() & ~text.isin(MISSING_TOKENS)]
    if text.empty:
        return 0.0
    values = as_floats(text, choose_decimal(text, "").mark)
    return float((~np.isnan(values)).mean())


def _propose_group(frame, shown: str) -> tuple[str, int, list[str]]:
    candidates = []
    for name in frame.columns:
        column = frame[name]
        if _numeric_share(column) > 0.5 or _is_dates(column):
            continue
        distinct = int(column.astype("string").str.strip().nunique(dropna=True))
        if 2 <= distinct <= MAX_PROPOSED_GROUPS:
            candidates.append((distinct, str(name)))
    if not candidates:
        raise SitebuildError(
            f"{shown}: no text column has between 2 and {MAX_PROPOSED_GROUPS} distinct values to "
            "group by; add a column naming the groups, then run 'sitebuild new' again."
        )
    candidates.sort()
    return candidates[0][1], candidates[0][0], [c[1] for c in candidates[1:4]]


def _is_dates(column) -> bool:
    from .readers.dates import looks_like_dates

    if column.dtype.kind == "M":
        return True
    if column.dtype.kind in "fiu":
        return False
    return looks_like_dates(column.astype("string").str.strip(), None)


def _propose_measures(frame, group: str) -> tuple[list[str], str | None]:
    measures, x = [], None
    for name in frame.columns:
        if name == group or name == "source file":
            continue
        column = frame[name]
        if _is_dates(column):
            x = x or str(name)
        elif _numeric_share(column) >= 0.9:
            measures.append(str(name))
    return measures, x
