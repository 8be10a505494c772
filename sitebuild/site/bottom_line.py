"""The bottom line of a dataset page, the cautions that apply to it and its data-use line.

Presentation only: everything here is read from one dataset's results (results.json shape)
and turned into short plain-language rows a reader takes in at a glance. No statistic is
computed here beyond differences and ratios of numbers the results already hold.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..stats.findings import (
    CAUTIONS,
    format_value,
    measure_decimals,
    measure_unit,
    p_phrase,
)

# Below this share of rows used, the data-use line is shown as a warning (common practice:
# losing more than about one row in twenty can bias a comparison).
MATERIAL_LOSS = 0.05
# Groups this small get a caution: intervals are wide and single values move them (common
# practice; the tests still apply).
SMALL_GROUP = 20
# Cautions the overview page states once for the whole site (the others name a dataset's
# counts or groups and stay on its page).
SITE_CAUTIONS = ("observational", "not-same", "decision")
CAUTION_ORDER = (
    "observational", "not-same", "many-tests", "small-groups", "data-left-out", "decision",
)  # fmt: skip
# The mini chart shows at most this many groups: the highest and lowest halves.
MINI_MAX_GROUPS = 12


@dataclass(frozen=True)
class GroupPoint:
    """One group's centre and interval, for the mini chart."""

    group: str
    value: float | None
    low: float | None
    high: float | None
    n: int


@dataclass(frozen=True)
class BottomLineRow:
    """Returned per measure: the plain-language answer and the numbers behind it."""

    measure: str
    anchor: str  # id of the measure's section on the page
    compared: bool
    differ: bool  # the main test (or the comparison at equal x, when it leads) found one
    verdict: str  # "The groups differ", "No clear difference shown", "Not compared"
    centre: str  # "mean" or "median"
    top_word: str  # "Highest" or "Best"
    bottom_word: str  # "Lowest" or "Worst"
    top: str | None  # group name
    top_text: str  # "High nitrogen, 78.8 g"
    bottom: str | None
    bottom_text: str
    gap_text: str  # "22.0 g (39 % above Low potassium)"
    gap_parts: tuple[str, str] | None  # ("22.0 g", "39 % above Low potassium")
    sure: str  # a plain word from the adjusted evidence; never "no difference"
    sure_level: str  # css hook: strong, good, some, weak, none
    sure_note: str  # the evidence behind the word, for the details line
    sure_short: str  # the same in a few words: "adjusted p < 0.001"
    x_note: str | None  # where the explanatory column may account for the gap
    reason: str | None  # why a measure was not compared
    points: tuple[GroupPoint, ...]
    headline: str  # one sentence for the overview page
    # " at equal x" when the comparison at equal values of the explanatory column leads and
    # gives the verdict and how sure (the gap shown stays the raw one); "" otherwise
    at_equal_x: str = ""
    # The top-against-bottom gap at equal x with its interval ("8.9 s (3.5 to 14.3) at equal
    # lines"), when that comparison leads; None otherwise
    gap_at_equal_x: str | None = None


@dataclass(frozen=True)
class Caution:
    """One caution of the "how to read this" box."""

    key: str  # observational, not-same, many-tests, small-groups, data-left-out, decision
    text: str


def _better(ds: dict, entry: dict, measure: str) -> str | None:
    """Return "higher" or "lower" when the results or manifest say which is better."""
    for source in (entry.get("better"), (ds.get("better") or {}).get(measure)):
        if isinstance(source, str) and source.lower() in ("higher", "lower"):
            return source.lower()
    settings = ds.get("settings") or {}
    found = (settings.get("better") or {}).get(measure) if isinstance(settings, dict) else None
    if isinstance(found, str) and found.lower() in ("higher", "lower"):
        return found.lower()
    return None


def _value_unit(measure: str) -> str:
    """Return the unit to print after a value: '%' stays '%', 'g' stays 'g'."""
    unit = measure_unit(measure)
    return "%" if unit == "percentage points" else unit


def _with_unit(text: str, unit: str) -> str:
    if not unit:
        return text
    return f"{text}{unit}" if unit == "%" else f"{text} {unit}"


def _sure(p: float | None, alpha: float, borderline: bool) -> tuple[str, str]:
    """Return (word, level) for an adjusted p-value: how sure the gap is not chance."""
    if p is None:
        return "Cannot say", "none"
    if p < alpha and borderline:
        return "Borderline", "weak"
    if p < 0.001:
        return "Very sure", "strong"
    if p < 0.01:
        return "Sure", "good"
    if p < alpha:
        return "Fairly sure", "some"
    return "Not shown", "none"


