"""Print what charts cost a build: the time to make one chart of each main kind as a
Vega-Lite dict, with and without the tests' schema check, and the import time of altair,
which builds no longer import (the check uses its schema; fresh processes).

    PYTHONPATH=. python benchmarks/chart_build.py

Runs, not timed tests: figures depend on the machine and its load (CPU time is printed
beside wall time for that reason).
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time

ROUNDS = 20


def import_seconds(statement: str, runs: int = 5) -> float:
    """Median wall time of a fresh interpreter running ``statement`` minus a bare one."""

    def timed(code: str) -> float:
        began = time.perf_counter()
        subprocess.run([sys.executable, "-c", code], check=True)
        return time.perf_counter() - began

    bare = statistics.median(timed("pass") for _ in range(runs))
    return statistics.median(timed(statement) for _ in range(runs)) - bare


def charts():
    """One invented 12-group input per main chart kind."""
    import numpy as np

    from sitebuild.charts import comparisons, relationships, summary

    rng = np.random.default_rng(16)
    groups = [f"Line {c}" for c in "ABCDEFGHIJKL"]
    rows = [
        {"group": g, "mean": 10 + i, "ci_low": 9 + i, "ci_high": 11 + i, "n": 30, "sd": 1.0}
        for i, g in enumerate(groups)
    ]
    pairs = [
        {"a": a, "b": b, "estimate": float(i - j), "ci_low": i - j - 1.0, "ci_high": i - j + 1.0,
         "p": 0.01, "p_adjusted": 0.04, "welch_df": 50.0, "n_a": 30, "n_b": 30,
         "conclusion": "differs", "estimate_name": "difference in means"}
        for i, a in enumerate(groups) for j, b in enumerate(groups) if i < j
    ]  # fmt: skip
    entry = {"measure": "fill weight (g)", "pairs": pairs, "alpha": 0.05, "confidence": 0.95,
             "centre": "mean", "margin": None, "family": {"size": 66, "adjust": "holm"}}  # fmt: skip
    points = [
        {"group": g, "x": float(rng.integers(1, 8)), "y": float(rng.normal())}
        for g in groups
        for _ in range(100)
    ]
    scatter = {"x": "order lines", "y": "fill weight (g)", "points": points}
    return {
        "means": lambda: summary.mean_intervals(rows, groups, "fill weight (g)", "line"),
        "forest": lambda: comparisons.forest_chart(entry, 0),
        "scatter": lambda: relationships.scatter_with_smooths(scatter, [], None, groups, "line"),
    }


def main() -> None:
    print(
        f"import altair (tests only): {import_seconds('import altair'):.2f} s "
        "(fresh process, median of 5)"
    )
    print(f"import sitebuild.cli: {import_seconds('import sitebuild.cli'):.2f} s")
    kinds = charts()
    for kind, make in kinds.items():
        make()  # first call: imports
        for check in ("0", "1"):
            os.environ["SITEBUILD_CHECK_CHARTS"] = check
            wall, cpu = time.perf_counter(), time.process_time()
            for _ in range(ROUNDS):
                make()
            wall = (time.perf_counter() - wall) / ROUNDS * 1000
            cpu = (time.process_time() - cpu) / ROUNDS * 1000
            label = "checked" if check == "1" else "unchecked"
            print(f"{kind:8} {label:9}: {wall:6.1f} ms wall, {cpu:6.1f} ms CPU per chart")


if __name__ == "__main__":
    main()
