"""Round two of the hostile and careless inputs: a project folder never runs code, output paths
never escape, downloads never carry formulas, and odd bytes are read as they are meant.

Each test names the promise it holds (see README "What the tool trusts").
"""

from __future__ import annotations

import hashlib
import os
import re
from pathlib import Path

import pytest

import sitebuild
from sitebuild.cli import main
from sitebuild.site.render import packaged_layouts

from conftest import snapshot, write_project

MANIFEST = """
[site]
title = "Round two"

[[datasets]]
name = "Lines"
file = "data/d.csv"
group = "g"
measures = ["v", "w"]
"""
GOOD_CSV = "g,v,w\nA,1,2\nA,2,3\nA,3,5\nB,3,4\nB,4,5\nB,6,6\n"


@pytest.fixture
def proj(tmp_path) -> Path:
    return write_project(tmp_path / "p", MANIFEST, {"data/d.csv": GOOD_CSV})


def run(args: list[str], capsys) -> tuple[int, str, str]:
    code = main(args)
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    return code, captured.out, captured.err


# -- 1. project files never run code ----------------------------------------------------------


def test_a_project_template_is_never_rendered(proj, tmp_path):
    proof = tmp_path / "ran"
    payload = (
        f"{{{{ self.__init__.__globals__.__builtins__.__import__('os').system('touch {proof}') }}}}"
    )
    for name in ("dataset.html", "base.html", "index.html", "macros.html"):
        write_project(proj, MANIFEST, {f"layouts/{name}": payload})
    report = sitebuild.build(proj, out=tmp_path / "site", quiet=True)
    assert not proof.exists(), "a project template ran a shell command"
    assert any("ignored layouts/base.html" in n for n in report.notices), report.notices
    page = (tmp_path / "site" / "lines.html").read_text(encoding="utf-8")
    assert "__globals__" not in page


def test_a_project_script_never_ships(proj, tmp_path):
    write_project(proj, MANIFEST, {"layouts/site.js": "window.__pwned = 1;"})
    sitebuild.build(proj, out=tmp_path / "site", quiet=True)
    shipped = (tmp_path / "site" / "assets" / "site.js").read_bytes()
    assert shipped == (packaged_layouts() / "site.js").read_bytes()
    single = tmp_path / "one.html"
    sitebuild.build(proj, out=tmp_path / "site", quiet=True, single_file=single)
    assert b"__pwned" not in single.read_bytes()


def test_a_forged_chart_script_in_the_project_cache_never_ships(proj, tmp_path, monkeypatch):
    from sitebuild.cache import vl_convert_version

    forged = b"window.__pwned = 1;"
    assets = proj / ".sitebuild_cache" / "assets"
    assets.mkdir(parents=True)
    js = assets / f"vega-bundle-{vl_convert_version()}.js"
    js.write_bytes(forged)
    js.with_suffix(".sha256").write_text(hashlib.sha256(forged).hexdigest() + "\n")
    sitebuild.build(proj, out=tmp_path / "site", quiet=True)
    assert b"__pwned" not in (tmp_path / "site" / "assets" / "vega-bundle.js").read_bytes()


def test_a_chart_script_kept_where_others_can_write_is_not_trusted(proj, tmp_path, monkeypatch):
    from sitebuild.cache import Cache, vl_convert_version

    user = tmp_path / "user"
    monkeypatch.setenv("SITEBUILD_USER_CACHE", str(user))
    Cache(tmp_path / "c").chart_bundle(lambda: b"good")
    js = user / f"vega-bundle-{vl_convert_version()}.js"
    js.write_bytes(b"evil")
    js.with_suffix(".sha256").write_text(hashlib.sha256(b"evil").hexdigest() + "\n")
    os.chmod(js, 0o666)
    assert Cache(tmp_path / "c").chart_bundle(lambda: b"made again") == b"made again"


