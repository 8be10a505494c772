"""The chart script is made once per user and installed version and reused by every build."""

from __future__ import annotations

import hashlib

import pytest

from sitebuild import __version__
from sitebuild.cache import vl_convert_version
from sitebuild.pipeline import build
from sitebuild.site import chart_script as cs

FAKE = b"window.vega = {}; /* stand-in chart script */"


@pytest.fixture
def user_cache(tmp_path, monkeypatch):
    folder = tmp_path / "user-cache"
    monkeypatch.setenv(cs.USER_CACHE_ENV, str(folder))
    return folder


def test_script_is_made_once_and_kept_under_the_user_cache_by_version(user_cache):
    calls = []

    def make():
        calls.append(1)
        return FAKE

    assert cs.chart_script(make) == FAKE
    assert cs.chart_script(make) == FAKE
    assert len(calls) == 1
    path = user_cache / __version__ / f"vega-bundle-{vl_convert_version()}.js"
    assert path.read_bytes() == FAKE
    checksum = path.with_name(path.name + ".sha256").read_text().strip()
    assert checksum == hashlib.sha256(FAKE).hexdigest()


def test_a_copy_that_fails_its_checksum_is_made_again(user_cache):
    calls = []

    def make():
        calls.append(1)
        return FAKE

    cs.chart_script(make)
    cs.script_path().write_bytes(b"alert('tampered')")
    assert cs.chart_script(make) == FAKE
    assert len(calls) == 2
    assert cs.script_path().read_bytes() == FAKE


def test_an_unwritable_cache_still_gives_the_script(tmp_path, monkeypatch):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    monkeypatch.setenv(cs.USER_CACHE_ENV, str(blocker / "cache"))
    assert cs.chart_script(lambda: FAKE) == FAKE


def test_fresh_builds_of_two_projects_reuse_the_users_script_not_a_project_copy(
    user_cache, simple_project, tmp_path
):
    path = cs.script_path()
    path.parent.mkdir(parents=True)
    path.write_bytes(FAKE)
    path.with_name(path.name + ".sha256").write_text(hashlib.sha256(FAKE).hexdigest())
    other = tmp_path / "second"
    import shutil

    shutil.copytree(simple_project, other)
    for project in (simple_project, other):
        report = build(project, out=project / "site", fresh=True, quiet=True)
        assert (report.out / "assets" / "vega-bundle.js").read_bytes() == FAKE
        assert not list(project.rglob("vega-bundle-*.js")), "no copy inside the project"
