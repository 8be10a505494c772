"""Write a site safely: only into a folder that is ours, complete or not at all, one build at a time."""

from __future__ import annotations

import errno
import hashlib
import os
import re
import shutil
import socket
import stat
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

from .. import stopping
from ..cache import CACHE_DIR
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


def project_id(manifest: Manifest) -> str:
    """Return the identity a site written outside its project records in its marker file: a
    SHA-256 of the project folder's absolute path (the path itself never enters the site)."""
    return hashlib.sha256(str(manifest.root.resolve()).encode("utf-8")).hexdigest()


def marker_line(manifest: Manifest) -> str:
    """Return the marker file's line naming the project a site belongs to."""
    return f"project {project_id(manifest)}"


def outside_project(out: Path, manifest: Manifest) -> bool:
    """Return True when the output folder lies outside the project folder."""
    return not _is_relative_to(out.resolve(), manifest.root.resolve())


def _site_of_this_project(out: Path, manifest: Manifest) -> bool:
    try:
        text = (out / MARKER).read_text(encoding="utf-8", errors="replace")
    except OSError:
        return False
    return marker_line(manifest) in text.splitlines()


def check_target(out: Path, manifest: Manifest, from_manifest: bool = False) -> None:
    """Refuse an output folder that could hold anything but a previous site of ours.

    ``from_manifest``: the folder comes from the manifest's ``output`` key, which is as
    untrusted as the rest of the project folder. Outside the project it must then be new,
    empty, or a site this very project wrote (its marker names the project), so a manifest
    handed over with ``output = "../elsewhere"`` cannot replace another site.
    """
    out = out.resolve()
    root = manifest.root.resolve()
    if (
        from_manifest
        and outside_project(out, manifest)
        and out.exists()
        and not (out.is_dir() and not any(out.iterdir()))
        and not _site_of_this_project(out, manifest)
    ):
        raise SitebuildError(
            f"{out}: the manifest's output (key 'output' in [site]) lies outside the project "
            "folder and holds something other than a site of this project; choose a folder "
            "inside the project, or name this one with --out if you mean it (nothing was changed)."
        )
    if out == root or _is_relative_to(root, out):
        raise SitebuildError(
            f"{out}: the output folder would contain the project folder itself; choose a "
            "separate folder with --out."
        )
    for item in project_inputs(manifest):
        if _is_relative_to(item.resolve(), out):
            raise SitebuildError(
                f"{out}: the output folder holds the input file {item.name}; choose a folder "
                "that holds no data or notes."
            )
    cache = (root / CACHE_DIR).resolve()
    if out == cache or _is_relative_to(out, cache) or _is_relative_to(cache, out):
        raise SitebuildError(
            f"{out}: the output folder would overlap the build cache {cache}; choose another "
            "folder with --out."
        )
    if out.exists() and not out.is_dir():
        raise SitebuildError(f"{out}: exists and is a file, not a folder; choose another --out.")
    foreign = foreign_files(out)
    if foreign:
        shown = ", ".join(foreign[:5]) + (
            f" and {len(foreign) - 5} more" if len(foreign) > 5 else ""
        )
        raise SitebuildError(
            f"{out}: the site folder holds {shown}, which sitebuild did not write; move "
            f"{'it' if len(foreign) == 1 else 'them'} out of the folder (a rebuild replaces the "
            "folder whole), then build again (nothing was changed)."
        )
    if out.is_dir() and any(out.iterdir()) and not (out / MARKER).is_file():
        raise SitebuildError(
            f"{out}: the folder is not empty and was not written by sitebuild; choose an empty "
            "or new folder with --out (nothing was changed)."
        )


LOCK_TEXT = re.compile(r"pid (\d+) on (\S{1,255}) since (\d\d:\d\d:\d\d)")
_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)


def site_listing(files: dict[str, bytes]) -> bytes:
    """Return the marker's lines listing every file of a site, so the next build can tell a
    file someone else saved in the folder from one of ours (see :func:`foreign_files`)."""
    return "".join(f"file {name}\n" for name in sorted(files) if name != MARKER).encode()


def foreign_files(out: Path) -> list[str]:
    """Return the files and links in a previous site that its marker does not list (saved
    there by someone else; a rebuild would remove them). Empty for a site whose marker has no
    listing (written by an older version) or for a folder that is not a site."""
    try:
        text = (out / MARKER).read_text(encoding="utf-8", errors="replace")
    except OSError:
        return []
    listed = {line[5:] for line in text.splitlines() if line.startswith("file ")}
    if not listed:
        return []
    found = []
    for folder, dirs, names in os.walk(out, followlinks=False):
        base = Path(folder)
        links = [d for d in dirs if (base / d).is_symlink()]
        for name in sorted(names) + links:
            relative = (base / name).relative_to(out).as_posix()
            if relative != MARKER and (relative not in listed or (base / name).is_symlink()):
                found.append(relative)
    return sorted(found)