def test_the_project_style_sheet_is_used_but_not_through_a_link_out(proj, tmp_path):
    write_project(proj, MANIFEST, {"layouts/style.css": "body { color: teal; }\n"})
    sitebuild.build(proj, out=tmp_path / "site", quiet=True)
    assert (tmp_path / "site/assets/style.css").read_text() == "body { color: teal; }\n"
    secret = tmp_path / "secret.txt"
    secret.write_text("password=hunter2")
    (proj / "layouts/style.css").unlink()
    (proj / "layouts/style.css").symlink_to(secret)
    sitebuild.build(proj, out=tmp_path / "site", quiet=True)
    assert b"hunter2" not in snapshot(tmp_path / "site")["assets/style.css"]


# -- 2. output paths never escape -------------------------------------------------------------


def other_site(tmp_path) -> tuple[Path, dict]:
    """Another project's site, with its history, outside the project under test."""
    other = write_project(tmp_path / "other", MANIFEST, {"data/d.csv": GOOD_CSV})
    out = tmp_path / "other-site"
    sitebuild.build(other, out=out, quiet=True)
    return out, snapshot(out)


@pytest.mark.parametrize("how", ["relative", "absolute"])
def test_manifest_output_cannot_replace_another_projects_site(proj, tmp_path, capsys, how):
    out, before = other_site(tmp_path)
    where = "../other-site" if how == "relative" else str(out)
    (proj / "manifest.toml").write_text(
        MANIFEST.replace('title = "Round two"', f'title = "Round two"\noutput = "{where}"')
    )
    code, _, err = run(["build", str(proj), "--quiet"], capsys)
    assert code == 2 and "'output'" in err and "outside the project" in err, err
    assert snapshot(out) == before
    code, _, err = run(["check", str(proj)], capsys)
    assert code == 2 and "'output'" in err


def test_manifest_output_outside_may_be_new_then_rebuilt_by_its_own_project(proj, tmp_path):
    (proj / "manifest.toml").write_text(
        MANIFEST.replace('title = "Round two"', 'title = "Round two"\noutput = "../mine"')
    )
    sitebuild.build(proj, quiet=True)
    (proj / "data/d.csv").write_text(GOOD_CSV + "C,1,1\nC,2,2\n")
    report = sitebuild.build(proj, quiet=True)
    assert report.written and (tmp_path / "mine" / "index.html").is_file()
    # The site's marker names the project by a digest, never by its path.
    marker = (tmp_path / "mine" / ".sitebuild-site").read_text()
    assert "project " in marker and str(tmp_path) not in marker


@pytest.mark.parametrize("flag", ["--zip", "--single-file"])
def test_extra_outputs_never_overwrite_a_project_file(proj, tmp_path, capsys, flag):
    write_project(proj, MANIFEST, {"layouts/site.js": "keep me", "layouts/style.css": "b{}"})
    for victim in ("layouts/site.js", "layouts/style.css", "manifest.toml", "data/d.csv"):
        before = (proj / victim).read_bytes()
        code, _, err = run(
            ["build", str(proj), "--out", str(tmp_path / "s"), flag, str(proj / victim)], capsys
        )
        assert code == 2 and "input of the project" in err, err
        assert (proj / victim).read_bytes() == before


# -- 3. CSV downloads: RFC 4180, no formula survives -------------------------------------------

HOSTILE_LABELS = [
    "x\r=1+1",  # a bare CR inside a label must not split the row
    "\t=2+2",
    "\r=3+3",
    " =4+4",
    "\uff1d5+5",  # full-width equals sign
    "\uff0bA1",  # full-width plus
    "\uff20SUM(A1)",  # full-width at sign
    "-A1",
    "-20 °C",  # a reading with a unit: a spreadsheet shows it as text, keep it as is
]


