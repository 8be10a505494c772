"""Round two of the hostile and careless inputs: a project folder never runs code, output paths
never escape, downloads never carry formulas, and odd bytes are read as they are meant.

Each test names the promise it holds (see README "What the tool trusts").
"""

from __future__ import annotations

import hashlib
import os
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
        else:
            assert "'" + label in labels, (label, labels)
    # No cell a spreadsheet would evaluate: each one, after the guard, starts with a quote.
    for record in records[1:]:
        for cell in record:
            folded = __import__("unicodedata").normalize("NFKC", cell).lstrip()
            assert not folded.startswith(("=", "@")), cell
