"""Real-world exports, one test per kind of file people actually get: spreadsheets, gzip,
SQLite, Windows-1252 and UTF-16 text, decimal commas, title lines, messy labels, dates,
folders of exports, page names in any script. Each checks the rows used, the exact group
labels and a mean against numpy on the same invented values."""

from __future__ import annotations

import datetime as dt
import gzip
import json
import sqlite3
import subprocess
import sys

import numpy as np
import pytest

from sitebuild import build, check
from sitebuild.errors import SitebuildError
from sitebuild.ingest import read_table
from sitebuild.manifest import load_manifest, slugify

from conftest import REPO, write_project

RNG_SEED = 1301


def invented(n_per: int = 8, labels=("Nord", "Süd", "West")):
    """Return (labels per row, values per row) of an invented line trial, seeded."""
    rng = np.random.default_rng(RNG_SEED)
    groups = [g for g in labels for _ in range(n_per)]
    values = np.round(rng.normal(40, 6, size=len(groups)), 2)
    return groups, values


def expected_means(groups, values) -> dict[str, float]:
    """Per-group means by numpy, the reference every test compares with."""
    out = {}
    for g in dict.fromkeys(groups):
        out[g] = float(np.mean([v for gg, v in zip(groups, values, strict=True) if gg == g]))
    return out


def table_of(tmp_path, file: str, files: dict, extra: str = "", measures='["v"]'):
    manifest = f"""
    [[datasets]]
    name = "D"
    file = "{file}"
    group = "g"
    measures = {measures}
    {extra}
    """
    root = write_project(tmp_path / "p", manifest, files)
    return read_table(load_manifest(root).datasets[0])


def group_means(table, measure="v") -> dict[str, float]:
    return {
        g: float(np.mean(v)) for g, v in zip(table.groups, table.by_group(measure), strict=True)
    }


def assert_matches(table, groups, values):
    assert table.report.rows_used == len(groups)
    assert table.groups == tuple(sorted(set(groups), key=list(dict.fromkeys(groups)).index))
    means = group_means(table)
    for g, mean in expected_means(groups, values).items():
        assert means[g] == pytest.approx(mean, rel=1e-12)


def xlsx_bytes(tmp_path, sheets: dict[str, list[list]]) -> bytes:
    openpyxl = pytest.importorskip("openpyxl")
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name)
        for row in rows:
            sheet.append(row)
    path = tmp_path / "made.xlsx"
    book.save(path)
    return path.read_bytes()


# --- row: ".xlsx" -> "files ending '.xlsx' are not supported" ---------------------------


def test_xlsx_sheet_by_name_with_title_rows_and_a_date_column(tmp_path):
    groups, values = invented()
    rows = [["Line trial – export"], [], ["g", "v", "day"]]
    rows += [
        [g, float(v), dt.date(2026, 3, 1) + dt.timedelta(days=i)]
        for i, (g, v) in enumerate(zip(groups, values, strict=True))
    ]
    data = xlsx_bytes(tmp_path, {"Notes": [["nothing here"]], "Export": rows})
    table = table_of(
        tmp_path,
        "data/t.xlsx",
        {"data/t.xlsx": data},
        'sheet = "Export"\n    header_row = 3\n    x = "day"',
    )
    assert_matches(table, groups, values)
    # The date x is days since the first date.
    np.testing.assert_array_equal(table.values("day"), np.arange(len(groups), dtype=float))
    assert table.report.x_time["origin"] == "2026-03-01"


def test_xlsx_sheet_by_index_and_numeric_labels(tmp_path):
    groups, values = invented(labels=(1, 2))
    data = xlsx_bytes(
        tmp_path,
        {
            "A": [["x"]],
            "B": [["g", "v"], *[[g, float(v)] for g, v in zip(groups, values, strict=True)]],
        },
    )
    table = table_of(tmp_path, "data/t.xlsx", {"data/t.xlsx": data}, "sheet = 1")
    assert table.groups == ("1", "2")  # whole numbers read as labels, not "1.0"
    assert_matches(table, [str(g) for g in groups], values)


