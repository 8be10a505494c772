"""Plain-language findings for the questions practitioners ask beside the raw comparison: which
group is better at equal x, how the groups sit against their spec limits, and how they trend
over time. Written from the results only (JSON-ready dicts), like :mod:`.findings`.
"""

from __future__ import annotations

from .findings import format_num, format_value, measure_decimals, measure_unit, p_phrase

MAX_PAIRS_TOLD = 4  # pairs described in sentences; the table holds every pair

ADJUST_CAUTION = (
    "A comparison at equal {x} allows only for {x} as measured, and only in the form fitted; "
    "other differences between the groups remain and may explain a gap at equal {x}."
)


def direction_word(difference: float, better: str | None) -> str:
    """Return how a positive or negative difference reads: higher/lower, or better/worse when
    the measure has a direction (``better`` is "lower" or "higher").

    Examples
    --------
    >>> direction_word(3.0, None), direction_word(3.0, "lower"), direction_word(-1.0, "lower")
    ('higher', 'worse', 'better')
    """
    up = difference > 0
    if better is None:
        return "higher" if up else "lower"
    return "better" if up == (better == "higher") else "worse"


def _q(name: str) -> str:
    return f"'{name}'"


def _gap(value: float, decimals, unit: str) -> str:
    return format_value(abs(value), decimals) + (f" {unit}" if unit else "")


def _interval(low, high, flip: bool, decimals, confidence: float) -> str:
    if low is None or high is None:
        return ""
    if flip:
        low, high = -high, -low
    return f"{confidence:.0%} CI {format_value(low, decimals)} to {format_value(high, decimals)}"


def _told_pairs(pairs: list[dict]) -> list[dict]:
    """The pairs worth a sentence, at most MAX_PAIRS_TOLD: the largest raw gap, the pairs
    whose verdict changes at equal x (strongest evidence first), then the next raw gaps."""
    usable = [p for p in pairs if p.get("difference") is not None]
    changed = sorted(
        (
            p
            for p in usable
            if p.get("raw_significant") is not None and p["raw_significant"] != p["significant"]
        ),
        key=lambda p: p["p_adjusted"] if p.get("p_adjusted") is not None else 1.0,
    )
    by_raw = sorted(usable, key=lambda p: -abs(p.get("raw_difference") or 0.0))
    out: list[dict] = []
    for p in by_raw[:1] + changed + by_raw[1:]:
        if p not in out:
            out.append(p)
    return out[:MAX_PAIRS_TOLD]


def _flipped(p: dict) -> dict:
    """The same pair told the other way round (b minus a)."""
    out = {**p, "a": p["b"], "b": p["a"], "difference": -p["difference"]}
    out["ci_low"], out["ci_high"] = (
        (-p["ci_high"], -p["ci_low"]) if p.get("ci_low") is not None else (None, None)
    )
    if p.get("raw_difference") is not None:
        out["raw_difference"] = -p["raw_difference"]
    return out


def _pair_sentence(p: dict, entry: dict, decimals, unit: str) -> str:
    if p["difference"] < 0:  # told from the group that is higher at equal x
        p = _flipped(p)
    x = entry["x"]
    better = entry.get("better")
    diff, raw = p["difference"], p.get("raw_difference")
    flip = diff < 0
    word = direction_word(diff, better)
    interval = _interval(p["ci_low"], p["ci_high"], flip, decimals, entry["confidence"])
    text = (
        f"At equal {_q(x)}, {_q(p['a'])} is {word} than {_q(p['b'])} by "
        f"{_gap(diff, decimals, unit)} ({interval}; adjusted {p_phrase(p['p_adjusted'])})"
    )
    if raw is not None and raw != 0:
        text += f"; the raw gap is {_gap(raw, decimals, unit)}"
        share = p.get("x_accounts_for")
        if (raw > 0) != (diff > 0):
            text += f", so at equal {_q(x)} the order of the two reverses"
        elif share is not None and 0 < share <= 1:
            text += f", of which differences in {_q(x)} account for {share:.0%}"
        elif share is not None and share < 0:
            text += f", so at equal {_q(x)} the gap is wider than the raw one"
    verdict = ""
    if p.get("raw_significant") is not None and p["raw_significant"] != p["significant"]:
        verdict = (
            " Unlike the raw comparison, this difference is significant after adjustment."
            if p["significant"]
            else " Unlike the raw comparison, this difference is not significant once "
            f"{_q(x)} is allowed for."
        )
    return text + "." + verdict


