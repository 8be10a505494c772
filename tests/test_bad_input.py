"""The catalogue of bad input: one test per case, each asserting the exact outcome.

Either the build is refused — exit code 2, one ``error:`` line on stderr naming the file, key or
line and the fix, no traceback, and the previous site left byte for byte as it was — or the
site is built correctly and the problem is reported on the page and in the CLI output.

Cases covered elsewhere (not repeated here): rows without a group label are dropped and counted
(test_ingest), the delimiter and decimal comma sniffing (test_ingest), missing required keys
(test_manifest), hostile text in a real browser (test_hostile, test_browser).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import textwrap
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

from sitebuild.cli import main
from sitebuild.manifest import load_manifest

from conftest import REPO, leftovers, snapshot, write_project

MANIFEST = """
[site]
title = "Catalogue"

[[datasets]]
name = "Lines"
file = "data/d.csv"
group = "g"
measures = ["v", "w"]
"""
GOOD_CSV = "g,v,w\nA,1,2\nA,2,3\nA,3,5\nB,3,4\nB,4,5\nB,6,6\n"


@dataclass
class Project:
    root: Path
    out: Path
    before: dict[str, bytes]

    def write(self, manifest: str | None = None, files: dict | None = None) -> None:
        if manifest is not None:
            text = textwrap.dedent(manifest)
            (self.root / "manifest.toml").write_text(text, encoding="utf-8")
        for name, content in (files or {}).items():
            path = self.root / name
            path.parent.mkdir(parents=True, exist_ok=True)
            if path.is_symlink():
                path.unlink()
            if isinstance(content, bytes):
                path.write_bytes(content)
            else:
                path.write_text(content, encoding="utf-8")


@pytest.fixture(scope="module")
def good_build(tmp_path_factory) -> tuple[Path, Path]:
    """The good project and its site, built once; each test works on a copy of both."""
    work = tmp_path_factory.mktemp("good")
    root = write_project(work / "p", MANIFEST, {"data/d.csv": GOOD_CSV})
    out = work / "site"
    import sitebuild

    sitebuild.build(root, out=out)
    return root, out


@pytest.fixture
def project(tmp_path, good_build) -> Project:
    """A project whose good site is already built into ``out`` (outside the project)."""
    root, out = tmp_path / "p", tmp_path / "site"
    shutil.copytree(good_build[0], root, symlinks=True)
    shutil.copytree(good_build[1], out, symlinks=True)
    before = snapshot(out)
    assert "index.html" in before and "results.json" in before
    return Project(root=root, out=out, before=before)


def refused(project: Project, capsys, manifest=None, files=None) -> str:
    """Run the bad build; assert the refusal's shape; return the error sentence."""
    project.write(manifest, files)
    code = main(["build", str(project.root), "--out", str(project.out), "--quiet"])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    assert "unexpected failure" not in captured.err, captured.err
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, f"expected one error line, got: {captured.err!r}"
    assert lines[0].startswith("error: ")
    assert code == 2, captured.err
    assert captured.out == ""
    assert snapshot(project.out) == project.before, "the previous site changed"
    assert leftovers(project.out) == []
    message = lines[0][len("error: ") :]
    assert message.endswith("."), "an error is one sentence"
    return message


@dataclass
class Built:
    stdout: str
    results: dict
    page: str
    out: Path

    @property
    def ds(self) -> dict:
        return self.results["datasets"][0]


def accepted(project: Project, capsys, manifest=None, files=None, page="lines.html") -> Built:
    """Run a build that must succeed; return its CLI output, results and dataset page."""
    project.write(manifest, files)
    code = main(["build", str(project.root), "--out", str(project.out)])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    assert code == 0, captured.err
    assert "error:" not in captured.err
    text = (project.out / "results.json").read_text(encoding="utf-8")
    assert "NaN" not in text and "Infinity" not in text
    results = json.loads(text)
    import jsonschema

    from sitebuild.results import schema

    jsonschema.Draft202012Validator(schema()).validate(results)
    html = (project.out / page).read_text(encoding="utf-8")
    return Built(stdout=captured.out, results=results, page=html, out=project.out)


def with_dataset(**changes: str) -> str:
    """The good manifest with dataset lines replaced or added (key = TOML value text)."""
    lines = textwrap.dedent(MANIFEST).rstrip("\n").splitlines()
    for key, value in changes.items():
        found = [i for i, line in enumerate(lines) if line.startswith(f"{key} =")]
        if found:
            lines[found[-1]] = f"{key} = {value}"
        else:
            lines.append(f"{key} = {value}")
    return "\n".join(lines) + "\n"


