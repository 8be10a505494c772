"""Shared fixtures: small projects written into tmp_path, and the built example site."""

from __future__ import annotations

import os
import shutil
import textwrap
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
# Every chart spec is checked against the Vega-Lite schema in the tests (off in builds: it
# costs about 40 % more per chart).
os.environ.setdefault("SITEBUILD_CHECK_CHARTS", "1")
EXAMPLE = REPO / "example_project"


def write_project(root: Path, manifest: str, files: dict[str, str | bytes]) -> Path:
    """Write a project folder: manifest text (dedented) and data files; return the folder."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "manifest.toml").write_text(textwrap.dedent(manifest), encoding="utf-8")
    for name, content in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")
    return root


def snapshot(folder: Path) -> dict[str, bytes]:
    """Every file under ``folder`` with its bytes."""
    return {
        p.relative_to(folder).as_posix(): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def leftovers(out: Path) -> list[str]:
    """Staging, set-aside and lock files a build may leave beside its output folder."""
    return sorted(
        p.name
        for p in out.parent.iterdir()
        if p.name.startswith((f".{out.name}.new-", f".{out.name}.old-", f".{out.name}.lock"))
    )


SIMPLE_MANIFEST = """
[site]
title = "Test site"

[[datasets]]
name = "Lines"
file = "data/lines.csv"
group = "line"
measures = ["width", "weight"]
"""

SIMPLE_CSV = "line,width,weight\nA,1.0,10\nA,2.0,11\nA,3.0,12\nB,2.5,13\nB,3.5,\nB,4.5,15\n"


@pytest.fixture
def simple_project(tmp_path) -> Path:
    return write_project(tmp_path / "proj", SIMPLE_MANIFEST, {"data/lines.csv": SIMPLE_CSV})


@pytest.fixture(scope="session")
def example_site(tmp_path_factory) -> Path:
    """The example project built once per test session into a temporary folder."""
    import sitebuild

    work = tmp_path_factory.mktemp("example")
    project = work / "example_project"
    shutil.copytree(EXAMPLE, project, ignore=shutil.ignore_patterns("site_output", ".sitebuild*"))
    out = work / "site"
    sitebuild.build(project, out=out)
    return out


@pytest.fixture(scope="module")
def browser():
    """Debian's Chromium under Playwright; a missing browser fails under CI, never skips."""
    from browser import LAUNCH_ARGS, chromium_path

    path = chromium_path()
    if path is None:
        if os.environ.get("CI"):
            pytest.fail(
                "Chromium is missing: install the Debian package 'chromium' (CI must not skip)."
            )
        pytest.skip("Chromium is not installed (set CI=1 to make this a failure)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        launched = pw.chromium.launch(executable_path=path, args=LAUNCH_ARGS, headless=True)
        yield launched
        launched.close()
