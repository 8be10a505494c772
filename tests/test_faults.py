"""Faults while writing: a read-only folder, a full disk, a signal mid-build, two builds at once.

In every case the previous site stays byte for byte, the CLI prints one clear line and exits
non-zero, and no staging (``.<name>.new-*``), set-aside (``.<name>.old-*``) or lock file is left.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

import sitebuild
import sitebuild.errors
from sitebuild.cli import main
from sitebuild.site import publish

from conftest import REPO, leftovers, snapshot, write_project

MANIFEST = """
[site]
title = "Faults"

[[datasets]]
name = "Lines"
file = "data/d.csv"
group = "g"
measures = ["v", "w"]
"""
GOOD_CSV = "g,v,w\nA,1,2\nA,2,3\nA,3,5\nB,3,4\nB,4,5\nB,6,6\n"
CHANGED_CSV = GOOD_CSV + "C,7,1\nC,8,2\nC,9,4\n"
IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0


@pytest.fixture
def site(tmp_path):
    """A good site already built; the data then changes so the next build must write."""
    root = write_project(tmp_path / "p", MANIFEST, {"data/d.csv": GOOD_CSV})
    out = tmp_path / "out" / "site"
    sitebuild.build(root, out=out, quiet=True)
    before = snapshot(out)
    (root / "data" / "d.csv").write_text(CHANGED_CSV, encoding="utf-8")
    return root, out, before


def failed_build(root: Path, out: Path, capsys) -> tuple[int, str]:
    code = main(["build", str(root), "--out", str(out), "--quiet"])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), captured.err
    return code, lines[0]


def test_read_only_output_folder(site, capsys, monkeypatch):
    root, out, before = site
    if IS_ROOT:
        # Root ignores file modes, so chmod cannot make the folder read-only here; simulate
        # the refusal at the point where files are written instead.
        def refuse(files, folder):
            raise PermissionError(errno.EACCES, "Permission denied", str(folder))

        monkeypatch.setattr(publish, "write_tree", refuse)
    else:
        out.parent.chmod(0o555)
    try:
        code, line = failed_build(root, out, capsys)
    finally:
        out.parent.chmod(0o755)
    assert code == 2
    assert "Permission denied" in line and "the previous site is unchanged" in line
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_disk_full_half_way(site, capsys, monkeypatch):
    root, out, before = site
    real_open = open
    opened = []

    def filling_open(path, mode="r", *args, **kwargs):
        if "w" in mode and str(path).find(f".{out.name}.new-") >= 0:
            opened.append(path)
            if len(opened) > 5:
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
        return real_open(path, mode, *args, **kwargs)

    # write_tree looks ``open`` up in its module first: the full disk hits it half way.
    monkeypatch.setattr(publish, "open", filling_open, raising=False)
    code, line = failed_build(root, out, capsys)
    assert len(opened) == 6, "the fault must strike after some files were written"
    assert code == 2
    assert "No space left on device" in line and "free space" in line
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_disk_full_while_copying_into_place(site, capsys, monkeypatch):
    # Where folders cannot be swapped (another device, some network shares) the files are
    # copied in beside the old ones; the disk fills during that copy.
    root, out, before = site
    real_replace, real_copy = os.replace, shutil.copyfile
    copies = []

    def no_swap(src, dst):
        if Path(src).name.startswith(f".{out.name}.new-") or Path(src) == out:
            raise OSError(errno.EXDEV, os.strerror(errno.EXDEV))
        return real_replace(src, dst)

    def filling_copy(src, dst, *args, **kwargs):
        copies.append(dst)
        if len(copies) > 4:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(dst))
        return real_copy(src, dst, *args, **kwargs)

    monkeypatch.setattr(publish.os, "replace", no_swap)
    monkeypatch.setattr(publish.shutil, "copyfile", filling_copy)
    code, line = failed_build(root, out, capsys)
    monkeypatch.undo()
    assert len(copies) == 5
    assert code == 2
    assert "No space left on device" in line and "the previous site is unchanged" in line
    assert snapshot(out) == before
    assert leftovers(out) == []
    assert not [p for p in out.rglob("*") if ".new-" in p.name], "half-copied files left"


def test_a_second_build_while_one_holds_the_lock(site, capsys):
    root, out, before = site
    with publish.Lock(out):
        code, line = failed_build(root, out, capsys)
        assert snapshot(out) == before
        assert leftovers(out) == [f".{out.name}.lock"]  # only the holder's lock
    assert code == 3
    assert "another build is writing this site" in line and f"pid {os.getpid()}" in line
    assert "wait for it to finish" in line
    assert leftovers(out) == []


def test_a_stale_lock_from_a_dead_build_is_taken_over(site, capsys):
    root, out, _ = site
    dead = subprocess.run(
        [sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True
    )
    import socket

    pid = int(dead.stdout)
    (out.parent / f".{out.name}.lock").write_text(
        f"pid {pid} on {socket.gethostname()} since 00:00:00\n"
    )
    assert main(["build", str(root), "--out", str(out), "--quiet"]) == 0
    capsys.readouterr()
    assert (out / "results.json").read_text(encoding="utf-8").count('"C"') >= 1
    assert leftovers(out) == []


# ---------------------------------------------------------------------------------------------
# Real processes: signals and two builds at once
# ---------------------------------------------------------------------------------------------

# Runs the CLI in a child process; SITEBUILD_TEST_PAUSE makes write_tree stop half way (after
# writing some files into the staging folder), announce it on stderr, and wait, so a signal or a
# second build can arrive at exactly that moment.
CHILD = textwrap.dedent(
    """
    import os, sys, time
    from sitebuild.site import publish

    real = publish.write_tree
    pause = float(os.environ.get("SITEBUILD_TEST_PAUSE", "0"))

    def slow_write(files, folder):
        names = sorted(files)
        half = len(names) // 2
        real({n: files[n] for n in names[:half]}, folder)
        print("HALF-WRITTEN", file=sys.stderr, flush=True)
        time.sleep(pause)
        real({n: files[n] for n in names[half:]}, folder)

    if pause:
        publish.write_tree = slow_write
    from sitebuild.cli import main

    sys.exit(main(sys.argv[1:]))
    """
)


def child(root: Path, out: Path, pause: float = 0.0) -> subprocess.Popen:
    env = {**os.environ, "PYTHONPATH": str(REPO), "SITEBUILD_TEST_PAUSE": str(pause)}
    return subprocess.Popen(
        [sys.executable, "-c", CHILD, "build", str(root), "--out", str(out)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
    )


def wait_for(proc: subprocess.Popen, marker: str, timeout: float = 60) -> list[str]:
    """Read the child's stderr until a line containing ``marker``; return the lines seen."""
    seen = []
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        line = proc.stderr.readline()
        if not line:
            break
        seen.append(line)
        if marker in line:
            return seen
    proc.kill()
    raise AssertionError(f"child never printed {marker!r}: {''.join(seen)}")


