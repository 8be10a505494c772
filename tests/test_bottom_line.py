"""The bottom line, its cautions and the data-use line, read from the example's results."""

from __future__ import annotations

import json
import re

import pytest

from sitebuild.site.bottom_line import (
    MATERIAL_LOSS,
    bottom_line,
    cautions,
    data_use,
    specific_findings,
)
from sitebuild.stats.findings import CAUTIONS


@pytest.fixture(scope="module")
def results(example_site):
    return json.loads((example_site / "results.json").read_text(encoding="utf-8"))


def dataset(results, name):
    return next(ds for ds in results["datasets"] if ds["name"] == name)


def test_top_bottom_and_gap_match_pandas_group_means():
    # Reference: pandas group means of the same CSV (numbers that do not parse are missing,
    # rows without a group label are dropped, as the page says).
    import pandas as pd

    from sitebuild.site import bottom_line as bl

    from conftest import EXAMPLE

    frame = pd.read_csv(EXAMPLE / "data" / "growing_trial.csv")
    frame = frame.dropna(subset=["mix"])
    means = pd.to_numeric(frame["leaf mass (g)"], errors="coerce").groupby(frame["mix"]).mean()
    top, bottom = means.idxmax(), means.idxmin()
    groups = [
        {"group": g, "mean": float(m), "n": 10, "sd": 20.0, "median": float(m)}
        for g, m in means.items()
    ]
    entry = {
        "measure": "leaf mass (g)",
        "lead_test": "Welch's ANOVA",
        "omnibus": [{"test": "Welch's ANOVA", "p": 1e-6}],
        "alpha": 0.05,
        "centre": "mean",
        "groups": groups,
        "pairs": [
            {"a": top, "b": bottom, "p_adjusted": 0.004, "conclusion": "differs", "disagree": []}
        ],
    }
    row = bl.bottom_line_row({"summaries": []}, entry, 0)
    gap = means.max() - means.min()
    assert row.top == top and row.bottom == bottom
    assert row.gap_parts[0] == f"{gap:.1f} g"
    assert row.gap_parts[1] == f"{top} above {bottom} by {100 * gap / means.min():.0f} %"
    assert row.sure == "Sure"  # 0.001 <= p < 0.01
    assert row.verdict == "The groups differ"


def test_sure_words_follow_the_adjusted_p_and_never_say_no_difference():
    from sitebuild.site.bottom_line import _sure

    assert _sure(0.0004, 0.05, False)[0] == "Very sure"
    assert _sure(0.004, 0.05, False)[0] == "Sure"
    assert _sure(0.04, 0.05, False)[0] == "Fairly sure"
    assert _sure(0.04, 0.05, True)[0] == "Borderline"
    assert _sure(0.4, 0.05, False)[0] == "Not shown"
    words = {_sure(p, 0.05, b)[0] for p in (None, 0.0, 0.2, 0.9) for b in (True, False)}
    assert not any("no difference" in w.lower() for w in words)


def test_better_lower_swaps_best_and_worst():
    from sitebuild.site import bottom_line as bl

    entry = {
        "measure": "defects per panel",
        "better": "lower",
        "lead_test": "one-way ANOVA",
        "omnibus": [{"test": "one-way ANOVA", "p": 0.2}],
        "alpha": 0.05,
        "groups": [
            {"group": "A", "mean": 3.0, "n": 5, "sd": 1.0},
            {"group": "B", "mean": 1.0, "n": 5, "sd": 1.0},
        ],
        "pairs": [{"a": "A", "b": "B", "p_adjusted": 0.2, "conclusion": "no clear difference"}],
    }
    row = bl.bottom_line_row({"summaries": []}, entry, 0)
    assert (row.top_word, row.top, row.bottom_word, row.bottom) == ("Best", "B", "Worst", "A")
    assert row.verdict == "No clear difference shown" and row.sure == "Not shown"