class Lock:
    """An exclusive lock file beside the output folder, naming the build that holds it.

    Created and read without following links (a lock that is a link is never read through),
    and only its pid, host and time are ever printed.
    """

    def __init__(self, out: Path):
        self.path = out.parent / f".{out.name}.lock"
        self.out = out
        self.held = False
        self.notices: list[str] = []

    def __enter__(self):
        text = f"pid {os.getpid()} on {socket.gethostname()} since {time.strftime('%H:%M:%S')}\n"
        for _ in range(2):
            try:
                fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY | _NOFOLLOW, 0o644)
            except FileExistsError:
                holder = self._holder()
                if holder is not None and self._stale(holder):
                    self.path.unlink(missing_ok=True)
                    continue
                shown = (
                    f"pid {holder[0]} on {holder[1]} since {holder[2]}"
                    if holder is not None
                    else "a lock file sitebuild cannot read"
                )
                raise BuildLocked(
                    f"{self.path}: another build is writing this site ({shown}); wait for it to "
                    "finish, or delete the lock file if that build is gone."
                ) from None
            except OSError as exc:
                raise SitebuildError(
                    f"{self.path}: cannot create the build lock ({exc.strerror}); check "
                    "permissions or choose another --out."
                ) from None
            with os.fdopen(fd, "w") as handle:
                handle.write(text)
            self.held = True
            self.notices += recover_leftovers(self.out)
            return self
        raise BuildLocked(f"{self.path}: could not take the build lock; try again.")

    def _holder(self) -> tuple[int, str, str] | None:
        """Return (pid, host, time) from the lock file, or None when it is not a regular file
        of that form (a link, a FIFO, a folder or anything else is never read)."""
        try:
            fd = os.open(self.path, os.O_RDONLY | _NOFOLLOW | getattr(os, "O_NONBLOCK", 0))
        except OSError:
            return None
        with os.fdopen(fd, "rb") as handle:
            if not stat.S_ISREG(os.fstat(handle.fileno()).st_mode):
                return None
            head = handle.read(300).decode("ascii", errors="replace")
        match = LOCK_TEXT.match(head)
        if not match:
            return None
        return int(match[1]), match[2], match[3]

    def _stale(self, holder: tuple[int, str, str]) -> bool:
        """A lock is stale when its build ran on this host and that process no longer exists."""
        pid, host, _ = holder
        if host != socket.gethostname():
            return False
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return True
        except (PermissionError, OverflowError, ValueError):
            return False
        return False

    def __exit__(self, *exc):
        if self.held:
            self.path.unlink(missing_ok=True)
            self.held = False


def recover_leftovers(out: Path) -> list[str]:
    """Clean up after a build that died between writing and swapping (kill -9, power loss);
    called while holding the lock, so no live build owns what is found. Return notices.

    A set-aside previous site (``.NAME.old-PID``) is put back when the site folder is
    missing, else removed; staging folders (``.NAME.new-*``) are removed.
    """
    notices = []
    try:
        found = sorted(out.parent.iterdir())
    except OSError:
        return notices
    olds = [p for p in found if p.name.startswith(f".{out.name}.old-") and p.is_dir()]
    news = [p for p in found if p.name.startswith(f".{out.name}.new-") and p.is_dir()]
    for old in olds:
        if not out.exists() and not out.is_symlink() and (old / MARKER).is_file():
            os.replace(old, out)
            notices.append(
                f"restored the previous site from {old.name}, left by a build that was stopped "
                "between its two renames"
            )
        else:
            shutil.rmtree(old, ignore_errors=True)
            notices.append(f"removed {old.name}, an older site left by a build that was stopped")
    for new in news:
        shutil.rmtree(new, ignore_errors=True)
        notices.append(f"removed {new.name}, an unfinished site left by a build that was stopped")
    return notices


# Renaming a folder fails with these where the target sits on another device or a network
# share that cannot swap folders; the site is then copied into place file by file instead.
SWAP_ERRORS = frozenset(
    {
        errno.EXDEV,
        errno.EPERM,
        errno.EACCES,
        errno.EBUSY,
        errno.ENOTSUP,
        errno.EINVAL,
        errno.ENOTEMPTY,
    }
)
ZIP_TIME = (1980, 1, 1, 0, 0, 0)  # the earliest time a zip entry can hold: same bytes every build


