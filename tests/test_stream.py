"""The streaming engine gives the in-memory engine's numbers from batches of rows.

References: numpy (two-pass mean/variance, sort, percentile) and scipy.stats (skew,
kurtosis, pearsonr, normaltest) on the same data; the in-memory summaries themselves are
checked against scipy/statsmodels and published data in the other test files.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from sitebuild.engines import read_table
from sitebuild.ingest import engine_for
from sitebuild.manifest import DatasetSpec, SiteSettings
from sitebuild.results import clean
from sitebuild.sections import summaries
from sitebuild.streaming import engine, source
from sitebuild.streaming.pieces import CoMoments, Extremes, Moments, Sample

MOMENT_KEYS = ("mean", "sd", "se", "ci_low", "ci_high")
SHAPE_KEYS = ("skewness", "excess_kurtosis")  # dimensionless, order 1: compared absolutely
EXACT_KEYS = (
    "n", "missing", "median", "median_ci_low", "median_ci_high", "median_ci_level", "q1", "q3",
    "iqr", "min", "max", "outliers", "normality_test", "share_within_1sd", "share_within_2sd",
)  # fmt: skip


def _split(rng, n, pieces):
    cuts = np.sort(rng.choice(np.arange(1, n), pieces - 1, replace=False))
    return np.split(np.arange(n), cuts)


@pytest.mark.parametrize("offset", [0.0, 10_000_000.1])
def test_merged_moments_match_numpy_and_scipy(offset):
    # Reference: numpy two-pass variance and scipy.stats skew/kurtosis (bias=True) on all values.
    rng = np.random.default_rng(1)
    n = 50_000
    values = offset + rng.lognormal(0, 0.5, n) * 0.01
    codes = rng.integers(0, 3, n).astype(np.int32)
    merged = Moments.empty(0, pivot=float(values[0]))
    for index in _split(rng, n, 7):
        merged = merged.merge(Moments.of(values[index], codes[index], 3, pivot=merged.pivot))
    for g in range(3):
        v = values[codes == g]
        d = v - v.mean()
        assert merged.n[g] == v.size
        assert merged.means[g] == pytest.approx(v.mean(), rel=1e-15)
        assert merged.m2[g] == pytest.approx((d * d).sum(), rel=1e-12)
        g1 = merged.m3[g] / v.size / (merged.m2[g] / v.size) ** 1.5
        b2 = merged.m4[g] / v.size / (merged.m2[g] / v.size) ** 2
        # scipy's skew centres on a rounded mean, which at a 1e7 offset costs it ~1e-7; shape
        # is shift-invariant and v - v[0] is exact here (Sterbenz), so give scipy that.
        centred = v - v[0]
        assert g1 == pytest.approx(stats.skew(centred), rel=1e-12)
        assert b2 == pytest.approx(stats.kurtosis(centred, fisher=False), rel=1e-12)
        assert merged.low[g] == v.min() and merged.high[g] == v.max()


def test_naive_sum_of_squares_fails_where_merged_moments_do_not():
    # The case the pivot and the pairwise merge exist for: values like 10,000,000.1.
    rng = np.random.default_rng(2)
    values = 10_000_000.1 + rng.normal(0, 0.01, 20_000)
    codes = np.zeros(values.size, dtype=np.int32)
    reference = values.var(ddof=1)  # numpy: two passes
    naive = (np.sum(values**2) - values.sum() ** 2 / values.size) / (values.size - 1)
    assert abs(naive - reference) / reference > 1e-3  # the textbook formula is ruined
    merged = Moments.empty(0, pivot=float(values[0]))
    for index in np.array_split(np.arange(values.size), 13):
        merged = merged.merge(Moments.of(values[index], codes[index], 1, pivot=merged.pivot))
    assert merged.m2[0] / (values.size - 1) == pytest.approx(reference, rel=1e-12)


def test_comoments_give_pearsons_r():
    # Reference: scipy.stats.pearsonr on the rows where both columns are present.
    rng = np.random.default_rng(3)
    n = 30_000
    a = 5e6 + rng.normal(0, 1, n)
    b = 0.3 * a + rng.normal(0, 1, n)
    a[rng.random(n) < 0.05] = np.nan
    codes = rng.integers(0, 2, n).astype(np.int32)
    merged = CoMoments.empty(0)
    for index in _split(rng, n, 5):
        piece = CoMoments.of(a[index], b[index], codes[index], 2, pivots=(5e6, 1.5e6))
        merged = merged.merge(piece)
    for g in range(2):
        keep = (codes == g) & ~np.isnan(a)
        expected = stats.pearsonr(a[keep], b[keep]).statistic
        assert merged.pearson()[g] == pytest.approx(expected, rel=1e-12)


def test_extremes_and_sample_merge_like_one_piece():
    rng = np.random.default_rng(4)
    values = rng.normal(size=5000)
    codes = rng.integers(0, 4, 5000).astype(np.int32)
    merged = Extremes.empty(0, 20)
    sample = Sample.empty(100, ["v"])
    keys = rng.random(5000)
    for index in _split(rng, 5000, 9):
        merged = merged.merge(Extremes.of(values[index], codes[index], 4, 20))
        sample = sample.add(keys[index], codes[index], index.astype(np.int64), {"v": values[index]})
    for g in range(4):
        v = np.sort(values[codes == g])
        np.testing.assert_array_equal(merged.small[g], v[:20])
        np.testing.assert_array_equal(merged.large[g], v[-20:])
        # Bottom-k: the sample is exactly the 100 rows with the smallest keys in the group.
        rows = np.flatnonzero(codes == g)
        want = np.sort(rows[np.argsort(keys[rows])[:100]])
        np.testing.assert_array_equal(np.sort(sample.rows[sample.codes == g]), want)


def test_order_keys_sort_like_floats():
    values = np.array([-np.inf, -1e300, -2.5, -0.0, 0.0, 1e-300, 3.0, 1e300, np.inf])
    keys = engine.order_key(values)
    assert np.all(np.diff(keys.astype(object)) >= 0)
    np.testing.assert_array_equal(engine.from_key(keys), values)


def _spec(path, **kw) -> DatasetSpec:
    base = dict(name="t", file=path.name, path=path, group="g", measures=("v", "w", "k"), x="x")
    base.update(kw)
    return DatasetSpec(**base)


def _frame(n=60_000, seed=5):
    rng = np.random.default_rng(seed)
    g = rng.choice(["Line 10", "Line 2", "b", "few"], n, p=[0.5, 0.3, 0.1999, 0.0001])
    frame = pd.DataFrame(
        {
            "g": g,
            "v": 10_000_000.1 + rng.normal(0, 0.05, n),  # large common offset
            "w": np.exp(rng.normal(0, 1, n)),  # skewed
            "k": rng.integers(-3, 4, n).astype(float),  # many ties, negative and zero
            "x": rng.uniform(0, 1, n),
        }
    )
    frame.loc[rng.random(n) < 0.02, "v"] = np.nan
    frame.loc[rng.random(n) < 0.001, "g"] = None
    return frame


def _compare(memory: dict, streamed: dict) -> None:
    assert memory.keys() - {"computed_from"} == streamed.keys() - {"computed_from"}
    for a, b in zip(memory["summaries"], streamed["summaries"], strict=True):
        assert (a["group"], a["measure"]) == (b["group"], b["measure"])
        for key in EXACT_KEYS:
            assert a[key] == b[key], (a["group"], a["measure"], key)
        for key in MOMENT_KEYS:
            if a[key] is None:
                assert b[key] is None
            else:
                assert b[key] == pytest.approx(a[key], rel=1e-12), (a["group"], key)
        for key in SHAPE_KEYS:
            if a[key] is None:
                assert b[key] is None
            else:
                assert b[key] == pytest.approx(a[key], rel=1e-9, abs=1e-12), (a["group"], key)
        if a["normality_p"] is not None:
            assert b["normality_p"] == pytest.approx(a["normality_p"], rel=1e-9, abs=1e-300)
    for a, b in zip(memory["distributions"], streamed["distributions"], strict=True):
        assert a == b  # same bins, same counts, same boxes and outlier points


@pytest.fixture
def small_passes(monkeypatch):
    # Small batches and buckets force many batches, merges and refinement passes.
    monkeypatch.setattr(source, "BATCH_ROWS", 7_000)
    monkeypatch.setattr(engine, "COUNTER_BUDGET", 1 << 8)
    monkeypatch.setattr(engine, "COLLECT_CAP", 64)
    original = source.batches
    monkeypatch.setattr(engine, "batches", lambda s, p, **kw: original(s, p, 7_000))


@pytest.mark.parametrize("kind", ["csv", "parquet", "folder"])
def test_streamed_summaries_equal_in_memory(tmp_path, kind, small_passes):
    frame = _frame()
    if kind == "csv":
        path = tmp_path / "data.csv"
        frame.to_csv(path, index=False)
        memory_path = path
    elif kind == "parquet":
        path = tmp_path / "data.parquet"
        frame.to_parquet(path)
        memory_path = path
    else:
        path = tmp_path / "parts"
        path.mkdir()
        for i, rows in enumerate(np.array_split(np.arange(len(frame)), 4)):
            frame.iloc[rows].to_parquet(path / f"part-{i}.parquet")
        memory_path = tmp_path / "all.parquet"
        frame.to_parquet(memory_path)
    site = SiteSettings()
    memory_table = read_table(_spec(memory_path))
    stream_spec = _spec(path, engine="stream" if kind != "folder" else "memory")
    assert engine_for(stream_spec) == "stream"  # a folder streams on its own
    streamed_table = read_table(stream_spec)
    assert streamed_table.exact is not None
    assert streamed_table.groups == memory_table.groups
    a = memory_table.report.to_json()
    b = streamed_table.report.to_json()
    for key in ("rows_read", "rows_used", "rows_dropped", "drop_reasons", "missing", "unparsed"):
        assert a[key] == b[key], key
    memory = clean(summaries.compute(memory_table, site, None, {}))
    streamed = clean(summaries.compute(streamed_table, site, None, {}))
    _compare(memory, streamed)
    assert streamed["computed_from"]["engine"] == "stream"
    assert streamed["computed_from"]["passes"] >= 4
    assert memory["computed_from"]["engine"] == "memory"


def test_order_statistics_exact_through_many_refinements(tmp_path, small_passes):
    # Reference: numpy sort. Values spread over many binades, with ties and both zeros.
    rng = np.random.default_rng(6)
    n = 40_000
    v = np.concatenate(
        [rng.standard_t(1.5, n // 2) * 1e3, np.round(rng.normal(0, 2, n // 2)), [-0.0, 0.0]]
    )
    frame = pd.DataFrame({"g": "all", "v": v, "w": v, "k": v, "x": v})
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)
    table = read_table(_spec(path, engine="stream"))
    pieces = table.exact.measures(("v",), 0.95)["v"]
    got = pieces.summaries[0]
    ordered = np.sort(v)
    assert got.median == pytest.approx(np.percentile(ordered, 50), abs=0)
    assert got.q1 == np.quantile(ordered, 0.25) and got.q3 == np.quantile(ordered, 0.75)
    assert table.exact.passes > 4  # the small buckets needed several refinements


def test_streamed_text_semantics_match_ingest(tmp_path, small_passes):
    # Decimal commas with ';', missing tokens, unparsed values with examples, short rows,
    # labels kept as exact text and dropped when missing.
    rows = ["g;v;w;k;x"]
    rng = np.random.default_rng(7)
    for i in range(20_000):
        label = ["A", "a", "<b>B</b>", "NA", " n/a "][i % 5]
        value = f"{rng.normal(10, 1):.3f}".replace(".", ",")
        if i % 997 == 0:
            value = "err"
        if i % 1013 == 0:
            value = "-"
        rows.append(f"{label};{value};{i % 7},5;{i % 3};{i}")
    rows.append("A;1,5")  # a short row: the missing fields are missing values
    path = tmp_path / "t.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    memory = read_table(_spec(path))
    streamed = read_table(_spec(path, engine="stream"))
    assert streamed.groups == memory.groups == ("<b>B</b>", "A", "a")
    a, b = memory.report.to_json(), streamed.report.to_json()
    for key in ("rows_read", "rows_used", "rows_dropped", "missing", "unparsed", "delimiter"):
        assert a[key] == b[key], key
    site = SiteSettings()
    _compare(
        clean(summaries.compute(memory, site, None, {})),
        clean(summaries.compute(streamed, site, None, {})),
    )


def test_windows_1252_csv_streams_with_the_same_warning(tmp_path):
    text = "g,v,w,k,x\n" + "".join(
        f"{'Früh' if i % 2 else 'Spät'},{i},{i},{i},{i}\n" for i in range(50)
    )
    path = tmp_path / "t.csv"
    path.write_bytes(text.encode("latin-1"))
    memory = read_table(_spec(path))
    streamed = read_table(_spec(path, engine="stream"))
    assert streamed.groups == memory.groups == ("Früh", "Spät")
    assert streamed.report.encoding == memory.report.encoding == "windows-1252"
    assert streamed.report.warnings == memory.report.warnings


def test_sample_table_is_bounded_and_seeded(tmp_path, monkeypatch):
    monkeypatch.setattr(engine, "SAMPLE_PER_GROUP", 500)
    frame = _frame(n=20_000)
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)
    spec = _spec(path, engine="stream")
    one = read_table(spec, rng=np.random.default_rng(1))
    two = read_table(spec, rng=np.random.default_rng(1))
    other = read_table(spec, rng=np.random.default_rng(2))
    counts = np.bincount(one.codes, minlength=len(one.groups))
    full = frame.dropna(subset=["g"]).groupby("g").size()
    for index, group in enumerate(one.groups):
        assert counts[index] == min(500, full[group])
    np.testing.assert_array_equal(one.values("w"), two.values("w"))
    assert not np.array_equal(one.values("w"), other.values("w"))
    # Every sampled row is a real row of its group.
    for index, group in enumerate(one.groups):
        real = set(frame.loc[frame["g"] == group, "w"])
        assert set(one.by_group("w")[index]) <= real


def test_exact_correlation_from_stream(tmp_path):
    # Reference: scipy.stats.pearsonr per group on all rows.
    frame = _frame(n=20_000)
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)
    table = read_table(_spec(path, engine="stream"))
    r = table.exact.pearson("w", "x")
    for index, group in enumerate(table.groups):
        rows = frame[(frame["g"] == group)]
        if len(rows) < 3:
            continue
        expected = stats.pearsonr(rows["w"], rows["x"]).statistic
        assert r[index] == pytest.approx(expected, rel=1e-10)


def test_streamed_summary_keys_match_schema_shape(tmp_path):
    frame = _frame(n=12_000)
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)
    table = read_table(_spec(path, engine="stream"))
    out = clean(summaries.compute(table, SiteSettings(), None, {}))
    for row in out["summaries"]:
        assert set(row) >= set(summaries.SUMMARY_FIELDS)
        for value in row.values():
            assert not (isinstance(value, float) and not math.isfinite(value))
    assert "sample" in out["computed_from"]["note"]


def test_engine_for_big_files(tmp_path, monkeypatch):
    path = tmp_path / "t.csv"
    path.write_text("g,v\na,1\n")
    spec = DatasetSpec(name="t", file="t.csv", path=path, group="g", measures=("v",))
    assert engine_for(spec) == "memory"
    import sitebuild.ingest as ingest

    monkeypatch.setattr(ingest, "STREAM_BYTES", 4)
    assert engine_for(spec) == "stream"
    assert engine_for(dataclasses.replace(spec, engine="dask")) == "dask"


def test_csv_pieces_never_cut_a_quoted_newline(tmp_path, monkeypatch):
    # Labels with quoted newlines and delimiters; tiny pieces put many cuts near them.
    monkeypatch.setattr(source, "CSV_BLOCK_BYTES", 64)
    lines = ["g,v,w,k,x"]
    for i in range(3000):
        label = ['"two\nlines"', '"a, b"', "plain"][i % 3]
        lines.append(f"{label},{i * 0.5},{i % 11},{i % 3},{i}")
    path = tmp_path / "q.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    pieces = list(source.csv_chunks(str(path), 64))
    assert len(pieces) > 100
    assert all(p.count(b'"') % 2 == 0 for p in pieces)
    memory = read_table(_spec(path))
    streamed = read_table(_spec(path, engine="stream"))
    assert streamed.groups == memory.groups == ("a, b", "plain", "two\nlines")
    assert streamed.report.rows_read == memory.report.rows_read == 3000
    site = SiteSettings()
    _compare(
        clean(summaries.compute(memory, site, None, {})),
        clean(summaries.compute(streamed, site, None, {})),
    )


def test_engine_for_long_parquet_files_and_explicit_memory(tmp_path, monkeypatch):
    import pandas as pd

    import sitebuild.ingest as ingest

    path = tmp_path / "t.parquet"
    pd.DataFrame({"g": ["a", "b", "a"], "v": [1.0, 2.0, 3.0]}).to_parquet(path)
    spec = DatasetSpec(name="t", file="t.parquet", path=path, group="g", measures=("v",))
    assert spec.engine == "auto" and engine_for(spec) == "memory"
    monkeypatch.setattr(ingest, "STREAM_ROWS", 2)  # the footer says 3 rows
    assert engine_for(spec) == "stream"
    assert engine_for(dataclasses.replace(spec, engine="memory")) == "memory"


def test_parts_folded_side_by_side_give_the_numbers_of_one_part_after_another(
    tmp_path, small_passes, monkeypatch
):
    # On several cores the parts of a folder are read and folded in parallel; the merge order
    # is the parts' order, so the sample, every merged moment and every order statistic must
    # be exactly those of reading one part after another.
    frame = _frame()
    path = tmp_path / "parts"
    path.mkdir()
    for i, rows in enumerate(np.array_split(np.arange(len(frame)), 5)):
        frame.iloc[rows].to_parquet(path / f"part-{i}.parquet")
    site = SiteSettings()

    def streamed():
        table = read_table(_spec(path))
        keys = clean(summaries.compute(table, site, None, {}))
        return table, keys

    side_by_side, keys_parallel = streamed()
    monkeypatch.setattr(engine, "cores", lambda: 1)
    one_by_one, keys_serial = streamed()
    assert keys_parallel == keys_serial
    assert side_by_side.groups == one_by_one.groups
    assert np.array_equal(side_by_side.codes, one_by_one.codes)
    for name in ("v", "w", "k", "x"):
        assert np.array_equal(side_by_side.values(name), one_by_one.values(name), equal_nan=True)
        a, b = side_by_side.exact.moments[name], one_by_one.exact.moments[name]
        for field in ("n", "mean", "m2", "low", "high"):
            assert np.array_equal(getattr(a, field), getattr(b, field), equal_nan=True), field