def test_csv_downloads_are_rfc4180_and_guard_every_formula(tmp_path):
    import csv
    import io

    rows = ["g,v,w"]
    for i, label in enumerate(HOSTILE_LABELS):
        quoted = '"' + label.replace('"', '""') + '"'
        rows += [f"{quoted},{i + 1},{i % 3}", f"{quoted},{i + 2},{i % 4}"]
    data = ("\n".join(rows) + "\n").encode("utf-8")
    root = write_project(tmp_path / "p", MANIFEST, {"data/d.csv": data})
    sitebuild.build(root, out=tmp_path / "site", quiet=True)
    table = next((tmp_path / "site" / "tables").glob("lines-sum-*.csv"))
    raw = table.read_bytes().decode("utf-8-sig")
    # RFC 4180: every record ends in CRLF; a CR or LF inside a field is quoted.
    assert raw.endswith("\r\n") and "\n" not in raw.replace("\r\n", "")
    records = list(csv.reader(io.StringIO(raw, newline="")))
    width = len(records[0])
    assert all(len(r) == width for r in records), "a row was split"
    labels = {r[records[0].index(next(h for h in records[0] if h))] for r in records[1:]}
    for label in HOSTILE_LABELS:
        if label in ("-20 °C", "x\r=1+1"):  # kept whole: the CR is inside a quoted field
            assert label in labels, (label, labels)
        else:  # labels are trimmed of surrounding white space when read, then guarded
            assert "'" + label.strip() in labels, (label, labels)
    # No cell a spreadsheet would evaluate: each one, after the guard, starts with a quote.
    for record in records[1:]:
        for cell in record:
            folded = __import__("unicodedata").normalize("NFKC", cell).lstrip()
            assert not folded.startswith(("=", "@")), cell


# -- 4. line ends, quotes and headers read as meant --------------------------------------------

ONE_MEASURE = MANIFEST.replace('measures = ["v", "w"]', 'measures = ["v"]\nengine = "{engine}"')
ENGINES = ["memory", "stream"]


def one_line_error(args: list[str], capsys) -> str:
    """Run a build that must be refused; return its one error sentence."""
    code, out, err = run(args, capsys)
    lines = err.strip().splitlines()
    assert code == 2, err
    assert len(lines) == 1 and lines[0].startswith("error: ") and lines[0].endswith("."), err
    assert "unexpected failure" not in err
    return lines[0]


def engine_project(tmp_path, engine: str, data: bytes | str, manifest: str = ONE_MEASURE) -> Path:
    return write_project(
        tmp_path / f"p-{engine}", manifest.replace("{engine}", engine), {"data/d.csv": data}
    )


@pytest.mark.parametrize("engine", ENGINES)
def test_an_inch_mark_does_not_hide_a_long_row(tmp_path, capsys, engine):
    # '5"' is an unquoted field holding a quote: data, not the start of a quoted field. The long
    # row after it must still be refused, not shift its values into the wrong column.
    data = 'g,v,w\nA,5",2\nA,2,3\nA,3,5\nB,3,4,9\nB,4,5\nB,6,6\n'
    root = engine_project(tmp_path, engine, data)
    message = one_line_error(["build", str(root), "--out", str(tmp_path / "s"), "--quiet"], capsys)
    assert "more fields than the header" in message
    if engine == "memory":
        assert "line 5" in message
    assert not (tmp_path / "s").exists()


@pytest.mark.parametrize("engine", ENGINES)
def test_cr_lf_and_crlf_files_read_alike(tmp_path, engine):
    lines = ["g,v,w", 'A,1,"2 x"', "A,2,3", "A,3,5", "B,3,4", "B,4,5", "B,6,6"]
    means = []
    for end in ("\n", "\r", "\r\n"):
        root = engine_project(tmp_path / repr(end), engine, end.join(lines) + end)
        report = sitebuild.build(root, out=tmp_path / repr(end) / "s", quiet=True)
        assert report.datasets[0].rows_read == 6, (end, report.datasets[0])
        results = (tmp_path / repr(end) / "s" / "results.json").read_text()
        means.append(results.count('"mean"'))
    assert means[0] == means[1] == means[2] > 0