def with_site(line: str) -> str:
    return textwrap.dedent(MANIFEST).replace("[site]\n", f"[site]\n{line}\n", 1)


# ---------------------------------------------------------------------------------------------
# Manifest
# ---------------------------------------------------------------------------------------------


def test_m01_invalid_toml_names_the_line(project, capsys):
    bad = textwrap.dedent(MANIFEST).replace('measures = ["v", "w"]', 'measures = ["v", "w"')
    message = refused(project, capsys, manifest=bad)
    assert message.startswith("manifest.toml: not valid TOML")
    assert "line 9" in message and "fix the syntax" in message


def test_m02_unterminated_string(project, capsys):
    message = refused(project, capsys, manifest="[site]\ntitle = 'x\n")
    assert "not valid TOML" in message and "line 2" in message


def test_m03_duplicate_key_in_one_table(project, capsys):
    message = refused(project, capsys, manifest=MANIFEST + 'name = "Again"\n')
    assert "not valid TOML" in message and "line 10" in message


def test_m04_wrong_type_number_as_text(project, capsys):
    message = refused(project, capsys, manifest=with_site('confidence = "high"'))
    assert message == (
        "manifest.toml (line 3): [site] confidence must be number, not str; write it as number."
    )


def test_m05_wrong_type_measures_as_text(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(measures='"v"'))
    assert message == (
        "manifest.toml (line 9): [[datasets]] #1 measures must be list of text, not str; write "
        "it as list of text."
    )


def test_m06_wrong_type_boolean_is_not_an_integer(project, capsys):
    message = refused(project, capsys, manifest=with_site("seed = true"))
    assert "seed must be integer, not bool" in message and "(line 3)" in message


def test_m07_misspelt_dataset_key_suggests_the_right_one(project, capsys):
    bad = textwrap.dedent(MANIFEST).replace("measures =", "meausres =")
    message = refused(project, capsys, manifest=bad)
    assert message == (
        "manifest.toml (line 9): unknown key 'meausres' in [[datasets]] #1; did you mean "
        "'measures'."
    )


def test_m08_misspelt_table_name(project, capsys):
    bad = textwrap.dedent(MANIFEST).replace("[site]", "[sites]")
    message = refused(project, capsys, manifest=bad)
    assert "unknown key 'sites'" in message and "did you mean 'site'" in message


def test_m09_unknown_site_key_lists_the_valid_ones(project, capsys):
    message = refused(project, capsys, manifest=with_site("colour = 'blue'"))
    assert "unknown key 'colour' in [site]" in message and "(line 3)" in message


def test_m10_empty_measures(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(measures="[]"))
    assert message == (
        "manifest.toml (line 9): dataset 'Lines': measures is empty; list at least one numeric "
        "column."
    )


def test_m11_group_column_also_a_measure(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(measures='["v", "g"]'))
    assert "includes the group column 'g'" in message and "(line 9)" in message


def test_m12_a_measure_listed_twice(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(measures='["v", "v"]'))
    assert "lists a column twice" in message


def test_m13_duplicate_dataset_names(project, capsys):
    second = textwrap.dedent(MANIFEST).split("[[datasets]]")[1]
    message = refused(project, capsys, manifest=MANIFEST + "\n[[datasets]]" + second)
    assert message == (
        "manifest.toml (line 12): dataset 'Lines': name is used by dataset #1 too; give each "
        "dataset its own name."
    )


def test_m14_names_that_make_the_same_page_name_get_a_hash_suffix(project):
    second = textwrap.dedent(MANIFEST).split("[[datasets]]")[1].replace('"Lines"', '"LINES!"')
    project.write(manifest=MANIFEST + "\n[[datasets]]" + second)
    slugs = [d.slug for d in load_manifest(project.root).datasets]
    assert slugs[0] == "lines" and slugs[1].startswith("lines-") and len(set(slugs)) == 2


def test_m15_path_with_dot_dot(project, capsys, tmp_path):
    (tmp_path / "outside.csv").write_text(GOOD_CSV)
    message = refused(project, capsys, manifest=with_dataset(file='"../outside.csv"'))
    assert "'../outside.csv' points outside the project folder" in message and "(line 7)" in message


def test_m16_absolute_path(project, capsys, tmp_path):
    (tmp_path / "outside.csv").write_text(GOOD_CSV)
    absolute = (tmp_path / "outside.csv").as_posix()
    message = refused(project, capsys, manifest=with_dataset(file=json.dumps(absolute)))
    assert "points outside the project folder" in message