def _ranking(entry: dict, decimals, unit: str) -> str:
    rows = [g for g in entry["groups"] if g.get("adjusted") is not None]
    if len(rows) < 2:
        return ""
    rows = sorted(rows, key=lambda g: -g["adjusted"])
    top, bottom = rows[0], rows[-1]
    better = entry.get("better")
    x = entry["x"]
    where = (
        f"At {_q(x)} = {format_num(entry.get('x_mean'))} (its overall mean)"
        if entry.get("model") != "curve"
        else f"Over the {_q(x)} values of all rows together"
    )

    def shown(g):
        return f"{_q(g['group'])} ({format_value(g['adjusted'], decimals)}{' ' + unit if unit else ''})"

    if better is None:
        return f"{where}, highest: {shown(top)}; lowest: {shown(bottom)}."
    best, worst = (top, bottom) if better == "higher" else (bottom, top)
    return f"{where}, best ({better} is better): {shown(best)}; worst: {shown(worst)}."


def adjusted_findings(entry: dict) -> list[str]:
    """Return the findings sentences of one measure's comparison at equal x (results shape).

    Examples
    --------
    >>> adjusted_findings({"measure": "m", "x": "t", "reason": "too few rows", "groups": []})
    ["'m' could not be compared at equal 't': too few rows."]
    """
    measure, x = entry["measure"], entry["x"]
    if entry.get("reason"):
        return [f"{_q(measure)} could not be compared at equal {_q(x)}: {entry['reason']}."]
    decimals = measure_decimals(entry)
    unit = measure_unit(measure)
    out: list[str] = []
    for p in _told_pairs(entry.get("pairs", [])):
        out.append(_pair_sentence(p, entry, decimals, unit))
    if len(entry.get("pairs", [])) > MAX_PAIRS_TOLD:
        out.append(f"The other {len(entry['pairs']) - MAX_PAIRS_TOLD} pairs are in the table.")
    ranking = _ranking(entry, decimals, unit)
    if ranking:
        out.append(ranking)
    if entry.get("leads"):
        out.append(f"This comparison leads because {entry['lead_reason']}.")
    else:
        out.append(
            f"The raw comparison leads: the groups do not clearly differ in {_q(x)}, and "
            f"{_q(x)} accounts for little of the variation within groups; this comparison is "
            "a check beside it."
        )
    within, resid, share = entry.get("within_sd"), entry.get("residual_sd"), entry.get("x_share")
    if within is not None and resid is not None and share is not None:
        out.append(
            f"Allowing for {_q(x)}, the spread within groups falls from an SD of "
            f"{format_value(within, decimals)} to {format_value(resid, decimals)}"
            f"{' ' + unit if unit else ''} ({_q(x)} accounts for {share:.0%} of the variation "
            "within groups)."
        )
    verdict = (
        "differ"
        if entry.get("group_p") is not None and entry["group_p"] < entry["alpha"]
        else "do not clearly differ"
    )
    out.append(
        f"Overall, at equal {_q(x)} the groups {verdict} (F = {format_num(entry.get('group_f'))} "
        f"on {entry['group_df1']} and {entry['group_df2']} degrees of freedom, "
        f"{p_phrase(entry.get('group_p'))})."
    )
    slopes = entry.get("slopes") or {}
    if slopes.get("differ"):
        own = ", ".join(
            f"{_q(g['group'])} {format_num(g['slope'])}"
            for g in entry["groups"]
            if g.get("slope") is not None
        )
        out.append(
            f"The groups' slopes against {_q(x)} differ (F = {format_num(slopes['statistic'])}, "
            f"{p_phrase(slopes['p'])}), so a gap at equal {_q(x)} depends on where {_q(x)} is: "
            f"read the gaps above as at {_q(x)} = {format_num(entry.get('x_mean'))} only. Each "
            f"group's own slope per unit of {_q(x)}: {own}."
        )
    if not entry.get("overlap", True):
        out.append(
            f"The groups' ranges of {_q(x)} do not all overlap, so some comparisons at equal "
            f"{_q(x)} extrapolate beyond the data; treat them with caution."
        )
    outside = [g["group"] for g in entry["groups"] if g.get("extrapolated")]
    if outside:
        names = ", ".join(_q(g) for g in outside)
        out.append(
            f"{_q(x)} = {format_num(entry.get('x_mean'))} lies outside the values observed in "
            f"{names}, so {'its' if len(outside) == 1 else 'their'} mean at equal {_q(x)} is an "
            "extrapolation."
        )
    if entry.get("model") == "curve":
        out.append(
            f"{_q(measure)} follows a curve against {_q(x)}, so the adjustment uses a curve "
            f"(a quadratic in {_q(x)}) shared by all groups rather than a straight line; it is "
            "still only an approximation of the real relationship."
        )
    elif entry.get("approximate"):
        out.append(
            f"{_q(measure)} follows a curve against {_q(x)}, so this straight-line adjustment "
            "is approximate (on data read in batches only the straight line is computed from "
            "every row)."
        )
    out.append(ADJUST_CAUTION.format(x=_q(x)))
    return out


