"""Compiled page layouts, kept per user so a first build does not compile them again.

Turning the packaged layouts into Python code costs about half a second per process, the same
work for every project and build. jinja2 can keep the compiled code (marshalled bytecode) in a
cache; ours lives in the user's own cache folder (see :func:`sitebuild.cache.user_cache_folder`),
one folder per sitebuild version, never in a project folder: compiled code runs when loaded, so
a copy is used only when it and its folder are no links, belong to this user and only they can
write them (the checks of :func:`sitebuild.cache.kept_script`). jinja2 itself rejects a copy
made from other layout text (it checks a hash of the source) or by another Python version.
When the folder cannot be written, the layouts are simply compiled each time.
"""

from __future__ import annotations

import os
from pathlib import Path

import jinja2

from .. import __version__
from ..cache import _atomic_write, _private, user_cache_folder


def code_folder() -> Path:
    """Return where this installation's compiled layouts are kept."""
    return user_cache_folder() / __version__ / "layouts"


class PrivateCodeCache(jinja2.BytecodeCache):
    """A jinja2 bytecode cache in a folder private to this user (see the module text)."""

    def __init__(self, folder: Path | None = None):
        self.folder = folder if folder is not None else code_folder()

    def _path(self, bucket) -> Path:
        return self.folder / f"{bucket.key}.code"

    def load_bytecode(self, bucket) -> None:
        path = self._path(bucket)
        if not (_private(self.folder.parent) and _private(self.folder) and _private(path)):
            return
        try:
            fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
        except OSError:
            return  # not there yet (or unreadable): compiled afresh
        try:
            with os.fdopen(fd, "rb") as handle:
                bucket.load_bytecode(handle)
        except Exception:  # unpickling or unmarshalling a damaged copy can raise anything
            bucket.reset()  # a damaged copy is compiled afresh, never half-loaded

    def dump_bytecode(self, bucket) -> None:
        try:
            self.folder.mkdir(mode=0o700, parents=True, exist_ok=True)
            if _private(self.folder.parent) and _private(self.folder):
                _atomic_write(self._path(bucket), bucket.bytecode_to_string())
        except OSError:
            pass  # compiled again next time; nothing depends on the kept copy
