"""The ``engine = "dask"`` reader: the streaming engine's passes as Dask tasks, one per part.

Each pass maps every part (a Parquet file of a folder, or the single file) to a task that
folds that part's batches into a small state; states are merged pairwise as further tasks
(a tree), so only the final, bounded state reaches this process. The merge is the same code
the one-machine streaming engine uses, so both give the same numbers.

Which cluster: the Dask client already running in this process if there is one; else the
scheduler at ``DASK_SCHEDULER_ADDRESS`` (or Dask's ``scheduler-address`` setting); else a
local cluster of worker processes started for the build and closed after it.
"""

from __future__ import annotations

import os
import weakref

from ..errors import SitebuildError
from ..streaming.engine import read_streamed
from ..streaming.source import Source, batches


def run_part(source: Source, task, part: int):
    """Return the state of one part after one pass (runs on a worker)."""
    state = task.start(part)
    for batch in batches(source, part):
        state = task.add(state, batch, part)
    return state


def merge_states(task, a, b):
    """Return two parts' states merged (runs on a worker)."""
    return task.merge(a, b)


class DaskRunner:
    """Runs passes on a Dask cluster; starts (and later closes) a local one if none is given."""

    def __init__(self, workers: int | None = None):
        self.workers = workers
        self._client = None
        self._owned: list = []

    def client(self):
        """Return the Dask client passes run on, connecting or starting a cluster once."""
        if self._client is not None:
            return self._client
        try:
            import dask  # noqa: F401
            import distributed
        except ImportError:
            raise SitebuildError(
                'engine = "dask" needs the optional Dask packages; install them with '
                "pip install 'sitebuild[dask]', or use engine = \"stream\"."
            ) from None
        try:
            self._client = distributed.get_client()
            return self._client
        except ValueError:
            pass
        import dask

        address = os.environ.get("DASK_SCHEDULER_ADDRESS") or dask.config.get(
            "scheduler-address", None
        )
        if address:
            try:
                self._client = distributed.Client(address, timeout="20s")
            except OSError as exc:
                raise SitebuildError(
                    f"the Dask scheduler at {address} did not answer ({exc}); start it, fix "
                    "DASK_SCHEDULER_ADDRESS, or unset it to use a local cluster."
                ) from None
            self._owned.append(self._client)
        else:
            workers = self.workers or max(1, min(4, os.cpu_count() or 1))
            cluster = distributed.LocalCluster(
                n_workers=workers,
                threads_per_worker=1,
                processes=True,
                dashboard_address=None,
                silence_logs=40,
            )
            self._client = distributed.Client(cluster)
            self._owned += [self._client, cluster]
        # Close what we started when the runner goes away (end of the build or interpreter).
        weakref.finalize(self, _close, list(self._owned))
        return self._client

    def __call__(self, source: Source, task):
        from dask import delayed

        client = self.client()
        states = [delayed(run_part)(source, task, part) for part in range(len(source.parts))]
        while len(states) > 1:
            merged = [
                delayed(merge_states)(task, a, b)
                for a, b in zip(states[::2], states[1::2], strict=False)
            ]
            if len(states) % 2:
                merged.append(states[-1])
            states = merged
        return client.compute(states[0]).result()


def _close(resources) -> None:
    for resource in resources:
        try:
            resource.close()
        except Exception:  # closing at exit: nothing useful to do with a failure
            pass


def read_with_dask(spec, rng=None, runner: DaskRunner | None = None, sha256: str | None = None):
    """Return the dataset as a Table (a bounded sample plus exact summaries), read by Dask."""
    return read_streamed(spec, rng, runner=runner or DaskRunner(), engine="dask", sha256=sha256)
