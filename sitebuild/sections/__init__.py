"""Sections of a dataset page. Each module here wires stats/ results into results.json keys,
charts and a layout partial.

A section module provides:

- ``compute(table: Table, settings: SiteSettings, rng: numpy.random.Generator) -> dict``
  returning the results.json keys it owns for one dataset (JSON-ready: only dict, list,
  str, int, float, bool, None; never NaN or Infinity — use None with a reason).
- ``charts(dataset: dict, settings: SiteSettings) -> list[Chart]`` building Vega-Lite specs
  from that dataset's results (never from raw rows).
- a layout ``layouts/sections/<name>.html`` rendered with ``ds`` (the dataset's results
  dict), ``charts`` (dict id -> Chart) and ``site`` (settings).
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass

from ..cores import share

SECTION_NAMES = ("summaries", "relationships", "comparisons", "adjusted", "capability", "trend")
# Sections that read other sections' results (curve flags, the x-balance check): the pipeline
# runs them after all the others, with every earlier key in ``partial``.
READS_RESULTS = frozenset({"adjusted"})
# Sections that read the summaries' rows (and nothing else computed): they run after the
# summaries, beside the sections that need the table alone.
READS_SUMMARIES = frozenset({"comparisons", "capability"})
MAX_CHART_GROUPS = 30  # groups drawn in distribution charts; tables keep every group
# From this many rows the analysis uses two threads (below it, threads cost more than they
# save); the heavy work is numpy sorting and searching, which releases the GIL.
PARALLEL_ROWS = 200_000


def map_measures(work, items, n_rows: int) -> list:
    """Return ``[work(item) for item in items]``, in order; on tables of at least
    :data:`PARALLEL_ROWS` rows the items are shared with any free core (see
    :mod:`sitebuild.cores`). For work that draws no shared random numbers, so the results are
    the same in any order."""
    return share(work, items, parallel=n_rows >= PARALLEL_ROWS)


def section_modules() -> list:
    """Return the section modules in page order (the build computes with them, the renderer
    draws with them)."""
    return [importlib.import_module(f"{__name__}.{name}") for name in SECTION_NAMES]


def sampled_caption(dataset: dict, what: str) -> str:
    """Return a sentence saying that ``what`` used the seeded row sample (streamed data only;
    an empty string when every row was in memory)."""
    source = dataset.get("computed_from") or {}
    if source.get("sample_rows") is None:
        return ""
    return (
        f" On this {source['engine']}-read dataset, {what} used a seeded sample of "
        f"{source['sample_rows']:,} rows (at most {source['sample_per_group']:,} per group); "
        "every other number here uses all rows."
    )


@dataclass(frozen=True)
class Chart:
    """One chart on a page: a Vega-Lite spec and its text alternative."""

    id: str  # unique within the page; lower-case letters, digits and '-'
    title: str
    description: str  # one plain sentence saying what the chart shows (its text alternative)
    spec: dict  # Vega-Lite spec, JSON-ready; data inline under fixed, safe field names
    table: str | None = None  # id of the DataTable on the same page that holds its numbers

    @property
    def drawable(self) -> bool:
        """False when the data leave nothing to draw; the page then says so in words."""
        from ..charts.theme import drawable

        return drawable(self.spec)


@dataclass(frozen=True)
class DataTable:
    """A table shown on a page and written beside it as CSV."""

    id: str  # unique within the page; lower-case letters, digits and '-'
    title: str
    columns: tuple[tuple[str, str], ...]  # (row key, column heading)
    rows: tuple[dict, ...]
    caption: str = ""
    href: str | None = None  # set by the renderer: where its CSV is written in the site
    csv_only: tuple[str, ...] = ()  # row keys in the CSV but not on the page (shown elsewhere)
