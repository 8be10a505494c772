"""The chart script (Vega, Vega-Lite and vega-embed as one classic script), kept per user.

The script is the same bytes for a given installed vl-convert-python whatever the project, and
making it costs about 1.5 s, so it is made once per user, sitebuild version and vl-convert
version, and every build reuses it, ``--fresh`` builds and new projects included. It lives in
the user's cache folder (``$SITEBUILD_USER_CACHE``, else ``$XDG_CACHE_HOME/sitebuild``, else
``~/.cache/sitebuild``), never in a project folder, beside a SHA-256 of its bytes: a copy that
does not match its checksum (truncated, edited) is made again, never shipped. When the folder
cannot be written the script is simply made each time.
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Callable
from pathlib import Path

from .. import __version__
from ..cache import _atomic_write, vl_convert_version

USER_CACHE_ENV = "SITEBUILD_USER_CACHE"


def user_cache_root() -> Path | None:
    """Return the user's sitebuild cache folder (it may not exist yet), or None if there is no
    home folder to put it in."""
    configured = os.environ.get(USER_CACHE_ENV)
    if configured:
        return Path(configured).expanduser()
    base = os.environ.get("XDG_CACHE_HOME")
    if base:
        return Path(base) / "sitebuild"
    try:
        return Path.home() / ".cache" / "sitebuild"
    except (RuntimeError, KeyError):  # no HOME and no password entry
        return None


def script_path() -> Path | None:
    """Return where this installation's chart script is kept (None without a cache folder)."""
    root = user_cache_root()
    if root is None:
        return None
    return root / __version__ / f"vega-bundle-{vl_convert_version()}.js"


def chart_script(make: Callable[[], bytes]) -> bytes:
    """Return the chart script: the user's checked copy when there is one, else ``make()``
    (then stored for the next build)."""
    path = script_path()
    if path is None:
        return make()
    check = path.with_name(path.name + ".sha256")
    try:
        data = path.read_bytes()
        if hashlib.sha256(data).hexdigest() == check.read_text(encoding="ascii").strip():
            return data
    except (OSError, UnicodeDecodeError):
        pass
    data = make()
    try:
        _atomic_write(path, data)
        _atomic_write(check, hashlib.sha256(data).hexdigest().encode("ascii") + b"\n")
    except OSError:
        pass  # a read-only or full disk: the script is made again next time
    return data
