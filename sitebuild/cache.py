"""A content-addressed store inside the project: dataset results, the chart script, site records.

Each entry is a JSON file named by its key and holding a checksum of its own payload, so a
truncated, edited or foreign file is detected and recomputed, never trusted. Writes go to a
temporary file first and are renamed into place, so two builds never see half an entry.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import tempfile
from functools import lru_cache
from pathlib import Path

from . import __version__


def file_sha256(path: Path) -> str:
    """Return the hex SHA-256 of the file's bytes (the digest results.json records)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


CACHE_DIR = ".sitebuild_cache"
FORMAT = 2
# Site settings that only change how pages look, not any number: excluded from dataset keys.
PRESENTATION_SETTINGS = frozenset({"title", "output", "history"})


def cache_folder(project_root: Path) -> Path:
    """Return the project's cache folder (it may not exist yet)."""
    return project_root / CACHE_DIR


@lru_cache(maxsize=1)
def code_fingerprint() -> str:
    """Return a SHA-256 over the sitebuild package's Python and schema files.

    Any edit to the code changes the fingerprint, so results computed by older code are never
    reused, even when the version number was not raised.
    """
    package = Path(__file__).resolve().parent
    digest = hashlib.sha256()
    for path in sorted(package.rglob("*")):
        if path.suffix not in (".py", ".json") or "__pycache__" in path.parts:
            continue
        digest.update(path.relative_to(package).as_posix().encode("utf-8") + b"\0")
        digest.update(hashlib.sha256(path.read_bytes()).digest())
    return digest.hexdigest()


def canonical(data) -> str:
    """Return JSON text that is the same for equal data: sorted keys, no spaces, no NaN."""
    return json.dumps(
        data, sort_keys=True, allow_nan=False, ensure_ascii=False, separators=(",", ":")
    )


def results_settings(site) -> dict:
    """Return the site settings that can change a dataset's numbers."""
    settings = dataclasses.asdict(site)
    return {k: v for k, v in sorted(settings.items()) if k not in PRESENTATION_SETTINGS}


def dataset_key(file_sha256: str, spec, site) -> str:
    """Return the cache key of one dataset's results: a SHA-256 of everything they depend on."""
    material = {
        "format": FORMAT,
        "file_sha256": file_sha256,
        "section": spec.section(),
        "settings": results_settings(site),
        "tool_version": __version__,
        "code": code_fingerprint(),
    }
    return hashlib.sha256(canonical(material).encode("utf-8")).hexdigest()


def _atomic_write(path: Path, data: bytes) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, temp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(temp, path)
    except BaseException:
        Path(temp).unlink(missing_ok=True)
        raise


class Cache:
    """The project's cache folder; ``enabled=False`` reads nothing (``--fresh``) but still writes."""

    def __init__(self, root: Path, enabled: bool = True):
        self.root = root
        self.enabled = enabled
        self.notices: list[str] = []

    # -- dataset results ------------------------------------------------------------------
    def _entry(self, kind: str, key: str) -> Path:
        return self.root / kind / f"{key}.json"

    def load(self, kind: str, key: str):
        """Return the payload stored under ``key``, or None when absent, corrupt or foreign."""
        found = self.load_checked(kind, key)
        return None if found is None else found[0]

    def load_checked(self, kind: str, key: str):
        """Return (payload, checksum) stored under ``key``, or None when absent, corrupt or
        foreign. An entry is one header line of JSON, then the payload as canonical JSON; the
        checksum is the payload text's SHA-256, checked before the payload is parsed."""
        if not self.enabled:
            return None
        path = self._entry(kind, key)
        try:
            raw = path.read_bytes()
        except FileNotFoundError:
            return None
        except OSError:
            self.notices.append(f"cache entry {path.name} was unreadable; recomputed it")
            return None
        head, newline, body = raw.partition(b"\n")
        try:
            header = json.loads(head) if newline else None
        except ValueError:
            header = None
        if not isinstance(header, dict) or header.get("format") != FORMAT:
            self.notices.append(f"cache entry {path.name} is not ours; recomputed it")
            return None
        checksum = hashlib.sha256(body).hexdigest()
        if header.get("key") != key or header.get("checksum") != checksum:
            self.notices.append(f"cache entry {path.name} failed its checksum; recomputed it")
            return None
        secret = signing_key()
        if secret is None or header.get("signature") != _sign(secret, key, checksum):
            # Written by someone else (a cache handed over with the project folder): a
            # rendered page from it could carry script, so it is never used.
            self.notices.append(
                f"cache entry {path.name} was not written by this user's sitebuild; recomputed it"
            )
            return None
        try:
            payload = json.loads(body.decode("utf-8"))
        except (ValueError, RecursionError):
            self.notices.append(f"cache entry {path.name} was unreadable; recomputed it")
            return None
        if kind in SHAPES and not SHAPES[kind](payload):
            self.notices.append(f"cache entry {path.name} has the wrong shape; recomputed it")
            return None
        return payload, checksum

    def store(self, kind: str, key: str, payload) -> str:
        """Keep ``payload`` (JSON-ready) under ``key`` and return its checksum; a cache that
        cannot be written is skipped with a notice."""
        body = canonical(payload).encode("utf-8")
        checksum = hashlib.sha256(body).hexdigest()
        secret = signing_key()
        signature = _sign(secret, key, checksum) if secret is not None else None
        header = canonical(
            {"format": FORMAT, "key": key, "checksum": checksum, "signature": signature}
        )
        try:
            _atomic_write(self._entry(kind, key), header.encode("utf-8") + b"\n" + body)
        except OSError as exc:
            self.notices.append(
                f"could not write the cache in {self.root} ({exc.strerror}); "
                "the next build will recompute"
            )
        return checksum

    # -- the chart script -----------------------------------------------------------------
    def chart_bundle(self, make) -> bytes:
        """Return the chart script: the copy kept in the user's own cache folder when its
        vl-convert version and checksum match, else ``make()`` (and keep that copy).

        The script runs in every reader's browser, so it is never taken from the project
        folder (whose cache anyone who hands over the folder can edit, checksum and all): only
        from a folder of the user running the build that no one else can write to.
        """
        path = user_cache_folder() / f"vega-bundle-{vl_convert_version()}.js"
        if not self.enabled:
            return make()
        return kept_script(path, path.with_suffix(".sha256"), make)


