"""``sitebuild new``: a project that builds at once, made the same way every time."""

from __future__ import annotations

import pytest

from sitebuild import build, check
from sitebuild.errors import SitebuildError
from sitebuild.scaffold import new_project


def test_new_then_build_works(tmp_path):
    made = new_project(tmp_path / "bakery")
    assert set(made.files) >= {"manifest.toml", "data/loaves.csv", "notes/loaves.md"}
    manifest = (made.root / "manifest.toml").read_text(encoding="utf-8")
    assert manifest.count("\n# ") >= 10  # every setting explained beside it
    assert check(made.root).datasets[0].rows_used == 36
    report = build(made.root)
    assert report.written and report.pages == 3
    assert (made.root / "site" / "index.html").is_file()
    page = (made.root / "site" / "loaves-by-flour.html").read_text(encoding="utf-8")
    assert "An invented trial" in page  # the notes file is shown


def test_new_data_is_the_same_every_time(tmp_path):
    a = new_project(tmp_path / "a").root / "data/loaves.csv"
    b = new_project(tmp_path / "b").root / "data/loaves.csv"
    assert a.read_bytes() == b.read_bytes()


def test_new_in_a_folder_with_other_files_keeps_them(tmp_path):
    folder = tmp_path / "busy"
    folder.mkdir()
    (folder / "thesis.docx").write_bytes(b"keep")
    new_project(folder)
    assert (folder / "thesis.docx").read_bytes() == b"keep"
    assert (folder / "manifest.toml").is_file()


def test_new_never_overwrites_a_manifest(tmp_path):
    folder = tmp_path / "busy"
    folder.mkdir()
    (folder / "manifest.toml").write_text("# mine\n")
    with pytest.raises(SitebuildError, match="never overwrites"):
        new_project(folder)
    assert (folder / "manifest.toml").read_text() == "# mine\n"
    assert sorted(p.name for p in folder.iterdir()) == ["manifest.toml"]


def test_new_accepts_an_empty_folder(tmp_path):
    folder = tmp_path / "empty"
    folder.mkdir()
    assert (new_project(folder).root / "manifest.toml").is_file()