def test_wrong_sheet_name_lists_the_sheets(tmp_path):
    data = xlsx_bytes(tmp_path, {"Export": [["g", "v"], ["A", 1]], "Sheet 2": [["x"]]})
    with pytest.raises(SitebuildError) as caught:
        table_of(tmp_path, "data/t.xlsx", {"data/t.xlsx": data}, 'sheet = "Exprot"')
    assert str(caught.value) == (
        "data/t.xlsx: the workbook has no sheet 'Exprot'; its sheets are 'Export', 'Sheet 2' — "
        "set sheet to one of those names."
    )


# --- row: ".csv.gz, SQLite" -> refused ------------------------------------------------------


def test_csv_gz_is_read(tmp_path):
    groups, values = invented()
    text = "g,v\n" + "".join(f"{g},{v}\n" for g, v in zip(groups, values, strict=True))
    table = table_of(tmp_path, "data/t.csv.gz", {"data/t.csv.gz": gzip.compress(text.encode())})
    assert_matches(table, groups, values)


def test_jsonl_gz_is_read(tmp_path):
    groups, values = invented()
    text = "".join(
        json.dumps({"g": g, "v": float(v)}) + "\n" for g, v in zip(groups, values, strict=True)
    )
    table = table_of(tmp_path, "data/t.jsonl.gz", {"data/t.jsonl.gz": gzip.compress(text.encode())})
    assert_matches(table, groups, values)


def sqlite_file(tmp_path, groups, values) -> bytes:
    path = tmp_path / "made.sqlite"
    with sqlite3.connect(path) as db:
        db.execute("CREATE TABLE runs (g TEXT, v REAL, shift TEXT)")
        db.executemany(
            "INSERT INTO runs VALUES (?, ?, ?)",
            [
                (g, float(v), "early" if i % 2 else "late")
                for i, (g, v) in enumerate(zip(groups, values, strict=True))
            ],
        )
    db.close()
    return path.read_bytes()


def test_sqlite_table_and_query(tmp_path):
    groups, values = invented()
    data = sqlite_file(tmp_path, groups, values)
    table = table_of(tmp_path, "data/t.sqlite", {"data/t.sqlite": data}, 'table = "runs"')
    assert_matches(table, groups, values)
    late = [i for i in range(len(groups)) if i % 2 == 0]
    queried = table_of(
        tmp_path,
        "data/t.sqlite",
        {"data/t.sqlite": data},
        "query = \"SELECT g, v FROM runs WHERE shift = 'late'\"",
    )
    assert_matches(queried, [groups[i] for i in late], values[late])


def test_sqlite_is_opened_read_only(tmp_path):
    groups, values = invented()
    data = sqlite_file(tmp_path, groups, values)
    with pytest.raises(SitebuildError, match="not a SELECT query"):
        table_of(tmp_path, "data/t.sqlite", {"data/t.sqlite": data}, 'query = "DELETE FROM runs"')
    # A SELECT that tries to write through a common table expression fails too.
    with pytest.raises(SitebuildError, match="read-only"):
        table_of(
            tmp_path,
            "data/t.sqlite",
            {"data/t.sqlite": data},
            'query = "WITH x AS (SELECT 1) DELETE FROM runs"',
        )
    assert (tmp_path / "p" / "data" / "t.sqlite").read_bytes() == data


def test_sqlite_wrong_table_lists_the_tables(tmp_path):
    data = sqlite_file(tmp_path, *invented())
    with pytest.raises(SitebuildError, match="has no table 'run'; its tables are 'runs'"):
        table_of(tmp_path, "data/t.sqlite", {"data/t.sqlite": data}, 'table = "run"')


# --- rows: Windows-1252 and UTF-16 text ----------------------------------------------------


def test_windows_1252_csv_keeps_quotes_and_the_euro_sign(tmp_path):
    groups, values = invented(labels=("Linie „Süd“", "Linie Nord"))
    text = "g;Kosten (€)\n" + "".join(
        f"{g};{str(v).replace('.', ',')}\n" for g, v in zip(groups, values, strict=True)
    )
    table = table_of(
        tmp_path, "data/t.csv", {"data/t.csv": text.encode("cp1252")}, measures='["Kosten (€)"]'
    )
    assert table.report.encoding == "windows-1252"
    assert any("Windows-1252" in w for w in table.report.warnings)
    assert table.groups == ("Linie Nord", "Linie „Süd“")
    means = group_means(table, "Kosten (€)")
    for g, mean in expected_means(groups, values).items():
        assert means[g] == pytest.approx(mean, rel=1e-12)


