"""sitebuild.cores.share: results in order, errors raised, and never more threads computing at
once than the cores it allows, even when shared work shares work again."""

from __future__ import annotations

import threading
import time

import pytest

from sitebuild import cores
from sitebuild.cores import share


class Gauge:
    """Counts the jobs running at this moment and remembers the most ever seen."""

    def __init__(self):
        self.lock = threading.Lock()
        self.now = 0
        self.most = 0

    def __enter__(self):
        with self.lock:
            self.now += 1
            self.most = max(self.most, self.now)

    def __exit__(self, *exc):
        with self.lock:
            self.now -= 1


def test_results_keep_the_order_of_the_jobs():
    out = share(lambda v: (time.sleep(0.01 * (v % 3)), v * v)[1], range(12))
    assert out == [v * v for v in range(12)]


def test_serial_when_asked():
    seen = []
    assert share(lambda v: seen.append(threading.get_ident()) or v, [1, 2, 3], parallel=False) == [
        1,
        2,
        3,
    ]
    assert set(seen) == {threading.get_ident()}


def test_the_first_error_in_job_order_is_raised_after_every_job_taken_has_ended():
    ended = []

    def job(v):
        if v in (3, 5):
            raise ValueError(f"job {v}")
        time.sleep(0.01)
        ended.append(v)
        return v

    with pytest.raises(ValueError, match="job 3"):
        share(job, range(8))
    assert sorted(ended) == [0, 1, 2, 4, 6, 7]


@pytest.mark.skipif(cores.cores() < 2, reason="needs two usable cores")
def test_nested_sharing_never_runs_more_threads_than_cores_and_uses_them():
    gauge = Gauge()

    def leaf(v):
        with gauge:
            time.sleep(0.02)
        return v

    def section(n):
        # A section shares its measures, as comparisons and summaries do.
        return sum(share(leaf, range(n)))

    # Two sections side by side, each sharing its own jobs (as the pipeline does).
    assert share(section, [6, 4, 5]) == [15, 6, 10]
    assert gauge.most == cores.cores()
    assert gauge.now == 0


@pytest.mark.skipif(cores.cores() < 2, reason="needs two usable cores")
def test_a_spare_core_is_handed_on_when_a_section_ends():
    # A short section (0.1 s) beside a long one (8 jobs of 0.05 s): once the short one ends,
    # its core takes the long one's waiting jobs, so the whole takes about 0.25 s, not the
    # 0.4 s of the long section alone on one core.
    def long_section(_):
        return share(lambda v: time.sleep(0.05) or v, range(8))

    began = time.perf_counter()
    share(lambda job: job(None), [long_section, lambda _: time.sleep(0.1)])
    assert time.perf_counter() - began < 0.34
