"""Plain-language findings: built from results only, with the cautions and rule-of-thumb notes."""

from __future__ import annotations

from sitebuild.manifest import SiteSettings
from sitebuild.stats.findings import CAUTIONS, format_p, measure_findings


def _pair(a, b, **kw):
    base = {
        "a": a, "b": b, "n_a": 40, "n_b": 40, "estimate_name": "difference in means",
        "estimate": 2.0, "ci_low": 1.5, "ci_high": 2.5, "effect_name": "Hedges' g",
        "effect": 1.1, "effect_label": "large", "p_adjusted": 0.0001, "significant": True,
        "equivalent": None, "conclusion": "differs", "detectable_difference": 0.6,
        "margin": None, "tost_p_adjusted": None, "disagree": [],
    }  # fmt: skip
    base.update(kw)
    return base


def _entry(pairs, omnibus_p=(0.001, 0.002, 0.2)):
    return {
        "measure": "weight",
        "lead_test": "Welch's ANOVA",
        "alpha": 0.05,
        "confidence": 0.95,
        "centre": "mean",
        "groups": [
            {"group": "A", "mean": 3.0, "median": 3.0, "n": 40},
            {"group": "B", "mean": 1.0, "median": 1.0, "n": 40},
            {"group": "C", "mean": 2.0, "median": 2.0, "n": 5},
        ],
        "omnibus": [
            {"test": "one-way ANOVA", "p": omnibus_p[0], "effect_name": "omega²", "effect": 0.2, "effect_label": "large"},
            {"test": "Welch's ANOVA", "p": omnibus_p[1], "effect_name": "omega² (from Welch's F)", "effect": 0.18, "effect_label": "large"},
            {"test": "Kruskal–Wallis", "p": omnibus_p[2], "effect_name": "epsilon²", "effect": 0.01, "effect_label": "small"},
        ],  # fmt: skip
        "pairs": pairs,
        "family": {"description": "all 3 pairs of 3 groups", "size": 3, "adjust": "holm", "adjust_name": "Holm (1979) step-down"},
        "not_comparable": [{"group": "D", "n": 1, "reason": "fewer than 2 values (n = 1)"}],
        "notes": [],
    }  # fmt: skip


def test_findings_name_order_differences_intervals_and_rule_of_thumb():
    pairs = [
        _pair("A", "B"),
        _pair("A", "C", significant=False, conclusion="inconclusive", n_b=5, margin=0.5,
              equivalent=False, p_adjusted=0.4, detectable_difference=3.2),
        _pair("B", "C", significant=False, conclusion="equivalent", equivalent=True, margin=0.5,
              tost_p_adjusted=0.01, p_adjusted=0.9),
    ]  # fmt: skip
    text = measure_findings(_entry(pairs), SiteSettings())
    joined = " ".join(text)
    assert "By mean, highest first: 'A' (3), 'C' (2), 'B' (1)." in text
    assert "'A' is higher than 'B' by 2 on average (95% CI 1.5 to 2.5)" in joined
    assert "large by common rules of thumb" in joined
    assert "'B' and 'C' are equivalent within ±0.5" in joined
    assert "inconclusive" in joined and "too few rows (the smaller group has 5)" in joined
    assert "about 3.2 or more" in joined
    assert "Group 'D' is left out" in joined
    for caution in CAUTIONS:
        assert caution in text


def test_findings_report_disagreement_between_lead_and_sensitivity_tests():
    text = " ".join(measure_findings(_entry([_pair("A", "B")]), SiteSettings()))
    # The lead (Welch, p = 0.002) says "differ"; Kruskal–Wallis (p = 0.2) does not.
    assert "does not agree" in text and "Kruskal–Wallis (p = 0.2)" in text
    agree = " ".join(
        measure_findings(_entry([_pair("A", "B")], (0.001, 0.002, 0.003)), SiteSettings())
    )
    assert "does not agree" not in agree


def test_lower_by_is_said_with_the_interval_of_the_gap():
    low = _pair("B", "A", estimate=-2.0, ci_low=-2.5, ci_high=-1.5)
    text = " ".join(measure_findings(_entry([low]), SiteSettings()))
    assert "'B' is lower than 'A' by 2 on average (95% CI 1.5 to 2.5)" in text


def test_not_significant_is_not_called_no_difference():
    plain = _pair("A", "B", significant=False, conclusion="no clear difference", p_adjusted=0.3)
    text = " ".join(measure_findings(_entry([plain]), SiteSettings()))
    assert "not proof of sameness" in text
    assert "about 0.6 or more" in text


def test_findings_use_only_the_results_given():
    # Same results in, same sentences out; nothing else is consulted.
    e = _entry([_pair("A", "B")])
    assert measure_findings(e, SiteSettings()) == measure_findings(e, None)


def test_p_values_are_written_plainly():
    assert format_p(0.0004) == "< 0.001"
    assert format_p(0.0312) == "0.0312"
    assert format_p(None) == "not available"


def _with_sd(entry, sd):
    for g in entry["groups"]:
        g["sd"] = sd
    return entry


