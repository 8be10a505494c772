"""The automatic engine choice: Parquet files stay in memory while they fit this machine."""

from __future__ import annotations

from sitebuild import ingest

GB = 1 << 30


def fake_memory(monkeypatch, total_bytes: int) -> None:
    pages = {"SC_PAGE_SIZE": 4096, "SC_PHYS_PAGES": total_bytes // 4096}
    monkeypatch.setattr(ingest.os, "sysconf", lambda name: pages[name])


def test_ten_million_rows_of_the_benchmark_shape_stay_in_memory_on_a_24_gb_machine(monkeypatch):
    # The target machine; 6 columns = 4 measures, x and the group.
    fake_memory(monkeypatch, 24 * GB)
    assert ingest.memory_row_limit(6) >= 10_000_000
    # ... within half the memory at the measured bytes per cell
    assert ingest.memory_row_limit(6) * 6 * ingest.BYTES_PER_CELL <= 12 * GB


def test_smaller_machines_and_wider_files_stream_sooner(monkeypatch):
    fake_memory(monkeypatch, 4 * GB)
    assert ingest.memory_row_limit(6) < 5_000_000
    assert ingest.memory_row_limit(30) < ingest.memory_row_limit(6)


def test_unreadable_memory_size_falls_back_to_a_fixed_limit(monkeypatch):
    def fail(name):
        raise ValueError(name)

    monkeypatch.setattr(ingest.os, "sysconf", fail)
    assert ingest.memory_row_limit(6) == ingest.FALLBACK_ROWS


def test_engine_for_counts_the_columns_it_will_read(tmp_path, monkeypatch):
    import pyarrow as pa
    import pyarrow.parquet as pq

    from sitebuild.manifest import DatasetSpec

    path = tmp_path / "d.parquet"
    pq.write_table(
        pa.table({"g": ["a", "b", "a"], "m": [1.0, 2.0, 3.0], "x": [1.0, 2.0, 3.0]}), path
    )
    spec = DatasetSpec(name="d", file="d.parquet", path=path, group="g", measures=("m",), x="x")
    seen = []

    def limit(columns):
        seen.append(columns)
        return 2  # fewer than the footer's 3 rows

    monkeypatch.setattr(ingest, "memory_row_limit", limit)
    assert ingest.engine_for(spec) == "stream"
    assert seen == [3]  # the measure, x and the group