@pytest.mark.parametrize("engine", ENGINES)
def test_no_rows_from_a_body_is_refused_never_an_empty_site(tmp_path, capsys, engine, monkeypatch):
    # Whatever makes a reader see no rows in lines that are there (a line end it does not
    # know), the build stops: an empty site must never replace the previous one.
    root = engine_project(tmp_path, engine, GOOD_CSV)
    out = tmp_path / "s"
    sitebuild.build(root, out=out, quiet=True)
    before = snapshot(out)
    (root / "data/d.csv").write_text(GOOD_CSV + "C,1,2\n")
    if engine == "stream":
        from sitebuild.streaming import source

        monkeypatch.setattr(source, "csv_chunks", lambda *a, **k: iter(()))
    else:
        import pandas as pd

        real = pd.read_csv
        monkeypatch.setattr(pd, "read_csv", lambda *a, **k: real(*a, **k).iloc[:0])
    message = one_line_error(["build", str(root), "--out", str(out), "--quiet"], capsys)
    assert "gave no rows" in message
    assert snapshot(out) == before


@pytest.mark.parametrize("engine", ENGINES)
def test_a_header_splits_only_at_cr_or_lf(tmp_path, engine):
    # Latin-1 0x85 (a Windows-1252 '…') is U+0085, a line end to str.splitlines; so are
    # U+2028 and a form feed. In a CSV header they are part of a column name.
    for name, data in {
        "nel": "g,v,caf\x85,w\nA,1,2,3\nA,2,2,3\nB,3,2,3\nB,4,2,3\n".encode("latin-1"),
        "ls": "g,v,a\u2028b,w\nA,1,2,3\nA,2,2,3\nB,3,2,3\nB,4,2,3\n".encode(),
        "ff": b"g,v,a\x0cb,w\nA,1,2,3\nA,2,2,3\nB,3,2,3\nB,4,2,3\n",
    }.items():
        manifest = ONE_MEASURE.replace('["v"]', '["v", "w"]')
        root = engine_project(tmp_path / name, engine, data, manifest)
        report = sitebuild.build(root, out=tmp_path / name / "s", quiet=True)
        assert report.datasets[0].rows_read == 4, name


@pytest.mark.parametrize("engine", ENGINES)
def test_a_header_longer_than_64_kb(tmp_path, engine):
    wide = ",".join(f"column number {i:06d}" for i in range(4000))  # about 88 KB
    rows = "".join(f"{'AB'[i % 2]},{i}," + ",".join("0" * 4000) + "\n" for i in range(6))
    data = f"g,v,{wide}\n" + rows.replace("," + ",".join("0" * 4000), "," + ",".join(["0"] * 4000))
    root = engine_project(tmp_path, engine, data)
    report = sitebuild.build(root, out=tmp_path / "s", quiet=True)
    assert report.datasets[0].rows_read == 6


def test_a_million_columns_header_names_the_missing_column_briefly(tmp_path, capsys):
    header = ",".join(f"c{i}" for i in range(1_000_000))
    root = engine_project(tmp_path, "memory", f"g,{header}\nA,1\n")
    message = one_line_error(["check", str(root)], capsys)
    assert "column 'v'" in message and "999,961 more" in message
    assert len(message) < 1000


# -- 5. group values that are not plain text ---------------------------------------------------


def test_json_lines_group_labels_come_from_the_values_own_text(tmp_path):
    import json

    values = [True, 1, 1.0, "x"]
    lines = [json.dumps({"g": values[i % 4], "v": i, "w": i % 3}) for i in range(16)]
    manifest = MANIFEST.replace("data/d.csv", "data/d.jsonl")
    root = write_project(tmp_path / "p", manifest, {"data/d.jsonl": "\n".join(lines) + "\n"})
    report = sitebuild.build(root, out=tmp_path / "s", quiet=True)
    assert report.datasets[0].groups == 4
    results = json.loads((tmp_path / "s" / "results.json").read_text())
    groups = {r["group"] for r in results["datasets"][0]["summaries"] if r["group"] is not None}
    assert groups == {"true", "1", "1.0", "x"}


@pytest.mark.parametrize("value", [{"a": 1}, [1, 2]])
def test_json_lines_objects_or_lists_as_groups_are_refused(tmp_path, capsys, value):
    import json

    lines = [json.dumps({"g": "A" if i else value, "v": i, "w": 1}) for i in range(6)]
    manifest = MANIFEST.replace("data/d.csv", "data/d.jsonl")
    root = write_project(tmp_path / "p", manifest, {"data/d.jsonl": "\n".join(lines) + "\n"})
    message = one_line_error(["build", str(root), "--out", str(tmp_path / "s"), "--quiet"], capsys)
    assert "column 'g' holds" in message and "line 1" in message


