"""The build: manifest → tables → results → charts and pages → a published site.

``build`` and ``check`` are what the CLI calls; everything the CLI prints comes from the
report objects returned here.
"""

from __future__ import annotations

import importlib
import importlib.util
import time
import zlib
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

from . import __version__
from .manifest import Manifest, load_manifest
from .sections import SECTION_NAMES


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


@dataclass(frozen=True)
class BuildReport:
    """The outcome of a build: where the site is, what it holds, how long each stage took."""

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


@dataclass(frozen=True)
class CheckReport:
    """What a build would do, found without writing anything."""

    manifest: Path
    out: Path
    datasets: tuple[DatasetReport, ...]
    notices: tuple[str, ...] = ()


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


def section_modules() -> list:
    """Return the section modules in page order."""
    names = [n for n in SECTION_NAMES if importlib.util.find_spec(f"sitebuild.sections.{n}")]
    return [importlib.import_module(f"sitebuild.sections.{name}") for name in names]


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
    )


def analyse(table, manifest: Manifest, timer: Timer) -> dict:
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
    for index, module in enumerate(section_modules()):
        name = module.__name__.rsplit(".", 1)[-1]
        with timer.stage(name):
            rng = dataset_rng(manifest.site.seed, spec.name, index)
            ds.update(module.compute(table, manifest.site, rng, ds))
    return ds


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
    from .ingest import read_table
    from .site.publish import check_target

    manifest = load_manifest(project)
    target = resolve_out(manifest, out)
    check_target(target, manifest)
    reports = tuple(_dataset_report(read_table(spec)) for spec in manifest.datasets)
    return CheckReport(manifest=manifest.path, out=target, datasets=reports)


def build(project: str | Path, out: str | Path | None = None, **options) -> BuildReport:
    """Build the site for ``project`` into ``out`` (default: the project's output folder)."""
    from .ingest import read_table
    from .results import clean
    from .site import publish, render

    started = time.perf_counter()
    timer = Timer()
    manifest = load_manifest(project)
    target = resolve_out(manifest, out)
    publish.check_target(target, manifest)
    datasets, reports = [], []
    for spec in manifest.datasets:
        with timer.stage("read"):
            table = read_table(spec)
        datasets.append(clean(analyse(table, manifest, timer)))
        reports.append(_dataset_report(table))
    results = {"tool_version": __version__, "site": site_block(manifest), "datasets": datasets}
    with timer.stage("render"):
        files = render.render_site(results, manifest)
    with timer.stage("publish"):
        published = publish.publish(files, target, manifest)
    elapsed = time.perf_counter() - started
    return BuildReport(
        out=target,
        index=target / "index.html",
        datasets=tuple(reports),
        pages=sum(1 for name in files if name.endswith(".html")),
        files=len(files),
        total_bytes=sum(len(b) for b in files.values()),
        elapsed=elapsed,
        stages=dict(timer.stages),
        notices=tuple(published.notices),
        extra={"options": options},
    )
