"""Plain-language findings for one measure, written from the comparison results only.

Sentences are short and concrete: what was compared, what differs after adjustment and by
how much, what is equivalent within the stated margin, what could not be settled and why,
and the cautions every reader of group comparisons needs. Size words for effects are rules
of thumb (common practice), and the sentences say so.
"""

from __future__ import annotations

import math
import re

MAX_LISTED = 6
SKEW_NOTE = 1.0  # |G1| beyond which the median is named beside the mean (common practice)
MAX_UNSURE = 2
# What happens to a mean's interval when the values are skewed, even in groups of 30 or more:
# Student-t intervals cover less often than stated. The figures come from a seeded simulation
# of lognormal (sigma = 1) samples, rerun in tests/test_findings.py.
SKEWED_MEAN_CAUTION = (
    "With these group sizes the tests of means hold up reasonably, but the intervals for the "
    "means of skewed groups are too narrow (in a simulation of lognormal values, a 95% "
    "interval covered the true mean only about 88% of the time with 30 values and 90% with "
    "50); "
)
MAX_GROUPS_NAMED = 12

LEFT_OUT_LISTED = 10  # groups named one by one in a measure's findings; the rest are counted
CAUTIONS = (
    "Unless the groups were formed by random assignment, a difference between them shows an "
    "association, not that belonging to a group causes it; other differences between the "
    "groups may explain it.",
    "A result that is not significant does not show that groups are the same; only an "
    "equivalence check against a stated margin can support that.",
    "Running many tests raises the chance of a false alarm; the adjusted p-values allow for "
    "this, at the price of missing some small real differences.",
    "Results are only as good as the data: check the rows dropped and the values that could "
    "not be read, listed on this page.",
    "These figures inform a decision; the decision stays with the people responsible for it.",
)


def format_p(p: float | None) -> str:
    """Return a p-value as text: '< 0.001' below 0.001, else 3 significant digits.

    Examples
    --------
    >>> format_p(0.00002), format_p(0.04321)
    ('< 0.001', '0.0432')
    """
    if p is None or not math.isfinite(p):
        return "not available"
    if p < 0.001:
        return "< 0.001"
    return f"{p:.3g}"


def format_num(x: float | None) -> str:
    """Return a number with 3 significant digits, in fixed notation for everyday sizes.

    Examples
    --------
    >>> format_num(1234.5678), format_num(-0.000123456), format_num(0.5)
    ('1,235', '-0.000123', '0.5')
    """
    if x is None or not math.isfinite(x):
        return "not available"
    if x == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(x)))
    if magnitude >= 15 or magnitude < -6:
        return f"{x:.3g}"
    if magnitude >= 2:
        return f"{x:,.0f}"
    return f"{x:,.{2 - magnitude}f}".rstrip("0").rstrip(".")