def _parquet_group(path: Path, group) -> None:
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = len(group)
    table = pa.table(
        {"g": group, "v": pa.array([float(i) for i in range(n)]), "w": pa.array([1.0] * n)}
    )
    pq.write_table(table, path)


@pytest.mark.parametrize("engine", ENGINES)
@pytest.mark.parametrize(
    "kind",
    ["list", "struct", "binary-not-utf8"],
)
def test_parquet_group_columns_without_label_text_are_refused(tmp_path, capsys, engine, kind):
    import pyarrow as pa

    group = {
        "list": pa.array([[1], [2]] * 4),
        "struct": pa.array([{"a": 1}, {"a": 2}] * 4),
        "binary-not-utf8": pa.array([b"\xff\xfe", b"ok"] * 4, pa.binary()),
    }[kind]
    manifest = ONE_MEASURE.replace("data/d.csv", "data/d.parquet").replace("{engine}", engine)
    root = write_project(tmp_path / "p", manifest, {})
    (root / "data").mkdir()
    _parquet_group(root / "data/d.parquet", group)
    message = one_line_error(["build", str(root), "--out", str(tmp_path / "s"), "--quiet"], capsys)
    assert "column 'g'" in message and "group" in message


@pytest.mark.parametrize("engine", ENGINES)
def test_parquet_utf8_binary_groups_read_as_text(tmp_path, engine):
    import pyarrow as pa

    manifest = ONE_MEASURE.replace("data/d.csv", "data/d.parquet").replace("{engine}", engine)
    root = write_project(tmp_path / "p", manifest, {})
    (root / "data").mkdir()
    _parquet_group(root / "data/d.parquet", pa.array([b"Fr\xc3\xbch", b"Nacht"] * 4, pa.binary()))
    sitebuild.build(root, out=tmp_path / "s", quiet=True)
    assert "Früh" in (tmp_path / "s" / "results.json").read_text(encoding="utf-8")


# -- 6. the cache and the previous results ----------------------------------------------------


def test_a_file_saved_while_it_is_read_never_stores_numbers_under_the_old_hash(
    proj, tmp_path, monkeypatch
):
    import json

    import sitebuild.engines as engines

    real = engines.read_in_memory
    calls = []

    def read_after_a_save(spec, *args, **kwargs):
        calls.append(1)
        if len(calls) == 1:  # someone saves the file between the hash and the read
            (proj / "data/d.csv").write_text(GOOD_CSV + "C,100,1\nC,101,2\n")
        return real(spec, *args, **kwargs)

    monkeypatch.setattr(engines, "read_in_memory", read_after_a_save)
    sitebuild.build(proj, out=tmp_path / "s", quiet=True)
    results = json.loads((tmp_path / "s" / "results.json").read_text())
    source = results["datasets"][0]["source"]
    assert source["sha256"] == hashlib.sha256((proj / "data/d.csv").read_bytes()).hexdigest()
    assert source["rows_read"] == 8 and len(calls) == 2


