"""Publishing: atomic swap, the copy fallback, the lock, the zip and the single file."""

from __future__ import annotations

import base64
import errno
import hashlib
import json
import os
import re
import socket
import subprocess
import zipfile
from html import unescape
from pathlib import Path

import pytest

from sitebuild import build
from sitebuild.errors import BuildLocked, SitebuildError
from sitebuild.scaffold import new_project
from sitebuild.site import publish
from sitebuild.site.single_file import script_text


def site_bytes(folder: Path) -> dict[str, bytes]:
    return {
        p.relative_to(folder).as_posix(): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def touch_data(root: Path) -> None:
    with open(root / "data/loaves.csv", "a", encoding="utf-8") as handle:
        handle.write("L900,spelt blend,55,1700,5\n")


@pytest.fixture
def built(tmp_path):
    root = new_project(tmp_path / "proj").root
    report = build(root)
    return root, report.out


def leftovers(parent: Path) -> list[str]:
    return sorted(p.name for p in parent.iterdir() if ".new-" in p.name or ".old-" in p.name)


def test_failure_half_way_through_writing_keeps_previous_site(built, monkeypatch):
    root, out = built
    before = site_bytes(out)
    real_write = publish.write_tree

    def fail_half_way(files, folder):
        names = sorted(files)
        real_write({n: files[n] for n in names[: len(names) // 2]}, folder)
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(publish, "write_tree", fail_half_way)
    touch_data(root)
    with pytest.raises(SitebuildError, match="previous site is unchanged"):
        build(root)
    assert site_bytes(out) == before
    assert leftovers(out.parent) == []
    assert not (out.parent / f".{out.name}.lock").exists()
    monkeypatch.setattr(publish, "write_tree", real_write)
    assert build(root).written


def test_failure_during_the_swap_puts_the_old_site_back(built, monkeypatch):
    root, out = built
    before = site_bytes(out)
    real_replace = os.replace
    calls = []

    def second_rename_fails(src, dst):
        # Only folder renames are the swap (cache entries are files renamed into place too).
        if Path(src).is_dir():
            calls.append(src)
            if len(calls) == 2:
                raise OSError(errno.EIO, "Input/output error")
        return real_replace(src, dst)

    monkeypatch.setattr(publish.os, "replace", second_rename_fails)
    touch_data(root)
    with pytest.raises(OSError):
        build(root)
    assert site_bytes(out) == before
    assert leftovers(out.parent) == []


def test_rename_refused_falls_back_to_copying_and_says_so(built, monkeypatch):
    root, out = built
    real_replace = os.replace

    def no_folder_renames(src, dst):
        if Path(src).is_dir():
            raise OSError(errno.EXDEV, "Invalid cross-device link")
        return real_replace(src, dst)

    monkeypatch.setattr(publish.os, "replace", no_folder_renames)
    touch_data(root)
    report = build(root)
    assert report.written
    assert any("could not be swapped in one step" in n for n in report.notices)
    # Re-rendering from scratch gives exactly the files now on disk: the copy is complete
    # and nothing stale was left behind.
    monkeypatch.setattr(publish.os, "replace", real_replace)
    assert not build(root, fresh=True).written
    assert leftovers(out.parent) == []
    assert not [p for p in out.rglob("*") if ".new-" in p.name]


def test_lock_held_by_a_live_build_stops_with_its_name(built):
    root, out = built
    before = site_bytes(out)
    other = subprocess.Popen(["sleep", "60"])
    lock = out.parent / f".{out.name}.lock"
    try:
        lock.write_text(f"pid {other.pid} on {socket.gethostname()} since 10:00:00\n")
        touch_data(root)
        with pytest.raises(BuildLocked) as caught:
            build(root)
        message = str(caught.value)
        assert f"pid {other.pid}" in message and str(lock) in message
        assert site_bytes(out) == before
    finally:
        other.kill()
        other.wait()
    # Once that process is gone the lock is stale and the next build takes it over.
    assert build(root).written
    assert not lock.exists()


def test_zip_is_deterministic_sorted_and_holds_the_site(built, tmp_path):
    root, out = built
    first = build(root, zip=tmp_path / "mail" / "trial.zip")
    data = (tmp_path / "mail" / "trial.zip").read_bytes()
    assert first.zip_bytes == len(data)
    build(root, out=tmp_path / "other", zip=tmp_path / "again.zip")
    with zipfile.ZipFile(tmp_path / "mail" / "trial.zip") as archive:
        names = archive.namelist()
        assert names == sorted(names)
        assert all(n.startswith("trial/") for n in names)
        assert {i.date_time for i in archive.infolist()} == {(1980, 1, 1, 0, 0, 0)}
        inside = {n.removeprefix("trial/"): archive.read(n) for n in names}
    assert inside == site_bytes(out)
    # Same site, other zip name: only the folder prefix differs, so compare the contents.
    with zipfile.ZipFile(tmp_path / "again.zip") as archive:
        assert {n.removeprefix("again/"): archive.read(n) for n in archive.namelist()} == inside


def test_zip_and_single_file_inside_the_site_or_on_inputs_are_refused(built):
    root, out = built
    with pytest.raises(SitebuildError, match="inside the site folder"):
        build(root, zip=out / "site.zip")
    with pytest.raises(SitebuildError, match="input of the project"):
        build(root, single_file=root / "notes/loaves.md")
    with pytest.raises(SitebuildError, match="build cache"):
        build(root, out=root / ".sitebuild_cache" / "site")


def test_single_file_is_self_contained(built, tmp_path):
    root, _ = built
    path = tmp_path / "one.html"
    report = build(root, single_file=path)
    html = path.read_text(encoding="utf-8")
    assert report.single_file_bytes == len(html.encode("utf-8"))
    markup = re.sub(r"<script\b[^>]*>.*?</script>", "", html, flags=re.DOTALL)
    assert not re.search(r'\ssrc="', markup)  # nothing loaded from beside the file
    assert not re.search(r'\shref="(?!#|data:)', markup)  # links are in-page or data: URLs
    assert '<link rel="stylesheet"' not in markup
    ids = re.findall(r'\sid="([^"]*)"', markup)
    assert len(ids) == len(set(ids))
    for target in re.findall(r'\shref="#([^"]*)"', markup):
        assert target in ids, target
    boxes = re.findall(r'data-chart="([^"]*)"', html)
    specs = re.search(r'<script type="application/json" id="chart-specs">(.*?)</script>', html)
    assert boxes and set(boxes) <= set(json.loads(specs[1]))  # every chart box has its spec
    # Every inline script is allowed by its hash in the CSP, and no other script is.
    policy = re.search(r'http-equiv="Content-Security-Policy" content="([^"]*)"', html)[1]
    csp = re.search(r"script-src ([^;]*);", unescape(policy))[1]
    scripts = re.findall(r"<script>(.*?)</script>", html, re.DOTALL)
    assert len(scripts) == 3  # the chart script, site.js and tables.js
    for text in scripts:
        digest = base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode()
        assert f"'sha256-{digest}'" in csp
    assert "'unsafe-inline'" not in csp


def test_inline_script_text_cannot_close_its_element():
    text = script_text('var s = "</script><script>alert(1)</SCRIPT>"; // <!-- x')
    assert "</script" not in text.lower() and "<!--" not in text
    assert text == 'var s = "<\\/script><script>alert(1)<\\/SCRIPT>"; // <\\!-- x'


def test_output_folder_that_is_not_ours_is_refused(tmp_path):
    root = new_project(tmp_path / "proj").root
    foreign = tmp_path / "documents"
    foreign.mkdir()
    (foreign / "letter.txt").write_text("keep me")
    with pytest.raises(SitebuildError, match="not written by sitebuild"):
        build(root, out=foreign)
    assert (foreign / "letter.txt").read_text() == "keep me"