def _points(ds: dict, entry: dict, centre: str) -> tuple[GroupPoint, ...]:
    """Return each compared group's centre and interval, highest first (at most
    MINI_MAX_GROUPS: the highest and lowest halves)."""
    rows = {
        r["group"]: r
        for r in ds.get("summaries", [])
        if r["measure"] == entry["measure"] and r["group"] is not None
    }
    low_key, high_key = (
        ("ci_low", "ci_high") if centre == "mean" else ("median_ci_low", "median_ci_high")
    )
    points = []
    for g in entry.get("groups", []):
        summary = rows.get(g["group"], {})
        points.append(
            GroupPoint(
                group=g["group"],
                value=g.get(centre),
                low=summary.get(low_key),
                high=summary.get(high_key),
                n=g.get("n") or 0,
            )
        )
    points.sort(key=lambda p: -(p.value if p.value is not None else -math.inf))
    if len(points) > MINI_MAX_GROUPS:
        half = MINI_MAX_GROUPS // 2
        points = points[:half] + points[-half:]
    return tuple(points)


def _pair(entry: dict, one: str, other: str) -> dict | None:
    for p in entry.get("pairs", []):
        if {p["a"], p["b"]} == {one, other}:
            return p
    return None


def _oriented_gap(pair: dict, high: str, decimals, unit: str) -> str:
    """Return a pair's difference as ``high`` minus the other, with its interval when known:
    "8.9 s (3.5 to 14.3)"."""
    sign = 1.0 if pair.get("a") == high else -1.0
    text = _with_unit(format_value(sign * pair["difference"], decimals), unit)
    ends = sorted(sign * pair[k] for k in ("ci_low", "ci_high") if pair.get(k) is not None)
    if len(ends) == 2:
        text += f" ({format_value(ends[0], decimals)} to {format_value(ends[1], decimals)})"
    return text