def test_m17_symlink_pointing_out(project, capsys, tmp_path):
    outside = tmp_path / "secret.csv"
    outside.write_text(GOOD_CSV)
    target = project.root / "data" / "d.csv"
    target.unlink()
    os.symlink(outside, target)
    message = refused(project, capsys)
    assert "resolves outside the project folder (through a link)" in message
    assert "copy the file into the project folder" in message


def test_m18_symlinked_folder_pointing_out(project, capsys, tmp_path):
    (tmp_path / "elsewhere").mkdir()
    (tmp_path / "elsewhere" / "d.csv").write_text(GOOD_CSV)
    os.symlink(tmp_path / "elsewhere", project.root / "linked")
    message = refused(project, capsys, manifest=with_dataset(file='"linked/d.csv"'))
    assert "through a link" in message


def test_m19_missing_data_file(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(file='"data/gone.csv"'))
    assert message == (
        "manifest.toml (line 7): dataset 'Lines': file names 'data/gone.csv', which does not "
        "exist; check the spelling or add the file to the project folder."
    )


def test_m20_missing_notes_file(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(notes='"notes/none.md"'))
    assert "notes names 'notes/none.md', which does not exist" in message


def test_m21_notes_outside_the_project(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(notes='"/etc/hostname"'))
    assert "notes '/etc/hostname' points outside the project folder" in message


@pytest.mark.parametrize(
    "value", ["1.5", "1", "0", "-0.2", "nan", "inf", "0.9999999999999999", "0.3", "0.99999"]
)
def test_m22_confidence_outside_its_sane_range(project, capsys, value):
    # 0.9999999999999999 overflowed the interval arithmetic ("unexpected failure").
    message = refused(project, capsys, manifest=with_site(f"confidence = {value}"))
    assert "[site] confidence is" in message and "outside 0.5 to 0.9999" in message
    assert "(line 3)" in message


@pytest.mark.parametrize("value", ["5", "0", "0.6", "1e-9"])
def test_m23_alpha_outside_its_sane_range(project, capsys, value):
    message = refused(project, capsys, manifest=with_site(f"alpha = {value}"))
    assert "[site] alpha is" in message and "outside 0.0001 to 0.5" in message


def test_m24_unknown_adjust(project, capsys):
    message = refused(project, capsys, manifest=with_site('adjust = "fdr"'))
    assert message == (
        "manifest.toml (line 3): [site] adjust is 'fdr', which is not a method we know; use one "
        "of holm, bh, bonferroni, none."
    )


def test_m25_negative_seed(project, capsys):
    # numpy's seed sequence takes only non-negative integers; found by this catalogue.
    message = refused(project, capsys, manifest=with_site("seed = -1"))
    assert "[site] seed is -1" in message and "(line 3)" in message and "0 or more" in message


def test_m26_no_datasets(project, capsys):
    message = refused(project, capsys, manifest='[site]\ntitle = "x"\n')
    assert "no [[datasets]] entries" in message


def test_m27_manifest_not_utf8(project, capsys):
    (project.root / "manifest.toml").write_bytes(
        '[site]\ntitle = "Pr\u00fcfung"\n'.encode("cp1252")
    )
    message = refused(project, capsys)
    assert "not UTF-8 text" in message and "save it as UTF-8" in message


def test_m28_user_text_with_a_line_break_stays_on_one_line(project, capsys):
    # A name holding a newline must not split the one-line error (found by this catalogue).
    second = textwrap.dedent(MANIFEST).split("[[datasets]]")[1]
    bad = (MANIFEST + "\n[[datasets]]" + second).replace('"Lines"', '"Li\\nnes"')
    message = refused(project, capsys, manifest=bad)
    assert "'Li\\nnes'" in message


def test_m29_margin_that_is_not_positive(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(equivalence_margin="{ v = -1 }"))
    assert "equivalence_margin for 'v' is -1" in message and "positive margin" in message


def test_m30_measure_not_in_the_file_lists_the_columns(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(measures='["v", "depth"]'))
    assert message == (
        "data/d.csv: column 'depth' (key 'measures' of dataset 'Lines') is not in the file; the "
        "columns are 'g', 'v', 'w'."
    )


# ---------------------------------------------------------------------------------------------
# Data files
# ---------------------------------------------------------------------------------------------


def test_d01_empty_file(project, capsys):
    message = refused(project, capsys, files={"data/d.csv": ""})
    assert message == "data/d.csv: the file is empty; export the data again with a header row."


