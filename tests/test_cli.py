"""The command line: what it prints, how it fails, and that it starts fast."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from sitebuild import cli, pipeline
from sitebuild.scaffold import new_project
from sitebuild.watch import watch

ROOT = Path(__file__).resolve().parents[1]


def run_cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "sitebuild", *args],
        capture_output=True,
        text=True,
        cwd=cwd,
        env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"},
    )


@pytest.fixture(scope="module")
def bundle_cache(tmp_path_factory) -> Path:
    """An empty project cache; the chart script is made once into the user's own cache
    folder, so each CLI build skips making it again."""
    from sitebuild.cache import Cache
    from sitebuild.site.render import chart_bundle

    folder = tmp_path_factory.mktemp("bundle") / ".sitebuild_cache"
    Cache(folder).chart_bundle(chart_bundle)
    folder.mkdir(exist_ok=True)
    return folder


@pytest.fixture
def project(tmp_path, bundle_cache) -> Path:
    import shutil

    root = new_project(tmp_path / "proj").root
    shutil.copytree(bundle_cache, root / ".sitebuild_cache")
    return root


def test_build_prints_sizes_changes_and_progress(project, tmp_path):
    out = run_cli("build", str(project), "--zip", str(tmp_path / "s.zip"))
    assert out.returncode == 0, out.stderr
    assert "Built 3 pages from 1 dataset:" in out.stdout
    assert "What moved since the last build:" in out.stdout
    assert "largest page loaves-by-flour.html" in out.stdout
    assert f"Zip: {tmp_path / 's.zip'} (" in out.stdout
    assert "Loaves by flour: reading data/loaves.csv" in out.stderr  # progress on stderr
    again = run_cli("build", str(project), "--quiet")
    assert again.returncode == 0 and again.stderr == ""
    assert again.stdout.startswith("Nothing changed") and again.stdout.count("\n") == 1


def test_json_report_parses(project):
    out = run_cli("build", str(project), "--json", "--quiet")
    report = json.loads(out.stdout)
    assert report["written"] is True and report["datasets"][0]["name"] == "Loaves by flour"
    assert report["reused"] == []


@pytest.mark.parametrize(
    "args, words",
    [
        (("build", "no/such/folder"), "does not exist"),
        (("check", "no/such/folder"), "does not exist"),
        (("build", "{p}", "--zip", "{p}/site/x.zip"), "inside the site folder"),
    ],
)
def test_errors_are_one_line_on_stderr_with_non_zero_exit(project, args, words):
    project_args = [a.replace("{p}", str(project)) for a in args]
    out = run_cli(*project_args)
    assert out.returncode != 0
    assert out.stdout == ""
    assert out.stderr.startswith("error: ") and out.stderr.count("\n") == 1
    assert words in out.stderr and "Traceback" not in out.stderr


def test_new_refuses_to_overwrite_a_manifest_in_one_line(project):
    out = run_cli("new", str(project))
    assert out.returncode == 2 and out.stderr.count("\n") == 1 and "never overwrites" in out.stderr


def test_unexpected_failure_is_one_line_unless_debug(monkeypatch, capsys, project):
    def broken(*args, **kwargs):
        raise ValueError("something inside broke")

    monkeypatch.setattr("sitebuild.build", broken)
    assert cli.main(["build", str(project), "--quiet"]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "ValueError: something inside broke" in err
    with pytest.raises(ValueError):
        cli.main(["build", str(project), "--debug"])


def test_help_and_check_start_without_heavy_imports():
    code = (
        "import sys; from sitebuild import cli; cli.parser().format_help(); "
        "import sitebuild.pipeline, sitebuild.site.publish; "
        "print([m for m in ('pandas', 'scipy', 'altair', 'vl_convert', 'jinja2') if m in sys.modules])"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        env={"PYTHONPATH": str(ROOT)},
        check=True,
    )
    assert out.stdout.strip() == "[]"


def test_watch_rebuilds_after_a_change_and_ctrl_c_exits_zero(project, monkeypatch, capsys):
    builds = []
    data = project / "data/loaves.csv"

    def edit_then_wait(seconds):
        if len(builds) == 1 and not getattr(edit_then_wait, "done", False):
            edit_then_wait.done = True
            with open(data, "a", encoding="utf-8") as handle:
                handle.write("L777,rye blend,50,1300,6\n")

    count = watch(project, lambda first: builds.append(first), max_builds=2, sleep=edit_then_wait)
    assert count == 2 and builds == [True, False]

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr("sitebuild.watch.watch", interrupted)
    assert cli.main(["build", str(project), "--watch", "--quiet"]) == 0
    assert "Stopped watching." in capsys.readouterr().err


def test_progress_callback_receives_stage_lines(project):
    lines = []
    pipeline.build(project, progress=lines.append)
    assert any("Loaves by flour: summaries" in line for line in lines)
    assert all(line.startswith("[") for line in lines)
    quiet = []
    pipeline.build(project, progress=quiet.append, quiet=True)
    assert quiet == []
