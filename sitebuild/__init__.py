"""sitebuild: a folder of datasets and a short manifest become an offline static site."""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__", "build", "check"]


def build(project, out=None, **options):
    """Build the project's site and return a :class:`sitebuild.pipeline.BuildReport`."""
    from .pipeline import build as _build

    return _build(project, out=out, **options)


def check(project, out=None):
    """Validate the project's manifest and data; return a report of what a build would do."""
    from .pipeline import check as _check

    return _check(project, out=out)