def test_d02_blank_lines_only(project, capsys):
    message = refused(project, capsys, files={"data/d.csv": "\n \n\n"})
    assert message.startswith("data/d.csv: the first line is empty")


def test_d03_header_only_builds_and_says_so(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\n"})
    assert "data/d.csv has a header but no data rows." in built.stdout
    assert "data/d.csv has a header but no data rows." in built.page
    assert built.ds["groups"] == []


def test_d04_row_with_too_many_fields(project, capsys):
    bad = "g,v,w\nA,1,2\nA,2,3,4,5\nB,3,4\nB,4,5\n"
    message = refused(project, capsys, files={"data/d.csv": bad})
    assert message.startswith("data/d.csv: a row has more fields than the header")
    assert "line 3" in message


def _first_long_row(text: str, fields: int) -> int | None:
    """Reference: Python's csv module (RFC 4180 quoting); the physical line a long row starts."""
    import csv
    import io

    reader = csv.reader(io.StringIO(text, newline=""))
    start = 1
    for row in reader:
        if len(row) > fields:
            return start
        start = reader.line_num + 1
    return None


@pytest.mark.parametrize(
    "text",
    [
        pytest.param("g,v,w\nA,1,2,9\nA,2,3\nB,3,4\nB,4,5\n", id="first-data-row"),
        pytest.param('g,v,w\n"A\nA",1,2\nA,2,3\nB,3,4,4\nB,4,5\n', id="after-quoted-newline"),
        pytest.param("g,v,w,z\nA,1,2,q\nA,2,3,q\nB,3,4,q,q\nB,4,5,q\n", id="unused-column"),
        pytest.param("g,v,w,z\nA,1,2,q,q\nA,2,3,q\nB,3,4,q\nB,4,5,q\n", id="unused-first-row"),
        pytest.param(
            "g,v,w\n" + "A,1,2\n" * 30_000 + "B,3,4,4\nB,4,5\n", id="beyond-the-sniffed-head"
        ),
    ],
)
def test_d04_long_rows_are_found_wherever_they_are(project, capsys, text):
    fields = len(text.split("\n", 1)[0].split(","))
    line = _first_long_row(text, fields)
    assert line is not None
    message = refused(project, capsys, files={"data/d.csv": text})
    assert message.startswith("data/d.csv: a row has more fields than the header")
    assert f"line {line}" in message, (line, message)


@pytest.mark.parametrize(
    "text",
    [
        pytest.param('g,v,w\n"A,A",1,2\nA,2,3\nB,3,4\nB,4,5\n', id="quoted-delimiter"),
        pytest.param(
            'g,v,w\nA,"' + "1,2" * 30_000 + '",2\nA,2,3\nB,3,4\nB,4,5\n', id="huge-first-cell"
        ),
    ],
)
def test_d04_delimiters_inside_quotes_do_not_count(project, capsys, text):
    assert _first_long_row(text, 3) is None
    built = accepted(project, capsys, files={"data/d.csv": text})
    assert built.ds["source"]["rows_read"] == 4
    w = [r for r in built.ds["summaries"] if r["measure"] == "w" and r["group"] is None]
    assert w[0]["n"] == 4


@pytest.mark.parametrize(
    "text, line",
    [
        pytest.param('g,v,w\nA,1,2\n"B,3,4\nB,4,5\n', 3, id="all-columns"),
        pytest.param('g,v,w,z\nA,1,2,"x""y"\nA,2,3,q\nB,3,4,"q\nB,4,5,q\n', 4, id="unused"),
    ],
)
def test_d04_a_quote_never_closed(project, capsys, text, line):
    message = refused(project, capsys, files={"data/d.csv": text})
    assert message == (
        f'data/d.csv: the quoted field opened at line {line} is never closed; add the closing " '
        "or remove the stray one."
    )


def test_d05_row_with_too_few_fields_counts_missing(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\nA,1,2\nA,2\nB,3,4\nB,4,5\n"})
    assert built.ds["source"]["missing"] == {"v": 0, "w": 1}
    a_w = next(r for r in built.ds["summaries"] if r["group"] == "A" and r["measure"] == "w")
    assert a_w["n"] == 1 and a_w["missing"] == 1


def test_d06_binary_file_with_a_csv_name(project, capsys):
    message = refused(project, capsys, files={"data/d.csv": b"PK\x03\x04\x14\x00\x00\x00" * 64})
    assert "looks like a binary file, not delimited text" in message
    assert "export the data as CSV, Parquet or JSON Lines" in message


def test_d07_utf16_text_with_a_byte_order_mark_is_read(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": GOOD_CSV.encode("utf-16")})
    assert built.ds["source"]["encoding"] == "utf-16"


def test_d08_latin1_file_is_read_and_the_guess_reported(project, capsys):
    data = "g,v,w\nMünchen,1,2\nMünchen,2,3\nKöln,3,4\nKöln,4,6\n".encode("latin-1")
    built = accepted(project, capsys, files={"data/d.csv": data})
    assert built.ds["groups"] == ["Köln", "München"]
    assert "read as Windows-1252" in built.stdout and "read as Windows-1252" in built.page


def test_d09_mixed_encodings_are_reported(project, capsys):
    data = b"g,v,w\n" + "Ä,1,2\nÄ,2,3\n".encode() + "Ö,3,4\nÖ,4,5\n".encode("latin-1")
    built = accepted(project, capsys, files={"data/d.csv": data})
    assert "read as Windows-1252" in built.stdout and "read as Windows-1252" in built.page
    assert len(built.ds["groups"]) == 2


def test_d10_non_utf8_bytes_after_the_first_64_kb(project, capsys):
    rows = "".join(f"A,{i},{i % 7}\n" for i in range(9000))  # about 90 KB of plain ASCII
    data = b"g,v,w\n" + rows.encode() + "Köln,3,4\nKöln,4,5\n".encode("latin-1")
    built = accepted(project, capsys, files={"data/d.csv": data})
    assert "Köln" in built.ds["groups"]
    assert "read as Windows-1252" in built.stdout and "read as Windows-1252" in built.page


def test_d11_duplicate_column_names(project, capsys):
    message = refused(project, capsys, files={"data/d.csv": "g,v,v,w\nA,1,1,2\nB,2,2,3\n"})
    assert message == (
        "data/d.csv: column 'v' appears 2 times in the header; rename the duplicates so each "
        "column name is unique."
    )


def test_d12_duplicate_names_in_unused_columns_do_no_harm(project, capsys):
    data = "g,v,w,z,z\nA,1,2,9,9\nA,2,3,9,9\nB,3,4,9,9\nB,5,6,9,9\n"
    built = accepted(project, capsys, files={"data/d.csv": data})
    assert [r["mean"] for r in built.ds["summaries"] if r["measure"] == "v"] == [1.5, 4.0, 2.75]


AWKWARD = ["depth (mm)", "a.b", "w[0]", 'say "hi"', "it's", "重量", "Größe ø"]


def test_d13_awkward_column_names_are_text_and_charts_compile(project, capsys):
    import csv
    import io

    import vl_convert

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["grp.name", *AWKWARD])
    for i in range(12):
        writer.writerow(["AB"[i % 2], *(i * (k + 1) % 5 + 0.5 * k for k in range(len(AWKWARD)))])
    manifest = with_dataset(group='"grp.name"', measures=json.dumps(AWKWARD, ensure_ascii=False))
    built = accepted(project, capsys, manifest=manifest, files={"data/d.csv": buffer.getvalue()})
    assert built.ds["measures"] == AWKWARD
    specs = json.loads(
        re.search(
            r'<script type="application/json" id="chart-specs">(.*?)</script>', built.page, re.S
        )[1]
    )
    assert specs
    fields = set()

    def walk(node):
        if isinstance(node, dict):
            if isinstance(node.get("field"), str):
                fields.add(node["field"])
            for value in node.values():
                walk(value)
        elif isinstance(node, list):
            for value in node:
                walk(value)

    walk(specs)
    assert not fields & set(AWKWARD + ["grp.name"]), "user column names used as chart fields"
    for chart_id, spec in specs.items():
        svg = vl_convert.vegalite_to_svg(spec)
        assert "<svg" in svg, chart_id


def test_d14_measure_all_missing(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\nA,,2\nA,NA,3\nB,,4\nB,-,6\n"})
    rows = [r for r in built.ds["summaries"] if r["measure"] == "v"]
    assert all(r["n"] == 0 and r["mean"] is None and r["reasons"] for r in rows)
    assert "All groups: all not shown — no values." in built.page


def test_d14b_measure_all_missing_is_reported_in_the_cli(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\nA,,2\nA,NA,3\nB,,4\nB,-,6\n"})
    assert re.search(r"'v'.*no values", built.stdout), built.stdout


def test_d15_measure_all_one_value(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\nA,7,2\nA,7,3\nB,7,4\nB,7,6\n"})
    overall = next(r for r in built.ds["summaries"] if r["measure"] == "v" and r["group"] is None)
    assert overall["sd"] == 0.0 and overall["skewness"] is None
    assert overall["reasons"]["skewness"] == "all values are equal"
    assert "skewness not shown — all values are equal." in built.page


def test_d16_a_single_group(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\nA,1,2\nA,2,3\nA,4,4\n"})
    assert built.ds["groups"] == ["A"]
    assert "1 group of" in built.page
    if "comparisons" in built.ds:
        assert all(not c["pairs"] for c in built.ds["comparisons"])


def test_d17_one_row_per_group(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\nA,1,2\nB,2,3\nC,4,4\n"})
    rows = [r for r in built.ds["summaries"] if r["measure"] == "v" and r["group"]]
    assert [r["n"] for r in rows] == [1, 1, 1]
    assert all(r["sd"] is None and r["reasons"] for r in rows)


def test_d18_infinities_are_counted_as_not_numbers(project, capsys):
    data = "g,v,w\nA,inf,2\nA,-inf,3\nA,1,1\nB,Infinity,4\nB,4,5\nB,2,2\n"
    built = accepted(project, capsys, files={"data/d.csv": data})
    assert built.ds["source"]["unparsed"]["v"]["count"] == 3
    assert "3 values in 'v' are not numbers" in built.stdout
    assert "could not be read as numbers" in built.page


@pytest.mark.parametrize(
    "values",
    [
        pytest.param(["1e308", "-1e308", "1e308", "-1e308", "1e308", "1e308"], id="near-max"),
        pytest.param(
            ["1e308", "-1e308", "-1e308", "1e308", "1e308", "-1e308"],
            id="range-beyond-max",
        ),
        pytest.param(["5e-324", "0", "5e-324", "1e-320", "0", "5e-324"], id="subnormal"),
        pytest.param(
            ["0", "7.3e-96", "0", "0", "1", "0"],
            id="tiny-spread",
        ),
        pytest.param(
            ["1.7976931348623157e308", "1.7976931348623157e308", "1e308", "1", "2", "3"],
            id="max-double",
        ),
    ],
)
def test_d19_values_near_the_float_limits(project, capsys, values):
    rows = "".join(f"{'AABBBA'[i]},{v},{i}\n" for i, v in enumerate(values))
    built = accepted(project, capsys, files={"data/d.csv": "g,v,w\n" + rows})
    import numpy as np

    x = np.array([float(v) for v in values])
    overall = next(r for r in built.ds["summaries"] if r["measure"] == "v" and r["group"] is None)
    assert overall["n"] == 6
    assert overall["max"] == x.max() and overall["min"] == x.min()
    # Reference: the type-7 median in exact rational arithmetic (numpy's own interpolation
    # overflows to -inf when the two middle values are -1e308 and 1e308).
    from fractions import Fraction

    ordered = sorted(Fraction(v) for v in x.tolist())
    exact = (ordered[2] + ordered[3]) / 2
    assert overall["median"] == pytest.approx(float(exact), rel=1e-15, abs=1e-300)


def test_d20_huge_text_cell_in_a_measure(project, capsys):
    data = "g,v,w\nA," + "x" * 1_000_000 + ",2\nA,1,3\nA,2,2\nB,2,4\nB,3,5\n"
    built = accepted(project, capsys, files={"data/d.csv": data})
    assert built.ds["source"]["unparsed"]["v"] == {"count": 1, "examples": ["x" * 40]}
    assert "1 value in 'v' is not a number" in built.stdout
    assert len(built.page) < 500_000


def test_d21_huge_group_label_does_not_bloat_the_site(project, capsys):
    # A label over MAX_LABEL (200) characters is refused in one sentence that names the file
    # and the limit; the previous site stays as it was, so nothing can bloat.
    data = "g,v,w\n" + "Q" * 1_000_000 + ",1,2\nA,1,3\nA,2,2\nB,2,4\nB,3,5\n"
    message = refused(project, capsys, files={"data/d.csv": data})
    assert message.startswith("data/d.csv") and "group label" in message
    assert "at most 200" in message
    assert len(message) < 500  # the label itself is not repeated in full


def test_d22_group_codes_with_leading_zeros_stay_distinct(project, capsys):
    data = "g,v,w\n01,1,2\n001,2,3\n1,3,4\n01,4,5\n1,5,6\n001,6,7\n"
    built = accepted(project, capsys, files={"data/d.csv": data})
    # Three distinct labels in natural order: equal as numbers, so ordered by their text.
    assert built.ds["groups"] == ["001", "01", "1"]
    assert [r["n"] for r in built.ds["summaries"] if r["measure"] == "v"] == [2, 2, 2, 6]
    assert ">001<" in built.page and ">01<" in built.page


def test_d23_windows_line_endings(project, capsys):
    built = accepted(project, capsys, files={"data/d.csv": GOOD_CSV.replace("\n", "\r\n")})
    assert built.ds["groups"] == ["A", "B"]
    assert [r["n"] for r in built.ds["summaries"] if r["measure"] == "w"] == [3, 3, 6]


def test_d24_unsupported_file_type(project, capsys):
    project.write(files={"data/d.sav": b"$FL2"})
    message = refused(project, capsys, manifest=with_dataset(file='"data/d.sav"'))
    assert message.startswith("data/d.sav: files ending '.sav' are not supported")


def test_d24b_broken_spreadsheet(project, capsys):
    project.write(files={"data/d.xlsx": b"PK\x03\x04"})
    message = refused(project, capsys, manifest=with_dataset(file='"data/d.xlsx"'))
    assert message.startswith("data/d.xlsx: not a readable spreadsheet")


def test_d25_broken_parquet(project, capsys):
    project.write(files={"data/d.parquet": b"not parquet at all"})
    message = refused(project, capsys, manifest=with_dataset(file='"data/d.parquet"'))
    assert message.startswith("data/d.parquet: not a readable Parquet file")


def test_d26_broken_json_lines(project, capsys):
    project.write(files={"data/d.jsonl": '{"g": "A", "v": 1, "w": 2}\n{"g": "B", v: 2}\n'})
    message = refused(project, capsys, manifest=with_dataset(file='"data/d.jsonl"'))
    assert message.startswith("data/d.jsonl: not valid JSON Lines")


def test_d27_formula_like_labels_are_quoted_in_csv_downloads(project, capsys):
    data = 'g,v,w\n"=HYPERLINK(""http://x"")",1,2\n"=HYPERLINK(""http://x"")",2,3\n@SUM,3,4\n@SUM,4,6\n'
    built = accepted(project, capsys, files={"data/d.csv": data})
    tables = sorted((built.out / "tables").glob("lines-sum-*.csv"))
    assert tables
    text = tables[0].read_text(encoding="utf-8-sig")
    assert "\n'@SUM," in text and "'=HYPERLINK" in text
    assert "\n=HYPERLINK" not in text and "\n@SUM" not in text


@pytest.mark.slow
def test_d28_ten_thousand_groups_are_summarised(tmp_path):
    # 10,000 groups of 2 rows: the page must summarise (not list 10,000 rows per table, not
    # compare 50 million pairs) and say so. The timeout only guards against a hang (about 20 s
    # measured on a loaded 2-core machine); speed figures belong in benchmarks/.
    rows = "".join(f"G{i % 10_000},{(i * 7919) % 1000 / 10},{i % 13}\n" for i in range(20_000))
    root = write_project(tmp_path / "p", MANIFEST, {"data/d.csv": "g,v,w\n" + rows})
    out = tmp_path / "site"
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    started = time.perf_counter()
    try:
        done = subprocess.run(
            [sys.executable, "-m", "sitebuild", "build", str(root), "--out", str(out)],
            capture_output=True,
            text=True,
            timeout=180,
            env=env,
        )
    except subprocess.TimeoutExpired:
        pytest.fail("a build with 10,000 groups took more than 180 s")
    elapsed = time.perf_counter() - started
    print(f"10,000 groups built in {elapsed:.1f} s")
    assert done.returncode == 0, done.stderr
    page = (out / "lines.html").read_text(encoding="utf-8")
    assert len(page) < 5_000_000
    assert "10,000 groups" in done.stdout and "10,000 groups" in page
    assert len(list(out.rglob("*"))) < 200


# ---------------------------------------------------------------------------------------------
# Round two: types of files, odd paths, big or odd text, failures around the build
# ---------------------------------------------------------------------------------------------


def test_r01_dask_engine_without_dask_names_the_extra(project, capsys, monkeypatch):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(
        importlib.util, "find_spec", lambda name, *a: None if name == "dask" else real(name, *a)
    )
    message = refused(project, capsys, manifest=with_dataset(engine='"dask"'))
    assert "install the dask extra: pip install 'sitebuild[dask]'" in message


@pytest.mark.parametrize("kind", ["fifo", "folder", "device"])
def test_r02_a_data_file_that_is_not_a_regular_file(project, capsys, kind):
    target = project.root / "data" / "d.csv"
    target.unlink()
    if kind == "fifo":
        os.mkfifo(target)
    elif kind == "folder":
        target.mkdir()
    else:
        target.symlink_to("/dev/zero")  # a link out of the project: refused before any read
    message = refused(project, capsys)
    expected = {"fifo": "not a regular file", "folder": "", "device": "outside the project"}
    assert expected[kind] in message and "data/d.csv" in message


@pytest.mark.parametrize("flag", ["--zip", "--single-file"])
@pytest.mark.parametrize("kind", ["fifo", "folder", "device"])
def test_r03_extra_outputs_that_are_not_regular_files(project, capsys, tmp_path, flag, kind):
    target = {"fifo": tmp_path / "pipe", "folder": tmp_path, "device": Path("/dev/null")}[kind]
    if kind == "fifo":
        os.mkfifo(target)
    code = main(["build", str(project.root), "--out", str(project.out), flag, str(target)])
    err = capsys.readouterr().err
    assert code == 2 and ("not a regular file" in err or "folder" in err), err
    assert snapshot(project.out) == project.before


@pytest.mark.parametrize("option", ["--out", "--zip", "--single-file", "project"])
def test_r04_a_nul_in_a_path_is_refused_as_such(project, capsys, option):
    args = ["build", str(project.root), "--out", str(project.out)]
    if option == "project":
        args[1] += "\0x"
    else:
        args += [option, str(project.out.parent / "a\0b")]
    code = main(args)
    err = capsys.readouterr().err
    assert code == 2 and "NUL character" in err and "unexpected" not in err


def test_r05_a_nul_in_a_manifest_path(project, capsys):
    message = refused(project, capsys, manifest=with_dataset(file='"data/d\\u0000.csv"'))
    assert "NUL" in message


def test_r06_twenty_thousand_unknown_order_labels_give_one_warning(project, capsys):
    labels = ", ".join(f'"L{i}"' for i in range(20_000))
    built = accepted(project, capsys, manifest=with_dataset(order=f"[{labels}]"))
    warnings = [w for w in built.ds["source"]["warnings"] if "order names" in w]
    assert len(warnings) == 1 and "20,000 labels" in warnings[0]
    assert built.stdout.count("order names") == 1


def test_r07_escape_sequences_in_names_are_shown_escaped(project, capsys):
    data = "g\x1b[31m,v,w\nA\x1b]0;owned\x07,1,2\nA\x1b]0;owned\x07,2,3\nB,3,4\nB,4,5\n"
    manifest = with_dataset(group='"g\\u001b[31m"', order='["X\\u001b[2J"]')
    built = accepted(project, capsys, manifest=manifest, files={"data/d.csv": data})
    assert "\x1b" not in built.stdout and "\\x1b" in built.stdout
    project.write(files={"data/d.csv": "g,v,w\nA,1,2\n"})
    code = main(["build", str(project.root), "--out", str(project.out), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "\x1b" not in err and "\\x1b" in err


def test_r08_debug_keeps_the_exit_code_of_bad_input(project, capsys):
    project.write(with_site("confidence = 2"))
    code = main(["--debug", "build", str(project.root), "--out", str(project.out)])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" in err and "error: " in err


def test_r09_a_parent_folder_that_cannot_be_written(project, capsys, monkeypatch):
    from sitebuild.site import publish

    real = os.open

    def no_lock(path, flags, *args):
        if str(path).endswith(".lock") and flags & os.O_CREAT:
            raise PermissionError(13, "Permission denied", str(path))
        return real(path, flags, *args)

    monkeypatch.setattr(publish.os, "open", no_lock)
    (project.root / "data/d.csv").write_text(GOOD_CSV + "C,1,1\nC,2,2\n")
    project.before = snapshot(project.out)
    message = refused(project, capsys)
    assert "Permission denied" in message and "lock" in message


def test_r10_watch_survives_a_rebuild_that_fails_unexpectedly(tmp_path):
    from sitebuild.watch import watch

    root = write_project(tmp_path / "p", MANIFEST, {"data/d.csv": GOOD_CSV})
    calls, errors = [], []

    def rebuild(first):
        calls.append(first)
        if len(calls) == 2:
            raise RuntimeError("boom")

    sleeps = []

    def touch(_):
        # A save, then a quiet poll so the watch sees the change settle.
        sleeps.append(1)
        if len(sleeps) % 2:
            (root / "data/d.csv").write_text(GOOD_CSV + f"C,{len(sleeps)},1\n")

    builds = watch(root, rebuild, on_error=errors.append, max_builds=3, sleep=touch)
    assert builds == 3 and len(calls) == 3
    assert len(errors) == 1 and "boom" in str(errors[0])
