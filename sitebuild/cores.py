"""Share the machine's cores between every part of the analysis that can run side by side.

The analysis has parallel work at two levels: whole sections (comparisons beside the
correlations and smooths), and, inside them, the measures of one section. With a thread
pool at each level a 2-core machine ran up to five busy threads at once, each holding its
large arrays, while a section that had finished left its core idle until the slowest one
ended.

:func:`share` runs a list of jobs with one rule for the whole process: at most
:func:`cores` threads compute at once. The calling thread always works on its own jobs; a
helper thread joins it only once it holds one of the ``cores() − 1`` spare slots, and gives
its slot back as soon as no job is left; a caller whose own jobs are done lends its core
while it waits for the helpers' jobs. So a section that finishes early hands its core to the
measures still waiting in another section, and nested calls cannot deadlock: a thread never
waits for a slot while it holds one.

The results are the same whatever runs where: callers give each job its own seeded
generator (or none), and :func:`share` returns the results in the order of the jobs.
"""

from __future__ import annotations

import os
import threading
from collections.abc import Callable, Iterable
from typing import TypeVar

T = TypeVar("T")
R = TypeVar("R")

# More threads than this buys little on these workloads (sorting and searching large arrays,
# bound by memory bandwidth) and each holds its own copies of large columns.
MAX_THREADS = 4


def cores() -> int:
    """Return how many threads may compute at once: the cores this process may use (its CPU
    affinity where the system reports one), at most :data:`MAX_THREADS`."""
    try:
        usable = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        usable = os.cpu_count() or 1
    return max(1, min(MAX_THREADS, usable))


_SPARE = threading.Semaphore(cores() - 1)


def share(work: Callable[[T], R], items: Iterable[T], parallel: bool = True) -> list[R]:
    """Return ``[work(item) for item in items]``, in that order, computed by this thread and
    by helpers that join whenever a core is free (never more than :func:`cores` threads
    computing in the whole process). ``parallel=False`` runs everything here, in order.

    The first error raised by a job (in job order) is raised here, once every job taken has
    finished.

    Examples
    --------
    >>> share(lambda v: v * v, [1, 2, 3])
    [1, 4, 9]
    """
    items = list(items)
    if not parallel or len(items) < 2 or cores() < 2:
        return [work(item) for item in items]
    results: list = [None] * len(items)
    errors: dict[int, BaseException] = {}
    lock = threading.Condition()
    state = {"next": 0, "done": 0}

    def take() -> int | None:
        with lock:
            index = state["next"]
            if index >= len(items):
                return None
            state["next"] = index + 1
            return index

    def drain() -> None:
        while (index := take()) is not None:
            try:
                results[index] = work(items[index])
            except BaseException as exc:  # noqa: BLE001 - raised again in the caller
                errors[index] = exc
            finally:
                with lock:
                    state["done"] += 1
                    lock.notify_all()

    def helper() -> None:
        with _SPARE:  # wait for a free core
            drain()

    for _ in range(min(len(items), cores()) - 1):
        threading.Thread(target=helper, name="sitebuild-helper", daemon=True).start()
    drain()
    with lock:
        finished = state["done"] == len(items)
    if not finished:
        # Lend this thread's core while helpers finish the jobs they took: work waiting
        # elsewhere (another section's measures) may use it meanwhile.
        _SPARE.release()
        try:
            with lock:
                lock.wait_for(lambda: state["done"] == len(items))
        finally:
            _SPARE.acquire()
    if errors:
        raise errors[min(errors)]
    return results
