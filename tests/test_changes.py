"""The change report between two results trees, and the history of headline numbers."""

from __future__ import annotations

import copy
import csv
import json
import math
from statistics import NormalDist

import pytest

from sitebuild import build
from sitebuild.changes import compare, extend_history, results_id
from sitebuild.scaffold import new_project

SITE = {"confidence": 0.95, "alpha": 0.05}


def summary(group, measure, n, mean, se, median=None, half=None, missing=0):
    return {
        "group": group,
        "measure": measure,
        "n": n,
        "missing": missing,
        "mean": mean,
        "se": se,
        "median": median,
        "median_ci_low": None if half is None else median - half,
        "median_ci_high": None if half is None else median + half,
        "median_ci_level": 0.95,
    }


def before_tree() -> dict:
    ds = {
        "name": "Trial",
        "measures": ["yield"],
        "groups": ["A", "B"],
        "source": {"rows_used": 20},
        "summaries": [
            summary("A", "yield", 10, 10.0, 1.0, median=10.0, half=1.96),
            summary("B", "yield", 10, 20.0, 1.0, median=20.0, half=1.96),
            summary(None, "yield", 20, 15.0, 1.2),
        ],
        "comparisons": [
            {
                "measure": "yield",
                "method": "welch",
                "pairs": [{"a": "A", "b": "B", "p_adjusted": 0.01, "estimate": -10.0}],
            }
        ],
        "correlations": [
            {"group": None, "a": "yield", "b": "x", "method": "pearson", "r": 0.2,
             "ci_low": 0.1, "ci_high": 0.3},
            {"group": "A", "a": "yield", "b": "x", "method": "pearson", "r": 0.2,
             "ci_low": 0.1, "ci_high": 0.3},
        ],
        "relationships": [{"group": None, "a": "x", "b": "yield", "curved": False}],
    }  # fmt: skip
    gone = {"name": "Old survey", "measures": [], "groups": [], "source": {"rows_used": 1}}
    return {"tool_version": "0", "site": dict(SITE), "datasets": [ds, gone]}


def after_tree() -> dict:
    tree = copy.deepcopy(before_tree())
    tree["datasets"] = [tree["datasets"][0]]
    ds = tree["datasets"][0]
    ds["groups"] = ["A", "B", "C"]
    ds["summaries"] = [
        # A: mean +2 with SE 1 each: beyond sqrt(1 + 1) ≈ 1.41, so it moved.
        summary("A", "yield", 12, 12.0, 1.0, median=10.5, half=1.96),
        # B: mean +1 is within the combined standard error: not reported.
        summary("B", "yield", 10, 21.0, 1.0, median=20.0, half=1.96),
        summary("C", "yield", 5, 30.0, 2.0),
        summary(None, "yield", 27, 18.0, 1.2),
    ]
    ds["comparisons"][0]["pairs"][0]["p_adjusted"] = 0.20
    ds["correlations"][0].update(r=0.6, ci_low=0.5, ci_high=0.7)  # no overlap with 0.1-0.3
    ds["correlations"][1].update(r=0.4, ci_low=0.25, ci_high=0.6)  # still overlaps
    ds["relationships"][0]["curved"] = True
    tree["datasets"].append(
        {"name": "New line", "measures": [], "groups": [], "source": {"rows_used": 3}}
    )
    return tree


def test_crafted_pair_reports_group_added_mean_moved_and_verdict_flipped():
    changes = compare(before_tree(), after_tree())
    assert changes["first_build"] is False
    assert changes["datasets_added"] == ["New line"]
    assert changes["datasets_removed"] == ["Old survey"]
    (trial,) = changes["datasets"]
    assert trial["groups_added"] == ["C"] and trial["groups_removed"] == []
    assert trial["rows"] == [{"group": "A", "before": 10, "after": 12, "change": 2}]
    # Only A's mean moved; the combined standard error of two independent estimates is
    # sqrt(se1² + se2²) (common practice for the SE of a difference).
    assert [(m["group"], m["statistic"]) for m in trial["moved"]] == [("A", "mean")]
    assert math.isclose(trial["moved"][0]["threshold"], math.sqrt(2))
    assert trial["verdicts"] == [
        {
            "measure": "yield",
            "a": "A",
            "b": "B",
            "p_before": 0.01,
            "p_after": 0.20,
            "before": "different",
            "after": "not shown different",
        }
    ]
    assert [(c["group"], c["r_after"]) for c in trial["correlations"]] == [(None, 0.6)]
    assert trial["curved"] == [
        {"group": None, "a": "x", "b": "yield", "before": False, "after": True}
    ]
    assert changes["count"] == 1 + 1 + 1 + 1 + 1 + 1 + 1 + 1
    text = " ".join(changes["summary"])
    assert "groups added: C" in text and "pairwise conclusion changed" in text


