"""The memory, stream and Dask engines give the same moment-based numbers on one Parquet file.

The whole results tree of each engine is walked against the in-memory one: every number must
agree to 1e-9 relative, every string, flag and list shape exactly. The only exemptions are the
keys a streamed result itself lists under ``from_sample`` (rank statistics, smooths, scatter
points: what needs rows, computed on the bounded seeded sample); no key list is kept here.

Reference: the in-memory engine, itself checked against scipy, statsmodels, pingouin and NIST
StRD in the other test files.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import pytest

from sitebuild.engines import read_table
from sitebuild.manifest import DatasetSpec, Manifest, SiteSettings
from sitebuild.pipeline import Timer, analyse
from sitebuild.results import clean

pytestmark = pytest.mark.slow

REL = 1e-9
ROWS = 300_000


def _frame(seed: int = 20261201) -> pd.DataFrame:
    """300k rows, 6 groups of unequal size, 3 measures and x, missing values, one skewed."""
    rng = np.random.default_rng(seed)
    groups = np.array([f"line {c}" for c in "ABCDEF"])
    g = rng.choice(6, size=ROWS, p=[0.25, 0.2, 0.2, 0.15, 0.12, 0.08])
    x = rng.uniform(0, 10, ROWS)
    centre = np.array([50.0, 50.4, 49.7, 51.0, 50.1, 48.8])[g]
    spread = np.array([1.0, 1.2, 0.9, 2.0, 1.0, 1.5])[g]
    thickness = centre + 0.2 * x + spread * rng.normal(size=ROWS)
    # A large common offset: exactness must not depend on small values.
    weight = 1e6 + 3.0 * np.sin(x) + 0.5 * g + rng.normal(size=ROWS)
    delay = rng.lognormal(mean=0.3 * g, sigma=1.0, size=ROWS)  # strongly right-skewed
    frame = pd.DataFrame(
        {"line": groups[g], "thickness": thickness, "weight": weight, "delay": delay, "x": x}
    )
    for name, share in (("thickness", 0.03), ("weight", 0.01), ("delay", 0.05), ("x", 0.02)):
        frame.loc[rng.random(ROWS) < share, name] = np.nan
    return frame


# Where the engine itself is named (not numbers about the data).
ENGINE_PATHS = frozenset({"dataset.computed_from", "dataset.settings.engine"})
# p-values from a numerical integral (the studentized range behind Tukey and Games–Howell,
# scipy.stats.studentized_range) carry about 1e-11 absolute error, so a p of 0.0 on one engine
# can be 3e-11 on another from inputs equal to 1e-15; p-values are also compared absolutely.
P_ABS = 1e-10


def _walk(memory, other, path: str) -> list[str]:
    """Return every place where ``other`` differs from ``memory`` (empty when they agree)."""
    if path in ENGINE_PATHS:
        return []
    if isinstance(memory, dict) and isinstance(other, dict):
        skip = set(other.get("from_sample", [])) | {"from_sample"}
        problems = []
        if set(memory) - skip != set(other) - skip:
            problems.append(f"{path}: keys {sorted(set(memory) ^ set(other))}")
        for key in sorted(set(memory) & set(other) - skip):
            problems += _walk(memory[key], other[key], f"{path}.{key}")
        return problems
    if isinstance(memory, list) and isinstance(other, list):
        if len(memory) != len(other):
            return [f"{path}: {len(memory)} items against {len(other)}"]
        problems = []
        for i, (a, b) in enumerate(zip(memory, other, strict=True)):
            problems += _walk(a, b, f"{path}[{i}]")
        return problems
    if isinstance(memory, float) or isinstance(other, float):
        if memory is None or other is None:
            return [f"{path}: {memory!r} against {other!r}"]
        key = path.rsplit(".", 1)[-1]
        absolute = P_ABS if key == "p" or key.endswith("_p") else 0.0
        if not math.isclose(memory, other, rel_tol=REL, abs_tol=absolute):
            return [f"{path}: {memory!r} against {other!r}"]
        return []
    return [] if memory == other else [f"{path}: {memory!r} against {other!r}"]


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("parity")
    path = folder / "lines.parquet"
    _frame().to_parquet(path, row_group_size=40_000)
    spec = DatasetSpec(
        name="lines", file="lines.parquet", path=path, group="line",
        measures=("thickness", "weight", "delay"), x="x",
    )  # fmt: skip
    manifest = Manifest(
        root=folder, path=folder / "manifest.toml", site=SiteSettings(), datasets=(spec,)
    )
    out = {}
    for engine in ("memory", "stream", "dask"):
        if engine == "dask":
            pytest.importorskip("distributed")
        table = read_table(dataclasses.replace(spec, engine=engine))
        out[engine] = clean(analyse(table, manifest, Timer()))
    return out


@pytest.mark.parametrize("engine", ["stream", "dask"])
def test_moment_based_numbers_match_memory_to_1e9(built, engine):
    problems = _walk(built["memory"], built[engine], "dataset")
    assert problems == [], "\n".join(problems[:40])


@pytest.mark.parametrize("engine", ["stream", "dask"])
def test_streamed_results_say_what_used_the_sample(built, engine):
    ds = built[engine]
    assert ds["computed_from"]["engine"] == engine
    assert "Kruskal–Wallis" in ds["computed_from"]["sampled_statistics"]
    # The moment-based parts are exact, so they are not listed as sampled.
    for entry in ds["comparisons"]:
        assert "omnibus" not in entry["from_sample"]
        for pair in entry["pairs"]:
            assert "welch_p" not in pair["from_sample"] and "mw_p" in pair["from_sample"]
    methods = {c["method"]: "from_sample" in c for c in ds["correlations"]}
    assert methods == {"pearson": False, "spearman": True, "kendall": True}
    assert all("from_sample" not in fit for fit in ds["linear_fits"])
    assert all("from_sample" in s for s in ds["smooths"])


def test_the_walk_finds_a_changed_number_and_honours_only_listed_keys(built):
    # The check itself can fail: a number moved by 1e-8 relative, a key dropped.
    memory = built["memory"]
    changed = clean(memory)
    changed["comparisons"][0]["pairs"][0]["welch_t"] *= 1 + 1e-8
    del changed["linear_fits"][0]["slope"]
    problems = _walk(memory, changed, "dataset")
    assert len(problems) == 2
    # Listing a key under from_sample exempts that key only.
    changed["comparisons"][0]["pairs"][0]["from_sample"] = ["welch_t"]
    assert len(_walk(memory, changed, "dataset")) == 1
