"""Manifest keys better / labels / limits / target / time_unit: each problem is one sentence
naming the key, with a "did you mean" where a close spelling exists."""

from __future__ import annotations

import pytest
from test_manifest import BASE, manifest_error

from sitebuild.manifest import load_manifest

from conftest import SIMPLE_CSV, write_project

CSV_X = "line,width,day\nA,1.0,1\nA,2.0,2\nA,3.0,3\nB,2.5,1\nB,3.5,2\nB,4.5,3\n"


def test_valid_keys_are_read_into_the_spec(tmp_path):
    root = write_project(
        tmp_path / "p",
        BASE
        + 'x = "day"\nbetter = { width = "lower" }\nlabels = { A = "line one" }\n'
        + 'limits = { width = [1.5, 4.0] }\ntarget = { width = 2.5 }\ntime_unit = "day"\n',
        {"data/lines.csv": CSV_X},
    )
    spec = load_manifest(root).datasets[0]
    assert spec.better == {"width": "lower"}
    assert spec.labels == {"A": "line one"} and spec.label("A") == "line one"
    assert spec.label("B") == "B"
    assert spec.limits == {"width": (1.5, 4.0)}
    assert spec.target == {"width": 2.5}
    assert spec.time_unit == "day"
    assert spec.section()["limits"] == {"width": [1.5, 4.0]}


def test_one_sided_limits(tmp_path):
    root = write_project(
        tmp_path / "p",
        BASE + "limits = { width = { upper = 4 } }\n",
        {"data/lines.csv": SIMPLE_CSV},
    )
    assert load_manifest(root).datasets[0].limits == {"width": (None, 4.0)}


@pytest.mark.parametrize(
    ("extra", "expected"),
    [
        ('better = { width = "lowr" }', "did you mean 'lower'"),
        ('better = { widht = "lower" }', "did you mean 'width'"),
        ("better = { width = 1 }", "better must be table of text"),
        ('labels = { A = "x", B = "x" }', "the same name 'x'"),
        ('labels = { A = " " }', "empty name"),
        ("limits = { width = [4, 1] }", "lower limit below the upper"),
        ("limits = { width = [1, 2, 3] }", "limits must be table of limits"),
        ("limits = { width = { lowest = 1 } }", "limits must be table of limits"),
        ("limits = { wdth = [1, 2] }", "did you mean 'width'"),
        ("limits = { width = [1, 2] }\ntarget = { width = 5 }", "outside its limits"),
        ('time_unit = "day"', "there is no x"),
    ],
)
def test_bad_practice_keys_are_one_sentence(tmp_path, extra, expected):
    message = manifest_error(tmp_path, BASE + extra + "\n")
    assert expected in message
    assert "(line " in message  # names the line of the key


def test_time_unit_suggests_the_singular(tmp_path):
    message = manifest_error(
        tmp_path, BASE + 'x = "day"\ntime_unit = "days"\n', {"data/lines.csv": CSV_X}
    )
    assert "did you mean 'day'" in message


def test_a_label_for_a_group_the_data_lacks_is_warned(tmp_path):
    from sitebuild.ingest import read_table

    root = write_project(
        tmp_path / "p", BASE + 'labels = { C = "line three" }\n', {"data/lines.csv": SIMPLE_CSV}
    )
    table = read_table(load_manifest(root).datasets[0])
    assert any("labels names 'C'" in w for w in table.report.warnings)
