"""Scale benchmark: generate seeded datasets, build each as a separate process, print figures.

Run from the repository root::

    PYTHONPATH=. python benchmarks/scale.py                 # the 1m case
    PYTHONPATH=. python benchmarks/scale.py --case 1m wide groups500
    PYTHONPATH=. python benchmarks/scale.py --case 10m      # takes a minute or two
    PYTHONPATH=. python benchmarks/scale.py --case beyond   # streamed, under a memory limit
    PYTHONPATH=. python benchmarks/scale.py --case 1m --profile   # also writes a cProfile

Data and sites go to benchmarks/data/ and benchmarks/out/ (both git-ignored). Every number is
measured in this run: the build and a "floor" process (import the libraries sitebuild needs
and read the same file with pandas) each run as a child process; wall clock is measured from
outside and peak memory is the child's own maximum resident set (os.wait4 rusage).
"""

from __future__ import annotations

import argparse
import io
import json
import os
import resource
import subprocess
import sys
import time
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
DATA = HERE / "data"
OUT = HERE / "out"
SEED = 20260601

FLOOR_IMPORTS = "pandas, numpy, scipy, altair, jinja2, markdown, vl_convert, pyarrow"


@dataclass(frozen=True)
class Case:
    """One benchmark dataset: its size, shape and how it is stored."""

    name: str
    rows: int
    groups: int
    measures: int  # 4 = the four shapes; more = the shapes repeated with new parameters
    fmt: str  # "csv", "parquet" or "parquet-folder"
    engine: str = "auto"  # the manifest default: Parquet over 5M rows streams
    memory_limit: int | None = None  # bytes of address space for the build process
    driver: str = "build"  # "build": the whole build; "stream": read + summaries only
    targets: dict = field(default_factory=dict)


CASES = {
    "1m": Case(
        "1m",
        1_000_000,
        8,
        4,
        "csv",
        targets={
            "seconds": 10.0,
            "floor_ratio": 3.0,
            "rss_mb": 1536,
            "site_mb": 3.0,
            "zip_mb": 1.2,
        },
    ),
    "10m": Case("10m", 10_000_000, 8, 4, "parquet", targets={"seconds": 60.0, "rss_mb": 4096}),
    "wide": Case("wide", 200_000, 50, 30, "csv"),
    "groups500": Case("groups500", 500_000, 500, 4, "csv"),
    # A CSV several times larger than the address-space limit given to the build process.
    "beyond": Case(
        "beyond",
        80_000_000,
        8,
        4,
        "csv",
        engine="stream",
        memory_limit=3 << 29,  # 1.5 GB of address space; the CSV is 3.2 GB
        driver="stream",
    ),
    "stream1m": Case("stream1m", 1_000_000, 8, 4, "csv", engine="stream"),
    "stream10m": Case(
        "stream10m",
        10_000_000,
        8,
        4,
        "parquet",
        engine="stream",
        targets={"seconds": 60.0, "rss_mb": 4096},
    ),
    "folder": Case("folder", 2_000_000, 8, 4, "parquet-folder", engine="stream"),
}

SHAPES = ("normal", "skewed", "bimodal", "heavy")


def measure_names(count: int) -> list[str]:
    base = ["thickness (mm)", "cycle time (s)", "surface temp (°C)", "defects per panel"]
    if count <= 4:
        return base[:count]
    return [f"{base[i % 4]} #{i // 4 + 1}" for i in range(count)]


def make_frame(case: Case, rows: int, rng: np.random.Generator):
    """Return a pandas DataFrame of ``rows`` invented production-line readings."""
    import pandas as pd

    codes = rng.integers(0, case.groups, rows)
    width = len(str(case.groups))
    labels = np.array([f"Line {i + 1:0{width}d}" if case.groups > 9 else f"Line {i + 1}"
                       for i in range(case.groups)], dtype=object)  # fmt: skip
    shift = rng.normal(0, 0.3, case.groups)  # each line sits a little apart
    speed = rng.uniform(0.5, 3.0, rows)
    data = {"line": labels[codes], "speed": np.round(speed, 3)}
    for i, name in enumerate(measure_names(case.measures)):
        shape = SHAPES[i % 4]
        k = 1 + i // 4
        if shape == "normal":
            v = 2.0 + 0.1 * k + shift[codes] * 0.1 + 0.05 * speed + rng.normal(0, 0.08, rows)
        elif shape == "skewed":
            v = np.exp(3.0 + 0.2 * shift[codes] + 0.1 * speed + rng.normal(0, 0.5, rows))
        elif shape == "bimodal":
            hot = rng.random(rows) < 0.35 + 0.1 * np.tanh(shift[codes])
            v = np.where(hot, rng.normal(81, 2.5, rows), rng.normal(64, 3.0, rows)) + k
        else:
            v = np.floor(np.abs(rng.standard_t(2.5, rows)) * (2 + shift[codes]) + 0.5 * k)
        data[name] = np.round(v, 4)
    return pd.DataFrame(data)


def data_path(case: Case) -> Path:
    suffix = {"csv": "data.csv", "parquet": "data.parquet", "parquet-folder": "parts"}[case.fmt]
    return DATA / case.name / suffix


