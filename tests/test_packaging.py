"""The layouts ship inside the package, so an installed tool builds from any folder."""

from __future__ import annotations

import os
from pathlib import Path

import sitebuild
from sitebuild.site.render import packaged_layouts

REPO = Path(__file__).resolve().parents[1]
REQUIRED = ("base.html", "index.html", "dataset.html", "macros.html", "style.css", "site.js")


def test_layouts_folder_holds_every_page_layout():
    folder = packaged_layouts()
    for name in REQUIRED:
        assert (folder / name).is_file(), name
    assert (folder / "sections" / "summaries.html").is_file()


def test_ci_uses_the_installed_wheel_and_its_layouts():
    if not os.environ.get("CI"):
        return  # in a development checkout the repo's own layouts are used
    package = Path(sitebuild.__file__).resolve().parent
    assert REPO not in package.parents, (
        f"tests imported the repo, not the installed wheel: {package}"
    )
    assert packaged_layouts().resolve() == (package / "layouts").resolve()
