"""Compiled layouts are kept per user, and only a private, matching copy is ever loaded."""

from __future__ import annotations

import os

import pytest

from sitebuild import __version__
from sitebuild.site import render
from sitebuild.site import template_cache as tc


@pytest.fixture
def user_cache(tmp_path, monkeypatch):
    folder = tmp_path / "user-cache"
    monkeypatch.setenv("SITEBUILD_USER_CACHE", str(folder))
    return folder


def _compile_count(monkeypatch) -> list[str]:
    """Count the layouts jinja2 compiles from source (a cache hit compiles nothing)."""
    import jinja2

    seen: list[str] = []

    real = jinja2.Environment.compile

    def counting(self, source, name=None, filename=None, raw=False, defer_init=False):
        seen.append(name)
        return real(self, source, name, filename, raw, defer_init)

    monkeypatch.setattr(jinja2.Environment, "compile", counting)
    return seen


def _bucket_path(env, name: str):
    source, filename, _ = env.loader.get_source(env, name)
    bucket = env.bytecode_cache.get_bucket(env, name, filename, source)
    return env.bytecode_cache._path(bucket), bucket


def test_layouts_are_compiled_once_and_kept_under_the_user_cache_by_version(
    user_cache, monkeypatch
):
    compiled = _compile_count(monkeypatch)
    first = render.environment().get_template("base.html")
    assert "base.html" in compiled
    kept = list((user_cache / __version__ / "layouts").iterdir())
    assert kept, "the compiled layout was not kept"
    assert all(p.stat().st_mode & 0o077 == 0 for p in kept)  # private to the user
    compiled.clear()
    second = render.environment().get_template("base.html")
    assert compiled == []  # loaded, not compiled
    assert first.blocks.keys() == second.blocks.keys()


def test_a_compiled_copy_others_can_write_is_never_loaded(user_cache, monkeypatch, tmp_path):
    env = render.environment()
    env.get_template("base.html")
    path, bucket = _bucket_path(env, "base.html")
    marker = tmp_path / "ran"
    # A forged copy: valid for jinja2 (same source hash), but its code writes a file.
    bucket.code = compile(f"open({str(marker)!r}, 'w').write('x')", "forged", "exec")
    path.write_bytes(bucket.bytecode_to_string())
    os.chmod(path, 0o666)
    compiled = _compile_count(monkeypatch)
    render.environment().get_template("base.html")
    assert not marker.exists()
    assert "base.html" in compiled  # compiled afresh from the packaged layout


def test_a_compiled_copy_behind_a_link_is_never_loaded(user_cache, monkeypatch, tmp_path):
    env = render.environment()
    env.get_template("base.html")
    path, bucket = _bucket_path(env, "base.html")
    marker = tmp_path / "ran"
    bucket.code = compile(f"open({str(marker)!r}, 'w').write('x')", "forged", "exec")
    elsewhere = tmp_path / "elsewhere.code"
    elsewhere.write_bytes(bucket.bytecode_to_string())
    os.chmod(elsewhere, 0o600)
    path.unlink()
    path.symlink_to(elsewhere)
    render.environment().get_template("base.html")
    assert not marker.exists()


def test_a_damaged_copy_is_compiled_afresh(user_cache, monkeypatch):
    env = render.environment()
    env.get_template("base.html")
    path, _ = _bucket_path(env, "base.html")
    path.write_bytes(path.read_bytes()[:40])  # cut short mid-way
    compiled = _compile_count(monkeypatch)
    template = render.environment().get_template("base.html")
    assert "base.html" in compiled
    assert template.blocks


def test_an_unwritable_cache_still_renders(tmp_path, monkeypatch):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    monkeypatch.setenv("SITEBUILD_USER_CACHE", str(blocker / "cache"))
    assert render.environment().get_template("base.html").blocks
    assert tc.code_folder() == blocker / "cache" / __version__ / "layouts"