def generate(case: Case) -> Path:
    """Write the case's data and manifest (once; reused while the files exist)."""
    import pyarrow as pa
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    folder = DATA / case.name
    path = data_path(case)
    done = folder / ".complete"
    if not done.exists():
        folder.mkdir(parents=True, exist_ok=True)
        rng = np.random.default_rng([SEED, case.rows, case.groups, case.measures])
        chunk = 2_000_000
        started = time.perf_counter()
        if case.fmt == "parquet-folder":
            path.mkdir(exist_ok=True)
        writer = None
        for part, start in enumerate(range(0, case.rows, chunk)):
            frame = make_frame(case, min(chunk, case.rows - start), rng)
            table = pa.Table.from_pandas(frame, preserve_index=False)
            if case.fmt == "csv":
                sink = io.BytesIO()
                pacsv.write_csv(
                    table,
                    sink,
                    pacsv.WriteOptions(include_header=start == 0, quoting_style="needed"),
                )
                with open(path, "wb" if start == 0 else "ab") as handle:
                    handle.write(sink.getvalue())
            elif case.fmt == "parquet":
                if writer is None:
                    writer = pq.ParquetWriter(path, table.schema)
                writer.write_table(table, row_group_size=1_000_000)
            else:
                pq.write_table(table, path / f"part-{part:04d}.parquet")
        if writer is not None:
            writer.close()
        print(
            f"  generated {case.rows:,} rows in {time.perf_counter() - started:.1f} s", flush=True
        )
        done.write_text("ok")
    names = ", ".join(json.dumps(m, ensure_ascii=False) for m in measure_names(case.measures))
    engine = f'engine = "{case.engine}"\n' if case.engine != "auto" else ""
    (folder / "manifest.toml").write_text(
        f'[site]\ntitle = "Scale benchmark: {case.name}"\nseed = {SEED}\n\n'
        f'[[datasets]]\nname = "Panels {case.name}"\nfile = "{path.relative_to(folder)}"\n'
        f'group = "line"\nmeasures = [{names}]\nx = "speed"\n{engine}',
        encoding="utf-8",
    )
    return folder


def run_child(args: list[str], limit: int | None = None) -> tuple[float, int, str, str]:
    """Run a child process; return (wall seconds, peak RSS bytes, stdout, stderr)."""

    def apply_limit():
        if limit:
            resource.setrlimit(resource.RLIMIT_AS, (limit, limit))

    env = dict(os.environ, PYTHONPATH=str(ROOT))
    if limit:
        env.update(LEAN_ENV)
    started = time.perf_counter()
    proc = subprocess.Popen(
        args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, preexec_fn=apply_limit
    )
    # Read output before waiting so a chatty child cannot block on a full pipe.
    stdout, stderr = proc.stdout.read(), proc.stderr.read()
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - started
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise RuntimeError(f"{args[:3]} failed ({proc.returncode}):\n{stderr.decode()[-3000:]}")
    return seconds, usage.ru_maxrss * 1024, stdout.decode(), stderr.decode()


FLOOR = f"""
import sys
import {FLOOR_IMPORTS}
if "--stats" in sys.argv:
    import scipy.stats  # the submodule sitebuild's statistics need; plain "import scipy" is lazy
import pandas as pd
path = sys.argv[1]
frame = pd.read_csv(path) if path.endswith(".csv") else pd.read_parquet(path)
print(len(frame))
"""

DRIVER = """
import json, sys, time
started = time.perf_counter()
from sitebuild.pipeline import build
report = build(sys.argv[1], out=sys.argv[2])
print(json.dumps({"stages": report.stages, "elapsed": report.elapsed,
                  "total_bytes": report.total_bytes, "files": report.files,
                  "in_process": time.perf_counter() - started,
                  "datasets": [d.__dict__ for d in report.datasets]}, default=str))
"""

# Read + exact summaries of every row: the part whose memory must not grow with the file.
# (The whole build cannot run under an address-space limit at all: the chart renderer's
# JavaScript engine reserves tens of GB of address space it never touches.)
STREAM_DRIVER = """
import json, sys, time
started = time.perf_counter()
from sitebuild.manifest import load_manifest
from sitebuild.engines import read_table
from sitebuild.sections import summaries
manifest = load_manifest(sys.argv[1])
stages = {}
t = time.perf_counter()
table = read_table(manifest.datasets[0])
stages["read"] = time.perf_counter() - t
t = time.perf_counter()
out = summaries.compute(table, manifest.site, None, {})
stages["summaries"] = time.perf_counter() - t
status = open("/proc/self/status").read()
print(json.dumps({"stages": stages, "in_process": time.perf_counter() - started,
                  "passes": table.exact.passes, "rows": table.report.rows_used,
                  "vm_peak_kb": int(status.split("VmPeak:")[1].split()[0])}))
"""

# Address-space limits count reservations, not use: keep allocators from reserving per-thread
# arenas they would never fill, so the limit measures what the engine needs.
LEAN_ENV = {
    "ARROW_DEFAULT_MEMORY_POOL": "system",
    "MALLOC_ARENA_MAX": "2",
    "OPENBLAS_NUM_THREADS": "1",
    "OMP_NUM_THREADS": "1",
}