def measure_decimals(entry: dict) -> int | None:
    """Return the decimals for values of one measure: two significant digits of the typical
    group's standard error (SD / √n), one digit more than the precision the data give.

    Values in the measure's units (means, medians, differences, intervals, margins) are all
    printed with this many decimals, so a measure near 10,000,000 with SD 0.1 reads
    10,000,000.464 rather than 1e+07, and one column never mixes 66.01 with 56.8.

    Examples
    --------
    >>> measure_decimals({"groups": [{"sd": 20.3, "n": 96}, {"sd": 18.0, "n": 80}]})
    1
    """
    errors = sorted(
        g["sd"] / math.sqrt(g["n"]) if g.get("n") else g["sd"]
        for g in entry.get("groups", [])
        if g.get("sd") is not None and g["sd"] > 0
    )
    if not errors:
        return None
    typical = errors[len(errors) // 2]
    return min(10, max(0, 1 - math.floor(math.log10(typical))))


def format_value(x: float | None, decimals: int | None) -> str:
    """Return a value in the measure's units with ``decimals`` fixed decimals (see
    :func:`measure_decimals`), or 3 significant digits when the decimals are unknown.

    Examples
    --------
    >>> format_value(10000000.12345, 3), format_value(22.0, 1)
    ('10,000,000.123', '22.0')
    """
    if decimals is None or x is None or not math.isfinite(x) or abs(x) >= 1e15:
        return format_num(x)
    return f"{x:,.{decimals}f}"


def p_phrase(p: float | None) -> str:
    """Return 'p < 0.001' or 'p = 0.0432'.

    Examples
    --------
    >>> p_phrase(0.5)
    'p = 0.5'
    """
    text = format_p(p)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


def _label_note(label: str | None) -> str:
    return f", {label} by common rules of thumb" if label else ""


def _pair_name(r: dict) -> str:
    return f"'{r['a']}' and '{r['b']}'"


def measure_unit(measure: str) -> str:
    """Return the unit a measure's name ends with, as it should follow a difference: "g" for
    "leaf mass (g)", "percentage points" for "germinated (%)"; "" when there is none.

    Examples
    --------
    >>> measure_unit("leaf mass (g)"), measure_unit("germinated (%)"), measure_unit("score")
    ('g', 'percentage points', '')
    >>> measure_unit("taste score (1–5)")
    ''
    """
    match = re.search(r"[(\[]\s*([^()\[\]]{1,12}?)\s*[)\]]\s*$", measure)
    if not match:
        return ""
    unit = match.group(1)
    if not re.search(r"[^\d\s.,+\-–—]", unit):
        return ""  # "value[0]" is an index and "score (1–5)" a scale range, not units
    return "percentage points" if unit == "%" else unit


def _difference_sentence(
    r: dict,
    confidence: float,
    decimals: int | None,
    unit: str = "",
    sds: dict | None = None,
    better: str | None = None,
) -> str:
    est, lo, hi = r.get("estimate"), r.get("ci_low"), r.get("ci_high")
    higher = (est or 0) > 0
    word = "higher" if higher else "lower"
    if better:  # the manifest says which way is good: better/worse instead of higher/lower
        word = "better" if higher == (better == "higher") else "worse"
    # The interval is of a − b; said as "lower by", it is shown as the size of the gap.
    if lo is not None and hi is not None and not higher:
        lo, hi = -hi, -lo
    how = (
        "as a typical shift (Hodges–Lehmann: the median of all differences between a value "
        "of one group and a value of the other)"
        if r.get("estimate_name", "").startswith("Hodges")
        else "on average"
    )
    interval = (
        f" ({confidence:.0%} CI {format_value(lo, decimals)} to {format_value(hi, decimals)})"
        if lo is not None and hi is not None
        else ""
    )
    effect = r.get("effect")
    eff = (
        f"; {r['effect_name']} = {format_num(effect)}{_label_note(r.get('effect_label'))}"
        if effect is not None
        else ""
    )
    margin = r.get("margin")
    small = ""
    if margin is not None and lo is not None and hi is not None:
        if max(abs(lo), abs(hi)) < margin:
            small = (
                f" The whole interval lies within the ±{format_value(margin, decimals)} agreed "
                "not to matter in practice: a real but small difference."
            )
        elif abs(est or 0) < margin:
            small = (
                f" The estimate is within the ±{format_value(margin, decimals)} agreed not to "
                "matter in practice, but the interval reaches beyond it."
            )
    sd_a, sd_b = (sds or {}).get(r["a"]), (sds or {}).get(r["b"])
    if (
        r.get("effect_name") == "Hedges' g"
        and sd_a
        and sd_b
        and max(sd_a, sd_b) > 2 * min(sd_a, sd_b)
    ):
        small += (
            f" With spreads this unequal (SDs {format_value(sd_a, decimals)} and "
            f"{format_value(sd_b, decimals)}), Hedges' g, which pools them, is hard to read; "
            "the difference and its interval say more."
        )
    return (
        f"'{r['a']}' is {word} than '{r['b']}' by {format_value(abs(est or 0), decimals)}"
        f"{' ' + unit if unit else ''} {how}"
        f"{interval}{eff} (adjusted {p_phrase(r.get('p_adjusted'))}).{small}"
    )


def measure_findings(entry: dict, settings) -> list[str]:
    """Return the findings sentences for one measure's comparison entry (results.json shape).

    Examples
    --------
    >>> e = {"measure": "m", "lead_test": None, "reason": "no groups", "not_comparable": []}
    >>> measure_findings(e, None)[0]
    "'m' could not be compared between groups: no groups."
    """
    out: list[str] = []
    measure = entry["measure"]
    decimals = measure_decimals(entry)
    left_out = entry.get("not_comparable", [])
    for e in left_out[:LEFT_OUT_LISTED]:
        out.append(
            f"Group '{e['group']}' is left out of the comparisons of '{measure}': {e['reason']}."
            + _constant_placement(e, entry.get("groups", []), decimals)
        )
    if len(left_out) > LEFT_OUT_LISTED:
        more = len(left_out) - LEFT_OUT_LISTED
        out.append(
            f"{more:,} more group{'s are' if more != 1 else ' is'} left out of the comparisons "
            f"of '{measure}' for the same kinds of reason; results.json lists each one."
        )
    if entry.get("lead_test") is None:
        out.insert(0, f"'{measure}' could not be compared between groups: {entry['reason']}.")
        out.extend(CAUTIONS[3:])
        return out
    alpha = entry["alpha"]
    confidence = entry["confidence"]
    out.extend(entry.get("notes", []))

    # Ordering of groups by the summary the lead test works with.
    centre = entry.get("centre", "mean")
    rows = sorted(entry["groups"], key=lambda r: -(r[centre] or 0.0))
    unit = measure_unit(measure)
    sds = {g["group"]: g.get("sd") for g in entry.get("groups", [])}
    named = ", ".join(
        f"'{r['group']}' ({format_value(r[centre], decimals)})" for r in rows[:MAX_GROUPS_NAMED]
    )
    more = f", and {len(rows) - MAX_GROUPS_NAMED} more" if len(rows) > MAX_GROUPS_NAMED else ""
    out.append(f"By {centre}, highest first: {named}{more}.")
    # The bottom line names the best and worst group; the sentences below say better/worse.
    better = entry.get("better")
    # The comparisons section marks a group strongly skewed only beyond sampling noise; rows
    # without that mark (older results) fall back to the plain common-practice limit.
    skewed = [
        r
        for r in rows
        if r.get("skewness") is not None
        and r.get("strongly_skewed", abs(r["skewness"]) > SKEW_NOTE)
    ]
    if centre == "mean" and skewed:
        worst = max(skewed, key=lambda r: abs(r["skewness"]))
        medians = ", ".join(
            f"'{r['group']}' ({format_value(r['median'], decimals)})"
            for r in sorted(rows, key=lambda r: -(r.get("median") or 0.0))[:MAX_GROUPS_NAMED]
            if r.get("median") is not None
        )
        out.append(
            f"{_count(len(skewed), 'group is', 'groups are')} strongly skewed (up to "
            f"{format_num(worst['skewness'])} in '{worst['group']}'; beyond ±{SKEW_NOTE:g} by "
            "common practice). "
            + (
                SKEWED_MEAN_CAUTION
                if min(r["n"] for r in skewed) >= 30
                else "The mean of a small skewed group moves with a few values, and "
            )
            + f"a typical value is better described by the median: {medians}."
        )

    # Overall test and its sensitivity check.
    lead = next(o for o in entry["omnibus"] if o["test"] == entry["lead_test"])
    lead_sig = lead["p"] is not None and lead["p"] < alpha
    verdict = (
        "the groups differ overall" if lead_sig else "the data do not show an overall difference"
    )
    eff = (
        f"; {lead['effect_name']} = {format_num(lead['effect'])}"
        f"{_label_note(lead.get('effect_label'))}"
        if lead.get("effect") is not None
        else ""
    )
    out.append(f"By {lead['test']}, {verdict} ({p_phrase(lead['p'])}){eff}.")
    others = [o for o in entry["omnibus"] if o is not lead and o["p"] is not None]
    unequal = _unequal_spread(entry)
    if unequal:
        # The spreads differ: the equal-spread ANOVA is not a fair check, whichever test leads.
        set_aside = [o for o in others if o["test"] == EQUAL_SPREAD_TEST]
        others = [o for o in others if o["test"] != EQUAL_SPREAD_TEST]
        if set_aside and (set_aside[0]["p"] < alpha) != lead_sig:
            out.append(
                f"The one-way ANOVA ({p_phrase(set_aside[0]['p'])}) reaches the other verdict, "
                "but it assumes equal spread, which these groups do not have; it is not used "
                "as a check here."
            )
    disagree = [o for o in others if (o["p"] < alpha) != lead_sig]
    if disagree:
        names = " and ".join(f"{o['test']} ({p_phrase(o['p'])})" for o in disagree)
        out.append(
            f"The sensitivity check does not agree: {names} "
            f"{'reaches' if len(disagree) == 1 else 'reach'} the other verdict at "
            f"alpha = {alpha:g}. Treat the overall result as borderline and look at the "
            "distributions."
        )

    pairs = entry.get("pairs", [])
    family = entry.get("family") or {}
    if pairs:
        differ = sorted(
            (r for r in pairs if r["significant"]), key=lambda r: -abs(r.get("effect") or 0.0)
        )
        adjust_name = family.get("adjust_name", "")
        if len(pairs) == 1:
            # One comparison: nothing to adjust, and "1 of 1" reads oddly.
            out.append(
                f"Comparing {family.get('description')}: "
                + ("they differ." if differ else f"no clear difference at alpha = {alpha:g}.")
            )
            out.extend(
                _difference_sentence(r, confidence, decimals, unit, sds, better) for r in differ
            )
        elif differ:
            out.append(
                f"Comparing {family.get('description')}, with p-values adjusted by "
                f"{adjust_name}: {len(differ)} of {len(pairs)} "
                f"{'comparison shows' if len(pairs) == 1 else 'comparisons show'} a difference."
            )
            for r in differ[:MAX_LISTED]:
                out.append(_difference_sentence(r, confidence, decimals, unit, sds, better))
            if len(differ) > MAX_LISTED:
                out.append(f"{len(differ) - MAX_LISTED} more differences are listed in the table.")
        else:
            out.append(
                f"Comparing {family.get('description')}, with p-values adjusted by "
                f"{adjust_name}: no comparison shows a difference at alpha = {alpha:g}."
            )
        equivalent = [r for r in pairs if r.get("equivalent")]
        for r in equivalent[:MAX_LISTED]:
            out.append(
                f"{_pair_name(r)} are equivalent within ±{format_value(r['margin'], decimals)}: the two "
                f"one-sided tests on the difference in means (adjusted "
                f"{p_phrase(r.get('tost_p_adjusted'))}) rule out a difference larger than the margin."
            )
        if len(equivalent) > MAX_LISTED:
            out.append(f"{len(equivalent) - MAX_LISTED} more equivalent pairs are in the table.")
        unsure = [r for r in pairs if r["conclusion"] == "inconclusive"]
        for r in unsure[:MAX_UNSURE]:
            margin = (
                f"neither a difference nor equivalence within "
                f"±{format_value(r['margin'], decimals)} could be shown"
                if r.get("margin") is not None
                else "no difference could be shown"
            )
            raw_tost = r.get("tost_p")
            if raw_tost is not None and raw_tost < alpha:
                # Equivalent on its own; the adjustment across the family took it away.
                out.append(
                    f"{_pair_name(r)}: inconclusive — on its own this pair is equivalent within "
                    f"±{format_value(r['margin'], decimals)} ({p_phrase(raw_tost)}), but not after "
                    f"allowing for the {family.get('size')} comparisons (adjusted "
                    f"{p_phrase(r.get('tost_p_adjusted'))})."
                )
                continue
            few = min(r["n_a"], r["n_b"])
            why = (
                f"too few rows (the smaller group has {few})"
                if few < 10
                else "too much spread for the number of rows"
            )
            out.append(
                f"{_pair_name(r)}: inconclusive — {margin}, because of {why}. With these sizes "
                "and spread only a difference of about "
                f"{format_value(r['detectable_difference'], decimals)} or more would be detected "
                "reliably (80% power, before adjustment for the number of comparisons)."
            )
        if len(unsure) > MAX_UNSURE:
            rest = [r["detectable_difference"] for r in unsure[MAX_UNSURE:]]
            rest = [d for d in rest if d is not None]
            span = (
                f"; they could detect only differences of {format_value(min(rest), decimals)} "
                f"to {format_value(max(rest), decimals)} or more"
                if rest
                else ""
            )
            out.append(
                f"{len(unsure) - MAX_UNSURE} more {'pair is' if len(unsure) - MAX_UNSURE == 1 else 'pairs are'} "
                f"inconclusive{span} (see the table for each one's reason)."
            )
        plain = [r for r in pairs if r["conclusion"] == "no clear difference"]
        if plain:
            sizes = [
                r["detectable_difference"] for r in plain if r["detectable_difference"] is not None
            ]
            if not sizes:
                reach = ""
            elif len(sizes) == 1 or min(sizes) == max(sizes):
                reach = (
                    " — with these data only a difference of about "
                    f"{format_value(sizes[0], decimals)} or more would have been detected reliably"
                )
            else:
                reach = (
                    " — with these data only differences of about "
                    f"{format_value(min(sizes), decimals)} to {format_value(max(sizes), decimals)} "
                    "or more (depending on the pair) would have been detected reliably"
                )
            out.append(
                f"{_count(len(plain), 'comparison shows', 'comparisons show')} no clear "
                f"difference; that is not proof of sameness{reach} (80% power, before "
                "adjustment for the number of comparisons)."
            )
        # Tukey's HSD assumes equal spread; when the spreads differ it is no fair check.
        fair = {
            id(r): [n for n in r.get("disagree", []) if not (unequal and n == "tukey_p")]
            for r in pairs
        }
        split = [r for r in pairs if fair[id(r)]]
        for r in split[:MAX_LISTED]:
            out.append(
                f"For {_pair_name(r)} the lead test and a sensitivity test disagree "
                f"({', '.join(_test_name(n) for n in fair[id(r)])}); the difference is "
                "borderline."
            )
        if len(split) > MAX_LISTED:
            out.append(
                f"{len(split) - MAX_LISTED} more pairs with disagreeing tests are in the table."
            )
    balance = entry.get("x_balance")
    if balance and balance["differs"]:
        out.append(_x_balance_sentence(balance, measure))
    out.extend(CAUTIONS)
    return out


def _x_balance_sentence(balance: dict, measure: str) -> str:
    low, high = balance["lowest"], balance["highest"]
    return (
        f"The groups also differ in '{balance['x']}' ({balance['test']}, "
        f"{p_phrase(balance['p'])}; mean {format_num(low['mean'])} in '{low['group']}' to "
        f"{format_num(high['mean'])} in '{high['group']}'). If '{balance['x']}' affects "
        f"'{measure}', part of these differences may come from '{balance['x']}' rather than "
        "from the groups themselves."
    )


EQUAL_SPREAD_TEST = "one-way ANOVA"


def _unequal_spread(entry: dict) -> bool:
    """True when the spread check found unequal spread, whichever test leads.

    The comparisons section decides this from the Brown–Forsythe test and the SD ratio and
    records it as ``lead_basis.unequal_spread``; unbalanced sizes alone leave the equal-spread
    tests a fair check.
    """
    basis = entry.get("lead_basis") or {}
    return bool(basis.get("unequal_spread"))


def _constant_placement(excluded: dict, compared: list[dict], decimals: int | None) -> str:
    """For a group left out because all its values are equal, say where that value lies
    among the compared groups' values: the tests need variation, the reader still needs the
    plain fact (a line with no defects at all, say)."""
    value = excluded.get("value")
    lows = [g["min"] for g in compared if g.get("min") is not None]
    highs = [g["max"] for g in compared if g.get("max") is not None]
    if value is None or not lows or not highs:
        return ""
    low, high = min(lows), max(highs)
    shown = format_value(value, decimals)
    others = "the other group" if len(compared) == 1 else "the compared groups"
    if value < low:
        where = f"below every value of {others} (lowest {format_value(low, decimals)})"
    elif value > high:
        where = f"above every value of {others} (highest {format_value(high, decimals)})"
    else:
        means = sorted(g["mean"] for g in compared if g.get("mean") is not None)
        spread = (
            f"; means {format_value(means[0], decimals)} to {format_value(means[-1], decimals)}"
            if len(means) > 1
            else (f"; mean {format_value(means[0], decimals)}" if means else "")
        )
        where = (
            f"within the range of {others} ({format_value(low, decimals)} to "
            f"{format_value(high, decimals)}{spread})"
        )
    return f" Its value, {shown}, lies {where}."


def _count(n: int, one: str, many: str) -> str:
    return f"{n} {one if n == 1 else many}"


def _test_name(key: str) -> str:
    return {
        "welch_p_adjusted": "Welch's t-test",
        "mw_p_adjusted": "Mann–Whitney U",
        "tukey_p": "Tukey's HSD",
        "games_howell_p": "Games–Howell",
        "dunnett_p": "Dunnett's test",
        "permutation_p_adjusted": "permutation test",
    }.get(key, key)
