"""Time the comparisons section on 8 groups x 125,000 rows (the issue's pairwise-stage figure).

Usage: python benchmarks/comparisons.py [--measures 4]
Prints seconds (wall and CPU) for one run of sections.comparisons.compute.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from sitebuild.ingest import IngestReport, Table
from sitebuild.manifest import DatasetSpec, SiteSettings
from sitebuild.sections import comparisons


def make_table(groups: int, per_group: int, measures: int) -> Table:
    """Seeded normal groups with small shifts and unequal spreads."""
    rng = np.random.default_rng(6)
    codes = np.repeat(np.arange(groups, dtype=np.int32), per_group)
    names = tuple(f"m{j}" for j in range(measures))
    columns = {
        name: rng.normal(10 + 0.01 * codes, 1 + 0.05 * codes).astype(np.float64) for name in names
    }
    spec = DatasetSpec(
        name="bench", file="bench.csv", path=Path("bench.csv"), group="g", measures=names
    )
    report = IngestReport(
        file="bench.csv", sha256="0" * 64, rows_read=codes.size, rows_used=codes.size,
        rows_dropped=0, drop_reasons={}, missing={}, unparsed={}, encoding="utf-8", delimiter=",",
    )  # fmt: skip
    labels = tuple(f"G{i}" for i in range(groups))
    return Table(spec=spec, groups=labels, codes=codes, columns=columns, report=report)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--groups", type=int, default=8)
    parser.add_argument("--per-group", type=int, default=125_000)
    parser.add_argument("--measures", type=int, default=1)
    args = parser.parse_args()
    table = make_table(args.groups, args.per_group, args.measures)
    wall, cpu = time.perf_counter(), time.process_time()
    result = comparisons.compute(table, SiteSettings(), np.random.default_rng(1), {})
    wall, cpu = time.perf_counter() - wall, time.process_time() - cpu
    pairs = sum(len(c["pairs"]) for c in result["comparisons"])
    print(
        f"comparisons: {args.groups} groups x {args.per_group:,} rows x {args.measures} measures, "
        f"{pairs} pairs: {wall:.2f} s wall, {cpu:.2f} s CPU"
    )


if __name__ == "__main__":
    main()
