"""The chart script (Vega, Vega-Lite and vega-embed as one classic script), kept per user.

The script is the same bytes for a given installed vl-convert-python whatever the project, and
making it costs about 1.5 s, so it is made once per user, sitebuild version and vl-convert
version, and every build reuses it, ``--fresh`` builds and new projects included. It lives in
the user's cache folder (``$SITEBUILD_USER_CACHE``, else ``$XDG_CACHE_HOME/sitebuild``, else
``~/.cache/sitebuild``), never in a project folder, beside a SHA-256 of its bytes: a copy that
does not match its checksum (truncated, edited), is a link or can be written by others is made
again, never shipped. When the folder cannot be written the script is simply made each time.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from .. import __version__
from ..cache import kept_script, user_cache_folder, vl_convert_version

USER_CACHE_ENV = "SITEBUILD_USER_CACHE"  # read by cache.user_cache_folder


def script_path() -> Path:
    """Return where this installation's chart script is kept."""
    return user_cache_folder() / __version__ / f"vega-bundle-{vl_convert_version()}.js"


def chart_script(make: Callable[[], bytes]) -> bytes:
    """Return the chart script: the user's checked, private copy when there is one, else
    ``make()`` (then stored for the next build)."""
    path = script_path()
    return kept_script(path, path.with_name(path.name + ".sha256"), make)
