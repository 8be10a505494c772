"""Write a site safely: only into a folder that is ours, complete or not at all, one build at a time."""

from __future__ import annotations

import os
import shutil
import socket
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import BuildLocked, SitebuildError
from ..manifest import Manifest
from .render import MARKER


@dataclass(frozen=True)
class Published:
    """Where the site went and anything the reader of the CLI output should know."""

    out: Path
    notices: list[str] = field(default_factory=list)


def _is_relative_to(path: Path, parent: Path) -> bool:
    try:
        path.relative_to(parent)
    except ValueError:
        return False
    return True


def check_target(out: Path, manifest: Manifest) -> None:
    """Refuse an output folder that could hold anything but a previous site of ours."""
    out = out.resolve()
    root = manifest.root.resolve()
    if out == root or _is_relative_to(root, out):
        raise SitebuildError(
            f"{out}: the output folder would contain the project folder itself; choose a "
            "separate folder with --out."
        )
    inputs = [manifest.path] + [d.path for d in manifest.datasets]
    inputs += [d.notes_path for d in manifest.datasets if d.notes_path]
    for item in inputs:
        if _is_relative_to(item.resolve(), out):
            raise SitebuildError(
                f"{out}: the output folder holds the input file {item.name}; choose a folder "
                "that holds no data or notes."
            )
    if out.exists() and not out.is_dir():
        raise SitebuildError(f"{out}: exists and is a file, not a folder; choose another --out.")
    if out.is_dir() and any(out.iterdir()) and not (out / MARKER).is_file():
        raise SitebuildError(
            f"{out}: the folder is not empty and was not written by sitebuild; choose an empty "
            "or new folder with --out (nothing was changed)."
        )


class Lock:
    """An exclusive lock file beside the output folder, naming the build that holds it."""

    def __init__(self, out: Path):
        self.path = out.parent / f".{out.name}.lock"
        self.held = False

    def __enter__(self):
        text = f"pid {os.getpid()} on {socket.gethostname()} since {time.strftime('%H:%M:%S')}\n"
        for _ in range(2):
            try:
                fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                if self._stale():
                    self.path.unlink(missing_ok=True)
                    continue
                holder = self.path.read_text(errors="replace").strip() or "another build"
                raise BuildLocked(
                    f"{self.path}: another build is writing this site ({holder}); wait for it to "
                    "finish, or delete the lock file if that build is gone."
                ) from None
            with os.fdopen(fd, "w") as handle:
                handle.write(text)
            self.held = True
            return self
        raise BuildLocked(f"{self.path}: could not take the build lock; try again.")

    def _stale(self) -> bool:
        """A lock is stale when its build ran on this host and that process no longer exists."""
        try:
            words = self.path.read_text().split()
            pid, host = int(words[1]), words[3]
        except (OSError, ValueError, IndexError):
            return False
        if host != socket.gethostname():
            return False
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return True
        except PermissionError:
            return False
        return False

    def __exit__(self, *exc):
        if self.held:
            self.path.unlink(missing_ok=True)
            self.held = False


def write_tree(files: dict[str, bytes], folder: Path) -> None:
    """Write ``files`` (relative path → bytes) under ``folder``, creating sub-folders."""
    for name, data in sorted(files.items()):
        target = folder / name
        target.parent.mkdir(parents=True, exist_ok=True)
        with open(target, "wb") as handle:
            handle.write(data)


def publish(files: dict[str, bytes], out: Path, manifest: Manifest) -> Published:
    """Write the site into a new folder beside ``out``, then swap it in; the old site stays
    whole until the new one is complete."""
    check_target(out, manifest)
    notices: list[str] = []
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SitebuildError(
            f"{out.parent}: cannot create the folder ({exc.strerror}); choose another --out."
        ) from None
    with Lock(out):
        try:
            staging = Path(tempfile.mkdtemp(prefix=f".{out.name}.new-", dir=out.parent))
            # mkdtemp makes a private folder; readers of a shared site need the usual rights.
            umask = os.umask(0)
            os.umask(umask)
            staging.chmod(0o777 & ~umask)
        except OSError as exc:
            raise SitebuildError(
                f"{out.parent}: cannot write here ({exc.strerror}); check permissions or choose "
                "another --out (the previous site is unchanged)."
            ) from None
        old = None
        try:
            try:
                write_tree(files, staging)
            except OSError as exc:
                raise SitebuildError(
                    f"{out}: writing the new site failed ({exc.strerror}); the previous site is "
                    "unchanged — free space or fix permissions and build again."
                ) from None
            if out.exists():
                old = out.parent / f".{out.name}.old-{os.getpid()}"
                os.replace(out, old)
            os.replace(staging, out)
        except BaseException:
            if old is not None and not out.exists():
                os.replace(old, out)
                old = None
            shutil.rmtree(staging, ignore_errors=True)
            raise
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    return Published(out=out, notices=notices)