def test_values_with_a_large_offset_keep_their_digits():
    # Values near 10,000,000 with SD 0.1: three significant digits of the spread, never 1e+07.
    entry = _with_sd(_entry([_pair("A", "B", estimate=-0.3412, ci_low=-0.39, ci_high=-0.29)]), 0.1)
    for g, mean in zip(
        entry["groups"], (10_000_000.4641, 10_000_000.1229, 10_000_000.3), strict=True
    ):
        g["mean"] = mean
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "'A' (10,000,000.464), 'C' (10,000,000.300), 'B' (10,000,000.123)" in text
    assert "by 0.341 on average (95% CI 0.290 to 0.390)" in text
    assert "e+0" not in text


def test_equivalent_alone_but_not_after_adjustment_says_so():
    pair = _pair("A", "B", significant=False, conclusion="inconclusive", margin=2.0,
                 equivalent=False, p_adjusted=0.6, tost_p=0.006, tost_p_adjusted=0.06)  # fmt: skip
    text = " ".join(measure_findings(_entry([pair]), SiteSettings()))
    assert "on its own this pair is equivalent within ±2 (p = 0.006)" in text
    assert "not after allowing for the 3 comparisons (adjusted p = 0.06)" in text
    assert "too much spread" not in text


def test_no_clear_difference_gives_the_range_of_detectable_sizes():
    pairs = [
        _pair("A", "B", significant=False, conclusion="no clear difference", p_adjusted=0.5,
              detectable_difference=9.43),
        _pair("A", "C", significant=False, conclusion="no clear difference", p_adjusted=0.5,
              detectable_difference=13.8),
    ]  # fmt: skip
    text = " ".join(measure_findings(_entry(pairs), SiteSettings()))
    assert "about 9.43 to 13.8 or more (depending on the pair)" in text


def test_equal_spread_tests_are_not_a_check_when_spreads_differ():
    entry = _entry([_pair("A", "B", disagree=["tukey_p"])], (0.0001, 0.24, 0.3))
    for o in entry["omnibus"]:
        o["p"] = {"one-way ANOVA": 0.0001, "Welch's ANOVA": 0.24, "Kruskal–Wallis": 0.3}[o["test"]]
    # The decision is read from the spread check's data, not from the reason's wording.
    entry["lead_reason"] = "Welch's ANOVA leads."
    entry["lead_basis"] = {"unequal_spread": True, "unbalanced_sizes": False}
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "does not agree" not in text and "borderline" not in text
    assert "assumes equal spread, which these groups do not have" in text
    # Unbalanced sizes alone: the one-way ANOVA stays a fair check, whatever the reason says.
    entry["lead_reason"] = (
        "Welch's ANOVA leads because the largest standard deviation is 10.8 times the smallest"
    )
    entry["lead_basis"] = {"unequal_spread": False, "unbalanced_sizes": True}
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "does not agree" in text and "borderline" in text


def test_a_difference_inside_the_agreed_margin_is_called_small():
    inside = _pair("A", "B", estimate=1.35, ci_low=0.30, ci_high=1.41, margin=1.5)
    text = " ".join(measure_findings(_entry([inside]), SiteSettings()))
    assert "The whole interval lies within the ±1.5 agreed not to matter" in text
    reaching = _pair("A", "B", estimate=1.35, ci_low=0.30, ci_high=2.41, margin=1.5)
    text = " ".join(measure_findings(_entry([reaching]), SiteSettings()))
    assert "the interval reaches beyond it" in text


def test_a_single_comparison_is_not_said_as_one_of_one():
    entry = _entry([_pair("A", "B")])
    entry["family"] = {**entry["family"], "size": 1, "description": "the 2 groups"}
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "Comparing the 2 groups: they differ." in text and "1 of 1" not in text


def test_strongly_skewed_groups_get_their_medians_named():
    entry = _entry([_pair("A", "B")])
    for g, skew, median in zip(entry["groups"], (1.68, 0.2, 1.2), (2.1, 1.0, 1.9), strict=True):
        g["skewness"], g["median"] = skew, median
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "2 groups are strongly skewed (up to 1.68 in 'A'" in text
    assert "better described by the median: 'A' (2.1), 'C' (1.9), 'B' (1)" in text


def test_differences_carry_the_unit_and_percentages_are_points():
    from sitebuild.stats.findings import measure_unit

    assert measure_unit("pick time [s]") == "s"
    assert measure_unit("surface temp (°C)") == "°C"
    assert measure_unit("germinated (%)") == "percentage points"
    assert measure_unit("defects per panel") == ""
    assert measure_unit("v.a[0]") == ""  # an index, not a unit
    entry = _entry([_pair("A", "B")])
    entry["measure"] = "germinated (%)"
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "'A' is higher than 'B' by 2 percentage points on average" in text


def test_hedges_g_is_qualified_when_spreads_are_very_unequal():
    entry = _entry([_pair("A", "B")])
    for g, sd in zip(entry["groups"], (21.5, 2.0, 3.0), strict=True):
        g["sd"] = sd
    text = " ".join(measure_findings(entry, SiteSettings()))
    assert "With spreads this unequal" in text and "Hedges' g, which pools them" in text
    for g in entry["groups"]:
        g["sd"] = 2.0
    assert "spreads this unequal" not in " ".join(measure_findings(entry, SiteSettings()))
