"""Which engine reads a dataset: in memory (:mod:`sitebuild.ingest`), streamed in batches
(:mod:`sitebuild.streaming`) or as Dask tasks (:mod:`sitebuild.engines.dask`).

All three hand the sections a :class:`sitebuild.ingest.Table`; the streamed ones add
``Table.exact`` (merged moments, co-moments and exact order statistics of every row) and
keep a bounded seeded sample of rows for what needs the values themselves.
"""

from __future__ import annotations

from ..ingest import Table, engine_for
from ..ingest import read_table as read_in_memory
from ..manifest import DatasetSpec


def read_table(spec: DatasetSpec, rng=None, sha256: str | None = None) -> Table:
    """Return the dataset as a :class:`~sitebuild.ingest.Table`, read by its engine.

    With the "stream" or "dask" engine (see :func:`sitebuild.ingest.engine_for`) the Table's
    rows are a seeded sample of at most a fixed number per group, drawn with ``rng`` (default:
    seeded from the dataset's name), and ``Table.exact`` holds exact summaries of every row.
    ``sha256``, when the caller has already hashed the file (or folder, see
    :func:`sitebuild.streaming.source.source_sha256`), saves hashing it a second time.
    """
    engine = engine_for(spec)
    if engine == "stream":
        from ..streaming.engine import read_streamed

        return read_streamed(spec, rng, sha256=sha256)
    if engine == "dask":
        from .dask import read_with_dask

        return read_with_dask(spec, rng, sha256=sha256)
    return read_in_memory(spec, rng, sha256=sha256)