def adjusted_headline(entry: dict) -> str | None:
    """Return one sentence for the overview: the largest raw gap and the same gap at equal x,
    with the groups' means of x (None when there is nothing to compare).

    Examples
    --------
    >>> e = {"x": "lines", "measure": "time [s]", "confidence": 0.95, "better": "lower",
    ...      "groups": [{"group": "a", "mean_x": 3.6}, {"group": "b", "mean_x": 5.1}],
    ...      "pairs": [{"a": "a", "b": "b", "raw_difference": -37.5, "difference": -8.9,
    ...                 "ci_low": -14.3, "ci_high": -3.5}]}
    >>> adjusted_headline(e)
    "At equal 'lines': 'b' worse than 'a' by 8.9 s (95% CI 3.5 to 14.3), against 37.5 s raw; 'b' has higher 'lines' (5.1 against 3.6)."
    """
    pairs = [
        p
        for p in entry.get("pairs", [])
        if p.get("raw_difference") is not None and p.get("difference") is not None
    ]
    if not pairs:
        return None
    p = max(pairs, key=lambda p: abs(p["raw_difference"]))
    if p["raw_difference"] < 0:
        p = _flipped(p)
    decimals = measure_decimals(entry)
    unit = measure_unit(entry["measure"])
    x = entry["x"]
    mean_x = {g["group"]: g.get("mean_x") for g in entry["groups"]}
    xa, xb = mean_x.get(p["a"]), mean_x.get(p["b"])
    diff = p["difference"]
    # Told from the group that is higher at equal x; the raw gap is the a − b of the pair.
    first, second = (p["a"], p["b"]) if diff >= 0 else (p["b"], p["a"])
    word = direction_word(abs(diff), entry.get("better"))
    interval = _interval(p["ci_low"], p["ci_high"], diff < 0, decimals, entry["confidence"])
    text = (
        f"At equal {_q(x)}: {_q(first)} {word} than {_q(second)} by "
        f"{_gap(diff, decimals, unit)} ({interval}), against "
        f"{_gap(p['raw_difference'], decimals, unit)} raw"
    )
    if xa is not None and xb is not None and xa != xb:
        name, top, bottom = (p["a"], xa, xb) if xa > xb else (p["b"], xb, xa)
        text += f"; {_q(name)} has higher {_q(x)} ({format_num(top)} against {format_num(bottom)})"
    return text + "."