def test_median_moves_against_its_interval_half_width_on_the_se_scale():
    before, after = before_tree(), before_tree()
    z = NormalDist().inv_cdf(0.975)
    # Half-width 1.96 ≈ z, so each median's SE stand-in is 1; a move of 1.5 > sqrt(2) counts.
    after["datasets"][0]["summaries"][1]["median"] = 21.5
    after["datasets"][0]["summaries"][1]["median_ci_low"] = 21.5 - 1.96
    after["datasets"][0]["summaries"][1]["median_ci_high"] = 21.5 + 1.96
    (trial,) = compare(before, after)["datasets"]
    (moved,) = trial["moved"]
    assert moved["statistic"] == "median" and moved["group"] == "B"
    assert math.isclose(moved["threshold"], math.sqrt(2) * 1.96 / z)


def test_identical_trees_report_nothing_and_absent_sections_are_tolerated():
    tree = before_tree()
    for ds in tree["datasets"]:
        for key in ("comparisons", "correlations", "relationships"):
            ds.pop(key, None)
    changes = compare(tree, copy.deepcopy(tree))
    assert changes["count"] == 0 and changes["datasets"] == []
    assert changes["previous_id"] == changes["current_id"] == results_id(tree)


def test_first_build_has_nothing_to_compare():
    changes = compare(None, after_tree())
    assert changes["first_build"] and changes["previous_id"] is None


def test_history_is_carried_forward_and_trimmed():
    tree = after_tree()
    previous = None
    for _ in range(4):
        history = extend_history(previous, tree, keep=3, built_at=None)
        previous = {**tree, "history": history}
    assert [h["build"] for h in history] == [2, 3, 4]
    means = history[-1]["datasets"][0]["means"]
    assert {"measure": "yield", "group": "A", "mean": 12.0} in means
    assert all(m["group"] is not None for m in means)


def _rewrite(path, change):
    with open(path, encoding="utf-8", newline="") as handle:
        rows = list(csv.reader(handle))
    rows = change(rows)
    with open(path, "w", encoding="utf-8", newline="") as handle:
        csv.writer(handle, lineterminator="\n").writerows(rows)


def test_rebuild_after_data_update_records_and_shows_changes(tmp_path):
    import jsonschema

    from sitebuild.results import schema

    root = new_project(tmp_path / "p").root
    first = build(root)
    assert first.changes == ("First build of this site: nothing earlier to compare with.",)

    def update(rows):
        header, body = rows[0], rows[1:]
        volume = header.index("loaf volume (ml)")
        for row in body:
            if row[1] == "spelt blend":
                row[volume] = str(float(row[volume]) + 400)
        extra = [[f"X{i}", "oat blend", "60", str(1400 + 10 * i), "5"] for i in range(6)]
        return [header] + body + extra

    _rewrite(root / "data/loaves.csv", update)
    second = build(root)
    results = json.loads((second.out / "results.json").read_text(encoding="utf-8"))
    jsonschema.validate(results, schema())
    (ds,) = results["changes"]["datasets"]
    assert ds["groups_added"] == ["oat blend"]
    assert ("loaf volume (ml)", "spelt blend", "mean") in {
        (m["measure"], m["group"], m["statistic"]) for m in ds["moved"]
    }
    assert [h["build"] for h in results["history"]] == [1, 2]
    assert any("oat blend" in line for line in second.changes)
    page = (second.out / "changes.html").read_text(encoding="utf-8")
    assert "oat blend" in page and "What moved since the last build" in page
    assert "Since the last build" in (second.out / "index.html").read_text(encoding="utf-8")
    # A rebuild with nothing new keeps the change report and adds no history entry.
    third = build(root)
    assert not third.written
    again = json.loads((third.out / "results.json").read_text(encoding="utf-8"))
    assert again["changes"] == results["changes"] and len(again["history"]) == 2


def test_real_rebuild_flags_flipped_pairwise_conclusions(tmp_path):
    root = new_project(tmp_path / "p").root
    build(root)
    results = json.loads((root / "site/results.json").read_text(encoding="utf-8"))
    if "comparisons" not in results["datasets"][0]:
        pytest.skip("the comparisons section is not in this build")
    volume = next(
        e for e in results["datasets"][0]["comparisons"] if e["measure"] == "loaf volume (ml)"
    )
    pair = next(p for p in volume["pairs"] if {p["a"], p["b"]} == {"rye blend", "spelt blend"})
    assert pair["p_adjusted"] < 0.05  # the scaffold's rye loaves are clearly smaller

    def lift_rye(rows):
        at = rows[0].index("loaf volume (ml)")
        for row in rows[1:]:
            if row[1] == "rye blend":
                row[at] = str(float(row[at]) + 230)  # close the gap to the other flours
        return rows

    _rewrite(root / "data/loaves.csv", lift_rye)
    report = build(root)
    results = json.loads((root / "site/results.json").read_text(encoding="utf-8"))
    (ds,) = results["changes"]["datasets"]
    flipped = {(v["measure"], frozenset((v["a"], v["b"]))): v for v in ds["verdicts"]}
    verdict = flipped[("loaf volume (ml)", frozenset(("rye blend", "spelt blend")))]
    assert (verdict["before"], verdict["after"]) == ("different", "not shown different")
    assert any("pairwise conclusions changed" in line for line in report.changes)