def kept_script(path: Path, check: Path, make) -> bytes:
    """Return the script kept at ``path`` when it, its folder and its ``check`` (a SHA-256 of
    its bytes) are private to this user and agree, else ``make()``, kept there for next time.

    A copy that is a link, belongs to someone else, can be written by others or fails its
    checksum is never returned: the script runs in every reader's browser.
    """
    folder = path.parent
    if _private(folder) and _private(path) and _private(check):
        try:
            data = path.read_bytes()
            if hashlib.sha256(data).hexdigest() == check.read_text(encoding="ascii").strip():
                return data
        except (OSError, ValueError):
            pass
    data = make()
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        if _private(folder):
            _atomic_write(path, data)
            _atomic_write(check, hashlib.sha256(data).hexdigest().encode("ascii") + b"\n")
    except OSError:
        pass  # the script is made again next time; nothing depends on the kept copy
    return data


def _results_shape(payload) -> bool:
    from .conforms import conforms

    return conforms(payload, "dataset") and isinstance(payload.get("slug"), str)


def _pages_shape(payload) -> bool:
    """A dataset page and its CSV tables: one ``NAME.html`` and ``tables/*.csv``, all text."""
    if not isinstance(payload, dict) or not all(
        isinstance(k, str) and isinstance(v, str) for k, v in payload.items()
    ):
        return False
    pages = [k for k in payload if k.endswith(".html") and "/" not in k]
    tables = [k for k in payload if k.startswith("tables/") and k.endswith(".csv")]
    return len(pages) == 1 and len(pages) + len(tables) == len(payload)


def _site_shape(payload) -> bool:
    return (
        isinstance(payload, dict)
        and isinstance(payload.get("site_key"), str)
        and isinstance(payload.get("files"), dict)
        and isinstance(payload.get("sizes"), dict)
        and all(isinstance(v, int) for v in payload["sizes"].values())
    )


# What each kind of entry must look like; anything else is a miss (forged or from a bug).
SHAPES = {"results": _results_shape, "pages": _pages_shape, "sites": _site_shape}


def _sign(secret: bytes, key: str, checksum: str) -> str:
    import hmac

    return hmac.new(secret, f"{key}\0{checksum}".encode("ascii"), "sha256").hexdigest()


def signing_key() -> bytes | None:
    """Return this user's secret for signing cache entries (made on first use, kept in the
    user's own cache folder, readable only by them), or None when it cannot be kept.

    A project's cache travels with the project folder; only entries signed with this key were
    written by this user's builds, so a forged entry with a valid checksum is still a miss.
    """
    folder = user_cache_folder()
    path = folder / "signing-key"
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        if not _private(folder):
            return None
        try:
            fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
        except FileNotFoundError:
            import secrets

            fd = os.open(
                path, os.O_CREAT | os.O_EXCL | os.O_WRONLY | getattr(os, "O_NOFOLLOW", 0), 0o600
            )
            with os.fdopen(fd, "wb") as handle:
                handle.write(secrets.token_bytes(32))
            fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
        with os.fdopen(fd, "rb") as handle:
            if not _private(path):
                return None
            secret = handle.read(64)
    except OSError:
        return None
    return secret if len(secret) == 32 else None


def user_cache_folder() -> Path:
    """Return the user's own sitebuild cache folder (outside every project):
    ``$SITEBUILD_USER_CACHE``, else ``$XDG_CACHE_HOME/sitebuild``, else ``~/.cache/sitebuild``."""
    if os.environ.get("SITEBUILD_USER_CACHE"):
        return Path(os.environ["SITEBUILD_USER_CACHE"])
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "sitebuild"


def _private(path: Path) -> bool:
    """Return True when ``path`` is no link, belongs to this user and only they can write it
    (also True for a file not there yet, whose folder was checked)."""
    try:
        info = os.lstat(path)
    except FileNotFoundError:
        return True
    except OSError:
        return False
    import stat

    if stat.S_ISLNK(info.st_mode):
        return False
    if hasattr(os, "geteuid") and info.st_uid != os.geteuid():
        return False
    return not info.st_mode & 0o022


def vl_convert_version() -> str:
    """Return the installed vl-convert-python version without importing it (that is slow)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("vl-convert-python")
    except PackageNotFoundError:
        return "unknown"
