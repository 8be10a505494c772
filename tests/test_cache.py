"""Incremental rebuilds: what is reused, what is recomputed, and byte-identical output."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from sitebuild import build, cache
from sitebuild.scaffold import new_project

SECOND = """
[[datasets]]
name = "Second batch"
file = "data/second.csv"
group = "flour"
measures = ["loaf volume (ml)", "crust score"]
"""


def two_dataset_project(folder: Path) -> Path:
    """Return a project with two datasets (the scaffold's, and a copy under another name)."""
    made = new_project(folder)
    shutil.copyfile(made.root / "data/loaves.csv", made.root / "data/second.csv")
    with open(made.root / "manifest.toml", "a", encoding="utf-8") as handle:
        handle.write(SECOND)
    return made.root


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    return {
        p.relative_to(folder).as_posix(): (p.read_bytes(), p.stat().st_mtime_ns)
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def append_row(path: Path, row: str) -> None:
    with open(path, "a", encoding="utf-8") as handle:
        handle.write(row + "\n")


@pytest.fixture
def project(tmp_path) -> Path:
    return two_dataset_project(tmp_path / "proj")


def test_noop_rebuild_reuses_everything_and_writes_nothing(project, tmp_path):
    first = build(project)
    assert first.written and first.reused == ()
    before = snapshot(first.out)
    siblings = sorted(p.name for p in first.out.parent.iterdir())
    again = build(project)
    assert again.reused == ("Loaves by flour", "Second batch")
    assert not again.written
    assert again.changes == ("No number changed since the last build.",)
    # Same bytes and untouched modification times: nothing was rewritten.
    assert snapshot(again.out) == before
    assert sorted(p.name for p in again.out.parent.iterdir()) == siblings


def test_changed_file_recomputes_only_that_dataset(project):
    build(project)
    append_row(project / "data/second.csv", "L999,spelt blend,60,1800,6")
    report = build(project)
    assert report.reused == ("Loaves by flour",)
    assert {d.name: d.reused for d in report.datasets} == {
        "Loaves by flour": True,
        "Second batch": False,
    }
    assert report.written
    second = next(d for d in report.datasets if d.name == "Second batch")
    assert second.rows_read == 37


def test_manifest_section_change_recomputes_that_dataset_only(project):
    build(project)
    manifest = project / "manifest.toml"
    text = manifest.read_text(encoding="utf-8")
    # Drop one measure from the second dataset only (its block is the last one).
    head, tail = text.rsplit("[[datasets]]", 1)
    tail = tail.replace(
        'measures = ["loaf volume (ml)", "crust score"]', 'measures = ["crust score"]'
    )
    manifest.write_text(head + "[[datasets]]" + tail, encoding="utf-8")
    report = build(project)
    assert report.reused == ("Loaves by flour",)


def test_results_setting_recomputes_all_but_title_does_not(project):
    build(project)
    manifest = project / "manifest.toml"
    text = manifest.read_text(encoding="utf-8")
    manifest.write_text(
        text.replace('title = "Bakery proofing trial"', 'title = "Renamed"'), "utf-8"
    )
    renamed = build(project)
    assert renamed.reused == ("Loaves by flour", "Second batch")
    assert renamed.written  # the title is on every page
    text = manifest.read_text(encoding="utf-8")
    manifest.write_text(text.replace("confidence = 0.95", "confidence = 0.9"), "utf-8")
    assert build(project).reused == ()


def test_fresh_ignores_the_cache_and_gives_the_same_site(project):
    first = build(project)
    before = {k: v[0] for k, v in snapshot(first.out).items()}
    fresh = build(project, fresh=True)
    assert fresh.reused == ()
    assert not fresh.written  # recomputed, yet byte for byte the same site
    assert {k: v[0] for k, v in snapshot(fresh.out).items()} == before


def test_code_change_invalidates_cached_results(project, monkeypatch):
    build(project)
    monkeypatch.setattr(cache, "code_fingerprint", lambda: "edited code")
    assert build(project).reused == ()


def _entries(project: Path) -> list[Path]:
    return sorted((project / cache.CACHE_DIR / "results").glob("*.json"))


def test_corrupted_entry_fails_its_checksum_and_is_recomputed(project):
    first = build(project)
    entries = _entries(project)
    assert len(entries) == 2
    # Change one number inside a stored payload but keep the JSON valid.
    for path in entries:
        header, payload = path.read_text(encoding="utf-8").split("\n", 1)
        payload = json.loads(payload)
        payload["source"]["rows_used"] += 1
        path.write_text(header + "\n" + json.dumps(payload), encoding="utf-8")
    report = build(project)
    assert report.reused == ()
    assert any("checksum" in n for n in report.notices)
    assert [d.rows_used for d in report.datasets] == [d.rows_used for d in first.datasets]


def test_foreign_or_truncated_entry_is_recomputed(project):
    build(project)
    a, b = _entries(project)
    a.write_text("{not json", encoding="utf-8")
    b.write_text(json.dumps({"something": "else"}), encoding="utf-8")
    report = build(project)
    assert report.reused == ()
    assert sum("recomputed" in n for n in report.notices) == 2


def test_dataset_key_depends_on_each_ingredient(project):
    from dataclasses import replace

    from sitebuild.manifest import load_manifest

    manifest = load_manifest(project)
    spec, site = manifest.datasets[0], manifest.site
    base = cache.dataset_key("a" * 64, spec, site)
    assert cache.dataset_key("a" * 64, spec, site) == base
    assert cache.dataset_key("b" * 64, spec, site) != base
    assert cache.dataset_key("a" * 64, replace(spec, x=None), site) != base
    assert cache.dataset_key("a" * 64, spec, replace(site, seed=1)) != base
    assert cache.dataset_key("a" * 64, spec, replace(site, adjust="bh")) != base
    assert cache.dataset_key("a" * 64, spec, replace(site, title="Other")) == base


def test_chart_bundle_is_cached_by_version_and_checked(tmp_path, monkeypatch):
    calls = []

    def make():
        calls.append(1)
        return b"window.vega = {};"

    monkeypatch.setenv("SITEBUILD_USER_CACHE", str(tmp_path / "user"))
    store = cache.Cache(tmp_path / "c")
    assert store.chart_bundle(make) == b"window.vega = {};"
    assert store.chart_bundle(make) == b"window.vega = {};"
    assert len(calls) == 1
    # Kept in the user's own folder, never in the project's cache (see test_hostile_round2).
    assert not (tmp_path / "c" / "assets").exists()
    stored = next((tmp_path / "user").glob("*.js"))
    stored.write_bytes(b"tampered")
    assert store.chart_bundle(make) == b"window.vega = {};"
    assert len(calls) == 2


def test_two_builds_into_different_folders_are_byte_identical(project, tmp_path):
    a = build(project, out=tmp_path / "site-a", fresh=True, zip=tmp_path / "a.zip")
    b = build(project, out=tmp_path / "elsewhere" / "site-b", zip=tmp_path / "b" / "a.zip")
    assert b.reused == ("Loaves by flour", "Second batch")
    files_a = {k: v[0] for k, v in snapshot(a.out).items()}
    files_b = {k: v[0] for k, v in snapshot(b.out).items()}
    assert files_a.keys() == files_b.keys()
    for name in files_a:
        assert files_a[name] == files_b[name], name
    assert (tmp_path / "a.zip").read_bytes() == (tmp_path / "b" / "a.zip").read_bytes()
    # Nothing of this machine leaks into the pages: no project, output or temp paths.
    for name, data in files_a.items():
        for leak in (str(tmp_path), str(project), "/tmp/"):
            assert leak.encode() not in data, (name, leak)


def test_noop_rebuild_does_not_import_heavy_libraries(project):
    import subprocess
    import sys

    build(project)
    code = (
        "import sys, sitebuild; r = sitebuild.build(sys.argv[1]); "
        "heavy = [m for m in ('pandas', 'scipy', 'altair', 'vl_convert') if m in sys.modules]; "
        "print(r.written, heavy)"
    )
    root = Path(__file__).resolve().parents[1]
    out = subprocess.run(
        [sys.executable, "-c", code, str(project)],
        capture_output=True,
        text=True,
        env={"PYTHONPATH": str(root), "PATH": "/usr/bin:/bin"},
        check=True,
    )
    assert out.stdout.strip() == "False []"


def test_only_the_changed_datasets_page_is_rendered_again(project, tmp_path):
    # Asserted through the progress lines, and checked for correctness against a fresh build
    # of the same inputs into another folder: every byte must agree.
    build(project)
    append_row(project / "data/second.csv", "L998,spelt blend,61,1750,5")
    lines: list[str] = []
    again = build(project, progress=lines.append)
    reused = [line for line in lines if "pages reused unchanged" in line]
    assert reused and "loaves-by-flour.html" in reused[0] and "second-batch" not in reused[0]
    fresh = build(project, out=tmp_path / "fresh", fresh=True)
    # The overview, the change page and results.json say what moved since each folder's own
    # previous build, so they differ; every dataset page and table must be the same bytes.
    moving = {"index.html", "changes.html", "results.json"}
    ours = {k: v[0] for k, v in snapshot(again.out).items() if k not in moving}
    theirs = {k: v[0] for k, v in snapshot(fresh.out).items() if k not in moving}
    assert ours == theirs and "loaves-by-flour.html" in ours
