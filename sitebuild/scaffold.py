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
    if root.is_dir() and any(root.iterdir()):
        raise SitebuildError(
            f"{root}: the folder is not empty; choose a new or empty folder for 'sitebuild new' "
            "(nothing was changed)."
        )
    per = 12
    contents = {
        "manifest.toml": MANIFEST.format(folder=root.as_posix(), seed=SEED),
        "data/loaves.csv": loaves_csv(np.random.default_rng(SEED), per),
        "notes/loaves.md": NOTES.format(n=per * len(FLOURS), per=per),
        ".gitignore": "site/\n.sitebuild_cache/\n",
    }
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