PROFILE = """
import cProfile, pstats, sys
from sitebuild.pipeline import build
profile = cProfile.Profile()
profile.enable()
build(sys.argv[1], out=sys.argv[2])
profile.disable()
profile.dump_stats(sys.argv[3])
pstats.Stats(sys.argv[3]).sort_stats("cumulative").print_stats(45)
"""


def folder_size(path: Path) -> int:
    return sum(p.stat().st_size for p in path.rglob("*") if p.is_file())


def zip_size(path: Path) -> int:
    sink = io.BytesIO()
    with zipfile.ZipFile(sink, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for file in sorted(path.rglob("*")):
            if file.is_file():
                archive.write(file, file.relative_to(path))
    return len(sink.getvalue())


def mb(n: float) -> float:
    return n / (1 << 20)


def run_case(case: Case, profile: bool, floor: bool) -> dict:
    print(f"== {case.name}: {case.rows:,} rows, {case.groups} groups, {case.measures} measures, "
          f"{case.fmt}, engine {case.engine}", flush=True)  # fmt: skip
    project = generate(case)
    source = data_path(case)
    size = folder_size(source) if source.is_dir() else source.stat().st_size
    out = OUT / case.name
    figures: dict = {"case": case.name, "rows": case.rows, "data_mb": round(mb(size), 1)}
    # The floor reads the whole file with pandas: pointless (and too big) for a case that
    # exists to show the build fits in less memory than the data.
    floor = floor and case.memory_limit is None
    if floor:
        seconds, rss, _, _ = run_child([sys.executable, "-c", FLOOR, str(source)])
        figures.update(floor_seconds=round(seconds, 2), floor_rss_mb=round(mb(rss)))
        seconds, _, _, _ = run_child([sys.executable, "-c", FLOOR, str(source), "--stats"])
        figures["floor_with_scipy_stats_seconds"] = round(seconds, 2)
    if case.driver == "stream":
        seconds, rss, stdout, _ = run_child(
            [sys.executable, "-c", STREAM_DRIVER, str(project)], limit=case.memory_limit
        )
        report = json.loads(stdout.strip().splitlines()[-1])
        figures.update(
            seconds=round(seconds, 2),
            stages={k: round(v, 3) for k, v in report["stages"].items()},
            passes=report["passes"],
            rows_used=report["rows"],
            rss_mb=round(mb(rss)),
            vm_peak_mb=round(report["vm_peak_kb"] / 1024),
            memory_limit_mb=round(mb(case.memory_limit)) if case.memory_limit else None,
            data_to_limit=round(size / case.memory_limit, 2) if case.memory_limit else None,
        )
        for key, value in figures.items():
            print(f"  {key}: {value}")
        return figures
    seconds, rss, stdout, _ = run_child(
        [sys.executable, "-c", DRIVER, str(project), str(out)], limit=case.memory_limit
    )
    report = json.loads(stdout.strip().splitlines()[-1])
    figures.update(
        build_seconds=round(seconds, 2),
        in_process_seconds=round(report["in_process"], 2),
        stages={k: round(v, 3) for k, v in report["stages"].items()},
        rss_mb=round(mb(rss)),
        site_mb=round(mb(folder_size(out)), 2),
        zip_mb=round(mb(zip_size(out)), 2),
        memory_limit_mb=round(mb(case.memory_limit)) if case.memory_limit else None,
    )
    if floor:
        figures["floor_ratio"] = round(seconds / figures["floor_seconds"], 2)
        figures["floor_with_scipy_stats_ratio"] = round(
            seconds / figures["floor_with_scipy_stats_seconds"], 2
        )
    if profile:
        target = OUT / f"{case.name}.prof"
        _, _, text, _ = run_child(
            [sys.executable, "-c", PROFILE, str(project), str(out), str(target)]
        )
        print(text[:12000])
    checks = []
    for key, limit in case.targets.items():
        value = figures.get({"seconds": "build_seconds"}.get(key, key))
        if value is not None:
            verdict = "met" if value <= limit else f"MISSED by {value - limit:.2f}"
            checks.append(f"{key} {value} <= {limit}: {verdict}")
    figures["targets"] = checks
    for key, value in figures.items():
        print(f"  {key}: {value}")
    return figures


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", nargs="+", default=["1m"], choices=sorted(CASES))
    parser.add_argument("--profile", action="store_true", help="also run the build under cProfile")
    parser.add_argument("--no-floor", action="store_true", help="skip the floor process")
    parser.add_argument("--json", help="write all figures to this file as JSON")
    args = parser.parse_args(argv)
    results = []
    for name in args.case:
        try:
            results.append(run_case(CASES[name], args.profile, not args.no_floor))
        except RuntimeError as exc:  # one failed case should not hide the others' figures
            print(f"  FAILED: {str(exc).splitlines()[-1]}", flush=True)
            results.append({"case": name, "failed": str(exc)[-2000:]})
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
