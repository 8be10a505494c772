"""Rebuild whenever the manifest, a data file, a note or a project layout changes.

Polls modification time and size once a second: no extra dependency, and it works on network
shares where change notifications do not arrive.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path

from .errors import SitebuildError
from .manifest import MANIFEST_NAME, load_manifest


def watched_files(project: str | Path) -> list[Path]:
    """Return the files a build reads: the manifest, data, notes and the project's style sheet.

    When the manifest cannot be read, only the manifest is watched (fixing it rebuilds).
    """
    root = Path(project)
    if root.is_file():
        root = root.parent
    paths = [root / MANIFEST_NAME]
    try:
        manifest = load_manifest(root)
    except SitebuildError:
        return paths
    for spec in manifest.datasets:
        paths.append(spec.path)
        from .readers.sources import is_pattern, text_parts

        if is_pattern(spec.file) or spec.path.is_dir():
            paths += text_parts(spec)  # each file of a folder or glob dataset
        if spec.notes_path is not None:
            paths.append(spec.notes_path)
    # The one project layout a build reads (templates and scripts are never used).
    paths.append(root / "layouts" / "style.css")
    return paths


def snapshot(paths: list[Path]) -> dict[str, tuple[int, int] | None]:
    """Return path → (mtime in ns, size), None for a file that is missing."""
    state = {}
    for path in paths:
        try:
            info = path.stat()
        except OSError:
            state[str(path)] = None
        else:
            state[str(path)] = (info.st_mtime_ns, info.st_size)
    return state


def watch(
    project: str | Path,
    rebuild: Callable[[bool], None],
    *,
    interval: float = 1.0,
    on_error: Callable[[SitebuildError], None] | None = None,
    max_builds: int | None = None,
    sleep: Callable[[float], None] = time.sleep,
) -> int:
    """Build once, then rebuild on every change until interrupted; return the builds run.

    ``rebuild(first)`` does one build; a SitebuildError is passed to ``on_error`` and the
    watch goes on. A change is acted on once two polls agree, so a file still being written
    is not read half way. Ctrl-C (KeyboardInterrupt) propagates to the caller.
    """
    builds = 0

    def run(first: bool) -> None:
        nonlocal builds
        builds += 1
        try:
            rebuild(first)
        except SitebuildError as error:
            if on_error is None:
                raise
            on_error(error)
        except (KeyboardInterrupt, SystemExit):
            raise
        except Exception as error:  # noqa: BLE001 - a watch outlives one failed rebuild
            if on_error is None:
                raise
            on_error(
                SitebuildError(
                    f"unexpected failure ({type(error).__name__}: {error}); the previous site is "
                    "unchanged — still watching, run a build with --debug to see where"
                )
            )

    state = snapshot(watched_files(project))
    run(True)
    while max_builds is None or builds < max_builds:
        sleep(interval)
        current = snapshot(watched_files(project))
        if current == state:
            continue
        sleep(interval)
        settled = snapshot(watched_files(project))
        if settled != current:
            continue  # still being written; look again next round
        state = settled
        run(False)
    return builds