def bottom_line_row(ds: dict, entry: dict, index: int) -> BottomLineRow:
    """Return the bottom-line row of one measure from its comparison entry (results shape)."""
    measure = entry["measure"]
    anchor = f"m{index}"
    centre = entry.get("centre") or "mean"
    better = _better(ds, entry, measure)
    top_word, bottom_word = ("Best", "Worst") if better else ("Highest", "Lowest")
    decimals = measure_decimals(entry)
    unit = _value_unit(measure)
    gap_unit = measure_unit(measure)
    alpha = entry.get("alpha", 0.05)
    points = _points(ds, entry, centre)
    if entry.get("lead_test") is None:
        reason = entry.get("reason") or "too few values"
        return BottomLineRow(
            measure=measure, anchor=anchor, compared=False, differ=False,
            verdict="Not compared", centre=centre, top_word=top_word, bottom_word=bottom_word,
            top=None, top_text="—", bottom=None, bottom_text="—", gap_text="—",
            gap_parts=None, sure="Cannot say", sure_level="none", sure_note=reason,
            sure_short="", x_note=None,
            reason=reason, points=points,
            headline=f"{measure}: not compared ({reason}).",
        )  # fmt: skip
    lead = next((o for o in entry["omnibus"] if o["test"] == entry["lead_test"]), None)
    differ = bool(lead and lead.get("p") is not None and lead["p"] < alpha)
    ranked = [g for g in entry.get("groups", []) if g.get(centre) is not None]
    ranked.sort(key=lambda g: -g[centre])
    reference = entry.get("reference")
    top_group, bottom_group = (ranked[0], ranked[-1]) if ranked else (None, None)
    if reference is not None and any(g["group"] == reference for g in ranked):
        # Each group was compared with the reference only: the gap that matters is the
        # largest one from the reference, and the percentage is of the reference.
        base = next(g for g in ranked if g["group"] == reference)
        others = [g for g in ranked if g["group"] != reference] or [base]
        far = max(others, key=lambda g: abs(g[centre] - base[centre]))
        high, low = (far, base) if far[centre] >= base[centre] else (base, far)
        baseline, other = base, far
    else:
        high, low = top_group, bottom_group
        baseline, other = low, high
    if better == "lower":
        best, worst = bottom_group, top_group
    else:
        best, worst = top_group, bottom_group
    gap = (high[centre] - low[centre]) if high and low else None
    pair = _pair(entry, high["group"], low["group"]) if high and low and high is not low else None
    p_adj = pair.get("p_adjusted") if pair else (lead.get("p") if lead else None)
    borderline = bool(pair and pair.get("disagree"))
    sure, level = _sure(p_adj, alpha, borderline)
    if pair and pair.get("conclusion") == "equivalent":
        sure, level = "Practically the same", "good"
    how = "by " + centre
    sure_note = (
        f"{high['group']} against {low['group']}: adjusted {p_phrase(p_adj)}"
        if pair
        else (f"main test {p_phrase(p_adj)}" if p_adj is not None else "no test")
    )
    if borderline:
        sure_note += "; the tests disagree"
    gap_text, gap_parts = "—", None
    if gap is not None:
        amount = _with_unit(format_value(gap, decimals), gap_unit)
        side = "above" if other is high else "below"
        if other is baseline:
            relative = ""
        elif reference is not None:
            relative = f"{other['group']} {side} {baseline['group']}"
        else:
            relative = f"{other['group']} {side} {baseline['group']}"
        base_value = baseline[centre]
        if (
            relative
            and base_value is not None
            and base_value > 0
            and gap_unit != "percentage points"
        ):
            relative += f" by {100 * gap / base_value:.0f} %"
        gap_parts = (amount, relative)
        gap_text = f"{amount} ({relative})" if relative else amount
    sure_short = f"adjusted {p_phrase(p_adj)}" if p_adj is not None else ""
    x_note = None
    balance = entry.get("x_balance")
    if balance and balance.get("differs"):
        x_note = (
            f"The groups also differ in {balance['x']}; part of this gap may come from it, "
            "not from the groups."
        )
    adjusted = entry.get("adjusted")
    if isinstance(adjusted, dict) and isinstance(adjusted.get("sentence"), str):
        x_note = adjusted["sentence"]  # the adjusted comparison says it better when present
    at_equal_x = ""
    gap_at_equal_x = None
    equal_x = next((a for a in ds.get("adjusted") or [] if a.get("measure") == measure), None)
    if equal_x and (equal_x.get("differs_in_x") or equal_x.get("leads")):
        x_note = equal_x.get("headline") or x_note  # the gap at equal x
    if equal_x and equal_x.get("leads") and equal_x.get("group_p") is not None and high and low:
        # The comparison at equal x leads (the groups differ in x, or x accounts for much of
        # the variation within groups): whether the groups differ, and how sure, come from
        # it, not from the raw gap, part of which x may explain.
        x = equal_x.get("x")
        at_equal_x = f" at equal {x}"
        differ = equal_x["group_p"] < alpha
        named = {high["group"], low["group"]}
        pair_x = next(
            (q for q in equal_x.get("pairs") or [] if {q.get("a"), q.get("b")} == named), None
        )
        p_x = pair_x.get("p_adjusted") if pair_x else equal_x["group_p"]
        sure, level = _sure(p_x, alpha, False)
        if pair_x:
            sure_note = (
                f"{high['group']} against {low['group']}{at_equal_x}: adjusted {p_phrase(p_x)}"
            )
        else:
            sure_note = f"the groups{at_equal_x}: {p_phrase(p_x)}"
        sure_short = f"{at_equal_x.strip()}: adjusted {p_phrase(p_x)}" if p_x is not None else ""
        if pair_x and pair_x.get("difference") is not None:
            gap_at_equal_x = _oriented_gap(pair_x, high["group"], decimals, gap_unit) + at_equal_x
    verdict = ("The groups differ" if differ else "No clear difference shown") + at_equal_x
    top_text = f"{best['group']} {_with_unit(format_value(best[centre], decimals), unit)}"
    bottom_text = f"{worst['group']} {_with_unit(format_value(worst[centre], decimals), unit)}"
    if differ:
        headline = (
            f"{measure}: {top_word.lower()} {how} is {best['group']}, "
            f"{bottom_word.lower()} {worst['group']}; gap {gap_text}. {sure}."
        )
    elif at_equal_x:
        headline = (
            f"{measure}: no clear difference between the groups{at_equal_x} "
            f"(the raw gap, {gap_text} {how}, may come from {x})."
        )
    else:
        headline = (
            f"{measure}: no clear difference between the groups shown "
            f"(gap {gap_text} {how}, could be chance)."
        )
    return BottomLineRow(
        measure=measure, anchor=anchor, compared=True, differ=differ, verdict=verdict,
        centre=centre, top_word=top_word, bottom_word=bottom_word, top=best["group"],
        top_text=top_text, bottom=worst["group"], bottom_text=bottom_text, gap_text=gap_text,
        gap_parts=gap_parts, sure=sure, sure_level=level, sure_note=sure_note, sure_short=sure_short, x_note=x_note, reason=None,
        points=points, headline=headline, at_equal_x=at_equal_x, gap_at_equal_x=gap_at_equal_x,
    )  # fmt: skip


def bottom_line(ds: dict) -> list[BottomLineRow]:
    """Return one bottom-line row per measure of a dataset, in the measures' order."""
    entries = {c["measure"]: c for c in ds.get("comparisons", [])}
    out = []
    for i, measure in enumerate(ds.get("measures", [])):
        entry = entries.get(measure)
        if entry is None:
            entry = {"measure": measure, "lead_test": None, "reason": "no comparison", "groups": []}
        out.append(bottom_line_row(ds, entry, i))
    return out


