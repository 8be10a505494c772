"""Reading data files: delimiters, decimal commas, encodings, missing tokens, exact labels."""

from __future__ import annotations

import numpy as np
import pytest

from sitebuild.errors import SitebuildError
from sitebuild.ingest import read_table, sniff_delimiter
from sitebuild.manifest import load_manifest

from conftest import write_project

MANIFEST = """
[[datasets]]
name = "D"
file = "{file}"
group = "g"
measures = ["v", "w"]
"""


def table_for(tmp_path, name: str, content: str | bytes):
    root = write_project(
        tmp_path / "p", MANIFEST.format(file=f"data/{name}"), {f"data/{name}": content}
    )
    return read_table(load_manifest(root).datasets[0])


@pytest.mark.parametrize("delimiter", [",", ";", "\t", "|"])
def test_delimiter_is_detected(tmp_path, delimiter):
    text = (
        delimiter.join(["g", "v", "w"])
        + "\n"
        + "\n".join(delimiter.join([g, str(i), str(i * 2)]) for i, g in enumerate("AABB"))
    )
    table = table_for(tmp_path, "d.txt", text + "\n")
    assert table.report.delimiter == delimiter
    assert table.groups == ("A", "B")
    np.testing.assert_array_equal(table.values("v"), [0, 1, 2, 3])


def test_semicolon_file_with_decimal_commas(tmp_path):
    table = table_for(tmp_path, "d.csv", "g;v;w\nA;1,5;2\nA;2,25;3\nB;-0,5;4\n")
    np.testing.assert_allclose(table.values("v"), [1.5, 2.25, -0.5])


def test_missing_tokens_count_as_missing_not_unparsed(tmp_path):
    rows = ["A,NA,1", "A,,2", "A,n/a,3", "A,N/A,4", "B,null,5", "B,-,6", "B,NaN,7", "B,8,8"]
    table = table_for(tmp_path, "d.csv", "g,v,w\n" + "\n".join(rows) + "\n")
    assert table.report.missing["v"] == 7
    assert "v" not in table.report.unparsed
    # A missing v never drops the row for w.
    assert np.isnan(table.values("w")).sum() == 0


def test_unparsable_values_are_counted_with_three_examples(tmp_path):
    rows = ["A,1,x1", "A,2,x2", "B,3,x3", "B,4,x4", "B,5,6"]
    table = table_for(tmp_path, "d.csv", "g,v,w\n" + "\n".join(rows) + "\n")
    problem = table.report.unparsed["w"]
    assert problem.count == 4
    assert problem.examples == ("x1", "x2", "x3")
    assert np.isnan(table.values("w")).sum() == 4


@pytest.mark.parametrize("delimiter, mark", [(",", "."), (";", ",")])
def test_text_far_down_a_numeric_column_is_read_like_a_small_file(tmp_path, delimiter, mark):
    # The reader parses large files in chunks whose column types are decided one chunk at a
    # time; a column of numbers with a word 300,000 rows down must give the same values and
    # the same count of unreadable values as when every row is parsed at once (a mixed column
    # read again as text would misread 2,5 with a decimal comma). Reference: the values
    # written here, checked one by one.
    n = 300_000
    v = np.arange(n) * 0.25 + 0.5
    lines = [f"{'AB'[i % 2]}{delimiter}{v[i]:.2f}{delimiter}1".replace(".", mark) for i in range(n)]
    lines += [f"A{delimiter}oops{delimiter}1", f"B{delimiter}2{mark}5{delimiter}1"]
    table = table_for(tmp_path, "d.csv", f"g{delimiter}v{delimiter}w\n" + "\n".join(lines) + "\n")
    assert table.report.unparsed["v"].count == 1
    assert table.report.unparsed["v"].examples == ("oops",)
    np.testing.assert_array_equal(table.values("v"), np.concatenate([v, [np.nan, 2.5]]))


def test_rows_without_group_are_dropped_and_counted(tmp_path):
    table = table_for(tmp_path, "d.csv", "g,v,w\nA,1,1\n,2,2\nNA,3,3\nB,4,4\n")
    assert table.report.rows_read == 4
    assert table.report.rows_used == 2
    assert table.report.drop_reasons == {"missing group label": 2}


def test_group_codes_keep_leading_zeros(tmp_path):
    table = table_for(tmp_path, "d.csv", "g,v,w\n01,1,1\n02,2,2\n10,3,3\n01,4,4\n")
    assert table.groups == ("01", "02", "10")


def test_groups_in_natural_order(tmp_path):
    table = table_for(tmp_path, "d.csv", "g,v,w\nLine 10,1,1\nLine 2,2,2\nLine 1,3,3\n")
    assert table.groups == ("Line 1", "Line 2", "Line 10")


def test_utf8_bom_is_removed(tmp_path):
    table = table_for(tmp_path, "d.csv", "\ufeffg,v,w\nÄ,1,1\n".encode())
    assert table.groups == ("Ä",)
    assert table.report.encoding == "utf-8-sig"


def test_non_utf8_text_is_read_as_windows_1252_and_reported(tmp_path):
    # Latin-1 and Windows-1252 agree on the letters used here (ü, ö).
    table = table_for(tmp_path, "d.csv", "g,v,w\nMünchen,1,1\nKöln,2,2\n".encode("latin-1"))
    assert set(table.groups) == {"München", "Köln"}
    assert table.report.encoding == "windows-1252"
    assert any("Windows-1252" in w for w in table.report.warnings)