@pytest.mark.parametrize(
    "signum",
    [
        signal.SIGINT,
        signal.SIGTERM,
    ],
    ids=["SIGINT", "SIGTERM"],
)
def test_signal_half_way_through_writing(site, signum):
    root, out, before = site
    proc = child(root, out, pause=30)
    wait_for(proc, "HALF-WRITTEN")
    staging = [p for p in out.parent.iterdir() if p.name.startswith(f".{out.name}.new-")]
    assert staging and any(staging[0].iterdir()), "the signal must arrive mid-write"
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=30)
    assert proc.returncode == 128 + signum
    assert snapshot(out) == before
    assert leftovers(out) == []
    assert "Traceback" not in err
    assert "interrupted; the previous site is unchanged" in err


@pytest.mark.parametrize(
    "signum",
    [
        signal.SIGINT,
        signal.SIGTERM,
    ],
    ids=["SIGINT", "SIGTERM"],
)
def test_signal_while_analysing_a_larger_dataset(site, signum):
    root, out, before = site
    rows = "".join(
        f"{'ABCD'[i % 4]},{(i * 7919) % 1013 / 7},{(i * 104729) % 997}\n" for i in range(150_000)
    )
    (root / "data" / "d.csv").write_text("g,v,w\n" + rows, encoding="utf-8")
    proc = child(root, out)
    # The summaries come first; the signal lands while the slower sections are running.
    wait_for(proc, "Lines: summaries (")
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 128 + signum
    assert snapshot(out) == before
    assert leftovers(out) == []
    assert "Traceback" not in err
    assert "interrupted; the previous site is unchanged" in err


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
@pytest.mark.parametrize("landing", ["import-fails", "library-swallows"])
def test_a_signal_inside_an_import_still_stops_the_build(
    site, capsys, monkeypatch, signum, landing
):
    # A signal that lands while Python initialises a compiled module surfaces as
    # "ImportError: initialization failed", not KeyboardInterrupt (seen in CI: SIGTERM while
    # the analysis imported scipy). The error may propagate ("import-fails"), or a library's
    # "try: import x / except ImportError: fall back" may eat it ("library-swallows"). Either
    # way the build stops before publishing and says "interrupted".
    root, out, before = site
    from sitebuild import pipeline

    real_analyse = pipeline.analyse

    def analyse_with_signal(*args, **kwargs):
        try:
            os.kill(os.getpid(), signum)
        except KeyboardInterrupt:
            if landing == "import-fails":
                raise ImportError("initialization failed") from None
        return real_analyse(*args, **kwargs)

    monkeypatch.setattr(pipeline, "analyse", analyse_with_signal)
    code, line = failed_build(root, out, capsys)
    assert code == 128 + signum
    assert line == "error: interrupted; the previous site is unchanged."
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_two_builds_at_once(site):
    root, out, before = site
    first = child(root, out, pause=8)
    wait_for(first, "HALF-WRITTEN")
    second = child(root, out)
    _, err2 = second.communicate(timeout=60)
    assert first.poll() is None, "the first build must still hold the lock"
    assert snapshot(out) == before
    _, err1 = first.communicate(timeout=60)
    assert second.returncode == 3
    error_lines = [line for line in err2.splitlines() if line.startswith("error:")]
    assert len(error_lines) == 1 and "another build is writing this site" in error_lines[0]
    assert "Traceback" not in err2
    assert first.returncode == 0, err1
    after = snapshot(out)
    assert after != before and '"C"' in after["results.json"].decode("utf-8")
    assert leftovers(out) == []