def write_tree(files: dict[str, bytes], folder: Path) -> None:
    """Write ``files`` (relative path → bytes) under ``folder``, creating sub-folders."""
    for name, data in sorted(files.items()):
        target = folder / name
        target.parent.mkdir(parents=True, exist_ok=True)
        with open(target, "wb") as handle:
            handle.write(data)


def on_disk(out: Path) -> dict[str, str]:
    """Return relative path → SHA-256 of every file under ``out`` (empty when absent)."""
    found = {}
    if not out.is_dir():
        return found
    for path in sorted(out.rglob("*")):
        if path.is_file():
            found[path.relative_to(out).as_posix()] = hashlib.sha256(path.read_bytes()).hexdigest()
    return found


def digests(files: dict[str, bytes]) -> dict[str, str]:
    """Return relative path → SHA-256 of the rendered files."""
    return {name: hashlib.sha256(data).hexdigest() for name, data in sorted(files.items())}


def same_as_disk(files: dict[str, bytes], out: Path) -> bool:
    """Return True when ``out`` holds exactly these files with exactly these bytes."""
    if not out.is_dir():
        return False
    for name, data in files.items():
        try:
            if (out / name).read_bytes() != data:
                return False
        except OSError:
            return False
    present = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    return present == set(files)


def _no_link_on_the_way(out: Path, name: str) -> None:
    """Refuse to write ``out/name`` when the folder or any folder on the way is a link: the
    copy would land outside the site."""
    path = out
    for part in Path(name).parts[:-1]:
        path = path / part
        if path.is_symlink():
            raise SitebuildError(
                f"{path}: is a link inside the site folder; sitebuild never writes through links "
                "— remove it, then build again (the previous site is unchanged)."
            )
    if out.is_symlink() or (out / name).is_symlink():
        raise SitebuildError(
            f"{out / name}: is a link inside the site folder; sitebuild never writes through "
            "links — remove it, then build again (the previous site is unchanged)."
        )


def _copy_into_place(files: dict[str, bytes], staging: Path, out: Path) -> None:
    """Fallback when folders cannot be swapped: every new file is first written beside its old
    self, the old site stays whole meanwhile, then each is renamed over the old one. Links in
    the site folder are never followed; a failure removes every file written so far."""
    out.mkdir(parents=True, exist_ok=True)
    tag = f".new-{os.getpid()}"
    written: list[Path] = []
    made: list[Path] = []
    try:
        for name in sorted(files):
            _no_link_on_the_way(out, name)
            target = out / name
            for parent in reversed(target.relative_to(out).parents[:-1]):
                folder = out / parent
                if not folder.exists():
                    folder.mkdir()
                    made.append(folder)
            temp = target.with_name(target.name + tag)
            temp.unlink(missing_ok=True)  # never write through a link planted at that name
            written.append(temp)  # before the copy: a copy that fails half way is removed too
            shutil.copyfile(staging / name, temp, follow_symlinks=False)
    except BaseException:
        for temp in written:
            temp.unlink(missing_ok=True)
        for folder in reversed(made):
            shutil.rmtree(folder, ignore_errors=True)
        raise
    for name in sorted(files):
        target = out / name
        os.replace(target.with_name(target.name + tag), target)
    keep = set(files)
    for path in sorted(out.rglob("*"), reverse=True):
        relative = path.relative_to(out).as_posix()
        if path.is_symlink():
            continue
        if path.is_file() and relative not in keep:
            path.unlink()
        elif path.is_dir() and not any(path.iterdir()):
            path.rmdir()


def publish(files: dict[str, bytes], out: Path, manifest: Manifest, lock: bool = True) -> Published:
    """Write the site into a new folder beside ``out``, then swap it in; the old site stays
    whole until the new one is complete. ``lock=False`` when the caller holds the lock."""
    check_target(out, manifest)
    notices: list[str] = []
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SitebuildError(
            f"{out.parent}: cannot create the folder ({exc.strerror}); choose another --out."
        ) from None
    with Lock(out) if lock else _no_lock() as held:
        notices += getattr(held, "notices", [])
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
            # Last moment to honour a stop whose KeyboardInterrupt a library swallowed.
            stopping.check()
            try:
                if out.exists():
                    aside = out.parent / f".{out.name}.old-{os.getpid()}"
                    os.replace(out, aside)
                    old = aside
                os.replace(staging, out)
            except OSError as exc:
                if exc.errno not in SWAP_ERRORS:
                    raise
                if old is not None and not out.exists():
                    os.replace(old, out)
                    old = None
                try:
                    _copy_into_place(files, staging, out)
                except OSError as copy_exc:
                    raise SitebuildError(
                        f"{out}: copying the new site into place failed ({copy_exc.strerror}); "
                        "the previous site is unchanged — fix the folder and build again."
                    ) from None
                notices.append(
                    f"the folder could not be swapped in one step ({os.strerror(exc.errno)}), so "
                    "the new files were copied in beside the old ones and then renamed over them "
                    "one by one; a reader at that moment may have seen old and new pages mixed"
                )
        except BaseException:
            if old is not None and not out.exists():
                os.replace(old, out)
                old = None
            shutil.rmtree(staging, ignore_errors=True)
            raise
        shutil.rmtree(staging, ignore_errors=True)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    return Published(out=out, notices=notices)