def test_reference_gap_is_the_largest_from_the_reference(results):
    ds = dataset(results, "Seed coating germination test")
    rows = bottom_line(ds)
    entry = ds["comparisons"][0]
    ref = entry["reference"]
    base = next(g["mean"] for g in entry["groups"] if g["group"] == ref)
    far = max(
        (g for g in entry["groups"] if g["group"] != ref), key=lambda g: abs(g["mean"] - base)
    )
    assert rows[0].gap_parts[1].startswith(f"{far['group']} ") and rows[0].gap_parts[1].endswith(
        ref
    )
    assert rows[0].gap_parts[0].startswith(f"{abs(far['mean'] - base):.1f}")
    # Top and bottom stay the true highest and lowest group.
    means = sorted(entry["groups"], key=lambda g: g["mean"])
    assert (rows[0].top, rows[0].bottom) == (means[-1]["group"], means[0]["group"])


def test_x_balance_is_said_where_the_groups_differ_in_x(results):
    rows = bottom_line(dataset(results, "Warehouse order picking"))
    assert all(r.x_note and "lines" in r.x_note for r in rows)
    # Hydroponic: the groups do not differ in temperature, but where temperature accounts for
    # much of a measure's variation the comparison at equal temperature leads, and is said.
    ds = dataset(results, "Hydroponic growing trial")
    leads = {a["measure"]: a["leads"] for a in ds["adjusted"]}
    for row in bottom_line(ds):
        assert (row.x_note is not None) == leads[row.measure], row.measure
        assert bool(row.at_equal_x) == leads[row.measure]


def test_when_the_comparison_at_equal_x_leads_it_gives_the_verdict(results):
    # Warehouse: the night shift picks orders with more lines. Walk distance differs by
    # 36.5 m raw, but at equal lines the gap is 2.1 m with an interval across zero (the
    # equal-x numbers are checked against statsmodels OLS in test_ancova.py): the bottom
    # line must not call that a sure difference.
    ds = dataset(results, "Warehouse order picking")
    equal_x = {a["measure"]: a for a in ds["adjusted"]}
    rows = {r.measure: r for r in bottom_line(ds)}
    walk = rows["walk distance [m]"]
    assert equal_x["walk distance [m]"]["leads"]
    assert equal_x["walk distance [m]"]["group_p"] > 0.05
    assert not walk.differ and walk.verdict == "No clear difference shown at equal lines"
    assert walk.sure_level == "none" and "at equal lines" in walk.sure_note
    assert "2.1 m" in walk.x_note and "36.5 m raw" in walk.x_note
    assert walk.gap_at_equal_x.startswith("2.1 m (") and walk.gap_at_equal_x.endswith(
        " at equal lines"
    )
    assert "could be chance" not in walk.headline and "may come from lines" in walk.headline
    pick = rows["pick time [s]"]
    assert pick.differ and pick.verdict == "The groups differ at equal lines"
    pair = next(
        q for q in equal_x["pick time [s]"]["pairs"] if {q["a"], q["b"]} == {pick.top, pick.bottom}
    )
    assert f"{pair['p_adjusted']:.3g}" in pick.sure_note  # the equal-x pair's adjusted p


def test_cautions_only_those_that_apply(results):
    from sitebuild.manifest import SiteSettings

    hydro = {c.key for c in cautions(dataset(results, "Hydroponic growing trial"), SiteSettings())}
    seed = {
        c.key for c in cautions(dataset(results, "Seed coating germination test"), SiteSettings())
    }
    assert {"observational", "many-tests", "data-left-out", "decision"} <= hydro
    assert "data-left-out" not in seed  # all 54 rows used
    assert "small-groups" in seed and "small-groups" not in hydro  # 12–15 against 26–96 values


def test_findings_lose_only_the_general_cautions(results):
    entry = dataset(results, "Hydroponic growing trial")["comparisons"][0]
    kept = specific_findings(entry)
    assert not set(kept) & set(CAUTIONS)
    assert len(kept) == len(entry["findings"]) - sum(s in CAUTIONS for s in entry["findings"])


def test_data_use_line_is_one_line_unless_material(results):
    use = data_use(dataset(results, "Hydroponic growing trial"))
    assert use.line.startswith("99.7 % of rows used (393 of 394)")
    assert "2 values could not be read" in use.line
    assert not use.material
    lossy = {"source": {"rows_read": 100, "rows_used": 90, "unparsed": {}, "drop_reasons": {}}}
    assert 1 - 0.90 > MATERIAL_LOSS and data_use(lossy).material
    assert re.match(r"90 % of rows used", data_use(lossy).line)