def test_encoding_key_overrides_detection(tmp_path):
    text = "g,v\nKöln,1\nKöln,3\n".encode("latin-1")
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text}, 'encoding = "latin-1"')
    assert table.report.encoding == "latin-1" and table.groups == ("Köln",)
    assert not table.report.warnings


@pytest.mark.parametrize("codec", ["utf-16", "utf-16-be-bom"])
def test_utf16_unicode_text_with_tabs_and_decimal_commas(tmp_path, codec):
    groups, values = invented()
    text = "g\tv\n" + "".join(
        f"{g}\t{str(v).replace('.', ',')}\n" for g, v in zip(groups, values, strict=True)
    )
    data = text.encode("utf-16") if codec == "utf-16" else b"\xfe\xff" + text.encode("utf-16-be")
    table = table_of(tmp_path, "data/t.txt", {"data/t.txt": data})
    assert table.report.encoding == "utf-16" and table.report.delimiter == "\t"
    assert_matches(table, groups, values)


# --- row: tab file with decimal commas -> every value "not a number" -----------------------


def test_tab_file_with_decimal_and_thousands_marks(tmp_path):
    text = "g\tv\nA\t1.234,5\nA\t12,5\nB\t-0,25\nB\t2.000\n"
    table = table_of(tmp_path, "data/t.tsv", {"data/t.tsv": text})
    np.testing.assert_array_equal(table.values("v"), [1234.5, 12.5, -0.25, 2000.0])
    assert not table.report.unparsed
    assert any("decimal commas" in n for n in table.report.notes)


def test_point_decimals_with_thousands_commas(tmp_path):
    text = 'g,v\nA,"1,234.5"\nA,12.5\nB,"1,000,000"\n'
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text})
    np.testing.assert_array_equal(table.values("v"), [1234.5, 12.5, 1_000_000.0])


def test_decimal_key_overrides_the_guess(tmp_path):
    # 1.234 alone could be a decimal point; decimal = "," says it is a thousands mark.
    text = "g;v\nA;1.234\nA;2.500\n"
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text}, 'decimal = ","')
    np.testing.assert_array_equal(table.values("v"), [1234.0, 2500.0])


def test_a_measure_without_one_readable_number_fails_check_with_exit_2(tmp_path):
    root = write_project(
        tmp_path / "p",
        '[[datasets]]\nname = "D"\nfile = "d.csv"\ngroup = "g"\nmeasures = ["v", "w"]\n',
        {"d.csv": "g,v,w\nA,1,high\nB,2,low\n"},
    )
    with pytest.raises(SitebuildError, match="column 'w' has 2 values but not one readable number"):
        check(root)
    done = subprocess.run(
        [sys.executable, "-m", "sitebuild", "check", str(root)],
        capture_output=True,
        text=True,
        env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"},
    )
    assert done.returncode == 2 and "not one readable number" in done.stderr


# --- row: title rows above the header -------------------------------------------------------


def test_header_row_skips_title_lines_and_names_are_trimmed(tmp_path):
    groups, values = invented()
    text = "Outpatient waiting times – export, 2026\n\n g , v \n" + "".join(
        f"{g},{v}\n" for g, v in zip(groups, values, strict=True)
    )
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text}, "header_row = 3")
    assert_matches(table, groups, values)


def test_missing_column_suggests_the_case_variant(tmp_path):
    with pytest.raises(SitebuildError, match=r"column 'v'.*did you mean 'V'\?"):
        table_of(tmp_path, "data/t.csv", {"data/t.csv": "g,V\nA,1\n"})


# --- row: "Cardiology", "Cardiology " and "cardiology" -------------------------------------


CLINICS = "g,v\nCardiology,10\nCardiology ,20\ncardiology,30\nOncology,5\n Oncology,7\n"


def test_labels_are_trimmed_and_case_variants_warned(tmp_path):
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": CLINICS})
    assert table.groups == ("Cardiology", "cardiology", "Oncology")
    assert group_means(table) == {"Cardiology": 15.0, "cardiology": 30.0, "Oncology": 6.0}
    assert any("2 group labels in 'g' were trimmed" in n for n in table.report.notes)
    assert any(
        "'Cardiology' and 'cardiology'" in w and "aliases" in w for w in table.report.warnings
    )