# -- round two: the copy fallback, a dead build's leftovers, the lock, foreign files ----------


def _no_swap(out, real_replace):
    def no_swap(src, dst):
        if Path(src).name.startswith(f".{out.name}.new-") or Path(src) == out:
            raise OSError(errno.EXDEV, os.strerror(errno.EXDEV))
        return real_replace(src, dst)

    return no_swap


def test_a_copy_that_fills_the_disk_half_way_leaves_no_partial_file(site, capsys, monkeypatch):
    root, out, before = site
    real_copy = shutil.copyfile
    copies = []

    def half_copy(src, dst, *args, **kwargs):
        copies.append(dst)
        if len(copies) == 3:  # the disk fills in the middle of this file
            Path(dst).write_bytes(Path(src).read_bytes()[:10])
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(dst))
        return real_copy(src, dst, *args, **kwargs)

    monkeypatch.setattr(publish.os, "replace", _no_swap(out, os.replace))
    monkeypatch.setattr(publish.shutil, "copyfile", half_copy)
    code, line = failed_build(root, out, capsys)
    monkeypatch.undo()
    assert code == 2 and "the previous site is unchanged" in line
    assert snapshot(out) == before
    assert not [p for p in out.rglob("*") if ".new-" in p.name], "half-copied files left"


def test_the_copy_never_follows_a_link_out_of_the_site(site, capsys, monkeypatch, tmp_path):
    root, out, _ = site
    elsewhere = tmp_path / "elsewhere"
    shutil.move(out / "assets", elsewhere)
    (out / "assets").symlink_to(elsewhere, target_is_directory=True)
    outside = snapshot(elsewhere)
    monkeypatch.setattr(publish.os, "replace", _no_swap(out, os.replace))
    code, line = failed_build(root, out, capsys)
    monkeypatch.undo()
    assert code == 2 and "assets" in line
    assert snapshot(elsewhere) == outside
    # Past the folder check too (a link made after it): the copy itself refuses.
    files = {"assets/x.css": b"x"}
    staging = tmp_path / "staging"
    publish.write_tree(files, staging)
    with pytest.raises(sitebuild.errors.SitebuildError, match="link"):
        publish._copy_into_place(files, staging, out)
    assert snapshot(elsewhere) == outside


def test_a_build_killed_between_its_renames_is_recovered(site, capsys):
    root, out, before = site
    # kill -9 after the old site was set aside and before the new one moved in.
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True)  # fmt: skip
    aside = out.parent / f".{out.name}.old-{int(dead.stdout)}"
    os.replace(out, aside)
    staging = out.parent / f".{out.name}.new-abc123"
    shutil.copytree(aside, staging)
    code = main(["build", str(root), "--out", str(out)])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "restored the previous site" in captured.out + captured.err
    assert "removed" in captured.out + captured.err
    assert leftovers(out) == []
    # The history went on from the restored site instead of starting afresh.
    import json

    history = json.loads((out / "results.json").read_text())["history"]
    assert len(history) == len(json.loads(before["results.json"])["history"]) + 1


def test_a_lock_that_is_a_link_is_never_read_through(site, capsys, tmp_path):
    root, out, before = site
    secret = tmp_path / "secret"
    secret.write_text("pid 1 on host since 00:00:00 password=hunter2\n")
    (out.parent / f".{out.name}.lock").symlink_to(secret)
    code, line = failed_build(root, out, capsys)
    assert code == 3 and "hunter2" not in line and "cannot read" in line
    assert snapshot(out) == before


def test_a_file_someone_saved_in_the_site_is_kept(site, capsys):
    root, out, _ = site
    (out / "my notes.txt").write_text("do not lose me")
    code, line = failed_build(root, out, capsys)
    assert code == 2 and "my notes.txt" in line and "did not write" in line
    assert (out / "my notes.txt").read_text() == "do not lose me"


def test_a_zip_failing_after_publishing_says_the_site_was_published(
    site, capsys, monkeypatch, tmp_path
):
    root, out, _ = site
    real = publish.tempfile.mkstemp

    def full(*args, **kwargs):
        if "zip" in kwargs.get("prefix", ""):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(*args, **kwargs)

    monkeypatch.setattr(publish.tempfile, "mkstemp", full)
    code = main(
        ["build", str(root), "--out", str(out), "--quiet", "--zip", str(tmp_path / "s.zip")]
    )
    err = capsys.readouterr().err
    assert code == 2
    assert f"the site was published to {out}" in err and "only the zip is missing" in err
    assert "unchanged" not in err
    assert (out / "results.json").read_text().count('"C"') >= 1  # the new site is there