class _no_lock:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def project_inputs(manifest: Manifest) -> list[Path]:
    """Return the project's files a build may read or a person edits: the manifest, data,
    notes, and everything in its ``layouts/`` folder (never to be written over)."""
    inputs = [manifest.path] + [d.path for d in manifest.datasets]
    inputs += [d.notes_path for d in manifest.datasets if d.notes_path]
    layouts = manifest.root / "layouts"
    if layouts.is_dir():
        inputs += sorted(p for p in layouts.rglob("*") if p.is_file() or p.is_symlink())
    return inputs


def check_extra_path(path: Path, out: Path, manifest: Manifest, what: str) -> Path:
    """Refuse a --zip or --single-file path inside the site, the cache, or on an input file."""
    path = path.expanduser().resolve()
    out = out.resolve()
    flag = "--zip" if what == "zip" else "--single-file"
    if path == out or _is_relative_to(path, out):
        raise SitebuildError(
            f"{path}: the {what} would sit inside the site folder {out}; give {flag} a path "
            "outside it."
        )
    if _is_relative_to(path, (manifest.root / CACHE_DIR).resolve()):
        raise SitebuildError(
            f"{path}: the {what} would sit inside the build cache; give {flag} another path."
        )
    inputs = project_inputs(manifest)
    if any(path == item.resolve() for item in inputs):
        raise SitebuildError(
            f"{path}: that is an input of the project; give {flag} a new file name."
        )
    if path.is_dir():
        raise SitebuildError(
            f"{path}: is a folder; give {flag} a file name such as site.{what == 'zip' and 'zip' or 'html'}."
        )
    refuse_special(path, flag)
    return path


def write_file(path: Path, data: bytes, what: str, published: Path | None = None) -> bool:
    """Write ``data`` to ``path`` atomically; return False when it already held these bytes.

    ``published``: the site folder this build has just published, named in the error when
    the file cannot be written (the site is then new, only this file is missing).
    """
    done = (
        f"; the site was published to {published} and only the {what} is missing"
        if published is not None
        else ""
    )
    refuse_special(path, f"--{'zip' if what == 'zip' else 'single-file'}")
    try:
        if path.read_bytes() == data:
            return False
    except OSError:
        pass
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, temp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise SitebuildError(
            f"{path.parent}: cannot write the {what} here ({exc.strerror}){done}; choose "
            "another path."
        ) from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temp, 0o666 & ~umask)
        os.replace(temp, path)
    except OSError as exc:
        Path(temp).unlink(missing_ok=True)
        raise SitebuildError(
            f"{path}: writing the {what} failed ({exc.strerror}){done}; free space or choose "
            "another path."
        ) from None
    except BaseException:
        Path(temp).unlink(missing_ok=True)
        raise
    return True


def refuse_special(path: Path, what: str) -> None:
    """Refuse a path that exists and is not a regular file (a FIFO, a device, a socket or a
    folder), judged by its type before anything opens it (opening a FIFO would block)."""
    try:
        info = os.stat(path)
    except OSError:
        return
    if stat.S_ISREG(info.st_mode):
        return
    kind = "a folder" if stat.S_ISDIR(info.st_mode) else "not a regular file"
    raise SitebuildError(
        f"{path}: is {kind} (it is given as {what}); give a regular file's path or a new name."
    )


def zip_bytes(files: dict[str, bytes], folder: str) -> bytes:
    """Return a zip of the site under ``folder/``: sorted entries, fixed times and permissions,
    so the same site always gives the same bytes."""
    import io
    import zipfile

    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for name in sorted(files):
            info = zipfile.ZipInfo(f"{folder}/{name}", date_time=ZIP_TIME)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            info.create_system = 3  # Unix, so the permissions above are read as such
            archive.writestr(info, files[name], compress_type=zipfile.ZIP_DEFLATED, compresslevel=6)
    return buffer.getvalue()


def zip_folder_name(path: Path) -> str:
    """Return the folder the zip unpacks into: the zip's own name without '.zip'."""
    stem = path.name[:-4] if path.name.lower().endswith(".zip") else path.name
    return stem or "site"
