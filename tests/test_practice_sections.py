"""The practitioner sections on built sites: comparisons at equal x, spec limits, trends over
time and display names. Figures are checked against statsmodels / scipy on the same rows."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
import statsmodels.stats.anova as sm_anova
from scipy import stats

import sitebuild
from sitebuild.ingest import read_table
from sitebuild.manifest import load_manifest

from conftest import EXAMPLE, write_project


def _results(site) -> dict:
    return json.loads((site / "results.json").read_text(encoding="utf-8"))


def _dataset(results: dict, name: str) -> dict:
    return next(d for d in results["datasets"] if d["name"] == name)


def _frame(spec, measure: str) -> pd.DataFrame:
    table = read_table(spec)
    frame = pd.DataFrame(
        {
            "g": [table.groups[c] for c in table.codes],
            "x": table.columns[spec.x],
            "y": table.columns[measure],
        }
    )
    return frame.dropna()


def _contrast(fit, names: list[str], a: str, b: str):
    params = list(fit.params.index)
    c = np.zeros(len(params))
    for name, sign in ((a, 1.0), (b, -1.0)):
        if name != names[0]:
            c[params.index(f"C(g)[T.{name}]")] += sign
    return fit.t_test(c)


def test_warehouse_gap_at_equal_order_lines_matches_statsmodels(example_site):
    # Source: statsmodels OLS pick time ~ C(shift) + lines on the rows sitebuild reads.
    spec = next(d for d in load_manifest(EXAMPLE).datasets if d.name.startswith("Warehouse"))
    frame = _frame(spec, "pick time [s]")
    fit = smf.ols("y ~ C(g) + x", data=frame).fit()
    ref = _contrast(fit, sorted(frame.g.unique()), "Nacht", "Früh")
    ds = _dataset(_results(example_site), spec.name)
    entry = next(e for e in ds["adjusted"] if e["measure"] == "pick time [s]")
    assert entry["leads"] and entry["model"] == "straight line"
    pair = next(p for p in entry["pairs"] if {p["a"], p["b"]} == {"Nacht", "Früh"})
    sign = 1 if pair["a"] == "Nacht" else -1
    assert sign * pair["difference"] == pytest.approx(float(ref.effect[0]), rel=1e-6)
    low, high = sorted(sign * np.array([pair["ci_low"], pair["ci_high"]]))
    assert (low, high) == pytest.approx(tuple(ref.conf_int(0.05)[0]), rel=1e-6)
    raw = frame[frame.g == "Nacht"].y.mean() - frame[frame.g == "Früh"].y.mean()
    assert sign * pair["raw_difference"] == pytest.approx(raw, rel=1e-9)
    told = " ".join(entry["findings"])
    assert f"'Nacht' is worse than 'Früh' by {float(ref.effect[0]):.1f} s" in told
    assert f"the raw gap is {raw:.1f} s" in told
    ci = ref.conf_int(0.05)[0]
    assert f"95% CI {ci[0]:.1f} to {ci[1]:.1f}" in told


def test_hydroponic_gap_at_equal_temperature_uses_the_curve_and_matches_statsmodels(example_site):
    # Source: statsmodels OLS leaf mass ~ C(mix) + t + I(t**2) (the curve flag is set).
    spec = next(d for d in load_manifest(EXAMPLE).datasets if d.name.startswith("Hydroponic"))
    frame = _frame(spec, "leaf mass (g)")
    fit = smf.ols("y ~ C(g) + x + I(x**2)", data=frame).fit()
    ref = _contrast(fit, sorted(frame.g.unique()), "High nitrogen", "Standard mix")
    ds = _dataset(_results(example_site), spec.name)
    entry = next(e for e in ds["adjusted"] if e["measure"] == "leaf mass (g)")
    assert entry["curved"] and entry["model"] == "curve" and entry["leads"]
    assert entry["residual_sd"] == pytest.approx(np.sqrt(fit.mse_resid), rel=1e-6)
    pair = next(p for p in entry["pairs"] if {p["a"], p["b"]} == {"High nitrogen", "Standard mix"})
    sign = 1 if pair["a"] == "High nitrogen" else -1
    assert sign * pair["difference"] == pytest.approx(float(ref.effect[0]), rel=1e-6)
    assert pair["raw_significant"] is False and pair["significant"] is True
    told = " ".join(entry["findings"])
    ci = ref.conf_int(0.05)[0]
    assert (
        f"'High nitrogen' is better than 'Standard mix' by {float(ref.effect[0]):.1f} g "
        f"(95% CI {ci[0]:.1f} to {ci[1]:.1f}" in told
    )
    assert "adjustment uses a curve" in told


def test_overview_says_night_orders_are_bigger_and_the_gap_at_equal_size(example_site):
    text = (example_site / "index.html").read_text(encoding="utf-8")
    assert "Best mean: Früh 92.9 s" in text
    assert "At equal &#39;lines&#39;: &#39;Nacht&#39; worse than &#39;Früh&#39; by 8.9 s" in text
    assert (
        "against 37.5 s raw; &#39;Nacht&#39; has higher &#39;lines&#39; (5.14 against 3.6)" in text
    )


def test_labels_name_the_coatings_on_pages_and_csv_but_results_keep_codes(example_site):
    ds = _dataset(_results(example_site), "Seed coating germination test")
    assert "01" in ds["groups"] and "clay and starch" not in ds["groups"]
    page = (example_site / f"{ds['slug']}.html").read_text(encoding="utf-8")
    assert "clay and starch" in page and "polymer film" in page
    summary_csv = next((example_site / "tables").glob(f"{ds['slug']}-sum-0*.csv"))
    frame = pd.read_csv(summary_csv, encoding="utf-8-sig", dtype=str)
    assert {"Group", "Group (code)"} <= set(frame.columns)
    named = dict(zip(frame["Group (code)"], frame["Group"], strict=True))
    assert named["01"] == "clay and starch" and named["00"] == "uncoated"


def test_capability_counts_and_indices_on_the_example(example_site):
    # Counted directly from the rows sitebuild reads; Cpk from Kane's (1986) formula.
    spec = next(d for d in load_manifest(EXAMPLE).datasets if d.name.startswith("Hydroponic"))
    table = read_table(spec)
    lower, upper = spec.limits["days to harvest"]
    ds = _dataset(_results(example_site), spec.name)
    entry = ds["capability"][0]
    assert entry["measure"] == "days to harvest" and entry["target"] == 38
    for row in entry["groups"]:
        if row["group"] is None:
            values = table.columns["days to harvest"]
        else:
            values = table.columns["days to harvest"][
                table.codes == table.groups.index(row["group"])
            ]
        values = values[~np.isnan(values)]
        assert row["outside"] == int(np.sum((values < lower) | (values > upper)))
        mean, sd = values.mean(), values.std(ddof=1)
        assert row["cpk"] == pytest.approx(min(upper - mean, mean - lower) / (3 * sd), rel=1e-9)
    assert any("Bissell" in s for s in entry["findings"])
    assert any("stable process" in s for s in entry["findings"])


def _trend_project(tmp_path, engine: str = "memory"):
    rng = np.random.default_rng(11)
    lines = ["line,day,scrap (%)"]
    for line, slope in (("North", 0.30), ("South", 0.02), ("East", -0.10)):
        for day in range(1, 41):
            lines.append(f"{line},{day},{2.0 + slope * day + rng.normal(0, 0.8):.3f}")
    manifest = f"""
