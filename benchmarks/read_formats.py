"""Read time of the same invented table as CSV and as .xlsx (and .csv.gz), in one process.

A seeded 200,000-row, 12-line manufacturing export (line, shift, a date, four measures) is
written once to benchmarks/data/ (git-ignored), then each file is read with
``sitebuild.ingest.read_table`` a few times; the best time of each is printed, with the
import time of python-calamine.

    PYTHONPATH=. python benchmarks/read_formats.py            # 200,000 rows
    PYTHONPATH=. python benchmarks/read_formats.py --rows 50000
"""

from __future__ import annotations

import argparse
import gzip
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent


def make(rows: int, folder: Path) -> dict[str, Path]:
    """Write the table as CSV, .csv.gz and .xlsx; return their paths (kept between runs)."""
    import datetime as dt

    folder.mkdir(parents=True, exist_ok=True)
    paths = {k: folder / f"formats_{rows}.{k}" for k in ("csv", "csv.gz", "xlsx")}
    if all(p.exists() for p in paths.values()):
        return paths
    rng = np.random.default_rng(2026_12_02)
    lines = rng.integers(1, 13, rows)
    shifts = rng.choice(["early", "late", "night"], rows)
    days = rng.integers(0, 365, rows)
    thickness = rng.normal(4.0 + 0.01 * lines, 0.08)
    cycle = rng.lognormal(3.4, 0.2, rows)
    temperature = rng.normal(212.0, 4.0, rows)
    defects = rng.poisson(0.7, rows)
    start = dt.date(2026, 1, 1)
    header = ["line", "shift", "date", "thickness (mm)", "cycle (s)", "temperature", "defects"]
    text_rows = [",".join(header)]
    for i in range(rows):
        day = (start + dt.timedelta(days=int(days[i]))).isoformat()
        text_rows.append(
            f"Line {lines[i]},{shifts[i]},{day},{thickness[i]:.3f},{cycle[i]:.2f},"
            f"{temperature[i]:.1f},{defects[i]}"
        )
    text = "\n".join(text_rows) + "\n"
    paths["csv"].write_text(text, encoding="utf-8")
    paths["csv.gz"].write_bytes(gzip.compress(text.encode("utf-8"), mtime=0))
    import openpyxl

    book = openpyxl.Workbook(write_only=True)
    sheet = book.create_sheet("Export")
    sheet.append(header)
    for i in range(rows):
        sheet.append(
            [
                f"Line {lines[i]}",
                str(shifts[i]),
                start + dt.timedelta(days=int(days[i])),
                round(float(thickness[i]), 3),
                round(float(cycle[i]), 2),
                round(float(temperature[i]), 1),
                int(defects[i]),
            ]
        )
    book.save(paths["xlsx"])
    return paths


def read_seconds(path: Path, repeats: int) -> tuple[float, int]:
    """Return (best seconds of ``repeats`` reads, rows used)."""
    from sitebuild.ingest import read_table
    from sitebuild.manifest import DatasetSpec

    spec = DatasetSpec(
        name="formats",
        file=path.name,
        path=path,
        group="line",
        measures=("thickness (mm)", "cycle (s)", "temperature", "defects"),
        x="date",
        engine="memory",
    )
    best, rows = float("inf"), 0
    for _ in range(repeats):
        began = time.perf_counter()
        table = read_table(spec)
        best = min(best, time.perf_counter() - began)
        rows = table.report.rows_used
    return best, rows


def import_ms() -> float:
    """Return the best of five fresh-process import times of python_calamine, in ms."""
    times = []
    for _ in range(5):
        done = subprocess.run(
            [sys.executable, "-X", "importtime", "-c", "import python_calamine"],
            capture_output=True,
            text=True,
            check=True,
        )
        last = [line for line in done.stderr.splitlines() if "python_calamine" in line][-1]
        times.append(int(last.split("|")[1]) / 1000)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=200_000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    paths = make(args.rows, HERE / "data")
    print(f"python_calamine import: {import_ms():.1f} ms (best of 5 fresh processes)")
    for kind, path in paths.items():
        seconds, rows = read_seconds(path, args.repeats)
        print(
            f"{kind:>7}: {path.stat().st_size / 1e6:6.1f} MB, {rows:,} rows read in "
            f"{seconds:.2f} s (best of {args.repeats})"
        )


if __name__ == "__main__":
    main()
