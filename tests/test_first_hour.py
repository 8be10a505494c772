"""A newcomer's first hour: help in the order of use, every manifest key explained without
the README, a manifest proposed from the user's own file, and a check a script can read."""

from __future__ import annotations

import datetime as dt
import json
import tomllib

import numpy as np
import pytest

from sitebuild import cli
from sitebuild.errors import SitebuildError
from sitebuild.manifest import DATASET_KEYS, SITE_KEYS
from sitebuild.manifest_keys import KEYS
from sitebuild.scaffold import new_from_data

from conftest import write_project


def test_help_lists_new_check_build_in_that_order_with_examples(capsys):
    with pytest.raises(SystemExit):
        cli.main(["--help"])
    text = capsys.readouterr().out
    listed = text.split("positional arguments:")[1]
    assert listed.index("new") < listed.index("check") < listed.index("build")
    for example in ("sitebuild new ", "sitebuild check ", "sitebuild build "):
        assert example in text


def test_every_manifest_key_is_explained():
    documented = {(k.table, k.key) for k in KEYS}
    assert {("site", k) for k in SITE_KEYS} <= documented
    assert {("datasets", k) for k in DATASET_KEYS} <= documented


def test_manifest_command_prints_each_key_with_its_default(capsys):
    assert cli.main(["manifest"]) == 0
    out = capsys.readouterr().out
    for key in [*SITE_KEYS, *DATASET_KEYS]:
        assert f"  {key} " in out
    assert "min_group_size" in out and "(default: 5)" in out


def test_check_json_is_machine_readable(tmp_path, capsys):
    root = write_project(
        tmp_path / "p",
        '[[datasets]]\nname = "D"\nfile = "d.csv"\ngroup = "g"\nmeasures = ["v"]\n',
        {"d.csv": "g,v\nA,1\nA,2\nB,3\n"},
    )
    assert cli.main(["check", str(root), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["valid"] is True
    assert report["datasets"][0]["rows_used"] == 3 and report["datasets"][0]["groups"] == 2


def test_check_says_1_dataset_and_1_value_is_not_a_number(tmp_path, capsys):
    root = write_project(
        tmp_path / "p",
        '[[datasets]]\nname = "D"\nfile = "d.csv"\ngroup = "g"\nmeasures = ["v"]\n',
        {"d.csv": "g,v\nA,1\nA,oops\nB,3\n"},
    )
    assert cli.main(["check", str(root)]) == 0
    out = capsys.readouterr().out
    assert "1 dataset would be built" in out
    assert "1 value in 'v' is not a number" in out


def test_debug_keeps_the_exit_code_of_bad_input(tmp_path, capsys):
    assert cli.main(["check", str(tmp_path / "missing"), "--debug"]) == 2
    assert "Traceback" in capsys.readouterr().err


def clinic_xlsx(path, rng) -> tuple[list[str], np.ndarray]:
    openpyxl = pytest.importorskip("openpyxl")
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["Outpatient waiting times – export"])
    sheet.append([])
    sheet.append(["visit", "clinic", "day", "wait (min)", "satisfaction"])
    clinics = [c for c in ("Cardiology", "Oncology", "Surgery") for _ in range(10)]
    waits = np.round(rng.normal(35, 8, len(clinics)), 1)
    for i, (clinic, wait) in enumerate(zip(clinics, waits, strict=True)):
        day = dt.date(2026, 2, 1) + dt.timedelta(days=i)
        sheet.append([f"V{i:03d}", clinic, day, float(wait), int(rng.integers(1, 6))])
    book.save(path)
    return clinics, waits


def test_new_from_a_spreadsheet_proposes_groups_measures_and_dates_then_builds(tmp_path, capsys):
    rng = np.random.default_rng(1302)
    data = tmp_path / "clinic.xlsx"
    clinics, waits = clinic_xlsx(data, rng)
    assert cli.main(["new", str(tmp_path / "proj"), "--from", str(data)]) == 0
    out = capsys.readouterr().out
    assert "Built 3 pages from 1 dataset" in out
    manifest = tomllib.loads((tmp_path / "proj" / "manifest.toml").read_text(encoding="utf-8"))
    ds = manifest["datasets"][0]
    assert ds["group"] == "clinic" and ds["header_row"] == 3 and ds["x"] == "day"
    assert ds["measures"] == ["wait (min)", "satisfaction"]  # "visit" is text, not a measure
    results = json.loads((tmp_path / "proj" / "site" / "results.json").read_text("utf-8"))
    summaries = results["datasets"][0]["summaries"]
    mean = next(
        s["mean"] for s in summaries if s["group"] == "Oncology" and s["measure"] == "wait (min)"
    )
    # Reference: numpy on the same invented values.
    assert mean == pytest.approx(float(np.mean(waits[10:20])), rel=1e-12)


def test_new_from_data_in_a_folder_that_holds_it_never_overwrites(tmp_path):
    folder = tmp_path / "mine"
    write_project(folder, "", {})
    (folder / "manifest.toml").unlink()
    (folder / "runs.csv").write_text("line,yield\nA,1\nA,2\nB,3\nB,4\n", encoding="utf-8")
    made = new_from_data(folder, folder / "runs.csv")
    assert "groups from 'line'" in made.proposal
    assert sorted(p.name for p in folder.iterdir()) == ["manifest.toml", "runs.csv"]
    with pytest.raises(SitebuildError, match="never overwritten"):
        new_from_data(folder, folder / "runs.csv")