def test_missing_column_lists_the_columns(tmp_path):
    with pytest.raises(SitebuildError) as caught:
        table_for(tmp_path, "d.csv", "g,v,z\nA,1,1\n")
    message = str(caught.value)
    assert "'w'" in message and "'g', 'v', 'z'" in message and "data/d.csv" in message


def test_parquet_and_json_lines(tmp_path):
    import pandas as pd

    frame = pd.DataFrame({"g": ["07", "07", "08"], "v": [1.0, 2.0, 3.0], "w": [1, 2, None]})
    root = write_project(tmp_path / "p", MANIFEST.format(file="data/d.parquet"), {})
    (root / "data").mkdir()
    frame.to_parquet(root / "data" / "d.parquet")
    table = read_table(load_manifest(root).datasets[0])
    assert table.groups == ("07", "08")
    assert table.report.missing["w"] == 1

    lines = '{"g": "a", "v": 1, "w": 2}\n{"g": "b", "v": 3.5, "w": null}\n'
    table = table_for(tmp_path / "j", "d.jsonl", lines)
    assert table.groups == ("a", "b")
    np.testing.assert_allclose(table.values("v"), [1, 3.5])


def test_binary_file_with_csv_name(tmp_path):
    with pytest.raises(SitebuildError, match="binary file"):
        table_for(tmp_path, "d.csv", b"PK\x03\x04\x00\x00binary")


def test_empty_file(tmp_path):
    with pytest.raises(SitebuildError, match="empty"):
        table_for(tmp_path, "d.csv", "")


def test_sniffer_prefers_consistent_split():
    assert sniff_delimiter("a;b;c\n1,5;2;3\n4;5,5;6\n", ".csv") == ";"
    assert sniff_delimiter("a,b\n1,2\n", ".csv") == ","


@pytest.mark.parametrize(
    "text",
    [
        'g,v,w\n"a,b",1,2\n"x\ny",2,3\nA,1,2,3\nB,1,2\n',
        'g,v,w\n"say ""hi"", ok",1,2\nA,1,2\n',
        "g,v,w\r\nA,1,2\r\nA,1,2,9,9\r\n",
        "g,v,w\nA,1,2\nB,3,4",
    ],
)
def test_overlong_line_matches_the_csv_module(tmp_path, text):
    import csv
    import io

    from sitebuild.ingest import first_overlong_line

    path = tmp_path / "d.csv"
    path.write_bytes(text.encode("utf-8"))
    # Reference: Python's csv module, which parses quotes per RFC 4180.
    reader = csv.reader(io.StringIO(text, newline=""))
    expected = None
    start = 1
    for row in reader:
        if len(row) > 3:
            expected = start
            break
        start = reader.line_num + 1
    assert first_overlong_line(path, ",", 3) == expected


@pytest.mark.parametrize("engine", ["memory", "stream"])
def test_manifest_order_puts_named_groups_first(tmp_path, engine):
    # Shifts in the order of the day, not the alphabet; unnamed groups follow in natural order.
    import sitebuild

    from conftest import write_project

    text = "shift,v\n" + "".join(
        f"{g},{i}\n" for i, g in enumerate(["Night", "Early", "Late", "Line 10", "Line 2"] * 3)
    )
    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "Order"
        [[datasets]]
        name = "Shifts"
        file = "d.csv"
        group = "shift"
        measures = ["v"]
        order = ["Early", "Late", "Night", "Weekend"]
        engine = "ENGINE"
        """.replace("ENGINE", engine),
        {"d.csv": text},
    )
    report = sitebuild.build(root, out=tmp_path / "site", quiet=True)
    import json

    ds = json.loads((tmp_path / "site" / "results.json").read_text("utf-8"))["datasets"][0]
    assert ds["groups"] == ["Early", "Late", "Night", "Line 2", "Line 10"]
    warning = "order names 'Weekend', which is not a group in column 'shift'"
    assert any(warning in w for w in ds["source"]["warnings"]), ds["source"]["warnings"]
    assert report is not None


def test_manifest_order_listing_a_group_twice_is_refused(tmp_path):
    from sitebuild.errors import SitebuildError
    from sitebuild.manifest import load_manifest

    from conftest import write_project

    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "Order"
        [[datasets]]
        name = "Shifts"
        file = "d.csv"
        group = "shift"
        measures = ["v"]
        order = ["Early", "Early"]
        """,
        {"d.csv": "shift,v\nEarly,1\n"},
    )
    with pytest.raises(SitebuildError, match="order.*lists a group twice"):
        load_manifest(root)


def test_rows_by_group_is_made_once_and_matches_a_stable_sort_by_group(tmp_path):
    # Reference: numpy's stable argsort of the group codes (each group's rows in file order).
    rng = np.random.default_rng(3)
    labels = rng.choice(["b", "a", "c"], 500)
    text = "g,v,w\n" + "\n".join(f"{g},{i},{i % 7}" for i, g in enumerate(labels))
    table = table_for(tmp_path, "d.csv", text)
    order, bounds = table.rows_by_group()
    expected = np.argsort(table.codes, kind="stable")
    assert np.array_equal(order, expected)
    assert order.dtype == np.int32
    assert bounds.tolist() == [0, *np.cumsum(np.bincount(table.codes)).tolist()]
    again = table.rows_by_group()
    assert again[0] is order and again[1] is bounds  # kept, not made again
    values = table.values("v")
    for group, part in zip(table.groups, table.by_group("v"), strict=True):
        assert part.tolist() == values[[table.groups[c] == group for c in table.codes]].tolist()
