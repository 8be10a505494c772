"""Manifest validation: each problem is one sentence naming file, key (line) and fix."""

from __future__ import annotations

import os

import pytest

from sitebuild.errors import SitebuildError
from sitebuild.manifest import DEFAULT_OUTPUT, load_manifest

from conftest import SIMPLE_CSV, write_project


def manifest_error(tmp_path, text: str, files=None) -> str:
    files = {"data/lines.csv": SIMPLE_CSV} if files is None else files
    root = write_project(tmp_path / "p", text, files)
    with pytest.raises(SitebuildError) as caught:
        load_manifest(root)
    message = str(caught.value)
    assert "\n" not in message, "an error is one sentence on one line"
    assert message.startswith("manifest.toml")
    return message


BASE = """
[[datasets]]
name = "Lines"
file = "data/lines.csv"
group = "line"
measures = ["width"]
"""


def test_defaults_are_the_documented_ones(simple_project):
    manifest = load_manifest(simple_project)
    assert manifest.site.confidence == 0.95
    assert manifest.site.alpha == 0.05
    assert manifest.site.adjust == "holm"
    assert manifest.site.output == DEFAULT_OUTPUT
    assert manifest.path.name == "manifest.toml"
    assert manifest.datasets[0].measures == ("width", "weight")
    assert manifest.datasets[0].slug == "lines"


def test_invalid_toml_names_the_line(tmp_path):
    message = manifest_error(tmp_path, '[site]\ntitle = "x"\nconfidence = = 0.9\n')
    assert "line 3" in message and "not valid TOML" in message


def test_unknown_key_suggests_the_closest(tmp_path):
    message = manifest_error(
        tmp_path, BASE.replace('group = "line"', 'group = "line"\nmeasure = ["w"]')
    )
    assert "unknown key 'measure'" in message and "did you mean 'measures'" in message
    assert "line 6" in message  # BASE starts with a blank line; the misspelt key is line 6


def test_unknown_site_key(tmp_path):
    message = manifest_error(tmp_path, "[site]\nconfidance = 0.9\n" + BASE)
    assert "did you mean 'confidence'" in message and "line 2" in message


def test_wrong_type(tmp_path):
    message = manifest_error(tmp_path, BASE.replace('measures = ["width"]', 'measures = "width"'))
    assert "measures" in message and "list of text" in message


def test_missing_data_file(tmp_path):
    message = manifest_error(tmp_path, BASE, files={})
    assert "data/lines.csv" in message and "does not exist" in message


@pytest.mark.parametrize("path", ["../outside.csv", "/etc/passwd"])
def test_path_escaping_the_project_is_refused(tmp_path, path):
    message = manifest_error(tmp_path, BASE.replace("data/lines.csv", path))
    assert "outside the project folder" in message


def test_symlink_pointing_out_is_refused(tmp_path):
    outside = tmp_path / "secret.csv"
    outside.write_text(SIMPLE_CSV)
    root = write_project(tmp_path / "p", BASE, {})
    (root / "data").mkdir()
    os.symlink(outside, root / "data" / "lines.csv")
    with pytest.raises(SitebuildError, match="outside the project folder"):
        load_manifest(root)


def test_duplicate_dataset_names(tmp_path):
    message = manifest_error(tmp_path, BASE + BASE)
    assert "is used by dataset #1 too" in message


@pytest.mark.parametrize("value", ["1.5", "0", "-0.1"])
def test_confidence_outside_unit_interval(tmp_path, value):
    message = manifest_error(tmp_path, f"[site]\nconfidence = {value}\n" + BASE)
    assert "confidence" in message and "outside 0.5 to 0.9999" in message


def test_unknown_adjust_method(tmp_path):
    message = manifest_error(tmp_path, '[site]\nadjust = "Holms"\n' + BASE)
    assert "holm, bh, bonferroni, none" in message and "did you mean 'holm'" in message


def test_group_listed_as_measure(tmp_path):
    message = manifest_error(tmp_path, BASE.replace('["width"]', '["width", "line"]'))
    assert "group column" in message


def test_empty_measures(tmp_path):
    message = manifest_error(tmp_path, BASE.replace('["width"]', "[]"))
    assert "measures is empty" in message


def test_missing_notes_file(tmp_path):
    message = manifest_error(tmp_path, BASE + 'notes = "notes/none.md"\n')
    assert "notes" in message and "does not exist" in message


def test_missing_required_key(tmp_path):
    message = manifest_error(tmp_path, BASE.replace('group = "line"\n', ""))
    assert "no 'group' key" in message


def test_no_manifest_in_folder(tmp_path):
    with pytest.raises(SitebuildError, match="no manifest.toml"):
        load_manifest(tmp_path)


def test_equivalence_margin_must_name_a_measure(tmp_path):
    message = manifest_error(tmp_path, BASE + 'equivalence_margin = { "depth" = 1.0 }\n')
    assert "'depth'" in message and "not one of the measures" in message


def test_a_folder_of_parquet_parts_is_accepted_as_a_dataset_file(tmp_path):
    root = write_project(tmp_path / "p", BASE.replace("data/lines.csv", "data/parts"), {})
    (root / "data" / "parts").mkdir(parents=True)
    manifest = load_manifest(root)
    assert manifest.datasets[0].path.is_dir()


def test_a_folder_is_not_accepted_as_notes(tmp_path):
    root = write_project(tmp_path / "p", BASE + 'notes = "notes"\n', {"data/lines.csv": SIMPLE_CSV})
    (root / "notes").mkdir()
    with pytest.raises(SitebuildError, match="which is a folder"):
        load_manifest(root)
