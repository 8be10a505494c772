"""Property tests: random small tables never break the analysis, and results.json stays valid.

Random group counts (1-6), tiny n, missing values, ties, constant columns and extreme values go
through reading and every section; the results must validate against the shipped JSON Schema,
hold no NaN or Infinity, and give a reason wherever a number is undefined.
"""

from __future__ import annotations

import csv
import io
import json
import math
import tempfile
from pathlib import Path

import jsonschema
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

import sitebuild
from sitebuild.errors import SitebuildError
from sitebuild.ingest import read_table
from sitebuild.manifest import load_manifest
from sitebuild.pipeline import Timer, analyse
from sitebuild.results import clean, schema

from conftest import write_project

MANIFEST = """
[site]
title = "Property"
seed = 7

[[datasets]]
name = "Random"
file = "data/d.csv"
group = "g"
measures = ["v", "w"]
"""

LABELS = ["A", "B", "01", "1", "<b>x</b>", "Line 10", "é ü", "{{ g }}", ""]  # "": no label
MISSING = ["", "NA", "-", "n/a"]
ORDINARY = st.one_of(
    # Magnitudes below 1e-30 are the float-limit cases below (their fourth powers underflow).
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False).map(
        lambda x: 0.0 if abs(x) < 1e-30 else x
    ),
    st.integers(min_value=-3, max_value=3).map(float),  # ties
    # Large and tiny but whose fourth powers stay finite: the float-limit cases are below.
    st.sampled_from([0.0, 1e-70, -1e-70, 1e70, -1e70, 10_000_000.1, 10_000_000.3]),
)
EXTREME = st.sampled_from(
    [1e150, -1e150, 1e308, -1e308, 1.7976931348623157e308, 5e-324, -5e-324, 1e-320, 7e-96]
)


def cells(values: st.SearchStrategy) -> st.SearchStrategy:
    """A cell: a number written as Python writes it, a missing token, or (rarely) junk text."""
    return st.one_of(
        values.map(repr),
        st.sampled_from(MISSING),
        st.just("not a number"),
    )


@st.composite
def tables(draw, values: st.SearchStrategy = ORDINARY):
    """Rows of (group, v, w) text: 1-6 groups, 0-30 rows, maybe a constant or empty column."""
    groups = draw(st.lists(st.sampled_from(LABELS), min_size=1, max_size=6, unique=True))
    n = draw(st.integers(min_value=0, max_value=30))
    labels = draw(st.lists(st.sampled_from(groups), min_size=n, max_size=n))
    columns = []
    for _ in range(2):
        kind = draw(st.sampled_from(["random", "random", "random", "constant", "empty"]))
        if kind == "constant":
            columns.append([repr(draw(values))] * n)
        elif kind == "empty":
            columns.append([""] * n)
        else:
            columns.append(draw(st.lists(cells(values), min_size=n, max_size=n)))
    return [(g, v, w) for g, v, w in zip(labels, *columns, strict=True)]


def csv_text(rows) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["g", "v", "w"])
    writer.writerows(rows)
    return buffer.getvalue()


def no_nan(text: str) -> None:
    def refuse(constant):
        raise AssertionError(f"results.json holds {constant}")

    json.loads(text, parse_constant=refuse)


DATASET_SCHEMA = None


def dataset_validator():
    global DATASET_SCHEMA  # built once; the schema file is read-only data
    if DATASET_SCHEMA is None:
        full = schema()
        DATASET_SCHEMA = jsonschema.Draft202012Validator(
            {"$ref": "#/$defs/dataset", "$defs": full["$defs"]}
        )
    return DATASET_SCHEMA


def analysed(rows) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        root = write_project(Path(tmp) / "p", MANIFEST, {"data/d.csv": csv_text(rows)})
        manifest = load_manifest(root)
        table = read_table(manifest.datasets[0])
        return clean(analyse(table, manifest, Timer()))


def check_dataset(ds: dict, rows) -> None:
    dataset_validator().validate(ds)
    no_nan(json.dumps(ds, allow_nan=False))
    used = [r for r in rows if r[0] not in MISSING]
    assert ds["source"]["rows_used"] == len(used)
    for row in ds["summaries"]:
        column = 1 if row["measure"] == "v" else 2
        members = [r for r in used if row["group"] is None or r[0] == row["group"]]
        # Reference: Python's own float parsing of the same cells, counted by hand.
        finite = [float(r[column]) for r in members if _number(r[column])]
        assert row["n"] == len(finite)
        assert row["n"] + row["missing"] == len(members)
        if finite:
            assert row["min"] == min(finite) and row["max"] == max(finite)
        for key in ("mean", "sd", "median"):
            if row[key] is None:
                assert row["reasons"], f"{key} is null with no reason: {row}"
        if row["mean"] is not None:
            assert min(finite) <= row["mean"] <= max(finite)


def _number(text: str) -> bool:
    try:
        return math.isfinite(float(text))
    except ValueError:
        return False


def unreadable_measure(rows) -> str | None:
    """Return the first measure with values but not one number (the reader refuses it)."""
    for index, name in ((1, "v"), (2, "w")):
        cells = [r[index] for r in rows if r[index] not in MISSING]
        if cells and not any(_number(c) for c in cells):
            return name
    return None


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tables())
def test_random_small_tables_analyse_to_valid_results(rows):
    refused = unreadable_measure(rows)
    if refused:  # a measure with values but no number is refused with a sentence naming it
        with pytest.raises(SitebuildError, match=f"column '{refused}'"):
            analysed(rows)
        return
    check_dataset(analysed(rows), rows)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tables(values=st.one_of(ORDINARY, EXTREME)))
@example([("A", "1e308", "1"), ("A", "-1e308", "2"), ("B", "1e308", "3"), ("B", "-1e308", "4")])
@example([("A", "", "0.0"), ("A", "", "1e+150")])
@example([("A", "0.0", "0.0"), ("A", "0.0", "7.267523926646682e-96")])
@example([("A", "5e-324", "0"), ("A", "0.0", "1"), ("B", "5e-324", "2"), ("B", "1e-320", "3")])
def test_random_tables_with_values_at_the_float_limits(rows):
    refused = unreadable_measure(rows)
    if refused:
        with pytest.raises(SitebuildError, match=f"column '{refused}'"):
            analysed(rows)
        return
    check_dataset(analysed(rows), rows)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tables())
def test_random_small_tables_build_a_site_whose_results_validate(rows):
    with tempfile.TemporaryDirectory() as tmp:
        root = write_project(Path(tmp) / "p", MANIFEST, {"data/d.csv": csv_text(rows)})
        out = Path(tmp) / "site"
        refused = unreadable_measure(rows)
        if refused:
            with pytest.raises(SitebuildError, match=f"column '{refused}'"):
                sitebuild.build(root, out=out, quiet=True)
            assert not out.exists()  # refused before anything was written
            return
        sitebuild.build(root, out=out, quiet=True)
        text = (out / "results.json").read_text(encoding="utf-8")
        no_nan(text)
        results = json.loads(text)
        jsonschema.Draft202012Validator(schema()).validate(results)
        assert (out / "index.html").is_file() and (out / "random.html").is_file()