def test_aliases_merge_labels(tmp_path):
    table = table_of(
        tmp_path, "data/t.csv", {"data/t.csv": CLINICS}, 'aliases = { "cardiology" = "Cardiology" }'
    )
    assert table.groups == ("Cardiology", "Oncology")
    assert group_means(table)["Cardiology"] == pytest.approx(np.mean([10, 20, 30]))
    assert not any("differ only" in w for w in table.report.warnings)


def test_nfc_variants_are_warned(tmp_path):
    text = "g,v\nK\u00f6ln,1\nKo\u0308ln,2\n"
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text})
    assert len(table.groups) == 2 and any("Unicode form" in w for w in table.report.warnings)


# --- row: a date column as x ---------------------------------------------------------------


def test_iso_timestamps_as_x_are_days(tmp_path):
    text = "g,v,t\nA,1,2026-01-01T00:00\nA,2,2026-01-01T12:00\nB,3,2026-01-03T06:00Z\n"
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text}, 'x = "t"')
    np.testing.assert_allclose(table.values("t"), [0.0, 0.5, 2.25])
    assert any("per day" in n for n in table.report.notes)


def test_day_month_year_dates_with_date_format(tmp_path):
    text = "g,v,t\nA,1,31/01/2026\nA,2,01/02/2026\nB,3,15/02/2026\nB,4,\n"
    table = table_of(
        tmp_path, "data/t.csv", {"data/t.csv": text}, 'x = "t"\n    date_format = "%d/%m/%Y"'
    )
    np.testing.assert_array_equal(table.values("t"), [0.0, 1.0, 15.0, np.nan])
    assert table.report.missing["t"] == 1 and "t" not in table.report.unparsed


def test_x_that_is_neither_numbers_nor_dates_is_an_error(tmp_path):
    text = "g,v,t\nA,1,31/01/2026\nA,2,01/02/2026\n"
    with pytest.raises(SitebuildError, match="holds neither numbers nor dates.*date_format"):
        table_of(tmp_path, "data/t.csv", {"data/t.csv": text}, 'x = "t"')


# --- row: a folder of CSVs, or data/*.csv ----------------------------------------------------


def folder_files(groups, values):
    half = len(groups) // 2
    rows = list(zip(groups, values, strict=True))
    return {
        "data/parts/2026-02.csv": "g,v\n" + "".join(f"{g},{v}\n" for g, v in rows[half:]),
        "data/parts/2026-01.csv": "g,v\n" + "".join(f"{g},{v}\n" for g, v in rows[:half]),
    }


@pytest.mark.parametrize("file", ["data/parts", "data/parts/*.csv"])
def test_folder_or_glob_of_csv_files_is_one_table_in_name_order(tmp_path, file):
    groups, values = invented()
    table = table_of(tmp_path, file, folder_files(groups, values))
    assert_matches(table, groups, values)
    assert any("2 files read as one table" in w for w in table.report.warnings)


def test_folder_files_can_be_the_groups(tmp_path):
    groups, values = invented()
    manifest = (
        '[[datasets]]\nname = "D"\nfile = "data/parts"\ngroup = "source file"\nmeasures = ["v"]\n'
    )
    root = write_project(tmp_path / "p", manifest, folder_files(groups, values))
    table = read_table(load_manifest(root).datasets[0])
    assert table.groups == ("2026-01.csv", "2026-02.csv")
    half = len(groups) // 2
    assert group_means(table)["2026-01.csv"] == pytest.approx(np.mean(values[:half]), rel=1e-12)


def test_folder_files_with_different_headers_are_named(tmp_path):
    files = {"data/parts/a.csv": "g,v\nA,1\n", "data/parts/b.csv": "g,value\nA,1\n"}
    with pytest.raises(
        SitebuildError, match="'b.csv' has the columns 'g', 'value' but 'a.csv' has 'g', 'v'"
    ):
        table_of(tmp_path, "data/parts", files)


# --- row: reference = "Cardio" (no such group) ----------------------------------------------


def test_reference_and_order_the_data_lacks_are_warned(tmp_path):
    table = table_of(
        tmp_path,
        "data/t.csv",
        {"data/t.csv": "g,v\nCardiology,1\nOncology,2\n"},
        'reference = "Cardio"\n    order = ["Surgery"]',
    )
    warnings = " ".join(table.report.warnings)
    assert "reference names 'Cardio'" in warnings and "did you mean 'Cardiology'" in warnings
    assert "order names 'Surgery'" in warnings