def specific_findings(entry: dict) -> list[str]:
    """Return a measure's findings without the general cautions (the page states those once)."""
    general = set(CAUTIONS)
    return [s for s in entry.get("findings", []) if s not in general]


def tests_on_page(ds: dict) -> int:
    """Return how many tests a dataset page reports: overall, pairwise and correlation tests."""
    count = 0
    for c in ds.get("comparisons", []):
        count += len(c.get("omnibus", [])) and 1
        count += len(c.get("pairs", []))
    count += len(ds.get("correlations", []) or [])
    return count


def cautions(ds: dict, site) -> list[Caution]:
    """Return the general cautions that apply to one dataset page, each stated once."""
    out = [
        Caution(
            "observational",
            "Groups are compared as found. Unless they were formed by random assignment, a gap "
            "between them shows an association, not that the group causes it: something else "
            "that differs between the groups may be behind it.",
        )
    ]
    comparisons = ds.get("comparisons", [])
    unclear = any(
        p.get("conclusion") in ("no clear difference", "inconclusive")
        for c in comparisons
        for p in c.get("pairs", [])
    ) or any(not r.differ for r in bottom_line(ds))
    if unclear:
        out.append(
            Caution(
                "not-same",
                "“Not shown” is not “the same”: a real gap can hide in too little data. Only an "
                "equivalence check against a stated margin shows groups to be practically alike.",
            )
        )
    tests = tests_on_page(ds)
    if tests > 1:
        from ..stats.multiplicity import METHOD_NAMES

        adjust = METHOD_NAMES.get(site.adjust, site.adjust)
        out.append(
            Caution(
                "many-tests",
                f"This page reports {tests:,} tests, so a few may flag by chance. p-values are "
                f"adjusted ({adjust}) within each measure's comparisons and within each "
                "correlation table, not across the whole page.",
            )
        )
    sizes = [(g["n"], g["group"]) for g in _first_groups(ds)]
    small = [s for s in sizes if s[0] < SMALL_GROUP]
    if small:
        n, group = min(small)
        out.append(
            Caution(
                "small-groups",
                f"{len(small)} group{'s are' if len(small) != 1 else ' is'} small (fewest: "
                f"{group}, {n} values): intervals are wide and a few values can move them.",
            )
        )
    src = ds.get("source", {})
    if src.get("rows_dropped") or src.get("unparsed"):
        out.append(
            Caution(
                "data-left-out",
                "Some data were not used (the line just below says how much); results are only as good "
                "as the data behind them.",
            )
        )
    out.append(
        Caution(
            "decision",
            "These figures inform a decision; the people responsible for it make it.",
        )
    )
    return out


def _first_groups(ds: dict) -> list[dict]:
    comparisons = ds.get("comparisons", [])
    if comparisons:
        return list(comparisons[0].get("groups", []))
    return [r for r in ds.get("summaries", []) if r["group"] is not None]


@dataclass(frozen=True)
class DataUse:
    """Returned per dataset: how much of the data was used, in one line, and the details."""

    rows_read: int
    rows_used: int
    share_used: float | None
    unreadable: int  # values that could not be read as numbers, over all columns
    material: bool  # worth a warning rather than a quiet line
    line: str
    reasons: tuple[tuple[str, int], ...]  # (why, rows)


def data_use(ds: dict) -> DataUse:
    """Return the data-use line of a dataset: share of rows used, unreadable values."""
    src = ds.get("source", {})
    read = int(src.get("rows_read") or 0)
    used = int(src.get("rows_used") or 0)
    share = used / read if read else None
    unreadable = sum(int(p.get("count") or 0) for p in (src.get("unparsed") or {}).values())
    worst_column = max(
        ((p.get("count") or 0) for p in (src.get("unparsed") or {}).values()), default=0
    )
    material = bool(
        (share is not None and share < 1 - MATERIAL_LOSS)
        or (used and worst_column / used > MATERIAL_LOSS)
        or src.get("warnings")
    )
    if share is None:
        line = "No rows were read."
    else:
        shown = f"{100 * share:.1f}".rstrip("0").rstrip(".") if share < 1 else "100"
        if share < 1 and shown == "100":
            shown = "99.9"
        line = f"{shown} % of rows used ({used:,} of {read:,})"
        if unreadable:
            line += f"; {unreadable:,} value{'s' if unreadable != 1 else ''} could not be read"
        line += "."
    reasons = tuple(sorted((src.get("drop_reasons") or {}).items()))
    return DataUse(read, used, share, unreadable, material, line, reasons)
