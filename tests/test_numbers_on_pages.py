"""Numbers on pages keep the digits that matter: fixed decimals per table column and per measure."""

from __future__ import annotations

import html
import json
import re

import numpy as np
import pytest

import sitebuild
from sitebuild.sections import DataTable
from sitebuild.site.render import _column_decimals, _num

from conftest import write_project


def test_column_decimals_follow_the_spread_of_the_column():
    table = DataTable(
        id="t",
        title="t",
        columns=(("mean", "Mean"), ("n", "n"), ("p", "p"), ("same", "Same")),
        rows=(
            {"mean": 66.01, "n": 26, "p": 0.5, "same": 1.5},
            {"mean": 56.8, "n": 80, "p": 0.01, "same": 1.5},
        ),
    )
    decimals = _column_decimals(table)
    assert decimals == {"mean": 2}  # range 9.21: three significant digits of it
    assert [_num(r["mean"], decimals["mean"]) for r in table.rows] == ["66.01", "56.80"]


def test_values_near_ten_million_stay_apart_on_the_page(tmp_path):
    rng = np.random.default_rng(4)
    rows = [("A", 10_000_000 + float(v)) for v in rng.normal(0.0, 0.1, 30)]
    rows += [("B", 10_000_000.35 + float(v)) for v in rng.normal(0.0, 0.1, 30)]
    text = "g,v\n" + "".join(f"{g},{v!r}\n" for g, v in rows)
    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "Offsets"
        [[datasets]]
        name = "Offsets"
        file = "d.csv"
        group = "g"
        measures = ["v"]
        """,
        {"d.csv": text},
    )
    out = tmp_path / "site"
    sitebuild.build(root, out=out, quiet=True)
    results = json.loads((out / "results.json").read_text(encoding="utf-8"))
    means = {
        r["group"]: r["mean"] for r in results["datasets"][0]["summaries"] if r["group"] is not None
    }
    # Reference: numpy's own means of the values written to the file.
    for g in "AB":
        assert means[g] == pytest.approx(np.mean([v for k, v in rows if k == g]), abs=1e-9)
    source = (out / "offsets.html").read_text("utf-8")
    visible = re.sub(r"<script\b.*?</script>", " ", source, flags=re.S)
    page = html.unescape(re.sub(r"<[^>]+>", " ", visible))
    shown = {g: f"{means[g]:,.3f}" for g in "AB"}
    assert shown["A"] != shown["B"]
    for g in "AB":
        assert shown[g] in page, shown[g]
    assert "e+07" not in page and "10,000,000 " not in page