[[datasets]]
name = "Scrap"
file = "data/scrap.csv"
group = "line"
measures = ["scrap (%)"]
x = "day"
time_unit = "day"
better = {{ "scrap (%)" = "lower" }}
engine = "{engine}"
"""
    root = write_project(tmp_path / engine, manifest, {"data/scrap.csv": "\n".join(lines) + "\n"})
    out = tmp_path / f"site-{engine}"
    sitebuild.build(root, out=out)
    frame = pd.read_csv(root / "data/scrap.csv")
    return _results(out)["datasets"][0], frame


def test_trends_match_scipy_and_statsmodels_and_name_the_worst_line(tmp_path):
    # Source: scipy.stats.linregress per group; statsmodels anova_lm for the interaction.
    ds, frame = _trend_project(tmp_path)
    entry = ds["trends"][0]
    for row in entry["groups"]:
        part = frame[frame.line == row["group"]]
        ref = stats.linregress(part["day"], part["scrap (%)"])
        assert row["slope"] == pytest.approx(ref.slope, rel=1e-9)
        assert row["p"] == pytest.approx(ref.pvalue, rel=1e-6)
        q = stats.t.ppf(0.975, len(part) - 2)
        assert row["ci_low"] == pytest.approx(ref.slope - q * ref.stderr, rel=1e-9)
    frame = frame.rename(columns={"scrap (%)": "y", "line": "g", "day": "x"})
    full = smf.ols("y ~ C(g) * x", data=frame).fit()
    inter = sm_anova.anova_lm(full, typ=2).loc["C(g):x"]
    assert entry["differ"]["p"] == pytest.approx(inter["PR(>F)"], rel=1e-6)
    assert entry["findings"][0].startswith("Worsening fastest: 'North'")
    assert "per day" in entry["findings"][0]


def test_streamed_engine_gives_the_same_trend_and_adjusted_gaps(tmp_path):
    memory, _ = _trend_project(tmp_path, "memory")
    streamed, _ = _trend_project(tmp_path, "stream")
    for a, b in zip(memory["trends"][0]["groups"], streamed["trends"][0]["groups"], strict=True):
        assert b["slope"] == pytest.approx(a["slope"], rel=1e-9)
    assert not memory["adjusted"][0]["curved"]  # straight lines on both engines
    pairs = zip(memory["adjusted"][0]["pairs"], streamed["adjusted"][0]["pairs"], strict=True)
    for a, b in pairs:
        assert b["difference"] == pytest.approx(a["difference"], rel=1e-9)
        assert b["ci_low"] == pytest.approx(a["ci_low"], rel=1e-9)
