"""The one exception type users see: a sentence that names the file, the key or line, and the fix."""

from __future__ import annotations


class SitebuildError(Exception):
    """A problem with the user's input or environment, stated as one plain sentence.

    The CLI prints ``str(error)`` and exits non-zero; no traceback unless ``--debug``.
    """

    exit_code = 2


class BuildLocked(SitebuildError):
    """Another build holds the output folder's lock."""

    exit_code = 3