@pytest.mark.parametrize("signed", [False, True])
def test_forged_cache_entries_are_misses(proj, tmp_path, signed):
    import json

    from sitebuild import cache

    first = sitebuild.build(proj, out=tmp_path / "s", quiet=True)
    assert first.written
    entries = sorted((proj / ".sitebuild_cache").rglob("*.json"))
    assert {e.parent.name for e in entries} == {"pages", "results", "sites"}
    for entry in entries:
        head, _, _ = entry.read_bytes().partition(b"\n")
        header = json.loads(head)
        bodies = [b"[1, 2, 3]", b'{"name": "Lines"}', b'{"lines.html": 5}']
        if not signed:  # only an entry this user's builds wrote is trusted as a page
            bodies.append(b'{"lines.html": "<script>x</script>"}')
        for body in bodies:
            # A valid checksum; unsigned (handed over with the folder) or signed (as if a bug
            # of ours wrote it), the wrong shape either way.
            checksum = hashlib.sha256(body).hexdigest()
            signature = cache._sign(cache.signing_key(), header["key"], checksum) if signed else "0"
            forged = {**header, "checksum": checksum, "signature": signature}
            entry.write_bytes(json.dumps(forged).encode() + b"\n" + body)
            for record in (proj / ".sitebuild_cache" / "sites").glob("*.json"):
                if record != entry:
                    record.unlink()  # so the pages are rendered (and their entries read)
            (tmp_path / "s" / "index.html").write_text("edited")
            report = sitebuild.build(proj, out=tmp_path / "s", quiet=True)
            assert any(entry.name in n and "recomputed" in n for n in report.notices), (
                entry.parent.name,
                report.notices,
            )
            assert b"<script>x" not in (tmp_path / "s" / "lines.html").read_bytes()


@pytest.mark.parametrize(
    "damage",
    [
        "[" * 100_000 + "]" * 100_000,
        '{"datasets": [1, 2], "changes": 3, "history": "x"}',
        '{"datasets": [{"name": 5}]}',
        '{"datasets": []}',
    ],
    ids=["deeply-nested", "wrong-types", "missing-keys", "empty"],
)
def test_a_damaged_previous_results_file_means_no_previous_build(proj, tmp_path, capsys, damage):
    out = tmp_path / "s"
    sitebuild.build(proj, out=out, quiet=True)
    (out / "results.json").write_text(damage)
    for fresh in ([], ["--fresh"]):
        (proj / "data/d.csv").write_text(GOOD_CSV + f"C,{len(fresh)},1\nC,2,2\n")
        code, stdout, err = run(["build", str(proj), "--out", str(out), *fresh], capsys)
        assert code == 0, err
        if damage != '{"datasets": []}':
            assert "could not be read" in stdout or "could not be read" in err
        (out / "results.json").write_text(damage)


# -- 8. notes -----------------------------------------------------------------------------------


def test_note_links_go_only_to_the_web_mail_or_the_same_page():
    from sitebuild.site.render import sanitise_notes

    html = sanitise_notes(
        "[a](//host/share) [b](\\\\\\\\host\\\\share) [c](file:///etc/passwd) [d](other.html) "
        "[e](https://example.org/) [f](mailto:team@example.org) [g](#method) [h](/\\\\host)"
    )
    kept = re.findall(r'href="([^"]*)"', html)
    assert kept == ["https://example.org/", "mailto:team@example.org", "#method"]
    assert html.count("<a ") == 8  # the text of a dropped link stays


def test_notes_nested_deeper_than_the_markdown_library_recurses_still_render():
    from sitebuild.site.render import sanitise_notes

    deep_lists = "\n".join("  " * i + "- item" for i in range(300))
    deep_quotes = "> " * 400 + "quoted"
    for text in (deep_lists, deep_quotes):
        assert "item" in sanitise_notes(text) or "quoted" in sanitise_notes(text)


@pytest.mark.parametrize("unit", ["[a](", "[", "![a](", "[a][", "*a", "<a", "_a"])
def test_pathological_notes_render_without_hanging(unit):
    # '[a](' repeated over 80 KB took 70 s and doubling it quadrupled the time. The bound is a
    # guard against a hang on a loaded machine; the figures are in the report of the change.
    import time

    from sitebuild.site.render import sanitise_notes

    text = unit * (100_000 // len(unit))
    started = time.perf_counter()
    html = sanitise_notes(text)
    assert time.perf_counter() - started < 20
    assert "<p>" in html


def test_a_note_larger_than_the_cap_is_refused(proj, tmp_path, capsys):
    manifest = MANIFEST + 'notes = "notes.md"\n'
    write_project(proj, manifest, {"notes.md": "word " * 120_000})
    message = one_line_error(["build", str(proj), "--out", str(tmp_path / "s"), "--quiet"], capsys)
    assert "notes.md" in message and "at most 512 KB" in message
