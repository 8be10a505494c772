"""engine = "dask": the streaming passes as tasks on a two-process local cluster.

Reference: the in-memory engine on the same rows (itself checked against scipy and published
data elsewhere), and scipy.stats.pearsonr for the co-moments.
"""

from __future__ import annotations

import dataclasses

import distributed
import numpy as np
import pandas as pd
import pytest
from scipy import stats

from sitebuild.engines import read_table
from sitebuild.engines.dask import DaskRunner, read_with_dask
from sitebuild.manifest import DatasetSpec, SiteSettings
from sitebuild.results import clean
from sitebuild.sections import summaries

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(
        n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None
    )
    with distributed.Client(cluster) as running:
        yield running
    cluster.close()


def test_dask_on_partitioned_parquet_matches_in_memory(tmp_path, client):
    from test_stream import _compare, _frame

    frame = _frame(n=80_000, seed=11)
    parts = tmp_path / "parts"
    parts.mkdir()
    for i, rows in enumerate(np.array_split(np.arange(len(frame)), 5)):
        frame.iloc[rows].to_parquet(parts / f"part-{i:02d}.parquet")
    whole = tmp_path / "all.parquet"
    frame.to_parquet(whole)
    spec = DatasetSpec(
        name="t", file="parts", path=parts, group="g", measures=("v", "w", "k"), x="x",
        engine="dask",
    )  # fmt: skip
    runner = DaskRunner()
    table = read_with_dask(spec, np.random.default_rng(3), runner=runner)
    assert runner.client() is client  # used the running client, started nothing
    memory = read_table(dataclasses.replace(spec, file="all.parquet", path=whole, engine="memory"))
    assert table.groups == memory.groups
    a, b = memory.report.to_json(), table.report.to_json()
    for key in ("rows_read", "rows_used", "rows_dropped", "missing", "unparsed"):
        assert a[key] == b[key], key
    site = SiteSettings()
    got = clean(summaries.compute(table, site, None, {}))
    _compare(clean(summaries.compute(memory, site, None, {})), got)
    assert got["computed_from"]["engine"] == "dask"
    r = table.exact.pearson("w", "x")
    for index, group in enumerate(table.groups):
        rows = frame[frame["g"] == group]
        if len(rows) >= 3:
            assert r[index] == pytest.approx(stats.pearsonr(rows["w"], rows["x"])[0], rel=1e-10)


def test_dask_sample_is_bounded(tmp_path, client, monkeypatch):
    from test_stream import _frame

    from sitebuild.streaming import engine

    monkeypatch.setattr(engine, "SAMPLE_PER_GROUP", 300)
    frame = _frame(n=10_000, seed=12)
    parts = tmp_path / "parts"
    parts.mkdir()
    for i, rows in enumerate(np.array_split(np.arange(len(frame)), 3)):
        frame.iloc[rows].to_parquet(parts / f"p{i}.parquet")
    spec = DatasetSpec(
        name="t", file="parts", path=parts, group="g", measures=("w",), engine="dask"
    )
    table = read_with_dask(spec, np.random.default_rng(1), runner=DaskRunner())
    counts = np.bincount(table.codes, minlength=len(table.groups))
    full = pd.Series(frame["g"]).value_counts()
    for index, group in enumerate(table.groups):
        assert counts[index] == min(300, full[group])
