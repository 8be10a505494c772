"""The build: manifest → tables → results → charts and pages → a published site.

``build`` and ``check`` are what the CLI calls; everything the CLI prints comes from the
report objects returned here.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import sys
import time
import zlib
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

from . import __version__, stopping
from .cache import (
    Cache,
    cache_folder,
    canonical,
    code_fingerprint,
    dataset_key,
    file_sha256,
    vl_convert_version,
)
from .cores import share
from .errors import SitebuildError
from .manifest import Manifest, load_manifest
from .sections import (
    PARALLEL_ROWS,
    READS_RESULTS,
    READS_SUMMARIES,
    SECTION_NAMES,
    section_modules,
)


@dataclass(frozen=True)
class DatasetReport:
    """What happened to one dataset during a build or check."""

    name: str
    file: str
    rows_read: int
    rows_used: int
    rows_dropped: int
    drop_reasons: dict[str, int]
    unparsed: dict[str, dict]
    groups: int
    measures: int
    warnings: tuple[str, ...] = ()
    reused: bool = False
    notes: tuple[str, ...] = ()  # what reading did (filters, trimmed labels, decimal commas)


@dataclass(frozen=True)
class BuildReport:
    """The outcome of a build: where the site is, what it holds, how long each stage took.

    ``written`` is False when the site on disk already held exactly these bytes (nothing
    changed, nothing was written). ``changes`` holds a few sentences on what moved since the
    previous build.
    """

    out: Path
    index: Path
    datasets: tuple[DatasetReport, ...]
    pages: int
    files: int
    total_bytes: int
    elapsed: float
    stages: dict[str, float]
    notices: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict)
    written: bool = True
    changes: tuple[str, ...] = ()
    numbers_changed: bool = True
    assets: int = 0
    asset_bytes: int = 0
    largest_page: str | None = None
    largest_page_bytes: int = 0
    zip_path: Path | None = None
    zip_bytes: int | None = None
    single_file_path: Path | None = None
    single_file_bytes: int | None = None

    @property
    def reused(self) -> tuple[str, ...]:
        """Names of the datasets whose results came from the cache."""
        return tuple(d.name for d in self.datasets if d.reused)

    def to_json(self) -> dict:
        """Return the report as JSON-ready data (paths as text)."""
        data = dataclasses.asdict(self)
        for key, value in list(data.items()):
            if isinstance(value, Path):
                data[key] = str(value)
        data["extra"] = {}
        data["reused"] = list(self.reused)
        return data


@dataclass(frozen=True)
class CheckReport:
    """What a build would do, found without writing anything."""

    manifest: Path
    out: Path
    datasets: tuple[DatasetReport, ...]
    notices: tuple[str, ...] = ()

    def to_json(self) -> dict:
        """Return the check report as JSON-ready data (paths as text)."""
        return {
            "valid": True,
            "manifest": str(self.manifest),
            "out": str(self.out),
            "datasets": [dataclasses.asdict(d) for d in self.datasets],
            "notices": list(self.notices),
        }


class Timer:
    """Collects seconds spent per named stage."""

    def __init__(self):
        self.stages: dict[str, float] = {}

    @contextmanager
    def stage(self, name: str):
        start = time.perf_counter()
        try:
            yield
        finally:
            self.stages[name] = self.stages.get(name, 0.0) + time.perf_counter() - start


def _release_reader_memory() -> None:
    """Hand back the memory pyarrow's own allocator kept from reading (its buffers for the
    columns stay): reading 10M rows of Parquet left about 0.3 GB of it unused."""
    arrow = sys.modules.get("pyarrow")
    if arrow is not None:
        arrow.default_memory_pool().release_unused()


@contextmanager
def one_blas_thread():
    """Run the block with the BLAS library (behind numpy's dot and matrix products) on one thread.

    Why: a threaded BLAS splits a long dot product between its threads, so the rounding of
    every sum of squares depended on how many cores the machine had (results.json differed
    in the last digits between machines), and its spinning threads fought the analysis
    threads for the cores: a 125,000-value dot took 30 times longer on a busy 2-core machine.
    """
    # The limit applies to the BLAS libraries already loaded: numpy's, and scipy's own.
    import numpy  # noqa: F401
    import scipy.linalg  # noqa: F401
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"):
        yield


def dataset_rng(seed: int, dataset: str, section: int):
    """Return a Generator for one dataset's section, independent of build order."""
    import numpy as np

    return np.random.default_rng([seed, zlib.crc32(dataset.encode("utf-8")), section])


def _dataset_report(table, reused: bool = False) -> DatasetReport:
    report = table.report
    return DatasetReport(
        name=table.spec.name,
        file=report.file,
        rows_read=report.rows_read,
        rows_used=report.rows_used,
        rows_dropped=report.rows_dropped,
        drop_reasons=dict(report.drop_reasons),
        unparsed={
            k: {"count": v.count, "examples": list(v.examples)} for k, v in report.unparsed.items()
        },
        groups=len(table.groups),
        measures=len(table.spec.measures),
        warnings=report.warnings,
        reused=reused,
        notes=report.notes,
    )


def analyse(table, manifest: Manifest, timer: Timer, say=None) -> dict:
    """Return one dataset's results dict: source, groups and every section's keys."""
    spec = table.spec
    ds = {
        "name": spec.name,
        "slug": spec.slug,
        "source": table.report.to_json(),
        "group_by": spec.group,
        "measures": list(spec.measures),
        "x": spec.x,
        "groups": list(table.groups),
        "settings": spec.section(),
    }
    modules = section_modules()

    def run(index: int, partial: dict) -> dict:
        module = modules[index]
        name = module.__name__.rsplit(".", 1)[-1]
        began = time.perf_counter()
        with timer.stage(name):
            rng = dataset_rng(manifest.site.seed, spec.name, index)
            keys = module.compute(table, manifest.site, rng, partial)
        if say:
            say(f"{spec.name}: {name} ({time.perf_counter() - began:.2f} s)")
        return keys

    # The comparisons read the summaries (they repeat each group's n, mean and sd), and the
    # late sections read everything before them; the rest depend on the table alone. So the
    # summaries and then the comparisons form one job, and every job shares the cores with
    # the others (sitebuild.cores). The heavy work is numpy sorting and searching, which
    # releases the GIL; each section has its own seeded generator, so the results are the
    # same in any order. Keys are added in page order, whatever finished first.
    late = [i for i, name in enumerate(SECTION_NAMES) if name in READS_RESULTS]
    after_summaries = [i for i, name in enumerate(SECTION_NAMES) if name in READS_SUMMARIES]
    chains = [[0, *after_summaries]] + [
        [i] for i in range(1, len(modules)) if i not in late and i not in after_summaries
    ]

    def run_chain(chain: list[int]) -> dict[int, dict]:
        partial = dict(ds)
        done: dict[int, dict] = {}
        for index in chain:
            done[index] = run(index, partial)
            partial.update(done[index])
        return done

    finished: dict[int, dict] = {}
    for done in share(run_chain, chains, table.n_rows >= PARALLEL_ROWS):
        finished.update(done)
    for index in sorted(finished):
        ds.update(finished[index])
    for index in late:  # these read the other sections' results
        ds.update(run(index, ds))
    return ds


def summarised_notices(datasets: list[dict]) -> list[str]:
    """Return one line per dataset whose many groups made the pages summarise, saying how."""
    from .sections import MAX_CHART_GROUPS

    lines = []
    for ds in datasets:
        count = len(ds.get("groups", []))
        if count <= MAX_CHART_GROUPS:
            continue
        parts = [
            f"charts show the {MAX_CHART_GROUPS} largest",
            "long tables show their first rows (CSV has all)",
        ]
        if (ds.get("relationship_columns") or {}).get("summarised"):
            parts.append("within-group relationships cover the largest groups only")
        modes = {c.get("mode") for c in ds.get("comparisons", [])}
        if "each group vs the rest" in modes:
            parts.append("each group is compared with all other rows instead of pair by pair")
        lines.append(
            f"{ds['name']}: {count:,} groups, so the page is summarised: " + "; ".join(parts) + "."
        )
    return lines


def site_block(manifest: Manifest) -> dict:
    """Return the ``site`` block of results.json."""
    s = manifest.site
    return {
        "title": s.title,
        "confidence": s.confidence,
        "alpha": s.alpha,
        "seed": s.seed,
        "adjust": s.adjust,
        "history": s.history,
    }


def resolve_out(manifest: Manifest, out: str | Path | None) -> Path:
    """Return the absolute output folder: ``out`` or the manifest's default inside the project."""
    if out is None:
        return (manifest.root / manifest.site.output).resolve()
    return Path(out).expanduser().resolve()


def check(project: str | Path, out: str | Path | None = None) -> CheckReport:
    """Validate the manifest and read every dataset; write nothing."""
    from .engines import read_table
    from .site.publish import check_target

    manifest = load_manifest(project)
    target = resolve_out(manifest, out)
    check_target(target, manifest, from_manifest=out is None)
    reports = tuple(_dataset_report(read_table(spec)) for spec in manifest.datasets)
    return CheckReport(manifest=manifest.path, out=target, datasets=reports)


def _report_from_results(ds: dict, reused: bool) -> DatasetReport:
    """Return a dataset's report from its (cached) results, without reading the file."""
    source = ds["source"]
    return DatasetReport(
        name=ds["name"],
        file=source["file"],
        rows_read=source["rows_read"],
        rows_used=source["rows_used"],
        rows_dropped=source["rows_dropped"],
        drop_reasons=dict(source["drop_reasons"]),
        unparsed={k: dict(v) for k, v in source.get("unparsed", {}).items()},
        groups=len(ds["groups"]),
        measures=len(ds["measures"]),
        warnings=tuple(source.get("warnings", ())),
        reused=reused,
        notes=tuple(source.get("notes", ())),
    )


READ_TRIES = 3  # reads of a file that keeps changing before the build gives up


def file_stamp(path: Path) -> tuple:
    """Return what changes when a file (or a folder's Parquet parts) is saved again: device,
    inode, size, modification and change times of each."""
    paths = [path]
    if path.is_dir():
        from .streaming.source import parquet_parts

        paths = parquet_parts(path)
    stamps = []
    for item in paths:
        try:
            info = item.stat()
        except OSError:
            stamps.append((str(item), None))
            continue
        stamps.append(
            (str(item), info.st_dev, info.st_ino, info.st_size, info.st_mtime_ns, info.st_ctime_ns)
        )
    return tuple(stamps)


def file_digest(path: Path) -> str:
    """Return the hex SHA-256 of a file's bytes (the same digest results.json records); for a
    folder of Parquet parts, the digest of its (name, hash) list."""
    if path.is_dir():
        from .streaming.source import source_sha256

        return source_sha256(path)
    return file_sha256(path)


def previous_results(target: Path) -> tuple[dict | None, str | None]:
    """Return (the previous site's results.json, a notice) — None when there is none to use."""
    from .site.render import MARKER

    path = target / "results.json"
    if not (target / MARKER).is_file() or not path.is_file():
        return None, None
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        if not isinstance(data, dict) or not isinstance(data.get("datasets"), list):
            raise ValueError("not a results tree")
    except (OSError, ValueError, RecursionError):
        return None, damaged_previous(target)
    return data, None


def damaged_previous(target: Path) -> str:
    """Return the notice for a previous results.json that cannot be used."""
    return (
        f"{target / 'results.json'} could not be read, so this build is compared with nothing "
        "and its history starts again"
    )


def _moved(previous: dict | None, computed: dict, manifest: Manifest) -> tuple[bool, dict, list]:
    """Return (whether any number changed, the changes block, the history) against the
    previous build's results; raises KeyError, TypeError... when those are damaged."""
    from .changes import compare, core, extend_history
    from .conforms import conforms
    from .site.render import build_time, data_time

    # Equal data compare equal without encoding them again (both came through JSON).
    numbers_changed = previous is None or core(previous) != computed
    if not numbers_changed and "changes" in previous and "history" in previous:
        # Nothing computed moved: the site keeps saying what moved at the last real change.
        changes, history = previous["changes"], previous["history"][-manifest.site.history :]
        if not conforms(changes, "changes") or not all(
            conforms(h, "history_entry") for h in history
        ):
            raise ValueError("the previous changes or history are damaged")
        return numbers_changed, changes, history
    changes = compare(previous and core(previous), computed)
    # Dated by SOURCE_DATE_EPOCH, else by the data files' newest modification time.
    dated = build_time() or data_time(manifest)
    history = extend_history(previous, computed, manifest.site.history, dated)
    return numbers_changed, changes, history


def render_key(computed_id: str, changes: dict, history: list, manifest: Manifest) -> str:
    """Return a SHA-256 of everything a render reads: equal keys give equal site bytes.

    ``computed_id`` identifies the computed numbers (see :func:`changes.results_id`);
    ``changes`` and ``history`` complete the results tree the pages show.
    """
    from .site.render import build_time

    digest = hashlib.sha256()
    parts = {
        "results": computed_id,
        "changes": changes,
        "history": history,
        "site": dataclasses.asdict(manifest.site),
        "version": __version__,
        "code": code_fingerprint(),
        "vl_convert": vl_convert_version(),
        "built_at": build_time(),
    }
    digest.update(canonical(parts).encode("utf-8"))
    for spec in manifest.datasets:
        if spec.notes_path is not None:
            digest.update(b"notes\0" + file_digest(spec.notes_path).encode("ascii"))
    digest.update(layouts_digest(manifest).encode("ascii"))
    return digest.hexdigest()


def layouts_digest(manifest: Manifest) -> str:
    """Return a SHA-256 of every layout file a render may read (packaged and the project's).

    Layouts are named by their place among the layouts, not by absolute path: the same site
    from an installed copy and from a checkout has the same key.
    """
    from .site.render import PROJECT_STYLE, layout_files, packaged_layouts

    digest = hashlib.sha256()
    packaged = packaged_layouts()
    for path in layout_files(manifest):
        if path.is_relative_to(packaged):
            name = f"packaged/{path.relative_to(packaged).as_posix()}"
        else:
            name = f"project/{PROJECT_STYLE}"
        digest.update(name.encode("utf-8") + b"\0" + file_digest(path).encode("ascii"))
    return digest.hexdigest()


class PageMemo:
    """Rendered dataset pages kept in the cache, keyed by everything such a page reads.

    A page reads its dataset's results, its notes, the navigation, the site settings, the
    layouts and the code; when none changed, its bytes (and its CSV files) are reused.
    """

    def __init__(self, cache, manifest: Manifest, results: dict, checksums: list[str]):
        from .site.render import build_time

        self.cache = cache
        self.reused: list[str] = []
        # Each dataset's results are already identified by their cache checksum (the SHA-256
        # of their canonical JSON), so a large dataset is not encoded again here.
        self.checksums = {
            ds["slug"]: checksum
            for ds, checksum in zip(results["datasets"], checksums, strict=True)
        }
        self.base = canonical(
            {
                "site": dataclasses.asdict(manifest.site),
                "version": __version__,
                "code": code_fingerprint(),
                "built_at": build_time(),
                "layouts": layouts_digest(manifest),
                "nav": [(ds["name"], ds["slug"]) for ds in results["datasets"]],
                "has_changes": "changes" in results,
            }
        )

    def key(self, ds: dict, spec) -> str:
        digest = hashlib.sha256(self.base.encode("utf-8"))
        digest.update(self.checksums[ds["slug"]].encode("ascii"))
        if spec.notes_path is not None:
            digest.update(b"notes\0" + file_digest(spec.notes_path).encode("ascii"))
        return digest.hexdigest()

    def get(self, key: str, name: str) -> dict[str, bytes] | None:
        found = self.cache.load_checked("pages", key)
        if found is None or name not in found[0]:
            return None
        self.reused.append(name)
        return {path: text.encode("utf-8") for path, text in found[0].items()}

    def put(self, key: str, files: dict[str, bytes]) -> None:
        self.cache.store("pages", key, {path: data.decode("utf-8") for path, data in files.items()})


def _sizes(sizes: dict[str, int]) -> dict:
    pages = {name: n for name, n in sizes.items() if name.endswith(".html")}
    assets = {name: n for name, n in sizes.items() if name.startswith("assets/")}
    largest = max(sorted(pages), key=lambda name: pages[name]) if pages else None
    return {
        "pages": len(pages),
        "files": len(sizes),
        "total_bytes": sum(sizes.values()),
        "assets": len(assets),
        "asset_bytes": sum(assets.values()),
        "largest_page": largest,
        "largest_page_bytes": pages[largest] if largest else 0,
    }


def _progress(progress, quiet: bool, started: float):
    """Return a function that reports one progress line, or does nothing."""
    if quiet or not progress:
        return None
    if progress is True:

        def say(line: str) -> None:
            from .cli import terminal_text

            stamp = f"[{time.perf_counter() - started:6.1f} s]"
            print(f"{stamp} {terminal_text(line, one_line=True)}", file=sys.stderr, flush=True)

        return say

    def forward(line: str) -> None:
        progress(f"[{time.perf_counter() - started:6.1f} s] {line}")

    return forward


def build(
    project: str | Path,
    out: str | Path | None = None,
    *,
    fresh: bool = False,
    zip: str | Path | None = None,
    single_file: str | Path | None = None,
    progress=None,
    quiet: bool = False,
) -> BuildReport:
    """Build the site for ``project`` into ``out`` (default: the project's output folder).

    ``fresh`` ignores the cache; ``zip`` and ``single_file`` also write the site as a zip or
    as one HTML file at those paths; ``progress`` is True (lines to stderr) or a function
    taking one line of text; ``quiet`` silences progress.
    """
    from .allocator import reuse_freed_memory
    from .changes import core
    from .site import publish

    started = time.perf_counter()
    reuse_freed_memory()  # large arrays come and go: keep their memory (see the module)
    say = _progress(progress, quiet, started)
    timer = Timer()
    manifest = load_manifest(project)
    target = resolve_out(manifest, out)
    publish.check_target(target, manifest, from_manifest=out is None)
    zip_path = publish.check_extra_path(Path(zip), target, manifest, "zip") if zip else None
    single_path = (
        publish.check_extra_path(Path(single_file), target, manifest, "single file")
        if single_file
        else None
    )
    if zip_path is not None and zip_path == single_path:
        raise SitebuildError(
            f"{zip_path}: --zip and --single-file name the same file; give each its own."
        )
    cache = Cache(cache_folder(manifest.root), enabled=not fresh)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SitebuildError(
            f"{target.parent}: cannot create the folder ({exc.strerror}); choose another --out."
        ) from None
    notices: list[str] = []
    with publish.Lock(target) as lock:
        notices += lock.notices
        datasets, reports, checksums = [], [], []
        for spec in manifest.datasets:
            for _ in range(READ_TRIES):
                # The file's stamp before hashing and after reading: equal stamps mean the
                # numbers come from the bytes that were hashed (a file saved in between would
                # otherwise store its numbers under the old file's hash).
                stamp = file_stamp(spec.path)
                with timer.stage("cache"):
                    from .engines import source_digest

                    sha = source_digest(spec)
                    key = dataset_key(sha, spec, manifest.site)
                    found = cache.load_checked("results", key)
                if found is not None and found[0].get("source", {}).get("sha256") == sha:
                    if file_stamp(spec.path) != stamp:
                        continue
                    ds, checksum = found
                    report = _report_from_results(ds, reused=True)
                    if say:
                        say(f"{spec.name}: unchanged, results reused")
                    break
                from .engines import read_table
                from .results import clean

                if say:
                    say(f"{spec.name}: reading {spec.file}")
                with one_blas_thread():
                    with timer.stage("read"):
                        table = read_table(
                            spec, rng=dataset_rng(manifest.site.seed, spec.name, 99), sha256=sha
                        )
                    _release_reader_memory()
                    if say:
                        say(f"{spec.name}: {table.report.rows_used:,} rows ready")
                    ds = clean(analyse(table, manifest, timer, say))
                stopping.check()  # a stop whose KeyboardInterrupt a library swallowed
                if file_stamp(spec.path) != stamp:
                    if say:
                        say(f"{spec.name}: the file changed while it was read; reading it again")
                    continue
                # Through JSON and back, so fresh and cached results are the very same data.
                ds = json.loads(canonical(ds))
                checksum = cache.store("results", key, ds)
                report = _dataset_report(table)
                break
            else:
                raise SitebuildError(
                    f"{spec.file}: the file changed while it was read, {READ_TRIES} times over; "
                    "build again once it is saved."
                )
            datasets.append(ds)
            checksums.append(checksum)
            reports.append(report)
        computed = {"tool_version": __version__, "site": site_block(manifest), "datasets": datasets}
        notices += summarised_notices(datasets)
        from .site.render import ignored_layouts

        notices += ignored_layouts(manifest)
        previous, notice = previous_results(target)
        if notice:
            notices.append(notice)
        try:
            numbers_changed, changes, history = _moved(previous, computed, manifest)
        except (KeyError, TypeError, AttributeError, ValueError, IndexError, RecursionError):
            # A damaged previous results.json must not fail every build (even --fresh ones).
            notices.append(damaged_previous(target))
            numbers_changed, changes, history = _moved(None, computed, manifest)
        # Identifies the computed numbers for the render key: each dataset's payload checksum
        # stands for its results, so nothing large is encoded on a no-op rebuild.
        computed_id = hashlib.sha256(
            canonical({"head": core({**computed, "datasets": []}), "datasets": checksums}).encode(
                "utf-8"
            )
        ).hexdigest()
        from .results import stamped

        results = stamped({**computed, "changes": changes, "history": history})
        if numbers_changed:
            report_changes = tuple(changes["summary"])
        else:
            report_changes = ("No number changed since the last build.",)

        with timer.stage("render"):
            site_key = render_key(computed_id, changes, history, manifest)
            record_key = hashlib.sha256(str(target).encode("utf-8")).hexdigest()
            record = cache.load("sites", record_key)
            files = None
            unchanged = (
                record is not None
                and record.get("site_key") == site_key
                and publish.on_disk(target) == record.get("files")
            )
            if not unchanged:
                from .site import render

                if say:
                    say("rendering pages")
                from .site.chart_script import chart_script

                # Made once per user and installed version, not per project or build.
                bundle = chart_script(render.chart_bundle)
                memo = PageMemo(cache, manifest, results, checksums)
                files = render.render_site(results, manifest, bundle=bundle, pages=memo)
                # Names the project, so its manifest's output may write here again even when
                # it lies outside the project (see publish.check_target).
                files[render.MARKER] += (publish.marker_line(manifest) + "\n").encode()
                files[render.MARKER] += publish.site_listing(files)
                if say and memo.reused:
                    say(f"pages reused unchanged: {', '.join(memo.reused)}")
                unchanged = publish.same_as_disk(files, target)
                sizes = {name: len(data) for name, data in files.items()}
            else:
                sizes = dict(record["sizes"])
        with timer.stage("publish"):
            if not unchanged:
                if say:
                    say(f"publishing to {target}")
                published = publish.publish(files, target, manifest, lock=False)
                notices += published.notices
            if files is not None:
                cache.store(
                    "sites",
                    record_key,
                    {"site_key": site_key, "files": publish.digests(files), "sizes": sizes},
                )
        zip_bytes = single_bytes = None
        if zip_path is not None or single_path is not None:
            if files is None:
                files = {name: (target / name).read_bytes() for name in sorted(record["files"])}
            with timer.stage("zip"):
                if zip_path is not None:
                    data = publish.zip_bytes(files, publish.zip_folder_name(zip_path))
                    publish.write_file(
                        zip_path, data, "zip", published=None if unchanged else target
                    )
                    zip_bytes = len(data)
                if single_path is not None:
                    from .site.single_file import render_single

                    if say:
                        say("writing the single file")
                    data = render_single(results, manifest, files=files)
                    publish.write_file(
                        single_path, data, "single file", published=None if unchanged else target
                    )
                    single_bytes = len(data)
    notices += cache.notices
    summary = _sizes(sizes)
    return BuildReport(
        out=target,
        index=target / "index.html",
        datasets=tuple(reports),
        pages=summary["pages"],
        files=summary["files"],
        total_bytes=summary["total_bytes"],
        elapsed=time.perf_counter() - started,
        stages=dict(timer.stages),
        notices=tuple(notices),
        written=not unchanged,
        changes=report_changes,
        numbers_changed=numbers_changed,
        assets=summary["assets"],
        asset_bytes=summary["asset_bytes"],
        largest_page=summary["largest_page"],
        largest_page_bytes=summary["largest_page_bytes"],
        zip_path=zip_path,
        zip_bytes=zip_bytes,
        single_file_path=single_path,
        single_file_bytes=single_bytes,
    )