# --- where filters ---------------------------------------------------------------------------


def test_where_range_of_dates_and_set_of_values(tmp_path):
    text = (
        "g,v,day,shift\nA,1,2026-01-01,early\nA,2,2026-03-01,late\nB,3,2026-06-30,early\n"
        "B,4,2026-07-01,early\nB,5,2026-02-01,night\n"
    )
    table = table_of(
        tmp_path,
        "data/t.csv",
        {"data/t.csv": text},
        'where = { day = ["2026-01-01", "2026-06-30"], shift = ["early", "late"] }',
    )
    np.testing.assert_array_equal(table.values("v"), [1, 2, 3])
    assert table.report.rows_read == 5 and table.report.rows_used == 3
    assert table.report.drop_reasons == {"left out by where": 2}


def test_where_numeric_range(tmp_path):
    text = "g,v,w\nA,1,10\nA,2,20\nB,3,30\n"
    table = table_of(tmp_path, "data/t.csv", {"data/t.csv": text}, "where = { w = [15, 30] }")
    np.testing.assert_array_equal(table.values("v"), [2, 3])


# --- row: Cyrillic or CJK dataset names --------------------------------------------------------


def test_page_names_keep_any_script_and_avoid_the_sites_own_pages():
    assert slugify("Qualität") == "qualität"
    assert slugify("Данные по цехам") == "данные-по-цехам"
    assert slugify("東京 工場") == "東京-工場"
    assert slugify("ｑｕａｌｉｔｙ") == "quality"  # NFKC folds full-width letters
    assert slugify("Index") == "index-data" and slugify("changes") == "changes-data"
    assert slugify("CON") == "con-data" and slugify("../x/<y>") == "x-y"
    assert len(slugify("a" * 500)) <= 60


def test_names_that_still_collide_get_a_hash_suffix(tmp_path):
    manifest = "".join(
        f'[[datasets]]\nname = "{name}"\nfile = "d.csv"\ngroup = "g"\nmeasures = ["v"]\n'
        for name in ("Цех 1", "цех-1", "東京")
    )
    root = write_project(tmp_path / "p", manifest, {"d.csv": "g,v\nA,1\nB,2\n"})
    slugs = [d.slug for d in load_manifest(root).datasets]
    assert slugs[0] == "цех-1" and slugs[1].startswith("цех-1-") and slugs[2] == "東京"
    assert len(set(slugs)) == 3


# --- small groups --------------------------------------------------------------------------


def test_groups_under_min_group_size_are_shown_but_not_tested(tmp_path):
    rng = np.random.default_rng(RNG_SEED)
    rows = [("Big A", v) for v in rng.normal(10, 1, 12)] + [
        ("Big B", v) for v in rng.normal(11, 1, 12)
    ]
    rows += [("Tiny", v) for v in (60.0, 80.0, 100.0)]
    text = "g,v\n" + "".join(f"{g},{v}\n" for g, v in rows)
    manifest = '[[datasets]]\nname = "Clinics"\nfile = "d.csv"\ngroup = "g"\nmeasures = ["v"]\n'
    root = write_project(tmp_path / "p", manifest, {"d.csv": text})
    build(root, quiet=True)
    results = json.loads((root / "site_output" / "results.json").read_text(encoding="utf-8"))
    ds = results["datasets"][0]
    assert "Tiny" in ds["groups"]
    summary = next(s for s in ds["summaries"] if s["group"] == "Tiny")
    assert summary["mean"] == pytest.approx(80.0)
    comparison = ds["comparisons"][0]
    assert [e["group"] for e in comparison["not_comparable"]] == ["Tiny"]
    assert "min_group_size = 5" in comparison["not_comparable"][0]["reason"]
    assert all("Tiny" not in (p["a"], p["b"]) for p in comparison["pairs"])
    # The 3-value group never names a headline: the index's headlines rank compared groups.
    index = (root / "site_output" / "index.html").read_text(encoding="utf-8")
    headlines = index.split('class="headlines"')[1].split("</ul>")[0]
    assert "Big B" in headlines and "Tiny" not in headlines
